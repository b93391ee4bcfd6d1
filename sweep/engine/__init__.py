"""The engine: per-body plans, impulsive chunks on threads, finite burns in worker processes, checkpoints."""

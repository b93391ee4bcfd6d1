"""The engine's version: recorded in every cube, part of the up-to-date check."""

__version__ = "0.2.0"  # 0.2.0: finite burns aimed, trimmed, split; cubes of 0.1.0 are recomputed

"""Reports read from a cube alone: the summary and its tables, figures, drift between cubes."""

"""The engine's version: recorded in every cube, part of the up-to-date check."""

__version__ = "0.1.0"

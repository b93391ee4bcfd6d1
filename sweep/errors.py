"""Exceptions raised by capsweep. The command line catches :class:`SweepError` and exits 2."""

from __future__ import annotations

__all__ = ["CatalogError", "ConfigError", "SweepError", "Terminated"]


class SweepError(Exception):
    """Base class of every error capsweep reports to the user without a traceback."""


class ConfigError(SweepError, ValueError):
    """A configuration file, key or value is invalid; the message names all three."""


class CatalogError(SweepError, ValueError):
    """The body catalog, or a cube's body data, is inconsistent or incomplete."""


class Terminated(KeyboardInterrupt):
    """SIGTERM arrived (systemd, ``timeout``, ``kill``): raised by the command line's handler, it unwinds a run as
    Ctrl-C does (temporaries removed, lock released)."""

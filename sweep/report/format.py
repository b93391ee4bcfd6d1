"""How the summary and the figures write numbers: one formatter per kind of quantity."""

from __future__ import annotations

import numpy as np

__all__ = ["degrees", "km", "number", "ratio", "speed"]


def km(value: float) -> str:
    """An altitude or distance: '1,000 km', or '2.5 km' below ten."""
    return f"{value:,.0f} km" if value >= 10 else f"{value:g} km"


def number(value: float, _=None) -> str:
    """A tick or contour label: thousands separated, no decimals from ten up (a matplotlib formatter)."""
    return f"{value:,.0f}" if abs(value) >= 10 else f"{value:g}"


def ratio(value: float, _=None) -> str:
    """Thrust-to-weight: three significant digits, no exponent (a matplotlib formatter)."""
    return f"{value:,.0f}" if abs(value) >= 100 else f"{value:.3g}"


def degrees(values) -> str:
    """Angles as a list: '0°, 5°, 20°'."""
    return ", ".join(f"{v:g}°" for v in values)


def speed(value: float) -> str:
    """A crossover speed, or 'none' where there is none."""
    return "none" if not np.isfinite(value) else f"{value:.2f} km/s"

"""Drift between two cubes, for nightly regression checks: what was added or removed, how far
numbers moved, and where the winner changed. Reads the cubes only."""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import xarray as xr

from sweep.model.strategies import STRATEGIES
from sweep.model.variables import winner_variables

__all__ = ["Drift", "compare_cubes", "render_drift"]


@dataclass
class Drift:
    """The differences between two cubes."""

    added: list[str] = field(default_factory=list)  # variables and coordinates only in the new cube
    removed: list[str] = field(default_factory=list)  # only in the old cube
    reshaped: list[str] = field(default_factory=list)  # in both, with other dimensions or coordinates
    largest: dict[str, tuple[float, float]] = field(default_factory=dict)  # name -> (max abs, max rel) change
    nan_changes: dict[str, int] = field(default_factory=dict)  # name -> points changed to or from NaN or infinity
    nonfinite: dict[str, dict[str, int]] = field(default_factory=dict)  # name -> transition (see _TRANSITIONS) -> count
    winner_changes: dict[str, int] = field(default_factory=dict)  # winner variable -> points that changed

    def exceeds(self, tolerance: float) -> bool:
        """
        True if anything but a relative change at or below ``tolerance`` differs; a value that
        becomes or stops being NaN or infinite, or an infinity that flips sign, exceeds any tolerance.
        """
        return bool(self.added or self.removed or self.reshaped or any(self.nan_changes.values())
                    or any(self.winner_changes.values())
                    or any(relative > tolerance for _, relative in self.largest.values()))


def compare_cubes(old: xr.Dataset, new: xr.Dataset) -> Drift:
    """Compare every numeric variable and coordinate the two cubes share, point by point."""
    drift = Drift()
    names_old = set(old.variables)
    names_new = set(new.variables)
    drift.added = sorted(names_new - names_old)
    drift.removed = sorted(names_old - names_new)
    winners = set(winner_variables(STRATEGIES))  # categorical: a changed index is a changed winner, not a number
    for name in sorted(names_old & names_new):
        a, b = old[name], new[name]
        if a.dims != b.dims or a.shape != b.shape:
            drift.reshaped.append(name)
            continue
        if a.dtype.kind not in "fiu" or b.dtype.kind not in "fiu":
            if not np.array_equal(a.values, b.values):
                drift.reshaped.append(name)
            continue
        x, y = a.values.astype(float), b.values.astype(float)
        transitions = _transitions(x, y)
        drift.nonfinite[name] = transitions
        drift.nan_changes[name] = sum(transitions.values())
        both = np.isfinite(x) & np.isfinite(y)
        if name in winners:
            drift.winner_changes[name] = int((x != y)[both].sum())
            continue
        if both.any():
            with np.errstate(over="ignore"):  # finite values far apart: an infinite change, which exceeds any tolerance
                change = np.abs(y[both] - x[both])
            scale = np.maximum(np.abs(x[both]), np.abs(y[both]))
            relative = np.where(scale > 0, change / np.where(scale > 0, scale, 1.0), 0.0)
            drift.largest[name] = (float(change.max()), float(relative.max()))
    return drift


# The ways a value can change to or from NaN or infinity, each counted apart: (label, old test, new test).
_TRANSITIONS = (
    ("number -> NaN", np.isfinite, np.isnan),
    ("NaN -> number", np.isnan, np.isfinite),
    ("finite -> infinite", np.isfinite, np.isinf),
    ("infinite -> finite", np.isinf, np.isfinite),
    ("NaN -> infinite", np.isnan, np.isinf),
    ("infinite -> NaN", np.isinf, np.isnan),
)


def _transitions(x: np.ndarray, y: np.ndarray) -> dict[str, int]:
    """Points of ``x`` -> ``y`` per kind of change to or from NaN or infinity, and +inf <-> -inf; nonzero only."""
    counts = {label: int((old(x) & new(y)).sum()) for label, old, new in _TRANSITIONS}
    counts["+inf <-> -inf"] = int((np.isinf(x) & np.isinf(y) & (x != y)).sum())
    return {label: count for label, count in counts.items() if count}


def render_drift(drift: Drift, tolerance: float) -> str:
    """A short plain-text report."""
    lines = []
    for label, names in (("added", drift.added), ("removed", drift.removed), ("changed shape", drift.reshaped)):
        if names:
            lines.append(f"{label}: {', '.join(names)}")
    moved = {k: v for k, v in drift.largest.items() if v[0] > 0}
    for name, (absolute, relative) in sorted(moved.items(), key=lambda item: -item[1][1]):
        flag = "  EXCEEDS" if relative > tolerance else ""
        lines.append(f"{name}: largest change {absolute:.6g} (relative {relative:.3g}){flag}")
    for name, count in drift.nan_changes.items():
        if count:
            kinds = ", ".join(f"{label} {n}" for label, n in drift.nonfinite.get(name, {}).items())
            lines.append(f"{name}: {count} points changed to or from NaN or infinity ({kinds})  EXCEEDS")
    for name, count in drift.winner_changes.items():
        if count:
            lines.append(f"{name}: winner changed at {count} grid points")
    verdict = "drift beyond tolerance" if drift.exceeds(tolerance) else "no drift beyond tolerance"
    lines.append(f"{verdict} (relative tolerance {tolerance:g})")
    return "\n".join(lines)

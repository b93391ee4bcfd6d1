"""The universal regime map: the impulsive trade in dimensionless ratios, for every body at once.

Measured in units of the target radius :math:`r_t` and the circular speed there
:math:`v_c = \\sqrt{\\mu / r_t}`, every impulsive cost depends only on three ratios: the arrival
speed :math:`v_\\infty / v_c`, the periapsis radius :math:`r_p / r_t` and the intermediate
apoapsis :math:`r_a / r_t` (vis-viva is homogeneous: :math:`v^2 \\propto \\mu / r`). So one map
answers the question for every body; a body only decides which part of the map it can reach
(its lowest safe periapsis and the apoapsis its sphere of influence allows). The kernels are the
same as the sweep's, called with :math:`\\mu = 1` and :math:`r_t = 1`.
"""

from __future__ import annotations

from datetime import UTC, datetime

import numpy as np
import xarray as xr

from sweep.cube.conventions import CAUTION
from sweep.model.strategies import STRATEGIES, Geometry, pick_best, strategy_names
from sweep.version import __version__

__all__ = ["DEFAULT_APOAPSIS_RATIOS", "universal_costs", "universal_dataset"]

DEFAULT_APOAPSIS_RATIOS = (1.0, 3.0, 10.0, 30.0, 100.0)


def universal_costs(speed_ratio, periapsis_ratio, apoapsis_ratio) -> np.ndarray:
    """
    Total delta-v of every strategy over the circular speed at the target, shape (strategy, ...).

    Parameters
    ----------
    speed_ratio : numeric
        :math:`v_\\infty / v_c(r_t)`. [1]
    periapsis_ratio : numeric
        :math:`r_p / r_t`. [1]
    apoapsis_ratio : numeric
        :math:`r_a / r_t`; raised to :math:`\\max(r_p / r_t, 1)` where it is below. [1]
    """
    speed, periapsis, apoapsis = np.broadcast_arrays(*(np.asarray(a, dtype=float)
                                                       for a in (speed_ratio, periapsis_ratio, apoapsis_ratio)))
    apoapsis = np.maximum(apoapsis, np.maximum(periapsis, 1.0))
    geometry = Geometry(1.0, periapsis, np.ones_like(periapsis), apoapsis)
    return np.stack([np.broadcast_to(sum(s.kernel(speed, geometry).burns), speed.shape) for s in STRATEGIES])


def universal_dataset(speed_ratio, periapsis_ratio, apoapsis_ratio=DEFAULT_APOAPSIS_RATIOS) -> xr.Dataset:
    """The dimensionless cube: costs, winner and saving over (speed, periapsis, apoapsis) ratios."""
    speed = np.asarray(speed_ratio, dtype=float)
    periapsis = np.asarray(periapsis_ratio, dtype=float)
    apoapsis = np.asarray(apoapsis_ratio, dtype=float)
    costs = universal_costs(speed[:, None, None], periapsis[None, :, None], apoapsis[None, None, :])
    best, saving, _ = pick_best(costs, costs, strategy_names().index("direct"))
    names = strategy_names()

    def attrs(long_name, **extra):
        return {"units": "1", "long_name": long_name, **extra}

    dims = ("speed_ratio", "periapsis_ratio", "apoapsis_ratio")
    dataset = xr.Dataset(
        {
            "delta_v_ratio": (("strategy", *dims), costs, attrs(
                "total impulsive delta-v over the circular speed at the target radius")),
            "best_strategy": (dims, best, {
                "long_name": "strategy of least delta-v", "units": "1",
                "flag_values": np.arange(-1, len(names), dtype=np.int8),
                "flag_meanings": "no_feasible_strategy " + " ".join(names)}),
            "saving_ratio": (dims, saving, attrs("delta-v of direct minus that of the best, over the circular speed")),
            # Hand derivation in README and tests: two_burn = direct at v_inf / v_c = sqrt(2) for any
            # r_p < r_t; three_burn = direct at sqrt(2 r_t / r_a).
            "two_burn_crossover_speed_ratio": ((), np.sqrt(2.0), attrs(
                "v_inf / v_c at which two_burn (periapsis below the target) and direct cost the same")),
            "three_burn_crossover_speed_ratio": (("apoapsis_ratio",), np.sqrt(2.0 / np.maximum(apoapsis, 1.0)),
                                                 attrs("v_inf / v_c at which three_burn (periapsis below the target) "
                                                       "and direct cost the same")),
        },
        coords={
            "speed_ratio": ("speed_ratio", speed, attrs("arrival speed over circular speed at the target radius")),
            "periapsis_ratio": ("periapsis_ratio", periapsis, attrs("periapsis radius over target radius")),
            "apoapsis_ratio": ("apoapsis_ratio", apoapsis, attrs(
                "three_burn intermediate apoapsis radius over target radius (raised to the larger of the other two)")),
            "strategy_name": ("strategy", np.array(names, dtype=object), {"long_name": "capture strategy name"}),
        },
    )
    dataset.attrs = {
        "Conventions": "CF-1.11",
        "title": "capsweep universal regime map (impulsive, dimensionless)",
        "source": f"capsweep {__version__}",
        "history": f"{datetime.now(UTC).strftime('%Y-%m-%dT%H:%M:%SZ')} capsweep {__version__} universal",
        "references": "H. D. Curtis, Orbital Mechanics for Engineering Students, 3rd ed., 2014 (Ch. 6, Ch. 8)",
        "comment": CAUTION + " No body limits apply here (safe periapsis, sphere of influence, time to orbit).",
    }
    return dataset

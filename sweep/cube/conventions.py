"""CF conventions: arrays plus metadata -> a CF-1.11 xarray Dataset (no file I/O here)."""

from __future__ import annotations

from datetime import UTC, datetime

import numpy as np
import xarray as xr

from sweep.config import SweepConfig, fingerprint
from sweep.model.statuses import STATUSES
from sweep.model.strategies import NO_STRATEGY, REFERENCE, STRATEGIES, strategy_names
from sweep.model.variables import Variable, cube_variables
from sweep.physics.rocket import STANDARD_GRAVITY
from sweep.version import __version__

__all__ = ["CAUTION", "REFERENCES", "build_dataset", "fingerprint", "flag_attrs"]

CAUTION = (
    "Preliminary estimates from a patched-conic, two-body model with impulsive burns and, where a thrust "
    "axis is given, simple constant-thrust finite burns. Oblateness, third-body and atmospheric effects, "
    "steering and ignition optimisation, navigation errors and margins are not included. Verify with "
    "higher-fidelity propagation and the mission's own flight-dynamics review; mission rules and licensed "
    "practice decide."
)
REFERENCES = (
    "H. D. Curtis, Orbital Mechanics for Engineering Students, 3rd ed., 2014 (Ch. 6, Ch. 8); "
    "D. A. Vallado, Fundamentals of Astrodynamics and Applications, 4th ed., 2013 (Sec. 6.3); "
    "body constants: JPL Solar System Dynamics and IAU WGCCRE 2015, see body_* variables"
)


def _attrs(units: str, long_name: str, **extra) -> dict:
    return {"units": units, "long_name": long_name, **extra}


def flag_attrs(variable: Variable, names: list[str]) -> dict:
    """CF flag attributes of a categorical variable: status codes, or strategy indices (``names``)."""
    if variable.flags == "status":
        values = np.arange(len(STATUSES), dtype=np.int8)
        meanings = " ".join(status.name for status in STATUSES)
        comment = "; ".join(f"{code} {s.name}: {s.reason}" for code, s in enumerate(STATUSES))
    else:
        values = np.arange(NO_STRATEGY, len(names), dtype=np.int8)
        meanings = "no_feasible_strategy " + " ".join(names)
        comment = f"{NO_STRATEGY} where no strategy is feasible; otherwise the index along the strategy dimension"
    return {"long_name": variable.long_name, "units": "1", "flag_values": values, "flag_meanings": meanings,
            "comment": comment}


def _attributes(variable: Variable, config: SweepConfig, names: list[str]) -> dict:
    if variable.flags is not None:
        return {**flag_attrs(variable, names), **variable.attrs(config)}
    return _attrs(variable.units, variable.long_name, **variable.attrs(config))


_ALTITUDES = ("above the body's mean radius (body_radius); the lowest safe periapsis is a clearance above the "
              "equatorial radius, given as an altitude above the mean radius in body_safe_periapsis_altitude")


def _coordinates(config: SweepConfig, burns: int) -> dict:
    """The cube's coordinates: the swept axes and the body and strategy labels."""
    elliptical = config.target_apoapsis_altitude is not None or config.target_period is not None
    divers = " and ".join(s.name for s in STRATEGIES if s.uses_periapsis)
    if divers.count(" and ") > 1:
        divers = divers.replace(" and ", ", ", divers.count(" and ") - 1)
    coords = {
        "v_inf": ("v_inf", config.v_inf, _attrs("km s-1", "hyperbolic arrival speed (v-infinity)",
                                                **({"comment": config.v_inf_note} if config.v_inf_note else {}))),
        "target_altitude": ("target_altitude", config.target_altitude, _attrs(
            "km", "periapsis altitude of the elliptical target orbit" if elliptical
            else "altitude of the circular target orbit above the mean radius", comment=_ALTITUDES)),
        "periapsis_altitude": ("periapsis_altitude", config.periapsis_altitude, _attrs(
            "km", f"altitude of the approach periapsis used by {divers}", comment=_ALTITUDES)),
        "burn": ("burn", np.arange(1, burns + 1, dtype=np.int32), _attrs("1", "burn number in order of execution")),
        "body_name": ("body", np.array([b.name for b in config.bodies], dtype=object),
                      {"long_name": "body name (lower case)"}),
        "strategy_name": ("strategy", np.array(strategy_names(), dtype=object),
                          {"long_name": "capture strategy name"}),
    }
    if config.plane_change is not None:
        coords["plane_change"] = ("plane_change", config.plane_change, _attrs(
            "degree", "plane change made during the capture (angle between arrival and target orbit planes)"))
    if config.thrust is not None:
        coords["thrust"] = ("thrust", config.thrust, _attrs("N", "engine thrust"))
        coords["thrust_to_weight"] = ("thrust", config.thrust / (config.arrival_mass * STANDARD_GRAVITY), _attrs(
            "1", "initial thrust-to-weight ratio, thrust / (arrival mass x 9.80665 m s-2)"))
    return coords


def build_dataset(config: SweepConfig, arrays: dict[str, np.ndarray]) -> xr.Dataset:
    """
    Label the arrays of :func:`sweep.engine.impulsive.evaluate` (output variable name -> values)
    as a CF-1.11 Dataset: every variable of the registry a cube of ``config`` has, with its
    dimensions and attributes from its registry entry.
    """
    names = strategy_names()
    present = cube_variables(STRATEGIES, REFERENCE, config)
    data_vars = {v.name: (v.dims, arrays[v.name], _attributes(v, config, names)) for v in present}
    dataset = xr.Dataset(data_vars, coords=_coordinates(config, arrays["burn_delta_v"].shape[1]))
    dataset.attrs = {
        "Conventions": "CF-1.11",
        "title": f"capsweep capture trade: {config.name}",
        "summary": config.description or "capture-strategy delta-v sweep",
        "institution": "capsweep user",
        "history": f"{datetime.now(UTC).strftime('%Y-%m-%dT%H:%M:%SZ')} capsweep {__version__} run of {config.path}",
        "references": REFERENCES,
        "comment": CAUTION,
        "strategies": "; ".join(f"{s.name}: {s.description}" for s in STRATEGIES),
        "config_toml": config.text,
        **fingerprint(config),
        "spacecraft_arrival_mass_kg": config.arrival_mass,
        "spacecraft_specific_impulse_s": config.specific_impulse,
    }
    return dataset

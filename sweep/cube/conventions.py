"""CF conventions: arrays plus metadata -> a CF-1.11 xarray Dataset (no file I/O here)."""

from __future__ import annotations

import hashlib
from datetime import UTC, datetime

import numpy as np
import xarray as xr

from sweep.catalog import catalog_text
from sweep.config import SweepConfig
from sweep.engine.grid import DIMENSIONS
from sweep.engine.impulsive import SweepArrays
from sweep.model.statuses import STATUSES
from sweep.model.strategies import (
    NO_STRATEGY,
    STRATEGIES,
    challengers,
    strategy_names,
)
from sweep.physics.rocket import STANDARD_GRAVITY
from sweep.version import __version__

__all__ = ["CAUTION", "REFERENCES", "build_dataset", "fingerprint"]

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
_VIS_VIVA = "vis-viva energy relation on patched conics (Curtis 2014, Ch. 2, 6, 8)"
_ROCKET = "ideal rocket equation (Tsiolkovsky), g0 = 9.80665 m s-2"
_PER_POINT = ("strategy", *DIMENSIONS)

def _attrs(units: str, long_name: str, **extra: str) -> dict[str, str]:
    return {"units": units, "long_name": long_name, **extra}


def _status_attrs() -> dict:
    return {
        "long_name": "feasibility of the strategy at the grid point",
        "units": "1",
        "flag_values": np.arange(len(STATUSES), dtype=np.int8),
        "flag_meanings": " ".join(status.name for status in STATUSES),
        "comment": "; ".join(f"{code} {s.name}: {s.reason}" for code, s in enumerate(STATUSES)),
    }


def _best_attrs(names: list[str], model: str) -> dict:
    return {
        "long_name": f"feasible strategy of least total delta-v{model}", "units": "1",
        "flag_values": np.arange(NO_STRATEGY, len(names), dtype=np.int8),
        "flag_meanings": "no_feasible_strategy " + " ".join(names),
        "comment": f"{NO_STRATEGY} where no strategy is feasible; otherwise the index along the strategy dimension",
    }


_FINITE_MODEL = (
    "planar two-body motion with constant thrust and mass flow T/(Isp g0); {steering} steering (thrust "
    "against the velocity for burns that lower the orbital energy, along it for burns that raise it{fixed}); "
    "each ignition half the impulsive-equivalent burn time before the impulsive burn point (the approach "
    "periapsis, then the apsis of the orbit reached nearest the impulsive burn radius), at once if that moment "
    "has passed; each burn ends when the specific energy reaches the intended orbit's; RK4 integration"
)


def _finite_variables(config: SweepConfig, finite, names: list[str]) -> tuple[dict, dict]:
    """Coordinates and data variables of the finite-burn model (thrust axis last)."""
    dims = ("strategy", *DIMENSIONS, "thrust")
    per_burn = ("strategy", "burn", *DIMENSIONS, "thrust")
    model = _FINITE_MODEL.format(
        steering=config.steering,
        fixed="" if config.steering == "tangential" else ", held fixed in inertial space along the velocity "
        "direction the impulsive burn would have",
    )
    refs = "Robbins 1966, AIAA J. 4(8):1417 (impulsive approximation); Curtis 2014 Ch. 6, 11"
    coords = {
        "thrust": ("thrust", config.thrust, _attrs("N", "engine thrust")),
        "thrust_to_weight": ("thrust", config.thrust / (config.arrival_mass * STANDARD_GRAVITY), _attrs(
            "1", "initial thrust-to-weight ratio, thrust / (arrival mass x 9.80665 m s-2)")),
    }

    def var(dimensions, values, units, long_name, **extra):
        return (dimensions, values, _attrs(units, long_name, references=refs, comment=model, **extra))

    data = {
        "finite_delta_v": var(dims, finite.finite_delta_v, "m s-1", "total delta-v with finite burns",
                              ancillary_variables="finite_status"),
        "finite_burn_delta_v": var(per_burn, finite.finite_burn_delta_v, "m s-1",
                                   "delta-v of each finite burn, v_e ln(m_before / m_after)"),
        "gravity_loss": var(per_burn, finite.gravity_loss, "m s-1",
                            "finite-burn delta-v minus impulsive delta-v of each burn"),
        "burn_duration": var(per_burn, finite.burn_duration, "s", "duration of each finite burn"),
        "burn_propellant_mass": var(per_burn, finite.burn_propellant_mass, "kg", "propellant of each finite burn"),
        "reached_periapsis_altitude": var(per_burn, finite.reached_periapsis_altitude, "km",
                                          "periapsis altitude of the orbit reached after each finite burn"),
        "reached_apoapsis_altitude": var(per_burn, finite.reached_apoapsis_altitude, "km",
                                         "apoapsis altitude of the orbit reached after each finite burn"),
        "finite_propellant_mass": var(dims, finite.finite_propellant_mass, "kg",
                                      "propellant for the whole sequence with finite burns"),
        "finite_time_to_orbit": var(dims, finite.finite_time_to_orbit, "s",
                                    "time from the approach periapsis passage to the end of the last finite burn"),
        "finite_status": (dims, finite.finite_status, {**_status_attrs(),
                                                       "long_name": "feasibility with finite burns"}),
        "finite_best_strategy": (dims[1:], finite.finite_best_strategy, _best_attrs(names, " with finite burns")),
        "finite_saving_over_direct": var(dims[1:], finite.finite_saving_over_direct, "m s-1",
                                         "finite-burn delta-v of direct minus that of the best strategy"),
    }
    v_min, v_max = float(config.v_inf.min()), float(config.v_inf.max())
    for index, (_, strategy) in enumerate(challengers()):
        challenger, name = strategy.name, strategy.finite_crossover_variable
        data[name] = (("body", "target_altitude", "periapsis_altitude", "thrust"), finite.finite_crossover_v_inf[index],
                      _attrs("km s-1", f"arrival speed at which {challenger} and direct need the same finite-burn "
                             "delta-v", valid_min=v_min, valid_max=v_max,
                             comment=f"first sign change of the cost difference on the grid, refined by regula "
                             f"falsi (Illinois) on the finite-burn model to 1e-3 m/s; searched {v_min:g} to "
                             f"{v_max:g} km s-1 (the grid); NaN where no sign change or a strategy is infeasible"))
    return coords, data


def fingerprint(config: SweepConfig) -> dict[str, str]:
    """What decides whether a cube is up to date: config and catalog hashes and the engine version."""
    return {
        "source": f"capsweep {__version__}",
        "config_sha256": hashlib.sha256(config.text.encode()).hexdigest(),
        "catalog_sha256": hashlib.sha256(catalog_text().encode()).hexdigest(),
    }


def build_dataset(config: SweepConfig, arrays: SweepArrays) -> xr.Dataset:
    """Label the arrays of :func:`sweep.engine.impulsive.evaluate` as a CF-1.11 Dataset."""
    bodies = config.bodies
    names = strategy_names()
    coords = {
        "v_inf": ("v_inf", config.v_inf, _attrs("km s-1", "hyperbolic arrival speed (v-infinity)",
                                                **({"comment": config.v_inf_note} if config.v_inf_note else {}))),
        "target_altitude": ("target_altitude", config.target_altitude,
                            _attrs("km", "altitude of the circular target orbit above the mean radius")),
        "periapsis_altitude": ("periapsis_altitude", config.periapsis_altitude,
                               _attrs("km", "altitude of the approach periapsis used by two_burn and three_burn")),
        "burn": ("burn", np.arange(1, arrays.burn_delta_v.shape[1] + 1, dtype=np.int32),
                 _attrs("1", "burn number in order of execution")),
        "body_name": ("body", np.array([b.name for b in bodies], dtype=object),
                      {"long_name": "body name (lower case)"}),
        "strategy_name": ("strategy", np.array(names, dtype=object), {"long_name": "capture strategy name"}),
    }
    body_vars = {
        "body_gm": (np.array([b.gm for b in bodies]), _attrs("m3 s-2", "gravitational parameter of the body")),
        "body_radius": (np.array([b.radius for b in bodies]) / 1e3, _attrs("km", "mean radius of the body")),
        "body_safe_periapsis_altitude": (
            np.array([b.safe_periapsis_altitude for b in bodies]) / 1e3,
            _attrs("km", "lowest safe periapsis altitude of the body"),
        ),
        "sphere_of_influence_radius": (arrays.sphere_of_influence,
                                       _attrs("km", "Laplace sphere-of-influence radius, a (m/M)^(2/5)")),
        "hill_radius": (arrays.hill_radius, _attrs("km", "Hill radius, a (m/3M)^(1/3)")),
        "apoapsis_bound": (arrays.apoapsis_bound, _attrs(
            "km", "largest admissible apoapsis radius",
            comment=f"{config.apoapsis_fraction} x min(Hill radius, sphere of influence); the fraction "
            "follows Shen and Tremaine 2008 (AJ 136), prograde orbits bound to about half the Hill radius",
        )),
    }
    data_vars = {
        "delta_v": (_PER_POINT, arrays.delta_v, _attrs(
            "m s-1", "total delta-v of the capture sequence", references=_VIS_VIVA,
            ancillary_variables="status", comment="NaN where status is not ok")),
        "burn_delta_v": (("strategy", "burn", *DIMENSIONS), arrays.burn_delta_v, _attrs(
            "m s-1", "delta-v of each burn", references=_VIS_VIVA, ancillary_variables="status",
            comment="0 for burns a strategy does not make; NaN where status is not ok")),
        "propellant_mass": (_PER_POINT, arrays.propellant_mass, _attrs(
            "kg", "propellant burned for the whole sequence", references=_ROCKET,
            comment=f"arrival mass {config.arrival_mass} kg, specific impulse {config.specific_impulse} s")),
        "time_to_orbit": (_PER_POINT, arrays.time_to_orbit, _attrs(
            "s", "time from periapsis arrival to the last burn (on the target orbit)")),
        "status": (_PER_POINT, arrays.status, _status_attrs()),
        "best_strategy": (DIMENSIONS, arrays.best_strategy, _best_attrs(names, "")),
        "saving_over_direct": (DIMENSIONS, arrays.saving_over_direct, _attrs(
            "m s-1", "delta-v of direct minus delta-v of the best strategy")),
        "propellant_saving": (DIMENSIONS, arrays.propellant_saving, _attrs(
            "kg", "propellant of direct minus propellant of the best strategy")),
        "intermediate_apoapsis_altitude": (DIMENSIONS, arrays.intermediate_apoapsis_altitude, _attrs(
            "km", "three_burn intermediate apoapsis altitude minimising total delta-v within the bound",
            comment="NaN where three_burn is infeasible")),
    }
    low, high = config.crossover_range
    for index, (_, strategy) in enumerate(challengers()):
        challenger, name = strategy.name, strategy.crossover_variable
        data_vars[name] = (("body", "target_altitude", "periapsis_altitude"), arrays.crossover_v_inf[index], _attrs(
            "km s-1", f"arrival speed at which {challenger} and direct need the same delta-v",
            valid_min=low, valid_max=high,
            comment=f"closed-form root of the model's cost difference; searched {low} to {high} km s-1; "
            f"NaN where no root lies in that range or where {challenger} or direct is infeasible",
        ))
    for name, (values, attrs) in body_vars.items():
        data_vars[name] = (("body",), values, attrs)
    free = ("an orbit of the target's eccentricity e whose periapsis the mission may choose: r_p = 2 mu (1 - e) / "
            "(v_inf^2 (1 + e)), delta-v = v_inf sqrt((1 - e) / 2) (Curtis 2014, Ch. 8, optimal periapsis; for a "
            "circular target r = 2 mu / v_inf^2); NaN where that periapsis is below the lowest safe periapsis or "
            "its apoapsis beyond the apoapsis bound; not a strategy of the trade, since its orbit is not the target")
    free_dims = ("body", "v_inf", "target_altitude")
    data_vars["free_periapsis_altitude"] = (free_dims, arrays.free_periapsis_altitude, _attrs(
        "km", "periapsis altitude of the orbit of the target's shape cheapest to capture into", comment=free))
    data_vars["free_periapsis_delta_v"] = (free_dims, arrays.free_periapsis_delta_v, _attrs(
        "m s-1", "single-burn delta-v into the orbit of the target's shape cheapest to capture into", comment=free))
    if config.target_apoapsis_altitude is not None or config.target_period is not None:
        how = (f"apoapsis altitude {config.target_apoapsis_altitude} km" if config.target_apoapsis_altitude is not None
               else f"period {config.target_period / 3600.0:g} h")
        coords["target_altitude"][2]["long_name"] = "periapsis altitude of the elliptical target orbit"
        data_vars["target_apoapsis_altitude"] = (("body", "target_altitude"), arrays.target_apoapsis_altitude, _attrs(
            "km", "apoapsis altitude of the elliptical target orbit", comment=f"target orbits given by {how}"))
    if arrays.plane is not None:
        dims = (*DIMENSIONS, "plane_change")
        coords["plane_change"] = ("plane_change", config.plane_change, _attrs(
            "degree", "plane change made during the capture (angle between arrival and target orbit planes)"))
        turn = ("direct: with its one burn; two_burn: split between its burns as cheapest (scan and golden "
                "section); three_burn: with the apoapsis burn; combined burns by the law of cosines (Curtis 2014, "
                "Ch. 6); feasibility as without a plane change")
        data_vars.update({
            "plane_change_delta_v": (("strategy", *dims), arrays.plane.delta_v, _attrs(
                "m s-1", "total delta-v including the plane change", comment=turn, references=_VIS_VIVA,
                ancillary_variables="status")),
            "two_burn_first_plane_change": (dims, arrays.plane.two_burn_first_share, _attrs(
                "degree", "part of the plane change two_burn makes with its first burn (the rest with the second)")),
            "plane_change_best_strategy": (dims, arrays.plane.best_strategy,
                                           _best_attrs(names, " including the plane change")),
            "plane_change_saving_over_direct": (dims, arrays.plane.saving_over_direct, _attrs(
                "m s-1", "delta-v of direct minus that of the best strategy, including the plane change")),
        })
    if arrays.finite is not None:
        finite_coords, finite_vars = _finite_variables(config, arrays.finite, names)
        coords.update(finite_coords)
        data_vars.update(finite_vars)
    dataset = xr.Dataset(data_vars, coords=coords)
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

"""TOML sweep definitions: parsed, validated once, and handed on as frozen objects.

Every check on user input happens here, so the rest of the pipeline can trust what it gets.
Errors name the file, the key path, the value and what would be valid.
"""

from __future__ import annotations

import difflib
import hashlib
import json
import math
import os
import re
import stat
import tomllib
from dataclasses import dataclass
from importlib import resources
from pathlib import Path
from typing import Annotated, Any, Literal

import numpy as np
from pydantic import BaseModel, ConfigDict, Discriminator, Field, Tag, ValidationError, field_validator

from sweep.catalog import Body, catalog, catalog_text, resolve_body
from sweep.errors import CatalogError, ConfigError
from sweep.physics.conics import hohmann_excess_speeds, semi_major_axis_from_period
from sweep.physics.rocket import STANDARD_GRAVITY
from sweep.version import __version__

__all__ = [
    "CONFIG_LIMIT",
    "DEMO_CONFIG",
    "SweepConfig",
    "fingerprint",
    "load_config",
    "parse_config",
]

DEMO_CONFIG = "data/demo.toml"  # packaged with sweep, run by `capsweep run` with no argument
_DAY = 86400.0  # s


class _Model(BaseModel):
    # TOML has inf and nan literals: no number in a config may be either
    model_config = ConfigDict(extra="forbid", strict=True, frozen=True, allow_inf_nan=False)


_MAX_AXIS_VALUES = 10_000_000  # per axis: beyond any useful sweep, and keeps a typo from exhausting memory
_MAX_V_INF = 1000.0  # km/s: far above any solar-system arrival (tens of km/s); patched conics are Newtonian
_MAX_THRUST_TO_WEIGHT = 1.0e4  # beyond this a burn is impulsive for every purpose here


class AxisRange(_Model):
    """An evenly spaced axis: ``{start, stop, num, spacing}``."""

    start: float
    stop: float
    num: Annotated[int, Field(gt=0, le=_MAX_AXIS_VALUES)]
    spacing: Literal["linear", "log"] = "linear"


class HohmannArrival(_Model):
    """Arrival speeds from a Hohmann transfer from another body with the same parent, plus margins."""

    hohmann_from: Annotated[str, Field(min_length=1)]
    margin: list[float] | AxisRange = [0.0]  # km/s added to the Hohmann arrival speed


def _v_inf_kind(value: Any) -> str:
    if isinstance(value, dict):
        return "hohmann" if "hohmann_from" in value else "range"
    return "list"


VInfAxis = Annotated[
    Annotated[list[float], Tag("list")]
    | Annotated[AxisRange, Tag("range")]
    | Annotated[HohmannArrival, Tag("hohmann")],
    Discriminator(_v_inf_kind),
]


class Grid(_Model):
    """The swept axes, in the order they become cube dimensions."""

    bodies: Annotated[list[str], Field(min_length=1)]
    v_inf: VInfAxis  # km/s
    target_altitude: list[float] | AxisRange  # km
    periapsis_altitude: list[float] | AxisRange  # km
    # Optional finite-burn axis, one of the two: engine thrust, or initial thrust-to-weight
    # T / (m0 g0) with g0 = 9.80665 m s-2. Without it the sweep is impulsive only.
    thrust: list[float] | AxisRange | None = None  # N
    thrust_to_weight: list[float] | AxisRange | None = None  # 1
    # Optional impulsive axis: the plane change the capture must also make. Without it, coplanar.
    plane_change: list[float] | AxisRange | None = None  # degrees

    @field_validator("v_inf", "target_altitude", "periapsis_altitude", "thrust", "thrust_to_weight", "plane_change",
                     mode="before")
    @classmethod
    def _axis_shape(cls, value: Any) -> Any:
        if isinstance(value, list):
            if not value:
                raise ValueError("an axis needs at least one value")
            if len(value) > _MAX_AXIS_VALUES:
                raise ValueError(f"an axis holds at most {_MAX_AXIS_VALUES:,} values")
            return value
        if isinstance(value, dict):
            return value
        raise ValueError("an axis is a list of numbers or a table {start, stop, num, spacing}")


class Spacecraft(_Model):
    """Engine and mass figures for propellant estimates."""

    specific_impulse: Annotated[float, Field(ge=1, le=1.0e5)]  # s: chemical to ion engines, with room
    arrival_mass: Annotated[float, Field(gt=0, le=1.0e9)]  # kg


class ThreeBurn(_Model):
    """Bounds on the three-burn intermediate apoapsis."""

    # Fraction of the radius named by apoapsis_bound_of. Shen and Tremaine (2008, AJ 136;
    # arXiv:0806.2882) find prograde orbits stay bound out to about half the Hill radius; by
    # default applied to the smaller of the Hill radius and the sphere of influence, which keeps
    # it conservative (README, "The three-burn apoapsis bound").
    apoapsis_fraction: Annotated[float, Field(gt=0, le=1)] = 0.5
    apoapsis_bound_of: Literal["smaller", "hill", "sphere_of_influence"] = "smaller"
    max_time_to_orbit: Annotated[float, Field(gt=0, le=1.0e6)] | None = None  # days (1e6: some 2,700 years)


class Crossover(_Model):
    """Arrival-speed range searched for the equal-cost speed (km/s)."""

    v_inf_min: Annotated[float, Field(ge=0, le=_MAX_V_INF)] = 0.0
    v_inf_max: Annotated[float, Field(gt=0, le=_MAX_V_INF)] = 30.0


class Ranking(_Model):
    """How strategies are ranked at a grid point."""

    # m/s: a strategy wins over a simpler one only if cheaper by more than this; else a tie, the simpler wins.
    # 1 m/s is our choice (not a published value): below the finite-burn trims, navigation and
    # model differences a preliminary estimate carries, so a smaller saving is not a win.
    tie_tolerance: Annotated[float, Field(ge=0, le=1000)] = 1.0


class TargetOrbit(_Model):
    """An elliptical target: its periapsis altitude is the grid's target_altitude."""

    apoapsis_altitude: Annotated[float, Field(gt=0)] | None = None  # km (inside the sphere of influence: checked)
    period: Annotated[float, Field(gt=0, le=1.0e6)] | None = None  # hours


class FiniteBurn(_Model):
    """Finite-burn model options."""

    steering: Literal["tangential", "inertial"] = "tangential"
    # Periapsis passes a capture burn is split over: a count, or "auto" (split only where needed).
    passes: int | str = "auto"
    max_passes: Annotated[int, Field(ge=1, le=64)] = 8  # the most passes "auto" gives one burn

    @field_validator("passes", mode="before")
    @classmethod
    def _passes(cls, value):
        if value == "auto" or (isinstance(value, int) and not isinstance(value, bool) and 1 <= value <= 64):
            return value
        raise ValueError('should be "auto" or a whole number of passes from 1 to 64')


class BodyFields(_Model):
    """A body defined, or catalog fields overridden, in the config (catalog units)."""

    # Bounds far outside the solar system's range (the Sun: GM 1.3e11 km3 s-2, radius 7e5 km),
    # so that no value overflows the physics: common practice for input validation.
    gm: Annotated[float, Field(gt=0, le=1.0e13)] | None = None  # km3 s-2
    mean_radius: Annotated[float, Field(gt=0, le=1.0e7)] | None = None  # km
    equatorial_radius: Annotated[float, Field(gt=0, le=1.0e7)] | None = None  # km
    safe_periapsis_altitude: Annotated[float, Field(ge=0, le=1.0e7)] | None = None  # km
    parent: str | None = None
    semi_major_axis: Annotated[float, Field(gt=0, le=1.0e12)] | None = None  # km


class ConfigFile(_Model):
    """The whole TOML document."""

    # names the output folder and cube file, so kept to characters safe in a file name
    name: Annotated[str, Field(min_length=1, max_length=100, pattern=r"^[A-Za-z0-9][A-Za-z0-9._-]*$")]
    description: str = ""
    grid: Grid
    spacecraft: Spacecraft
    three_burn: ThreeBurn = ThreeBurn()
    crossover: Crossover = Crossover()
    finite_burn: FiniteBurn = FiniteBurn()
    ranking: Ranking = Ranking()
    target_orbit: TargetOrbit = TargetOrbit()
    bodies: dict[str, BodyFields] = {}


@dataclass(frozen=True)
class SweepConfig:
    """A validated sweep: resolved bodies and ascending axis values, in config units."""

    name: str
    description: str
    bodies: tuple[Body, ...]
    v_inf: np.ndarray  # km/s
    v_inf_note: str  # how the axis was set (e.g. a Hohmann transfer), "" for plain values
    target_altitude: np.ndarray  # km
    periapsis_altitude: np.ndarray  # km
    specific_impulse: float  # s
    arrival_mass: float  # kg
    apoapsis_fraction: float  # 1
    max_time_to_orbit: float | None  # s
    crossover_range: tuple[float, float]  # km/s
    thrust: np.ndarray | None  # N, the finite-burn axis; None for an impulsive-only sweep
    thrust_given_as: str  # "thrust" or "thrust_to_weight": how the config stated the axis
    plane_change: np.ndarray | None  # degrees, the plane-change axis; None for coplanar sweeps
    steering: str  # finite-burn steering law
    finite_passes: int | str  # passes of a split capture: a count or "auto"
    finite_max_passes: int  # the most passes "auto" gives one burn
    tie_tolerance: float  # m/s: strategies within it of the cheapest are tied; the simpler one wins
    text: str  # the TOML exactly as read
    path: str  # where it was read from
    target_apoapsis_altitude: float | None = None  # km: elliptical target with this apoapsis ...
    target_period: float | None = None  # s: ... or with this period; neither: circular targets
    apoapsis_bound_of: str = "smaller"  # the radius apoapsis_fraction applies to: "smaller", "hill", ...

    @property
    def shape(self) -> tuple[int, ...]:
        """Grid shape (body, v_inf, target_altitude, periapsis_altitude)."""
        return (len(self.bodies), self.v_inf.size, self.target_altitude.size, self.periapsis_altitude.size)

    @property
    def finite_shape(self) -> tuple[int, ...]:
        """Finite-burn grid shape: :attr:`shape` plus the thrust axis (empty without one)."""
        return (*self.shape, self.thrust.size) if self.thrust is not None else ()


_BARE_KEY = re.compile(r"[A-Za-z0-9_-]+")  # TOML bare keys; others are quoted
_UNION_MEMBERS = ("list[", "AxisRange", "HohmannArrival", "list", "range", "hohmann")  # pydantic loc parts


def _key_path(loc: tuple) -> str:
    """Dotted key path as written in TOML: bare keys as they are, any other key quoted."""
    parts = [str(part) for part in loc if not str(part).startswith(_UNION_MEMBERS)]
    return ".".join(part if _BARE_KEY.fullmatch(part) else json.dumps(part) for part in parts)


def _fields_at(loc: tuple, full_loc: tuple = ()) -> list[str]:
    """Valid keys of the table at ``loc`` (the path of an unknown key, without the key)."""
    for tag, member in (("hohmann", HohmannArrival), ("range", AxisRange), ("AxisRange", AxisRange)):
        if tag in full_loc[:-1]:
            return sorted(member.model_fields)
    model: Any = ConfigFile
    for part in loc:
        if isinstance(part, int) or model is None:
            return []
        if model is ConfigFile and part == "bodies":
            model = dict
            continue
        if model is dict:
            model = BodyFields
            continue
        annotation = model.model_fields[part].annotation if part in model.model_fields else None
        candidates = [annotation, *getattr(annotation, "__args__", ())]
        model = next((c for c in candidates if isinstance(c, type) and issubclass(c, BaseModel)), None)
    return sorted(model.model_fields) if isinstance(model, type) and issubclass(model, BaseModel) else []


def _describe(error: dict, path: str) -> str:
    loc = tuple(error["loc"])
    key = _key_path(loc)
    if error["type"] == "extra_forbidden":
        valid = _fields_at(tuple(p for p in loc[:-1] if not str(p).startswith(_UNION_MEMBERS)), loc)
        close = difflib.get_close_matches(str(loc[-1]), valid, n=1)
        hint = f"; did you mean {close[0]!r}?" if close else ""
        return f"{path}: unknown key {key!r}{hint} (valid keys here: {', '.join(valid)})"
    if error["type"] == "missing":
        return f"{path}: missing required key {key!r}"
    message = error["msg"].removeprefix("Value error, ")
    return f"{path}: {key}: {message} (got {error.get('input')!r})"


_WRONG_MEMBER = ("model_type", "model_attributes_type", "dict_type", "list_type")


def _pick_error(errors: list[dict]) -> dict:
    """Choose the most telling of pydantic's errors (a union reports one per member)."""
    # A list given where a list or a table may stand: the table member's "not a table" says
    # nothing; the list member's error (a bad element) does.
    inside = [e for e in errors if any(str(p).startswith("list[") for p in e["loc"]) and e["type"] not in _WRONG_MEMBER]
    if inside and all(e["type"] in _WRONG_MEMBER or e in inside for e in errors):
        return inside[0]
    for error in errors:
        if error["type"] in ("extra_forbidden", "missing") and not any(
            str(p).startswith("list[") for p in error["loc"]
        ):
            return error
    for error in errors:
        if not any(str(p).startswith("list[") for p in error["loc"]):
            return error
    return errors[0]


def _axis_values(axis: list[float] | AxisRange, key: str, path: str) -> np.ndarray:
    if isinstance(axis, AxisRange):
        if not (math.isfinite(axis.start) and math.isfinite(axis.stop)):
            raise ConfigError(f"{path}: {key}: start and stop must be finite (got {axis.start!r}, {axis.stop!r})")
        if axis.spacing == "log":
            if axis.start <= 0 or axis.stop <= 0:
                raise ConfigError(
                    f"{path}: {key}: log spacing needs positive start and stop "
                    f"(got {axis.start!r}, {axis.stop!r})"
                )
            values = np.geomspace(axis.start, axis.stop, axis.num)
        else:
            values = np.linspace(axis.start, axis.stop, axis.num)
        if axis.num > 1 and axis.start == axis.stop:
            raise ConfigError(f"{path}: {key}: start equals stop ({axis.start!r}) but num is {axis.num}")
    else:
        values = np.asarray(axis, dtype=float)
        bad = [v for v in axis if not math.isfinite(v)]
        if bad:
            raise ConfigError(f"{path}: {key}: values must be finite (got {bad[0]!r})")
        unique, counts = np.unique(values, return_counts=True)
        if (counts > 1).any():
            raise ConfigError(f"{path}: {key}: duplicate value {float(unique[counts > 1][0])!r}")
    return np.sort(values.astype(np.float64))


def _check_minimum(values: np.ndarray, minimum: float, key: str, path: str, what: str) -> None:
    if values.min() < minimum:
        raise ConfigError(f"{path}: {key}: {what} (got {float(values.min())!r})")


def _check_inside_some_sphere(altitudes: np.ndarray, bodies: tuple[Body, ...], key: str, path: str) -> None:
    """
    An altitude beyond the sphere of influence of every body on the grid can never be flown.
    One beyond some bodies' spheres only is kept: those points carry a status code in the cube.
    """
    reach = {body.name: (body.sphere_of_influence - body.radius) / 1e3 for body in bodies}
    widest = max(reach, key=reach.get)
    if altitudes.max() > reach[widest]:
        where = "the body's" if len(bodies) == 1 else "every body's"
        raise ConfigError(
            f"{path}: {key}: altitudes must lie inside {where} sphere of influence (largest: {widest} "
            f"{reach[widest]:,.0f} km altitude) (got {float(altitudes.max())!r})"
        )


def parse_config(text: str, path: str = "<config>") -> SweepConfig:
    """Validate TOML text; raise :class:`ConfigError` naming ``path``, key and value."""
    try:
        document = tomllib.loads(text)
    except tomllib.TOMLDecodeError as err:
        # tomllib ends its message with "(at line L, column C)", or "(at end of document)": name that line too
        where = f"(at end of document, line {text.count(chr(10)) + 1})"
        raise ConfigError(f"{path}: not valid TOML: {str(err).replace('(at end of document)', where)}") from err
    try:
        model = ConfigFile.model_validate(document)
    except ValidationError as err:
        raise ConfigError(_describe(_pick_error(err.errors()), path)) from err

    grid = model.grid
    bodies = _resolve_bodies(grid.bodies, model.bodies, path)
    v_inf, v_inf_note = _v_inf_axis(grid.v_inf, bodies, model.bodies, path)
    target = _axis_values(grid.target_altitude, "grid.target_altitude", path)
    periapsis = _axis_values(grid.periapsis_altitude, "grid.periapsis_altitude", path)
    above_surface = "altitudes must be >= 0 km (above the mean surface)"
    _check_minimum(v_inf, 0.0, "grid.v_inf", path, "arrival speeds must be >= 0 km/s")
    _check_minimum(target, 0.0, "grid.target_altitude", path, above_surface)
    _check_minimum(periapsis, 0.0, "grid.periapsis_altitude", path, above_surface)
    if v_inf.max() > _MAX_V_INF:
        raise ConfigError(f"{path}: grid.v_inf: arrival speeds must be at most {_MAX_V_INF:g} km/s, far above any "
                          f"solar-system arrival (got {float(v_inf.max())!r})")
    for key, values in (("grid.target_altitude", target), ("grid.periapsis_altitude", periapsis)):
        _check_inside_some_sphere(values, bodies, key, path)
    thrust, given_as = _thrust_axis(grid, model.spacecraft.arrival_mass, path)
    plane_change = None
    if grid.plane_change is not None:
        plane_change = _axis_values(grid.plane_change, "grid.plane_change", path)
        if plane_change.min() < 0 or plane_change.max() >= 180:
            bad = plane_change.min() if plane_change.min() < 0 else plane_change.max()
            raise ConfigError(f"{path}: grid.plane_change: angles must be in [0, 180) degrees (got {float(bad)!r})")
        if thrust is not None:
            raise ConfigError(
                f"{path}: grid.plane_change: the finite-burn model is planar, so plane_change cannot be swept "
                f"together with grid.{given_as}; run them as two configs"
            )
    if model.crossover.v_inf_min >= model.crossover.v_inf_max:
        raise ConfigError(
            f"{path}: crossover: v_inf_min must be below v_inf_max "
            f"(got {model.crossover.v_inf_min!r} and {model.crossover.v_inf_max!r})"
        )
    _check_target_orbit(model.target_orbit, bodies, target, path)
    return SweepConfig(
        target_apoapsis_altitude=model.target_orbit.apoapsis_altitude,
        target_period=None if model.target_orbit.period is None else model.target_orbit.period * 3600.0,
        name=model.name,
        description=model.description,
        bodies=bodies,
        v_inf=v_inf,
        v_inf_note=v_inf_note,
        target_altitude=target,
        periapsis_altitude=periapsis,
        specific_impulse=model.spacecraft.specific_impulse,
        arrival_mass=model.spacecraft.arrival_mass,
        apoapsis_fraction=model.three_burn.apoapsis_fraction,
        apoapsis_bound_of=model.three_burn.apoapsis_bound_of,
        max_time_to_orbit=None
        if model.three_burn.max_time_to_orbit is None
        else model.three_burn.max_time_to_orbit * _DAY,
        crossover_range=(model.crossover.v_inf_min, model.crossover.v_inf_max),
        thrust=thrust,
        thrust_given_as=given_as,
        plane_change=plane_change,
        steering=model.finite_burn.steering,
        finite_passes=model.finite_burn.passes,
        finite_max_passes=model.finite_burn.max_passes,
        tie_tolerance=model.ranking.tie_tolerance,
        text=text,
        path=path,
    )


def _check_target_orbit(orbit: TargetOrbit, bodies, target_altitudes: np.ndarray, path: str) -> None:
    """An elliptical target needs one of apoapsis or period, and an apoapsis above every periapsis."""
    if orbit.apoapsis_altitude is not None and orbit.period is not None:
        raise ConfigError(f"{path}: target_orbit: give apoapsis_altitude or period, not both")
    if orbit.apoapsis_altitude is not None and orbit.apoapsis_altitude < target_altitudes.max():
        raise ConfigError(
            f"{path}: target_orbit.apoapsis_altitude: must be at least every grid.target_altitude (the target's "
            f"periapsis; largest {float(target_altitudes.max())!r} km), got {orbit.apoapsis_altitude!r}"
        )
    if orbit.apoapsis_altitude is not None:
        _check_inside_some_sphere(np.array([orbit.apoapsis_altitude]), bodies, "target_orbit.apoapsis_altitude", path)
    if orbit.period is not None:
        for body in bodies:
            semi_major_axis = semi_major_axis_from_period(body.gm, orbit.period * 3600.0)
            periapsis = body.radius + target_altitudes.max() * 1e3
            if 2 * semi_major_axis < 2 * periapsis:
                raise ConfigError(
                    f"{path}: target_orbit.period: {orbit.period!r} h is shorter than a circular orbit at the "
                    f"largest target periapsis ({float(target_altitudes.max())!r} km) about {body.name!r}"
                )


def _v_inf_axis(axis, bodies: tuple[Body, ...], defined: dict[str, BodyFields], path: str) -> tuple[np.ndarray, str]:
    """Arrival speeds in km/s: plain values, or a Hohmann arrival speed plus margins."""
    if not isinstance(axis, HohmannArrival):
        return _axis_values(axis, "grid.v_inf", path), ""
    key = "grid.v_inf.hohmann_from"
    name = axis.hohmann_from.strip().lower()
    if len(bodies) != 1:
        raise ConfigError(
            f"{path}: {key}: a Hohmann arrival speed belongs to one arrival body, but grid.bodies has "
            f"{len(bodies)}; run one config per body (got {axis.hohmann_from!r})"
        )
    target = bodies[0]
    try:
        origin = resolve_body(name, {k: v.model_dump() for k, v in defined.items()}, origin=path)
    except CatalogError as err:
        close = difflib.get_close_matches(name, sorted(catalog()), n=1)
        hint = f"; did you mean {close[0]!r}?" if close else ""
        raise ConfigError(f"{path}: {key}: unknown body {axis.hohmann_from!r}{hint}") from err
    if origin.name == target.name or origin.parent != target.parent or not origin.parent:
        raise ConfigError(
            f"{path}: {key}: {origin.name!r} and {target.name!r} must be different bodies orbiting the same "
            f"parent (they orbit {origin.parent or 'nothing'!r} and {target.parent!r})"
        )
    parent_gm = target.parent_gm
    _, arrival = hohmann_excess_speeds(parent_gm, origin.semi_major_axis, target.semi_major_axis)
    base = float(arrival) / 1e3
    margins = _axis_values(axis.margin, "grid.v_inf.margin", path)
    values = base + margins
    if values.min() < 0:
        raise ConfigError(
            f"{path}: grid.v_inf.margin: the Hohmann arrival speed is {base:.4f} km/s, so margins below "
            f"{-base:.4f} km/s give negative speeds (got {float(margins.min())!r})"
        )
    note = (f"Hohmann transfer from {origin.name} to {target.name} (circular coplanar orbits, semi-major axes "
            f"from the catalog): arrival speed {base:.4f} km/s, plus margins {', '.join(f'{m:g}' for m in margins)} "
            "km/s")
    return values, note


def _thrust_axis(grid: Grid, arrival_mass: float, path: str) -> tuple[np.ndarray | None, str]:
    """The thrust axis in newtons, from ``grid.thrust`` or ``grid.thrust_to_weight``."""
    if grid.thrust is not None and grid.thrust_to_weight is not None:
        raise ConfigError(f"{path}: grid: give thrust or thrust_to_weight, not both")
    for key in ("thrust", "thrust_to_weight"):
        axis = getattr(grid, key)
        if axis is None:
            continue
        values = _axis_values(axis, f"grid.{key}", path)
        if values.min() <= 0:
            raise ConfigError(f"{path}: grid.{key}: values must be > 0 (got {float(values.min())!r})")
        ratio = values if key == "thrust_to_weight" else values / (arrival_mass * STANDARD_GRAVITY)
        if ratio.max() > _MAX_THRUST_TO_WEIGHT:
            raise ConfigError(
                f"{path}: grid.{key}: thrust-to-weight must be at most {_MAX_THRUST_TO_WEIGHT:g} (burns are "
                f"impulsive long before; the impulsive results are in the cube) (got {float(values.max())!r})"
            )
        if key == "thrust_to_weight":
            values = values * arrival_mass * STANDARD_GRAVITY
        return values, key
    return None, ""


def _resolve_bodies(names: list[str], defined: dict[str, BodyFields], path: str) -> tuple[Body, ...]:
    known = set(catalog()) | set(defined)
    overrides = {key: fields.model_dump() for key, fields in defined.items()}
    seen: set[str] = set()
    bodies = []
    for index, name in enumerate(names):
        key = name.strip().lower()
        if key in seen:
            raise ConfigError(f"{path}: grid.bodies.{index}: duplicate body {name!r}")
        seen.add(key)
        if key not in known:
            close = difflib.get_close_matches(key, sorted(known), n=1)
            hint = f"; did you mean {close[0]!r}?" if close else ""
            raise ConfigError(
                f"{path}: grid.bodies.{index}: unknown body {name!r}{hint} "
                "(see `capsweep bodies`, or define it in a [bodies.NAME] table)"
            )
        try:
            body = resolve_body(key, overrides, origin=path)
        except CatalogError as err:
            raise ConfigError(f"{err} (in [bodies.{key}])") from err
        if not body.parent:
            raise ConfigError(
                f"{path}: grid.bodies.{index}: {name!r} has no parent body, so no sphere of "
                "influence bounds a capture about it"
            )
        _check_orbit(body, overrides, path)
        bodies.append(body)
    return tuple(bodies)


def _check_orbit(body: Body, overrides: dict[str, dict], path: str) -> None:
    """A body's constants must describe a satellite: lighter than its parent, orbiting outside it."""
    parent = resolve_body(body.parent, overrides, origin=path)
    table = f"[bodies.{body.name}]"
    if body.gm >= parent.gm:
        raise ConfigError(
            f"{path}: {table} gm: a body must be lighter than its parent {parent.name!r} "
            f"({parent.gm / 1e9:.6g} km3 s-2) to have a sphere of influence (got {body.gm / 1e9!r})"
        )
    if body.semi_major_axis <= parent.radius + body.radius:
        raise ConfigError(
            f"{path}: {table} semi_major_axis: the orbit must clear its parent {parent.name!r} (mean radius "
            f"{parent.radius / 1e3:,.6g} km plus the body's own {body.radius / 1e3:,.6g} km) "
            f"(got {body.semi_major_axis / 1e3!r})"
        )


CONFIG_LIMIT = 1 << 20
"""Largest config file read, bytes (1 MiB): a grid's config is a few KiB; the text is embedded in every cube."""


def load_config(path: str | Path | None = None) -> SweepConfig:
    """
    Read and validate a TOML config; ``None`` loads the packaged demo.

    Only a regular file (or a link to one) of at most :data:`CONFIG_LIMIT` bytes of text is read:
    a FIFO, a device (``/dev/zero``), a larger file or a binary one (a NUL byte, e.g. a netCDF
    cube) is refused with a :class:`ConfigError` before more than ``CONFIG_LIMIT`` + 1 bytes are
    read, and opening never waits (``O_NONBLOCK``).
    """
    if path is None:
        text = resources.files("sweep").joinpath(DEMO_CONFIG).read_text(encoding="utf-8")
        return parse_config(text, f"<packaged {DEMO_CONFIG}>")
    path = Path(path)
    limit = f"{CONFIG_LIMIT:,} bytes (1 MiB)"
    try:
        descriptor = os.open(path, os.O_RDONLY | os.O_NONBLOCK | os.O_CLOEXEC)
    except FileNotFoundError as err:
        raise ConfigError(f"{path}: config file not found") from err
    except OSError as err:
        raise ConfigError(f"{path}: cannot read config file: {err.strerror}") from err
    try:
        mode = os.fstat(descriptor).st_mode
        if stat.S_ISDIR(mode):
            raise ConfigError(f"{path}: cannot read config file: Is a directory")
        if not stat.S_ISREG(mode):
            raise ConfigError(f"{path}: not a regular file (a FIFO, socket or device); a config must be a TOML file "
                              f"of at most {limit}")
        if os.fstat(descriptor).st_size > CONFIG_LIMIT:
            raise ConfigError(f"{path}: config file is {os.fstat(descriptor).st_size:,} bytes, above the limit of "
                              f"{limit}")
        raw = _read_at_most(descriptor, CONFIG_LIMIT + 1)  # the file may grow while read
    except OSError as err:
        raise ConfigError(f"{path}: cannot read config file: {err.strerror}") from err
    finally:
        os.close(descriptor)
    if len(raw) > CONFIG_LIMIT:
        raise ConfigError(f"{path}: config file is larger than the limit of {limit}")
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError as err:
        raise ConfigError(f"{path}: config file is not UTF-8 text ({err.reason} at byte {err.start})") from err
    if b"\0" in raw:
        raise ConfigError(f"{path}: config file is binary (a NUL byte at byte {raw.index(0)}), not TOML text; "
                          "a netCDF cube, for instance, is not a config")
    return parse_config(text, str(path))


def _read_at_most(descriptor: int, count: int) -> bytes:
    parts, left = [], count
    while left > 0 and (part := os.read(descriptor, min(left, 1 << 16))):
        parts.append(part)
        left -= len(part)
    return b"".join(parts)


def fingerprint(config: SweepConfig) -> dict[str, str]:
    """What decides whether results are current: the config and catalog hashes and the engine version."""
    return {
        "source": f"capsweep {__version__}",
        "config_sha256": hashlib.sha256(config.text.encode()).hexdigest(),
        "catalog_sha256": hashlib.sha256(catalog_text().encode()).hexdigest(),
    }

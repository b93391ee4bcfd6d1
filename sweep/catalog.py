"""The body catalog: a packaged TOML data file of gravitational parameters, radii, orbits
and lowest safe periapses, each column with its published source.

Values are read in the file's units (km, km3 s-2) and held here in SI (m, m3 s-2). The lowest
safe periapsis is a clearance above the equatorial radius (the surface it must clear); grid
altitudes are measured from the mean radius, so :attr:`Body.safe_periapsis_altitude` holds the
same periapsis as an altitude above the mean radius.
"""

from __future__ import annotations

import tomllib
from dataclasses import dataclass, field
from functools import cache
from importlib import resources

from sweep.errors import CatalogError
from sweep.physics.conics import hill_radius, sphere_of_influence_radius

__all__ = ["Body", "CATALOG_FILE", "catalog", "catalog_text", "resolve_body"]

CATALOG_FILE = "data/bodies.toml"
_KM = 1.0e3  # m per km
_KM3 = 1.0e9  # m3 per km3
_REQUIRED = ("gm", "mean_radius", "parent", "semi_major_axis")
# the lowest safe periapsis, one of: above the mean radius (configs), or above the equatorial radius (the catalog)
_SAFE = ("safe_periapsis_altitude", "safe_periapsis_clearance")


@dataclass(frozen=True)
class Body:
    """One gravitating body, SI units; ``sources`` maps each column to its citation."""

    name: str
    gm: float  # m3 s-2
    radius: float  # m, mean radius
    safe_periapsis_altitude: float  # m above the mean radius (the catalog's clearance, converted)
    parent: str  # "" for a body with no parent (the Sun)
    semi_major_axis: float  # m, of the orbit about the parent
    parent_gm: float = float("nan")  # m3 s-2
    equatorial_radius: float = float("nan")  # m
    hazard_height: float = float("nan")  # m above the equatorial radius that a periapsis must clear; NaN: not given
    sources: dict[str, str] = field(default_factory=dict, compare=False)

    @property
    def safe_periapsis_radius(self) -> float:
        """Lowest safe periapsis radius [m]."""
        return self.radius + self.safe_periapsis_altitude

    @property
    def safe_periapsis_clearance(self) -> float:
        """Lowest safe periapsis height above the equatorial radius [m]."""
        return self.safe_periapsis_radius - self.equatorial_radius

    @property
    def sphere_of_influence(self) -> float:
        """Laplace sphere-of-influence radius [m]; NaN without a parent."""
        return float(sphere_of_influence_radius(self.semi_major_axis, self.gm, self.parent_gm))

    @property
    def hill_radius(self) -> float:
        """Hill radius [m]; NaN without a parent."""
        return float(hill_radius(self.semi_major_axis, self.gm, self.parent_gm))

    def bound_radius(self, of: str = "smaller") -> float:
        """
        The radius [m] a three-burn apoapsis bound is a fraction of: ``"hill"``, ``"sphere_of_influence"``
        or ``"smaller"`` (the smaller of the two, the default); NaN without a parent.
        """
        return {"smaller": lambda: min(self.sphere_of_influence, self.hill_radius),
                "hill": lambda: self.hill_radius,
                "sphere_of_influence": lambda: self.sphere_of_influence}[of]()


def catalog_text() -> str:
    """Return the packaged catalog file's text (hashed and quoted in cubes)."""
    return resources.files("sweep").joinpath(CATALOG_FILE).read_text(encoding="utf-8")


@cache
def _raw_catalog() -> dict[str, dict]:
    return tomllib.loads(catalog_text())["bodies"]


def _body_from_table(name: str, table: dict, parents: dict[str, dict], origin: str) -> Body:
    missing = [key for key in _REQUIRED if key not in table]
    if not any(key in table for key in _SAFE):
        missing.append(" or ".join(_SAFE))
    if missing:
        raise CatalogError(f"{origin}: body {name!r} lacks {', '.join(missing)}")
    parent = table["parent"]
    parent_gm = float("nan")
    if parent:
        if parent not in parents:
            raise CatalogError(
                f"{origin}: body {name!r} names parent {parent!r}, which is not a known body"
            )
        parent_gm = float(parents[parent]["gm"]) * _KM3
    sources = {key[: -len("_source")]: value for key, value in table.items() if key.endswith("_source")}
    if "safe_periapsis_basis" in table:
        sources["safe_periapsis_altitude"] = table["safe_periapsis_basis"]
    radius = float(table["mean_radius"]) * _KM
    equatorial = float(table.get("equatorial_radius", table["mean_radius"])) * _KM
    if "safe_periapsis_altitude" in table:
        safe = float(table["safe_periapsis_altitude"]) * _KM
    else:
        safe = equatorial + float(table["safe_periapsis_clearance"]) * _KM - radius
    return Body(
        name=name,
        gm=float(table["gm"]) * _KM3,
        radius=radius,
        safe_periapsis_altitude=safe,
        parent=parent,
        semi_major_axis=float(table["semi_major_axis"]) * _KM,
        parent_gm=parent_gm,
        equatorial_radius=equatorial,
        hazard_height=float(table.get("hazard_height", float("nan"))) * _KM,
        sources=sources,
    )


def catalog() -> dict[str, Body]:
    """Return every catalog body by lower-case name, in the file's order."""
    raw = _raw_catalog()
    return {name: _body_from_table(name, table, raw, CATALOG_FILE) for name, table in raw.items()}


def resolve_body(name: str, overrides: dict[str, dict] | None = None, origin: str = "config") -> Body:
    """
    Return the body ``name``, with any fields from ``overrides[name]`` laid over the catalog.

    ``overrides`` holds config tables in catalog units (km, km3 s-2); a name not in the
    catalog must define every field there. Parents resolve through the same overrides.
    """
    overrides = overrides or {}
    raw = dict(_raw_catalog())
    for key, table in overrides.items():
        given = {k: v for k, v in table.items() if v is not None}
        # a safe periapsis given in the config replaces the catalog's, in whichever form it comes
        kept = {k: v for k, v in raw.get(key, {}).items() if not (k in _SAFE and any(s in given for s in _SAFE))}
        raw[key] = {**kept, **given}
    if name not in raw:
        raise CatalogError(f"{origin}: unknown body {name!r}")
    body = _body_from_table(name, raw[name], raw, origin)
    if name in overrides:
        fields = sorted(k for k, v in overrides[name].items() if v is not None)
        body.sources.update({key: f"set in {origin}" for key in fields})
    return body

"""The body catalog: a packaged TOML data file of gravitational parameters, radii, orbits
and lowest safe periapsis altitudes, each column with its published source.

Values are read in the file's units (km, km3 s-2) and held here in SI (m, m3 s-2).
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
_REQUIRED = ("gm", "mean_radius", "safe_periapsis_altitude", "parent", "semi_major_axis")


@dataclass(frozen=True)
class Body:
    """One gravitating body, SI units; ``sources`` maps each column to its citation."""

    name: str
    gm: float  # m3 s-2
    radius: float  # m, mean radius
    safe_periapsis_altitude: float  # m above the mean radius
    parent: str  # "" for a body with no parent (the Sun)
    semi_major_axis: float  # m, of the orbit about the parent
    parent_gm: float = float("nan")  # m3 s-2
    equatorial_radius: float = float("nan")  # m
    sources: dict[str, str] = field(default_factory=dict, compare=False)

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
    return Body(
        name=name,
        gm=float(table["gm"]) * _KM3,
        radius=float(table["mean_radius"]) * _KM,
        safe_periapsis_altitude=float(table["safe_periapsis_altitude"]) * _KM,
        parent=parent,
        semi_major_axis=float(table["semi_major_axis"]) * _KM,
        parent_gm=parent_gm,
        equatorial_radius=float(table.get("equatorial_radius", table["mean_radius"])) * _KM,
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
        raw[key] = {**raw.get(key, {}), **{k: v for k, v in table.items() if v is not None}}
    if name not in raw:
        raise CatalogError(f"{origin}: unknown body {name!r}")
    body = _body_from_table(name, raw[name], raw, origin)
    if name in overrides:
        fields = sorted(k for k, v in overrides[name].items() if v is not None)
        body.sources.update({key: f"set in {origin}" for key in fields})
    return body

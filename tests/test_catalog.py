"""The packaged body catalog against astropy.constants and basic consistency."""

from __future__ import annotations

import math

import pytest
from astropy import constants

from sweep.catalog import catalog, resolve_body
from sweep.errors import CatalogError

REQUIRED = ["mercury", "venus", "earth", "moon", "mars", "jupiter", "io", "europa", "ganymede", "callisto",
            "saturn", "titan", "enceladus", "uranus", "neptune", "triton"]


@pytest.mark.parametrize(
    ("body", "attribute", "reference", "rtol"),
    [
        # astropy.constants (IAU 2015 Resolution B3 nominal values). GM values are printed to
        # 8 significant digits there, so agreement within 1e-6 relative is the check.
        ("sun", "gm", constants.GM_sun.si.value, 1e-6),
        ("earth", "gm", constants.GM_earth.si.value, 1e-6),
        ("jupiter", "gm", constants.GM_jup.si.value, 1e-6),
        # Radii: astropy's are equatorial, nominal, given to 5 significant digits for Earth
        # (6378.1 km vs IAU WGCCRE 6378.1366 km, 6e-6 apart): 1e-5 relative.
        ("sun", "equatorial_radius", constants.R_sun.si.value, 1e-5),
        ("earth", "equatorial_radius", constants.R_earth.si.value, 1e-5),
        ("jupiter", "equatorial_radius", constants.R_jup.si.value, 1e-5),
    ],
)
def test_catalog_matches_astropy_constants(body, attribute, reference, rtol):
    assert getattr(catalog()[body], attribute) == pytest.approx(reference, rel=rtol)


def test_catalog_has_every_required_body_with_sources():
    # every body of the catalog, so a body added to data/bodies.toml without its sources fails here
    bodies = catalog()
    assert set(REQUIRED) <= set(bodies)
    for name, body in bodies.items():
        if name == "sun":  # the root: no parent, no orbit
            continue
        assert body.gm > 0 and body.radius > 0 and body.safe_periapsis_altitude >= 0
        assert body.parent in bodies and body.semi_major_axis > 0
        for column in ("gm", "radius", "semi_major_axis", "safe_periapsis_altitude"):
            assert body.sources.get(column), f"{name}: no source for {column}"


def test_moons_orbit_their_planets_and_planets_the_sun():
    bodies = catalog()
    assert {bodies[m].parent for m in ("io", "europa", "ganymede", "callisto")} == {"jupiter"}
    assert bodies["titan"].parent == bodies["enceladus"].parent == "saturn"
    assert bodies["triton"].parent == "neptune" and bodies["moon"].parent == "earth"
    assert all(bodies[p].parent == "sun" for p in ("mercury", "venus", "earth", "mars", "jupiter"))


def test_small_moons_have_spheres_of_influence_close_to_their_size():
    # REFERENCES.md (common practice): Phobos and Enceladus have a sphere of influence barely
    # larger than, or smaller than, the body itself.
    bodies = catalog()
    assert bodies["phobos"].sphere_of_influence < bodies["phobos"].radius
    assert bodies["enceladus"].sphere_of_influence < 2.5 * bodies["enceladus"].radius
    assert math.isnan(bodies["sun"].sphere_of_influence)


def test_resolve_body_overrides_and_defines():
    mars = resolve_body("mars", {"mars": {"safe_periapsis_altitude": 120.0}}, origin="x.toml")
    assert mars.safe_periapsis_altitude == 120e3 and mars.sources["safe_periapsis_altitude"] == "set in x.toml"
    assert mars.gm == catalog()["mars"].gm
    # test inputs, roughly Vesta-like (from memory); only the unit conversion is checked
    new = resolve_body("vesta", {"vesta": {"gm": 17.29, "mean_radius": 262.7, "safe_periapsis_altitude": 30.0,
                                           "parent": "sun", "semi_major_axis": 353.3e6}})
    assert new.gm == pytest.approx(17.29e9) and new.parent_gm == catalog()["sun"].gm
    with pytest.raises(CatalogError, match="lacks gm, mean_radius"):
        resolve_body("vesta", {"vesta": {"parent": "sun", "safe_periapsis_altitude": 1.0, "semi_major_axis": 1.0}})

"""The body catalogue against published constants, and its own consistency.

astropy.constants carries the IAU 2015 Resolution B3 *nominal* values: conversion
constants fixed by definition to a few digits, not best estimates.  The checks below
show that the catalogue, rounded to the digits a nominal value states, gives that value.
"""

from __future__ import annotations

import doctest
import math
import tomllib
from importlib import resources

import astropy.constants as const
import pytest
from apsidal.compiler import bodies
from apsidal.compiler.bodies import Body, catalogue, laplace_soi, lookup, names
from hypothesis import given
from hypothesis import strategies as st

REQUIRED = [
    "sun", "mercury", "venus", "earth", "moon", "mars", "jupiter", "saturn", "uranus",
    "neptune", "io", "europa", "ganymede", "callisto", "titan", "triton", "ceres", "pluto",
    "charon",
]  # fmt: skip


def raw_file() -> dict:
    """bodies.toml as stored, read the way the package ships it."""
    text = resources.files("apsidal.compiler").joinpath("bodies.toml").read_text("utf-8")
    return tomllib.loads(text)


def significant(x: float, digits: int) -> float:
    """x rounded to ``digits`` significant digits."""
    return float(f"{x:.{digits - 1}e}")


# --- published constants -----------------------------------------------------------------


# astropy constant, catalogue body, field, digits the nominal value states.  Nominal values
# are exact in SI, so the comparison is made in m and m3/s2.
NOMINAL = [
    # IAU 2015 B3 nominal terrestrial mass parameter 3.986004e14 m3/s2; catalogue IERS
    # Conventions (2010) Table 1.1, 3.986004418e14 m3/s2: all 7 stated digits agree.
    pytest.param("GM_earth", "earth", "gm", 7, id="GM_earth"),
    # IAU 2015 B3 nominal equatorial Earth radius 6 378.1 km; catalogue IERS Conventions
    # (2010) Table 1.1, 6 378.1366 km: all 5 stated digits agree.
    pytest.param("R_earth", "earth", "radius", 5, id="R_earth"),
    # IAU 2015 B3 nominal solar mass parameter 1.3271244e20 m3/s2; catalogue JPL DE440
    # (Park et al. 2021), 1.3271244004127942e20 m3/s2: all 8 stated digits agree.
    pytest.param("GM_sun", "sun", "gm", 8, id="GM_sun"),
    # IAU 2015 B3 nominal solar radius 695 700 km, adopted outright: every digit agrees.
    pytest.param("R_sun", "sun", "radius", 17, id="R_sun"),
    # IAU 2015 B3 nominal Jovian mass parameter 1.2668653e17 m3/s2 (planet without its
    # moons); catalogue JPL satellite solution JUP365, 126 686 531.9 km3/s2: 8 digits agree.
    pytest.param("GM_jup", "jupiter", "gm", 8, id="GM_jup"),
    # IAU 2015 B3 nominal equatorial Jovian radius 71 492 km (1 bar), the WGCCRE 2015 value
    # the catalogue uses: every digit agrees.
    pytest.param("R_jup", "jupiter", "radius", 17, id="R_jup"),
]
TO_SI = {"gm": 1e9, "radius": 1e3}  # km3/s2 -> m3/s2, km -> m


@pytest.mark.parametrize(("constant", "key", "field", "digits"), NOMINAL)
def test_catalogue_rounds_to_the_iau_2015_nominal_value(constant, key, field, digits):
    nominal = getattr(const, constant)
    assert nominal.reference == "IAU 2015 Resolution B 3"
    ours = getattr(lookup(key), field) * TO_SI[field]
    assert significant(ours, digits) == nominal.si.value


def test_earth_takes_the_iers_2010_values():
    # IERS Conventions (2010) Table 1.1: GM = 3.986004418e14 m3/s2, a_E = 6 378 136.6 m,
    # J2 = 1.0826359e-3 (at a_E, the catalogue radius, so no rescaling).
    earth = lookup("earth")
    assert (earth.gm, earth.radius) == (398600.4418, 6378.1366)
    assert earth.j2 == pytest.approx(1.0826359e-3, rel=1e-15)


def test_earth_sphere_of_influence_is_the_textbook_value():
    # Curtis, Orbital Mechanics for Engineering Students, Table A.2 gives about 925 000 km
    # for the Earth's sphere of influence (from memory).
    assert 924_000.0 < lookup("earth").soi < 929_000.0


def test_moon_sphere_of_influence_is_the_textbook_value():
    # Curtis, Orbital Mechanics for Engineering Students, Table A.2 gives about 66 100 km
    # for the Moon's sphere of influence (from memory).
    assert 65_500.0 < lookup("moon").soi < 66_700.0


# --- the catalogue's own consistency ----------------------------------------------------


def test_catalogue_holds_the_required_bodies():
    assert set(REQUIRED) <= set(names())
    assert names()[0] == "sun"


@pytest.mark.parametrize("key", REQUIRED)
def test_every_body_is_physical_and_sourced(key):
    body = catalogue()[key]
    assert body.gm > 0.0 and math.isfinite(body.gm)
    assert body.radius > 0.0 and math.isfinite(body.radius)
    assert body.source.strip()
    assert body.j2 is None or 0.0 < body.j2 < 0.1


@pytest.mark.parametrize("key", [k for k, v in raw_file().items() if "parent" in v])
def test_every_soi_is_laplace_from_the_stored_numbers(key):
    # soi_km is written to the nearest metre, hence the 0.5 m tolerance.
    entry = raw_file()[key]
    parent = raw_file()[entry["parent"]]
    expected = laplace_soi(entry["orbit_sma_km"], entry["gm_km3_s2"], parent["gm_km3_s2"])
    assert entry["soi_km"] == pytest.approx(expected, rel=1e-12, abs=5e-4)
    assert catalogue()[key].soi == entry["soi_km"]
    # A sphere of influence lies inside the orbit and outside the body itself.
    assert entry["radius_km"] < entry["soi_km"] < entry["orbit_sma_km"]


@pytest.mark.parametrize("key", list(raw_file()))
def test_every_stored_value_names_its_source(key):
    entry = raw_file()[key]
    source = entry["source"]
    wanted = {"gm", "radius"} | ({"j2"} if "j2" in entry else set())
    wanted |= {"orbit", "soi"} if "parent" in entry else set()
    assert wanted <= {field for field, text in source.items() if text.strip()}


def test_parents_are_catalogue_bodies_and_only_the_sun_has_none():
    table = catalogue()
    for key, body in table.items():
        if key == "sun":
            assert body.parent is None and body.soi is None
        else:
            assert body.parent in table and body.soi is not None
            assert table[body.parent].gm > body.gm


def test_j2_is_referred_to_the_catalogue_radius():
    # Saturn's J2 is published at 60 330 km (Jacobson et al. 2006); the catalogue keeps the
    # same degree-2 field, J2 * R^2, at its own 60 268 km radius.
    entry = raw_file()["saturn"]
    saturn = lookup("saturn")
    assert saturn.j2 * saturn.radius**2 == pytest.approx(entry["j2"] * entry["j2_radius_km"] ** 2)
    assert saturn.j2 > entry["j2"]


def test_lookup_ignores_case_and_blanks():
    assert lookup("EARTH") is lookup("earth") is lookup("  Earth ")
    assert lookup("Earth").name == "Earth"
    assert lookup("pluto-charon") is None
    assert lookup("") is None


def test_each_body_read_alone_is_the_body_of_the_whole_catalogue():
    # lookup reads one body's own tables until the whole file is needed
    for key, body in catalogue().items():
        alone = bodies._one(key)
        assert alone == body and alone is not None, key
    assert bodies._one("vulcan") is None


def test_a_body_read_alone_stays_the_one_object_once_the_catalogue_is_read():
    import subprocess
    import sys

    code = ("from apsidal.compiler import bodies as b; e = b.lookup('Earth'); "
            "alone = b._table.cache_info().currsize == 0; "
            "print(alone, e is b.lookup('earth') is b.catalogue()['earth'], e == b._one('earth'))")
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                          check=True)
    assert done.stdout.split() == ["True", "True", "True"]


def test_catalogue_is_frozen_and_returns_copies():
    table = catalogue()
    table.pop("earth")
    assert "earth" in catalogue()
    with pytest.raises(AttributeError):
        lookup("earth").gm = 1.0  # type: ignore[misc]
    assert isinstance(lookup("moon"), Body)


def test_module_examples_run():
    result = doctest.testmod(bodies, optionflags=doctest.ELLIPSIS)
    assert result.attempted > 0 and result.failed == 0


# --- laplace_soi ----------------------------------------------------------------------


def test_laplace_soi_by_hand():
    # (1/32)^(2/5) = 2^-2 exactly, so a body 32 times lighter has a quarter of a's radius.
    assert laplace_soi(1000.0, 1.0, 32.0) == pytest.approx(250.0, rel=1e-15)


@pytest.mark.parametrize(
    "args",
    [(0.0, 1.0, 2.0), (-5.0, 1.0, 2.0), (1.0, 0.0, 2.0), (1.0, 1.0, math.nan), (1.0, 3.0, 2.0),
     (math.inf, 1.0, 2.0)],
)  # fmt: skip
def test_laplace_soi_refuses_what_has_no_sphere(args):
    with pytest.raises(ValueError):
        laplace_soi(*args)


positive = st.floats(min_value=1e-6, max_value=1e12, allow_nan=False, allow_infinity=False)


@given(sma=positive, gm=positive, ratio=st.floats(min_value=1e-12, max_value=0.999), k=positive)
def test_laplace_soi_scales_with_the_orbit_and_only_the_mass_ratio(sma, gm, ratio, k):
    soi = laplace_soi(sma, gm * ratio, gm)
    assert 0.0 < soi < sma
    assert laplace_soi(k * sma, gm * ratio, gm) == pytest.approx(k * soi, rel=1e-12)
    assert laplace_soi(sma, k * gm * ratio, k * gm) == pytest.approx(soi, rel=1e-9)

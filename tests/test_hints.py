"""Hints that point the right way: the numbers a user types the way apsidal prints them
or the way the trade writes them, and names and bodies where a user puts them."""

from __future__ import annotations

import pytest
from apsidal.compiler.load import load_text
from apsidal.compiler.steps import Program
from apsidal.lang.errors import PlanError

HEAD = """plan "hints"
around earth
craft c {{
    dry 100 kg
    propellant 50 kg
    engine ion isp 1600 s thrust {thrust}
}}
margin {margin}
start circular {start}
"""


def text(thrust="60 mN", margin="5 %", start="1000 km", body="burn up at periapsis: "
         "apoapsis to 1100 km"):
    return HEAD.format(thrust=thrust, margin=margin, start=start) + body + "\n"


def error(plan: str) -> PlanError:
    with pytest.raises(PlanError) as caught:
        load_text(plan, "h.aps")
    return caught.value


@pytest.mark.parametrize(("thrust", "newtons"), [("60 mN", 0.06), ("250 uN", 250e-6),
                                                 ("250 µN", 250e-6), ("250 μN", 250e-6),
                                                 ("0.2 N", 0.2)])
def test_electric_thruster_units(thrust, newtons):
    # mN and µN are how electric thrusters are rated (common practice)
    program: Program = load_text(text(thrust=thrust), "h.aps")
    assert program.craft.default_engine.thrust == pytest.approx(newtons, rel=1e-12)


def test_margin_as_a_fraction_names_both_readings():
    err = error(text(margin="0.05"))
    assert err.span.line == 8
    assert "`5 %` for a fraction of 0.05" in err.hint and "`0.05 %`" in err.hint


def test_thousands_separator_as_apsidal_prints_it():
    err = error(text(start="1,000 km"))
    assert "thousands separator" in err.message and "`1000`" in err.hint
    err = error(text(start="12,345.5 km"))
    assert "`12345.5`" in err.hint


def test_a_name_with_a_letter_outside_ascii():
    err = error(text(body="burn höher at periapsis: apoapsis to 1100 km"))
    assert "outside ASCII" in err.message and "`hoher`" in err.hint
    assert "expected `{`" not in err.hint


def test_a_body_defined_after_around():
    plan = text().replace("around earth", "around rock\nbody rock {\n    gm 17.3 km3/s2\n"
                          "    radius 260 km\n}")
    plan_moved = plan.replace("around rock\n", "").replace("craft c", "around rock\ncraft c")
    err = error(plan)
    assert "defined on line 3, after this `around`" in err.message
    assert "move `body rock" in err.hint and "define it first" not in err.hint
    assert load_text(plan_moved, "h.aps").body.name == "rock"


def test_ceiling_takes_a_radius_as_every_altitude_does():
    # `ceiling` is an altitude above the equatorial radius by default, like periapsis and
    # apoapsis; `radius` measures from the centre (Earth's equatorial radius 6378.1366 km
    # in the catalogue, IERS Conventions 2010)
    from apsidal.lang.format import format_text

    altitude = load_text(text().replace("margin 5 %", "margin 5 %\nceiling 20000 km"), "h.aps")
    radius = load_text(text().replace("margin 5 %", "margin 5 %\nceiling radius 26378.1366 km"),
                       "h.aps")
    assert altitude.ceiling == pytest.approx(radius.ceiling, abs=1e-9)
    assert radius.ceiling == pytest.approx(26378.1366, abs=1e-9)
    canonical = format_text(text().replace("margin 5 %", "margin 5 %\nceiling radius 9000 km"))
    assert "ceiling radius 9000 km" in canonical
    err = error(text().replace("margin 5 %", "margin 5 %\nceiling radius 7000 km"))
    assert "7000 km radius" in err.message and "`ceiling radius" in err.hint

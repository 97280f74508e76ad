"""The parser: every form of the surface language to its syntax node, spans, comments.

Expected nodes are written with the dataclasses of lang/syntax.py; spans are compared
with ``ANY`` in the table and checked exactly in the tests further down.
"""

from __future__ import annotations

from unittest.mock import ANY

import pytest
from apsidal.lang.parse import keywords, parse, parse_file, statement_keywords
from apsidal.lang.syntax import (
    Around,
    BodyDef,
    Burn,
    Check,
    Coast,
    Comment,
    CraftDef,
    Distance,
    Drop,
    Engine,
    Expect,
    Field,
    Goal,
    Name,
    Option,
    PlanTitle,
    Quantity,
    Setting,
    Start,
    Transfer,
    Where,
)


def q(number: str, unit: str = "") -> Quantity:
    return Quantity(number, unit, ANY)


def alt(number: str, unit: str = "km") -> Distance:
    return Distance(q(number, unit), False, ANY)


def rad(number: str, unit: str = "km") -> Distance:
    return Distance(q(number, unit), True, ANY)


def n(text: str) -> Name:
    return Name(text, ANY)


def f(key: str, value) -> Field:
    return Field(key, value, ANY)


def g(kind: str, value=None) -> Goal:
    return Goal(kind, value, ANY)


def at(kind: str, angle: Quantity | None = None) -> Where:
    return Where(kind, angle, ANY)


def one(text: str):
    statements = parse(text).statements
    assert len(statements) == 1
    return statements[0]


SURFACE = [
    ('plan "Relay craft: drop-off to geostationary slot"',
     PlanTitle("Relay craft: drop-off to geostationary slot", ANY)),
    ('plan "Relay #2"', PlanTitle("Relay #2", ANY)),
    ("around earth", Around(n("earth"), ANY)),
    ("body rock { gm 17.3 km3/s2 radius 262 km }",
     BodyDef(n("rock"), (f("gm", q("17.3", "km3/s2")), f("radius", q("262", "km"))), ANY)),
    ("body rock {\n  gm 17.3 km3/s2\n\n  radius 262 km  # mean\n  soi 1.2e3 km\n  j2 0.0012\n}",
     BodyDef(n("rock"), (f("gm", q("17.3", "km3/s2")), f("radius", q("262", "km")),
                         f("soi", q("1.2e3", "km")), f("j2", q("0.0012"))), ANY)),
    (("craft relay {\n    dry 640 kg\n    propellant 910 kg\n"
      "    engine main isp 321 s thrust 440 N\n    engine trim isp 228 s thrust 22 N\n}"),
     CraftDef(n("relay"), (f("dry", q("640", "kg")), f("propellant", q("910", "kg"))),
              (Engine(n("main"), (f("isp", q("321", "s")), f("thrust", q("440", "N"))), ANY),
               Engine(n("trim"), (f("isp", q("228", "s")), f("thrust", q("22", "N"))), ANY)),
              ANY)),
    ("craft c { dry 1 t propellant 0 kg engine e thrust 1 kN isp 300 s }",
     CraftDef(n("c"), (f("dry", q("1", "t")), f("propellant", q("0", "kg"))),
              (Engine(n("e"), (f("thrust", q("1", "kN")), f("isp", q("300", "s"))), ANY),),
              ANY)),
    ("margin 5 %", Setting("margin", q("5", "%"), ANY)),
    ("margin 150 %", Setting("margin", q("150", "%"), ANY)),
    ("reserve 25 m/s", Setting("reserve", q("25", "m/s"), ANY)),
    ("start circular 400 km inclination 51.6 deg",
     Start("circular", (f("circular", alt("400")), f("inclination", q("51.6", "deg"))), ANY)),
    ("start circular radius 6778 km",
     Start("circular", (f("circular", rad("6778")),), ANY)),
    (("start orbit periapsis 250 km apoapsis 250 km inclination 27 deg raan 110 deg "
      "argp 0 deg anomaly 0 deg"),
     Start("orbit", (f("periapsis", alt("250")), f("apoapsis", alt("250")),
                     f("inclination", q("27", "deg")), f("raan", q("110", "deg")),
                     f("argp", q("0", "deg")), f("anomaly", q("0", "deg"))), ANY)),
    ("start orbit sma 7000 km ecc 0.01",
     Start("orbit", (f("sma", q("7000", "km")), f("ecc", q("0.01"))), ANY)),
    ("start orbit ecc 1.5 periapsis radius 7000 km vinf 3 km/s",
     Start("orbit", (f("ecc", q("1.5")), f("periapsis", rad("7000")),
                     f("vinf", q("3", "km/s"))), ANY)),
    ("burn raise at periapsis: apoapsis to 35786 km           using main",
     Burn(n("raise"), at("periapsis"), (g("apoapsis", alt("35786")),),
          (Option("using", n("main"), ANY),), ANY)),
    ("burn circ  at apoapsis:  periapsis to 35786 km, inclination to 0 deg",
     Burn(n("circ"), at("apoapsis"),
          (g("periapsis", alt("35786")), g("inclination", q("0", "deg"))), (), ANY)),
    ("burn at node: inclination to 0 deg",
     Burn(None, at("node"), (g("inclination", q("0", "deg")),), (), ANY)),
    ("burn up at ascending node: raan to 10 deg",
     Burn(n("up"), at("ascending node"), (g("raan", q("10", "deg")),), (), ANY)),
    ("burn at descending node: inclination to 5 deg",
     Burn(None, at("descending node"), (g("inclination", q("5", "deg")),), (), ANY)),
    ("burn tweak: along 1.5 m/s, cross -0.3 m/s, radial 0 m/s  using trim margin 20 %",
     Burn(n("tweak"), None,
          (g("along", q("1.5", "m/s")), g("cross", q("-0.3", "m/s")),
           g("radial", q("0", "m/s"))),
          (Option("using", n("trim"), ANY), Option("margin", q("20", "%"), ANY)), ANY)),
    ("burn c: circular", Burn(n("c"), None, (g("circular"),), (), ANY)),
    ("burn: circular 500 km", Burn(None, None, (g("circular", alt("500")),), (), ANY)),
    ("burn x: apoapsis to radius 42164 km",
     Burn(n("x"), None, (g("apoapsis", rad("42164")),), (), ANY)),
    ("burn y at anomaly 120 deg: raan to 30 deg",
     Burn(n("y"), at("anomaly", q("120", "deg")), (g("raan", q("30", "deg")),), (), ANY)),
    ("transfer geo: circular 35786 km",
     Transfer(n("geo"), None, (g("circular", alt("35786")),), None, (), ANY)),
    ("transfer geo at node: circular 35786 km, inclination to 0 deg",
     Transfer(n("geo"), at("node"),
              (g("circular", alt("35786")), g("inclination", q("0", "deg"))), None, (), ANY)),
    ("transfer bi: circular 35786 km via apoapsis 120000 km",
     Transfer(n("bi"), None, (g("circular", alt("35786")),), alt("120000"), (), ANY)),
    ("transfer turn: inclination to 90 deg via apoapsis 4000 km using main",
     Transfer(n("turn"), None, (g("inclination", q("90", "deg")),), alt("4000"),
              (Option("using", n("main"), ANY),), ANY)),
    ("transfer plane: raan to 40 deg, inclination to 10 deg via apoapsis radius 1 au",
     Transfer(n("plane"), None, (g("raan", q("40", "deg")), g("inclination", q("10", "deg"))),
              rad("1", "au"), (), ANY)),
    ("transfer t: circular margin 2 %",
     Transfer(n("t"), None, (g("circular"),), None, (Option("margin", q("2", "%"), ANY),),
              ANY)),
    ("coast settle for 2 d", Coast(n("settle"), "for", q("2", "d"), None, ANY)),
    ("coast for 90 min", Coast(None, "for", q("90", "min"), None, ANY)),
    ("coast to apoapsis", Coast(None, "to", None, at("apoapsis"), ANY)),
    ("coast half to anomaly 180 deg",
     Coast(n("half"), "to", None, at("anomaly", q("180", "deg")), ANY)),
    ("coast wait 2 rev", Coast(n("wait"), "rev", q("2"), None, ANY)),
    ("drop deploy 45 kg", Drop(n("deploy"), q("45", "kg"), ANY)),
    ("drop 0.5 t", Drop(None, q("0.5", "t"), ANY)),
    ("expect circular 35786 km within 1 km, inclination 0 deg within 0.01 deg",
     Expect(None, (Check("circular", alt("35786"), "within", q("1", "km"), ANY),
                   Check("inclination", q("0", "deg"), "within", q("0.01", "deg"), ANY)),
            ANY)),
    ("expect leo periapsis 400 km",
     Expect(n("leo"), (Check("periapsis", alt("400"), "within", None, ANY),), ANY)),
    ("expect propellant at least 50 kg",
     Expect(None, (Check("propellant", q("50", "kg"), "at least", None, ANY),), ANY)),
    ("expect mass at most 1200 kg",
     Expect(None, (Check("mass", q("1200", "kg"), "at most", None, ANY),), ANY)),
    ("expect apoapsis at least radius 42000 km, ecc 0.001 within 0.0005, period 1 d",
     Expect(None, (Check("apoapsis", rad("42000"), "at least", None, ANY),
                   Check("ecc", q("0.001"), "within", q("0.0005"), ANY),
                   Check("period", q("1", "d"), "within", None, ANY)), ANY)),
    ("expect sma 7000 km within 500 m, raan 10 deg, argp 0 rad",
     Expect(None, (Check("sma", q("7000", "km"), "within", q("500", "m"), ANY),
                   Check("raan", q("10", "deg"), "within", None, ANY),
                   Check("argp", q("0", "rad"), "within", None, ANY)), ANY)),
]


@pytest.mark.parametrize(("text", "expected"), SURFACE, ids=[s[0][:40] for s in SURFACE])
def test_surface_statement(text, expected):
    assert one(text) == expected


def test_whole_plan_in_order():
    text = "\n".join(t for t, _ in SURFACE) + "\n"
    assert parse(text).statements == tuple(e for _, e in SURFACE)


def test_quantity_keeps_digits_as_written():
    burn = one("burn b: along +1.50 m/s, cross -.3 m/s, radial 1.2e-3 km/s")
    assert [x.value.number for x in burn.goals] == ["+1.50", "-.3", "1.2e-3"]
    assert [x.value.value for x in burn.goals] == [1.5, -0.3, 0.0012]
    assert burn.goals[2].value.internal() == pytest.approx(0.0012)


def test_unit_needs_no_space():
    assert one("reserve 25m/s").value == q("25", "m/s")


@pytest.mark.parametrize("name", ["geo-slot_2", "_tmp", "a", "Burn-1", "x__y--z"])
def test_names_with_dash_and_underscore(name):
    burn = one(f"burn {name}: circular")
    assert burn.name.text == name
    assert one(f"craft {name} {{ dry 1 kg }}").name.text == name


def test_a_keyword_prefix_is_still_a_name():
    # `to-orbit` and `node2` start with keywords but are whole words, so names
    assert one("coast to-orbit for 1 h").name.text == "to-orbit"
    assert one("burn node2: circular").name.text == "node2"


def test_spans_of_a_burn():
    text = "around earth\nburn raise at periapsis: apoapsis to 35786 km  using main\n"
    burn = parse(text).statements[1]
    assert (burn.span.line, burn.span.column, burn.span.end_line) == (2, 1, 2)
    assert text[burn.span.start:burn.span.end] == (
        "burn raise at periapsis: apoapsis to 35786 km  using main")
    assert (burn.name.span.column, burn.name.span.end_column) == (6, 11)
    assert text[burn.where.span.start:burn.where.span.end] == "periapsis"
    goal = burn.goals[0]
    assert text[goal.span.start:goal.span.end] == "apoapsis to 35786 km"
    assert (goal.value.span.line, goal.value.span.column) == (2, 38)
    assert text[goal.value.quantity.span.start:goal.value.quantity.span.end] == "35786 km"
    assert text[burn.options[0].span.start:burn.options[0].span.end] == "using main"


def test_span_of_a_block_runs_to_its_brace():
    text = "craft relay {\n  dry 640 kg\n  engine main isp 321 s thrust 440 N\n}\n"
    craft = one(text)
    assert (craft.span.line, craft.span.end_line, craft.span.end_column) == (1, 4, 2)
    engine = craft.engines[0]
    assert (engine.span.line, engine.span.column) == (3, 3)
    assert text[engine.span.start:engine.span.end] == "engine main isp 321 s thrust 440 N"


def test_span_of_a_start_field_and_a_check():
    text = "start circular 400 km inclination 51.6 deg\nexpect leo mass at least 1 kg\n"
    start, expect = parse(text).statements
    circular = start.fields[0]
    assert text[circular.span.start:circular.span.end] == "circular 400 km"
    check = expect.checks[0]
    assert text[check.span.start:check.span.end] == "mass at least 1 kg"
    assert (check.span.line, check.span.column) == (2, 12)


def test_span_of_a_revolution_count():
    coast = one("coast wait 12 rev")
    assert (coast.duration.span.column, coast.duration.span.end_column) == (12, 14)


def test_comments_are_collected_with_line_and_trailing_flag():
    text = (
        "# A fictional relay craft.\n"
        'plan "Relay #1"   # the title holds a hash\n'
        "\n"
        "craft relay {   # block opens\n"
        "    # inside, alone\n"
        "    dry 640 kg\n"
        "}\n"
        "   # indented, alone\n"
        "burn b: circular #tight"
    )
    plan = parse(text)
    assert plan.comments == (
        Comment("# A fictional relay craft.", 1, False),
        Comment("# the title holds a hash", 2, True),
        Comment("# block opens", 4, True),
        Comment("# inside, alone", 5, False),
        Comment("# indented, alone", 8, False),
        Comment("#tight", 9, True),
    )
    assert plan.statements[0] == PlanTitle("Relay #1", ANY)


def test_comments_keep_no_carriage_return():
    plan = parse("around earth  # home\r\nmargin 5 %\r\n")
    assert plan.comments == (Comment("# home", 1, True),)
    assert len(plan.statements) == 2


@pytest.mark.parametrize("text", ["", "\n\n", "# only a comment\n", "  \n# a\n\n  # b"])
def test_empty_plan_has_no_statements(text):
    plan = parse(text)
    assert plan.statements == ()
    assert plan.source.text == text


def test_last_line_needs_no_newline():
    assert parse("around earth\nmargin 5 %").statements[1] == Setting("margin", q("5", "%"), ANY)


def test_parse_file_reads_utf8_and_names_the_path(tmp_path):
    path = tmp_path / "relay.aps"
    path.write_bytes('\ufeffplan "Relais über Äquator"\naround earth\n'.encode())
    plan = parse_file(path)
    assert plan.source.path == str(path)
    assert plan.statements[0] == PlanTitle("Relais über Äquator", ANY)


def test_plan_source_and_steps():
    plan = parse("around earth\nburn b: circular\ncoast for 1 h\nmargin 1 %\n", "p.aps")
    assert plan.source.path == "p.aps"
    assert [type(s).__name__ for s in plan.steps()] == ["Burn", "Coast"]


def test_keyword_sets():
    words = keywords()
    assert {"apoapsis", "periapsis", "node", "ascending", "within", "least", "j2"} <= words
    assert not words & {"km", "m/s", "%", "{", ":"}
    assert statement_keywords() == ("plan", "around", "body", "craft", "burns", "steering",
                                    "gravity", "margin", "reserve", "ceiling", "drift", "epoch",
                                    "start", "burn", "transfer", "leg", "coast", "drop",
                                    "entry", "allow", "expect", "trade")


def test_the_quantities_parsed_convert_to_internal_units():
    plan = parse("reserve 25 m/s\nmargin 5 %\nstart circular 1 au\ncoast for 2 h\n")
    values = [s.value.internal() if isinstance(s, Setting) else None for s in plan.statements]
    assert values[:2] == [pytest.approx(0.025), pytest.approx(0.05)]
    assert plan.statements[2].fields[0].value.quantity.internal() == 149_597_870.7
    assert plan.statements[3].duration.internal() == 7200.0

"""Bad input through the real command line: every kind gives exit 2 and a located message.

Each row of CASES is a plan (text or raw bytes) and what `apsidal run` must say about it:
the `file:line:col` (exact), the text the caret points at, key phrases of the message,
and a piece of the hint saying what would work.  Every row also checks that no traceback
and no internal error reaches stderr, and that whatever partial report reaches stdout is
JSON without NaN or infinity.  A few rows run in a subprocess as well, to prove the same
from outside the interpreter.

The numbers a message must state (altitudes, latitudes, propellant) are worked out in
this file from two-body formulas, not copied from the compiler's output.

A plan that misses a whole statement (no craft, no start, nothing at all) is reported at
the top of the file, line 1, column 1.
"""

from __future__ import annotations

import math
import os
import re
import subprocess
import sys
from dataclasses import dataclass

import pytest
from apsidal.compiler import bodies
from apsidal.compiler.cli import main
from strictjson import strict_json

# --- the plan the rows vary -------------------------------------------------------------
#
# Line 1-8 the scene, line 9 the start orbit, line 10 on the steps.

HEAD = """\
plan "Probe"
around earth
craft probe {
    dry 500 kg
    propellant 300 kg
    engine main isp 300 s thrust 400 N
    engine trim isp 220 s thrust 20 N
}
"""
START = "start circular 400 km inclination 30 deg"


def plan(*steps: str, start: str = START, head: str = HEAD) -> str:
    return head + start + "\n" + "".join(s + "\n" for s in steps)


def scene(old: str, new: str) -> str:
    """The plan with one piece of its scene (lines 1-8) rewritten."""
    assert old in HEAD
    return plan(head=HEAD.replace(old, new))


# --- numbers the messages must state, worked out here ----------------------------------

EARTH = bodies.lookup("earth")
MU, RE = EARTH.gm, EARTH.radius
G0 = 9.80665  # standard gravity, m/s^2 (CGPM 1901, exact)
R400 = RE + 400.0


def _latitude_after(seconds: float, inclination_deg: float) -> float:
    """Latitude on a circular orbit `seconds` after the ascending node:
    sin(lat) = sin(i) sin(u), u = n t (spherical trigonometry, from memory)."""
    u = 2 * math.pi * seconds / (2 * math.pi * math.sqrt(R400**3 / MU))
    return math.degrees(math.asin(math.sin(math.radians(inclination_deg)) * math.sin(u)))


LAT_20_MIN = _latitude_after(1200.0, 30.0)

# An open orbit with ecc 1.5 has its asymptote at arccos(-1 / e) (from memory).
ASYMPTOTE_1_5 = math.degrees(math.acos(-1 / 1.5))

HYPERBOLA = "start orbit periapsis 400 km ecc 1.5"
ELLIPSE = "start orbit periapsis 400 km apoapsis 900 km"  # argp 0: its periapsis on the x axis

# The shortest period of a closed orbit through a point at radius r: sma r / 2 (vis-viva
# with the craft at rest), T = 2 pi sqrt((r / 2)^3 / mu) (Kepler's third law).
SHORTEST_PERIOD_400 = 2 * math.pi * math.sqrt((R400 / 2) ** 3 / MU)

# Phasing 180 deg ahead in one revolution from a 400 km circle needs half its period, an
# orbit of sma R400 / 2^(2/3) whose periapsis is opposite the burn (Kepler's third law);
# the lowest phasing orbit the surface allows has its periapsis on it, sma (RE + R400) / 2,
# and N revolutions clear the surface once N (T - T_min) > T / 2.
T400 = 2 * math.pi * math.sqrt(R400**3 / MU)
HOP_PERIAPSIS = 2 * R400 / 2 ** (2 / 3) - R400 - RE
_T_MIN = 2 * math.pi * math.sqrt(((RE + R400) / 2) ** 3 / MU)
HOP_FEWEST = math.floor((T400 / 2) / (T400 - _T_MIN)) + 1


def _down_to(alt: float) -> float:
    """Time from the apoapsis of a 50 x 400 km orbit down to altitude ``alt`` (Kepler's
    equation, from memory: M = E - e sin E, with E from r = a (1 - e cos E))."""
    rp, ra, r = RE + 50.0, R400, RE + alt
    a, e = (rp + ra) / 2, (ra - rp) / (ra + rp)
    E = 2 * math.pi - math.acos((1 - r / a) / e)  # inbound: past apoapsis, before periapsis
    M = E - e * math.sin(E)
    return (M - math.pi) * math.sqrt(a**3 / MU)


DOWN_TO_120_S = _down_to(120.0)


def col(step: str, under: str) -> int:
    """The column (from 1) where ``under`` first stands in a step's line."""
    return step.index(under) + 1

# --- the table ---------------------------------------------------------------------------


@dataclass(frozen=True)
class Bad:
    """One kind of bad input and what the error must say about it.

    line/col None: some `file:line:col` must be given, but no one place is the answer
    (a missing statement).  numbers: (regex with groups, expected values) pairs read from
    the message.  absent: words that must not appear in the error (a misleading hint).
    """

    id: str
    text: str | bytes
    line: int | None
    col: int | None
    under: str  # the text the caret starts under ("" when not checked)
    phrases: tuple[str, ...]
    hint: str
    numbers: tuple[tuple[str, tuple[float, ...]], ...] = ()
    absent: tuple[str, ...] = ()
    fmt: str = "json"


CASES = [
    # --- text that is not a plan -------------------------------------------------------
    Bad("empty-file", "", 1, 1, "", ("the plan is empty",), "around"),
    Bad("only-comments", "# a plan to come\n   # later\n\n", 1, 1, "",
        ("the plan is empty",), "around"),
    Bad("nul-byte", 'plan "Probe"\naround ea\x00rth\n', 2, 10, "",
        ("NUL byte", "binary file"), "plain UTF-8 text"),
    Bad("binary-garbage", b'\xff\xfe\x00\x01\x89PNG\r\n\x1a\n\x00\x00', 1, 1, "",
        ("not UTF-8", "0xFF"), "UTF-8"),
    Bad("invalid-utf8", b'plan "caf\xe9 relay"\naround earth\n', 1, 10, "",
        ("not UTF-8", "0xE9"), "saved as UTF-8"),
    Bad("control-character", plan("burn a: along\x0b 1 m/s"), 10, 14, "",
        ("control character U+000B",), "plain UTF-8 text"),
    # --- syntax, spelling, units ---------------------------------------------------------
    Bad("syntax-missing-colon", plan("burn raise at periapsis apoapsis to 1000 km"), 10, 25,
        "apoapsis", ("`burn` needs `:` before its goals",), "burn raise at periapsis: apoapsis"),
    Bad("misspelt-goal-keyword", plan("burn raise at periapsis: apoapsys to 1000 km"), 10, 26,
        "apoapsys", ("unexpected `apoapsys`",), "did you mean `apoapsis`?"),
    Bad("misspelt-statement", plan("brun raise at periapsis: apoapsis to 1000 km"), 10, 1,
        "brun", ("unexpected `brun`",), "did you mean `burn`?"),
    # lark's example matching used to fail with a TypeError here (an internal error)
    Bad("brace-after-place", plan("coast to apoapsis{"), 10, 18, "{", ("unexpected `{`",),
        "expected"),
    Bad("unterminated-title", 'plan "Probe\naround earth\n', 1, 6, '"Probe',
        ("unterminated string",), 'plan "..."'),
    Bad("unclosed-craft-block", plan(head=HEAD.replace("}\n", "")), 8, 1, "start",
        ("the `craft` block is not closed",), "add `}`"),
    Bad("unknown-unit", plan("burn raise at periapsis: apoapsis to 1000 kms"), 10, 43, "kms",
        ("unknown unit `kms`",), "did you mean `km`?"),
    Bad("unknown-unit-crlf", plan("burn raise at periapsis: apoapsis to 1000 kms").replace(
        "\n", "\r\n"), 10, 43, "kms", ("unknown unit `kms`",), "did you mean `km`?"),
    Bad("wrong-dimension-goal", plan("burn raise at periapsis: apoapsis to 1000 m/s"), 10, 38,
        "1000 m/s", ("needs a length", "got a speed"), "`1000 km`"),
    Bad("wrong-dimension-margin", scene('}\n', '}\nmargin 5 kg\n'), 9, 8, "5 kg",
        ("margin needs a ratio", "got a mass"), "`5 %`"),
    Bad("wrong-dimension-coast", plan("coast wait for 3 km"), 10, 16, "3 km",
        ("needs a time", "got a length"), "`3 s`"),
    Bad("number-out-of-range", plan("burn a: along 1e999 m/s"), 10, 15, "1e999",
        ("out of range",), "ordinary number"),
    Bad("keyword-as-step-name", plan("burn apoapsis: along 5 m/s"), 10, 6, "apoapsis",
        ("is a keyword and cannot name a step",), "choose another name"),
    Bad("trade-missing-colon", plan("trade size vary raise.apoapsis 1..2 km"), 10, 12, "vary",
        ("unexpected `vary`",), "expected `:`"),
    Bad("trade-spaced-range", plan("trade size: vary raise.apoapsis 1 .. 2 km"), 10, 35, ".",
        ("unexpected character `.`",), "a number"),
    Bad("no-revolutions", plan("coast wait 0 rev"), 10, 12, "0",
        ("a positive number of revolutions",), "`0.5 rev`"),
    # --- the craft and the body -------------------------------------------------------------
    Bad("negative-dry-mass", scene("dry 500 kg", "dry -500 kg"), 4, 9, "-500 kg",
        ("dry mass must be positive", "-500 kg"), "greater than zero"),
    Bad("negative-propellant", scene("propellant 300 kg", "propellant -3 kg"), 5, 16, "-3 kg",
        ("propellant cannot be negative", "-3 kg"), "zero or more"),
    Bad("zero-thrust", scene("thrust 400 N", "thrust 0 N"), 6, 34, "0 N",
        ("thrust must be positive", "0 N"), "greater than zero"),
    Bad("unknown-craft-field", scene("dry 500 kg", "dyr 500 kg"), 4, 5, "dyr",
        ("unexpected `dyr`",), "did you mean `dry`?"),
    Bad("unknown-body-field", 'body rock { gm 17 km3/s2 raduis 262 km }\n' + plan(
        head=HEAD.replace("around earth", "around rock")), 1, 26, "raduis",
        ("unexpected `raduis`",), "did you mean `radius`?"),
    Bad("body-without-radius", 'body rock { gm 17 km3/s2 }\n' + plan(
        head=HEAD.replace("around earth", "around rock")), 1, 1, "body",
        ("body `rock` needs `radius`",), "radius 262 km"),
    Bad("craft-without-engine", scene(
        "    engine main isp 300 s thrust 400 N\n    engine trim isp 220 s thrust 20 N\n", ""),
        3, 1, "craft", ("craft `probe` has no engine",), "engine main isp"),
    Bad("engine-defined-twice", scene("engine trim", "engine main"), 7, 12, "main",
        ("engine `main` is defined twice",), ""),
    Bad("unknown-body", scene("around earth", "around eart"), 2, 8, "eart",
        ("unknown body `eart`",), "did you mean `earth`?"),
    Bad("unknown-engine", plan("burn raise at periapsis: apoapsis to 1000 km using mian"),
        10, 52, "mian", ("craft `probe` has no engine `mian`",), "did you mean `main`?"),
    # --- the plan's statements ----------------------------------------------------------------
    Bad("duplicate-step-name", plan("burn raise at periapsis: apoapsis to 1000 km",
                                    "burn raise at apoapsis: periapsis to 1000 km"),
        11, 6, "raise", ("step name `raise` is used twice",), "the first is on line 10"),
    Bad("start-twice", plan(START), 10, 1, "start", ("`start` is given twice",),
        "the first is on line 9"),
    Bad("start-after-a-step", HEAD + "burn a: along 1 m/s\n" + START + "\n", 10, 1, "start",
        ("`start` must come before the first step",), "move the start orbit above"),
    Bad("no-craft", 'plan "Probe"\naround earth\n' + START + "\n", 1, 1, "",
        ("the plan has no craft",), "craft NAME {"),
    Bad("no-start", HEAD, 1, 1, "", ("the plan has no start orbit",),
        "start circular 400 km"),
    Bad("no-around", scene("around earth\n", ""), 1, 1, "",
        ("which body it flies around",), "around earth"),
    # --- the start orbit -------------------------------------------------------------------
    Bad("start-periapsis-above-apoapsis",
        plan(start="start orbit periapsis 900 km apoapsis 400 km"), 9, 13, "periapsis 900 km",
        ("periapsis is above the apoapsis",), "swap"),
    Bad("start-under-the-surface",
        plan(start="start orbit periapsis -100 km apoapsis 400 km"), 9, 13, "periapsis -100",
        ("under the surface", "-100.000 km"), "above the equatorial radius"),
    Bad("start-radius-under-the-surface", plan(start="start circular radius 6000 km"),
        9, 7, "circular radius 6000 km", ("under the surface",), "`radius X` gives a radius",
        numbers=((r"periapsis \((-?[\d.]+) km altitude\)", (6000.0 - RE,)),)),
    Bad("start-shape-incomplete", plan(start="start orbit periapsis 400 km"), 9, 1, "start",
        ("needs its size and shape", "`periapsis`"), "`sma` and `ecc`"),
    Bad("start-inclination-out-of-range",
        plan(start="start circular 400 km inclination -10 deg"), 9, 23, "inclination -10",
        ("is outside 0 to 180 deg", "-10"), "retrograde"),
    Bad("open-start-beyond-asymptote", plan(start=HYPERBOLA + " anomaly 140 deg"), 9, 38,
        "anomaly 140 deg", ("beyond this open orbit's asymptote",), "",
        numbers=((r"\|anomaly\| < ([\d.]+) deg", (ASYMPTOTE_1_5,)),)),
    # --- goals that cannot be met where the burn stands ------------------------------------
    Bad("goal-under-the-surface", plan("burn down at apoapsis: periapsis to -200 km"),
        10, 24, "periapsis to -200 km", ("periapsis target", "is under the surface", "-200"),
        "altitudes are above the equatorial radius"),
    Bad("goal-radius-under-the-surface", plan("burn dive: periapsis to radius 5000 km"),
        10, 12, "periapsis to radius", ("periapsis target", "is under the surface", "5000"),
        "`radius X` gives a radius"),
    Bad("periapsis-target-above-altitude", plan("burn up: periapsis to 900 km"), 10, 1,
        "burn up", ("up:", "above the current altitude"), "at apoapsis",
        numbers=((r"periapsis ([\d.]+) km is above the current altitude ([\d.]+) km",
                  (900.0, 400.0)),)),
    Bad("apoapsis-target-below-altitude", plan("burn down: apoapsis to 200 km"), 10, 1,
        "burn down", ("down:", "below the current altitude"), "at periapsis",
        numbers=((r"apoapsis ([\d.]+) km is below the current altitude ([\d.]+) km",
                  (200.0, 400.0)),)),
    Bad("inclination-below-latitude", plan("coast drift for 20 min",
                                           "burn flat: inclination to 0 deg"),
        11, 1, "burn flat", ("flat:", "cannot be reached at latitude"), "`at node`",
        numbers=((r"latitude ([\d.]+) deg", (LAT_20_MIN,)),)),
    Bad("inclination-goal-out-of-range", plan("burn tilt at node: inclination to 200 deg"),
        10, 20, "inclination to 200 deg", ("is outside 0 to 180 deg", "200"),
        "retrograde"),
    Bad("plane-not-through-position", plan("burn tilt: inclination to 40 deg, raan to 200 deg"),
        10, 1, "burn tilt", ("does not contain the craft's position",),
        "burn `at crossing`"),
    Bad("raan-alone-off-the-crossing", plan("burn swing at ascending node: raan to 90 deg"),
        10, 1, "burn swing", ("swing:", "the inclination kept", "does not contain"),
        "burn `at crossing`"),
    Bad("raan-alone-from-the-equator", plan("burn swing: raan to 90 deg",
                                            start="start circular 400 km"),
        10, 1, "burn swing", ("equatorial orbit has no node line",), "inclination to I, raan"),
    Bad("crossing-without-raan", plan("burn tilt at crossing: inclination to 40 deg"),
        10, 14, "crossing", ("`at crossing` needs a `raan to` goal",), "`at node`"),
    Bad("crossing-on-a-coast", plan("coast wait to crossing"), 10, 15, "crossing",
        ("a coast has no plane to cross",), "`at crossing`"),
    Bad("tangential-with-both-apsides",
        plan("burn b: periapsis to 300 km, apoapsis to 900 km tangential"), 10, 49,
        "tangential", ("`tangential` goes with one apsis goal",), "drop `tangential`"),
    Bad("tangential-on-a-transfer", plan("transfer t: circular 900 km tangential"), 10, 29,
        "tangential", ("not of a transfer",), "drop it"),
    Bad("tangential-periapsis-out-of-reach",
        plan("burn up at periapsis: apoapsis to 9000 km",
             "burn low at anomaly 90 deg: periapsis to 2900 km tangential"), 11, 1, "burn low",
        ("cannot be reached keeping the flight-path angle",), "leave out `tangential`"),
    Bad("three-burn-plane-change-from-an-open-orbit",
        plan("transfer t at periapsis: inclination to 60 deg via apoapsis 9000 km",
             start=HYPERBOLA), 10, 1, "transfer t", ("starts from a closed orbit",),
        "capture first"),
    Bad("apoapsis-on-hyperbola", plan("burn back at apoapsis: periapsis to 300 km",
                                      start=HYPERBOLA), 10, 1, "burn back",
        ("back:", "no apoapsis on an open orbit", "1.5"), "`at periapsis`"),
    Bad("revolutions-on-hyperbola", plan("coast wait 2 rev", start=HYPERBOLA), 10, 1,
        "coast wait", ("wait:", "has no revolutions"), "coast `for` a time"),
    Bad("periapsis-already-passed", plan("burn brake at periapsis: apoapsis to 5000 km",
                                         start=HYPERBOLA + " anomaly 30 deg"),
        10, 1, "burn brake", ("brake:", "periapsis already passed", "30.000 deg", "outbound"),
        "burn here"),
    Bad("step-name-inside-message", plan("coast c to anomaly 170 deg", start=HYPERBOLA),
        10, 1, "coast c", ("c: ", "never reaches anomaly 170 deg"), "burn here"),
    Bad("circular-away-from-radius", plan("burn ring: circular 500 km"), 10, 1, "burn ring",
        ("ring:", "one burn can only circularise at the current radius"),
        "transfer NAME: circular 500 km",
        numbers=((r"needs the craft at that altitude, but it is at ([\d.]+) km", (400.0,)),)),
    # --- propellant and mass ----------------------------------------------------------------
    Bad("fuel-without-oxidiser", scene("propellant 300 kg", "fuel 300 kg"), 5, 5, "fuel",
        ("`fuel` needs `oxidiser` beside it",), "oxidiser 0 kg"),
    Bad("propellant-and-components", scene("propellant 300 kg",
                                           "propellant 300 kg fuel 1 kg oxidiser 1 kg"),
        5, 23, "fuel", ("`propellant` or its components",), "keep the components"),
    Bad("components-without-a-two-component-engine",
        scene("propellant 300 kg", "fuel 100 kg oxidiser 200 kg"), 5, 5, "fuel",
        ("needs a two-component engine",), "mixture 1.65"),
    Bad("residual-above-the-load", scene("propellant 300 kg", "propellant 300 kg residual 400 kg"),
        5, 23, "residual", ("is more than the load",), "cannot be used"),
    Bad("statistical-on-a-burn", plan("burn b: along 5 m/s statistical"), 10, 21,
        "statistical", ("`statistical` marks an allowance",), "drop it"),
    Bad("allowance-with-a-dimension-slip", plan("allow keep 50 kg"), 10, 12, "50 kg",
        ("allowance needs a speed",), "m/s"),
    Bad("transfer-under-the-surface", plan("transfer t: circular -100 km"), 10, 13,
        "circular -100 km", ("the transfer's target is under the surface",),
        "altitudes (`periapsis`, `apoapsis`, `circular`, `via apoapsis`, `ceiling`) are above"),
    Bad("bi-elliptic-via-below-target", plan("transfer t: circular 9000 km via apoapsis 5000 km"),
        10, 43, "5000 km", ("must lie beyond the target orbit",),
        "`via apoapsis radius X` gives a radius"),
    Bad("soi-inside-the-body", plan(head=HEAD.replace("around earth",
                                                      "body rock { gm 1 km3/s2 radius 300 km "
                                                      "soi 200 km }\naround rock")),
        2, 39, "soi 200 km", ("must be larger than the radius",), "from the body's centre"),
    Bad("drop-more-than-dry-mass", plan("drop junk 600 kg"), 10, 1, "drop junk",
        ("junk drops 600.000 kg", "holds only 500.000 kg"), "drop less"),
    Bad("zero-drop", plan("drop junk 0 kg"), 10, 11, "0 kg", ("drop mass must be positive",),
        "greater than zero"),
    Bad("negative-coast", plan("coast wait for -3 h"), 10, 16, "-3 h",
        ("coast duration must be positive",), "greater than zero"),
    # --- transfers and goals that do not fit together -----------------------------------------
    Bad("transfer-without-altitude", plan("transfer go: circular"), 10, 14, "circular",
        ("a transfer needs the target altitude",), "transfer geo: circular 35786 km"),
    Bad("transfer-without-any-goal", plan("transfer go:"), 10, 13, "",
        ("unexpected end of line",), "`circular`", absent=("`along`", "`apoapsis`")),
    Bad("transfer-with-apsis-goal", plan("transfer go: apoapsis to 5000 km"), 10, 14,
        "apoapsis to", ("a transfer takes `circular`", "not `apoapsis`"), "use a `burn`"),
    Bad("plane-transfer-without-via", plan("transfer turn: inclination to 90 deg"), 10, 1,
        "transfer turn", ("needs `via apoapsis ALT`",), "at node: inclination to"),
    Bad("bielliptic-via-below-target",
        plan("transfer go: circular 35786 km via apoapsis 20000 km"), 10, 45, "20000 km",
        ("`via apoapsis` must lie beyond the target orbit",), "above 35786 km"),
    Bad("goals-mixed-with-components", plan("burn mix: apoapsis to 1000 km, along 5 m/s"),
        10, 11, "apoapsis to 1000 km", ("either goals or explicit components, not both",),
        "split it into two burns"),
    Bad("circular-with-apsis-goal", plan("burn a: circular, apoapsis to 900 km"), 10, 9,
        "circular", ("`circular` already sets both apsides",), "drop `circular`"),
    Bad("goal-given-twice", plan("burn a: along 1 m/s, along 2 m/s"), 10, 22, "along 2",
        ("`along` is given twice in one step",), "keep one `along`"),
    Bad("option-given-twice", plan("burn a: apoapsis to 1000 km using main using trim"),
        10, 40, "using trim", ("`using` is given twice in one step",), "keep one"),
    Bad("fixed-and-movable", plan("burn a: along 1 m/s fixed movable"), 10, 27, "movable",
        ("cannot be both `fixed` and `movable`",), "keep the one you mean"),
    Bad("ceiling-below-start", plan(start="ceiling 100 km\n" + START), 9, 1, "ceiling",
        ("the ceiling (100 km altitude) is below the start orbit",),
        "`ceiling radius 7400 km` is from the centre"),
    # --- finite burns (tests/test_finite.py has the physics) ---------------------------------
    Bad("burns-unknown-choice", plan(start="burns finit\n" + START), 9, 7, "finit",
        ("unknown `burns` choice `finit`",), "did you mean `finite`? `burns` is `impulsive` or "
        "`finite`"),
    Bad("steering-unknown-choice", plan(start="burns finite\nsteering prograde\n" + START),
        10, 10, "prograde", ("unknown `steering` choice `prograde`",),
        "`steering` is `velocity` or `inertial`"),
    Bad("steering-without-finite-burns", plan(start="steering inertial\n" + START), 9, 1,
        "steering inertial", ("`steering` sets the thrust direction of finite burns",),
        "add `burns finite`"),
    Bad("burns-given-twice", plan(start="burns finite\nburns impulsive\n" + START), 10, 1,
        "burns impulsive", ("`burns` is given twice",), "keep one"),
    Bad("finite-burn-a-spiral", plan("burn a: apoapsis to 30000 km using trim",
                                     start="burns finite\n" + START), 11, 1, "burn a",
        ("a: flown as a finite burn of 20 N", "within 720 deg of thrust arc",
         "a low-thrust spiral"),
        "price this plan's burns impulsive (`burns impulsive`)"),
    # --- phasing, places and the way down to an entry ----------------------------------------
    Bad("phasing-under-the-surface", plan(HOP := "transfer hop: phase 180 deg in 1 rev"),
        10, 1, "transfer hop", ("hop:", "needs a phasing orbit of period",
                                "under the surface"),
        f"`phase 180 deg in {HOP_FEWEST} rev`",
        numbers=((r"period ([\d.]+) s \(the orbit's is ([\d.]+) s\)", (T400 / 2, T400)),
                 (r"periapsis falls to (-?[\d.]+) km altitude", (HOP_PERIAPSIS,)))),
    Bad("phasing-from-an-open-orbit", plan("transfer hop: phase 30 deg in 1 rev",
                                           start=HYPERBOLA), 10, 1, "transfer hop",
        ("comes back to a closed orbit", "open"), "capture first"),
    Bad("phasing-with-another-goal", plan(s := "transfer hop: phase 30 deg in 1 rev, circular 500 km"),
        10, col(s, "circular"), "circular 500 km", ("takes no `circular` goal",),
        "change the orbit in another step"),
    Bad("phasing-via-apoapsis", plan(s := "transfer hop: phase 30 deg in 1 rev via apoapsis 900 km"),
        10, col(s, "900 km"), "900 km", ("has no `via apoapsis`",), "more revolutions"),
    Bad("phasing-at-either-node", plan(s := "transfer hop at node: phase 30 deg in 1 rev"),
        10, col(s, "node"), "node", ("needs one point",), "`at ascending node`"),
    Bad("phasing-a-full-turn", plan(s := "transfer hop: phase 360 deg in 2 rev"),
        10, col(s, "360"), "360 deg", ("less than a full turn",), "between -360 and 360 deg"),
    Bad("phasing-half-a-revolution", plan(s := "transfer hop: phase 30 deg in 1.5 rev"),
        10, col(s, "1.5"), "1.5", ("a whole number of times",), "`in 2 rev`"),
    Bad("phase-angle-as-a-length", plan(s := "transfer hop: phase 30 km in 2 rev"),
        10, col(s, "30 km"), "30 km", ("phase angle needs an angle", "got a length"),
        "`30 deg`"),
    Bad("radius-never-reached", plan(s := "coast up to 900 km"), 10, 1, "coast up",
        ("up:", "never reaches 900 km"), "between its periapsis and apoapsis",
        numbers=((r"from periapsis ([\d.]+) km to apoapsis ([\d.]+) km", (400.0, 400.0)),)),
    Bad("radius-passed-on-an-open-orbit", plan("coast back to 500 km",
                                               start=HYPERBOLA + " anomaly 60 deg"),
        10, 1, "coast back", ("back:", "has passed 500 km", "never comes back"),
        "a radius ahead of the craft"),
    Bad("next-periapsis-on-an-open-orbit", plan("coast again to next periapsis",
                                                start=HYPERBOLA),
        10, 1, "coast again", ("again:", "never reaches next periapsis"), "burn here"),
    Bad("next-crossing", plan(s := "burn b at next crossing: raan to 40 deg"),
        10, col(s, "next"), "next crossing", ("`next` takes the next pass",), "drop `next`"),
    Bad("radius-place-under-the-surface", plan(s := "coast down to -10 km"),
        10, col(s, "-10"), "-10 km", ("at or under the surface",), "`entry at 0 km`"),
    Bad("step-after-entry", plan("burn down at periapsis: periapsis to 50 km",
                                 "entry at 120 km", "drop junk 1 kg"),
        12, 1, "drop junk", ("nothing may follow `entry`", "line 11"), "before the `entry`"),
    Bad("entry-under-the-surface", plan(s := "entry at -5 km"), 10, col(s, "-5"), "-5 km",
        ("the entry interface (-5 km) is under the surface",), "`entry at 0 km`"),
    Bad("entry-as-an-angle", plan(s := "entry at 120 deg"), 10, col(s, "120"), "120 deg",
        ("entry interface needs a length", "got an angle"), "`120 km`"),
    Bad("entry-never-reached", plan("entry fall at 120 km"), 10, 1, "entry fall",
        ("fall:", "never comes down to the entry interface (120 km)"),
        "lower the periapsis under the interface",
        numbers=((r"periapsis is at ([\d.]+) km altitude", (400.0,)),)),
    Bad("entry-leaving-on-an-open-orbit",
        plan("entry fall at 120 km", start="start orbit periapsis 50 km ecc 1.5 anomaly 30 deg"),
        10, 1, "entry fall", ("fall:", "leaving on an open orbit"), "turn the craft back"),
    Bad("entry-from-under-the-interface",
        plan("burn up at periapsis: apoapsis to 1200 km", "entry fall at 120 km",
             start="start orbit periapsis 100 km apoapsis 1000 km"),
        11, 1, "entry fall", ("fall:", "already under the entry interface (120 km)"),
        "end the plan with `entry` before",
        numbers=((r"it is at ([\d.]+) km altitude", (100.0,)),)),
    Bad("coast-through-the-interface",
        plan("burn down: periapsis to 50 km", "coast wait for 2 h", "entry at 120 km"),
        11, 1, "coast wait", ("wait:", "comes down through the entry interface (120 km)",
                              "before it ends (7200.000 s)"), "coast for less",
        numbers=((r"\(120 km\) ([\d.]+) s into this coast", (DOWN_TO_120_S,)),)),
    Bad("way-down-past-the-centre", plan(s := "burn down: periapsis to -7000 km",
                                         "entry at 120 km"),
        10, col(s, "periapsis"), "periapsis to -7000 km", ("lies past the centre",),
        "down to an altitude above -6378.137 km"),
    # a plane turned by more than 90 deg with an apoapsis goal: the nearest velocity is
    # radial (rising to 1500 km and falling back through the centre), refused whichever
    # way along the radius it points (it was passed as an open orbit when outward)
    Bad("radial-orbit-falls-back", plan("burn b at periapsis: apoapsis to 1500 km, "
                                        "inclination to 150 deg"),
        10, 1, "burn b", ("b:", "under the surface", "-6378.137 km"), "name both apsides"),
    # a 70 deg turn: the cheapest burn to the apoapsis alone slows into a falling orbit,
    # where naming both apsides (the periapsis kept here) flies
    Bad("one-apsis-with-a-large-turn-falls", plan("burn b at periapsis: apoapsis to 1500 km, "
                                                  "inclination to 100 deg"),
        10, 1, "burn b", ("b:", "under the surface"),
        "name both apsides (`periapsis to ..., apoapsis to ...`) to keep this point an apsis"),
    Bad("under-the-surface-before-the-last-burn",
        plan("burn down: periapsis to -30 km", "burn trim: along 1 m/s", "entry at 120 km"),
        10, 1, "burn down", ("down:", "under the surface", "-30.000 km"), "raise the periapsis"),
    # --- goals on the conic: energy, eccentricity, apse line -------------------------------
    Bad("c3-below-the-well", plan("burn b: c3 to -200 km2/s2"), 10, 1, "burn b",
        ("b:", "c3 -200 km2/s2 cannot be reached"), "give a larger c3",
        numbers=((r"at least -2 mu / r = (-[\d.]+) km2/s2", (-2 * MU / R400,)),)),
    Bad("sma-below-half-the-radius", plan("burn b: sma to 3000 km"), 10, 1, "burn b",
        ("sma 3000 km cannot be reached",), "give a larger sma",
        numbers=((r"sma of at least ([\d.]+) km", (R400 / 2,)),)),
    Bad("period-below-the-least", plan("burn b: period to 20 min"), 10, 1, "burn b",
        ("period 1200 s cannot be reached",), "give a longer period",
        numbers=((r"period of at least ([\d.]+) s", (SHORTEST_PERIOD_400,)),)),
    Bad("two-energy-goals", plan("burn b: sma to 9000 km, vinf to 2 km/s"), 10, 25,
        "vinf to 2 km/s", ("`sma to` and `vinf to` both set the orbit's energy",),
        "keep one of them"),
    Bad("three-shape-goals", plan("burn b: periapsis to 300 km, apoapsis to 900 km, ecc to 0.1"),
        10, 50, "ecc to 0.1", ("name the orbit's size and shape more than once",), "keep two"),
    Bad("circular-with-sma", plan("burn b: circular, sma to 9000 km"), 10, 9, "circular",
        ("`circular` already fixes the size and shape",), "drop `sma to`"),
    Bad("energy-goal-on-an-open-orbit-apoapsis", plan("burn b: vinf to 1 km/s, apoapsis to 900 km"),
        10, 9, "vinf to 1 km/s", ("names an open orbit, which has no apoapsis",),
        "give the periapsis instead"),
    Bad("ecc-against-energy", plan("burn b: ecc to 0.5, vinf to 1 km/s"), 10, 9, "ecc to 0.5",
        ("ecc 0.5 names a closed orbit but vinf 1 km/s names an open one",),
        "ecc below 1 has a negative energy"),
    Bad("sma-below-the-periapsis-goal", plan("burn b: sma to 7000 km, periapsis to 1000 km"),
        10, 9, "sma to 7000 km", ("cannot have its periapsis at 1000.000 km",),
        "lower the periapsis goal",
        numbers=((r"at most at ([\d.]+) km", (7000.0 - RE,)),)),
    Bad("conic-not-through-the-craft", plan("burn b: periapsis to 600 km, ecc to 0.01"), 10, 1,
        "burn b", ("b:", "does not pass through the craft's altitude 400.000 km"),
        "burn where the craft is between those altitudes",
        numbers=((r"apoapsis ([\d.]+) km\)", ((RE + 600.0) * 1.01 / 0.99 - RE,)),)),
    Bad("energy-with-a-plane-turned-past-90-deg",
        plan("burn b at node: sma to 9000 km, inclination to 150 deg"), 10, 1, "burn b",
        ("plane turned by 90 deg or more", "has no least burn"), "turn the plane in a burn"),
    Bad("sma-of-zero", plan("burn b: sma to 0 km"), 10, 9, "sma to 0 km",
        ("an sma of zero names no orbit",), "measured from the centre"),
    Bad("vinf-zero", plan("burn b: vinf to 0 km/s"), 10, 17, "0 km/s",
        ("vinf goal must be positive",), "greater than zero"),
    Bad("ecc-negative", plan("burn b: ecc to -0.1"), 10, 16, "-0.1",
        ("ecc goal cannot be negative",), "zero or more"),
    Bad("tangential-with-an-ecc-goal", plan("burn b: apoapsis to 900 km, ecc to 0.1 tangential"),
        10, 40, "tangential", ("`tangential` goes with one apsis goal",), "drop `tangential`"),
    Bad("crossing-without-raan-or-argp", plan("burn b at crossing: sma to 9000 km"), 10, 11,
        "crossing", ("`at crossing` needs a `raan to` goal", "an `argp to` goal"), "`at node`"),
    Bad("argp-with-a-plane-goal",
        plan("burn b at crossing: argp to 30 deg, inclination to 10 deg", start=ELLIPSE), 10, 37,
        "inclination to 10 deg", ("cannot share a burn with a plane change",),
        "turn the plane in a burn of its own"),
    Bad("argp-with-one-shape-goal", plan("burn b at crossing: argp to 30 deg, ecc to 0.1"),
        10, 21, "argp to 30 deg", ("leaves the rest of the shape free",),
        "give a second shape goal"),
    Bad("argp-on-a-circular-orbit", plan("burn b at crossing: argp to 30 deg"), 10, 1, "burn b",
        ("b:", "the orbit is circular", "no apse line to turn"), "give the new shape as well"),
    Bad("argp-off-the-crossing", plan("burn b: argp to 30 deg", start=ELLIPSE), 10, 1, "burn b",
        ("does not pass through the craft's position",),
        # the same orbit turned by W crosses the old one where the true anomaly is W / 2
        # and W / 2 + 180 deg (the radius is the same where cos nu = cos(nu - W))
        "`at anomaly 15.000000 deg` or `at anomaly 195.000000 deg`"),
    Bad("argp-orbits-apart", plan("burn b at crossing: argp to 30 deg, periapsis to 3000 km, "
                                  "apoapsis to 4000 km", start=ELLIPSE), 10, 1, "burn b",
        ("does not meet the current orbit", "no single burn reaches it"),
        "change the size or shape first"),
    Bad("argp-crossings-behind-an-open-orbit",
        plan("burn b at crossing: argp to 20 deg", start=HYPERBOLA + " anomaly 40 deg"), 10, 1,
        "burn b", ("cross only behind the craft",), "on the way in"),
    # --- burn frames ---------------------------------------------------------------------------
    Bad("unknown-frame", plan("burn b: radial 1 m/s frame rnt"), 10, 28, "rnt",
        ("unknown frame `rnt`",), "did you mean `rtn`?"),
    Bad("rtn-component-without-its-frame", plan("burn b: radial 1 m/s, transverse 2 m/s"),
        10, 23, "transverse", ("`transverse` is a component of the rtn frame",),
        "add `frame rtn`"),
    Bad("normal-without-a-frame", plan("burn b: normal 1 m/s"), 10, 9, "normal",
        ("`normal` is a component of the named frames",), "`cross` (the normal)"),
    Bad("along-in-the-rtn-frame", plan("burn b: along 1 m/s frame rtn"), 10, 9, "along",
        ("`along` is not a component of the rtn frame",), "`radial`, `transverse`, `normal`"),
    Bad("radial-in-the-vnb-frame", plan("burn b: radial 1 m/s frame vnb"), 10, 9, "radial",
        ("the components are `velocity`, `normal` and `binormal`, not `radial`",),
        "write `binormal`"),
    Bad("frame-on-a-transfer", plan("transfer t: circular 900 km frame rtn"), 10, 29, "frame",
        ("`frame` is an option of a burn, not of a transfer",), "drop it"),
    Bad("expect-vinf-as-a-length", plan("expect vinf 3 km"), 10, 13, "3 km",
        ("expect vinf needs a speed",), "`3 m/s`"),
    # --- gravity j2, sun-synchronous, raan drift ------------------------------------------
    Bad("gravity-j2-body-without-j2", 'body rock { gm 17.3 km3/s2 radius 262 km }\n' + plan(
        "coast c for 1 d", head=HEAD.replace("around earth", "around rock\ngravity j2"),
        start="start circular 100 km"), 4, 1, "gravity j2",
        ("`gravity j2` needs the J2 of rock, and it has none",), "j2 0.0010826"),
    Bad("unknown-gravity-model", scene("}\n", "}\ngravity j3\n"), 9, 9, "j3",
        ("unknown gravity model `j3`",), "`point-mass`"),
    Bad("sun-synchronous-too-high", plan(start="start circular 6000 km inclination "
        "sun-synchronous"), 9, 24, "inclination sun-synchronous",
        ("no inclination makes this orbit sun-synchronous",), "needs an sma under"),
    Bad("sun-synchronous-without-j2", 'body rock { gm 17.3 km3/s2 radius 262 km }\n' + plan(
        head=HEAD.replace("around earth", "around rock"),
        start="start circular 100 km inclination sun-synchronous"), 10, 23,
        "inclination sun-synchronous", ("needs the J2 of rock",), "j2 0.0010826"),
    Bad("sun-synchronous-without-a-year", 'body rock { gm 17.3 km3/s2 radius 262 km '
        'j2 0.001 }\n' + plan(head=HEAD.replace("around earth", "around rock"),
                               start="start circular 100 km inclination sun-synchronous"),
        10, 23, "inclination sun-synchronous", ("rock has no year to be sun-synchronous with",),
        "give the inclination in degrees"),
    Bad("sun-synchronous-burn-too-high", plan(
        "burn b: apoapsis to 40000 km", "coast to apoapsis",
        "burn c: circular, inclination to sun-synchronous"), 12, 1, "burn c",
        ("has no sun-synchronous inclination",), "lower the orbit first"),
    Bad("sun-synchronous-transfer-without-circle", plan(
        "transfer t at node: inclination to sun-synchronous via apoapsis 3000 km"), 10, 21,
        "inclination to sun-synchronous", ("only with its target circle",),
        "add `circular ALT`"),
    Bad("raan-drift-in-point-mass", plan("expect raan drift 1 deg/d"), 10, 8, "raan drift",
        ("this plan flies the point-mass model",), "`gravity j2`"),
    Bad("raan-drift-as-an-angle", plan("expect raan drift 1 deg", head=HEAD + "gravity j2\n"),
        11, 19, "1 deg", ("needs an angular rate",), "`1 deg/d`"),
    Bad("transfer-raan-under-j2", plan("transfer t: circular 900 km, raan to 20 deg",
                                       head=HEAD + "gravity j2\n"), 11, 1, "transfer t",
        ("a transfer cannot arrive in a fixed plane",), "`at crossing: raan to ...`"),
    Bad("equatorial-transfer-under-j2", plan(
        "transfer geo at node: circular 35786 km, inclination to 0 deg",
        head=HEAD + "gravity j2\n"), 11, 1, "transfer geo",
        ("its far burn stands at latitude", "no plane has inclination 0.0000 deg"),
        "turn the plane with a burn `at node: inclination to ...` after it"),
    Bad("gravity-j2-leg-to-a-body-without-j2", (
        "around jupiter\ngravity j2\n"
        "craft c { dry 500 kg propellant 3000 kg engine main isp 320 s thrust 400 N }\n"
        "start circular 2000000 km inclination 0 deg\nburn go: vinf to leg\n"
        "leg tour to ganymede vinf 3 km/s to 2 km/s for 10 d\n"
        "start orbit periapsis 500 km inclination 10 deg anomaly -30 deg\n"), 6, 1,
        "leg tour", ("needs the J2 of every body", "Ganymede (after leg `tour`) has none"),
        "`gravity point-mass`"),
    Bad("negative-drift-limit", plan(head=HEAD + "drift at most -3 d\n"), 9, 15, "-3 d",
        ("drift at most must be positive",), "greater than zero"),
    Bad("drift-limit-in-point-mass", plan(head=HEAD + "drift at most 30 d\n"), 9, 1,
        "drift at most", ("this plan flies the point-mass model",), "`gravity j2`"),
    # --- the epoch (docs/export.md) ------------------------------------------------------
    Bad("epoch-not-a-date", plan(start="epoch 2027-02-30T00:00:00 UTC\n" + START), 9, 7,
        "2027-02-30", ("`2027-02-30T00:00:00` is not a date and time",),
        "`epoch 2027-03-01T00:00:00 UTC`"),
    Bad("epoch-without-scale", plan(start="epoch 2027-02-03T00:00:00\n" + START), 9, 7,
        "2027-02-03", ("the epoch needs its time scale",), "`epoch 2027-02-03T00:00:00 UTC`"),
    Bad("epoch-unknown-scale", plan(start="epoch 2027-02-03T00:00:00 UTX\n" + START), 9, 27,
        "UTX", ("`UTX` is not a time scale",), "did you mean `UTC`?"),
    Bad("epoch-date-only", plan(start="epoch 2027-02-03 UTC\n" + START), 9, 7, "2027",
        ("unexpected number `2027`",), "a date and time such as `2027-03-01T00:00:00`"),
    Bad("epoch-given-twice", plan(start="epoch 2027-02-03T00:00:00 UTC\n"
                                        "epoch 2027-02-04T00:00:00 UTC\n" + START), 10, 1,
        "epoch", ("`epoch` is given twice",), "the first is on line 9"),
]

assert len(CASES) >= 30
assert len({c.id for c in CASES}) == len(CASES)


def _params() -> list:
    return [pytest.param(c, id=c.id) for c in CASES]


# --- checks on one error ------------------------------------------------------------------

LOCATION = re.compile(r"^(?P<path>.+?):(?P<line>\d+):(?P<col>\d+): error: (?P<message>.*)$",
                      re.MULTILINE)
NON_FINITE = re.compile(r"(?<![A-Za-z])[+-]?(nan|inf|infinity)(?![A-Za-z])", re.IGNORECASE)


def write(tmp_path, case: Bad):
    path = tmp_path / f"{case.id}.aps"
    if isinstance(case.text, bytes):
        path.write_bytes(case.text)
    else:
        path.write_bytes(case.text.encode("utf-8"))
    return path




def check_error(case: Bad, path, code: int, out: str, err: str) -> None:
    assert "Traceback" not in err and "Traceback" not in out
    assert "internal error" not in err
    assert code == 2, err
    head = LOCATION.search(err)
    assert head is not None, f"no file:line:col in:\n{err}"
    assert head["path"] == str(path)
    line, col = int(head["line"]), int(head["col"])
    if case.line is not None:
        assert (line, col) == (case.line, case.col), err
    message = head["message"]
    for phrase in case.phrases:
        assert phrase in message, f"{phrase!r} not in {message!r}"
    for pattern, values in case.numbers:
        found = re.search(pattern, message)
        assert found, f"{pattern!r} not in {message!r}"
        got = [float(g) for g in found.groups()]
        assert got == pytest.approx(values, rel=1e-5, abs=1e-3), message
    # the source line, then the caret under the column
    lines = err.splitlines()
    at = next(i for i, ln in enumerate(lines) if ln.startswith(head.group(0)))
    shown = re.fullmatch(rf"\s+{line} \| (.*)", lines[at + 1])
    caret = re.fullmatch(r"\s+\| ( *)(\^+)", lines[at + 2])
    assert shown and caret, f"no source line and caret under:\n{err}"
    assert lines[at + 1].index("|") == lines[at + 2].index("|")
    assert len(caret.group(1)) == col - 1
    if case.under:
        assert shown.group(1)[col - 1:].startswith(case.under), (shown.group(1), case.under)
    if isinstance(case.text, str) and case.line is not None:
        source = case.text.split("\n")[line - 1].removesuffix("\r").expandtabs(1)
        if not re.search(r"[\x00-\x08\x0b\x0c\x0e-\x1f]", source):
            assert shown.group(1) == source
    hints = [ln for ln in lines if ln.startswith("  hint: ")]
    assert hints, f"no hint of what would work:\n{err}"
    assert case.hint in hints[-1], f"{case.hint!r} not in {hints[-1]!r}"
    for word in case.absent:
        assert word not in err, f"{word!r} should not be offered:\n{err}"
    # whatever reached stdout is a report without NaN or infinity
    assert not NON_FINITE.search(out), out
    if out.strip() and case.fmt == "json":
        rep = strict_json(out)
        assert (rep["error"]["line"], rep["error"]["column"]) == (line, col)


@pytest.fixture(autouse=True)
def _no_debug(monkeypatch):
    monkeypatch.delenv("APSIDAL_DEBUG", raising=False)


@pytest.mark.parametrize("case", _params())
def test_bad_input(case, tmp_path, capsys):
    path = write(tmp_path, case)
    code = main(["run", str(path), "--format", case.fmt])
    out, err = capsys.readouterr()
    check_error(case, path, code, out, err)


def test_missing_file(tmp_path, capsys):
    path = tmp_path / "nowhere" / "plan.aps"
    code = main(["run", str(path)])
    out, err = capsys.readouterr()
    assert code == 2
    assert out == ""
    assert "Traceback" not in err
    assert err.startswith(f"{path}: error: cannot read `{path}`")
    assert "No such file" in err
    assert "hint: check the path" in err


def test_a_directory_is_not_a_plan(tmp_path, capsys):
    code = main(["run", str(tmp_path)])
    _, err = capsys.readouterr()
    assert code == 2
    assert f"cannot read `{tmp_path}`" in err
    assert "Traceback" not in err


# --- the same from outside: `python -m apsidal.compiler.cli` --------------------------------

BY_ID = {c.id: c for c in CASES}
SUBPROCESS = ["nul-byte", "invalid-utf8", "syntax-missing-colon", "wrong-dimension-goal",
              "inclination-below-latitude"]


def cli(*args) -> subprocess.CompletedProcess:
    env = {k: v for k, v in os.environ.items() if k != "APSIDAL_DEBUG"}
    return subprocess.run([sys.executable, "-m", "apsidal.compiler.cli", *map(str, args)],
                          check=False, capture_output=True, text=True, env=env,
                          timeout=120)


@pytest.mark.parametrize("case_id", SUBPROCESS)
def test_bad_input_in_a_subprocess(case_id, tmp_path):
    case = BY_ID[case_id]
    path = write(tmp_path, case)
    done = cli("run", path, "--format", case.fmt)
    check_error(case, path, done.returncode, done.stdout, done.stderr)


def test_missing_file_in_a_subprocess(tmp_path):
    done = cli("run", tmp_path / "absent.aps")
    assert done.returncode == 2
    assert "Traceback" not in done.stderr
    assert "cannot read" in done.stderr and "hint:" in done.stderr

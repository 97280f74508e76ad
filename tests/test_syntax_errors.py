"""Malformed plans: each gives one located PlanError with the line, a caret and a hint.

Every row of ERRORS is a plan text, where the error must point (line, column), the exact
message, and a piece of the hint.  Never a lark exception, never a traceback.
"""

from __future__ import annotations

import re

import pytest
from apsidal.lang import parse as parse_module
from apsidal.lang.errors import PlanError
from apsidal.lang.parse import LATER_KEYWORDS, NAMEABLE, keywords, parse, parse_file
from hypothesis import given, settings
from hypothesis import strategies as st

ERRORS = [
    # id, text, (line, column), message, part of the hint
    ("unexpected-character", "around earth\nburn x: circular 3 km )\n", (2, 23),
     "unexpected character `)`", "expected `margin`, `,`, `using`, `fixed`, `movable`, `tangential`, `statistical`, `frame` or end of line"),
    ("misspelt-goal", "burn raise at periapsis: apoapsys to 35786 km\n", (1, 26),
     "unexpected `apoapsys`", "did you mean `apoapsis`?"),
    ("misspelt-where", "burn raise at periapsys: apoapsis to 35786 km\n", (1, 15),
     "unexpected `periapsys`", "did you mean `periapsis`?"),
    ("misspelt-statement", "around earth\nbrun raise: circular\n", (2, 1),
     "unexpected `brun`", "did you mean `burn`?"),
    ("misspelt-field", "craft c {\n  dri 640 kg\n}\n", (2, 3),
     "unexpected `dri`", "did you mean `dry`?"),
    ("keyword-run-on", "burn x: apoapsisx to 1 km\n", (1, 9),
     "unexpected `apoapsisx`", "did you mean `apoapsis`?"),
    ("revs", "coast wait 2 revs\n", (1, 14), "unexpected `revs`", "did you mean `rev`?"),
    ("unknown-unit", "reserve 25 kms\n", (1, 12), "unknown unit `kms`", "did you mean `km/s`?"),
    ("unknown-unit-in-slot", "start circular 400 kms\n", (1, 20),
     "unknown unit `kms`", "did you mean `km`?"),
    ("unknown-ratio", "margin 5 pct\n", (1, 10), "unknown unit `pct`", "margin takes %"),
    ("keyword-where-a-unit-goes", "start circular 400 inclinaton 51.6 deg\n", (1, 20),
     "unknown unit `inclinaton`", "did you mean `inclination`?"),
    ("wrong-dimension", "craft c {\n  dry 1 kg\n  engine main isp 321 m/s thrust 440 N\n}\n",
     (3, 19), "engine isp needs a time (s, min, h, d, yr), got a speed (m/s)",
     "write it in s, min, h, d or yr, e.g. `321 s`"),
    ("wrong-dimension-margin", "margin 5 kg\n", (1, 8),
     "margin needs a ratio (%), got a mass (kg)", "e.g. `5 %`"),
    ("wrong-dimension-tolerance", "expect inclination 0 deg within 1 km\n", (1, 33),
     "expect inclination tolerance needs an angle (deg, rad), got a length (km)", "`1 deg`"),
    ("wrong-dimension-goal", "burn b: along 3 km\n", (1, 15),
     "along component needs a speed (m/s, km/s), got a length (km)", "e.g. `3 m/s`"),
    ("quantity-without-unit", "coast settle for 2\n", (1, 18),
     "coast duration needs a time (s, min, h, d, yr), got a plain number",
     "add a unit, e.g. `2 s`"),
    ("unit-on-a-plain-number", "body rock { gm 17.3 km3/s2 radius 262 km j2 0.1 km }\n",
     (1, 45), "body j2 needs a plain number, got a length (km)", "write `0.1`"),
    ("negative-mass", "drop deploy -45 kg\n", (1, 13),
     "drop mass must be positive, got -45 kg", "greater than zero"),
    ("negative-propellant", "craft c { dry 5 kg propellant -1 kg }\n", (1, 31),
     "craft propellant cannot be negative, got -1 kg", "zero or more"),
    ("negative-thrust", "craft c { engine e isp 300 s thrust -1 N }\n", (1, 37),
     "engine thrust must be positive, got -1 N", "greater than zero"),
    ("negative-gm", "body b { gm -1 km3/s2 }\n", (1, 13),
     "body gm must be positive, got -1 km3/s2", "greater than zero"),
    ("negative-margin", "burn x: circular using main margin -5 %\n", (1, 36),
     "step margin cannot be negative, got -5 %", "zero or more"),
    ("negative-radius", "burn x: apoapsis to radius -5 km\n", (1, 28),
     "apoapsis goal radius must be positive, got -5 km", "from the body's centre"),
    ("zero-coast", "coast for 0 s\n", (1, 11),
     "coast duration must be positive, got 0 s", "greater than zero"),
    ("no-revolution", "coast wait 0 rev\n", (1, 12),
     "a coast counts a positive number of revolutions, got `0 rev`", "a number above zero"),
    ("phasing-half-revolution", "transfer t: phase 30 deg in 1.5 rev\n", (1, 29),
     "a phasing orbit is flown a whole number of times, got `1.5 rev`",
     "a whole number of revolutions"),
    ("phase-angle-without-unit", "transfer t: phase 30 in 2 rev\n", (1, 19),
     "phase angle needs an angle (deg, rad), got a plain number", "`30 deg`"),
    ("number-out-of-range", "drop 1e999 kg\n", (1, 6),
     "the number `1e999` is out of range", "an ordinary number"),
    ("missing-colon", "around earth\nburn raise at periapsis apoapsis to 35786 km\n", (2, 25),
     "`burn` needs `:` before its goals", "`burn NAME at WHERE: GOAL, ...`"),
    ("missing-colon-transfer", "transfer geo circular 35786 km\n", (1, 14),
     "`transfer` needs `:` before its goals", "`transfer NAME at WHERE: GOAL, ...`"),
    ("missing-brace", "craft relay {\n    dry 640 kg\n    propellant 910 kg\nmargin 5 %\n",
     (4, 1), "the `craft` block is not closed", "add `}`"),
    ("missing-brace-at-eof", "around earth\nbody rock {\n  gm 17.3 km3/s2\n  radius 262 km\n\n",
     (4, 16), "the `body` block is not closed", "add `}`"),
    ("unterminated-string", 'plan "Relay craft\naround earth\n', (1, 6),
     'unterminated string: the closing `"` is missing', 'plan "..."'),
    ("end-of-line", "around earth\nburn x at", (2, 10),
     "unexpected end of line", ("expected `next`, `radius`, `periapsis`, `apoapsis`, "
                                "`anomaly`, `ascending node`, `node`, `descending node`, "
                                "`crossing` or a number")),
    ("keyword-as-step-name", "burn node: inclination to 0 deg\n", (1, 6),
     "`node` is a keyword and cannot name a step", "such as `node-1`"),
    ("keyword-as-engine-name", "craft c { engine thrust isp 1 s }\n", (1, 18),
     "`thrust` is a keyword and cannot name an engine", "choose another name"),
    ("keyword-as-body-name", "around apoapsis\n", (1, 8),
     "`apoapsis` is a keyword and cannot name a body", "choose another name"),
    ("slash-in-name", "drop geo/1 5 kg\n", (1, 6),
     "`geo/1` cannot name a step", "`/` is kept for the burns a transfer expands into"),
    ("start-without-form", "start periapsis 250 km apoapsis 250 km\n", (1, 7),
     "`start` needs `circular` or `orbit`", "`start circular 400 km"),
    ("goal-without-to", "burn circ at apoapsis: periapsis 35786 km\n", (1, 34),
     "the `periapsis` goal needs `to` before its value", "write `periapsis to ...`"),
    ("second-goal-without-to", "burn b: circular 1 km, inclination 0 deg\n", (1, 36),
     "the `inclination` goal needs `to` before its value", "write `inclination to ...`"),
    ("expect-with-to", "expect apoapsis to 35786 km\n", (1, 17),
     "an `expect` check takes its value without `to`", "`expect apoapsis 35786 km"),
    ("transfer-with-a-burn-goal", "transfer go: circular 1 km, along 3 m/s\n", (1, 29),
     "a transfer takes `circular`, `inclination to` and `raan to`, not `along`",
     "use a `burn`"),
    ("transfer-without-goal", "transfer go:\n", (1, 13),
     "unexpected end of line", "expected `circular`, `inclination`, `raan` or `phase`"),
    ("missing-comma", "burn x: apoapsis to 1000 km periapsis to 900 km\n", (1, 29),
     "the goals of a `burn` are separated by `,`", "write `, periapsis ...`"),
    ("missing-comma-expect", "expect periapsis 1 km apoapsis 2 km\n", (1, 23),
     "the checks of an `expect` are separated by `,`", "write `, apoapsis ...`"),
    ("coast-without-for", "coast settle 2 h\n", (1, 16),
     "a coast for a length of time needs `for`", "`coast NAME for 2 h`"),
    ("coast-without-mode", "coast settle apoapsis\n", (1, 14),
     "`coast` needs `for` a time, `to` a point of the orbit, or a number of revolutions",
     "`coast to apoapsis`"),
    ("title-without-quotes", "plan Relay craft\n", (1, 6),
     "the plan title goes in double quotes", 'plan "Relay craft: '),
    ("not-a-statement", "around earth\nwait 2 h\n", (2, 1),
     "`wait` does not start a statement", "`plan`, `around`, `body`"),
    ("field-outside-block", "engine main isp 321 s thrust 440 N\n", (1, 1),
     "`engine` belongs inside a `craft` block", "craft relay {"),
    ("isp-outside-engine", "craft c {\n  isp 300 s\n}\n", (2, 3),
     "`isp` belongs on an `engine` line of the craft", "engine main isp"),
    ("quoted-name", 'around "earth"\n', (1, 8),
     'unexpected quoted text "earth"', "without quotes: `earth`"),
    ("radius-for-a-plain-value", "expect sma radius 7000 km\n", (1, 12),
     "unexpected `radius`", "expected `at` or a number"),
    ("semicolon", "burn x: along 1 m/s; cross 2 m/s\n", (1, 20),
     "unexpected character `;`", "no `;` is needed"),
    ("degree-sign", "start circular 400 km inclination 28.5°\n", (1, 39),
     "unexpected character `°`", "`deg`"),
    ("second-title", 'plan "a" "b"\n', (1, 10),
     'unexpected quoted text "b"', "expected end of line"),
    ("nul-byte", "around earth\nmar\x00gin 5 %\n", (2, 4),
     "the plan contains a NUL byte: this looks like a binary file, not a plan",
     "plain UTF-8 text"),
    ("control-character", "around earth\x07\n", (1, 13),
     "the plan contains the control character U+0007", "plain UTF-8 text"),
]


def _shown_line(text: str, line: int) -> str:
    shown = re.sub(r"[\x00-\x08\x0b\x0c\x0e-\x1f\x7f]", "\ufffd", text)
    return shown.splitlines()[line - 1].expandtabs(1)


@pytest.mark.parametrize(("text", "where", "message", "hint"), [e[1:] for e in ERRORS],
                         ids=[e[0] for e in ERRORS])
def test_error_is_located_and_explained(text, where, message, hint):
    with pytest.raises(PlanError) as caught:
        parse(text, "relay.aps")
    error = caught.value
    assert error.message == message
    assert (error.span.line, error.span.column) == where
    assert hint in error.hint
    rendered = error.render()
    line, column = where
    head, source_line, caret_line, *_ = rendered.splitlines()
    assert head == f"relay.aps:{line}:{column}: error: {message}"
    assert source_line == f"    {line} | {_shown_line(text, line)}"
    assert caret_line.startswith(f"    {' ' * len(str(line))} | {' ' * (column - 1)}^")
    assert f"  hint: {error.hint}" in rendered
    assert "Traceback" not in rendered and "lark" not in rendered.lower()


def test_missing_brace_notes_where_the_block_opened():
    with pytest.raises(PlanError) as caught:
        parse("around earth\n\ncraft relay {\n  dry 640 kg\nburn b: circular\n")
    assert caught.value.notes == ["the block opened on line 3"]
    assert "  note: the block opened on line 3" in caught.value.render()


@pytest.mark.parametrize("word", sorted(keywords() - LATER_KEYWORDS))
def test_no_keyword_can_name_a_step(word):
    if word in NAMEABLE:  # `in` names steps of older plans; it stands only in a phasing goal
        assert parse(f"drop {word} 5 kg\n").statements[0].name.text == word
        return
    with pytest.raises(PlanError) as caught:
        parse(f"drop {word} 5 kg\n")
    assert (caught.value.span.line, caught.value.span.column) == (1, 6)
    assert caught.value.message == f"`{word}` is a keyword and cannot name a step"


@pytest.mark.parametrize("word", sorted(LATER_KEYWORDS))
def test_a_keyword_added_later_still_names_a_step(word):
    """Plans written before `c3 to` and the frames named coasts `c1`, `c2`, `c3`."""
    for line in (f"drop {word} 5 kg", f"coast {word} for 1 h", f"burn {word}: along 1 m/s"):
        assert parse(line + "\n").statements[0].name.text == word
    assert word in keywords()


# --- files ---------------------------------------------------------------------------

FILES = [
    ("latin-1", b"around earth\nplan \"Relais \xfcber\"\n", (2, 14),
     "the file is not UTF-8 text: byte 0xFC cannot be read"),
    ("binary", b"\x7fELF\x02\x01\x01" + bytes(300) + b"\x01\x02\x03" * 40, (1, 1),
     "the plan contains the control character U+007F"),
    ("binary-invalid-utf8", b"\x89PNG\r\n\x1a\n\x00\x00\x00\rIHDR", (1, 1),
     "the file is not UTF-8 text: byte 0x89 cannot be read"),
    ("nul-in-utf8", b"around earth\nburn b: circular\x00\x00\n", (2, 17),
     "the plan contains a NUL byte: this looks like a binary file, not a plan"),
]


@pytest.mark.parametrize(("data", "where", "message"), [f[1:] for f in FILES],
                         ids=[f[0] for f in FILES])
def test_binary_and_non_utf8_files(tmp_path, data, where, message):
    path = tmp_path / "garbage.aps"
    path.write_bytes(data)
    with pytest.raises(PlanError) as caught:
        parse_file(path)
    error = caught.value
    assert error.message == message
    assert (error.span.line, error.span.column) == where
    head, source_line, caret_line, *_ = error.render().splitlines()
    assert head.startswith(f"{path}:{where[0]}:{where[1]}: error: ")
    assert source_line.startswith(f"    {where[0]} | ")
    assert len(source_line) < 120  # a run of binary is cut short
    assert caret_line.endswith(" " * (where[1] - 1) + "^")
    assert "is the right file" in error.hint or "right file" in error.hint


@pytest.mark.parametrize("make", ["missing", "directory"])
def test_unreadable_path(tmp_path, make):
    path = tmp_path / "plan.aps"
    if make == "directory":
        path.mkdir()
    with pytest.raises(PlanError) as caught:
        parse_file(path)
    assert caught.value.render().startswith(f"{path}: error: cannot read `{path}`: ")


# --- the labelled examples and robustness ---------------------------------------------


def _template(message: str) -> re.Pattern:
    parts = re.split(r"\{\w+\}", message.replace("{{", "{").replace("}}", "}"))
    return re.compile(".+".join(re.escape(p) for p in parts) + r"\Z")


@pytest.mark.parametrize("mistake", parse_module._MISTAKES, ids=lambda m: m.message[:40])
def test_every_labelled_example_is_its_own_mistake(mistake):
    """The examples are malformed, and each is reported as the mistake it illustrates."""
    for example in mistake.examples:
        with pytest.raises(PlanError) as caught:
            parse(example)
        assert _template(mistake.message).match(caught.value.message), example


PIECES = sorted(keywords()) + [
    "km", "m/s", "kg", "%", "deg", "s", "kms", "{", "}", ":", ",", "1", "-2.5", "1e3",
    '"t"', '"', "#c", "\n", "\n", "x", "geo-1", ";", "\t",
]


@settings(max_examples=300, deadline=None)
@given(st.lists(st.sampled_from(PIECES), max_size=14))
def test_any_token_soup_is_a_plan_or_a_plan_error(pieces):
    try:
        parse(" ".join(pieces))
    except PlanError as error:
        assert error.span is not None and error.source is not None
        error.render()


@settings(max_examples=200, deadline=None)
@given(st.text(max_size=60))
def test_any_text_is_a_plan_or_a_plan_error(text):
    try:
        parse(text)
    except PlanError as error:
        error.render()

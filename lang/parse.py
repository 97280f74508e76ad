"""Plan text to syntax tree: the lark parser, the unit checks, and the syntax errors.

>>> plan = parse("around earth\\nburn raise at periapsis: apoapsis to 35786 km  # GEO\\n")
>>> burn = plan.statements[1]
>>> burn.name.text, burn.where.kind, burn.goals[0].kind, burn.goals[0].value.quantity.text()
('raise', 'periapsis', 'apoapsis', '35786 km')
>>> plan.comments[0].text, plan.comments[0].line, plan.comments[0].trailing
('# GEO', 2, True)
>>> try:
...     parse("reserve 25 m/ss\\n", "plan.aps")
... except PlanError as err:
...     print(err)
plan.aps:1:12: error: unknown unit `m/ss`
    1 | reserve 25 m/ss
      |            ^^^^
  hint: did you mean `m/s`?

The grammar is ``grammar.lark`` next to this module.  The parser checks what a single
line can tell: the syntax, the spelling of units, the dimension each slot needs, and
signs that can never be right (a negative mass, a zero thrust).  Whether the plan can be
flown is the compiler's business.
"""

from __future__ import annotations

import math
import re
from collections.abc import Callable
from contextvars import ContextVar
from dataclasses import dataclass
from functools import cache
from pathlib import Path

from lark import Lark, Token, Transformer, v_args
from lark.exceptions import (
    UnexpectedCharacters,
    UnexpectedEOF,
    UnexpectedInput,
    UnexpectedToken,
    VisitError,
)
from lark.lexer import PatternStr

from . import syntax as ast
from .errors import PlanError, Source, Span, did_you_mean
from .lexer import OneScanLexer
from .units import PREFERRED, UNITS, suggest_unit, units_of

__all__ = ["keywords", "parse", "parse_file", "statement_keywords"]

GRAMMAR = Path(__file__).with_name("grammar.lark")


def parse(text: str, path: str = "<plan>") -> ast.Plan:
    """Parse plan text into a :class:`~apsidal.lang.syntax.Plan`.

    Raises :class:`PlanError` (located, with a hint) for anything malformed; an empty
    text gives a plan with no statements.
    """
    source = Source(path, text)
    _reject_binary(source)
    sink: list[Token] = []
    context = _COMMENTS.set(sink)
    try:
        tree = _parser().parse(_terminated(text))
    except UnexpectedInput as e:
        raise _syntax_error(e, source) from None
    finally:
        _COMMENTS.reset(context)
    try:
        statements = _ToSyntax().transform(tree)
    except VisitError as e:
        if isinstance(e.orig_exc, PlanError):  # not lark's wrapper, nor its frames
            raise e.orig_exc.located(source).with_traceback(None) from None
        raise
    comments = tuple(_comment(tok, text) for tok in sink)
    return ast.Plan(statements, comments, source)


def parse_file(path: str | Path) -> ast.Plan:
    """Read a plan file (UTF-8) and parse it; unreadable files are PlanErrors too."""
    shown = str(path)
    try:
        data = Path(path).read_bytes()
    except OSError as e:
        raise PlanError(f"cannot read `{shown}`: {e.strerror or e}", None, Source(shown, ""),
                        hint="check the path; plans are text files ending in `.aps`") from None
    try:
        text = data.decode("utf-8")
    except UnicodeDecodeError as e:
        raise _not_utf8(shown, data, e.start) from None
    return parse(text.removeprefix("\ufeff"), shown)


# --- the parser ----------------------------------------------------------------------


class _WordsEverywhere:
    """A pass-through post-lexer whose only job is ``always_accept``.

    With WORD in every state of the contextual lexer a word is always read whole, and a
    keyword that does not belong where it stands comes out as a plain word, so the
    error names the word the user typed.
    """

    always_accept = ("WORD",)

    def process(self, stream):
        return stream


# The comment tokens of the parse in progress (a ContextVar so that nested parses, such
# as the labelled examples below, and threads each keep their own).
_COMMENTS: ContextVar[list[Token] | None] = ContextVar("apsidal_comments", default=None)


def _keep_comment(token: Token) -> Token:
    sink = _COMMENTS.get()
    if sink is not None:
        sink.append(token)
    return token


@cache
def _parser() -> Lark:
    """The LALR parser, built once per process; the built tables are cached by lark in
    the temporary directory, keyed by the grammar's hash, so later runs load them
    instead of building them (an unwritable cache only costs the build).  The
    contextual lexer is lark's, reading with one expression (lang/lexer.py)."""
    return Lark(
        GRAMMAR.read_text(encoding="utf-8"),
        cache=True,
        parser="lalr",
        lexer="contextual",
        propagate_positions=True,
        maybe_placeholders=True,
        postlex=_WordsEverywhere(),
        lexer_callbacks={"COMMENT": _keep_comment},
        _plugins={"ContextualLexer": OneScanLexer},  # the same tokens, one expression
    )


@cache
def _terminal_text() -> dict[str, str]:
    """Keyword and punctuation terminals by name: ``{"APOAPSIS": "apoapsis", ...}``."""
    return {t.name: t.pattern.value for t in _parser().terminals
            if isinstance(t.pattern, PatternStr)}


@cache
def keywords() -> frozenset[str]:
    """Every keyword of the language; none of them can be a name."""
    return frozenset(v for v in _terminal_text().values() if _WORD.fullmatch(v))


@cache
def statement_keywords() -> tuple[str, ...]:
    """The keywords that can start a line, in grammar order."""
    accepts = _parser().parse_interactive("").accepts()
    return tuple(v for k, v in _terminal_text().items() if k in accepts)


def _terminated(text: str) -> str:
    return text if text.endswith("\n") else text + "\n"


def _comment(token: Token, text: str) -> ast.Comment:
    line_start = text.rfind("\n", 0, token.start_pos) + 1
    return ast.Comment(str(token), token.line, bool(text[line_start:token.start_pos].strip()))


# --- spans ---------------------------------------------------------------------------


def _span(meta) -> Span:
    return Span(meta.line, meta.column, meta.end_line, meta.end_column, meta.start_pos,
                meta.end_pos)


def _token_span(tok: Token) -> Span:
    if tok.type == "_NL":  # only the line break itself, not the blank lines after it
        return Span(tok.line, tok.column, tok.line, tok.column + 1, tok.start_pos,
                    tok.start_pos + 1)
    return Span(tok.line, tok.column, tok.end_line, tok.end_column, tok.start_pos, tok.end_pos)


def _point(text: str, pos: int, width: int = 1) -> Span:
    """The span of ``width`` characters at character offset ``pos`` of ``text``."""
    line = text.count("\n", 0, pos) + 1
    column = pos - (text.rfind("\n", 0, pos) + 1) + 1
    return Span(line, column, line, column + width, pos, pos + width)


def _end_of_text(text: str) -> Span:
    """Just past the last character that is not blank: where end-of-file errors point."""
    stripped = text.rstrip()
    return _point(text, len(stripped)) if stripped else Span(1, 1, 1, 2, 0, 0)


def _unit_span(q: ast.Quantity) -> Span:
    s = q.span
    width = len(q.unit)
    return Span(s.end_line, s.end_column - width, s.end_line, s.end_column, s.end - width,
                s.end)


# --- slots: what each place in the grammar accepts ------------------------------------

POSITIVE = "positive"
NOT_NEGATIVE = "not negative"


@dataclass(frozen=True)
class Slot:
    """A place that takes a quantity: its name in messages, dimension and sign rule."""

    label: str
    dimension: str
    sign: str = ""


def _slots() -> dict[str, Slot]:
    angle = {k: Slot(k, "angle") for k in ("inclination", "raan", "argp", "anomaly")}
    slots = {
        "body.gm": Slot("body gm", "gravitational parameter", POSITIVE),
        "body.radius": Slot("body radius", "length", POSITIVE),
        "body.soi": Slot("body soi", "length", POSITIVE),
        "body.j2": Slot("body j2", "number"),
        "craft.dry": Slot("craft dry mass", "mass", POSITIVE),
        "craft.propellant": Slot("craft propellant", "mass", NOT_NEGATIVE),
        "craft.residual": Slot("craft residual", "mass", NOT_NEGATIVE),
        "craft.residual_share": Slot("craft residual", "ratio", NOT_NEGATIVE),
        "engine.isp": Slot("engine isp", "time", POSITIVE),
        "engine.thrust": Slot("engine thrust", "force", POSITIVE),
        "engine.mixture": Slot("engine mixture ratio (oxidiser to fuel, by mass)", "number",
                               POSITIVE),
        "craft.fuel": Slot("craft fuel", "mass", NOT_NEGATIVE),
        "craft.oxidiser": Slot("craft oxidiser", "mass", NOT_NEGATIVE),
        "setting.margin": Slot("margin", "ratio", NOT_NEGATIVE),
        "setting.reserve": Slot("reserve", "speed", NOT_NEGATIVE),
        "setting.ceiling": Slot("ceiling", "length", POSITIVE),
        "setting.drift": Slot("drift at most", "time", POSITIVE),
        "start.circular": Slot("start circular", "length"),
        "start.periapsis": Slot("start periapsis", "length"),
        "start.apoapsis": Slot("start apoapsis", "length"),
        "start.sma": Slot("start sma", "length"),
        "start.ecc": Slot("start ecc", "number", NOT_NEGATIVE),
        "start.vinf": Slot("start vinf", "speed", NOT_NEGATIVE),
        **{f"start.{k}": Slot(f"start {k}", s.dimension) for k, s in angle.items()},
        "goal.apoapsis": Slot("apoapsis goal", "length"),
        "goal.periapsis": Slot("periapsis goal", "length"),
        "goal.circular": Slot("circular goal", "length"),
        "goal.inclination": Slot("inclination goal", "angle"),
        "goal.raan": Slot("raan goal", "angle"),
        "goal.sma": Slot("sma goal", "length"),
        "goal.ecc": Slot("ecc goal", "number", NOT_NEGATIVE),
        "goal.argp": Slot("argp goal", "angle"),
        "goal.period": Slot("period goal", "time", POSITIVE),
        "goal.vinf": Slot("vinf goal", "speed", POSITIVE),
        "goal.c3": Slot("c3 goal", "specific energy"),
        "goal.along": Slot("along component", "speed"),
        "goal.cross": Slot("cross component", "speed"),
        "goal.radial": Slot("radial component", "speed"),
        **{f"goal.{k}": Slot(f"{k} component", "speed")
           for k in ("velocity", "normal", "binormal", "transverse")},
        "option.margin": Slot("step margin", "ratio", NOT_NEGATIVE),
        "where.anomaly": Slot("anomaly", "angle"),
        "where.radius": Slot("place altitude", "length"),
        "goal.phase": Slot("phase angle", "angle"),
        "entry": Slot("entry interface", "length"),
        "via": Slot("via apoapsis", "length"),
        "coast.for": Slot("coast duration", "time", POSITIVE),
        "drop": Slot("drop mass", "mass", POSITIVE),
        "allow": Slot("allowance", "speed", NOT_NEGATIVE),
        "allow.for": Slot("allowance duration", "time", POSITIVE),
        "leg.depart": Slot("leg departure vinf", "speed", POSITIVE),
        "leg.arrive": Slot("leg arrival vinf", "speed", POSITIVE),
        "leg.for": Slot("leg time of flight", "time", POSITIVE),
    }
    checked = {"periapsis": ("length", ""), "apoapsis": ("length", ""),
               "circular": ("length", ""), "sma": ("length", ""),
               "ecc": ("number", NOT_NEGATIVE), "inclination": ("angle", ""),
               "raan": ("angle", ""), "argp": ("angle", ""), "period": ("time", POSITIVE),
               "mass": ("mass", NOT_NEGATIVE), "propellant": ("mass", NOT_NEGATIVE),
               "vinf": ("speed", NOT_NEGATIVE), "c3": ("specific energy", ""),
               "elapsed": ("time", NOT_NEGATIVE), "anomaly": ("angle", ""),
               "raan drift": ("angular rate", "")}
    for kind, (dimension, sign) in checked.items():
        slots[f"expect.{kind}"] = Slot(f"expect {kind}", dimension, sign)
        slots[f"tolerance.{kind}"] = Slot(f"expect {kind} tolerance", dimension, NOT_NEGATIVE)
    return slots


SLOTS: dict[str, Slot] = _slots()


def _article(dimension: str) -> str:
    return "an" if dimension[0] in "aeiou" else "a"


def _wanted(dimension: str) -> str:
    if dimension == "number":
        return "a plain number"
    return f"{_article(dimension)} {dimension} ({', '.join(units_of(dimension))})"


def _or(items: list[str]) -> str:
    return items[0] if len(items) == 1 else ", ".join(items[:-1]) + " or " + items[-1]


def _checked(value: ast.Quantity | ast.Distance, slot: Slot):
    """``value`` if it suits ``slot``; otherwise a PlanError saying what would."""
    q = value.quantity if isinstance(value, ast.Distance) else value
    if not math.isfinite(q.value):
        raise PlanError(f"the number `{q.number}` is out of range", q.span,
                        hint="write an ordinary number, such as `35786` or `1.2e3`")
    if q.unit not in UNITS:
        raise _unknown_unit(q.unit, _unit_span(q), slot)
    got = UNITS[q.unit][0]
    if got != slot.dimension:
        raise _wrong_dimension(q, slot, got)
    if isinstance(value, ast.Distance) and value.is_radius and not q.value > 0:
        raise PlanError(f"{slot.label} radius must be positive, got {q.text()}", q.span,
                        hint="a radius is measured from the body's centre")
    if slot.sign == POSITIVE and not q.value > 0:
        raise PlanError(f"{slot.label} must be positive, got {q.text()}", q.span,
                        hint="write a value greater than zero")
    if slot.sign == NOT_NEGATIVE and q.value < 0:
        raise PlanError(f"{slot.label} cannot be negative, got {q.text()}", q.span,
                        hint="write zero or more")
    return value


def _wrong_dimension(q: ast.Quantity, slot: Slot, got: str) -> PlanError:
    need = slot.dimension
    got_text = "a plain number" if got == "number" else f"{_article(got)} {got} ({q.unit})"
    if got == "number" and need == "ratio" and 0 < q.value < 1:
        hint = (f"a {slot.label} is written in percent: `{q.value * 100:g} %` for a fraction "
                f"of {q.number}, or `{q.number} %` if you mean {q.number} percent")
    elif got == "number":
        hint = f"add a unit, e.g. `{q.number} {PREFERRED[need]}`"
    elif need == "number":
        hint = f"{slot.label} has no unit: write `{q.number}`"
    else:
        hint = f"write it in {_or(units_of(need))}, e.g. `{q.number} {PREFERRED[need]}`"
    return PlanError(f"{slot.label} needs {_wanted(need)}, got {got_text}", q.span, hint=hint)


def _similarity(a: str, b: str) -> float:
    import difflib  # on a mistake only: not at start-up

    return difflib.SequenceMatcher(None, a.lower(), b.lower()).ratio()


def _unknown_unit(word: str, span: Span, slot: Slot | None = None) -> PlanError:
    """An unknown unit.  In a slot the suggestion is a unit of the slot's dimension; a
    word that stopped the parse right after a number may instead be a keyword typed
    where the number's unit should have been."""
    if slot is not None:
        units = units_of(slot.dimension)
        unit = suggest_unit(word, slot.dimension) if units else None
        if unit:
            hint = f"did you mean `{unit}`?"
        elif units:
            hint = f"{slot.label} takes {_or(units)}"
        else:
            hint = f"{slot.label} is a plain number, without a unit"
        return PlanError(f"unknown unit `{word}`", span, hint=hint)
    unit = suggest_unit(word)
    keyword = did_you_mean(word, keywords())
    if keyword and _similarity(word, keyword) < 0.75:
        keyword = None
    if unit and (not keyword or _similarity(word, unit) >= _similarity(word, keyword)):
        hint = f"did you mean `{unit}`?"
    elif keyword:
        hint = (f"did you mean `{keyword}`? It is a keyword, so the number before it "
                "still needs its unit")
    else:
        hint = "the units are " + ", ".join(u for u in UNITS if u)
    return PlanError(f"unknown unit `{word}`", span, hint=hint)


# --- names ---------------------------------------------------------------------------

_WORD = re.compile(r"[A-Za-z_%][A-Za-z0-9_\-/%]*")
# Keywords that may still name a step: `in` stands only inside a phasing goal (`phase
# 30 deg in 2 rev`), where no name can, and plans named steps `in` before it was a keyword.
NAMEABLE = frozenset({"in"})
_NAME = re.compile(r"[A-Za-z_][A-Za-z0-9_-]*")


# Keywords that came after plans could use them as names (`coast c3 for 2 h`): they may
# still name things, since no name stands where they do; only an `expect` step cannot be
# named after one of its checks (`expect c3 ...` reads the check).
# The time scales an `epoch` may be given in (CCSDS time system names).
EPOCH_SCALES = ("UTC", "TAI", "TT", "GPS", "TDB")

LATER_KEYWORDS = frozenset({"c3", "elapsed", "velocity", "normal", "binormal", "transverse",
                            "frame", "burns", "steering", "gravity", "drift",
                            "sun-synchronous", "epoch", "leg", "trade"})


def _named(name: ast.Name | None, role: str) -> ast.Name | None:
    """``name`` when it can name ``role`` ("a step", "an engine", ...)."""
    if name is None:
        return None
    if name.text in keywords() and name.text not in NAMEABLE | LATER_KEYWORDS:
        raise PlanError(f"`{name.text}` is a keyword and cannot name {role}", name.span,
                        hint=f"choose another name, such as `{name.text}-1`")
    if not _NAME.fullmatch(name.text):
        hint = "a name is letters, digits, `_` and `-`, starting with a letter or `_`"
        if "/" in name.text:
            hint += "; `/` is kept for the burns a transfer expands into (`geo/1`)"
        raise PlanError(f"`{name.text}` cannot name {role}", name.span, hint=hint)
    return name


# Plan settings that name a choice (the first is the default), and what the choices mean.
MODEL_CHOICES = {"burns": ("impulsive", "finite"), "steering": ("velocity", "inertial"),
                 "gravity": ("point-mass", "j2")}
MODEL_HINTS = {
    "burns": " (impulsive velocity changes, or every burn flown at its engine's thrust)",
    "steering": (" (a finite burn's thrust held at the impulsive burn's angle to the "
                 "velocity, or fixed in space along it)"),
    "gravity": (" (two-body, the default, or the secular drift of the node and apse line "
                "from the body's J2)")}

FRAMES = ("rtn", "vnb")  # radial-transverse-normal, velocity-normal-binormal


def _frame_name(name: ast.Name) -> ast.Name:
    """The frame of a burn's components: ``rtn`` or ``vnb``."""
    if name.text in FRAMES:
        return name
    guess = did_you_mean(name.text, FRAMES)
    raise PlanError(f"unknown frame `{name.text}`", name.span,
                    hint=(f"did you mean `{guess}`? " if guess else "") +
                    "the frames are `rtn` (radial, transverse, normal) and `vnb` (velocity, "
                    "normal, binormal)")


# --- the tree to syntax nodes --------------------------------------------------------


def _field_rule(context: str) -> Callable:
    """A callback for a ``!`` rule ``KEY value`` that checks the value against its slot."""

    def rule(self, meta, children):
        key = str(children[0])
        value = _checked(children[-1], SLOTS[f"{context}.{key}"])
        return ast.Field(key, value, _span(meta))

    return rule


def _check_rule(comparator: str) -> Callable:
    def rule(self, meta, children):
        kind_token, value, *rest = children
        kind = str(kind_token)
        value = _checked(value, SLOTS[f"expect.{kind}"])
        if isinstance(value, ast.Distance) and kind not in ("periapsis", "apoapsis",
                                                            "circular"):
            value = value.quantity
        tolerance = rest[0] if rest else None
        if tolerance is not None:
            _checked(tolerance, SLOTS[f"tolerance.{kind}"])
        return ast.Check(kind, value, comparator, tolerance, _span(meta))

    return rule


@v_args(meta=True)
class _ToSyntax(Transformer):
    """Each grammar rule to its syntax dataclass; quantities checked against their slot."""

    def start(self, meta, children):
        return tuple(children)

    # values

    def quantity(self, meta, children):
        number, unit = children
        return ast.Quantity(str(number), str(unit) if unit is not None else "", _span(meta))

    def altitude_distance(self, meta, children):
        return ast.Distance(children[0], False, _span(meta))

    def radius_distance(self, meta, children):
        return ast.Distance(children[0], True, _span(meta))

    def name(self, meta, children):
        return ast.Name(str(children[0]), _span(meta))

    # the scene

    def plan_title(self, meta, children):
        return ast.PlanTitle(str(children[0])[1:-1], _span(meta))

    def epoch(self, meta, children):
        """`epoch 2027-03-01T00:00:00 UTC`: a real date and time, and its time scale."""
        import datetime

        stamp, scale = children
        try:
            datetime.datetime.fromisoformat(str(stamp))
        except ValueError:
            raise PlanError(f"`{stamp}` is not a date and time", _token_span(stamp),
                            hint="write it as YEAR-MONTH-DAYTHOUR:MINUTE:SECOND, e.g. "
                                 "`epoch 2027-03-01T00:00:00 UTC`") from None
        if scale is None:
            raise PlanError("the epoch needs its time scale", _token_span(stamp),
                            hint=f"add one of {', '.join(EPOCH_SCALES)} after it, e.g. "
                                 f"`epoch {stamp} UTC`")
        if str(scale) not in EPOCH_SCALES:
            guess = did_you_mean(str(scale), EPOCH_SCALES)
            raise PlanError(f"`{scale}` is not a time scale apsidal knows",
                            _token_span(scale),
                            hint=(f"did you mean `{guess}`? " if guess else "")
                            + f"the scales are {', '.join(EPOCH_SCALES)}")
        return ast.Epoch(str(stamp), str(scale), _span(meta))

    def around(self, meta, children):
        return ast.Around(_named(children[0], "a body"), _span(meta))

    body_field = _field_rule("body")
    _craft_field = _field_rule("craft")

    def craft_field(self, meta, children):
        """`residual` takes a mass (kg) or a share of the load (%)."""
        if str(children[0]) != "residual":
            return self._craft_field(meta, children)
        value = children[-1]
        ratio = value.unit in UNITS and UNITS[value.unit][0] == "ratio"
        return ast.Field("residual", _checked(value, SLOTS["craft.residual_share" if ratio
                                                           else "craft.residual"]), _span(meta))
    engine_field = _field_rule("engine")
    orbit_apsis = orbit_shape = orbit_angle = _field_rule("start")

    def body_def(self, meta, children):
        name, *fields = children
        return ast.BodyDef(_named(name, "a body"), tuple(fields), _span(meta))

    def engine(self, meta, children):
        name, *fields = children
        return ast.Engine(_named(name, "an engine"), tuple(fields), _span(meta))

    def craft_def(self, meta, children):
        name, *items = children
        fields = tuple(i for i in items if isinstance(i, ast.Field))
        engines = tuple(i for i in items if isinstance(i, ast.Engine))
        return ast.CraftDef(_named(name, "a craft"), fields, engines, _span(meta))

    def setting(self, meta, children):
        key = str(children[0])
        return ast.Setting(key, _checked(children[1], SLOTS[f"setting.{key}"]), _span(meta))

    def model_setting(self, meta, children):
        key, word = str(children[0]), children[-1]
        choices = MODEL_CHOICES[key]
        if word.text not in choices:
            guess = did_you_mean(word.text, choices)
            what = "gravity model" if key == "gravity" else f"`{key}` choice"
            raise PlanError(f"unknown {what} `{word.text}`", word.span,
                            hint=(f"did you mean `{guess}`? " if guess else "") + f"`{key}` is "
                            + " or ".join(f"`{c}`" for c in choices) + MODEL_HINTS[key])
        return ast.Setting(key, None, _span(meta), word=word)

    def drift_limit(self, meta, children):
        return ast.Setting("drift", _checked(children[-1], SLOTS["setting.drift"]), _span(meta))

    def sun_synchronous(self, meta, children):
        return ast.Field("inclination", ast.SunSynchronous(_token_span(children[-1])),
                         _span(meta))

    def sun_synchronous_goal(self, meta, children):
        return ast.Goal("inclination", ast.SunSynchronous(_token_span(children[-1])),
                        _span(meta))

    def ceiling_radius(self, meta, children):
        return ast.Setting("ceiling", _checked(children[-1], SLOTS["setting.ceiling"]),
                           _span(meta), is_radius=True)

    def circular_field(self, meta, children):
        return ast.Field("circular", _checked(children[0], SLOTS["start.circular"]),
                         _span(meta))

    def start_circular(self, meta, children):
        return ast.Start("circular", tuple(children), _span(meta))

    def start_orbit(self, meta, children):
        return ast.Start("orbit", tuple(children), _span(meta))

    # steps

    def step_name(self, meta, children):
        return _named(children[0], "a step")

    def step_where(self, meta, children):
        return children[0]

    def where(self, meta, children):
        words = [str(c) for c in children if isinstance(c, Token)]
        later = words[:1] == ["next"]
        kind = " ".join(words[1:] if later else words)
        last = children[-1]
        if isinstance(last, ast.Distance):  # where the orbit crosses that altitude or radius
            return ast.Where("radius", None, _span(meta), _checked(last, SLOTS["where.radius"]),
                             later)
        angle = last if isinstance(last, ast.Quantity) else None
        if angle is not None:
            _checked(angle, SLOTS["where.anomaly"])
        return ast.Where(kind, angle, _span(meta), None, later)

    def goal(self, meta, children):
        kind = str(children[0])
        if kind == "vinf" and isinstance(children[-1], Token) and str(children[-1]) == "leg":
            # `vinf to leg`: the departure vinf of the plan's next leg (lowering finds it)
            return ast.Goal(kind, ast.Name("leg", _token_span(children[-1])), _span(meta))
        value = children[-1] if isinstance(children[-1], ast.Quantity | ast.Distance) else None
        if value is not None:
            _checked(value, SLOTS[f"goal.{kind}"])
        return ast.Goal(kind, value, _span(meta))

    def transfer_goal(self, meta, children):
        if str(children[0]) != "phase":
            return self.goal(meta, children)
        _, angle, _, count, _ = children  # phase ANGLE in N rev
        revs = ast.Quantity(str(count), "", _token_span(count))
        if not (math.isfinite(revs.value) and revs.value >= 1 and revs.value.is_integer()):
            raise PlanError(f"a phasing orbit is flown a whole number of times, got "
                            f"`{count} rev`", revs.span,
                            hint="write a whole number of revolutions, 1 or more, such as "
                                 "`in 2 rev`: the craft comes back to the point of the burn "
                                 "only after whole revolutions")
        return ast.Goal("phase", _checked(angle, SLOTS["goal.phase"]), _span(meta), revs)

    def goals(self, meta, children):
        return tuple(children)

    transfer_goals = goals

    def options(self, meta, children):
        return tuple(children)

    def option(self, meta, children):
        key = str(children[0])
        if key in ("fixed", "movable", "tangential", "statistical"):
            return ast.Option(key, None, _span(meta))
        value = children[1]
        if key == "using":
            return ast.Option(key, _named(value, "an engine"), _span(meta))
        if key == "frame":
            return ast.Option(key, _frame_name(value), _span(meta))
        return ast.Option(key, _checked(value, SLOTS["option.margin"]), _span(meta))

    def via(self, meta, children):
        return _checked(children[0], SLOTS["via"])

    def burn(self, meta, children):
        name, where, goals, options = children
        return ast.Burn(name, where, goals, options, _span(meta))

    def transfer(self, meta, children):
        name, where, goals, via, options = children
        return ast.Transfer(name, where, goals, via, options, _span(meta))

    def free(self, meta, children):
        return children[0] is not None

    def coast_for(self, meta, children):
        name, duration, free = children
        return ast.Coast(name, "for", _checked(duration, SLOTS["coast.for"]), None, _span(meta),
                         free)

    def coast_to(self, meta, children):
        name, where, free = children
        return ast.Coast(name, "to", None, where, _span(meta), free)

    def coast_rev(self, meta, children):
        name, count, free = children
        revs = ast.Quantity(str(count), "", _token_span(count))
        if not (math.isfinite(revs.value) and revs.value > 0):
            raise PlanError(f"a coast counts a positive number of revolutions, got "
                            f"`{count} rev`", revs.span,
                            hint="write a number above zero such as `2 rev` or `0.5 rev`, or "
                                 "coast `for` a time or `to` a point of the orbit")
        return ast.Coast(name, "rev", revs, None, _span(meta), free)

    def drop(self, meta, children):
        name, mass, free = children
        return ast.Drop(name, _checked(mass, SLOTS["drop"]), _span(meta), free)

    def entry(self, meta, children):
        name, interface = children
        return ast.Entry(name, _checked(interface, SLOTS["entry"]), _span(meta))

    def allow(self, meta, children):
        name, amount, duration, options = children
        return ast.Allow(name, _checked(amount, SLOTS["allow"]), duration, options, _span(meta))

    def leg(self, meta, children):
        name, body, given = children
        depart, arrive, duration = given if given is not None else (None, None, None)
        return ast.Leg(name, _named(body, "a body"), depart, arrive, duration, _span(meta))

    def leg_given(self, meta, children):
        depart, arrive, duration = children
        return (_checked(depart, SLOTS["leg.depart"]), _checked(arrive, SLOTS["leg.arrive"]),
                _checked(duration, SLOTS["leg.for"]))

    def trade(self, meta, children):
        name, *items = children
        return ast.Trade(_named(name, "a trade"), tuple(items), _span(meta))

    def trade_item(self, meta, children):
        kinds = {"WORD": "word", "TARGET": "target", "NUMBER": "number", "RANGE": "range"}
        words = tuple(ast.TradeWord(kinds.get(t.type, "word"), str(t), _token_span(t))
                      for t in children)
        return ast.TradeItem(words[0], words[1:], _span(meta))

    def allow_rate(self, meta, children):
        return _checked(children[0], SLOTS["allow.for"])

    def expect(self, meta, children):
        name, *checks, free = children
        return ast.Expect(name, tuple(checks), _span(meta), free)

    def distance_kind(self, meta, children):
        return children[0]

    value_kind = distance_kind

    def drift_kind(self, meta, children):
        return "raan drift"

    def tolerance(self, meta, children):
        return children[0]

    check_within = _check_rule("within")
    check_at_least = _check_rule("at least")
    check_at_most = _check_rule("at most")


# --- text that is no plan at all -----------------------------------------------------

# Characters no plan contains; the line breaks among them would also make line numbers
# disagree with what an editor shows.
_BINARY = re.compile(r"[\x00-\x08\x0b\x0c\x0e-\x1f\x7f\x85\u2028\u2029]|\r(?!\n)")


def _shown(source: Source, span: Span | None = None) -> Source:
    """The source as an error excerpt can show it: stray control characters replaced,
    and the line at ``span`` cut short when it runs on (as binary data does)."""
    text = _BINARY.sub("\ufffd", source.text)
    if span is not None:
        lines = text.split("\n")
        line = lines[span.line - 1]
        if len(line) > span.column + 40:
            lines[span.line - 1] = line[:span.column + 40] + "\u2026"
            text = "\n".join(lines)
    return Source(source.path, text)


def _reject_binary(source: Source) -> None:
    found = _BINARY.search(source.text)
    if found is None:
        return
    char = found.group()
    span = _point(source.text, found.start())
    if char == "\x00":
        message = "the plan contains a NUL byte: this looks like a binary file, not a plan"
    elif char == "\r":
        message = "the plan has a carriage return that does not end a line"
    else:
        message = f"the plan contains the control character U+{ord(char):04X}"
    raise PlanError(message, span, _shown(source, span),
                    hint="a plan is a plain UTF-8 text file; check that this is the right file")


def _not_utf8(path: str, data: bytes, start: int) -> PlanError:
    text = data.decode("utf-8", errors="replace")
    span = _point(text, len(data[:start].decode("utf-8", errors="replace")))
    return PlanError(f"the file is not UTF-8 text: byte 0x{data[start]:02X} cannot be read",
                     span, _shown(Source(path, text), span),
                     hint="a plan is a plain text file saved as UTF-8; is this the right file?")


# --- syntax errors -------------------------------------------------------------------


@dataclass(frozen=True)
class _Mistake:
    """A common mistake, recognised by the parser state its examples fail in.

    The examples go to lark's ``UnexpectedInput.match_examples``, which compares parser
    states (stack depth and top state) and what each state accepts.  ``message`` and
    ``hint`` may name ``{stmt}`` (the first word of the line), ``{prev}`` (the token
    before the offending one), ``{token}`` (the offending one, described) and ``{word}``
    (as written), ``{block}`` (the open block's keyword) and ``{statements}``;
    ``applies`` narrows the mistake to some offending tokens.
    """

    message: str
    hint: str
    examples: tuple[str, ...]
    applies: Callable[[Token], bool] | None = None


def _anywhere(*snippets: str) -> tuple[str, ...]:
    """Each snippet as the first line of a plan and after another line: the parser
    stack differs by one entry between the two."""
    return tuple(v for s in snippets for v in (s + "\n", "around earth\n" + s + "\n"))


_WHERES = ("periapsis", "apoapsis", "ascending node", "descending node", "node",
           "anomaly 90 deg")


def _ends_block(token: Token) -> bool:
    return token.type == "$END" or str(token) in statement_keywords()


def _is_time_unit(token: Token) -> bool:
    return UNITS.get(str(token), ("",))[0] == "time"


_MISTAKES: tuple[_Mistake, ...] = (
    _Mistake(
        "`{stmt}` needs `:` before its goals",
        "write `{stmt} NAME at WHERE: GOAL, ...` (the name and `at WHERE` are optional), "
        "e.g. `burn raise at periapsis: apoapsis to 35786 km`",
        _anywhere(*(f"{step} raise apoapsis to 1 km" for step in ("burn", "transfer")),
                  *(f"{step} at {w} apoapsis to 1 km" for step in ("burn", "transfer")
                    for w in _WHERES),
                  *(f"{step} raise at {w} apoapsis to 1 km" for step in ("burn", "transfer")
                    for w in _WHERES)),
    ),
    _Mistake(
        "`start` needs `circular` or `orbit`",
        "e.g. `start circular 400 km inclination 51.6 deg` or "
        "`start orbit periapsis 250 km apoapsis 35786 km`",
        _anywhere("start periapsis 250 km"),
    ),
    _Mistake(
        "the `{prev}` goal needs `to` before its value",
        "write `{prev} to ...`, e.g. `apoapsis to 35786 km` or `inclination to 0 deg`",
        _anywhere(*(f"burn: {g} 1 km" for g in ("apoapsis", "periapsis", "inclination",
                                                 "raan", "sma", "ecc", "argp", "period",
                                                 "vinf", "c3")),
                  *(f"burn: circular, {g} 1 km" for g in ("apoapsis", "periapsis",
                                                           "inclination", "raan", "sma", "ecc",
                                                           "argp", "period", "vinf", "c3")),
                  *(f"transfer: {g} 1 deg" for g in ("inclination", "raan")),
                  *(f"transfer: circular, {g} 1 deg" for g in ("inclination", "raan"))),
    ),
    _Mistake(
        "an `expect` check takes its value without `to`",
        "e.g. `expect apoapsis 35786 km within 1 km` or `expect inclination 0 deg`",
        _anywhere("expect apoapsis to 1 km", "expect inclination to 1 deg",
                  "expect mass 1 kg, apoapsis to 1 km", "expect mass 1 kg, inclination to 1 deg"),
        applies=lambda token: str(token) == "to",
    ),
    _Mistake(
        "the `{block}` block is not closed",
        "add `}}` after the block's last field",
        _anywhere("body b {\n gm 1 km3/s2\nmargin 5 %", "body b {\n gm 1 km3/s2",
                  "craft c {\n dry 1 kg\nmargin 5 %", "craft c {\n dry 1 kg",
                  "craft c {\n engine e isp 1 s thrust 1 N\nmargin 5 %"),
        applies=_ends_block,
    ),
    _Mistake(
        "a coast for a length of time needs `for`",
        "write `coast NAME for {prev} {word}`, or `coast NAME {prev} rev` for whole "
        "revolutions",
        _anywhere("coast wait 2 h", "coast 2 h"),
        applies=_is_time_unit,
    ),
    _Mistake(
        "`coast` needs `for` a time, `to` a point of the orbit, or a number of revolutions",
        "e.g. `coast settle for 2 d`, `coast to apoapsis` or `coast wait 2 rev`",
        _anywhere("coast wait apoapsis", "coast"),
    ),
    _Mistake(
        "the plan title goes in double quotes",
        'e.g. `plan "Relay craft: drop-off to geostationary slot"`',
        _anywhere("plan Relay craft"),
    ),
    _Mistake(
        "{token} does not start a statement",
        "a line starts with one of: {statements}",
        _anywhere("foo bar"),
    ),
)

_GOAL_WORDS = ("apoapsis", "periapsis", "circular", "inclination", "raan", "along", "cross",
               "radial", "sma", "ecc", "argp", "period", "vinf", "c3", "velocity", "normal",
               "binormal", "transverse")
_CHECK_WORDS = ("periapsis", "apoapsis", "circular", "sma", "ecc", "inclination", "raan",
                "argp", "period", "mass", "propellant", "vinf", "c3", "elapsed", "anomaly")

_CRAFT = "craft relay { dry 640 kg  propellant 910 kg  engine main isp 321 s thrust 440 N }"
_BODY = "body rock { gm 17.3 km3/s2  radius 262 km }"
# Words that start a field of a block, with the block they belong in.
_BLOCK_WORDS = {"dry": ("craft", _CRAFT), "propellant": ("craft", _CRAFT),
                "engine": ("craft", _CRAFT), "isp": ("craft", _CRAFT),
                "thrust": ("craft", _CRAFT), "gm": ("body", _BODY), "radius": ("body", _BODY),
                "soi": ("body", _BODY), "j2": ("body", _BODY)}

# Characters that look like plan text but are not.
_LOOKALIKES = {
    "\u2212": "write a minus sign as `-`",
    "\u2013": "write a minus sign as `-`",
    "\u00b0": "write angles in `deg`, e.g. `28.5 deg`",
    "\u201c": 'write the title in straight quotes: `"`',
    "\u201d": 'write the title in straight quotes: `"`',
    ";": "a statement ends at the end of its line; no `;` is needed",
    "=": "a field is written `key value`, without `=`, e.g. `dry 640 kg`",
}


def _example_parse(text: str) -> None:
    context = _COMMENTS.set(None)
    try:
        _parser().parse(text)
    finally:
        _COMMENTS.reset(context)


def _accepts(e: UnexpectedInput) -> set[str]:
    parser = getattr(e, "interactive_parser", None)
    accepts = parser.accepts() if parser is not None else set()
    if not accepts:
        accepts = set(getattr(e, "expected", None) or getattr(e, "allowed", None) or ())
    return accepts - {"WS", "COMMENT"}


def _stack(e: UnexpectedInput) -> list:
    parser = getattr(e, "interactive_parser", None)
    return list(parser.parser_state.value_stack) if parser is not None else []


def _after_number(stack: list) -> bool:
    return bool(stack) and isinstance(stack[-1], Token) and stack[-1].type == "NUMBER"


def _expected(accepts: set[str], stack: list) -> str:
    """What the parser would have taken, in the words a user types."""
    shown = {"ascending": "ascending node", "descending": "descending node"}
    words = [f"`{shown.get(text, text)}`" for name, text in _terminal_text().items()
             if name in accepts]
    described = {"NUMBER": "a number",
                 "WORD": "a unit" if _after_number(stack) else "a name",
                 "STRING": "a title in double quotes",
                 "TIMESTAMP": "a date and time such as `2027-03-01T00:00:00`",
                 "_NL": "end of line"}
    words += [text for name, text in described.items() if name in accepts]
    if "$END" in accepts and not words:
        words.append("end of file")
    return _or(words) if words else "nothing more"


def _describe(token: Token) -> str:
    if token.type == "$END":
        return "end of file"
    if token.type == "_NL":
        return "end of line"
    if token.type == "NUMBER":
        return f"number `{token}`"
    if token.type == "STRING":
        return f"quoted text {token}"
    return f"`{token}`"


def _line_word(source: Source, line: int) -> str:
    words = source.line_text(line).split()
    return words[0] if words else ""


def _stray_unit(stack: list) -> PlanError | None:
    """A word just read as the unit of a number but no unit: the real mistake is there."""
    if len(stack) >= 2 and isinstance(stack[-1], Token) and stack[-1].type == "WORD" \
            and isinstance(stack[-2], Token) and stack[-2].type == "NUMBER" \
            and str(stack[-1]) not in UNITS:
        return _unknown_unit(str(stack[-1]), _token_span(stack[-1]))
    return None


def _syntax_error(e: UnexpectedInput, source: Source) -> PlanError:
    stack = _stack(e)
    error = _stray_unit(stack) or _thousands(e, source) or (
        _bad_character(e, source, stack) if isinstance(e, UnexpectedCharacters)
        else _bad_token(e, source, stack))
    return error.located(_shown(source))


def _bad_character(e: UnexpectedCharacters, source: Source, stack: list) -> PlanError:
    char = source.text[e.pos_in_stream]
    span = _point(source.text, e.pos_in_stream)
    if char == '"':
        rest = source.line_text(span.line)[span.column - 1:]
        span = Span(span.line, span.column, span.line, span.column + len(rest), span.start,
                    span.start + len(rest))
        return PlanError("unterminated string: the closing `\"` is missing", span,
                         hint='a title is one line in double quotes: `plan "..."`')
    shown = f"`{char}`" if char.isprintable() else f"U+{ord(char):04X}"
    hint = _LOOKALIKES.get(char)
    if hint is None and char.isalpha() and not char.isascii():
        word = re.match(r"[\w\-]*", source.text[e.pos_in_stream:]).group(0)
        start = source.text.rfind(" ", 0, e.pos_in_stream) + 1
        whole = source.text[start:e.pos_in_stream] + word
        return PlanError(f"`{whole}` has the letter {shown}, outside ASCII", span,
                         hint="names are ASCII letters, digits, `-` and `_` (a letter or `_` "
                         "first); spell it without accents, e.g. "
                         f"`{_ascii_spelling(whole)}`; comments and the title may use any "
                         "letter")
    hint = hint or f"expected {_expected(_accepts(e), stack)}"
    return PlanError(f"unexpected character {shown}", span, hint=hint)


def _ascii_spelling(word: str) -> str:
    """``word`` without its accents, as a name can be written.

    >>> _ascii_spelling("tätig-ö"), _ascii_spelling("grüß")
    ('tatig-o', 'gruss')
    """
    import unicodedata

    for letter, spelt in (("ß", "ss"), ("æ", "ae"), ("œ", "oe"), ("ø", "o"), ("ł", "l")):
        word = word.replace(letter, spelt)
    flat = unicodedata.normalize("NFKD", word).encode("ascii", "ignore").decode()
    return flat or "name"


def _thousands(e: UnexpectedInput, source: Source) -> PlanError | None:
    """`1,000 km`, as apsidal prints numbers: a number cut at a thousands separator."""
    token = getattr(e, "token", None)
    if token is None or token.type not in ("NUMBER", "COMMA") or token.start_pos is None:
        return None
    m = re.compile(r"\d+(?:,\d{3})+(?:\.\d*)?\b").search(
        source.text, max(token.start_pos - 40, 0))
    while m is not None and m.end() <= token.start_pos:
        m = re.compile(r"\d+(?:,\d{3})+(?:\.\d*)?\b").search(source.text, m.end())
    if m is None or not m.start() < token.start_pos < m.end():
        return None
    digits = m.group(0)
    return PlanError(f"`{digits}` has a thousands separator", _token_span(token),
                     hint=f"write numbers without separators: `{digits.replace(',', '')}`")


TRADE_ITEM_HINT = ("a trade item: `vary NAME.FIELD LOW..HIGH UNIT`, `disperse NAME.FIELD "
                   "SIGMA UNIT`, `minimise propellant|dv|elapsed`, `tolerance AMOUNT UNIT`, "
                   "`points N`, `samples N` or `seed N`, separated by commas")


def _bad_token(e: UnexpectedInput, source: Source, stack: list) -> PlanError:
    token = e.token if isinstance(e, UnexpectedToken | UnexpectedEOF) else None
    if token is None or token.type == "$END":
        token = Token("$END", "")
        span = _end_of_text(source.text)
    else:
        span = _token_span(token)
    accepts = _accepts(e)
    expected = _expected(accepts, stack)
    word = str(token)

    if token.type == "WORD" and word not in keywords():
        offered = [t for n, t in _terminal_text().items() if n in accepts and t in keywords()]
        guess = did_you_mean(word, offered)
        if guess:
            return PlanError(f"unexpected `{word}`", span,
                             hint=f"did you mean `{guess}`? (expected {expected})")

    statement = _line_word(source, span.line)
    if statement == "transfer" and word in _GOAL_WORDS and "CIRCULAR" in accepts:
        return PlanError(f"a transfer takes `circular`, `inclination to` and `raan to`, "
                         f"not `{word}`", span,
                         hint="use a `burn` for single apsis changes or explicit components")
    if "COMMA" in accepts:  # a second goal or check without the comma before it
        if word in _GOAL_WORDS and statement in ("burn", "transfer"):
            return PlanError(f"the goals of a `{statement}` are separated by `,`", span,
                             hint=f"write `, {word} ...`")
        if word in _CHECK_WORDS and statement == "expect":
            return PlanError("the checks of an `expect` are separated by `,`", span,
                             hint=f"write `, {word} ...`")

    tokens = [v for v in stack if isinstance(v, Token)]
    if statement == "trade" and tokens and str(tokens[-1]) in (":", ","):  # an item
        return PlanError(f"unexpected {_describe(token)}", span, hint=TRADE_ITEM_HINT)
    if token.type == "STRING" and "WORD" in accepts:
        return PlanError(f"unexpected {_describe(token)}", span,
                         hint=f"a name is written without quotes: `{word[1:-1]}`")
    if word in ("isp", "thrust") and "ENGINE" in accepts:
        return PlanError(f"`{word}` belongs on an `engine` line of the craft", span,
                         hint="e.g. `engine main isp 321 s thrust 440 N`")
    block = _BLOCK_WORDS.get(word)
    if block and "BURN" in accepts:  # a line start
        return PlanError(f"`{word}` belongs inside a `{block[0]}` block", span,
                         hint=f"e.g. `{block[1]}`")

    try:
        mistake = e.match_examples(_example_parse, [(m, m.examples) for m in _MISTAKES])
    except TypeError:  # lark 1.3 formats a debug line with `%d` of a parser state object
        mistake = None  # (an example in the same state accepting other tokens): no match
    if mistake is not None and (mistake.applies is None or mistake.applies(token)):
        tokens = [v for v in stack if isinstance(v, Token)]
        opened = next((t for t in reversed(tokens) if t.type == "LBRACE"), None)
        block = next((str(t) for t in reversed(tokens) if t.type in ("CRAFT", "BODY")), "")
        fill = {"stmt": statement, "prev": str(tokens[-1]) if tokens else "", "block": block,
                "token": _describe(token), "word": word,
                "statements": _or([f"`{w}`" for w in statement_keywords()])}
        error = PlanError(mistake.message.format(**fill), span,
                          hint=mistake.hint.format(**fill))
        if opened is not None and mistake.applies is _ends_block:
            error.notes.append(f"the block opened on line {opened.line}")
        return error

    return PlanError(f"unexpected {_describe(token)}", span, hint=f"expected {expected}")

"""Trade studies on the batch axis: a plan priced for many values of its quantities at once.

A trade names quantities of the plan as ``NAME.FIELD`` (``geo.circular``, ``main.isp``,
``craft.dry``, ``start.periapsis``, ``plan.margin``) and gives each a set of values: a
grid (``vary``), normal samples (``disperse``) or a search for the best value
(``minimise``, in ``compiler/optimum.py``).  Every variant is the plan text with those
numbers written in and priced by the same evaluator, all variants in one batch:

* the plan is lowered once, and again with each varied quantity at the ends of its
  range (and its middle).  Every number of the lowered program that moves is an affine
  function of the value (a unit conversion, an altitude plus the body's radius), so the
  probes fix it exactly; a number that does not move affinely (an `sma to` goal becomes
  an energy) is refused by name.  The start state is not affine in the elements: it is
  computed per element from the start orbit's fields (``start_states``) and checked
  against the probes.  Lowering at the ends (and at every corner of a grid's box) also
  runs every check lowering makes (a target under the surface, an inclination past
  180 deg, a bi-elliptic apoapsis below its target): those bounds are linear in the
  values, so a box whose corners lower lowers throughout.  Values past the bound of one
  quantity are held at its edge and reported not flown (``admissible``); combinations
  past a bound several share are found by lowering each variant and reported not flown
  (``jointly``).  A dispersion's crossed start apsides are the ellipse turned half a
  turn, written so in the variant's text (``variant_text``).
* the lowered program is rebuilt with those numbers as arrays over the batch
  (``Model.program``): the steps' goals, masses, engines and margins hold one value per
  variant, and the evaluator broadcasts them.
* variants go through the evaluator in chunks of ``CHUNK`` (memory stays bounded: a
  million variants keep only their totals), each chunk independent of the others.

A variant that cannot be flown keeps its place with the reason, worded on demand.
"""

from __future__ import annotations

import dataclasses
import itertools
import math
from collections.abc import Callable, Iterator
from dataclasses import dataclass, field

import numpy as np
from apsidal.lang import syntax as ast
from apsidal.lang.errors import PlanError, Span, did_you_mean
from apsidal.lang.parse import parse
from apsidal.lang.units import UNITS

from .cliutil import UsageError
from .evaluate import _check_surface, apply, context_for, descending, start_batch
from .lower import lower
from .solvers import Failures
from .state import state_from_elements
from .steps import Program

CHUNK = 1 << 15  # variants priced at once: about 150 MB at the peak for a ten-step plan
OBJECTIVES = {"propellant": "propellant_kg", "dv": "dv_m_s", "elapsed": "elapsed_s"}
TOTALS = ("dv_m_s", "dv_with_margin_m_s", "propellant_kg", "final_mass_kg",
          "propellant_left_kg", "dv_capacity_left_m_s", "elapsed_s")
FLAGS = ("reserve_met", "expectations_met")
MAX_KNOBS = 8  # quantities a trade moves at once: 256 corners lowered
AFFINE_RTOL = 1e-11  # how closely a moved number must follow a straight line in the value


# --- what the user names ----------------------------------------------------------------


def _complain(message: str, hint: str | None, span: Span | None, source=None):
    """A mistake in a trade: located in the plan when it was written there, otherwise a
    command-line error."""
    if span is not None:
        return PlanError(message, span, source, hint)
    return UsageError(message + (f"; {hint}" if hint else ""))


@dataclass(frozen=True)
class Knob:
    """One quantity of the plan a trade moves."""

    target: str  # NAME.FIELD as the user wrote it
    quantity: ast.Quantity  # where it stands in the plan text
    altitude: bool  # an altitude: the lowered number is a radius
    start_key: str | None  # the field of the start orbit, for the start state

    @property
    def dimension(self) -> str:
        return UNITS[self.quantity.unit][0]

    def base(self, unit: str) -> float:
        """The plan's own value, in ``unit``."""
        return self.quantity.internal() / UNITS[unit][1]

    def internal(self, values, unit: str, body_radius: float):
        """Values in ``unit`` as the lowered number (internal units, radii)."""
        x = np.asarray(values, dtype=float) * UNITS[unit][1]
        return x + body_radius if self.altitude else x


def _fields_of(st) -> dict[str, ast.Quantity | ast.Distance]:
    """The quantities a statement holds, by the name a trade gives them."""
    if isinstance(st, ast.Setting):
        return {st.key: st.value}
    if isinstance(st, ast.CraftDef | ast.Engine | ast.Start | ast.BodyDef):
        return {f.key: f.value for f in st.fields}
    out: dict = {}
    if isinstance(st, ast.Burn | ast.Transfer):
        out.update({g.kind: g.value for g in st.goals if g.value is not None})
        if isinstance(st, ast.Transfer) and st.via is not None:
            out["via"] = st.via
        out.update({o.key: o.value for o in st.options if o.key == "margin"})
    elif isinstance(st, ast.Coast) and st.mode == "for":
        out["for"] = st.duration
    elif isinstance(st, ast.Drop):
        out["mass"] = st.mass
    elif isinstance(st, ast.Allow):
        out["dv"] = st.amount
    return out


def locate(plan: ast.Plan, program: Program, target: str, span: Span | None = None) -> Knob:
    """The quantity ``NAME.FIELD`` names in the plan, or a clear error."""
    name, dot, key = target.rpartition(".")
    if not dot or not name or not key:
        raise _complain(f"`{target}` is not NAME.FIELD",
                        "write the step, `craft`, an engine, `start` or `plan`, a dot and "
                        "the quantity: `geo.circular`, `main.isp`, `craft.dry`, "
                        "`start.periapsis`, `plan.margin`", span, plan.source)
    owners: dict[str, object] = {}
    for st in plan.statements:
        if isinstance(st, ast.Setting) and st.key in ("margin", "reserve"):
            owners.setdefault("plan", {}).update(_fields_of(st))
        elif isinstance(st, ast.Start):
            owners.setdefault("start", st)  # the plan's own start (a leg's comes later)
        elif isinstance(st, ast.CraftDef):
            owners["craft"] = owners[st.name.text] = st
            for e in st.engines:
                owners[e.name.text] = e
    for st, step in zip(plan.steps(), program.steps):
        owners[step.name] = st
    if name not in owners:
        guess = did_you_mean(name, list(owners))
        raise _complain(f"the plan has no step, engine or setting named `{name}`",
                        f"did you mean `{guess}`?" if guess else
                        "expected one of: " + ", ".join(f"`{k}`" for k in owners),
                        span, plan.source)
    owner = owners[name]
    fields = owner if isinstance(owner, dict) else _fields_of(owner)
    if key not in fields:
        what = f"`{name}`"
        guess = did_you_mean(key, list(fields))
        raise _complain(f"{what} has no quantity `{key}` to vary",
                        f"did you mean `{guess}`?" if guess else
                        ("it has " + ", ".join(f"`{k}`" for k in fields) if fields else
                         "it has no quantity a trade can move"), span, plan.source)
    value = fields[key]
    if isinstance(owner, ast.Allow) and any(o.key == "statistical" for o in owner.options):
        raise _complain(f"`{name}` is a statistical line: its share of the root-sum-square "
                        "moves with every other line's", "vary a deterministic line, or "
                        "size the statistical figure with `--disperse`", span, plan.source)
    altitude = isinstance(value, ast.Distance) and not value.is_radius
    quantity = value.quantity if isinstance(value, ast.Distance) else value
    return Knob(target, quantity, altitude, key if isinstance(owner, ast.Start) else None)


def check_unit(knob: Knob, unit: str, span: Span | None = None, source=None) -> None:
    """The values' unit measures what the plan's quantity measures."""
    if unit not in UNITS:
        raise _complain(f"unknown unit `{unit}` for `{knob.target}`",
                        f"the plan gives it in `{knob.quantity.unit or 'no unit'}`", span,
                        source)
    if UNITS[unit][0] != knob.dimension:
        plan_unit = knob.quantity.unit
        raise _complain(f"`{knob.target}` is a {knob.dimension} (the plan gives "
                        f"`{knob.quantity.text()}`), but the values are in `{unit or 'no unit'}`"
                        f", a {UNITS[unit][0]}",
                        f"give the values in `{plan_unit}`" if plan_unit else
                        "give bare numbers", span, source)


def number_text(x: float) -> str:
    """A value as plan text: the shortest digits that read back as the same float."""
    return repr(float(x))


def _number(x: float, unit: str) -> str:
    return number_text(x) + (f" {unit}" if unit else "")


def variant_text(text: str, start: ast.Start | None, radius: float, knobs: list[Knob],
                 units: list[str], values: dict[int, float], mirror: bool = False) -> str:
    """The plan text with the knobs ``values`` (index: value, in ``units``) written in.

    With ``mirror`` a start orbit given by `periapsis` and `apoapsis` whose values cross
    (the periapsis above the apoapsis, as independently dispersed apsides of a
    near-circular start may draw) is written as the same ellipse with its apse line turned
    half a turn: the two radii swapped, `argp` and `anomaly` each 180 deg on (written in
    when the plan leaves them out).  The craft stands at the same point with the same
    velocity: the radius drawn for the periapsis is where it is, the other is half an
    orbit on (docs/physics.md, "Trades")."""
    edits = {k.quantity.span.start: (k.quantity.span.end, _number(x, units[j]))
             for j, x in values.items() for k in [knobs[j]]}
    if mirror and start is not None and start.form != "circular":
        fields = {f.key: f for f in start.fields}
        if {"periapsis", "apoapsis"} <= set(fields):
            def internal(key):  # the field's value as a radius, the knob's when varied
                d = fields[key].value
                for j, k in enumerate(knobs):
                    if k.start_key == key and j in values:
                        return float(k.internal(values[j], units[j], radius))
                q = d.quantity
                return q.internal() + (0.0 if d.is_radius else radius)

            rp, ra = internal("periapsis"), internal("apoapsis")
            if rp > ra:
                for key, r in (("periapsis", ra), ("apoapsis", rp)):
                    d = fields[key].value
                    x = (r - (0.0 if d.is_radius else radius)) / UNITS[d.quantity.unit][1]
                    edits[d.quantity.span.start] = (d.quantity.span.end,
                                                    _number(x, d.quantity.unit))
                missing = []
                for key in ("argp", "anomaly"):
                    if key not in fields:
                        missing.append(f"{key} 180 deg")
                        continue
                    q = fields[key].value
                    x = next((float(k.internal(values[j], units[j], radius))
                              for j, k in enumerate(knobs)
                              if k.start_key == key and j in values), q.internal())
                    edits[q.span.start] = (q.span.end, _number((x + math.pi)
                                                               / UNITS[q.unit][1], q.unit))
                if missing:
                    at = start.fields[-1].span.end
                    edits[at] = (at, " " + " ".join(missing))
    for begin in sorted(edits, reverse=True):
        end, new = edits[begin]
        text = text[:begin] + new + text[end:]
    return text


class Texts:
    """The plan text of any set of values of the knobs, and whether lowering takes it."""

    def __init__(self, text: str, path: str, knobs: list[Knob], units: list[str],
                 mirror: bool = False):
        self.text, self.path, self.knobs, self.units, self.mirror = (text, path, knobs,
                                                                     units, mirror)
        program = lower(parse(text, path))
        self.start = next((s for s in program.plan.statements if isinstance(s, ast.Start)),
                          None)
        self.radius = program.body.radius
        self.source = program.source

    def of(self, values: dict[int, float]) -> str:
        return variant_text(self.text, self.start, self.radius, self.knobs, self.units,
                            values, self.mirror)

    def refusal(self, values: dict[int, float]) -> PlanError | None:
        """Why the plan with ``values`` does not lower (None when it does)."""
        try:
            lower(parse(self.of(values), self.path))
        except PlanError as err:
            return err
        return None

    def said(self, values: dict[int, float]) -> str:
        return ", ".join(f"{self.knobs[j].target} = {number_text(x)} {self.units[j]}".rstrip()
                         for j, x in values.items())


# --- the lowered program as numbers ---------------------------------------------------

_SKIP = {"span", "source", "plan", "start_span", "body", "name", "kind", "shown", "title"}


def leaves(obj, path: tuple = ()) -> Iterator[tuple[tuple, object]]:
    """Every number of a lowered program with its path (attribute names and indices)."""
    if obj is None or isinstance(obj, bool | str):
        return
    if isinstance(obj, int | float):
        yield path, float(obj)
    elif isinstance(obj, np.ndarray):
        yield path, obj
    elif isinstance(obj, tuple):
        for i, x in enumerate(obj):
            yield from leaves(x, path + (i,))
    elif dataclasses.is_dataclass(obj):
        for f in dataclasses.fields(obj):
            if f.name not in _SKIP:
                yield from leaves(getattr(obj, f.name), path + (f.name,))


def with_leaf(obj, path: tuple, value):
    """``obj`` with the number at ``path`` replaced (frozen dataclasses rebuilt)."""
    if not path:
        return value
    head, rest = path[0], path[1:]
    if isinstance(obj, tuple):
        items = list(obj)
        items[head] = with_leaf(obj[head], rest, value)
        return tuple(items)
    return dataclasses.replace(obj, **{head: with_leaf(getattr(obj, head), rest, value)})


def start_states(program: Program, start: ast.Start, knobs: list[Knob], values: list,
                 mirror: bool = False, span: Span | None = None):
    """The start position and velocity per element, with the start orbit's varied fields
    (``values``, internal units, in ``knobs`` order) written in: the lowering's own
    sequence of operations, on arrays.  Closed start orbits only.  With ``mirror`` crossed
    apsides are the ellipse with its apse line turned half a turn (``variant_text``)."""
    R = program.body.radius
    given = {}
    for f in start.fields:
        q = f.value.quantity if isinstance(f.value, ast.Distance) else f.value
        x = q.internal() if q.unit else q.value
        given[f.key] = x + R if isinstance(f.value, ast.Distance) and not f.value.is_radius else x
    for k, x in zip(knobs, values):
        given[k.start_key] = x
    keys = set(given) - {"inclination", "raan", "argp", "anomaly"}
    if start.form == "circular":
        rp = ra = np.asarray(given["circular"], dtype=float)
    elif keys == {"periapsis", "apoapsis"}:
        rp, ra = given["periapsis"], given["apoapsis"]
    elif keys == {"sma", "ecc"}:
        a, e = given["sma"], given["ecc"]
        rp, ra = a * (1 - e), a * (1 + e)
    elif keys == {"periapsis", "ecc"}:
        rp, e = given["periapsis"], given["ecc"]
        ra = rp / (1.0 - e) * (1 + e)
    else:
        raise _complain("a trade varies the start of a closed orbit given by `circular`, "
                        "`periapsis` and `apoapsis`, `sma` and `ecc`, or `periapsis` and "
                        "`ecc`", "vary a step's quantity instead", span, program.source)
    rp, ra = np.asarray(rp, dtype=float), np.asarray(ra, dtype=float)
    get = lambda k: np.asarray(given.get(k, 0.0), dtype=float)
    inc, raan, argp, nu = get("inclination"), get("raan"), get("argp"), get("anomaly")
    if mirror and keys == {"periapsis", "apoapsis"}:
        crossed = rp > ra
        rp, ra = np.where(crossed, ra, rp), np.where(crossed, rp, ra)
        argp, nu = argp + np.where(crossed, np.pi, 0.0), nu + np.where(crossed, np.pi, 0.0)
    sma, ecc = 0.5 * (rp + ra), (ra - rp) / (ra + rp)
    equatorial = (inc < 1e-12) | (inc > np.pi - 1e-12)
    argp = np.where(equatorial, np.where(inc < np.pi / 2, argp + raan, argp - raan), argp)
    raan = np.where(equatorial, 0.0, raan)
    nu, argp = np.where(ecc == 0.0, nu + argp, nu), np.where(ecc == 0.0, 0.0, argp)
    return state_from_elements(program.body.gm, sma, ecc, inc, raan, argp, nu)


class Model:
    """A plan whose quantities ``knobs`` take values in ``units``: the lowered program for
    any set of values, built from probes of the plan text (see the module's notes)."""

    def __init__(self, text: str, path: str, knobs: list[Knob], units: list[str],
                 extremes: list[tuple[float, float]], span: Span | None = None,
                 mirror: bool = False, admitted: np.ndarray | None = None):
        """``mirror``: crossed start apsides flown turned (``variant_text``); ``admitted``:
        rows of values that lower, given when some corner of the box does not (the
        variants past a bound the knobs share, marked not flown by ``jointly``): the
        effects are then checked to add at those rows instead."""
        self.text, self.path, self.knobs, self.units = text, path, knobs, units
        self.span, self.mirror = span, mirror
        self.texts = Texts(text, path, knobs, units, mirror)
        self.base = lower(parse(text, path))
        self.source = self.base.source
        base_leaves = dict(leaves(self.base))
        self.start = next((s for s in self.base.plan.statements if isinstance(s, ast.Start)),
                          None)
        self.start_knobs = [i for i, k in enumerate(knobs) if k.start_key is not None]
        self.coeffs: dict[tuple, list[tuple[float, float] | None]] = {}
        self.constants = {p: v for p, v in base_leaves.items()}
        for j, (knob, unit, (lo, hi)) in enumerate(zip(knobs, units, extremes)):
            probes = sorted({lo, hi, 0.5 * (lo + hi)})
            lowered = [(x, dict(leaves(self._lower({j: x})))) for x in probes]
            if any(got.keys() != base_leaves.keys() for _, got in lowered):
                raise _complain(f"`{knob.target}` changes the form of the lowered plan over "
                                "this range, which a trade cannot move in one batch",
                                "vary it over a range where the plan keeps its form",
                                span, self.source)
            for p, b in base_leaves.items():
                if p in (("start_r",), ("start_v",)):
                    continue
                ys = [float(got[p]) for _, got in lowered]
                if all(y == b for y in ys):
                    continue
                if len(probes) == 1:
                    self.coeffs.setdefault(p, [None] * len(knobs))[j] = (ys[0], 0.0)
                    continue
                (x0, _), (x1, _) = lowered[0], lowered[-1]
                slope = (ys[-1] - ys[0]) / (x1 - x0)
                c0 = ys[0] - slope * x0
                scale = max(abs(y) for y in ys) + 1e-300
                if any(abs(c0 + slope * x - y) > AFFINE_RTOL * scale
                       for (x, _), y in zip(lowered, ys)):
                    raise _complain(f"`{knob.target}` enters the lowered plan non-linearly "
                                    f"(its `{p[-1]}`), which a trade cannot yet move in one "
                                    "batch", "vary a quantity that sets the value directly "
                                    "(an apsis, `circular`, a mass, `isp`)", span, self.source)
                self.coeffs.setdefault(p, [None] * len(knobs))[j] = (c0, slope)
            if knob.start_key is not None:  # the start state from the fields, per element
                xs = np.array([x for x, _ in lowered])
                vals = [np.full(len(xs), self.base_internal(i)) for i in self.start_knobs]
                vals[self.start_knobs.index(j)] = knob.internal(xs, unit, self.base.body.radius)
                r, v = start_states(self.base, self.start, [knobs[i] for i in self.start_knobs],
                                    vals, mirror, span)
                want_r = np.array([got[("start_r",)] for _, got in lowered])
                want_v = np.array([got[("start_v",)] for _, got in lowered])
                if not (np.allclose(r, want_r, rtol=1e-12, atol=1e-9)
                        and np.allclose(v, want_v, rtol=1e-12, atol=1e-12)):  # pragma: no cover
                    raise UsageError(f"`{knob.target}`: this start orbit's form cannot be "
                                     "varied in one batch")
        if len(knobs) > MAX_KNOBS:
            raise _complain(f"a trade moves at most {MAX_KNOBS} quantities at once, this one "
                            f"{len(knobs)}", "split it into several", span, self.source)
        if len(knobs) > 1:  # every corner of the box: it lowers, and the effects add there
            # (lowering's bounds are linear in the values, so a box whose corners lower
            # lowers throughout)
            points = list(itertools.product(*extremes))
            if admitted is not None:  # some corners past a shared bound: check at rows
                step = max(1, len(admitted) // 64)
                points = [tuple(x) for x in admitted[::step]] + [tuple(admitted[-1])]
                points += [c for c in itertools.product(*extremes)
                           if self.texts.refusal(dict(enumerate(c))) is None]
            for xs in points:
                got = dict(leaves(self._lower(dict(enumerate(xs)))))
                mine = self._numbers(np.array([xs]))
                for p, y in mine.items():
                    want = float(got[p])
                    if abs(float(y[0]) - want) > AFFINE_RTOL * (abs(want) + 1e-300):
                        raise _complain(
                            "the varied quantities act on the same number of the plan (its "
                            f"`{p[-1]}`), so their effects do not add",
                            "vary them one at a time", span, self.source)

    def base_internal(self, j: int) -> float:
        k = self.knobs[j]
        return float(k.internal(k.base(self.units[j]), self.units[j], self.base.body.radius))

    def _lower(self, values: dict[int, float]) -> Program:
        try:
            return lower(parse(self.texts.of(values), self.path))
        except PlanError as err:
            said = self.texts.said(values)
            raise _complain(f"at {said} the plan is refused: {err.message}",
                            (err.hint + "; or " if err.hint else "") + "narrow the ranges "
                            "so that every combination of the values lowers",
                            self.span, self.source) from None

    def text_with(self, values: list[float]) -> str:
        """The plan text with the knobs at ``values`` (in their units): the variant's
        plan, which `run` prices the same."""
        return self.texts.of(dict(enumerate(values)))

    def _numbers(self, X: np.ndarray) -> dict[tuple, np.ndarray]:
        out = {}
        for p, per in self.coeffs.items():
            base = float(self.constants[p])
            y = np.full(X.shape[0], base)
            for j, c in enumerate(per):
                if c is not None:
                    y = y + (c[0] + c[1] * X[:, j] - base)
            out[p] = y
        return out

    def program(self, X: np.ndarray) -> Program:
        """The lowered program for the rows of ``X`` (variants x knobs, in the units)."""
        prog = self.base
        for p, y in self._numbers(X).items():
            prog = with_leaf(prog, p, y)
        if self.start_knobs:
            vals = [self.knobs[j].internal(X[:, j], self.units[j], self.base.body.radius)
                    for j in self.start_knobs]
            r, v = start_states(self.base, self.start, [self.knobs[j] for j in self.start_knobs],
                                vals, self.mirror)
            prog = dataclasses.replace(prog, start_r=r, start_v=v)
        return prog


# --- pricing ---------------------------------------------------------------------------


@dataclass
class Priced:
    """The variants of a trade, priced: totals and per-step figures over the variants."""

    totals: dict[str, np.ndarray]
    flown: np.ndarray  # (n,) every step could be flown
    feasible: np.ndarray  # (n,) flown, the load covers every burn and the reserve is met
    step_names: list[str]  # the priced rows (burns and allowances)
    step_dv: np.ndarray  # (n, rows) m/s
    step_propellant: np.ndarray  # (n, rows) kg
    _why: list[tuple[int, int, str, Failures, np.ndarray]] = field(default_factory=list)
    _short: list[tuple[int, np.ndarray, list[str]]] = field(default_factory=list)

    def take(self, part: slice) -> Priced:
        """The variants of ``part`` (a slice), their reasons kept."""
        start = part.start or 0
        why = [(offset - start, n, name, fails, mask) for offset, n, name, fails, mask
               in self._why]
        short = [(offset - start, first, names) for offset, first, names in self._short]
        return Priced({k: v[part] for k, v in self.totals.items()}, self.flown[part],
                      self.feasible[part], self.step_names, self.step_dv[part],
                      self.step_propellant[part], why, short)

    def refuse(self, fails: Failures) -> None:
        """Mark the variants ``fails`` holds as not flown, with its reasons (samples the
        plan itself refuses, see ``admissible``)."""
        mask = ~fails.ok
        if not mask.any():
            return
        self.flown &= ~mask
        self.feasible &= ~mask
        for k in TOTALS:
            self.totals[k] = np.where(mask, np.nan, self.totals[k])
        self._why.insert(0, (0, mask.size, "", fails, mask))

    def reason(self, i: int) -> str | None:
        """Why variant ``i`` is not feasible (None when it is)."""
        for offset, n, name, fails, mask in self._why:
            if offset <= i < offset + n and mask[i - offset]:
                message, _ = fails.reason(i - offset)
                return message if message.startswith(f"{name}") else f"{name}: {message}"
        if self.feasible[i]:
            return None
        for offset, first, names in self._short:
            if offset <= i < offset + len(first):
                k = first[i - offset]
                return (f"the load does not cover `{names[k]}` (out of propellant)" if k >= 0
                        else "the reserve is not met")
        return None  # pragma: no cover


def _price_chunk(program: Program, n: int):
    ctx = context_for(program)
    batch = start_batch(program, n)
    why = []
    start_fails = Failures(n)
    _check_surface(batch.r, batch.v, descending(ctx, -1), start_fails, "the start")
    if not start_fails.ok.all():
        why.append(("the start", start_fails, ~start_fails.ok))
    alive = start_fails.ok.copy()
    priced = []
    goals = np.ones(n, dtype=bool)  # burns priced finite that meet every goal they name
    for index, step in enumerate(program.steps):
        batch, rows, fails = apply(step, index, batch, ctx)
        newly = alive & ~fails.ok
        if newly.any():
            why.append((step.name, fails, newly))
        alive &= fails.ok
        priced.extend(r for r in rows if r.dv is not None)
        if ctx.finite:  # a goal a finite burn misses fails the variant like an expectation
            from .finite_price import goals_met
            from .legs import in_phase

            here = in_phase(ctx, index) if ctx.phases else ctx  # the step's body
            for r in rows:
                met = goals_met(r, here.mu, here.radius)
                goals &= True if met is None else met
    craft = program.craft
    ve = craft.default_engine.exhaust_speed
    mass, left = batch.mass, batch.propellant
    fire = left
    covered = np.ones((n, max(len(priced), 1)), dtype=bool)
    for k, row in enumerate(priced):
        covered[:, k] = row.covered
    if craft.components:  # fuel and oxidiser loaded apart: a store run dry stops the plan
        from .components import stores_over_batch

        stores = stores_over_batch(priced, craft, craft.default_engine.mixture, n)
        covered &= stores.covered
        left = stores.left
        fire = np.minimum(left, stores.burnable)
    with np.errstate(divide="ignore", invalid="ignore"):
        capacity = np.where((mass > fire) & (fire > 0), ve * np.log(mass / (mass - fire)), 0.0)
    uncovered = ~covered.all(axis=1)
    first = np.where(uncovered, np.argmin(covered, axis=1), -1)
    reserve_ok = ~uncovered & (capacity >= program.reserve - 1e-8)
    feasible = alive & reserve_ok
    totals = {
        "dv_m_s": batch.dv * 1000.0,
        "dv_with_margin_m_s": batch.dv_margin * 1000.0,
        "propellant_kg": craft.usable - batch.propellant,
        "final_mass_kg": mass,
        "propellant_left_kg": np.maximum(left, 0.0),
        "dv_capacity_left_m_s": capacity * 1000.0,
        "elapsed_s": batch.t,
        "reserve_met": feasible.copy(),
        "expectations_met": feasible & batch.expect_ok & goals,
    }
    totals = {k: np.broadcast_to(v, (n,)).copy() for k, v in totals.items()}
    step_dv = np.stack([r.dv * 1000.0 for r in priced], axis=1) if priced else np.zeros((n, 0))
    step_prop = np.stack([r.propellant for r in priced], axis=1) if priced else np.zeros((n, 0))
    return (totals, alive, feasible, [r.name for r in priced], step_dv, step_prop, why,
            first)


def price(model: Model, X: np.ndarray, progress: Callable[[int], None] | None = None,
          chunk: int = CHUNK) -> Priced:
    """Every row of ``X`` priced, ``chunk`` variants at a time."""
    n = X.shape[0]
    parts = []
    why, short = [], []
    names = None
    for offset in range(0, n, chunk):
        part = X[offset:offset + chunk]
        with np.errstate(all="ignore"):  # failed elements ride along; they are masked
            got = _price_chunk(model.program(part), part.shape[0])
        totals, alive, feasible, names, dv, prop, fails, first = got
        parts.append((totals, alive, feasible, dv, prop))
        why.extend((offset, part.shape[0], name, f, m) for name, f, m in fails)
        short.append((offset, first, names))
        if progress is not None:
            progress(offset + part.shape[0])
    join = lambda i: np.concatenate([p[i] for p in parts]) if parts else np.zeros(0)
    totals = {k: np.concatenate([p[0][k] for p in parts]) for k in parts[0][0]}
    alive = join(1)
    for k in TOTALS:  # a variant that cannot be flown has no totals: never a number
        totals[k] = np.where(alive, totals[k], np.nan)
    return Priced(totals, alive, join(2), names or [], join(3), join(4), why, short)


def grid(axes: list[tuple[float, float, int]]) -> np.ndarray:
    """The grid of several ranges (low, high, points): variants x axes, the last axis
    varying fastest."""
    lines = [np.linspace(lo, hi, n) for lo, hi, n in axes]
    mesh = np.meshgrid(*lines, indexing="ij")
    return np.stack([m.ravel() for m in mesh], axis=1)


def finite_or_none(x) -> float | None:
    x = float(x)
    return x if math.isfinite(x) else None


def admissible(text: str, path: str, knobs: list[Knob], units: list[str], X: np.ndarray,
               bases: list[float], mirror: bool = False) -> tuple[np.ndarray, Failures]:
    """Samples the plan itself refuses (a dispersed inclination below 0 deg, a mass below
    zero), marked so: the values past the edge of what lowering accepts, found by
    bisection between the plan's own value and the farthest sample, are held at that
    edge for pricing and reported as not flown with the lowering's message."""
    X = X.copy()
    fails = Failures(X.shape[0])
    texts = Texts(text, path, knobs, units, mirror)
    for j, (knob, unit) in enumerate(zip(knobs, units)):
        base = bases[j]
        for end in (float(X[:, j].min()), float(X[:, j].max())):
            if end == base or texts.refusal({j: end}) is None:
                continue
            good, bad = base, end
            while True:
                mid = 0.5 * (good + bad)
                if mid in (good, bad):
                    break
                if texts.refusal({j: mid}) is None:
                    good = mid
                else:
                    bad = mid
            column = X[:, j].copy()
            beyond = column > good if end > base else column < good

            def why(i, column=column, knob=knob, unit=unit, j=j):
                err = texts.refusal({j: float(column[i])})
                said = f"{knob.target} = {number_text(column[i])} {unit}".rstrip()
                return (f"{said}: the plan is refused: {err.message}" if err else
                        f"{said} is past the edge of what the plan accepts", err and err.hint)

            fails.add(beyond, why)
            X[beyond, j] = good
    return X, fails


JOINT_ROWS = 4096  # variants lowered one by one, at most, to find those past a shared bound


def jointly(text: str, path: str, knobs: list[Knob], units: list[str], X: np.ndarray,
            held: np.ndarray, span: Span | None = None, mirror: bool = False
            ) -> tuple[Failures, np.ndarray | None]:
    """Variants past a bound two or more knobs share (a bi-elliptic apoapsis below its
    target when both are varied), found by lowering each variant's plan when a corner of
    the box of ``held`` values (``admissible``'s) does not lower; returns them marked with
    the lowering's message, and the rows that lower (None when every corner does)."""
    n = held.shape[0]
    fails = Failures(n)
    if len(knobs) < 2:
        return fails, None
    texts = Texts(text, path, knobs, units, mirror)
    extremes = [(float(held[:, j].min()), float(held[:, j].max())) for j in range(len(knobs))]
    refused = [(c, e) for c in itertools.product(*extremes)
               for e in [texts.refusal(dict(enumerate(c)))] if e is not None]
    if not refused:
        return fails, None
    rows, inverse = np.unique(held, axis=0, return_inverse=True)
    inverse = inverse.reshape(-1)
    if len(rows) > JOINT_ROWS:
        corner, err = refused[0]
        raise _complain(f"at {texts.said(dict(enumerate(corner)))} the plan is refused: "
                        f"{err.message}; the values reach past a bound the varied "
                        f"quantities share, and {len(rows):,} variants are too many to "
                        "lower one by one to find those past it",
                        "narrow the ranges (or the dispersions) so that every combination "
                        f"lowers, or give at most {JOINT_ROWS:,} variants", span,
                        texts.source)
    errs = [texts.refusal(dict(enumerate(row.tolist()))) for row in rows]
    bad = np.array([e is not None for e in errs])
    if not bad.any():
        return fails, None

    def why(i):
        err = errs[inverse[i]]
        return ((f"{texts.said(dict(enumerate(X[i].tolist())))}: the plan is refused: "
                f"{err.message}"), err.hint)

    fails.add(bad[inverse], why)
    return fails, rows[~bad]


# --- the best value of one quantity ---------------------------------------------------

GOLDEN = (math.sqrt(5.0) - 1.0) / 2.0


@dataclass
class Optimum:
    value: float  # in the knob's unit
    tolerance: float  # the optimum lies within value +- tolerance
    objective: float  # the objective there (m/s, kg or s)
    at_end: bool  # the best is at an end of the range: the range bounds it, not the physics
    evaluations: int


def minimise(model: Model, X: np.ndarray, objective: str, tolerance: float | None = None,
             held: np.ndarray | None = None, refused: Failures | None = None
             ) -> tuple[Priced, Optimum]:
    """The value of the model's one knob that minimises ``objective``, over the grid
    ``X`` (one column, ascending; ``held`` and ``refused`` as ``admissible`` gives them
    when the grid reaches past a bound of the plan).

    The grid is priced in one batch; the best of its points and its two neighbours
    bracket the optimum (a variant that cannot be flown counts as infinitely dear), and
    golden-section search narrows the bracket to ``tolerance`` (by default a millionth of
    the range: near a minimum the total changes with the square of the step, so a bracket
    much narrower than the square root of the rounding of the total is not better
    known).  An end of the grid as cheap as the best inside it wins: the range, not the
    physics, bounds that optimum, and the result says so.  Returns the grid's pricing
    and the optimum.
    """
    key = OBJECTIVES[objective]
    held = X if held is None else held
    P = price(model, held)
    if refused is not None:
        P.refuse(refused)
    xs = X[:, 0]
    lo, hi = float(xs[0]), float(xs[-1])
    ok_lo, ok_hi = float(held[:, 0].min()), float(held[:, 0].max())  # what lowers
    cost = np.where(P.flown, P.totals[key], np.inf)
    if not np.isfinite(cost).any():
        raise _complain(f"no value of `{model.knobs[0].target}` from {number_text(lo)} to "
                        f"{number_text(hi)} can be flown (the first: {P.reason(0)})",
                        "give a range where the plan can be flown", model.span, model.source)
    k = int(np.argmin(cost))
    a, b = xs[max(k - 1, 0)], xs[min(k + 1, len(xs) - 1)]
    tol = tolerance if tolerance is not None else abs(hi - lo) * 1e-6
    evaluations = len(xs)

    def f(x: float) -> float:
        nonlocal evaluations
        if not ok_lo <= x <= ok_hi:  # past a bound of the plan: no plan there
            return math.inf
        evaluations += 1
        got = price(model, np.array([[x]]))
        return float(got.totals[key][0]) if got.flown[0] else math.inf

    c, d = b - GOLDEN * (b - a), a + GOLDEN * (b - a)
    fc, fd = f(c), f(d)
    while abs(b - a) > 2.0 * tol:
        if fc <= fd:
            b, d, fd = d, c, fc
            c = b - GOLDEN * (b - a)
            fc = f(c)
        else:
            a, c, fc = c, d, fd
            d = a + GOLDEN * (b - a)
            fd = f(d)
    best = 0.5 * (a + b)
    fbest = f(best)
    # an end of the range that beats the interior: the range decides, say so
    for end, cend in ((xs[0], cost[0]), (xs[-1], cost[-1])):
        if cend <= fbest:
            best, fbest = end, float(cend)
    at_end = bool(abs(best - xs[0]) <= 2 * tol or abs(best - xs[-1]) <= 2 * tol)
    return P, Optimum(float(best), float(tol), float(fbest), at_end, evaluations)


# --- dispersions ----------------------------------------------------------------------

PERCENTILES = (50.0, 90.0, 99.0, 99.7)


def samples(bases: list[float], sigmas: list[float], n: int, seed: int) -> np.ndarray:
    """``n`` draws of independent normals around the plan's values (variants x knobs)."""
    rng = np.random.default_rng(seed)
    return np.asarray(bases) + rng.standard_normal((n, len(bases))) * np.asarray(sigmas)


def statistics(x: np.ndarray) -> dict:
    """Mean, standard deviation and percentiles of the flown samples ``x``."""
    if x.size == 0:
        return {"mean": None, "std": None, **{_pct_key(p): None for p in PERCENTILES}}
    out = {"mean": float(np.mean(x)), "std": float(np.std(x, ddof=1)) if x.size > 1 else 0.0}
    for p, v in zip(PERCENTILES, np.percentile(x, PERCENTILES)):
        out[_pct_key(p)] = float(v)
    return out


def _pct_key(p: float) -> str:
    return "p" + f"{p:g}".replace(".", "_")

"""Lowering: the syntax tree of a plan becomes a Program of typed steps.

Names are resolved here (the body, the engines), required settings are checked, altitudes
become radii and every number becomes an internal unit.  Anything wrong is a PlanError
at the offending node, with what would work.
"""

from __future__ import annotations

import copy
from dataclasses import replace

import numpy as np
from apsidal.lang import syntax as ast
from apsidal.lang.errors import PlanError, Span, did_you_mean

from . import bodies, burn_goals, legs
from .state import state_from_elements
from .steps import (
    HERE,
    Allow,
    Burn,
    CheckSpec,
    Coast,
    Craft,
    Drop,
    EngineSpec,
    Entry,
    Expect,
    Place,
    Program,
    Step,
    Transfer,
)

YEAR_S = 365.25 * 86400.0  # the Julian year, s
ALTITUDE_HINT = ("altitudes (`periapsis`, `apoapsis`, `circular`, `via apoapsis`, `ceiling`) are "
                 "above the equatorial radius; after the keyword, `radius X` gives a radius "
                 "from the centre")

# Tolerance of `expect ... ` without `within`, by what is checked (internal units).
DEFAULT_TOLERANCE = {
    "periapsis": 1.0, "apoapsis": 1.0, "circular": 1.0, "sma": 1.0,  # km
    "ecc": 1e-4,
    "inclination": np.radians(0.01), "raan": np.radians(0.01), "argp": np.radians(0.01),
    "period": 1.0,  # s
    "mass": 0.1, "propellant": 0.1,  # kg
    "vinf": 1e-4,  # km/s (0.1 m/s)
    "c3": 1e-3,  # km2/s2
    "elapsed": 1.0,  # s
    "raan drift": np.radians(1e-4) / 86400.0,  # rad/s (0.0001 deg/d)
    "anomaly": np.radians(0.01),
}


def _err(message: str, node, hint: str | None = None) -> PlanError:
    span = node if isinstance(node, Span) or node is None else node.span
    return PlanError(message, span, None, hint)


def _top_of(plan: ast.Plan) -> Span:
    """Where a missing plan-level statement is reported: the top of the file."""
    first = plan.source.line_text(1)
    return Span(1, 1, 1, max(2, len(first) + 1), 0, len(first))


def _fields(fields, allowed: tuple[str, ...], what: str) -> dict[str, ast.Field]:
    """Fields by key; duplicates and unknown keys are errors."""
    seen: dict[str, ast.Field] = {}
    for f in fields:
        if f.key not in allowed:
            guess = did_you_mean(f.key, allowed)
            raise _err(f"{what} has no field `{f.key}`", f,
                       f"did you mean `{guess}`?" if guess else
                       "expected one of: " + ", ".join(f"`{k}`" for k in allowed))
        if f.key in seen:
            raise _err(f"`{f.key}` is given twice in {what}", f,
                       f"the first is on line {seen[f.key].span.line}; keep one")
        seen[f.key] = f
    return seen


class Lowerer:
    def __init__(self, plan: ast.Plan):
        self.plan = plan
        self.defined: dict[str, bodies.Body] = {}
        self.body: bodies.Body | None = None
        self.craft: Craft | None = None
        self.title = ""
        self.margin = 0.0
        self.reserve = 0.0
        self.ceiling: ast.Setting | None = None
        self.models: dict[str, str] = {}  # `burns`, `steering`
        self.start: ast.Start | None = None
        self.names: dict[str, Span] = {}
        self.counts: dict[str, int] = {}
        self._ends = False  # the plan ends with `entry`
        self.gravity: ast.Setting | None = None
        self.drift_limit: float | None = None

    # --- plan-level statements ---------------------------------------------------------

    def lower(self) -> Program:
        steps_ast = []
        singles: dict[str, Span] = {}
        self.arrivals: dict[int, ast.Start] = {}  # id of a leg -> its arrival start
        leg = None  # the last leg seen, while its arrival start is still to come
        for st in self.plan.statements:
            if isinstance(st, ast.STEP_TYPES):
                if leg is not None and id(leg) not in self.arrivals:
                    raise legs.no_arrival(leg, st)
                steps_ast.append(st)
                if isinstance(st, ast.Leg):
                    leg = st
                continue
            if leg is not None:
                if isinstance(st, ast.Start) and id(leg) not in self.arrivals:
                    self.arrivals[id(leg)] = st
                    continue
                legs.after_leg(st, leg, self.arrivals.get(id(leg)))
            key = {ast.PlanTitle: "plan", ast.Around: "around", ast.CraftDef: "craft",
                   ast.Start: "start", ast.Epoch: "epoch"}.get(type(st))
            if isinstance(st, ast.Setting):
                key = st.key
            if key is not None:
                if key in singles:
                    raise _err(f"`{key}` is given twice", st,
                               f"the first is on line {singles[key].line}; keep one")
                singles[key] = st.span
                if key == "start" and steps_ast:
                    raise _err("`start` must come before the first step", st,
                               "move the start orbit above the burns")
            self._statement(st)
        if leg is not None and id(leg) not in self.arrivals:
            raise legs.no_arrival(leg, None)
        top = _top_of(self.plan)
        if not self.plan.statements:
            raise PlanError("the plan is empty", top, None,
                            "a plan needs at least `around BODY`, a `craft { ... }` block "
                            "and a `start` orbit")
        if self.body is None:
            raise _err("the plan does not say which body it flies around", top,
                       "add a line such as `around earth`")
        if self.craft is None:
            raise _err("the plan has no craft", top,
                       "add a `craft NAME { dry 500 kg  propellant 200 kg  "
                       "engine main isp 300 s thrust 400 N }` block")
        if self.start is None:
            raise _err("the plan has no start orbit", top,
                       "add a line such as `start circular 400 km inclination 51.6 deg`")
        self._check_gravity()
        r, v = self._start_state(self.start)
        self._ends = self._entry_order(steps_ast)
        self.steps_ast = steps_ast
        steps = []
        self.counts_before: list[dict[str, int]] = []  # default-name counts before each step
        self.bodies_before: list[bodies.Body] = []  # the body around which each step flies
        self.phases_before: list[int] = []  # how many legs come before each step
        self.leg_vinfs = legs.departure_vinfs(self, steps_ast) if self.arrivals else []
        self.phase = 0
        first_body = self.body
        for node in steps_ast:
            self.counts_before.append(dict(self.counts))
            self.bodies_before.append(self.body)
            self.phases_before.append(self.phase)
            steps.append(self._step(node))
        self.counts_before.append(dict(self.counts))
        self.bodies_before.append(self.body)
        self.phases_before.append(self.phase)
        steps = tuple(steps)
        if "steering" in self.models and self.models.get("burns") != "finite":
            raise _err("`steering` sets the thrust direction of finite burns, and this plan "
                       "prices its burns impulsive", self._steering,
                       "add `burns finite`, or drop the `steering` line")
        self.body = first_body  # the plan's body is its first phase's
        if self.model == "j2":  # every phase drifts with its own body's J2
            for st in steps:
                if legs.is_leg(st) and not st.body.j2:
                    raise _err(f"`gravity j2` needs the J2 of every body the plan flies "
                               f"around, and {st.body.name} (after leg `{st.name}`) has none",
                               st.span, "give that body a `j2` in its `body` block, or price "
                               "the plan under `gravity point-mass`")
        ceiling = None
        if self.ceiling is not None:
            given = self.ceiling.value.internal()
            ceiling = given if self.ceiling.is_radius else given + self.body.radius
            if ceiling <= float(np.linalg.norm(r)):
                how = "radius" if self.ceiling.is_radius else "altitude"
                raise _err(f"the ceiling ({given:g} km {how}) is below the start orbit",
                           self.ceiling,
                           "the ceiling bounds the apoapsis of detours `check` suggests; give "
                           "one above the start: `ceiling 1000 km` is an altitude above the "
                           "equatorial radius, `ceiling radius 7400 km` is from the centre")
        return Program(self.title, self.body, self.craft, self.margin, self.reserve, r, v,
                       steps, self.plan.source, self.plan, self.start.span, ceiling,
                       burns=self.models.get("burns", "impulsive"),
                       steering=self.models.get("steering", "velocity"),
                       gravity=self.model, drift_limit=self.drift_limit)

    @property
    def model(self) -> str:
        """The plan's gravity model: ``point-mass`` (the default) or ``j2``."""
        return "point-mass" if self.gravity is None else self.gravity.word.text

    def _needs_j2(self, node, what: str) -> float:
        """The body's J2, or a located error saying how to give one."""
        j2 = self.body.j2
        if not j2:
            raise _err(f"{what} needs the J2 of {self.body.name}, and it has none", node,
                       "give the body one: `body NAME { gm ... radius ... j2 0.0010826 }`"
                       " (J2 referred to its radius), or go around a catalogue body that has"
                       " one (`apsidal bodies` lists them)")
        return j2

    def _check_gravity(self) -> None:
        if self.model == "j2":
            self._needs_j2(self.gravity, "`gravity j2`")
        elif self.drift_limit is not None:
            limit = next(s for s in self.plan.statements
                         if isinstance(s, ast.Setting) and s.key == "drift")
            raise _err("`drift at most` is the longest wait for a route that lets J2 turn the "
                       "node, and this plan flies the point-mass model (nothing drifts)",
                       limit, "add the setting `gravity j2` (the body needs a J2), or drop "
                       "this line")

    def sun_rate(self, node) -> float:
        """The Sun's mean motion seen from the plan's body (rad/s), or a located error."""
        from . import j2 as secular

        rate = secular.sun_rate(self.body)
        if rate is None:
            raise _err(f"{self.body.name} has no year to be sun-synchronous with: it is the "
                       "Sun, or a body defined in the plan (whose orbit around the Sun is not "
                       "known)", node, "give the inclination in degrees")
        return rate

    def sun_synchronous(self, node, a: float, e: float) -> float:
        """The sun-synchronous inclination (rad) of an orbit of sma ``a``, eccentricity
        ``e``, or a located error with the highest such orbit."""
        from . import j2 as secular

        j2 = self._needs_j2(node, "a sun-synchronous inclination")
        body = self.body
        rate = self.sun_rate(node)
        if not (a > 0 and e < 1):
            raise _err("an open orbit has no sun-synchronous inclination (no node drift "
                       "averages over it)", node, "give the inclination in degrees")
        inc = float(secular.sun_synchronous(body.gm, body.radius, j2, a, e, rate))
        if not np.isfinite(inc):
            top = secular.highest_sun_synchronous(body.gm, body.radius, j2, e, rate)
            rate = float(np.degrees(secular.raan_rate(body.gm, body.radius, j2, a, e,
                                                      np.pi)) * 86400)
            raise _err(f"no inclination makes this orbit sun-synchronous: at sma {a:.3f} km "
                       f"(eccentricity {e:.6f}) even a retrograde equatorial orbit's node "
                       f"drifts only {rate:.6f} deg/d, less than the Sun's "
                       f"{np.degrees(rate) * 86400:.6f} deg/d", node,
                       f"a sun-synchronous orbit of this eccentricity needs an sma under "
                       f"{top:.3f} km ({top - body.radius:.3f} km altitude)")
        return inc

    def splice(self, program: Program, first: int, last: int, nodes, plan: ast.Plan
               ) -> Program | None:
        """``program`` (lowered by this Lowerer) with its steps ``first`` to ``last``
        replaced by the step statements ``nodes`` lowered in their place.

        Default names count on from the steps before, as a whole lowering would count
        them; None when the later steps' default names would move (lower the whole plan
        then).  Raises PlanError as ``lower`` does, a name used twice included.
        """
        again = copy.copy(self)
        again.counts = dict(self.counts_before[first])
        again.body = self.bodies_before[first]
        again.phase = self.phases_before[first]
        again.names = {}
        new = tuple(again._step(node) for node in nodes)
        if again.counts != self.counts_before[last + 1]:
            return None
        kept = program.steps[:first] + program.steps[last + 1:]
        outside = {st.name for st in kept}
        for node, st in zip(nodes, new):
            if st.name in outside:
                raise _err(f"step name `{st.name}` is used twice", node.name or node,
                           "names must be unique because `diff` matches steps by name")
        return replace(program, steps=program.steps[:first] + new + program.steps[last + 1:],
                       plan=plan)

    def _statement(self, st) -> None:
        if isinstance(st, ast.PlanTitle):
            self.title = st.title
        elif isinstance(st, ast.BodyDef):
            self._body_def(st)
        elif isinstance(st, ast.Around):
            self._around(st)
        elif isinstance(st, ast.CraftDef):
            self._craft(st)
        elif isinstance(st, ast.Setting):
            if st.key == "gravity":
                self.gravity = st
            elif st.key == "drift":
                self.drift_limit = st.value.internal()
            elif st.key == "margin":
                self.margin = st.value.internal()
            elif st.key == "reserve":
                self.reserve = st.value.internal()
            elif st.word is not None:  # burns, steering
                self.models[st.key] = st.word.text
                if st.key == "steering":
                    self._steering = st
            else:
                self.ceiling = st
        elif isinstance(st, ast.Start):
            self.start = st

    def _body_def(self, st: ast.BodyDef) -> None:
        f = _fields(st.fields, ("gm", "radius", "soi", "j2"),
                    f"body `{st.name.text}`")
        for need in ("gm", "radius"):
            if need not in f:
                raise _err(f"body `{st.name.text}` needs `{need}`", st,
                           "e.g. `body rock { gm 17.3 km3/s2 radius 262 km }`")
        gm, radius = f["gm"].value.internal(), f["radius"].value.internal()
        for key, val in (("gm", gm), ("radius", radius)):
            if not val > 0:
                raise _err(f"body `{key}` must be positive", f[key])
        soi = f["soi"].value.internal() if "soi" in f else None
        if soi is not None and soi <= radius:
            raise _err(f"the sphere of influence ({soi:g} km) must be larger than the "
                       f"radius ({radius:g} km)", f["soi"],
                       "`soi` and `radius` are measured from the body's centre (not altitudes)")
        j2 = f["j2"].value.value if "j2" in f else None
        self.defined[st.name.text] = bodies.Body(st.name.text, gm, radius, j2, soi, None,
                                                 f"defined in the plan, line {st.span.line}")

    def _around(self, st: ast.Around) -> None:
        self.body = self._find_body(st.body, st.span.line)

    def _find_body(self, node: ast.Name, line: int) -> bodies.Body:
        """The body a name stands for: defined in the plan above ``line``, or catalogued."""
        name = node.text
        body = self.defined.get(name) or bodies.lookup(name)
        later = next((d for d in self.plan.statements if isinstance(d, ast.BodyDef)
                      and d.name.text == name and d.span.line > line), None)
        if body is None and later is not None:
            raise _err(f"body `{name}` is defined on line {later.span.line}, after this "
                       "`around`", node,
                       f"move `body {name} {{ ... }}` above `around {name}`: a body is "
                       "defined before the plan goes around it")
        if body is None:
            pool = list(self.defined) + bodies.names()
            guess = did_you_mean(name, pool)
            raise _err(f"unknown body `{name}`", node,
                       f"did you mean `{guess}`?" if guess else
                       "define it first with `body NAME { gm ... radius ... }`; the catalogue "
                       "has " + ", ".join(bodies.names()))
        return body

    def _leg(self, node: ast.Leg):
        """A leg to another body; from here on the steps fly around it."""
        leg = legs.lower_leg(self, node, self.arrivals[id(node)])
        self.body = leg.body
        self.phase += 1
        return leg

    def _craft(self, st: ast.CraftDef) -> None:
        f = _fields(st.fields, ("dry", "propellant", "fuel", "oxidiser", "residual"),
                    f"craft `{st.name.text}`")
        if "dry" not in f:
            raise _err(f"craft `{st.name.text}` needs `dry`", st,
                       "add `dry 100 kg` inside the braces")
        fuel = oxidiser = None
        parts = [k for k in ("fuel", "oxidiser") if k in f]
        if parts and "propellant" in f:
            raise _err("a craft loads `propellant` or its components `fuel` and `oxidiser`, "
                       "not both", f[parts[0]], "keep the components, or the total")
        if len(parts) == 1:
            other = "oxidiser" if parts[0] == "fuel" else "fuel"
            raise _err(f"`{parts[0]}` needs `{other}` beside it", f[parts[0]],
                       f"add `{other} 0 kg` if the craft carries none")
        if parts:
            fuel, oxidiser = f["fuel"].value.internal(), f["oxidiser"].value.internal()
            prop = fuel + oxidiser
        elif "propellant" not in f:
            raise _err(f"craft `{st.name.text}` needs `propellant`", st,
                       "add `propellant 100 kg` inside the braces (or `fuel` and `oxidiser`)")
        else:
            prop = f["propellant"].value.internal()
        dry = f["dry"].value.internal()
        if not dry > 0:
            raise _err("the dry mass must be positive", f["dry"])
        if not st.engines:
            raise _err(f"craft `{st.name.text}` has no engine", st,
                       "add `engine main isp 300 s thrust 400 N` inside the braces")
        engines = []
        for e in st.engines:
            ef = _fields(e.fields, ("isp", "thrust", "mixture"), f"engine `{e.name.text}`")
            for need in ("isp", "thrust"):
                if need not in ef:
                    raise _err(f"engine `{e.name.text}` needs `{need}`", e,
                               "e.g. `engine main isp 320 s thrust 440 N`")
            isp, thrust = ef["isp"].value.internal(), ef["thrust"].value.internal()
            if not isp > 0 or not thrust > 0:
                raise _err("an engine's isp and thrust must be positive", e)
            if any(x.name == e.name.text for x in engines):
                raise _err(f"engine `{e.name.text}` is defined twice", e.name,
                           "give each engine its own name, or remove one of the two lines")
            mixture = ef["mixture"].value.internal() if "mixture" in ef else None
            engines.append(EngineSpec(e.name.text, isp, thrust, mixture))
        residual_kg = residual_share = 0.0
        if "residual" in f:
            value = f["residual"].value
            if value.unit == "%":
                residual_share = value.internal()
                if residual_share >= 1.0:
                    raise _err("a residual of the whole load or more leaves nothing to burn",
                               f["residual"], "a residual is a few per cent of the load")
            else:
                residual_kg = value.internal()
                if residual_kg > prop:
                    raise _err(f"the residual ({residual_kg:g} kg) is more than the load "
                               f"({prop:g} kg)", f["residual"],
                               "the residual is the part of the load that cannot be used")
        if parts and not any(e.mixture for e in engines):
            raise _err("a craft that loads fuel and oxidiser needs a two-component engine",
                       f["fuel"], "give its main engine a `mixture` (oxidiser to fuel, e.g. "
                       "`mixture 1.65`), or load `propellant` as one store")
        self.craft = Craft(st.name.text, dry, prop, tuple(engines), residual_kg, residual_share,
                           fuel, oxidiser)

    # --- the start orbit ---------------------------------------------------------------

    def _radius(self, d: ast.Distance) -> float:
        value = d.quantity.internal()
        return value if d.is_radius else value + self.body.radius

    def _start_state(self, st: ast.Start, below_ok: bool = False):
        """The start state; ``below_ok``: the periapsis may be under the surface (an
        arrival hyperbola aimed at a direct entry)."""
        angles = ("inclination", "raan", "argp", "anomaly")
        if st.form == "circular":
            f = _fields(st.fields, ("circular", *angles), "`start circular`")
            rp = ra = self._radius(f["circular"].value)
            shape_node = f["circular"]
        else:
            f = _fields(st.fields, ("periapsis", "apoapsis", "sma", "ecc", "vinf",
                                    *angles), "`start orbit`")
            rp, ra = self._start_shape(st, f)
            shape_node = f.get("periapsis") or f.get("sma") or st
        if not rp > self.body.radius and not below_ok:
            raise _err(f"the start orbit's periapsis ({rp - self.body.radius:.3f} km altitude) "
                       "is under the surface", shape_node,
                       ALTITUDE_HINT)
        sso = isinstance(f["inclination"].value, ast.SunSynchronous) if "inclination" in f \
            else False
        get = lambda k: f[k].value.internal() if k in f and not (sso and k == "inclination") \
            else 0.0
        inc, raan, argp, nu = get("inclination"), get("raan"), get("argp"), get("anomaly")
        if sso:
            if ra is None or not np.isfinite(ra):
                inc = self.sun_synchronous(f["inclination"], -1.0, 2.0)
            inc = self.sun_synchronous(f["inclination"], 0.5 * (rp + ra),
                                       (ra - rp) / (ra + rp))
        if not 0.0 <= inc <= np.pi + 1e-12:
            raise _err(f"inclination {np.degrees(inc):g} deg is outside 0 to 180 deg",
                       f["inclination"], "a retrograde orbit has an inclination above 90 deg; "
                       "to move the node instead, give `raan`")
        if ra is not None and np.isfinite(ra):
            sma, ecc = 0.5 * (rp + ra), (ra - rp) / (ra + rp)
        else:
            sma, ecc = self._open_shape
        if ecc >= 1.0:
            limit = np.arccos(-1.0 / ecc)
            wrapped = (nu + np.pi) % (2 * np.pi) - np.pi
            if abs(wrapped) >= limit:
                raise _err(f"true anomaly {np.degrees(nu):g} deg is beyond this open orbit's "
                           f"asymptote (|anomaly| < {np.degrees(limit):.3f} deg)",
                           f.get("anomaly", st),
                           f"give an anomaly between {-np.degrees(limit):.3f} and "
                           f"{np.degrees(limit):.3f} deg (negative: before periapsis)")
            nu = wrapped
        equatorial = inc < 1e-12 or inc > np.pi - 1e-12
        if equatorial:
            argp = (argp + raan) if inc < np.pi / 2 else (argp - raan)
            raan = 0.0
        if ecc == 0.0:
            nu, argp = nu + argp, 0.0
        r, v = state_from_elements(self.body.gm, sma, ecc, inc, raan, argp, nu)
        return r[0], v[0]

    def _start_shape(self, st, f):
        keys = set(f) - {"inclination", "raan", "argp", "anomaly"}
        R = self.body.radius
        self._open_shape = None
        if keys == {"periapsis", "apoapsis"}:
            rp, ra = self._radius(f["periapsis"].value), self._radius(f["apoapsis"].value)
            if rp > ra:
                raise _err("the periapsis is above the apoapsis", f["periapsis"],
                           "swap the two values")
            return rp, ra
        if keys == {"sma", "ecc"}:
            a, e = f["sma"].value.internal(), f["ecc"].value.value
            if e < 0:
                raise _err("eccentricity cannot be negative", f["ecc"])
            if e >= 1.0:
                if a >= 0:
                    raise _err("an open orbit (ecc >= 1) needs a negative sma", f["sma"],
                               "or give `periapsis` and `ecc` (or `vinf`) instead")
                if e == 1.0:
                    raise _err("a parabolic start (ecc exactly 1) is not supported", f["ecc"],
                               "give an eccentricity just above or below 1")
                self._open_shape = (a, e)
                return a * (1 - e), None
            if a <= 0:
                raise _err("a closed orbit needs a positive sma", f["sma"])
            return a * (1 - e), a * (1 + e)
        if keys == {"periapsis", "ecc"} or keys == {"periapsis", "vinf"}:
            rp = self._radius(f["periapsis"].value)
            if "ecc" in f:
                e = f["ecc"].value.value
                if e < 0:
                    raise _err("eccentricity cannot be negative", f["ecc"])
                if e == 1.0:
                    raise _err("a parabolic start (ecc exactly 1) is not supported", f["ecc"],
                               "give an eccentricity just above or below 1")
            else:
                vinf = f["vinf"].value.internal()
                if not vinf > 0:
                    raise _err("vinf must be positive", f["vinf"])
                e = 1.0 + rp * vinf**2 / self.body.gm
            a = rp / (1.0 - e)
            if e < 1.0:
                return rp, a * (1 + e)
            self._open_shape = (a, e)
            return rp, None
        given = ", ".join(f"`{k}`" for k in sorted(keys)) or "nothing"
        raise _err(f"`start orbit` needs its size and shape; got {given}", st,
                   "give `periapsis` and `apoapsis`, `sma` and `ecc`, or `periapsis` with "
                   "`ecc` or `vinf` (altitudes above the equatorial radius "
                   f"{R:g} km)")

    # --- steps -------------------------------------------------------------------------

    def _name(self, node, kind: str) -> str:
        self.counts[kind] = self.counts.get(kind, 0) + 1
        if node.name is None:
            name = f"{kind}-{self.counts[kind]}"
        else:
            name = node.name.text
        if name in self.names:
            raise _err(f"step name `{name}` is used twice", node.name or node,
                       f"the first is on line {self.names[name].line}; names must be unique "
                       "because `diff` matches steps by name")
        self.names[name] = node.span
        return name

    def _entry_order(self, steps_ast) -> bool:
        """Whether the plan ends with `entry`; an `entry` anywhere else is an error."""
        for k, node in enumerate(steps_ast):
            if isinstance(node, ast.Entry) and k < len(steps_ast) - 1:
                after = steps_ast[k + 1]
                raise _err("nothing may follow `entry`: the chain ends at the entry "
                           f"interface (line {node.span.line})", after,
                           "move this step before the `entry`: a plan ends where its craft "
                           "comes down")
        return bool(steps_ast) and isinstance(steps_ast[-1], ast.Entry)

    def _place(self, where: ast.Where | None) -> Place:
        if where is None:
            return HERE
        if where.kind == "radius":
            if where.distance is None:  # a rewrite that lost its distance proves nothing
                raise _err("a radius place needs its altitude or radius", where)
            R = self._radius(where.distance)
            if R <= self.body.radius:
                raise _err(f"{where.distance.quantity.text()} is at or under the surface of "
                           f"{self.body.name} (radius {self.body.radius:g} km): no orbit passes "
                           "there", where.distance,
                           "to end the plan where the craft comes down, write `entry at 0 km` "
                           "(the surface) or `entry at 120 km` (an entry interface); "
                           + ALTITUDE_HINT)
            text = ("radius " if where.distance.is_radius else "") + \
                where.distance.quantity.text()
            return Place("radius", radius=R, next=where.next, shown=text)
        if where.next and where.kind == "crossing":
            raise _err("`next` takes the next pass of an apsis, a node, an anomaly or a "
                       "radius; `crossing` is already the cheaper of two crossings", where,
                       "drop `next`, or name the node or anomaly to burn at")
        angle = where.angle.internal() if where.angle is not None else None
        return Place(where.kind, angle, next=where.next)

    def _options(self, node):
        engine, margin, seen = None, self.margin, {}
        for opt in node.options:
            if opt.key in seen:
                raise _err(f"`{opt.key}` is given twice in one step", opt,
                           f"keep one (the first is at column {seen[opt.key].span.column})")
            seen[opt.key] = opt
            if opt.key == "statistical":
                raise _err("`statistical` marks an allowance (`allow NAME ...`), not a burn",
                           opt, "drop it; a burn's delta-v comes from its goals")
            if opt.key in ("fixed", "movable", "tangential", "frame"):
                continue
            if opt.key == "using":
                engine = self.craft.engine(opt.value.text)
                if engine is None:
                    names = [e.name for e in self.craft.engines]
                    guess = did_you_mean(opt.value.text, names)
                    raise _err(f"craft `{self.craft.name}` has no engine `{opt.value.text}`",
                               opt.value, f"did you mean `{guess}`?" if guess else
                               "its engines are " + ", ".join(f"`{n}`" for n in names))
            else:
                margin = opt.value.internal()
        if "fixed" in seen and "movable" in seen:
            raise _err("a step cannot be both `fixed` and `movable`", seen["movable"],
                       "keep the one you mean")
        self._tangential = seen.get("tangential")
        self._frame = seen.get("frame")
        return engine, margin, "fixed" in seen, "movable" in seen

    def _crossing_needs_plane(self, node, goals, kind: str):
        """`at crossing` is where the current plane meets the plane the goals name."""
        if node.where is None or node.where.kind != "crossing":
            return
        if kind == "burn" and "raan" not in goals and "argp" not in goals:
            raise _err("`at crossing` needs a `raan to` goal (the plane the burn turns to, "
                       "with or without `inclination to`) or an `argp to` goal (the orbit "
                       "it turns to)", node.where,
                       "for `inclination to` alone burn `at node`; every node reaches it")
        if "raan" not in goals and kind != "burn":
            raise _err(f"`at crossing` needs the plane a {kind} turns to: a `raan to` goal "
                       "(with or without `inclination to`)", node.where,
                       "for `inclination to` alone burn `at node`; every node reaches it")
    def _goals(self, node) -> dict:
        goals: dict = {}
        for g in node.goals:
            if g.kind in goals:
                raise _err(f"`{g.kind}` is given twice in one step", g,
                           f"keep one `{g.kind}` (the first is at column "
                           f"{goals[g.kind].span.column}); for two burns write two steps")
            goals[g.kind] = g
        return goals

    def _step(self, node) -> Step:
        if isinstance(node, ast.Burn):
            return self._burn(node)
        if isinstance(node, ast.Transfer):
            return self._transfer(node)
        if isinstance(node, ast.Coast):
            name = self._name(node, "coast")
            free = node.movable
            if node.mode == "for":
                return Coast(name, "for", duration=node.duration.internal(), span=node.span,
                             movable=free)
            if node.mode == "to":
                if node.where.kind == "crossing":
                    raise _err("a coast has no plane to cross: `crossing` is where a burn's "
                               "`raan to` plane meets the orbit", node.where,
                               "give the burn `at crossing` instead, or coast `to node`")
                return Coast(name, "to", place=self._place(node.where), span=node.span,
                             movable=free)
            return Coast(name, "rev", revs=node.duration.value, span=node.span,
                         movable=free)
        if isinstance(node, ast.Entry):
            return self._entry(node)
        if isinstance(node, ast.Leg):
            return self._leg(node)
        if isinstance(node, ast.Allow):
            return self._allow(node)
        if isinstance(node, ast.Drop):
            return Drop(self._name(node, "drop"), node.mass.internal(), node.span, node.movable)
        if isinstance(node, ast.Expect):
            return self._expect(node)
        raise TypeError(type(node))  # pragma: no cover

    def _burn(self, node: ast.Burn) -> Burn:
        name = self._name(node, "burn")
        goals = self._goals(node)
        if "vinf" in goals and isinstance(goals["vinf"].value, ast.Name):
            goals["vinf"] = legs.vinf_to_leg(self, goals["vinf"])
        engine, margin, fixed, movable = self._options(node)
        place = self._place(node.where)
        tangential = self._tangential
        explicit = [k for k in goals if k in burn_goals.COMPONENT_WORDS]
        if tangential is not None and (explicit or "circular" in goals
                                       or ("periapsis" in goals) == ("apoapsis" in goals)
                                       or any(k in goals for k in burn_goals.CONIC_WORDS)):
            raise _err("`tangential` goes with one apsis goal (`apoapsis to` or "
                       "`periapsis to`) and no other goal on the shape: it keeps the "
                       "flight-path angle while that apsis moves", tangential,
                       "drop `tangential`; with both apsides or `circular` the burn is "
                       "already fixed, and an energy goal alone is already tangential")
        self._crossing_needs_plane(node, goals, "burn")
        if explicit:
            other = [k for k in goals if k not in burn_goals.COMPONENT_WORDS]
            if other:
                raise _err("a burn gives either goals or explicit components, not both",
                           goals[other[0]], "split it into two burns")
            vec, frame = burn_goals.components(goals, self._frame, node)
            return Burn(name, place, vector=vec, engine=engine, margin=margin, span=node.span,
                        fixed=fixed, movable=movable, frame=frame)
        if "circular" in goals and ("periapsis" in goals or "apoapsis" in goals):
            raise _err("`circular` already sets both apsides", goals["circular"],
                       "drop `circular`, or drop the apsis goal")
        kw: dict = {}
        for k in ("periapsis", "apoapsis"):
            if k in goals:
                kw[k] = self._radius(goals[k].value)
                if k == "periapsis" and self._ends:
                    if kw[k] > 0:
                        continue  # a way down: the evaluator allows it only on the last burn
                    raise _err(f"the periapsis target ({kw[k] - self.body.radius:.3f} km "
                               f"altitude, radius {kw[k]:.3f} km) lies past the centre of "
                               f"{self.body.name}: no orbit has it", goals[k],
                               "the last burn before `entry` may put the periapsis under the "
                               f"surface, down to an altitude above -{self.body.radius:.3f} km")
                if kw[k] <= self.body.radius:
                    raise _err(f"the {k} target ({kw[k] - self.body.radius:.3f} km altitude, "
                               f"radius {kw[k]:.3f} km) is under the surface of "
                               f"{self.body.name} (radius {self.body.radius:.3f} km)", goals[k],
                               "altitudes are above the equatorial radius; `radius X` gives "
                               "a radius from the centre")
        if "circular" in goals:
            kw["circular"] = True
            if goals["circular"].value is not None:
                kw["circular_radius"] = self._radius(goals["circular"].value)
        for k in ("inclination", "raan"):
            if k in goals and isinstance(goals[k].value, ast.SunSynchronous):
                self._needs_j2(goals[k], "a sun-synchronous inclination")
                # the Sun's rate; the inclination is for the orbit after the burn (evaluator)
                kw["sun_synchronous"] = self.sun_rate(goals[k])
            elif k in goals:
                kw[k] = goals[k].value.internal()
        if "inclination" in kw and not 0 <= kw["inclination"] <= np.pi:
            raise _err(f"inclination {np.degrees(kw['inclination']):g} deg is outside 0 to "
                       "180 deg", goals["inclination"],
                       "a retrograde orbit has an inclination above 90 deg; to move the node "
                       "instead, use `raan to`")
        kw.update(burn_goals.conic(goals, kw, self.body.gm, self.body.radius))
        frame = self._frame.value.text if self._frame is not None else "vnb"
        return Burn(name, place, engine=engine, margin=margin, span=node.span, fixed=fixed,
                    tangential=tangential is not None, frame=frame, **kw)

    def _transfer(self, node: ast.Transfer) -> Transfer:
        name = self._name(node, "transfer")
        goals = self._goals(node)
        engine, margin, fixed, _ = self._options(node)
        place = self._place(node.where)
        if self._tangential is not None:
            raise _err("`tangential` is an option of a one-apsis burn, not of a transfer",
                       self._tangential, "drop it: a transfer's burns are already tangential")
        if self._frame is not None:
            raise _err("`frame` is an option of a burn, not of a transfer", self._frame,
                       "drop it: a transfer's burns are reported in the vnb frame (and in "
                       "rtn in the JSON report)")
        self._crossing_needs_plane(node, goals, "transfer")
        if "phase" in goals:
            return self._phasing(node, name, goals, place, engine, margin, fixed)
        bad = [k for k in goals if k not in ("circular", "inclination", "raan")]
        if bad:
            raise _err(f"a transfer takes `circular`, `inclination to` and `raan to`, "
                       f"not `{bad[0]}`", goals[bad[0]],
                       "use a `burn` for single apsis changes or explicit components")
        sso = "inclination" in goals and isinstance(goals["inclination"].value,
                                                    ast.SunSynchronous)
        inc = goals["inclination"].value.internal() if "inclination" in goals and not sso \
            else None
        raan = goals["raan"].value.internal() if "raan" in goals else None
        via = self._radius(node.via) if node.via is not None else None
        if sso and ("circular" not in goals or goals["circular"].value is None):
            raise _err("a transfer reaches a sun-synchronous inclination only with its "
                       "target circle (`circular ALT`), whose size fixes it",
                       goals["inclination"],
                       "add `circular ALT`, or give the inclination in degrees")
        if sso:
            inc = self.sun_synchronous(goals["inclination"],
                                       self._radius(goals["circular"].value), 0.0)
        if "circular" in goals:
            if goals["circular"].value is None:
                raise _err("a transfer needs the target altitude", goals["circular"],
                           "e.g. `transfer geo: circular 35786 km`")
            radius = self._radius(goals["circular"].value)
            if radius <= self.body.radius:
                raise _err("the transfer's target is under the surface", goals["circular"],
                           ALTITUDE_HINT)
            if via is not None and via < radius:
                raise _err("a bi-elliptic transfer's `via apoapsis` must lie beyond the "
                           "target orbit", node.via,
                           f"give an apoapsis above {radius - self.body.radius:g} km altitude "
                           "(altitudes are above the equatorial radius; `via apoapsis radius X` "
                           "gives a radius)")
            form = "bielliptic" if via is not None else "hohmann"
            return Transfer(name, place, form, radius, via, inc, raan, None, engine, margin,
                            node.span, fixed)
        if inc is None and raan is None:
            raise _err("a transfer needs a target: `circular ALT` and/or a plane", node,
                       "e.g. `transfer geo: circular 35786 km` or "
                       "`transfer turn: inclination to 90 deg via apoapsis 40000 km`")
        if via is None:
            raise _err("a plane-change transfer needs `via apoapsis ALT`", node,
                       "add the raised apoapsis, or use `burn NAME at node: inclination to ...`")
        return Transfer(name, place, "plane-change", None, via, inc, raan, None, engine, margin,
                        node.span, fixed)

    def _phasing(self, node: ast.Transfer, name, goals, place, engine, margin, fixed
                 ) -> Transfer:
        """`transfer NAME: phase ANGLE in N rev`: leave the orbit and come back to the same
        point after N revolutions of the phasing orbit, ANGLE ahead (or behind)."""
        goal = goals["phase"]
        others = [g for k, g in goals.items() if k != "phase"]
        if others:
            raise _err(f"a phasing transfer comes back to the orbit it left: it takes no "
                       f"`{others[0].kind}` goal", others[0],
                       "phase in one transfer and change the orbit in another step")
        if node.via is not None:
            raise _err("a phasing transfer has no `via apoapsis`: the phasing orbit's size "
                       "follows from the angle and the revolutions", node.via,
                       "drop `via apoapsis ...`; more revolutions make a smaller detour")
        if place.kind == "node":
            raise _err("a phasing transfer needs one point: the angle is measured from where "
                       "it burns, and the two nodes of an eccentric orbit give two "
                       "different phasings", node.where,
                       "write `at ascending node` or `at descending node`")
        angle = goal.value.internal()
        if not abs(angle) < 2 * np.pi:
            raise _err(f"a phase angle is less than a full turn, got {goal.value.text()}",
                       goal.value, "write an angle between -360 and 360 deg: positive to arrive "
                       "ahead, negative to arrive behind")
        return Transfer(name, place, "phasing", engine=engine, margin=margin, span=node.span,
                        fixed=fixed, phase=angle, revs=int(goal.revs.value))

    def _entry(self, node: ast.Entry) -> Entry:
        name = self._name(node, "entry")
        R = self._radius(node.interface)
        if R < self.body.radius * (1 - 1e-12):
            raise _err(f"the entry interface ({node.interface.quantity.text()}) is under the "
                       f"surface of {self.body.name} (radius {self.body.radius:g} km)",
                       node.interface,
                       "give the interface altitude, 0 km or more: `entry at 120 km` is a "
                       "common interface for the Earth, `entry at 0 km` an impact; "
                       + ALTITUDE_HINT)
        text = ("radius " if node.interface.is_radius else "") + node.interface.quantity.text()
        return Entry(name, max(R, self.body.radius), text, node.span)

    def _allow(self, node: ast.Allow) -> Allow:
        name = self._name(node, "allow")
        statistical = any(o.key == "statistical" for o in node.options)
        others = [o for o in node.options if o.key in ("fixed", "tangential", "frame")]
        if others:
            raise _err(f"`{others[0].key}` is not an option of an allowance", others[0],
                       "an allowance takes `using`, `margin`, `statistical` and `movable`")
        engine, margin, _, movable = self._options(
            replace(node, options=tuple(o for o in node.options if o.key != "statistical")))
        amount = node.amount.internal()
        if node.duration is None:
            return Allow(name, amount, statistical, engine, margin, node.span, movable)
        years = node.duration.internal() / YEAR_S
        return Allow(name, amount * years, statistical, engine, margin, node.span, movable,
                     rate=amount, years=years)

    def _expect(self, node: ast.Expect) -> Expect:
        name = self._name(node, "expect")
        checks = []
        for c in node.checks:
            if c.kind in ("periapsis", "apoapsis", "circular"):
                target = self._radius(c.value)
            else:
                target = c.value.internal() if c.value.unit else c.value.value
            tol = (c.tolerance.internal() if c.tolerance is not None
                   else DEFAULT_TOLERANCE[c.kind])
            if c.kind == "raan drift" and self.model != "j2":
                raise _err("`raan drift` is the secular J2 drift of the node, and this plan "
                           "flies the point-mass model (no drift)", c,
                           "add the setting `gravity j2` (the body needs a J2)")
            checks.append(CheckSpec(c.kind, target, c.comparator, tol, c.span))
        return Expect(name, tuple(checks), node.span, node.movable)


def lower(plan: ast.Plan) -> Program:
    """Lower a parsed plan; PlanErrors come back located in the plan's source."""
    try:
        return Lowerer(plan).lower()
    except PlanError as err:
        raise err.located(plan.source) from None

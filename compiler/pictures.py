"""What the pictures show, as plain data: no drawing library here.

`apsidal plot` and `apsidal report` draw four pictures (docs/pictures.md); this module
computes what is in them, from the evaluator's chain and the budget report, so that the
drawing code (compiler/draw.py) only lays them out and the tests can compare a picture
with the numbers it was drawn from:

* ``chain``: every orbit of the plan sampled along its conic with the project's own Kepler
  code (``kepler.place``, ``kepler.propagate``), the arcs the craft coasts along, and the
  burn points, seen from above the first orbit's plane (or in 3-D);
* ``waterfall``: the delta-v of each priced step (burn or allowance, margin apart) adding
  up to the plan's total, with the delta-v capacity of the load and the reserve;
* ``mass_series``: mass and usable propellant against elapsed time;
* ``sweep_series``: a trade study's variants (``apsidal sweep --format json``) as curves.

Colours: one per step, the same in every picture (``colours``), from a palette that reads
for colour-blind readers.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from . import kepler
from .evaluate import PRICED_KINDS
from .state import frame, norm, periapsis_radius, unit

# Paul Tol's "muted" qualitative scheme (P. Tol, "Colour Schemes", SRON technical note
# SRON/EPS/TN/09-002, issue 3.2, 2021; values from memory): nine colours distinct for
# readers with the common colour-vision deficiencies, in the order Tol lists them.
PALETTE = ("#CC6677", "#332288", "#DDCC77", "#117733", "#88CCEE", "#882255", "#44AA99",
           "#999933", "#AA4499")
NEUTRAL = "#777777"  # the start orbit, the body's outline, lines of reference
BODY_FILL = "#DDDDDD"  # Tol's pale grey

ORBIT_SAMPLES = 361  # points along a closed orbit (one per degree)
ARC_SAMPLES = 181  # points along a coast arc
OPEN_EXTENT = 1.25  # an open orbit is drawn out to this times the widest closed orbit


def colours(names: list[str]) -> dict[str, str]:
    """One palette colour per step name, in the order given (repeating after nine).

    Callers pass the priced steps of a plan in order (and, for a diff, the old plan's
    names followed by the new plan's new ones), so a step keeps its colour in every
    picture of a report.

    >>> colours(["raise", "circ"])
    {'raise': '#CC6677', 'circ': '#332288'}
    """
    out: dict[str, str] = {}
    for name in names:
        if name not in out:
            out[name] = PALETTE[len(out) % len(PALETTE)]
    return out


def priced_names(report: dict) -> list[str]:
    """The names of the steps that carry delta-v: the burns in plan order, then the
    allowances (which the chain does not draw), so that the burns repeat a colour as
    late as possible."""
    steps = report["steps"]
    return ([s["name"] for s in steps if s["kind"] == "burn"]
            + [s["name"] for s in steps if s["kind"] in PRICED_KINDS and s["kind"] != "burn"])


# --- the chain of orbits -------------------------------------------------------------


@dataclass
class Orbit:
    """One conic of the chain: the step that made it (None: the start orbit)."""

    index: int | None  # the report's step index (1-based)
    name: str
    points: np.ndarray  # (N, 3) km, inertial; NaN rows break the line (inside the body)
    closed: bool


@dataclass
class Arc:
    """A stretch of the chain the craft coasts along, in the colour of its orbit."""

    index: int  # the report's step index of the coast (or the burn it leads to)
    name: str
    orbit_name: str  # the step whose orbit it flies on ("start" for the first)
    points: np.ndarray  # (N, 3) km


@dataclass
class BurnMark:
    index: int  # the report's step index
    name: str
    r: np.ndarray  # (3,) km, inertial


@dataclass
class Chain:
    body: str
    radius: float  # km
    axes: np.ndarray  # (3, 3): rows x, y, z of the view "from above the first orbit"
    orbits: list[Orbit] = field(default_factory=list)
    arcs: list[Arc] = field(default_factory=list)
    burns: list[BurnMark] = field(default_factory=list)
    thrust: list[Arc] = field(default_factory=list)  # finite burns' thrust arcs
    start: np.ndarray | None = None  # (3,) km
    cut: str | None = None  # a phase after a leg: around which body, from which leg

    def project(self, points: np.ndarray) -> np.ndarray:
        """Inertial points (..., 3) in the view's axes (..., 3): x, y in the first orbit's
        plane (x towards its periapsis, or its ascending node if circular), z along its
        angular momentum."""
        return points @ self.axes.T


def _view_axes(r0: np.ndarray, v0: np.ndarray, mu: float) -> np.ndarray:
    f = frame(r0[None], v0[None], mu)
    z = f.h[0]
    x = f.periapsis[0]
    x = unit((x - np.dot(x, z) * z)[None])[0]  # exactly in the plane
    return np.stack([x, np.cross(z, x), z])


def _conic(r: np.ndarray, v: np.ndarray, mu: float, extent: float) -> tuple[np.ndarray, bool]:
    """Points along the whole conic through (r, v): a closed orbit once round from r; an
    open one both ways from r (the way back is the same conic flown with -v), out to the
    radius ``extent``."""
    closed = bool(0.5 * np.dot(v, v) - mu / np.linalg.norm(r) < 0.0)
    if closed:
        sweep = np.linspace(0.0, 2.0 * np.pi, ORBIT_SAMPLES)
        pts, _, _ = kepler.place(np.tile(r, (sweep.size, 1)), np.tile(v, (sweep.size, 1)),
                                 mu, sweep)  # a closed orbit: every sweep is reachable
        return pts, True
    sweep = np.linspace(0.0, np.pi, 4 * ORBIT_SAMPLES)
    parts = []
    for vel in (v, -v):
        pts, _, ok = kepler.place(np.tile(r, (sweep.size, 1)), np.tile(vel, (sweep.size, 1)),
                                  mu, sweep)
        keep = ok & (norm(pts) <= extent)
        first_out = np.argmin(keep) if not keep.all() else keep.size
        parts.append(pts[:max(first_out, 1)])
    return np.concatenate([parts[1][::-1], parts[0][1:]]), False


def _arc(r: np.ndarray, v: np.ndarray, mu: float, seconds: float, drift=None) -> np.ndarray:
    """Points along the coast of ``seconds`` from (r, v), ending where the coast ends: its
    last revolution at most (the rest retraces it, or under ``drift`` — a ``j2.Drift`` —
    nearly so).  Coasts drift as the evaluator flies them."""
    energy = 0.5 * np.dot(v, v) - mu / np.linalg.norm(r)
    span = seconds
    if energy < 0.0:
        a = -mu / (2.0 * energy)
        span = min(seconds, 2.0 * np.pi * math.sqrt(a**3 / mu))
    times = np.linspace(seconds - span, seconds, ARC_SAMPLES)
    rr, vv = np.tile(r, (times.size, 1)), np.tile(v, (times.size, 1))
    pts, _, ok = (kepler.propagate(rr, vv, mu, times) if drift is None
                  else drift.propagate(rr, vv, times))
    return pts[ok]


def _thrust_arc(row, mu: float, steering: str) -> np.ndarray:
    """Points along a finite burn's thrust arc, ignition to cutoff (``finite.arc_points``)."""
    from . import finite

    mass = float(row.after.mass[0] + row.propellant[0])
    engine = row.engine
    return finite.arc_points(row.r_impulse[0], row.v_before[0], row.v_impulsive[0], mass,
                             engine.thrust, engine.exhaust_speed, mu, steering,
                             float(row.finite_time[0]), ARC_SAMPLES)


def _inside(points: np.ndarray, radius: float) -> np.ndarray:
    """The points, with those inside the body replaced by NaN (a break in the line)."""
    out = points.copy()
    out[norm(points) < radius] = np.nan
    return out


def chains(result, report: dict) -> list[Chain]:
    """The orbits, coast arcs and burn points of a priced plan (``evaluate.run`` and its
    ``budget.budget`` report; the report's step indices number the burns), one chain per
    phase: a plan of several bodies (patched-conic legs) is drawn around each body in
    turn, a phase after a leg from the arrival start the leg ends on.

    >>> from apsidal.compiler.load import load_text
    >>> from apsidal.compiler.evaluate import run
    >>> from apsidal.compiler.budget import budget
    >>> res = run(load_text("around earth\\ncraft c { dry 100 kg propellant 50 kg "
    ...     "engine e isp 300 s thrust 10 N }\\nstart circular 400 km inclination 30 deg\\n"
    ...     "burn up at periapsis: apoapsis to 2000 km\\n"))
    >>> (c,) = chains(res, budget(res))
    >>> len(c.orbits), len(c.burns), bool(abs(c.project(c.start)[2]) < 1e-9)
    (2, 1, True)
    """
    from .j2 import Drift
    from .legs import is_leg

    p = result.program
    legs = [i for i, s in enumerate(p.steps) if is_leg(s)]
    bounds = [-1, *legs, len(p.steps)]  # phase k flies the steps after bounds[k]
    out = []
    for k in range(len(bounds) - 1):
        first, last = bounds[k], bounds[k + 1]
        body = p.body if k == 0 else p.steps[first].body
        drift = Drift(body.gm, body.radius, body.j2) if p.gravity == "j2" else None
        if k == 0:
            start = (None, "start", np.asarray(p.start_r, float),
                     np.asarray(p.start_v, float))
        else:  # the leg's row: the arrival start, around the new body
            at = next(i for i, row in enumerate(result.rows) if row.step == first)
            row = result.rows[at]
            start = (at + 1, row.name, row.after.r[0], row.after.v[0])
        rows = [(i, row) for i, row in enumerate(result.rows) if first < row.step < last]
        chain = _phase_chain(rows, report, body, start, drift, p.steering)
        if k > 0:
            chain.cut = f"around {body.name}, from leg {p.steps[first].name}"
        out.append(chain)
    return out


def _phase_chain(rows, report: dict, body, start, drift, steering: str) -> Chain:
    """One phase's chain: ``rows`` (position in the report, row) flown around ``body``
    from ``start`` (index or None, name, r, v)."""
    mu, radius = body.gm, body.radius
    _, orbit, r0, v0 = start
    states = [start]
    for i, row in rows:
        if row.kind == "burn":
            states.append((i + 1, row.name, row.after.r[0], row.after.v[0]))
    out = Chain(body.name, radius, _view_axes(r0, v0, mu), start=r0)
    r, v = r0, v0
    for i, row in rows:
        report_step = report["steps"][i]
        seconds = report_step.get("coast_before_s", 0.0) if row.kind == "burn" else (
            report_step["coast_time_s"] if row.kind in ("coast", "entry") else 0.0)
        finite = row.kind == "burn" and row.finite_time is not None
        if finite:  # the coast ends at ignition, half the burn before the impulse point
            seconds = max((seconds or 0.0) - 0.5 * float(row.finite_time[0]), 0.0)
        if seconds and seconds > 0.0:
            out.arcs.append(Arc(i + 1, row.name, orbit, _arc(r, v, mu, seconds, drift)))
        if finite:
            out.thrust.append(Arc(i + 1, row.name, row.name, _thrust_arc(row, mu, steering)))
        if row.kind == "burn":
            out.burns.append(BurnMark(i + 1, row.name, row.after.r[0]))
            orbit = row.name
        r, v = row.after.r[0], row.after.v[0]
    # how far out open orbits are drawn: past every closed orbit, every place the craft
    # is, every arc it coasts, and four periapsis radii of each open orbit
    widest = [np.linalg.norm(r) for _, _, r, _ in states]
    widest += [float(norm(a.points).max()) for a in out.arcs if a.points.size]
    for _, _, r, v in states:
        rp, closed = periapsis_radius(r[None], v[None], mu)
        if closed[0]:
            energy = 0.5 * np.dot(v, v) - mu / np.linalg.norm(r)
            widest.append(2.0 * (-mu / (2.0 * energy)) - float(rp[0]))  # the apoapsis
        else:
            widest.append(4.0 * float(rp[0]))
    extent = OPEN_EXTENT * max(widest)
    for index, name, r, v in states:
        pts, closed = _conic(r, v, mu, extent)
        out.orbits.append(Orbit(index, name, _inside(pts, radius), closed))
    return out


# --- where the delta-v goes ----------------------------------------------------------


@dataclass
class Bar:
    index: int  # the report's step index
    name: str
    kind: str  # burn | allow
    bottom: float  # m/s: the running total before this step
    base: float  # m/s: the step's delta-v without margin
    margin: float  # m/s: what the margin adds
    covered: bool  # the load covers it


@dataclass
class Waterfall:
    bars: list[Bar]
    total: float  # m/s, delta-v with margin: the report's total
    capacity: float | None  # m/s the load gives in the plan's order; None if it runs out
    reserve: float  # m/s held back
    first_uncovered: str | None
    shortfall_kg: float | None


def waterfall(report: dict) -> Waterfall:
    """Each priced step's delta-v (with its margin apart) on top of the steps before it.

    The capacity is what the plan spends plus the delta-v capacity left at its end, the
    delta-v the load gives flown in this order; where the load runs out before the end
    there is no such number and the bars it does not cover are marked instead.
    """
    bars, running = [], 0.0
    for s in report["steps"]:
        if s["kind"] not in PRICED_KINDS:
            continue
        base, total = s["dv_m_s"], s["dv_with_margin_m_s"]
        bars.append(Bar(s["index"], s["name"], s["kind"], running, base, total - base,
                        s.get("covered", True)))
        running += total
    tot = report["totals"]
    uncovered = tot.get("first_uncovered_step")
    capacity = (tot["dv_with_margin_m_s"] + tot["dv_capacity_left_m_s"]
                if uncovered is None and report.get("error") is None else None)
    return Waterfall(bars, tot["dv_with_margin_m_s"], capacity, tot.get("reserve_m_s", 0.0),
                     uncovered, tot.get("shortfall_kg"))


# --- mass over the mission -----------------------------------------------------------


@dataclass
class MassSeries:
    t: np.ndarray  # s, 0 and each step's elapsed time
    mass: np.ndarray  # kg after each step (the first: at the start)
    propellant: np.ndarray  # kg of usable propellant left (negative: the deficit)
    names: list[str]  # the step after which each value holds ("start" first)
    drops: list[tuple[float, float, str]]  # (t, mass after, name) of each release


def mass_series(report: dict) -> MassSeries:
    """Mass and usable propellant after every step, against elapsed time; the load's
    usable part less what the steps burn (it goes below zero past the point where the
    load runs out, as the evaluator prices it)."""
    tot, craft = report["totals"], report["craft"]
    t, mass = [0.0], [craft["dry_kg"] + craft["propellant_kg"]]
    left = [tot["usable_kg"]]
    names, drops = ["start"], []
    for s in report["steps"]:
        t.append(s["elapsed_s"])
        mass.append(s["mass_after_kg"])
        left.append(left[-1] - (s["propellant_kg"] if s["kind"] in PRICED_KINDS else 0.0))
        names.append(s["name"])
        if s["kind"] == "drop":
            drops.append((s["elapsed_s"], s["mass_after_kg"], s["name"]))
    return MassSeries(np.array(t), np.array(mass), np.array(left), names, drops)


def time_unit(seconds: float) -> tuple[str, float]:
    """The unit a mission of ``seconds`` is best read in, and its length in seconds.

    >>> time_unit(5400.0), time_unit(2 * 86400.0), time_unit(20 * 86400.0)
    (('min', 60.0), ('h', 3600.0), ('d', 86400.0))
    """
    if seconds <= 3 * 3600.0:
        return "min", 60.0
    if seconds <= 3 * 86400.0:
        return "h", 3600.0
    return "d", 86400.0


# --- a trade study -------------------------------------------------------------------


class SweepError(ValueError):
    """A sweep file that is not what `apsidal sweep --format json` writes."""


@dataclass
class Curve:
    label: str  # the other varied values ("" when one quantity is varied)
    x: np.ndarray
    y: np.ndarray
    feasible: np.ndarray  # bool


@dataclass
class SweepSeries:
    parameter: str
    unit: str
    metric: str
    curves: list[Curve]
    best: tuple[float, float | None] | None  # (x, y); y None: the best of another metric
    best_label: str
    not_flown: int  # variants that could not be flown (no totals): not drawn


METRICS = {"dv_with_margin_m_s": "delta-v with margin, m/s", "dv_m_s": "delta-v, m/s",
           "propellant_kg": "propellant used, kg", "final_mass_kg": "final mass, kg",
           "propellant_left_kg": "propellant left, kg",
           "dv_capacity_left_m_s": "delta-v capacity left, m/s", "elapsed_s": "elapsed, s"}
OBJECTIVES = {"propellant": "propellant_kg", "dv": "dv_m_s", "elapsed": "elapsed_s"}
HIGHER_IS_BETTER = ("final_mass_kg", "propellant_left_kg", "dv_capacity_left_m_s")


def _variants(data) -> list[dict]:
    variants = data.get("variants") if isinstance(data, dict) else None
    if not isinstance(variants, list) or not variants or not all(
            isinstance(v, dict) and isinstance(v.get("values"), dict) and v["values"]
            and (v.get("totals") is None or isinstance(v["totals"], dict))
            for v in variants):
        hint = (" (a --disperse file holds statistics, not variants: it has no curve to "
                "draw)" if isinstance(data, dict) and "dispersions" in data else "")
        raise SweepError("a sweep file holds `variants`, a list of objects each with "
                         "`values` and `totals` (what `apsidal sweep --format json` "
                         f"writes){hint}")
    for v in variants:
        if not all(isinstance(x, (int, float)) and not isinstance(x, bool)
                   for x in v["values"].values()):
            raise SweepError("the variants' `values` must be numbers (in their axis's unit)")
    return variants


def _with_unit(name: str, value: float, units: dict) -> str:
    """``shell.circular 900 km``: a varied value as a legend names it."""
    return f"{name} {value:g}" + (f" {units[name]}" if units.get(name) else "")


def _best(data: dict, metric: str, parameter: str, flown: list[dict], units: dict):
    """The best point: the sweep's own (`--minimise`: a value found between the grid's
    points), else the best of the metric among the variants that fit their load."""
    best = data.get("best")
    if isinstance(best, dict) and isinstance(best.get("value"), (int, float)):
        key = OBJECTIVES.get(best.get("objective"))
        y = best.get(key) if key == metric else None
        unit = f" {best['unit']}" if best.get("unit") else ""
        edge = ", at an end of the range" if best.get("at_end_of_range") else ""
        label = (f"best {best.get('name', parameter)} {best['value']:g}{unit} "
                 f"(least {best.get('objective')}{edge})")
        return (float(best["value"]), None if y is None else float(y)), label
    scored = [(v["totals"][metric], i) for i, v in enumerate(flown)
              if v.get("feasible", True) and v["totals"].get(metric) is not None]
    if not scored:
        return None, ""
    _, i = max(scored) if metric in HIGHER_IS_BETTER else min(scored)
    values = ", ".join(_with_unit(k, x, units) for k, x in flown[i]["values"].items())
    point = (float(flown[i]["values"][parameter]), float(flown[i]["totals"][metric]))
    return point, f"best that fits: {values}"


def sweep_series(data: dict, metric: str | None = None) -> SweepSeries:
    """Curves of ``metric`` (a totals key) against the first varied quantity, one curve
    per combination of the others; variants that could not be flown are counted, not
    drawn.  The metric defaults to the sweep's own objective (``best.objective``), else
    delta-v with margin.
    """
    variants = _variants(data)
    best = data.get("best") if isinstance(data.get("best"), dict) else {}
    metric = metric or OBJECTIVES.get(best.get("objective"), "dv_with_margin_m_s")
    flown = [v for v in variants if v.get("totals") is not None]
    if not flown:
        raise SweepError("no variant of the sweep could be flown: there is nothing to draw "
                         "(`apsidal sweep` says why, variant by variant)")
    if metric not in flown[0]["totals"]:
        known = ", ".join(k for k in METRICS if k in flown[0]["totals"])
        raise SweepError(f"the variants' totals have no `{metric}`; try one of: {known}")
    axes = [a for a in data.get("axes", []) if isinstance(a, dict) and "name" in a]
    names = [a["name"] for a in axes] or list(variants[0]["values"])
    parameter, others = names[0], names[1:]
    units = {a["name"]: str(a.get("unit", "")) for a in axes}
    unit = units.get(parameter, "")
    groups: dict[str, list[dict]] = {}
    for v in flown:
        label = ", ".join(_with_unit(k, v["values"][k], units) for k in others)
        groups.setdefault(label, []).append(v)
    curves = []
    for label, members in groups.items():
        members = sorted((v for v in members if v["totals"].get(metric) is not None),
                         key=lambda v: v["values"][parameter])
        curves.append(Curve(label, np.array([float(v["values"][parameter]) for v in members]),
                            np.array([float(v["totals"][metric]) for v in members]),
                            np.array([bool(v.get("feasible", True)) for v in members])))
    point, label = _best(data, metric, parameter, flown, units)
    return SweepSeries(parameter, unit, metric, curves, point, label,
                       len(variants) - len(flown))

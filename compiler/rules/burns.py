"""Rules about burns that could be one, burns that undo each other, and long burns."""

from __future__ import annotations

import numpy as np
from apsidal.lang import syntax as ast

from .. import frames, kepler
from ..check import Checker, Finding, rule, saving_text, with_goals
from ..evaluate import start_batch
from ..reorder import same_orbit
from ..state import elements_from_state
from ..steps import Burn

SHAPE = {"apoapsis", "periapsis", "circular", "sma", "period", "vinf", "c3", "ecc", "argp"}
HERE_S = 1e-6  # s: a burn this soon after the one before is at the same point


def _same_point_pairs(c: Checker):
    """Consecutive burns where the second follows the first with no coast between."""
    steps = c.program.steps
    for i in range(len(steps) - 1):
        a, b = steps[i], steps[i + 1]
        if not (isinstance(a, Burn) and isinstance(b, Burn)):
            continue
        rows_b = c.rows_of(i + 1)
        if rows_b and float(rows_b[0].coast_time[0]) <= HERE_S:
            yield i, a, b


@rule("merge-burns")
def merge_burns(c: Checker) -> list[Finding]:
    """Two burns at one point that one delta-v vector would do.

    Two velocity changes in a row at the same place add as vectors; flying them as one
    burn costs the length of the sum, never more than the sum of the lengths, and less
    whenever they point different ways (a raise and a plane change, say).
    """
    proposals = []
    for i, a, b in _same_point_pairs(c):
        if (a.vector is None) != (b.vector is None):
            continue  # a goal and a vector: the goal's burn depends on where the vector left it
        if a.vector is not None:
            proposals += _merge_vectors(c, i, a, b)
            continue
        if (a.engine or c.program.craft.default_engine) != (b.engine or
                                                            c.program.craft.default_engine):
            continue
        na, nb = c.statements[i], c.statements[i + 1]
        later = {g.kind for g in nb.goals}
        if later & SHAPE:
            later |= SHAPE  # the second burn's shape goals replace the first's
        goals = c.pin_plane([g for g in na.goals if g.kind not in later] + list(nb.goals),
                            (i, i + 1))
        proposals.append((c.rewrite({i: [with_goals(na, goals)], i + 1: []}),
                          lambda proof, a=a, b=b: c.finding(
                              "merge-burns", "warning", (a.name, b.name),
                              f"{a.name} and {b.name} burn at the same point; one burn with "
                              f"both goals saves {saving_text(proof)}", proof)))
    return c.findings_of("merge-burns", proposals)


def _merge_vectors(c: Checker, i: int, a, b) -> list:
    """Two explicit-vector burns at one point as one: the inertial sum of the two changes,
    in the first burn's frame before it (components to a nanometre per second)."""
    default = c.program.craft.default_engine
    if (a.engine or default) != (b.engine or default) or a.margin != b.margin:
        return []
    first, second = c.rows_of(i)[0], c.rows_of(i + 1)[0]
    total = second.after.v[0] - first.v_before[0]
    axes = frames.axes(a.frame, first.after.r, first.v_before)
    parts = [float(total @ axis[0]) * 1000.0 for axis in axes]
    node = c.statements[i]
    span = node.span
    words = frames.NAMES[a.frame] if any(o.key == "frame" for o in node.options) \
        else frames.LEGACY
    goals = [ast.Goal(k, ast.Quantity(f"{x:.9f}", "m/s", span), span)
             for k, x in zip(words, parts)]
    return [(c.rewrite({i: [with_goals(node, goals)], i + 1: []}),
             lambda proof: c.finding(
                 "merge-burns", "warning", (a.name, b.name),
                 f"{a.name} and {b.name} burn at the same point; one burn of their summed "
                 f"vector saves {saving_text(proof)}", proof))]


@rule("cancelling-burns")
def cancelling_burns(c: Checker) -> list[Finding]:
    """Two burns in a row that leave the orbit as it was.

    A burn and one right after it that undoes it (a raise and a lower at the same point,
    a trim and its opposite) spend propellant for nothing.  The rule prices the plan
    without both and reports the saving when it reaches the same final orbit.
    """
    proposals = []
    for i, a, b in _same_point_pairs(c):
        before = c.rows_of(i - 1)[-1].after if i > 0 else start_batch(c.program)
        after = c.rows_of(i + 1)[-1].after
        if not bool(same_orbit(after, before, c.body_at(i).gm, True)[0]):
            continue
        proposals.append((c.rewrite({i: [], i + 1: []}), lambda proof, a=a, b=b: c.finding(
            "cancelling-burns", "warning", (a.name, b.name),
            f"{b.name} undoes {a.name}; dropping both saves {saving_text(proof)}", proof)))
    return c.findings_of("cancelling-burns", proposals)


LONG_WARNING_DEG = 10.0  # of true anomaly swept (common practice: past 10-20 deg)
LONG_ERROR_DEG = 60.0  # a fixed-direction burn keeps sin(a/2)/(a/2) ~ 95.5 % there


def _swept(r, v, mu: float, dt):
    """True anomaly (rad) swept in ``dt`` s from (r, v), whole turns included; (arc, ok)."""
    dtheta, ok = kepler.sweep_for_time(r, v, mu, dt)
    period = elements_from_state(r, v, mu).period
    closed = np.isfinite(period)
    turns = np.where(closed, np.floor(dt / np.where(closed, period, 1.0)), 0.0)
    return dtheta + turns * 2 * np.pi, ok


def burn_arc(r, v_before, v_after, mu: float, burn_time):
    """Arc of true anomaly (rad) a burn of ``burn_time`` s centred on its impulse point
    sweeps; returns (arc, ok), ok False where Kepler's equation gives no answer.

    Half the burn before the impulse point, half after: the half before is swept
    backward from the point (the velocity reversed), the half after forward, each on
    whichever of the orbits before and after the burn sweeps more in that time.

    >>> mu = 398600.4418; r = np.array([[7000.0, 0.0, 0.0]])
    >>> v = np.array([[0.0, np.sqrt(mu / 7000.0), 0.0]])
    >>> period = 2 * np.pi * np.sqrt(7000.0**3 / mu)
    >>> arc, ok = burn_arc(r, v, v, mu, np.array([period / 8]))
    >>> round(float(np.degrees(arc[0])), 9), bool(ok[0])
    (45.0, True)
    """
    half = 0.5 * np.asarray(burn_time, dtype=float)
    sweeps = [_swept(r, sign * vel, mu, half) for sign in (-1.0, 1.0)
              for vel in (v_before, v_after)]
    ok = np.logical_and.reduce([s[1] for s in sweeps])
    back = np.maximum(sweeps[0][0], sweeps[1][0])
    ahead = np.maximum(sweeps[2][0], sweeps[3][0])
    return np.where(ok, back + ahead, 0.0), ok


@rule("long-burn")
def long_burn(c: Checker) -> list[Finding]:
    """A burn too long for the impulsive approximation.

    apsidal treats every burn as an instant velocity change.  A real burn spreads over
    an arc of the orbit and loses some of its effect (gravity and steering losses), more
    the longer the arc.  The rule centres the burn time on the impulse point and
    measures the arc of true anomaly swept in half the burn time before it and half
    after, each half on whichever of the orbits before and after the burn sweeps more
    (near periapsis of an eccentric or open orbit a burn of a fraction of a period can
    sweep a large arc).  Impulsive estimates are fine for burns that sweep a few
    degrees; above 10 deg of arc the estimate is optimistic and a finite-burn analysis
    is needed (common practice: the losses grow quickly past 10 to 20 deg).  Above
    60 deg of arc the number should not be used for sizing: a burn held in one
    direction over an arc a of a circle keeps only the mean of cos over it,
    sin(a/2)/(a/2), about 95.5 % of its delta-v at 60 deg (our own estimate), a loss
    the size of a usual margin.  A plan with `burns finite` prices its burns as finite
    burns (the gravity loss is in the budget); the rule says nothing of those.
    """
    out = []
    rows = [row for row in c.result.rows
            if row.kind == "burn" and row.burn_time is not None and row.v_before is not None
            and float(row.burn_time[0]) > 0
            and row.dv_impulsive is None]  # a burn priced finite is no approximation
    if not rows:
        return out
    arcs, oks = np.zeros(len(rows)), np.zeros(len(rows), dtype=bool)
    mus = np.array([c.body_at(row.step).gm for row in rows])
    for mu in np.unique(mus):  # one body, or one per phase of a plan with legs
        own = np.flatnonzero(mus == mu)

        def stack(get, own=own):
            return np.concatenate([get(rows[k]) for k in own])

        # every burn around this body in one batch: one pass through Kepler's equation
        arcs[own], oks[own] = burn_arc(stack(lambda w: w.after.r), stack(lambda w: w.v_before),
                                       stack(lambda w: w.after.v), mu,
                                       stack(lambda w: w.burn_time))
    for row, arc_rad, ok in zip(rows, arcs, oks):
        burn_time = float(row.burn_time[0])
        arc = float(np.degrees(arc_rad))
        if not bool(ok) or arc < LONG_WARNING_DEG:
            continue
        severity = "error" if arc >= LONG_ERROR_DEG else "warning"
        out.append(Finding(
            "long-burn", severity, (row.name,),
            f"{row.name} lasts {burn_time:.0f} s and, centred on its impulse point, sweeps "
            f"{arc:.1f} deg of true anomaly: too long for the impulsive approximation "
            f"(above {LONG_WARNING_DEG:g} deg); the delta-v is optimistic and needs a "
            "finite-burn analysis"))
    return out

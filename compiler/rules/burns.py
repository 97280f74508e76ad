"""Rules about burns that could be one, burns that undo each other, and long burns."""

from __future__ import annotations

import numpy as np

from ..check import Checker, Finding, rule, saving_text, with_goals
from ..evaluate import start_batch
from ..reorder import same_orbit
from ..state import elements_from_state
from ..steps import Burn

SHAPE = {"apoapsis", "periapsis", "circular"}
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
    out = []
    for i, a, b in _same_point_pairs(c):
        if a.vector is not None or b.vector is not None:
            continue
        if (a.engine or c.program.craft.default_engine) != (b.engine or
                                                            c.program.craft.default_engine):
            continue
        na, nb = c.statements[i], c.statements[i + 1]
        later = {g.kind for g in nb.goals}
        if later & SHAPE:
            later |= SHAPE  # the second burn's shape goals replace the first's
        kept = [g for g in na.goals if g.kind not in later]
        plane_first = any(g.kind in ("inclination", "raan") for g in kept)
        goals = c.pin_plane(kept + list(nb.goals), i if plane_first else i + 1, i + 1)
        proof = c.prove(c.rewrite({i: [c.unparse(with_goals(na, goals))], i + 1: []}))
        if proof is not None:
            out.append(c.finding(
                "merge-burns", "warning", (a.name, b.name),
                f"{a.name} and {b.name} burn at the same point; one burn with both goals "
                f"saves {saving_text(proof)}", proof))
    return out


@rule("cancelling-burns")
def cancelling_burns(c: Checker) -> list[Finding]:
    """Two burns in a row that leave the orbit as it was.

    A burn and one right after it that undoes it (a raise and a lower at the same point,
    a trim and its opposite) spend propellant for nothing.  The rule prices the plan
    without both and reports the saving when it reaches the same final orbit.
    """
    out = []
    for i, a, b in _same_point_pairs(c):
        before = c.rows_of(i - 1)[-1].after if i > 0 else start_batch(c.program)
        after = c.rows_of(i + 1)[-1].after
        if not bool(same_orbit(after, before, c.program.body.gm, True)[0]):
            continue
        proof = c.prove(c.rewrite({i: [], i + 1: []}))
        if proof is not None:
            out.append(c.finding(
                "cancelling-burns", "warning", (a.name, b.name),
                f"{b.name} undoes {a.name}; dropping both saves {saving_text(proof)}", proof))
    return out


LONG_WARNING = 0.05  # of the orbital period (common practice, no single source)
LONG_ERROR = 0.20


@rule("long-burn")
def long_burn(c: Checker) -> list[Finding]:
    """A burn too long for the impulsive approximation.

    apsidal treats every burn as an instant velocity change.  A real burn spreads over
    an arc of the orbit and loses some of its effect (gravity and steering losses), more
    the longer the arc.  Above 5 % of the orbital period (an arc of about 18 deg) the
    estimate is optimistic and a finite-burn analysis is needed; above 20 % the number
    should not be used for sizing (thresholds: common practice, no single source).
    """
    out = []
    for row in c.result.rows:
        if row.kind != "burn" or row.burn_time is None:
            continue
        before = elements_from_state(row.after.r, row.v_before, c.program.body.gm)
        after = elements_from_state(row.after.r, row.after.v, c.program.body.gm)
        periods = [float(p[0]) for p in (before.period, after.period) if np.isfinite(p[0])]
        if not periods:
            continue
        period = min(periods)
        share = float(row.burn_time[0]) / period
        if share < LONG_WARNING:
            continue
        severity = "error" if share >= LONG_ERROR else "warning"
        out.append(Finding(
            "long-burn", severity, (row.name,),
            f"{row.name} lasts {float(row.burn_time[0]):.0f} s, {share * 100:.1f} % of the "
            f"{period:.0f} s orbit: too long for the impulsive approximation; the delta-v "
            "is optimistic and needs a finite-burn analysis"))
    return out

"""A plane change from an equatorial orbit is a tie, and a tie never goes by rounding.

From the equator every point is a node, and `inclination to I` alone can be reached by
two turns of the same size: one leaves the craft at the ascending node of the new plane,
the other at its descending node.  The evaluator used to pick between them by the sign
of a rounding error in the state, so the same step reached one plane when priced alone
and the other when priced in a batch (the reorder search, the proofs of `check`): the
search missed the best order, and `check` reported a rewrite that `run` then flew to a
plane 180 deg of node away.  Now the craft is put at the ascending node of the new plane
(at its descending node when the burn is placed `at descending node`), whatever the
rounding; these are the cases that showed it, kept as they were found.
"""

from __future__ import annotations

import itertools
import math

import numpy as np
import pytest
from apsidal.compiler.check import check_program
from apsidal.compiler.evaluate import Batch, apply, context_for, run
from apsidal.compiler.load import load_text
from apsidal.compiler.reorder import advance, same_orbit, search_block, start_batch
from apsidal.compiler.solvers import Failures, normal_for
from test_check import MU, RE, plan, reprice

# found by tests/test_check.py::test_reported_orderings_never_cost_more_and_reach_the_same_orbit
MERGE_AFTER_THE_EQUATOR = plan("""start orbit periapsis 300 km apoapsis 1312 km inclination 5 deg
burn b0 at apoapsis: periapsis to 301 km
burn b1 at node: inclination to 0 deg
burn b2 at node: inclination to 1 deg
burn b3 at periapsis: apoapsis to 2000 km
""")

# found by tests/test_check_bounds.py::test_branch_and_bound_finds_the_exhaustive_optimum
FIVE_BURNS = """plan "bounds"
around earth
craft probe {
    dry 500 kg
    propellant 20 t
    engine main isp 320 s thrust 400 kN
}
start circular 400 km inclination 30 deg
burn tilt0 at node: inclination to 0 deg
burn tilt1 at node: inclination to 1 deg
burn up2 at periapsis: apoapsis to 2000 km
burn up3 at periapsis: apoapsis to 4675 km
burn up4 at periapsis: apoapsis to 2300 km
"""


def final_normal(report_or_text) -> np.ndarray:
    final = run(load_text(report_or_text, "n.aps")).final
    h = np.cross(final.r[0], final.v[0])
    return h / np.linalg.norm(h)


def test_every_finding_after_an_equatorial_step_reaches_the_plans_own_orbit():
    # each suggestion priced from its text alone, as `apsidal run` prices it
    original = reprice(MERGE_AFTER_THE_EQUATOR)
    own = original["steps"][-1]["orbit_after"]
    found = [f for f in check_program(load_text(MERGE_AFTER_THE_EQUATOR, "m.aps"))
             if f.suggestion is not None]
    assert {f.rule for f in found} >= {"cheaper-order", "merge-burns"}
    for f in found:
        new = reprice(f.suggestion)
        end = new["steps"][-1]["orbit_after"]
        assert end["sma_km"] == pytest.approx(own["sma_km"], rel=1e-9), f.rule
        assert end["ecc"] == pytest.approx(own["ecc"], abs=1e-9), f.rule
        assert end["inclination_deg"] == pytest.approx(own["inclination_deg"], abs=1e-7)
        # the plane itself, node and all (the bug: a node 180 deg away)
        assert final_normal(f.suggestion) @ final_normal(MERGE_AFTER_THE_EQUATOR) > \
            math.cos(1e-6), (f.rule, f.suggestion)
        assert new["totals"]["propellant_kg"] < original["totals"]["propellant_kg"]
        assert original["totals"]["propellant_kg"] - new["totals"]["propellant_kg"] == \
            pytest.approx(f.saves_kg, abs=1e-6)


def test_the_turn_from_the_equator_leaves_the_craft_at_the_ascending_node():
    # the plan's own end: b2 is flown at b1's point (apoapsis, on the -x axis), so the new
    # plane's ascending node is there: raan 180 deg, whatever the rounding of b1's orbit
    end = reprice(MERGE_AFTER_THE_EQUATOR)["steps"]
    assert end[2]["at"] in ("ascending node", "descending node")
    assert end[2]["orbit_after"]["raan_deg"] == pytest.approx(180.0, abs=1e-9)


def test_branch_and_bound_finds_the_exhaustive_optimum_of_five_burns():
    program = load_text(FIVE_BURNS, "b.aps")
    assert run(program).ok
    block = list(range(5))
    ctx = context_for(program)
    start = start_batch(program)
    end, _ = advance(program, start, ctx, block)
    best = float(end.propellant[0])
    for order in itertools.permutations(block):  # every order priced alone
        fin, good = advance(program, start, ctx, order)
        if good[0] and same_orbit(fin, end, ctx.mu, True)[0]:
            best = max(best, float(fin.propellant[0]))
    res = search_block(program, block)
    assert res.status == "proven"
    left = program.craft.propellant - res.best.propellant
    assert left == pytest.approx(best, abs=1e-6)
    assert left > float(end.propellant[0]) + 1000  # a real saving: over a tonne here


def _equatorial(noise: float, x: float = RE + 400, z_sign: float = 1.0):
    """A circular equatorial state at (x, 0, 0) with a tilt of ``noise`` rad either way."""
    v = math.sqrt(MU / abs(x))
    r = np.array([[x, 0.0, 0.0]])
    vel = np.array([[0.0, v * math.cos(noise), v * math.sin(noise)]]) * np.sign(x)
    return r, vel * np.array([1.0, 1.0, z_sign])


@pytest.mark.parametrize("noise", [0.0, 1e-17, -1e-17, 3e-13, -3e-13, 9e-10, -9e-10])
def test_an_equatorial_tie_does_not_go_by_the_sign_of_the_rounding(noise):
    # within EQUATORIAL_RAD of the equator the orbit is equatorial (its node is "here"):
    # the turn to 1 deg puts the craft at the ascending node, heading north
    r, v = _equatorial(noise)
    fails = Failures(1)
    h = normal_for(r, v, np.radians(1.0), None, fails)
    assert fails.ok[0]
    assert np.cross(h[0], r[0] / np.linalg.norm(r[0]))[2] > 0  # v along h x r: north
    assert math.degrees(math.acos(h[0, 2])) == pytest.approx(1.0, abs=1e-12)
    down = normal_for(r, v, np.radians(1.0), None, fails, descending=True)
    assert np.cross(down[0], r[0])[2] < 0  # south: the descending node
    # just past the tolerance the orbit has a node line, and the smaller turn is taken
    r, v = _equatorial(math.copysign(1e-6, noise if noise else 1.0))
    h = normal_for(r, v, np.radians(1.0), None, fails)
    assert (np.cross(h[0], r[0])[2] > 0) == (noise >= 0)


def test_a_step_reaches_the_same_plane_alone_and_in_a_batch():
    # the same equatorial state, differently rounded, priced alone and among others
    program = load_text(plan("start circular 400 km\nburn b at node: inclination to 1 deg\n"),
                         "b.aps")
    ctx = context_for(program)
    states = [_equatorial(n) for n in (0.0, 2e-16, -2e-16, 5e-14, -5e-14)]
    r = np.concatenate([s[0] for s in states])
    v = np.concatenate([s[1] for s in states])
    n = len(states)
    batch = Batch(r, v, np.full(n, 20500.0), np.full(n, 20000.0), np.zeros(n), np.zeros(n),
                  np.zeros(n), np.ones(n, dtype=bool))
    together, _, fails = apply(program.steps[0], 0, batch, ctx)
    assert fails.ok.all()
    for k in range(n):
        alone, _, _ = apply(program.steps[0], 0, batch.take([k]), ctx)
        assert np.allclose(alone.v[0], together.v[k], rtol=0, atol=1e-12)
        assert np.allclose(together.v[k], together.v[0], rtol=0, atol=1e-9)

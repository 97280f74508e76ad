"""The evaluator prices many states in one pass: a batch gives what single runs give."""

from __future__ import annotations

import numpy as np
from apsidal.compiler.evaluate import Batch, apply, context_for, run, start_batch
from apsidal.compiler.load import load_text

STEPS = """burn raise at periapsis: apoapsis to 20000 km
burn turn at node: inclination to 40 deg
transfer home at apoapsis: circular 9000 km, inclination to 35 deg
coast wait for 5 h
burn trim: along 3 m/s, radial -1 m/s
drop probe 20 kg
expect far apoapsis at least 8000 km
"""

STARTS = [
    "start circular 500 km inclination 28.5 deg",
    "start orbit periapsis 400 km apoapsis 3000 km inclination 51 deg raan 40 deg argp 30 deg",
    "start orbit sma 8000 km ecc 0.05 inclination 120 deg raan 200 deg argp 10 deg anomaly 70 deg",
]


def program(start: str):
    text = f"""plan "batch"
around earth
craft c {{
    dry 600 kg
    propellant 9 t
    engine main isp 320 s thrust 20 kN
}}
{start}
{STEPS}"""
    return load_text(text, "batch.aps")


def test_one_batch_equals_single_runs():
    programs = [program(s) for s in STARTS]
    singles = [run(p, strict=True).final for p in programs]
    first = programs[0]
    ctx = context_for(first)
    base = start_batch(first, len(programs))
    batch = Batch(np.stack([p.start_r for p in programs]), np.stack([p.start_v for p in programs]),
                  base.mass, base.propellant, base.t, base.dv, base.dv_margin, base.expect_ok)
    for index, step in enumerate(first.steps):
        batch, _, fails = apply(step, index, batch, ctx)
        assert fails.ok.all()
    for k, single in enumerate(singles):
        assert np.allclose(batch.r[k], single.r[0], rtol=0, atol=1e-9)
        assert np.allclose(batch.v[k], single.v[0], rtol=0, atol=1e-12)
        assert abs(batch.propellant[k] - single.propellant[0]) < 1e-9
        assert abs(batch.t[k] - single.t[0]) < 1e-6


def test_failures_stay_with_their_element():
    # the second element cannot raise its periapsis above where it is; the others can
    text = """plan "mixed"
around earth
craft c {
    dry 600 kg
    propellant 9 t
    engine main isp 320 s thrust 20 kN
}
start circular 500 km
burn up: periapsis to 700 km
"""
    prog = load_text(text, "mixed.aps")
    ctx = context_for(prog)
    b = start_batch(prog, 3)
    r = b.r.copy()
    r[0] *= 1.2  # 1 777 km altitude: the periapsis can come down to 700 km
    r[2] *= 1.1
    v = b.v.copy()
    v[0] /= np.sqrt(1.2)
    v[2] /= np.sqrt(1.1)
    b = Batch(r, v, b.mass, b.propellant, b.t, b.dv, b.dv_margin, b.expect_ok)
    _, _, fails = apply(prog.steps[0], 0, b, ctx)
    assert fails.ok.tolist() == [True, False, True]
    message, hint = fails.reason(1)
    assert "above the current altitude" in message and hint

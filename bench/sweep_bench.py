"""Time `apsidal sweep` against hand-written numpy on the same computation.

The trade: a two-burn transfer with a plane change from a 300 km circular orbit at
28.5 deg to a circular orbit of varied altitude in the equator, the plane change split
between the two burns at the optimum.  The baseline is the same physics written out by
hand with numpy over the whole batch: vis-viva for the speeds, the cosine rule for each
burn, and the same split search (bisection on the derivative of the total).  Both are run
in this process, the answers compared before anything is timed, and the ratio printed.

    .venv/bin/python bench/sweep_bench.py [--sizes 10000,100000,1000000] [--rounds 3]

It prints, per size: the sweep's time (model built once, then priced in chunks), the
baseline's, their ratio, and the process's peak resident memory.
"""

from __future__ import annotations

import argparse
import resource
import time

import numpy as np

PLAN = """plan "bench: transfer with a plane change"
around earth
craft bench {
    dry 1000 kg
    propellant 3000 kg
    engine main isp 320 s thrust 400 N
}
start circular 300 km inclination 28.5 deg
transfer raise: circular 35786 km, inclination to 0 deg
"""
LOW, HIGH = 5000.0, 60000.0  # km altitude


def by_hand(alt_km: np.ndarray, mu: float, radius: float, i0: float) -> np.ndarray:
    """Total delta-v (m/s) of the transfer, written out with numpy."""
    r0 = radius + 300.0
    r1 = radius + alt_km
    v0 = np.sqrt(mu / r0)
    v1 = np.sqrt(2.0 * mu * r1 / (r0 * (r0 + r1)))  # vis-viva at the transfer's periapsis
    va, vc = v1 * r0 / r1, np.sqrt(mu / r1)
    A, B = v0**2 + v1**2, 2.0 * v0 * v1
    C, D = va**2 + vc**2, 2.0 * va * vc
    turn = np.full_like(r1, i0)

    def slope(t):
        one = np.sqrt(np.maximum(A - B * np.cos(t), 1e-300))
        two = np.sqrt(np.maximum(C - D * np.cos(turn - t), 1e-300))
        return B * np.sin(t) / one - D * np.sin(turn - t) / two

    lo, hi = np.zeros_like(turn), turn.copy()
    for _ in range(64):
        mid = 0.5 * (lo + hi)
        rising = slope(mid) > 0
        hi, lo = np.where(rising, mid, hi), np.where(rising, lo, mid)
    t = 0.5 * (lo + hi)
    # the cosine rule: each burn turns the velocity and changes its size
    return 1000.0 * (np.sqrt(A - B * np.cos(t)) + np.sqrt(C - D * np.cos(turn - t)))


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--sizes", default="10000,100000,1000000")
    ap.add_argument("--rounds", type=int, default=3)
    args = ap.parse_args()
    from apsidal.compiler import sweep
    from apsidal.compiler.load import load_text

    program = load_text(PLAN)
    mu, radius = program.body.gm, program.body.radius
    knob = sweep.locate(program.plan, program, "raise.circular")
    model = sweep.Model(PLAN, "<bench>", [knob], ["km"], [(LOW, HIGH)])
    i0 = np.radians(28.5)

    # one plan, as `run` prices it, against one element by hand
    one = np.array([[35786.0]])
    t0 = time.perf_counter()
    for _ in range(50):
        sweep.price(model, one)
    per_plan = (time.perf_counter() - t0) / 50
    t0 = time.perf_counter()
    for _ in range(50):
        by_hand(one[:, 0], mu, radius, i0)
    per_hand = (time.perf_counter() - t0) / 50
    print(f"one plan: sweep {per_plan * 1e3:.2f} ms, by hand {per_hand * 1e3:.3f} ms "
          f"({per_plan / per_hand:.0f}x)")
    print(f"{'variants':>9} {'sweep':>9} {'by hand':>9} {'ratio':>7} {'max rel diff':>13} "
          f"{'peak MB':>8}")
    for n in (int(float(s)) for s in args.sizes.split(",")):
        X = np.linspace(LOW, HIGH, n)[:, None]
        got = sweep.price(model, X)
        want = by_hand(X[:, 0], mu, radius, i0)
        diff = float(np.max(np.abs(got.totals["dv_m_s"] - want) / want))
        assert got.flown.all() and diff < 1e-9, diff  # agree before timing
        ts, th = [], []
        for _ in range(args.rounds):
            t0 = time.perf_counter()
            sweep.price(model, X)
            ts.append(time.perf_counter() - t0)
            t0 = time.perf_counter()
            by_hand(X[:, 0], mu, radius, i0)
            th.append(time.perf_counter() - t0)
        s, h = min(ts), min(th)
        peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
        print(f"{n:>9,} {s:>8.3f}s {h:>8.3f}s {s / h:>6.1f}x {diff:>13.1e} {peak:>8.0f}")


if __name__ == "__main__":
    main()

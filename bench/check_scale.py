"""Benchmark of `apsidal check` at the size of real plans.

Part one: generated mixed plans of 10, 25, 50, 100 and 200 steps (goal burns, transfers,
coasts, expectations, drops and explicit trims, so the plan splits into blocks), and one
plan of 200 goal steps that is a single reorder block.  For each it prints the wall
time and peak memory (resident set, each plan checked in a fresh process) of `run` and
of `check`, and their ratio, both measured in this run on this machine.

Part zero: pricing each sample plan in-process (the chain alone, median of rounds), and
`apsidal check` against `apsidal run` on each sample in fresh processes.

Part two: the reorder search alone on blocks of 8 to 12 movable steps, with the
orderings considered, pruned and priced and whether the optimum is proven.

The plans are scenarios of our own (a fictional craft with a very large tank), not
published numbers.  Usage:

    python bench/check_scale.py [--sizes 10,25,50,100,200] [--blocks 8-12]
                                [--time-limit 600]
"""

from __future__ import annotations

import argparse
import json
import subprocess
import sys
import time

HEAD = """plan "check benchmark: {n} steps"
around earth
craft bench {{
    dry 500 kg
    propellant 20000 t
    engine main isp 3000 s thrust 400 kN
}}
margin 2 %
start circular 500 km inclination 28.5 deg raan 40 deg
"""


def mixed_plan(n: int) -> str:
    """``n`` steps of many kinds, every one flyable where it stands."""
    lines = []
    alt, inc = 500.0, 28.5
    k = 0
    while len(lines) < n:
        k += 1
        high = alt + 1000.0 + 1500.0 * (k % 4)
        tilt = 28.5 - 4.0 * (k % 5)
        kind = k % 9
        if kind == 0:
            lines += [f"burn up{k} at periapsis: apoapsis to {high:.0f} km",
                      f"burn circ{k} at apoapsis: circular"]
            alt = high
        elif kind == 1:
            lines.append(f"burn tilt{k} at node: inclination to {tilt:.1f} deg")
            inc = tilt
        elif kind == 2:
            lines.append(f"transfer hop{k}: circular {high:.0f} km")
            alt = high
        elif kind == 3:
            lines.append(f"coast wait{k} for 30 min")
        elif kind == 4:
            lines.append(f"transfer shift{k} at node: circular {alt + 800:.0f} km, "
                         f"inclination to {tilt:.1f} deg")
            alt, inc = alt + 800, tilt
        elif kind == 5:
            lines.append(f"expect chk{k} mass at least 1 kg")
        elif kind == 6:
            lines += [f"burn trim{k}: along 0.5 m/s",
                      f"burn round{k} at apoapsis: circular"]
        elif kind == 7:
            lines.append(f"drop part{k} 0.1 kg")
        else:
            lines += [f"burn lower{k} at periapsis: apoapsis to {alt + 3000:.0f} km",
                      f"coast out{k} to apoapsis",
                      f"burn hold{k} at apoapsis: circular"]
            alt += 3000
        if alt > 30000:
            lines.append(f"transfer home{k}: circular 600 km")
            alt = 600
    del inc
    return HEAD.format(n=n) + "\n".join(lines[:n]) + "\n"


def goal_plan(n: int) -> str:
    """``n`` goal steps with no barrier between them: one reorder block of ``n``."""
    lines = []
    for k in range(n):
        kind = k % 3
        if kind == 0:
            lines.append(f"burn up{k} at periapsis: apoapsis to {3000 + 40 * k} km")
        elif kind == 1:
            lines.append(f"burn tilt{k} at node: inclination to {28.5 - 0.1 * k:.1f} deg")
        else:
            lines.append(f"burn circ{k} at apoapsis: circular")
    return HEAD.format(n=n) + "\n".join(lines) + "\n"


CHILD = r"""
import json, resource, sys, time
from apsidal.compiler.load import load_text
from apsidal.compiler.evaluate import run
from apsidal.compiler.check import check_program, Budget
text, what, limit = sys.stdin.read(), sys.argv[1], float(sys.argv[2])
program = load_text(text, "bench.aps")
t0 = time.perf_counter()
result = run(program)
t_run = time.perf_counter() - t0
out = {"run_s": t_run, "ok": result.ok}
if what == "check":
    t0 = time.perf_counter()
    budget = Budget(limit)
    found = check_program(program, result=result, budget=budget)
    out["check_s"] = time.perf_counter() - t0
    out["findings"] = len(found)
    out["cut_short"] = sorted(budget.cut_short)
out["rss_mb"] = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
print(json.dumps(out))
"""


def in_child(text: str, what: str, limit: float) -> dict:
    proc = subprocess.run([sys.executable, "-c", CHILD, what, str(limit)], input=text,
                          capture_output=True, text=True, check=False)
    if proc.returncode != 0:
        return {"error": proc.stderr.strip().splitlines()[-1] if proc.stderr else "failed"}
    return json.loads(proc.stdout.strip().splitlines()[-1])


def part_one(sizes, limit: float) -> None:
    print("check on generated plans (each in a fresh process)")
    print(f"{'plan':>16} {'run':>8} {'check':>9} {'check/run':>10} {'peak MB':>8} "
          f"{'base MB':>8} {'findings':>9}  cut short")
    cases = [(f"mixed {n}", mixed_plan(n)) for n in sizes]
    cases.append(("goal block 200", goal_plan(200)))
    # the same mixed plans with every coast drifting under J2 (gravity j2)
    j2 = lambda text: text.replace("around earth", "around earth\ngravity j2", 1)
    cases += [(f"mixed {n} j2", j2(mixed_plan(n))) for n in sizes if n in (50, 200)]
    for label, text in cases:
        base = in_child(text, "run", limit)
        got = in_child(text, "check", limit)
        if "error" in got or "error" in base:
            print(f"{label:>16} error: {got.get('error') or base.get('error')}")
            continue
        print(f"{label:>16} {got['run_s']:>7.3f}s {got['check_s']:>8.3f}s "
              f"{got['check_s'] / max(got['run_s'], 1e-9):>9.1f}x {got['rss_mb']:>8.0f} "
              f"{base['rss_mb']:>8.0f} {got['findings']:>9}  "
              f"{', '.join(got['cut_short']) or '-'}")


def part_zero(rounds: int = 200) -> None:
    """Pricing each sample plan in-process (parsed and lowered once): the chain alone."""
    from pathlib import Path

    from apsidal.compiler.evaluate import run
    from apsidal.compiler.load import load_text

    print("pricing one sample plan in-process (median of rounds, parsed once)")
    print(f"{'sample':>20} {'steps':>6} {'price':>9}")
    root = Path(__file__).resolve().parent.parent / "samples"
    for path in sorted(root.glob("*.aps")):
        program = load_text(path.read_text(), str(path))
        run(program)
        times = []
        for _ in range(rounds):
            t0 = time.perf_counter()
            run(program)
            times.append(time.perf_counter() - t0)
        times.sort()
        print(f"{path.stem:>20} {len(program.steps):>6} {times[len(times) // 2] * 1e3:>7.2f}ms")
    print()


def part_samples(rounds: int = 7) -> None:
    """`apsidal check` against `apsidal run` on each sample, as a user runs them (fresh
    processes, interleaved, medians)."""
    from pathlib import Path

    root = Path(__file__).resolve().parent.parent / "samples"
    print("check against run on each sample (fresh processes, median of "
          f"{rounds} rounds)")
    print(f"{'sample':>20} {'run':>8} {'check':>8} {'check/run':>10}")
    for path in sorted(root.glob("*.aps")):
        times = {"run": [], "check": []}
        for _ in range(rounds):
            for cmd, spent in times.items():
                t0 = time.perf_counter()
                subprocess.run([sys.executable, "-m", "apsidal.compiler.cli", cmd, str(path)],
                               capture_output=True, check=False)
                spent.append(time.perf_counter() - t0)
        run_s, check_s = (sorted(t)[len(t) // 2] for t in times.values())
        print(f"{path.stem:>20} {run_s:>7.3f}s {check_s:>7.3f}s {check_s / run_s:>9.2f}x")
    print()


def part_two(lo: int, hi: int) -> None:
    from apsidal.compiler.load import load_text
    from apsidal.compiler.reorder import search_block

    print()
    print("reorder search on one block (branch and bound)")
    print(f"{'steps':>5} {'orderings':>12} {'considered':>11} {'pruned':>9} {'priced':>9} "
          f"{'time':>8}  result")
    for k in range(lo, hi + 1):
        program = load_text(goal_plan(k), f"block-{k}.aps")
        t0 = time.perf_counter()
        res = search_block(program, list(range(k)))
        dt = time.perf_counter() - t0
        if res is None:
            print(f"{k:>5} (the plan as written does not fly)")
            continue
        import math

        print(f"{k:>5} {math.factorial(k):>12} {res.considered:>11} {res.pruned:>9} "
              f"{res.priced:>9} {dt:>7.3f}s  {res.status}")


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--sizes", default="10,25,50,100,200")
    ap.add_argument("--blocks", default="8-12")
    ap.add_argument("--time-limit", type=float, default=600.0,
                    help="check's own time budget per plan, s (default 600: no cut)")
    ap.add_argument("--skip-plans", action="store_true")
    args = ap.parse_args()
    part_zero()
    part_samples()
    if not args.skip_plans:
        part_one([int(s) for s in args.sizes.split(",") if s], args.time_limit)
    lo, hi = (int(x) for x in args.blocks.split("-"))
    part_two(lo, hi)


if __name__ == "__main__":
    main()

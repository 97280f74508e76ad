"""Benchmark of the reorder search: batched prefix tree against one ordering at a time.

For blocks of 4 to 9 movable burns it prints the orderings priced, the wall time of the
batched search, and the ratio against pricing orderings one at a time (each a batch of
one) in a plain loop — both measured in this run on this machine.  The loop is timed on
a sample of orderings (all of them for small blocks) and its rate scaled to the full
count, so the run stays short.  Usage:

    python bench/reorder_bench.py [--max-steps 9] [--loop-sample 400]
"""

from __future__ import annotations

import argparse
import itertools
import math
import random
import time

from apsidal.compiler.load import load_text
from apsidal.compiler.reorder import (
    EXHAUSTIVE_NODES,
    price_orderings_one_by_one,
    search_block,
    tree_nodes,
)

HEAD = """plan "benchmark block of {k} movable burns"
around earth
craft bench {{
    dry 500 kg
    propellant 200 t
    engine main isp 320 s thrust 4 kN
}}
start circular 300 km inclination 28.5 deg
"""


def plan_text(k: int) -> str:
    """k burns that can fly in any order (a scenario of our own, no published numbers)."""
    kinds = [
        lambda n: f"burn up{n} at periapsis: apoapsis to {2000 + 1500 * n} km",
        lambda n: f"burn down{n} at apoapsis: periapsis to {200 + 10 * n} km",
        lambda n: f"burn tilt{n} at node: inclination to {28.5 - 2 * n} deg",
    ]
    lines = [kinds[n % 3](n) for n in range(k)]
    return HEAD.format(k=k) + "\n".join(lines) + "\n"


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--min-steps", type=int, default=4)
    ap.add_argument("--max-steps", type=int, default=9)
    ap.add_argument("--loop-sample", type=int, default=400,
                    help="orderings timed one at a time per block size")
    args = ap.parse_args()
    print(f"{'steps':>5} {'orderings':>10} {'tree nodes':>10} {'search':>9} "
          f"{'per order':>10} {'loop/order':>11} {'speed-up':>9}  mode")
    rng = random.Random(1)
    for k in range(args.min_steps, args.max_steps + 1):
        program = load_text(plan_text(k), f"bench-{k}.aps")
        block = list(range(k))
        limit = max(EXHAUSTIVE_NODES, tree_nodes(k))  # exhaustive at every size here
        t0 = time.perf_counter()
        res = search_block(program, block, limit=limit)
        t_batch = time.perf_counter() - t0
        orderings = math.factorial(k)
        every = list(itertools.permutations(block))
        sample = every if len(every) <= args.loop_sample else rng.sample(every,
                                                                        args.loop_sample)
        t0 = time.perf_counter()
        price_orderings_one_by_one(program, block, sample)
        t_loop = (time.perf_counter() - t0) / len(sample)
        per = t_batch / orderings
        print(f"{k:>5} {res.orderings:>10} {res.priced:>10} {t_batch:>8.3f}s "
              f"{per * 1e6:>8.1f}us {t_loop * 1e6:>9.1f}us {t_loop / per:>8.1f}x  "
              f"{'exhaustive' if res.exhaustive else 'bounded'}")


if __name__ == "__main__":
    main()

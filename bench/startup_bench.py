"""Start-up of `apsidal run` against the bare import of its libraries, in one run.

Times, over several rounds, a fresh interpreter that only imports numpy, lark and rich
(the floor no command can go under) and a fresh `apsidal run` of each sample, and
prints the medians and their ratio.  The target (`run` at most 1.5x the bare import) is
read off this output, not asserted in a test.

Each sample is also run through ``main([...])`` from ``python -c`` (the ``full shutdown``
rows): the same work, but without the program's last step, which spares Python's
shutdown its scans of every object for cycles (``cli.main``).  The bare import pays
those scans, so the ``full shutdown`` ratio is apsidal's own cost on top of its
libraries; the plain rows are what a user waits for.

Both sides run from bytecode: the libraries' was written when they were installed, and
apsidal's is written here first (as an install does), so that an environment with
PYTHONDONTWRITEBYTECODE set does not time the compiling of apsidal's source on every run.

    .venv/bin/python bench/startup_bench.py [--rounds 15]
"""

from __future__ import annotations

import argparse
import compileall
import importlib.util
import statistics
import subprocess
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
BARE = [sys.executable, "-c", "import numpy, lark, rich"]
FULL_SHUTDOWN = ("import sys; from apsidal.compiler.cli import main; "
           "sys.exit(main(['run', sys.argv[1]]))")


def timed(cmd: list[str]) -> float:
    t = time.perf_counter()
    subprocess.run(cmd, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, check=False)
    return time.perf_counter() - t


def compile_bytecode() -> None:
    """Write apsidal's bytecode beside its source (``__pycache__``, as pip does when it
    installs a wheel); files already compiled and unchanged are left as they are."""
    for package in ("apsidal.lang", "apsidal.compiler"):
        for folder in importlib.util.find_spec(package).submodule_search_locations:
            compileall.compile_dir(folder, quiet=1)


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--rounds", type=int, default=15)
    args = ap.parse_args()
    compile_bytecode()
    samples = sorted((ROOT / "samples").glob("*.aps"))
    runs = {}
    for p in samples:
        runs[p.stem] = [sys.executable, "-m", "apsidal.compiler.cli", "run", str(p)]
        runs[p.stem + ", full shutdown"] = [sys.executable, "-c", FULL_SHUTDOWN, str(p)]
    for cmd in [BARE, *runs.values()]:  # warm the disk cache and lark's grammar cache
        timed(cmd)
    bare, each = [], {k: [] for k in runs}
    for _ in range(args.rounds):  # interleaved, so a busy moment hits both alike
        bare.append(timed(BARE))
        for k, cmd in runs.items():
            each[k].append(timed(cmd))
    floor = statistics.median(bare)
    print(f"{'command':46} {'median':>8} {'ratio':>7}   ({args.rounds} rounds)")
    print(f"{'python -c import numpy, lark, rich':46} {floor:7.3f}s {1.0:6.2f}x")
    for k, ts in each.items():
        m = statistics.median(ts)
        print(f"{'apsidal run ' + k:46} {m:7.3f}s {m / floor:6.2f}x")


if __name__ == "__main__":
    main()

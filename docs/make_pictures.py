"""Regenerate the pictures and sample pages the README shows, with apsidal itself.

    .venv/bin/python docs/make_pictures.py

writes docs/images/relay-geo-chain.svg, relay-geo-waterfall.svg and relay-geo-mass.svg,
marten-shell-sweep.svg (the sample's `trade altitude`),
docs/samples/relay-geo-report.html (`apsidal report`) and relay-geo-diff.html (`apsidal
diff --format html` against the revision the README's review section makes).  The SVG
output is deterministic (docs/pictures.md), so running this again on an unchanged tree
changes no file.  The mass and diff pages are examples; the README links them.
"""

from __future__ import annotations

import contextlib
import io
import sys
import tempfile
from pathlib import Path

from apsidal.compiler.cli import main

ROOT = Path(__file__).resolve().parent.parent
SAMPLE = "samples/relay-geo.aps"


def apsidal(*args: str) -> str:
    out = io.StringIO()
    with contextlib.redirect_stdout(out):
        code = main(list(args))
    if code != 0:
        sys.exit(f"apsidal {' '.join(args)} exited {code}")
    return out.getvalue()


def revision(text: str) -> str:
    """The README's example revision: margin 5 % -> 6 %, the tweak doubled."""
    return text.replace("margin 5 %", "margin 6 %").replace(
        "along 1.5 m/s, cross -0.3 m/s", "along 3 m/s, cross -0.6 m/s")


def make() -> list[Path]:
    import os

    os.chdir(ROOT)  # the pages name the plan as the README does: samples/relay-geo.aps
    written = []
    for kind in ("chain", "waterfall", "mass"):
        target = Path("docs/images") / f"relay-geo-{kind}.svg"
        apsidal("plot", SAMPLE, "--kind", kind, "-o", str(target))
        written.append(target)
    with tempfile.TemporaryDirectory() as tmp:  # a trade study: the sample's own trade
        sweep = Path(tmp) / "altitude.json"
        sweep.write_text(apsidal("sweep", "samples/marten-shell.aps", "--trade", "altitude",
                                 "--format", "json"))
        target = Path("docs/images/marten-shell-sweep.svg")
        apsidal("plot", str(sweep), "--kind", "sweep", "-o", str(target))
        written.append(target)
    report = Path("docs/samples/relay-geo-report.html")
    apsidal("report", SAMPLE, "-o", str(report))
    written.append(report)
    with tempfile.TemporaryDirectory() as tmp:
        new = Path(tmp) / "relay-next.aps"
        new.write_text(revision(Path(SAMPLE).read_text()))
        page = apsidal("diff", SAMPLE, str(new), "--format", "html")
    diff = Path("docs/samples/relay-geo-diff.html")
    diff.write_text(page.replace(str(new), "relay-next.aps"), encoding="utf-8")
    written.append(diff)
    return written


if __name__ == "__main__":
    for path in make():
        print(path)

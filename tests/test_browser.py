"""The review pages in a real browser: headless Chromium (Debian's `chromium` package,
which `.ci/run` installs where it can) loads the report and the diff page from disk with
its network switched off, takes a screenshot, and the test checks that the pictures
rendered: the screenshot has the window's size, is not blank, and holds large areas in
the colours of the plan's steps (the waterfall's bars and the orbits; the table's colour
chips alone are far smaller than the limits below: the same page with its pictures cut
out measured 100 pixels of each step colour and under 8 000 of the total bar's grey,
against 15 000-20 000 and 40 000 with them).

Skipped, saying why, only where no Chromium is installed.
"""

from __future__ import annotations

import contextlib
import io
import os
import shutil
import subprocess
import tempfile
from pathlib import Path

import numpy as np
import pytest
from apsidal.compiler.cli import main
from apsidal.compiler.pictures import PALETTE

SAMPLES = Path(__file__).resolve().parent.parent / "samples"
RELAY = SAMPLES / "relay-geo.aps"
WIDTH, HEIGHT = 1280, 3600


def browser() -> str | None:
    for name in ("chromium", "chromium-browser"):
        found = shutil.which(name)
        if found:
            return found
    return None


needs_browser = pytest.mark.skipif(
    browser() is None, reason="no Chromium on this machine (Debian: `apt-get install "
    "chromium`; .ci/run installs it where apt-get and root are available), so the pages "
    "were not rendered in a browser")


def screenshot(page: Path, out: Path) -> np.ndarray:
    """The page as Chromium draws it, as an (H, W, 3) array of 0..1."""
    from matplotlib.image import imread

    with tempfile.TemporaryDirectory() as profile:
        done = subprocess.run(
            [browser(), "--headless", "--no-sandbox", "--disable-gpu", "--disable-quic",
             "--no-first-run", "--disable-background-networking",
             "--disable-component-update", "--disable-sync", "--disable-extensions",
             "--hide-scrollbars", f"--user-data-dir={profile}", f"--screenshot={out}",
             f"--window-size={WIDTH},{HEIGHT}", page.resolve().as_uri()],
            capture_output=True, text=True, timeout=180, check=False,
            env={**os.environ, "HOME": profile})
    assert out.exists(), f"chromium wrote no screenshot (exit {done.returncode}):\n" \
        + done.stderr[-2000:]
    return imread(out)[..., :3]


def pixels_near(img: np.ndarray, colour: str, tol: float = 0.04) -> int:
    rgb = np.array([int(colour[i:i + 2], 16) / 255.0 for i in (1, 3, 5)])
    return int((np.abs(img - rgb).max(axis=-1) < tol).sum())


def cli(*args: str) -> tuple[int, str]:
    out = io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(io.StringIO()):
        code = main(list(args))
    return code, out.getvalue()


def check_rendered(img: np.ndarray, min_step_pixels: int) -> None:
    assert img.shape[:2] == (HEIGHT, WIDTH)
    assert img.std() > 0.05, "the screenshot is blank"
    # the first two steps' colours (raise, circ) cover areas only the pictures fill
    for colour in PALETTE[:2]:
        assert pixels_near(img, colour) > min_step_pixels, colour
    assert pixels_near(img, "#555555") > 20000  # the waterfall's total bar (text: < 8000)


@needs_browser
def test_report_renders_its_pictures_in_chromium(tmp_path):
    page = tmp_path / "report.html"
    code, _ = cli("report", str(RELAY), "-o", str(page))
    assert code == 0
    img = screenshot(page, tmp_path / "report.png")
    check_rendered(img, 4000)


@needs_browser
def test_diff_page_renders_both_waterfalls_in_chromium(tmp_path):
    text = RELAY.read_text()
    new = tmp_path / "relay-next.aps"
    new.write_text(text.replace("margin 5 %", "margin 6 %"))
    code, html = cli("diff", str(RELAY), str(new), "--format", "html")
    assert code == 0
    page = tmp_path / "diff.html"
    page.write_text(html, encoding="utf-8")
    img = screenshot(page, tmp_path / "diff.png")
    check_rendered(img, 2 * 3000)  # two waterfalls' worth

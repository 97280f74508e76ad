"""Shared helpers for the tests that check apsidal against the outside world.

``plans`` builds plan text around a body defined in the plan itself, so a textbook's own
constants (its gm and its Earth radius) are what the compiler uses, and it prices a plan
through the public path: text -> parse -> lower -> evaluate -> budget.
"""

from __future__ import annotations

import os

import numpy as np
import pytest
from apsidal.compiler.budget import budget
from apsidal.compiler.evaluate import Result, run
from apsidal.compiler.load import load_text
from hypothesis import settings

# CI (CI=true) replays the same examples on every run, so a red build is a real,
# reproducible regression; on a developer's machine the examples are fresh each time.
settings.register_profile("ci", derandomize=True, database=None, print_blob=True)
if os.environ.get("CI"):
    settings.load_profile("ci")


@pytest.fixture(autouse=True)
def _screen_width(monkeypatch):
    """Screens captured by the tests are laid out for 100 columns, whatever terminal the
    tests run in (the CLI otherwise follows the terminal standard error is on)."""
    monkeypatch.setenv("COLUMNS", "100")


class Plans:
    """Plan text around a plan-defined body, and its priced chain."""

    @staticmethod
    def text(start: str, *steps: str, gm: float = 398600.4418, radius: float = 6378.137,
             around: str | None = None, dry: float = 1000.0, propellant: float = 20000.0,
             isp: float = 300.0, thrust: float = 1000.0, margin: str | None = None) -> str:
        """A plan flying ``steps`` from ``start``; ``around`` names a catalogue body instead."""
        lines = ['plan "external check"']
        if around is None:
            lines += [f"body book {{ gm {gm!r} km3/s2 radius {radius!r} km }}", "around book"]
        else:
            lines.append(f"around {around}")
        lines += ["craft probe {", f"    dry {dry!r} kg", f"    propellant {propellant!r} kg",
                  f"    engine main isp {isp!r} s thrust {thrust!r} N", "}"]
        if margin is not None:
            lines.append(f"margin {margin}")
        lines.append(start)
        lines.extend(steps)
        return "\n".join(lines) + "\n"

    @staticmethod
    def result(text: str) -> Result:
        """The evaluated chain; a plan that cannot be flown fails the test with its message."""
        return run(load_text(text), strict=True)

    @classmethod
    def budget(cls, text: str) -> dict:
        return budget(cls.result(text))

    @staticmethod
    def burns(report: dict) -> list[dict]:
        return [s for s in report["steps"] if s["kind"] == "burn"]


@pytest.fixture(scope="session")
def plans() -> Plans:
    return Plans()


def _two_body(t, y, mu):
    r = y[:3]
    return np.concatenate([y[3:], -mu * r / np.linalg.norm(r) ** 3])


def integrate(r, v, mu: float, dt: float, rtol: float = 1e-13):
    """Two-body motion integrated numerically with scipy's DOP853 (independent of kepler.py)."""
    from scipy.integrate import solve_ivp

    y0 = np.concatenate([np.asarray(r, dtype=float), np.asarray(v, dtype=float)])
    if dt == 0.0:
        return y0[:3].copy(), y0[3:].copy()
    # atol tiny: the velocity components near zero must be held to rtol as well
    sol = solve_ivp(_two_body, (0.0, float(dt)), y0, method="DOP853", rtol=rtol,
                    atol=1e-15, args=(mu,))
    assert sol.success, sol.message
    return sol.y[:3, -1], sol.y[3:, -1]


@pytest.fixture(scope="session")
def numeric():
    return integrate

"""The end of a plan's way down: the coast to the entry interface, and the check that
nothing on the way there passes it first.

A plan that ends with ``entry at H`` flies its steps as any other until its last burn or
transfer (``Program.descent_from``); from there the conic may pass under the surface,
and the chain ends the next time the craft comes down through the interface radius
R = body radius + H (``0 km``: the surface, an impact).  The crossing is on the inbound
branch of the orbit equation, true anomaly -nu_R (``kepler.radius_crossings``), reached
by the exact sweep of ``kepler.place`` in the time of ``kepler.time_of_flight``.  The
report gives the speed there and the flight-path angle, atan2(r . v, |r x v|), negative
below the local horizontal (inertial: the atmosphere's own rotation is not taken off).
A coast between the last burn and the entry must end above the interface.
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np

from . import kepler
from .evaluate import HERE_TOL, Batch, Context, Row
from .solvers import Failures
from .state import TWO_PI, elements_from_state, norm
from .steps import Entry


def _inbound(r, v, mu: float, R: float):
    """Sweep to the next inbound crossing of radius R (inf where there is none ahead),
    with a crossing just behind, or here, counted as here."""
    _, down, meets = kepler.radius_crossings(r, v, mu, R)
    down = np.where(np.isfinite(down) & (down > TWO_PI - HERE_TOL), 0.0, down)
    return np.where(down < HERE_TOL, 0.0, down), meets


def _inside(rmag, R) -> np.ndarray:
    return rmag < R * (1.0 - 1e-12)


def entry_rows(step: Entry, index: int, batch: Batch, ctx: Context, fails: Failures):
    """The coast down to the interface; (batch there, [row])."""
    mu, R = ctx.mu, step.radius
    alt = lambda x: f"{x - ctx.radius:.3f} km"
    rmag = norm(batch.r)
    inside = _inside(rmag, R)
    fails.add(inside, lambda i: (
        (f"the craft is already under the entry interface ({step.shown}) when the plan "
         f"ends: it is at {alt(rmag[i])} altitude"),
        ("the interface was crossed on the way to the last burn or after it; end the plan "
        "with `entry` before the craft comes down that far, or give a lower interface")))
    d, meets = _inbound(batch.r, batch.v, mu, R)
    periapsis = lambda i: elements_from_state(batch.r[i:i + 1], batch.v[i:i + 1], mu
                                              ).periapsis[0]  # worded on demand only
    fails.add(~meets, lambda i: (
        (f"the orbit never comes down to the entry interface ({step.shown}): its periapsis "
         f"is at {alt(periapsis(i))} altitude"),
        ("lower the periapsis under the interface with the plan's last burn, e.g. "
        "`burn deorbit at apoapsis: periapsis to 50 km` (it may go under the surface)")))
    fails.add(meets & ~np.isfinite(d), lambda i: (
        (f"the craft is leaving on an open orbit and never comes down to the entry "
         f"interface ({step.shown})"),
        ("turn the craft back first: its last burn must put the periapsis under the interface "
        "ahead of it")))
    d = np.where(fails.ok, d, 0.0)
    if ctx.drift is not None:  # the crossing is a true anomaly: the same on the turned orbit
        r1, v1, dt, ok_t = ctx.drift.goto(batch.r, batch.v, d, lambda rr, vv: (d,))
        ok_p = ok_t
    else:
        dt, ok_t = kepler.time_of_flight(batch.r, batch.v, mu, d)
        r1, v1, ok_p = kepler.place(batch.r, batch.v, mu, d)
    fails.add(~(ok_t & ok_p), lambda i: (("the coast to the entry interface could not be "
                                         "flown"), None))
    ok = fails.ok
    new = replace(batch, r=np.where(ok[:, None], r1, batch.r),
                  v=np.where(ok[:, None], v1, batch.v), t=batch.t + np.where(ok, dt, 0.0))
    dt = np.where(ok, dt, 0.0)
    return new, [Row(index, step.name, "entry", step.shown, new, coast_time=dt, duration=dt)]


def before_interface(step, batch: Batch, dt, ctx: Context, fails: Failures) -> None:
    """On the way down, a coast of ``dt`` seconds must end above the interface."""
    R = ctx.interface
    rmag = norm(batch.r)
    shown = f"{R - ctx.radius:g} km"
    inside = _inside(rmag, R)
    fails.add(inside, lambda i: (
        (f"the craft is already under the entry interface ({shown}) the plan ends at: it is "
         f"at {rmag[i] - ctx.radius:.3f} km altitude"),
        "end the plan with `entry` before this coast"))
    d, _ = _inbound(batch.r, batch.v, ctx.mu, R)
    t_in, ok = kepler.time_of_flight(batch.r, batch.v, ctx.mu, np.where(np.isfinite(d), d, 0.0))
    if ctx.drift is not None:  # J2's mean motion: the same sweep in another time
        t_in = t_in / ctx.drift.rates(batch.r, batch.v).time_scale
    early = np.isfinite(d) & ok & (t_in < dt * (1.0 - 1e-12) - 1e-9)
    fails.add(early, lambda i: (
        (f"the craft comes down through the entry interface ({shown}) {t_in[i]:.3f} s into "
         f"this coast, before it ends ({dt[i]:.3f} s)"),
        "end the plan with `entry` instead of this coast, or coast for less"))

"""The budget of a priced plan as plain data, keyed as the JSON output contract says.

Renderers (table, JSON, Markdown, CSV) and the diff read this; none of them touch the
evaluator.  Non-finite numbers never leave this module: an open orbit's apoapsis and
period are ``None`` (JSON null).
"""

from __future__ import annotations

import math

import numpy as np

from .evaluate import Result, Row
from .state import elements_from_state

CAUTION = ("Preliminary-design estimates under the impulsive two-body approximation; "
           "confirm with high-fidelity analysis and the responsible flight-dynamics "
           "authority before committing a mission to them.")


def finite(x, digits: int | None = None):
    """A float for output, or None where it is not finite."""
    if x is None:
        return None
    x = float(x)
    if not math.isfinite(x):
        return None
    x = round(x, digits) if digits is not None else x
    return x + 0.0  # never a negative zero: -0.0 + 0.0 is 0.0


def degrees_wrapped(x, digits: int = 9):
    """An angle (rad) in degrees for output, in [0, 360), wrapped after rounding.

    Rounding 359.9999999997 to nine places gives 360.0, which is the angle 0:

    >>> degrees_wrapped(np.radians(360.0 - 3e-10)), degrees_wrapped(np.radians(-2e-12))
    (0.0, 0.0)
    """
    d = finite(np.degrees(x), digits)
    if d is None:
        return None
    d %= 360.0
    return 0.0 if d >= 360.0 else d + 0.0


def orbit_dict(r, v, mu: float, radius: float) -> dict:
    el = elements_from_state(r, v, mu)
    deg = np.degrees
    return {
        "periapsis_alt_km": finite(el.periapsis[0] - radius, 6),
        "apoapsis_alt_km": finite(el.apoapsis[0] - radius, 6),
        "sma_km": finite(el.sma[0], 6),
        "ecc": finite(el.ecc[0], 12),
        "inclination_deg": finite(deg(el.inclination[0]), 9),
        "raan_deg": degrees_wrapped(el.raan[0]),
        "argp_deg": degrees_wrapped(el.argp[0]),
        "anomaly_deg": degrees_wrapped(el.anomaly[0]),
        "period_s": finite(el.period[0], 6),
    }


def _step_dict(i: int, row: Row, mu: float, radius: float) -> dict:
    burn = row.kind == "burn"
    ms = lambda x: finite(x[0] * 1000.0, 6) if x is not None else 0.0
    vec = row.dv_vec[0] * 1000.0 if burn else np.zeros(3)
    out = {
        "index": i,
        "name": row.name,
        "kind": row.kind,
        "at": row.at,
        "dv_m_s": ms(row.dv) if burn else 0.0,
        "dv_with_margin_m_s": ms(row.dv_margin) if burn else 0.0,
        "vector_m_s": {"along": finite(vec[0], 6), "cross": finite(vec[1], 6),
                       "radial": finite(vec[2], 6)},
        "propellant_kg": finite(row.propellant[0], 6) if burn else 0.0,
        "mass_after_kg": finite(row.after.mass[0], 6),
        "duration_s": finite((row.burn_time if burn else row.duration)[0], 6)
        if (row.burn_time is not None or row.duration is not None) else 0.0,
        "burn_time_s": finite(row.burn_time[0], 6)
        if burn and row.burn_time is not None else 0.0,
        "coast_time_s": _coast_time(row),
        "elapsed_s": finite(row.after.t[0], 6),
        "orbit_after": orbit_dict(row.after.r, row.after.v, mu, radius),
    }
    if burn:
        out["engine"] = row.engine.name
        out["margin_pct"] = finite(row.margin * 100.0, 9)
        out["coast_before_s"] = finite(row.coast_time[0], 6)
    if row.kind == "expect":
        out["checks"] = [_check_dict(c, radius) for c in row.checks]
    return out


def _coast_time(row: Row) -> float:
    """Time spent coasting in a step: a coast's length, or the coast to a burn's point."""
    return finite(row.coast_time[0], 6) if row.coast_time is not None else 0.0


UNIT_OF_CHECK = {"periapsis": "km", "apoapsis": "km", "circular": "km", "sma": "km",
                 "ecc": "", "inclination": "deg", "raan": "deg", "argp": "deg",
                 "period": "s", "mass": "kg", "propellant": "kg"}


def check_value(kind: str, x: float, radius: float) -> float | None:
    """A check's number in its display unit (altitudes above the equatorial radius)."""
    if kind in ("periapsis", "apoapsis", "circular"):
        return finite(x - radius, 6)
    if kind in ("raan", "argp"):
        return degrees_wrapped(x)
    if kind == "inclination":
        return finite(np.degrees(x), 9)
    return finite(x, 9)


def _check_dict(c, radius: float) -> dict:
    tol = c.tolerance
    if c.kind in ("inclination", "raan", "argp"):
        tol = np.degrees(tol)
    missing = c.missing(0)
    out = {
        "kind": c.kind,
        "comparator": c.comparator,
        "expected": check_value(c.kind, c.target, radius),
        "tolerance": finite(tol, 9) if c.comparator == "within" else None,
        "actual": None if missing else check_value(c.kind, c.actual[0], radius),
        "unit": UNIT_OF_CHECK[c.kind],
        "passed": bool(c.passed[0]),
        "reason": missing,
    }
    if c.apsides is not None:
        out["actual_periapsis"] = check_value("periapsis", c.apsides[0][0], radius)
        out["actual_apoapsis"] = None if missing else check_value("apoapsis", c.apsides[1][0],
                                                                   radius)
    return out


def budget(result: Result) -> dict:
    """The whole report of one priced plan, as the JSON contract lays it out."""
    p = result.program
    mu, radius = p.body.gm, p.body.radius
    steps = [_step_dict(i + 1, row, mu, radius) for i, row in enumerate(result.rows)]
    final = result.final
    ve = p.craft.default_engine.exhaust_speed
    mass, left = float(final.mass[0]), float(final.propellant[0])
    capacity = ve * math.log(mass / (mass - left)) if mass > left else 0.0
    used = p.craft.propellant - left
    totals = {
        "dv_m_s": finite(final.dv[0] * 1000.0, 6),
        "dv_with_margin_m_s": finite(final.dv_margin[0] * 1000.0, 6),
        "propellant_kg": finite(used, 6),
        "final_mass_kg": finite(mass, 6),
        "propellant_left_kg": finite(left, 6),
        "dv_capacity_left_m_s": finite(capacity * 1000.0, 6),
        "elapsed_s": finite(final.t[0], 6),
        "reserve_m_s": finite(p.reserve * 1000.0, 6),
        "reserve_met": bool(capacity >= p.reserve - 1e-12),
        "expectations_met": all(c["passed"] for s in steps for c in s.get("checks", [])),
    }
    out = {
        "plan": p.title,
        "source": p.source.path,
        "body": {"name": p.body.name, "gm_km3_s2": p.body.gm, "radius_km": p.body.radius},
        "craft": {"name": p.craft.name, "dry_kg": p.craft.dry,
                  "propellant_kg": p.craft.propellant,
                  "default_engine": p.craft.default_engine.name},
        "margin_pct": finite(p.margin * 100.0, 9),
        "steps": steps,
        "totals": totals,
        "findings": [],
        "caution": CAUTION,
    }
    if result.error is not None:
        err = result.error
        out["error"] = {
            "message": err.message,
            "line": err.span.line if err.span else None,
            "column": err.span.column if err.span else None,
            "hint": err.hint,
        }
    return out

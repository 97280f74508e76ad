"""The budget of a priced plan as plain data, keyed as the JSON output contract says.

Renderers (table, JSON, Markdown, CSV) and the diff read this; none of them touch the
evaluator.  Non-finite numbers never leave this module: an open orbit's apoapsis and
period are ``None`` (JSON null).
"""

from __future__ import annotations

import math

import numpy as np

from .evaluate import PRICED_KINDS, Result, Row
from .frames import NAMES, components
from .legs import is_leg, step_bodies
from .state import elements_from_state

CONFIRM = ("confirm with high-fidelity analysis and the responsible flight-dynamics "
           "authority before committing a mission to them.")
CAUTION = f"Preliminary-design estimates under the impulsive two-body approximation; {CONFIRM}"
CAUTION_J2 = ("Preliminary-design estimates under the impulsive two-body approximation with "
              "the secular first-order J2 drift of the node, apse line and mean motion (no "
              f"short-period terms, drag or third bodies); {CONFIRM}")


def models_of(*plans) -> tuple[bool, bool]:
    """(any burns flown finite, any coasts drifting under J2) among ``plans``: programs
    or their reports (``run --format json``; one without the keys is impulsive and
    point-mass), None where a plan could not be read."""
    def model(p, key, default):
        return p.get(key, default) if isinstance(p, dict) else getattr(p, key, default)

    ps = [p for p in plans if p is not None]
    return (any(model(p, "burns", "impulsive") == "finite" for p in ps),
            any(model(p, "gravity", "point-mass") == "j2" for p in ps))


def approximation(finite_burns: bool, j2: bool, short: bool = False) -> str:
    """The approximation that priced a plan, named for its caution (``short``: for the
    corner of a picture)."""
    burns = ("two-body approximation with burns flown at constant thrust along a fixed "
             "steering law" if finite_burns else "impulsive two-body approximation")
    if short:
        return burns.split(" along")[0] + (" and secular J2 drift" if j2 else "")
    if j2:
        return (f"{burns}{' and' if finite_burns else ' with'} the secular first-order J2 "
                "drift of the node, apse line and mean motion (no short-period terms, drag "
                "or third bodies)")
    return burns + (" (no J2, drag or third bodies)" if finite_burns else "")


def caution(*plans) -> str:
    """The caution of a report on ``plans`` (``models_of``): every report repeats it, naming the
    approximation the plans were priced under (one caution for several plans names every
    departure from the impulsive point-mass model any of them makes)."""
    return f"Preliminary-design estimates under the {approximation(*models_of(*plans))}; " \
        + CONFIRM


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
    burn = row.kind in PRICED_KINDS  # an allowance is priced like a burn
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
    if row.kind == "burn":
        out["frame"] = row.frame
        r_at, change = row.after.r[:1], row.after.v[:1] - row.v_before[:1]
        if row.dv_impulsive is not None:  # finite: the impulsive burn's direction, its size
            r_at, change = row.r_impulse[:1], row.v_impulsive[:1] - row.v_before[:1]
            change = change * (row.dv[0] / row.dv_impulsive[0] if row.dv_impulsive[0] else 0)
        rtn = components("rtn", r_at, row.v_before[:1], change)[0] * 1000.0
        out["vector_rtn_m_s"] = {k: finite(x, 6) for k, x in zip(NAMES["rtn"], rtn)}
    if burn:
        out["covered"] = bool(row.covered[0])
        out["engine"] = row.engine.name
        out["margin_pct"] = finite(row.margin * 100.0, 9)
        out["coast_before_s"] = finite(row.coast_time[0], 6)
    if row.dv_impulsive is not None:
        out["finite"] = finite_dict(row, mu, radius)
    if row.kind == "expect":
        out["checks"] = [_check_dict(c, radius) for c in row.checks]
    if row.kind == "entry":
        out["entry"] = entry_dict(row.after.r[0], row.after.v[0], radius)
    return out


def finite_dict(row: Row, mu: float, radius: float) -> dict:
    """A burn priced finite: the impulsive delta-v it replaces, the gravity loss (finite
    minus impulsive, both without margin), the thrust arc and what its length met."""
    dv, imp = row.dv[0] * 1000.0, row.dv_impulsive[0] * 1000.0
    return {"dv_impulsive_m_s": finite(imp, 6), "gravity_loss_m_s": finite(dv - imp, 6),
            "thrust_time_s": finite(row.finite_time[0], 6),
            "arc_deg": finite(np.degrees(row.finite_arc[0]), 9), "meets": row.finite_goal,
            "impulsive_orbit_after": orbit_dict(row.r_impulse[:1], row.v_impulsive[:1], mu,
                                                radius)}


def body_dict(body) -> dict:
    return {"name": body.name, "gm_km3_s2": body.gm, "radius_km": body.radius}


def leg_dict(leg) -> dict:
    """A leg's patched-conic figures: both hyperbolic excess speeds and the time of flight."""
    return {"from": leg.depart.name, "to": leg.body.name, "form": leg.form,
            "vinf_depart_km_s": finite(leg.vinf_depart, 9),
            "vinf_arrive_km_s": finite(leg.vinf_arrive, 9),
            "time_of_flight_s": finite(leg.duration, 6)}


def phases_list(result: Result) -> list[dict]:
    """The plan's phases in order: the body each flies around, the leg that starts it
    (none for the first) and the report ``index`` of its first step (None when the
    chain stopped before it, or the phase has no step)."""
    program, rows = result.program, result.rows
    starts = [(0, program.body, None)] + [(i + 1, s.body, s.name)
                                          for i, s in enumerate(program.steps) if is_leg(s)]
    out = []
    for k, (first, body, leg) in enumerate(starts):
        end = starts[k + 1][0] if k + 1 < len(starts) else len(program.steps)
        index = next((n + 1 for n, row in enumerate(rows) if first <= row.step < end), None)
        out.append({"body": body_dict(body), "leg": leg, "first_index": index})
    return out


def entry_dict(r, v, radius: float) -> dict:
    """The state at the entry interface: its altitude, the inertial speed and the
    flight-path angle (negative below the local horizontal)."""
    rmag = float(np.linalg.norm(r))
    radial = float(np.dot(r, v)) / rmag
    transverse = float(np.linalg.norm(np.cross(r, v))) / rmag
    return {"altitude_km": finite(rmag - radius, 6),
            "speed_m_s": finite(np.linalg.norm(v) * 1000.0, 6),
            "flight_path_angle_deg": finite(np.degrees(np.arctan2(radial, transverse)), 9)}


def _coast_time(row: Row) -> float:
    """Time spent coasting in a step: a coast's length, or the coast to a burn's point."""
    return finite(row.coast_time[0], 6) if row.coast_time is not None else 0.0


UNIT_OF_CHECK = {"periapsis": "km", "apoapsis": "km", "circular": "km", "sma": "km",
                 "ecc": "", "inclination": "deg", "raan": "deg", "argp": "deg",
                 "period": "s", "mass": "kg", "propellant": "kg", "vinf": "km/s",
                 "c3": "km2/s2", "elapsed": "s", "anomaly": "deg", "raan drift": "deg/d"}
DEG_PER_DAY = 86400.0 * 180.0 / np.pi  # rad/s to deg/d


def check_value(kind: str, x: float, radius: float) -> float | None:
    """A check's number in its display unit (altitudes above the equatorial radius)."""
    if kind in ("periapsis", "apoapsis", "circular"):
        return finite(x - radius, 6)
    if kind in ("raan", "argp", "anomaly"):
        return degrees_wrapped(x)
    if kind == "inclination":
        return finite(np.degrees(x), 9)
    if kind == "raan drift":
        return finite(x * DEG_PER_DAY, 9)
    return finite(x, 9)


def _check_dict(c, radius: float) -> dict:
    tol = c.tolerance
    if c.kind in ("inclination", "raan", "argp", "anomaly"):
        tol = np.degrees(tol)
    elif c.kind == "raan drift":
        tol = tol * DEG_PER_DAY
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


def shortfall_text(report: dict) -> str:
    """Why a plan does not fit its load and what to add, in one sentence."""
    tot = report["totals"]
    first = tot["first_uncovered_step"]
    if tot.get("no_load_fits"):
        return f"no load flies it: {tot['no_load_fits']}"
    if tot.get("exhausted_component"):
        other = "fuel" if tot["exhausted_component"] == "oxidiser" else "oxidiser"
        where = (f"the {tot['exhausted_component']} runs out at {first}, stranding "
                 f"{tot['stranded_kg']:,.3f} kg of {other}")
    elif first:
        where = f"the load runs out at {first}"
    else:
        where = "every burn is covered but the reserve is not"
    if tot.get("propellant_needed_kg") is None:  # the plan stops part-way: no sizing
        return (f"{where}, before the step the plan cannot fly; the load that flies the "
                "whole plan is known once every step can be flown")
    if tot.get("topped_up_store"):  # loaded out of ratio: one store short, as carried
        store = tot["topped_up_store"]
        other = "oxidiser" if store == "fuel" else "fuel"
        return (f"{where}; with the {tot[other + '_load_kg']:,.3f} kg of {other} it carries it "
                f"needs {tot[store + '_needed_kg']:,.3f} kg of {store} (margins, residual and "
                f"reserve included) and carries {tot[store + '_load_kg']:,.3f} kg: add "
                f"{tot[store + '_shortfall_kg']:,.3f} kg of {store}")
    if "fuel_needed_kg" in tot:
        adds = [f"{tot[k + '_shortfall_kg']:,.3f} kg of {k}" for k in ("fuel", "oxidiser")
                if tot[k + "_shortfall_kg"] > 0]
        return (f"{where}; it needs {tot['fuel_needed_kg']:,.3f} kg of fuel and "
                f"{tot['oxidiser_needed_kg']:,.3f} kg of oxidiser (margins, residual and "
                f"reserve included) and carries {tot['fuel_load_kg']:,.3f} kg and "
                f"{tot['oxidiser_load_kg']:,.3f} kg: add " + " and ".join(adds))
    return (f"{where}; it needs {tot['propellant_needed_kg']:,.3f} kg of propellant (margins, "
            f"residual and reserve included) and carries {tot['load_kg']:,.3f} kg: add "
            f"{tot['shortfall_kg']:,.3f} kg")


def allowance_summary(program) -> dict | None:
    """Deterministic lines add, statistical (3-sigma) lines combine by root-sum-square
    (common practice in delta-v budgets); the total is what the chain prices."""
    sums = program.allowance_sums()
    if sums is None:
        return None
    det, rss, stat = sums
    return {"deterministic_m_s": finite(det * 1000.0, 6),
            "statistical_rss_m_s": finite(rss * 1000.0, 6),
            "statistical_sum_m_s": finite(stat * 1000.0, 6),
            "total_m_s": finite((det + rss) * 1000.0, 6)}


def _component_totals(totals: dict, result: Result, book, needed, feasible: bool,
                      fire: float) -> None:
    """The totals of a craft that loads fuel and oxidiser apart (into ``totals``)."""
    from .components import components_needed

    craft = result.program.craft
    totals["fuel_load_kg"], totals["oxidiser_load_kg"] = craft.fuel, craft.oxidiser
    totals["fuel_left_kg"] = finite(max(book.fuel_left_kg, 0.0), 6)
    totals["oxidiser_left_kg"] = finite(max(book.oxidiser_left_kg, 0.0), 6)
    totals["burnable_left_kg"] = finite(max(fire, 0.0), 6)
    totals["exhausted_component"] = book.exhausted
    totals["stranded_kg"] = (finite(book.stranded_kg, 6)
                             if book.stranded_kg is not None else None)
    if needed is None:
        return
    f_need, o_need = components_needed(result, needed)
    totals["fuel_needed_kg"], totals["oxidiser_needed_kg"] = finite(f_need, 6), finite(o_need, 6)
    f_short, o_short = max(f_need - craft.fuel, 0.0), max(o_need - craft.oxidiser, 0.0)
    if not feasible and f_short <= 0.0 and o_short <= 0.0:
        # loaded out of the burns' ratio: the store that limits, topped up with the other
        # as carried (the split of the least load, above, would not fly this craft)
        from .components import limiting_store, store_needed

        store = book.exhausted or limiting_store(book, craft.default_engine.mixture)
        need = store_needed(result.program, store, fits)
        if need is not None:
            add = max(need - getattr(craft, store), 0.0)
            f_short, o_short = (add, 0.0) if store == "fuel" else (0.0, add)
            totals[f"{store}_needed_kg"] = finite(need, 6)
            totals["topped_up_store"] = store
    totals["fuel_shortfall_kg"] = 0.0 if feasible else finite(f_short, 6)
    totals["oxidiser_shortfall_kg"] = 0.0 if feasible else finite(o_short, 6)
    if not feasible:
        totals["shortfall_kg"] = finite(max(f_short + o_short, totals["shortfall_kg"] or 0.0), 6)


def _end_of(result: Result, book, short) -> tuple[float, float, float, bool]:
    """(usable propellant left, the part of it the default engine can burn, the delta-v
    capacity that gives (km/s), the load covers every step and the reserve) at the end of
    a priced plan; ``book`` its ``components.ledger``, ``short`` its first uncovered row."""
    final, p = result.final, result.program
    ve = p.craft.default_engine.exhaust_speed
    mass, left = float(final.mass[0]), float(final.propellant[0])
    if book.fuel_left_kg is not None:  # two stores: a store run dry leaves nothing
        left = max(book.fuel_left_kg, 0.0) + max(book.oxidiser_left_kg, 0.0)
    burnable = book.burnable_at_end(p.craft.default_engine.mixture)
    # what the default engine can still burn: of two stores, the part left in its ratio
    fire = left if burnable is None else min(left, burnable)
    # capacity from the usable propellant left (none when the load ran out)
    capacity = ve * math.log(mass / (mass - fire)) if mass > fire > 0 else 0.0
    # 10 um/s of slack: the sized load as printed (to the microgram) still fits
    return left, fire, capacity, bool(short is None and capacity >= p.reserve - 1e-8)


def fits(result: Result) -> bool:
    """The plan flies to its end, its load covers every step and the reserve is met."""
    from .components import ledger

    if not result.ok:
        return False
    book = ledger(result)
    if result.first_uncovered is not None or not all(book.covered.values()):
        return False
    return _end_of(result, book, None)[3]


def budget(result: Result) -> dict:
    """The whole report of one priced plan, as the JSON contract lays it out."""
    from .components import ledger
    from .size import size

    p = result.program
    around = step_bodies(p)
    steps = [_step_dict(i + 1, row, around[row.step].gm, around[row.step].radius)
             for i, row in enumerate(result.rows)]
    for row, step in zip(result.rows, steps):
        step["body"] = around[row.step].name
        if row.kind == "leg":
            step["leg"] = leg_dict(p.steps[row.step])
    book = ledger(result)
    short = result.first_uncovered
    for k, parts in book.per_row.items():
        if parts is not None:
            steps[k]["fuel_kg"], steps[k]["oxidiser_kg"] = (finite(parts[0], 6),
                                                            finite(parts[1], 6))
        if not book.covered.get(k, True):
            steps[k]["covered"] = False
            if short is None or result.rows.index(short) > k:
                short = result.rows[k]
    final = result.final
    craft = p.craft
    mass = float(final.mass[0])
    left, fire, capacity, reserve_ok = _end_of(result, book, short)
    used = craft.usable - float(final.propellant[0])
    sizing = size(result) if result.ok else None
    needed = sizing.load if sizing is not None else None
    feasible = bool(result.ok and reserve_ok)
    totals = {
        "dv_m_s": finite(final.dv[0] * 1000.0, 6),
        "dv_with_margin_m_s": finite(final.dv_margin[0] * 1000.0, 6),
        "propellant_kg": finite(used, 6),
        "final_mass_kg": finite(mass, 6),
        "propellant_left_kg": finite(max(left, 0.0), 6),
        "dv_capacity_left_m_s": finite(capacity * 1000.0, 6),
        "elapsed_s": finite(final.t[0], 6),
        "reserve_m_s": finite(p.reserve * 1000.0, 6),
        "reserve_met": reserve_ok and feasible,
        "expectations_met": feasible and all(c["passed"] for s in steps
                                             for c in s.get("checks", [])),
        "load_kg": finite(craft.propellant, 6),
        "residual_kg": finite(craft.residual, 6),
        "usable_kg": finite(craft.usable, 6),
        "propellant_needed_kg": finite(needed, 6) if needed is not None else None,
        "shortfall_kg": (0.0 if feasible else finite(max(needed - craft.propellant, 0.0), 6))
        if needed is not None else None,
        "first_uncovered_step": short.name if short is not None else None,
        "dry_max_kg": finite(sizing.dry_max, 6) if sizing and sizing.dry_max else None,
        "no_load_fits": sizing.why if sizing is not None else None,
    }
    losses = [s["finite"]["gravity_loss_m_s"] for s in steps if "finite" in s]
    if losses:  # a plan with `burns finite`: what its finite burns cost over impulsive ones
        totals["gravity_loss_m_s"] = finite(sum(losses), 6)
    allow = allowance_summary(p)
    totals["allowances_m_s"] = allow["total_m_s"] if allow else 0.0
    if allow is not None:
        totals["allowances"] = allow
    if book.per_row and any(v is not None for v in book.per_row.values()) or craft.components:
        totals["fuel_kg"] = finite(book.fuel_kg, 6)
        totals["oxidiser_kg"] = finite(book.oxidiser_kg, 6)
    if craft.components:
        _component_totals(totals, result, book, needed, feasible, fire)
    out = {
        "plan": p.title,
        "source": p.source.path,
        "body": body_dict(p.body),
        "craft": {"name": p.craft.name, "dry_kg": p.craft.dry,
                  "propellant_kg": p.craft.propellant,
                  "default_engine": p.craft.default_engine.name},
        "margin_pct": finite(p.margin * 100.0, 9),
        "gravity": p.gravity,
        "burns": p.burns,
        "feasible": feasible,
        "steps": steps,
        "totals": totals,
        "findings": [],
        "caution": caution(p),
    }
    if any(is_leg(s) for s in p.steps):
        out["phases"] = phases_list(result)
    if result.error is not None:
        err = result.error
        out["error"] = {
            "message": err.message,
            "line": err.span.line if err.span else None,
            "column": err.span.column if err.span else None,
            "hint": err.hint,
        }
    return out

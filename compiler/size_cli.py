"""`apsidal size PLAN`: the load a plan needs and the dry mass its load can fly.

The numbers come from the evaluator's chain and the exact backward pass of ``size``;
this module only words them (table) or lays them out (``--format json``).
"""

from __future__ import annotations

import sys

from .cliutil import EXIT_BAD_INPUT, EXIT_FINDINGS, EXIT_OK, console


def sizing_report(result) -> dict:
    from .budget import budget
    from .size import size

    p = result.program
    craft = p.craft
    s = size(result)
    needed = s.load
    report = budget(result)
    tot = report["totals"]
    parts = {k: tot[k] for k in ("fuel_needed_kg", "oxidiser_needed_kg", "fuel_load_kg",
                                 "oxidiser_load_kg", "fuel_shortfall_kg",
                                 "oxidiser_shortfall_kg") if k in tot}
    return {**parts,
        "plan": p.title,
        "source": p.source.path,
        "propellant_needed_kg": needed,
        "load_kg": craft.propellant,
        "shortfall_kg": tot["shortfall_kg"],
        "spare_kg": None if needed is None else max(craft.propellant - needed, 0.0),
        "dry_kg": craft.dry,
        "dry_max_kg": s.dry_max,
        "residual_kg_at_needed_load": (None if needed is None else craft.residual_of(needed)),
        "reserve_m_s": p.reserve * 1000.0,
        "feasible": report["feasible"],
        "why": s.why,
        "caution": report["caution"],
    }


def cmd_size(args) -> int:
    from .evaluate import run
    from .load import load

    result = run(load(args.plan))
    if result.error is not None:
        print(result.error.render(), file=sys.stderr)
        return EXIT_BAD_INPUT
    rep = sizing_report(result)
    if args.format == "json":
        import json

        sys.stdout.write(json.dumps(rep, indent=2, allow_nan=False) + "\n")
    else:
        out = console()
        out.print(f"Sizing: {rep['plan'] or rep['source']}")
        if rep["propellant_needed_kg"] is None:
            out.print(f"  no load flies this plan: {rep['why']}")
        else:
            out.print(f"  propellant needed   {rep['propellant_needed_kg']:,.3f} kg "
                      "(margins, residual and reserve included)")
            out.print(f"  propellant loaded   {rep['load_kg']:,.3f} kg")
            for k in ("fuel", "oxidiser"):
                if f"{k}_needed_kg" in rep:
                    out.print(f"  {k + ' needed':<19} {rep[k + '_needed_kg']:,.3f} kg, loaded "
                              f"{rep[k + '_load_kg']:,.3f} kg"
                              + (f", short by {rep[k + '_shortfall_kg']:,.3f} kg"
                                 if rep[k + "_shortfall_kg"] else ""))
            if not rep["feasible"]:
                out.print(f"  short by            {rep['shortfall_kg']:,.3f} kg: the plan "
                          "does not fit")
            else:
                out.print(f"  spare               {rep['spare_kg']:,.3f} kg")
            dry_max = rep["dry_max_kg"]
            out.print(f"  dry mass            {rep['dry_kg']:,.3f} kg; the load flies at most "
                      + ("any dry mass (no burns)" if dry_max is None else
                         f"{dry_max:,.3f} kg"))
        out.print(f"Caution: {rep['caution']}", soft_wrap=True)
    return EXIT_OK if rep["feasible"] else EXIT_FINDINGS


def register(sub) -> None:
    p = sub.add_parser("size", help="the least load that flies a plan, and the most dry mass "
                                    "its load flies")
    p.add_argument("plan", help="plan file (.aps)")
    p.add_argument("--format", choices=("table", "json"), default="table")
    p.set_defaults(func=cmd_size)

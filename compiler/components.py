"""Two-component propellant: fuel and oxidiser per burn, and the stores they come from.

The evaluator prices every burn's propellant as one mass (the rocket equation does not
care what it is made of).  A two-component engine (``mixture MR``, the oxidiser-to-fuel
mass ratio) burns it as fuel m / (1 + MR) and oxidiser m MR / (1 + MR).  This module
splits each priced row that way and, for a craft that loads its components apart
(``fuel`` and ``oxidiser``), follows both stores along the chain:

* a two-component engine draws both stores in its ratio;
* an engine without ``mixture`` draws the fuel store alone (a dual-mode craft whose
  thrusters burn the main engine's fuel);
* a craft that loads one ``propellant`` total has one store: engines draw from it, and
  the split is only reported.

The residual is held back from each component in proportion to its load.  Where one store
runs out first the chain says which, and how much of the other is left stranded.

>>> split(16.5, 1.65)
(6.226415094339623, 10.273584905660378)
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

from .evaluate import PRICED_KINDS, Result, run

TOL = 1e-9  # kg


def split(mass: float, mixture: float | None) -> tuple[float, float]:
    """(fuel, oxidiser) in ``mass`` of propellant burnt at ``mixture``; all fuel without."""
    if mixture is None:
        return mass, 0.0
    fuel = mass / (1.0 + mixture)
    return fuel, mass - fuel


@dataclass
class Ledger:
    """Fuel and oxidiser along the chain: each priced row's split, the totals, and
    where a store ran out."""

    per_row: dict[int, tuple[float, float] | None]  # row position -> (fuel, oxidiser)
    fuel_kg: float  # used by two-component engines (and, with components, by any engine)
    oxidiser_kg: float
    covered: dict[int, bool]  # row position -> both stores still cover it (components)
    exhausted: str | None = None  # "fuel" | "oxidiser": the store that ran out first
    stranded_kg: float | None = None  # what is left of the other one at that point
    fuel_left_kg: float | None = None  # usable, at the end (components)
    oxidiser_left_kg: float | None = None

    def burnable_at_end(self, mixture: float | None) -> float | None:
        """Usable propellant left that an engine of ``mixture`` can still burn."""
        if self.fuel_left_kg is None:
            return None
        f, o = max(self.fuel_left_kg, 0.0), max(self.oxidiser_left_kg, 0.0)
        return f if mixture is None else min(f, o / mixture) * (1.0 + mixture)


def usable_components(craft) -> tuple[float, float]:
    """Usable fuel and oxidiser of a craft that loads them apart."""
    if np.ndim(craft.propellant) == 0:
        share = craft.residual / craft.propellant if craft.propellant > 0 else 0.0
    else:  # a trade's variants (compiler/sweep.py): a load per variant
        loaded = craft.propellant > 0
        share = np.where(loaded, craft.residual / np.where(loaded, craft.propellant, 1.0), 0.0)
    return craft.fuel * (1.0 - share), craft.oxidiser * (1.0 - share)


def ledger(result: Result) -> Ledger:
    craft = result.program.craft
    stores = craft.components
    per_row: dict[int, tuple[float, float] | None] = {}
    covered: dict[int, bool] = {}
    fuel = ox = 0.0
    if stores:
        fuel_usable, ox_usable = usable_components(craft)
    exhausted = stranded = None
    for k, row in enumerate(result.rows):
        if row.kind not in PRICED_KINDS:
            continue
        mixture = row.engine.mixture
        if mixture is None and not stores:
            per_row[k] = None
            continue
        f, o = split(float(row.propellant[0]), mixture)
        per_row[k] = (f, o)
        if stores:
            short_f = fuel + f > fuel_usable + TOL
            short_o = ox + o > ox_usable + TOL
            if (short_f or short_o) and exhausted is None:
                # the store that runs out first along this burn's own ratio
                room_f = (fuel_usable - fuel) / f if f > 0 else float("inf")
                room_o = (ox_usable - ox) / o if o > 0 else float("inf")
                exhausted = "fuel" if room_f <= room_o else "oxidiser"
                stranded = (max(ox_usable - ox - o * room_f, 0.0) if exhausted == "fuel"
                            else max(fuel_usable - fuel - f * room_o, 0.0))
            covered[k] = exhausted is None
        fuel += f
        ox += o
    out = Ledger(per_row, fuel, ox, covered, exhausted, stranded)
    if stores:
        out.fuel_left_kg, out.oxidiser_left_kg = fuel_usable - fuel, ox_usable - ox
    return out


def limiting_store(book: Ledger, mixture: float | None) -> str:
    """The store that limits an engine of ``mixture`` at the end of the chain."""
    if mixture is None:
        return "fuel"
    return "fuel" if book.fuel_left_kg * mixture <= book.oxidiser_left_kg else "oxidiser"


GROWTH_LIMIT = 100.0  # a store is searched up to this many times the craft's whole load


def store_needed(program, store: str, fits, tol: float = 1e-7) -> float | None:
    """The least load of ``store`` (``fuel`` or ``oxidiser``) that flies ``program``
    (``fits`` of its priced result) with the other store as carried: the answer for a
    craft loaded out of its burns' ratio.  Bisection over priced plans (more of one store
    never makes a plan that fits stop fitting, short of the other running out); None
    where no such load exists (the other store runs out too)."""
    craft = program.craft

    def flies(x: float) -> bool:
        f, o = (x, craft.oxidiser) if store == "fuel" else (craft.fuel, x)
        trial = replace(craft, fuel=f, oxidiser=o, propellant=f + o)
        return fits(run(replace(program, craft=trial)))

    lo = float(getattr(craft, store))
    hi = max(2.0 * lo, lo + 1.0)
    while not flies(hi):
        lo, hi = hi, 2.0 * hi
        if hi > GROWTH_LIMIT * max(craft.propellant, 1.0):
            return None
    while hi - lo > tol * hi:
        mid = 0.5 * (lo + hi)
        lo, hi = (lo, mid) if flies(mid) else (mid, hi)
    return hi


def components_needed(result: Result, load: float) -> tuple[float, float]:
    """The fuel and oxidiser of the sized ``load``: each burn's split at that load, the
    end reserve split by the default engine's ratio, the residual in proportion."""
    program = result.program
    craft = replace(program.craft, propellant=load, fuel=None, oxidiser=None)
    sized = run(replace(program, craft=craft))
    book = ledger(sized)
    fuel, ox = book.fuel_kg, book.oxidiser_kg
    for k, row in enumerate(sized.rows):  # single-store engines at this load: all fuel
        if row.kind in PRICED_KINDS and book.per_row.get(k) is None:
            fuel += float(row.propellant[0])
    left = float(sized.final.propellant[0])  # the reserve's usable propellant
    f, o = split(left, craft.default_engine.mixture)
    fuel, ox = fuel + f, ox + o
    residual = craft.residual_of(load)
    burnt = fuel + ox
    if burnt > 0:
        fuel, ox = fuel + residual * fuel / burnt, ox + residual * ox / burnt
    return fuel, ox


@dataclass
class Stores:
    """The two stores of a craft that loads fuel and oxidiser apart, followed along a
    batch of variants (``ledger`` for many at once: the same rules, array by array)."""

    covered: np.ndarray  # (n, rows) both stores still cover each priced row
    left: np.ndarray  # (n,) usable fuel and oxidiser left at the end (a dry store: none)
    burnable: np.ndarray  # (n,) of that, what an engine of the default ratio can burn


def stores_over_batch(rows, craft, mixture, n: int) -> Stores:
    """``ledger``'s stores for the priced ``rows`` (each with ``propellant`` and ``engine``
    over ``n`` variants) of a ``craft`` with components; ``mixture`` is the default
    engine's (what the end reserve burns at)."""
    fuel_usable, ox_usable = usable_components(craft)
    fuel, ox = np.zeros(n), np.zeros(n)
    covered = np.ones((n, max(len(rows), 1)), dtype=bool)
    exhausted = np.zeros(n, dtype=bool)
    for k, row in enumerate(rows):
        f, o = split(np.asarray(row.propellant, float), row.engine.mixture)
        fuel, ox = fuel + f, ox + o
        exhausted |= (fuel > fuel_usable + TOL) | (ox > ox_usable + TOL)
        covered[:, k] = ~exhausted
    f_left, o_left = fuel_usable - fuel, ox_usable - ox
    f_pos, o_pos = np.maximum(f_left, 0.0), np.maximum(o_left, 0.0)
    burnable = f_pos if mixture is None else np.minimum(f_pos, o_pos / mixture) * (1.0 + mixture)
    return Stores(covered, f_pos + o_pos, burnable)

"""Lint rules for `apsidal check`, one module each, collected in ``RULES``.

A rule is a plain function ``Checker -> list[Finding]`` named with ``@rule``; its
docstring is what `apsidal explain NAME` prints.  Rules that claim a saving build the
rewritten plan text and let ``Checker.prove`` price it; they never compute a saving.
"""

from .burns import cancelling_burns, long_burn, merge_burns
from .drift import drift_node_change
from .expectations import (
    beyond_sphere_of_influence,
    expectation_not_met,
    propellant_exhausted,
    reserve_not_covered,
)
from .finite import finite_burn
from .ordering import cheaper_order
from .planes import costlier_node, plane_change_at_speed, shared_plane_change
from .transfers import bi_elliptic_cheaper, hohmann_cheaper, three_burn_plane_change

RULES = (
    propellant_exhausted,
    expectation_not_met,
    reserve_not_covered,
    beyond_sphere_of_influence,
    cheaper_order,
    plane_change_at_speed,
    costlier_node,
    merge_burns,
    shared_plane_change,
    bi_elliptic_cheaper,
    hohmann_cheaper,
    three_burn_plane_change,
    cancelling_burns,
    drift_node_change,
    long_burn,
    finite_burn,
)

BY_NAME = {r.rule_name: r for r in RULES}

# What `run` reports on its own: the plan measured against itself, no search.
CONSISTENCY = (propellant_exhausted, expectation_not_met, reserve_not_covered,
               beyond_sphere_of_influence, long_burn, finite_burn)

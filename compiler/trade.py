"""The plan's `trade` statements, read by `apsidal sweep` (``run`` ignores them)."""

from __future__ import annotations

from .cliutil import UsageError


def study_from_plan(plan, name, study_class):
    """The study a `trade` statement of ``plan`` writes (``name``: which one)."""
    raise UsageError("nothing to sweep: give --vary or --disperse")

"""JSON parsing for tests that must never see NaN or infinity in apsidal's output."""

from __future__ import annotations

import json


def strict_json(text: str):
    """json.loads that refuses NaN, Infinity and -Infinity."""
    def refuse(token):
        raise AssertionError(f"non-finite number {token} in JSON output")
    return json.loads(text, parse_constant=refuse)

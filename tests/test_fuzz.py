"""Anything a user can type gets exit 0 or a located error with exit 2, never a traceback.

The inputs are the samples with random edits (words dropped, swapped, duplicated,
replaced by other words of the language or by numbers), so most of them are nearly
valid plans: the hardest kind of bad input to report well.
"""

from __future__ import annotations

import json
import re
from pathlib import Path

from apsidal.compiler import cli
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from strictjson import strict_json

SAMPLES = sorted((Path(__file__).parent.parent / "samples").glob("*.aps"))
TEXTS = [p.read_text() for p in SAMPLES]
WORDS = sorted({w for t in TEXTS for w in re.findall(r"[^\s]+", t)} |
               {"0", "-1", "1e9", "180 deg", "at", "node", "to", "via", "rev", ":", ","})


@st.composite
def edited_plans(draw):
    text = draw(st.sampled_from(TEXTS))
    tokens = re.split(r"(\s+)", text)
    for _ in range(draw(st.integers(1, 4))):
        i = draw(st.integers(0, len(tokens) - 1))
        action = draw(st.sampled_from(["drop", "dup", "swap", "word"]))
        if action == "drop":
            tokens[i] = ""
        elif action == "dup":
            tokens[i] = tokens[i] + " " + tokens[i]
        elif action == "swap" and i + 2 < len(tokens):
            tokens[i], tokens[i + 2] = tokens[i + 2], tokens[i]
        else:
            tokens[i] = draw(st.sampled_from(WORDS))
    return "".join(tokens)


@settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.too_slow,
                                                                  HealthCheck.function_scoped_fixture])
@given(edited_plans())
def test_edited_plans_never_crash(tmp_path_factory, capsys, text):
    path = tmp_path_factory.mktemp("fuzz") / "plan.aps"
    path.write_text(text)
    code = cli.main(["run", str(path), "--format", "json"])
    out, err = capsys.readouterr()
    assert code in (0, 1, 2), err  # 1: an expectation failed or a finding is an error
    if code == 1:
        rep = json.loads(out)
        assert not rep["totals"]["expectations_met"] or any(
            f["severity"] == "error" for f in rep["findings"])
    assert "Traceback" not in err and "internal error" not in err
    if code == 2:
        assert re.search(r":\d+:\d+: error: ", err), err
        assert "^" in err
    if out.strip():
        strict_json(out)
    # the formatter either formats it (and proves itself) or reports the same bad input
    fmt_code = cli.main(["fmt", str(path)])
    _, fmt_err = capsys.readouterr()
    assert fmt_code in (0, 2) and "Traceback" not in fmt_err and "internal" not in fmt_err

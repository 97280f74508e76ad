"""`apsidal report` and `apsidal diff --format html`: one self-contained page each.

The page is read back: every step name and the totals `apsidal run --format json`
reports (as the tables print them), the burns marked in its chain picture, the findings
`apsidal check --format json` reports with their rewrites, the caution, and not one
reference to anything outside the file.
"""

from __future__ import annotations

import contextlib
import html
import io
import json
import re
from html.parser import HTMLParser
from pathlib import Path

import pytest
import svgread
from apsidal.compiler.cli import main
from apsidal.compiler.textfmt import sig

SAMPLES = sorted((Path(__file__).resolve().parent.parent / "samples").glob("*.aps"))
IDS = [p.stem for p in SAMPLES]
RELAY = next(p for p in SAMPLES if p.stem == "relay-geo")


def cli(*args: str) -> tuple[int, str, str]:
    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        code = main(list(args))
    return code, out.getvalue(), err.getvalue()


def report_page(tmp_path: Path, plan: Path, *more: str) -> tuple[int, str]:
    out = tmp_path / f"{plan.stem}.html"
    code, _, err = cli("report", str(plan), "-o", str(out), *more)
    assert code in (0, 1), err
    return code, out.read_text(encoding="utf-8")


# What would make a browser fetch something: an address, a source or link attribute that
# is not a fragment of the page itself, a style sheet import or a url() that is not "#".
EXTERNAL = re.compile(r"https?:|//[a-z0-9.-]+\.[a-z]{2,}/|\bsrc\s*=|\bhref\s*=\s*\"(?!#)|"
                      r"@import|url\(\s*(?!#)|<script|<link\b|<iframe|<object|<embed",
                      re.IGNORECASE)


def external_references(page: str) -> list[str]:
    return EXTERNAL.findall(page)


class Structure(HTMLParser):
    """Tags opened and closed, to check the page nests (an unclosed <svg> or <table>
    would swallow the rest of the page in a browser)."""

    VOID = frozenset({"meta", "br", "hr", "img", "input", "link", "source", "wbr", "col", "area",
                      "base", "embed", "param", "track"})

    def __init__(self):
        super().__init__(convert_charrefs=True)
        self.stack: list[str] = []
        self.errors: list[str] = []
        self.text: list[str] = []

    def handle_starttag(self, tag, attrs):
        if tag not in self.VOID:
            self.stack.append(tag)

    def handle_startendtag(self, tag, attrs):
        pass

    def handle_endtag(self, tag):
        if not self.stack or self.stack[-1] != tag:
            self.errors.append(f"</{tag}> closes {self.stack[-1:] or 'nothing'}")
            if tag in self.stack:
                while self.stack and self.stack.pop() != tag:
                    pass
            return
        self.stack.pop()

    def handle_data(self, data):
        self.text.append(data)


def structure(page: str) -> Structure:
    s = Structure()
    s.feed(page)
    s.close()
    return s


def test_external_reference_scan_finds_what_it_should():
    for bad in ('<img src="a.png">', '<a href="https://x.org/">', "@import 'a.css';",
                "background: url(a.png)", '<script>1</script>', '<link rel="stylesheet">'):
        assert external_references(bad), bad
    for fine in ('<a href="#finding-1">', 'clip-path="url(#p1)"', "fill: #cc6677"):
        assert not external_references(fine), fine


@pytest.mark.parametrize("path", SAMPLES, ids=IDS)
def test_report_holds_every_step_the_totals_and_nothing_external(tmp_path, path):
    code, out, _ = cli("run", str(path), "--format", "json")
    run = json.loads(out)
    status, page = report_page(tmp_path, path)
    assert status == code
    assert external_references(page) == []
    s = structure(page)
    assert s.errors == [] and s.stack == []
    text = html.unescape("".join(s.text))
    for step in run["steps"]:
        assert f'id="step-{step["index"]}"' in page
        assert step["name"] in text
    tot = run["totals"]
    for key in ("dv_m_s", "dv_with_margin_m_s", "propellant_kg", "propellant_left_kg",
                "final_mass_kg", "dv_capacity_left_m_s", "reserve_m_s"):
        assert sig(tot[key]) in text, key
    assert run["caution"] in text
    # the chain picture, inline: one marker per burn
    root = svgread.parse(re.search(r"<svg .*?</svg>", page, re.DOTALL).group(0)
                         .replace("<svg ", '<svg xmlns="http://www.w3.org/2000/svg" '
                                  'xmlns:xlink="http://www.w3.org/1999/xlink" ', 1))
    burns = [s_["index"] for s_ in run["steps"] if s_["kind"] == "burn"]  # every phase's
    assert sorted(int(k.rsplit("-", 1)[1]) for k in
                  svgread.ids_like(root, r"chain-(phase\d+-)?burn-\d+")) == sorted(burns)
    # the waterfall and mass pictures are there too
    assert 'id="waterfall-bar-total"' in page and 'id="mass-mass"' in page
    # every expectation, with its verdict
    checks = [c for s_ in run["steps"] for c in s_.get("checks", [])]
    assert text.count("pass ") + text.count("FAIL ") >= len(checks)


def test_report_carries_checks_findings_with_their_rewrites(tmp_path):
    _code, out, _ = cli("check", str(RELAY), "--format", "json")
    found = json.loads(out)["plans"][0]["findings"]
    assert any(f["suggestion"] for f in found)  # the sample has a proven rewrite
    _, page = report_page(tmp_path, RELAY)
    text = html.unescape("".join(structure(page).text))
    for f in found:
        assert f["rule"] in text and f["message"] in text
        if f["diff"]:
            for line in f["diff"].splitlines():
                if line.startswith(("+", "-")) and not line.startswith(("+++", "---")):
                    assert line in text


def test_report_without_findings_says_so(tmp_path):
    _, page = report_page(tmp_path, RELAY, "--no-findings")
    assert "were not run" in page and "--no-findings" in page


def test_report_of_a_plan_that_does_not_fit(tmp_path):
    plan = tmp_path / "short.aps"
    plan.write_text('plan "Short tank"\naround earth\ncraft c { dry 500 kg propellant 40 kg '
                    'engine e isp 300 s thrust 400 N }\nstart circular 400 km\n'
                    "burn up at periapsis: apoapsis to 20000 km\n"
                    "burn round at apoapsis: circular\n")
    code, page = report_page(tmp_path, plan)
    assert code == 1
    text = html.unescape("".join(structure(page).text))
    assert "does not fit its load" in text
    _, out, _ = cli("run", str(plan), "--format", "json")
    run = json.loads(out)
    assert sig(run["totals"]["dv_with_margin_m_s"]) in text
    assert run["totals"]["dv_with_margin_m_s"] > 0


def test_report_mistakes_exit_2(tmp_path):
    code, _, err = cli("report", str(RELAY), "-o", str(tmp_path / "r.pdf"))
    assert code == 2 and "HTML" in err
    bad = tmp_path / "bad.aps"
    bad.write_text("around earth\nstart circular 400 km\nburn\n")
    code, _, err = cli("report", str(bad), "-o", str(tmp_path / "r.html"))
    assert code == 2 and "bad.aps:" in err and not (tmp_path / "r.html").exists()


def revision(tmp_path: Path) -> Path:
    text = RELAY.read_text()
    new = text.replace("margin 5 %", "margin 6 %").replace(
        "along 1.5 m/s, cross -0.3 m/s", "along 3 m/s, cross -0.6 m/s")
    assert new != text
    path = tmp_path / "relay-next.aps"
    path.write_text(new)
    return path


def test_diff_page_shows_totals_changes_and_two_waterfalls(tmp_path):
    new = revision(tmp_path)
    code, out, _ = cli("diff", str(RELAY), str(new), "--format", "json")
    diff = json.loads(out)
    code_html, page, err = cli("diff", str(RELAY), str(new), "--format", "html")
    assert code_html == code, err
    assert external_references(page) == []
    s = structure(page)
    assert s.errors == [] and s.stack == []
    text = html.unescape("".join(s.text))
    for key in ("dv_with_margin_m_s", "propellant_kg"):
        assert sig(diff["old"][key]) in text and sig(diff["new"][key]) in text
    changed = [e["name"] for e in diff["steps"] if e["status"] == "changed"]
    assert changed
    rows = re.findall(r'<tr class="status-(\w+)">(.*?)</tr>', page, re.DOTALL)
    highlighted = {name for status, row in rows if status == "changed"
                   for name in changed if name in html.unescape(row)}
    assert highlighted == set(changed)
    assert len(rows) == len(diff["steps"])
    for side in ("old", "new"):
        assert page.count(f'id="{side}-bar-total"') == 1
    # a step keeps its colour in both waterfalls
    fills = {side: re.search(rf'id="{side}-bar-1-dv">\s*<path[^>]*fill: (#[0-9a-f]{{6}})',
                             page).group(1) for side in ("old", "new")}
    assert fills["old"] == fills["new"]
    assert diff_caution() in text


def diff_caution() -> str:
    from apsidal.compiler.budget import CAUTION

    return CAUTION


def test_a_failed_expectation_shows_and_exits_1_as_run_does(tmp_path):
    plan = tmp_path / "miss.aps"
    plan.write_text("around earth\ncraft c { dry 500 kg propellant 400 kg engine e isp 300 s "
                    "thrust 400 N }\nstart circular 400 km\n"
                    "burn up at periapsis: apoapsis to 2000 km\n"
                    "expect high apoapsis 3000 km within 1 km\n")
    run_code, out, _ = cli("run", str(plan), "--format", "json")
    assert run_code == 1
    code, page = report_page(tmp_path, plan)
    assert code == run_code
    text = html.unescape("".join(structure(page).text))
    check = json.loads(out)["steps"][1]["checks"][0]
    assert not check["passed"] and "FAIL high: apoapsis 3000 km within 1 km" in text


def test_diff_page_of_a_plan_that_does_not_parse_is_no_page(tmp_path):
    bad = tmp_path / "bad.aps"
    bad.write_text("around earth\nstart circular 400 km\nburn\n")
    code, out, err = cli("diff", str(RELAY), str(bad), "--format", "html")
    assert code == 2 and out == "" and "bad.aps:" in err and "does not parse" in err


def colour_of(page: str, element_id: str, prop: str) -> str:
    """The ``prop`` (fill or stroke) colour of the first path in the element ``id``."""
    m = re.search(rf'id="{element_id}">\s*<path[^>]*?style="[^"]*?\b{prop}: (#[0-9a-f]{{6}})',
                  page)
    assert m, element_id
    return m.group(1).lower()


def test_a_step_has_one_colour_in_every_picture_and_table(tmp_path):
    plan = next(p for p in SAMPLES if p.stem == "geo-fifteen-years")  # burns and allowances
    _, out, _ = cli("run", str(plan), "--format", "json")
    run = json.loads(out)
    _, page = report_page(tmp_path, plan)
    burns = [s for s in run["steps"] if s["kind"] == "burn"]
    seen = set()
    for s in burns:
        n = s["index"]
        orbit = colour_of(page, f"chain-orbit-{n}", "stroke")
        bar = colour_of(page, f"waterfall-bar-{n}-dv", "fill")
        chip = re.search(rf'<tr id="step-{n}">.*?background:(#[0-9A-Fa-f]{{6}})', page).group(1)
        assert orbit == bar == chip.lower(), s["name"]
        seen.add(orbit)
    assert len(seen) == len(burns)  # the burns come first: five burns, five colours

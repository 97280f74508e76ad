"""`apsidal lsp` driven as an editor drives it: a child process speaking the Language
Server Protocol (JSON-RPC 2.0 with Content-Length framing) over a real stdio pipe.

Every read has a timeout, so a server that hangs fails the test instead of blocking CI.
"""

from __future__ import annotations

import json
import queue
import re
import subprocess
import sys
import threading
from pathlib import Path

import pytest
from apsidal.compiler.cli import main

pytest.importorskip("pygls", reason="the language server needs pygls (the `lsp` extra)")

SAMPLE = Path(__file__).resolve().parent.parent / "samples" / "relay-geo.aps"
TIMEOUT = 60.0  # s for any one answer; the first includes the server's start-up

CLEAN = """plan "Editor test"
around earth
craft probe {
    dry 500 kg
    propellant 300 kg
    engine main isp 300 s thrust 40 kN
}
start circular 400 km
burn raise at periapsis: apoapsis to 1000 km
burn circ at apoapsis: circular
"""
TYPO = CLEAN.replace("apoapsis to 1000 km", "apoapsys to 1000 km")


class Client:
    """A minimal LSP client: requests and notifications out, messages read by a thread."""

    def __init__(self):
        self.proc = subprocess.Popen(
            [sys.executable, "-m", "apsidal.compiler.cli", "lsp"], stdin=subprocess.PIPE,
            stdout=subprocess.PIPE, stderr=subprocess.PIPE)
        self.inbox: queue.Queue = queue.Queue()
        self.next_id = 0
        threading.Thread(target=self._read, daemon=True).start()

    def _read(self):
        out = self.proc.stdout
        while True:
            length = None
            while True:
                line = out.readline()
                if not line:
                    return
                line = line.decode("ascii").strip()
                if not line:
                    break
                key, _, value = line.partition(":")
                if key.lower() == "content-length":
                    length = int(value)
            self.inbox.put(json.loads(out.read(length)))

    def send(self, message: dict) -> None:
        body = json.dumps({"jsonrpc": "2.0", **message}).encode("utf-8")
        self.proc.stdin.write(b"Content-Length: %d\r\n\r\n" % len(body) + body)
        self.proc.stdin.flush()

    def notify(self, method: str, params: dict) -> None:
        self.send({"method": method, "params": params})

    def request(self, method: str, params: dict):
        self.next_id += 1
        self.send({"id": self.next_id, "method": method, "params": params})
        reply = self.wait(lambda m: m.get("id") == self.next_id and "method" not in m)
        assert "error" not in reply, reply
        return reply["result"]

    def wait(self, accept):
        """The next message ``accept`` takes; server-to-client requests are answered."""
        while True:
            try:
                message = self.inbox.get(timeout=TIMEOUT)
            except queue.Empty:
                raise AssertionError("the language server did not answer in time: "
                                     + self.proc.stderr.read1(4000).decode(errors="replace")
                                     if self.proc.poll() is not None else
                                     "the language server did not answer in time") from None
            if "id" in message and "method" in message:  # e.g. window/workDoneProgress
                self.send({"id": message["id"], "result": None})
                continue
            if accept(message):
                return message

    def diagnostics(self, uri: str, version: int) -> list[dict]:
        m = self.wait(lambda m: m.get("method") == "textDocument/publishDiagnostics"
                      and m["params"]["uri"] == uri
                      and m["params"].get("version") in (version, None))
        return m["params"]["diagnostics"]

    def close(self) -> int:
        try:
            self.request("shutdown", None)
            self.notify("exit", None)
            return self.proc.wait(timeout=TIMEOUT)
        finally:
            if self.proc.poll() is None:
                self.proc.kill()
                self.proc.wait()


@pytest.fixture
def client():
    c = Client()
    reply = c.request("initialize", {"processId": None, "rootUri": None,
                                     "capabilities": {}})
    caps = reply["capabilities"]
    assert caps["hoverProvider"] and caps["documentFormattingProvider"]
    assert "completionProvider" in caps
    c.notify("initialized", {})
    yield c
    assert c.close() == 0


def test_typo_then_fix_then_hover(client, tmp_path, capsys):
    path = tmp_path / "editor.aps"
    path.write_text(CLEAN)
    uri = path.as_uri()
    client.notify("textDocument/didOpen", {"textDocument": {
        "uri": uri, "languageId": "apsidal", "version": 1, "text": TYPO}})
    [d] = client.diagnostics(uri, 1)
    # line 9 (zero-based 8), under `apoapsys`, with the parser's hint
    line = TYPO.splitlines()[8]
    assert d["range"]["start"] == {"line": 8, "character": line.index("apoapsys")}
    assert d["range"]["end"] == {"line": 8, "character": line.index("apoapsys") + 8}
    assert d["severity"] == 1 and d["source"] == "apsidal"
    assert "unexpected `apoapsys`" in d["message"] and "did you mean `apoapsis`" in d["message"]

    client.notify("textDocument/didChange", {
        "textDocument": {"uri": uri, "version": 2}, "contentChanges": [{"text": CLEAN}]})
    assert client.diagnostics(uri, 2) == []

    # hover on the raise burn: its delta-v is the one `run --format json` reports
    hovered = client.request("textDocument/hover", {
        "textDocument": {"uri": uri}, "position": {"line": 8, "character": 6}})
    text = hovered["contents"]["value"]
    assert main(["run", str(path), "--format", "json"]) == 0
    step = next(s for s in json.loads(capsys.readouterr().out)["steps"]
                if s["name"] == "raise")
    shown = float(re.search(r"delta-v ([0-9.]+) m/s", text).group(1))
    assert shown == step["dv_m_s"]
    assert f"propellant {step['propellant_kg']} kg" in text
    # off any step: nothing
    assert client.request("textDocument/hover", {
        "textDocument": {"uri": uri}, "position": {"line": 1, "character": 2}}) is None


def test_save_adds_check_findings_formatting_and_completion(client, tmp_path, capsys):
    text = SAMPLE.read_text()
    path = tmp_path / "relay.aps"
    path.write_text(text)
    uri = path.as_uri()
    client.notify("textDocument/didOpen", {"textDocument": {
        "uri": uri, "languageId": "apsidal", "version": 1, "text": text}})
    typed = {d["code"] for d in client.diagnostics(uri, 1)}
    assert typed == {"long-burn"}  # the plan's own finding, no search while typing
    client.notify("textDocument/didSave", {"textDocument": {"uri": uri}})
    saved = client.diagnostics(uri, 1)
    assert {d["code"] for d in saved} == {"long-burn", "shared-plane-change"}
    shared = next(d for d in saved if d["code"] == "shared-plane-change")
    assert shared["range"]["start"]["line"] == text.splitlines().index(
        next(ln for ln in text.splitlines() if ln.startswith("burn raise")))

    # the rewrite `check` proved, offered as a quick fix on the finding's line
    [action] = client.request("textDocument/codeAction", {
        "textDocument": {"uri": uri}, "range": shared["range"],
        "context": {"diagnostics": [shared]}})
    assert action["kind"] == "quickfix" and "shared-plane-change" in action["title"]
    [fix] = action["edit"]["changes"][uri]
    assert main(["check", str(path), "--format", "json"]) == 0
    found = json.loads(capsys.readouterr().out)["plans"][0]["findings"]
    assert fix["newText"] == next(f["suggestion"] for f in found
                                  if f["rule"] == "shared-plane-change")

    scruffy = text.replace("margin 5 %", "margin    5 %")
    client.notify("textDocument/didChange", {
        "textDocument": {"uri": uri, "version": 2}, "contentChanges": [{"text": scruffy}]})
    client.diagnostics(uri, 2)
    # the text changed since the check: its rewrite is no longer offered
    assert client.request("textDocument/codeAction", {
        "textDocument": {"uri": uri}, "range": shared["range"],
        "context": {"diagnostics": []}}) == []
    [edit] = client.request("textDocument/formatting", {
        "textDocument": {"uri": uri}, "options": {"tabSize": 4, "insertSpaces": True}})
    assert edit["newText"] == text and edit["range"]["start"] == {"line": 0, "character": 0}

    def labels(line: int, character: int) -> set[str]:
        got = client.request("textDocument/completion", {
            "textDocument": {"uri": uri}, "position": {"line": line, "character": character}})
        return {item["label"] for item in got["items"]}

    lines = scruffy.splitlines()
    tweak = next(k for k, ln in enumerate(lines) if ln.startswith("burn tweak"))
    using = lines[tweak].index("using ") + len("using ")
    assert labels(tweak, using) == {"main", "trim"}
    assert {"km", "m/s", "deg"} <= labels(tweak, lines[tweak].index("1.5") + 3)
    around = next(k for k, ln in enumerate(lines) if ln.startswith("around"))
    assert "earth" in labels(around, len("around "))
    assert {"burn", "apoapsis", "inclination"} <= labels(len(lines), 0)


def test_columns_are_utf16_code_units(client, tmp_path):
    """The protocol counts columns in UTF-16 code units unless the editor agrees on
    another: a character outside the Basic Multilingual Plane counts two."""
    text = CLEAN.replace('plan "Editor test"', 'plan "Editor \U0001F6F0" soon')
    uri = (tmp_path / "wide.aps").as_uri()
    client.notify("textDocument/didOpen", {"textDocument": {
        "uri": uri, "languageId": "apsidal", "version": 1, "text": text}})
    [d] = client.diagnostics(uri, 1)
    assert "`soon`" in d["message"]
    column = text.splitlines()[0].index("soon")  # in code points
    assert d["range"]["start"] == {"line": 0, "character": column + 1}
    assert d["range"]["end"] == {"line": 0, "character": column + 1 + 4}


def test_without_pygls_the_command_says_what_to_install():
    code = ("import sys; sys.modules['pygls'] = None; "
            "from apsidal.compiler.cli import main; sys.exit(main(['lsp']))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         timeout=120, check=False)
    assert out.returncode == 2
    assert "pip install 'apsidal[lsp]'" in out.stderr and "Traceback" not in out.stderr

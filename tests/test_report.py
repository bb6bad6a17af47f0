"""`check --report DIR`: the evidence page, its manifest and its counterexamples; the page
opened in a real headless Chromium (DevTools protocol over a pipe, no network), which must
render it with no console error and show every rule row and every diagram. The screenshot is
saved as a test artifact ($VERIFIER_TEST_ARTIFACTS, default test-artifacts/ in the repo)."""

from __future__ import annotations

import base64
import json
import os
import re
import select
import shutil
import subprocess
import tempfile
import textwrap
import time
from pathlib import Path

import pytest

from verifier.about import CAUTION
from verifier.cli import main

ROOT = Path(__file__).resolve().parent.parent
CHROMIUM = "/usr/bin/chromium"

PACK = textwrap.dedent("""\
    [pack]
    name = "fenwick"
    title = "Fenwick Yard reports"
    legs = 1

    [world]
    train_length = ["20 m", "400 m"]

    [[rule]]
    id = "orientation-known"
    title = "With two balises read the orientation is known"
    given = "lrbg.read >= 2"
    expect = "est.orientation != unknown"
    refs = ["SUBSET-026 3.4.2.2.2"]

    [[rule]]
    id = "side-is-nominal"
    title = "Wrong on purpose: the front is always on the nominal side"
    given = "rbc.placed"
    expect = "report.q_dlrbg == nominal"
    refs = ["SUBSET-026 7.5.1.106", "SUBSET-026 3.4.2.2.2"]

    [[rule]]
    id = "cab-flips"
    title = "Wrong on purpose: a cab change in leg 1 keeps the orientation"
    given = "legs[1].cab_change and passage.seen != unknown"
    expect = "report.q_dirlrbg == passage.seen"

    [[rule]]
    id = "impossible"
    title = "Vacuous: no train is that short"
    given = "train.length < 5 m"
    expect = "true"
    """)
RULES = ["orientation-known", "side-is-nominal", "cab-flips", "impossible"]
VIOLATED = ["side-is-nominal", "cab-flips"]


@pytest.fixture(scope="module")
def site(tmp_path_factory):
    root = tmp_path_factory.mktemp("report")
    (root / "fenwick.toml").write_text(PACK)
    old = os.getcwd()
    os.chdir(root)
    try:
        assert main(["check", "fenwick.toml", "--report", "evidence"]) == 1
    finally:
        os.chdir(old)
    return root


def _manifest(root: Path) -> dict:
    return json.loads((root / "evidence" / "manifest.json").read_text())


def test_manifest_lists_packs_rules_assumptions(site):
    m = _manifest(site)
    assert m["format"] == "verifier-report/1" and m["caution"] == CAUTION
    (pack,) = m["packs"]
    import hashlib
    assert pack["sha256"] == hashlib.sha256((site / "fenwick.toml").read_bytes()).hexdigest()
    assert [r["id"] for r in pack["rules"]] == RULES
    verdicts = {r["id"]: r["verdict"] for r in pack["rules"]}
    assert verdicts == {"orientation-known": "holds", "side-is-nominal": "violated",
                        "cab-flips": "violated", "impossible": "vacuous"}
    for r in pack["rules"]:
        assert r["solver"].startswith("z3 ") and r["rlimit_budget"] > 0 and r["rlimit_used"] > 0
        assert "seconds" not in r                       # timings live in timings.json
    cab = next(r for r in pack["rules"] if r["id"] == "cab-flips")
    assert cab["implicit_premise"] == "legs.count >= 1"
    # the scope actually used, with the pack's narrowing and the default error bounds
    world = pack["assumptions"]["world"]
    assert world["train_length"] == ["20", "400"]
    assert world["odometry_over"] == {"fixed": "5", "rate": "0.05"}   # DESIGN 4.1 defaults
    assert pack["assumptions"]["onboard"]["l_doubtover"]["source"] == "default"
    # the counterexamples are copied with their hashes and diagrams
    for rid in VIOLATED:
        c = next(r for r in pack["rules"] if r["id"] == rid)["counterexample"]
        data = (site / "evidence" / c["file"]).read_bytes()
        assert hashlib.sha256(data).hexdigest() == c["sha256"]
        assert data == (site / "counterexamples" / "fenwick" / f"{rid}.json").read_bytes()
        assert (site / "evidence" / c["diagram"]).read_text().startswith("<svg")
    timings = json.loads((site / "evidence" / "timings.json").read_text())
    assert [t["rule"] for t in timings["rules"]] == RULES


def test_traceability_table(site):
    trace = {row["clause"]: row["rules"] for row in _manifest(site)["traceability"]}
    assert [x["rule"] for x in trace["SUBSET-026 3.4.2.2.2"]] == ["orientation-known", "side-is-nominal"]
    assert [x["verdict"] for x in trace["SUBSET-026 3.4.2.2.2"]] == ["holds", "violated"]
    assert [x["rule"] for x in trace["(no clause cited)"]] == ["cab-flips", "impossible"]
    assert list(trace)[-1] == "(no clause cited)"


def test_rerun_gives_the_same_manifest_but_the_timestamp(site, monkeypatch):
    monkeypatch.chdir(site)
    before = _manifest(site)
    assert main(["check", "fenwick.toml", "--report", "evidence"]) == 1
    after = _manifest(site)
    assert before.pop("generated") and after.pop("generated")
    assert before == after


def test_foreign_directory_is_not_overwritten(site, monkeypatch, capsys):
    monkeypatch.chdir(site)
    mine = site / "mine"
    mine.mkdir()
    (mine / "notes.txt").write_text("keep me")
    assert main(["check", "fenwick.toml", "--report", "mine", "--no-files"]) == 2
    assert "not a verifier report" in capsys.readouterr().err
    assert [p.name for p in mine.iterdir()] == ["notes.txt"]
    assert (mine / "notes.txt").read_text() == "keep me"


def test_page_is_self_contained(site):
    html = (site / "evidence" / "index.html").read_text()
    # nothing the browser would fetch from a network: no remote src/href, no @import, no url(http
    assert not re.search(r'(src|href)\s*=\s*"(https?:)?//', html)
    assert "@import" not in html and "url(http" not in html
    assert "<script" not in html
    assert CAUTION in html
    for rid in RULES:
        assert f'data-rule="{rid}"' in html


# ---- a real browser ------------------------------------------------------------------------

class _CDP:
    """The Chrome DevTools Protocol over --remote-debugging-pipe (fd 3 in, fd 4 out)."""

    def __init__(self, user_dir: str):
        to_r, self.to_w = os.pipe()
        self.from_r, from_w = os.pipe()

        def fds():
            for src, dst in ((to_r, 3), (from_w, 4)):
                if src == dst:      # a pipe's own fds are close-on-exec; dup2 onto itself keeps that
                    os.set_inheritable(dst, True)
                else:
                    os.dup2(src, dst)
        self.proc = subprocess.Popen(
            [CHROMIUM, "--headless", "--no-sandbox", "--disable-gpu", "--disable-quic",
             "--no-first-run", "--disable-background-networking", "--disable-component-update",
             "--disable-sync", f"--user-data-dir={user_dir}", "--remote-debugging-pipe",
             "--hide-scrollbars", "about:blank"],
            preexec_fn=fds, close_fds=False, stdin=subprocess.DEVNULL,
            stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
        os.close(to_r)
        os.close(from_w)
        self.buf = b""
        self.n = 0
        self.events: list = []

    def send(self, method, params=None, session=None, timeout=30.0):
        self.n += 1
        msg = {"id": self.n, "method": method, "params": params or {}}
        if session:
            msg["sessionId"] = session
        os.write(self.to_w, json.dumps(msg).encode() + b"\0")
        want = self.n
        deadline = time.monotonic() + timeout
        while True:
            for m in self._read(deadline):
                if m.get("id") == want:
                    if "error" in m:
                        raise RuntimeError(f"{method}: {m['error']}")
                    return m["result"]
                self.events.append(m)

    def wait_event(self, method, timeout=30.0):
        deadline = time.monotonic() + timeout
        while True:
            for i, e in enumerate(self.events):
                if e.get("method") == method:
                    return self.events.pop(i)
            self.events.extend(self._read(deadline))

    def _read(self, deadline):
        left = deadline - time.monotonic()
        if left <= 0:
            raise TimeoutError("no answer from Chromium")
        r, _, _ = select.select([self.from_r], [], [], left)
        if r:
            chunk = os.read(self.from_r, 1 << 20)
            if not chunk:
                raise RuntimeError("Chromium closed the pipe")
            self.buf += chunk
        out = []
        while b"\0" in self.buf:
            raw, self.buf = self.buf.split(b"\0", 1)
            out.append(json.loads(raw))
        return out

    def close(self):
        try:
            os.write(self.to_w, json.dumps({"id": 0, "method": "Browser.close"}).encode() + b"\0")
            self.proc.wait(timeout=10)
        except Exception:  # noqa: BLE001
            self.proc.kill()
            self.proc.wait()
        os.close(self.to_w)
        os.close(self.from_r)


def _artifacts() -> Path:
    d = Path(os.environ.get("VERIFIER_TEST_ARTIFACTS", ROOT / "test-artifacts"))
    d.mkdir(parents=True, exist_ok=True)
    return d


needs_chromium = pytest.mark.skipif(
    not Path(CHROMIUM).exists() and os.environ.get("VERIFIER_REQUIRE_CHROMIUM") != "1",
    reason="Debian package chromium is not installed")

PROBE = """JSON.stringify({
    rows: [...document.querySelectorAll('tr.rule')].map(r => r.dataset.rule),
    diagrams: [...document.querySelectorAll('section.cex svg.cex-diagram')].map(s => s.id),
    drawn: [...document.querySelectorAll('svg.cex-diagram')].map(s => s.getBBox().width > 500),
    clauses: document.querySelectorAll('#trace-table tr.clause').length})"""


def _open(page: Path, screenshot: Path | None = None) -> tuple[dict, list]:
    """Load a page in headless Chromium; return what PROBE finds and every console error,
    uncaught exception, error log entry or non-local request."""
    user_dir = tempfile.mkdtemp(prefix="verifier-chromium-")
    cdp = _CDP(user_dir)
    try:
        target = cdp.send("Target.createTarget", {"url": "about:blank"})["targetId"]
        session = cdp.send("Target.attachToTarget", {"targetId": target, "flatten": True})["sessionId"]
        for domain in ("Page", "Runtime", "Log", "Network"):
            cdp.send(f"{domain}.enable", session=session)
        cdp.send("Emulation.setDeviceMetricsOverride",
                 {"width": 1200, "height": 900, "deviceScaleFactor": 1, "mobile": False}, session=session)
        cdp.send("Page.navigate", {"url": page.resolve().as_uri()}, session=session)
        cdp.wait_event("Page.loadEventFired")
        got = json.loads(cdp.send("Runtime.evaluate", {"returnByValue": True, "expression": PROBE},
                                  session=session)["result"]["value"])
        if screenshot is not None:
            size = cdp.send("Page.getLayoutMetrics", session=session)["cssContentSize"]
            shot = cdp.send("Page.captureScreenshot", {
                "format": "png", "captureBeyondViewport": True,
                "clip": {"x": 0, "y": 0, "width": size["width"], "height": size["height"], "scale": 1}},
                session=session)
            screenshot.write_bytes(base64.b64decode(shot["data"]))
        cdp.send("Runtime.evaluate", {"expression": "1"}, session=session)  # flush pending events
    finally:
        cdp.close()
        shutil.rmtree(user_dir, ignore_errors=True)
    problems = []
    for e in cdp.events:
        method, p = e.get("method"), e.get("params", {})
        if method == "Runtime.consoleAPICalled" and p.get("type") in ("error", "assert", "warning"):
            problems.append(("console", p.get("args")))
        elif method == "Runtime.exceptionThrown":
            problems.append(("exception", p["exceptionDetails"].get("text")))
        elif method == "Log.entryAdded" and p["entry"]["level"] in ("error", "warning"):
            problems.append(("log", p["entry"].get("text")))
        elif method == "Network.requestWillBeSent" and not p["request"]["url"].startswith(("file:", "data:")):
            problems.append(("network", p["request"]["url"]))
    return got, problems


@needs_chromium
def test_page_renders_in_chromium(site):
    shot = _artifacts() / "report.png"
    got, problems = _open(site / "evidence" / "index.html", shot)
    assert problems == []
    assert got["rows"] == RULES
    assert got["diagrams"] == [f"d-fenwick-{rid}" for rid in VIOLATED]
    assert all(got["drawn"]) and len(got["drawn"]) == len(VIOLATED)
    assert got["clauses"] == len(_manifest(site)["traceability"]) == 3
    assert shot.stat().st_size > 10_000


@needs_chromium
def test_the_browser_check_sees_errors(tmp_path):
    """The harness above is not blind: a page with a console error, an exception and a remote
    image is reported on all three counts."""
    bad = tmp_path / "bad.html"
    bad.write_text('<!DOCTYPE html><html><head><link rel="icon" href="data:,"></head><body>'
                   '<img src="http://127.0.0.1:9/x.png"><script>console.error("boom");'
                   "throw new Error('bang')</script></body></html>")
    _, problems = _open(bad)
    kinds = {k for k, _ in problems}
    assert {"console", "exception", "network"} <= kinds

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
    note = "Checked against the Fenwick Yard survey."

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

# Measured in the page at 1,280 px: the width of the document (no horizontal scrolling when it
# is at most the viewport's), every inline SVG's box as laid out, and every "#..." link whose
# target id is missing.
PROBE = """JSON.stringify({
    rows: [...document.querySelectorAll('tr.rule')].map(r => r.dataset.rule),
    sections: [...document.querySelectorAll('section.rule')].map(r => r.dataset.rule),
    diagrams: [...document.querySelectorAll('section.cex svg.cex-diagram')].map(s => s.id),
    drawn: [...document.querySelectorAll('svg.cex-diagram')].map(s => s.getBBox().width > 500),
    clauses: document.querySelectorAll('#trace-table tr.clause').length,
    width: document.documentElement.scrollWidth,
    viewport: document.documentElement.clientWidth,
    svgs: [...document.querySelectorAll('svg')].map(s => {
        const b = s.getBoundingClientRect();
        return [s.id, Math.round(b.width), Math.round(b.height)]; }),
    links: [...document.querySelectorAll('a[href^="#"]')].map(a => a.getAttribute('href')),
    broken: [...document.querySelectorAll('a[href^="#"]')].map(a => a.getAttribute('href'))
        .filter(h => !document.getElementById(decodeURIComponent(h.slice(1))))})"""


# The same page under the print style sheet: where each rule's section breaks the page.
PRINT_PROBE = """JSON.stringify({
    breaks: [...document.querySelectorAll('section.rule')].map(s => getComputedStyle(s).breakBefore),
    source_shown: [...document.querySelectorAll('details')].some(d => d.offsetHeight > 0)})"""


def _open(page: Path, screenshot: Path | None = None, pdf: Path | None = None,
          width: int = 1280) -> tuple[dict, list]:
    """Load a page in headless Chromium at ``width`` px; return what PROBE finds and every
    console error, uncaught exception, error log entry or non-local request (and print the page
    to ``pdf`` as the browser's print does, with the print style sheet)."""
    user_dir = tempfile.mkdtemp(prefix="verifier-chromium-")
    cdp = _CDP(user_dir)
    try:
        target = cdp.send("Target.createTarget", {"url": "about:blank"})["targetId"]
        session = cdp.send("Target.attachToTarget", {"targetId": target, "flatten": True})["sessionId"]
        for domain in ("Page", "Runtime", "Log", "Network"):
            cdp.send(f"{domain}.enable", session=session)
        cdp.send("Emulation.setDeviceMetricsOverride",
                 {"width": width, "height": 900, "deviceScaleFactor": 1, "mobile": False}, session=session)
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
        cdp.send("Emulation.setEmulatedMedia", {"media": "print"}, session=session)
        got["print"] = json.loads(cdp.send("Runtime.evaluate", {"returnByValue": True, "expression": PRINT_PROBE},
                                           session=session)["result"]["value"])
        if pdf is not None:
            printed = cdp.send("Page.printToPDF", {"printBackground": True}, session=session, timeout=120)
            pdf.write_bytes(base64.b64decode(printed["data"]))
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


def _pdf_pages(data: bytes) -> int:
    """The number of page objects of a PDF (Chromium writes each as ``/Type /Page``)."""
    return len(re.findall(rb"/Type\s*/Page(?![a-zA-Z])", data))


@needs_chromium
def test_page_renders_in_chromium(site):
    shot = _artifacts() / "report.png"
    pdf = _artifacts() / "report.pdf"
    got, problems = _open(site / "evidence" / "index.html", shot, pdf)
    assert problems == []
    assert got["rows"] == got["sections"] == RULES
    assert got["diagrams"] == [f"d-fenwick-{rid}" for rid in VIOLATED]
    assert all(got["drawn"]) and len(got["drawn"]) == len(VIOLATED)
    assert got["clauses"] == len(_manifest(site)["traceability"]) == 3
    assert shot.stat().st_size > 10_000
    # no horizontal scrolling at 1,280 px, measured in the page
    assert got["viewport"] == 1280 and got["width"] <= 1280
    # every inline SVG is laid out with a box (the two diagrams, nothing else drawn)
    assert [s[0] for s in got["svgs"]] == [f"d-fenwick-{rid}" for rid in VIOLATED]
    assert all(w > 300 and h > 100 for _, w, h in got["svgs"])
    # every internal link has its target: each verdict row and each traceability entry (one
    # per clause a rule cites; side-is-nominal cites two) names its rule's section
    assert got["broken"] == [] and len(got["links"]) > 2 * len(RULES)
    cites = {"orientation-known": 1, "side-is-nominal": 2, "cab-flips": 1, "impossible": 1}
    for rid in RULES:
        assert got["links"].count(f"#rule-fenwick/{rid}") == 1 + cites[rid]
    # printed: the first screen, then each rule's section from a new page (the pack sources,
    # folded away on screen, are left out)
    assert got["print"] == {"breaks": ["page"] * len(RULES), "source_shown": False}
    data = pdf.read_bytes()
    assert data.startswith(b"%PDF") and _pdf_pages(data) >= 1 + len(RULES)


@needs_chromium
def test_a_wide_page_overflows_where_the_report_does_not(site, tmp_path):
    """The width measured is the page's: the same report with a table forced wider than the
    window is measured as overflowing, and the report at 1,280 px as not; a narrower window
    (1,000 px) still shows no horizontal scrolling."""
    html = (site / "evidence" / "index.html").read_text()
    wide = site / "evidence" / "wide.html"
    wide.write_text(html.replace("</style>", "#rule-table{min-width:1500px}</style>"))
    try:
        got, _ = _open(wide)
    finally:
        wide.unlink()
    assert got["width"] > 1400
    narrow, problems = _open(site / "evidence" / "index.html", width=1000)
    assert problems == [] and narrow["width"] <= 1000


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


@needs_chromium
def test_the_browser_check_sees_broken_links_and_undrawn_diagrams(tmp_path):
    """A link to a missing id is reported, and an SVG that is not laid out has an empty box."""
    bad = tmp_path / "links.html"
    bad.write_text('<!DOCTYPE html><html><head><link rel="icon" href="data:,"></head><body>'
                   '<p id="here">x</p><a href="#here">ok</a><a href="#nowhere">broken</a>'
                   '<svg id="shown" width="40" height="20"></svg>'
                   '<div style="display:none"><svg id="hidden" width="40" height="20"></svg></div>'
                   "</body></html>")
    got, problems = _open(bad)
    assert problems == []
    assert got["broken"] == ["#nowhere"]
    assert got["svgs"] == [["shown", 40, 20], ["hidden", 0, 0]]


# ---- the layout, without a browser ---------------------------------------------------------

def _section(html: str, rid: str) -> str:
    """The section of rule ``rid`` of the page (it ends with a line of its own)."""
    return re.search(rf'<section class="rule [^"]*" id="rule-fenwick/{rid}".*?\n</section>', html, re.S).group()


def test_the_first_screen_says_what_holds_under_what(site):
    html = (site / "evidence" / "index.html").read_text()
    # the caution, the overall counts and each pack's line come before the verdict table
    caution, overall = html.index(f"{CAUTION}"), html.index('id="overall"')
    pack_line, table = html.index('id="pack-summary"'), html.index('id="rule-table"')
    assert caution < overall < pack_line < table
    assert "4 rules: 1 holds, 2 violated, 1 vacuous." in html[overall:pack_line]
    row = re.search(r'<tr class="pack" data-pack="fenwick">.*?</tr>', html, re.S).group()
    # the pack's counts, its bound and the world it was checked in (train_length narrowed
    # to 20..400 m by the pack, the default odometry bound of DESIGN 4.1: 5 m + 5 %)
    assert "4 rules: 1 holds, 2 violated, 1 vacuous" in row
    assert "up to 1 leg; 1 group" in row and "train 20..400 m" in row and "over-reading 5 m + 5 %" in row
    assert "onboard: the default design" in row


def test_the_verdict_table_is_compact_and_each_row_links_to_its_section(site):
    html = (site / "evidence" / "index.html").read_text()
    table = html[html.index('<table id="rule-table">'):]
    table = table[:table.index("</table>")]
    assert re.findall(r"<th>([^<]*)</th>", table) == ["Rule", "Verdict", "Proof and bound", "Time"]
    for rid in RULES:
        row = re.search(rf'<tr class="rule [^"]*"[^>]*data-rule="{rid}".*?</tr>', table, re.S).group()
        assert f'href="#rule-fenwick/{rid}"' in row and "up to 1 leg" in row
        assert "<pre" not in row and "expect" not in row      # rule text is in the section
        assert re.search(r"\d\.\d{3} s", row)


def test_each_rule_has_a_section_with_its_text_proof_and_evidence(site):
    html = (site / "evidence" / "index.html").read_text()
    known = _section(html, "orientation-known")
    assert "<h3>With two balises read the orientation is known</h3>" in known
    assert '<pre class="given">lrbg.read &gt;= 2</pre>' in known
    assert '<pre class="expect">est.orientation != unknown</pre>' in known
    assert "SUBSET-026 3.4.2.2.2" in known and "Checked against the Fenwick Yard survey." in known
    assert "proved for</dt><dd>up to 1 leg" in known and "<svg" not in known
    cab = _section(html, "cab-flips")
    assert '<pre class="premise">legs.count &gt;= 1</pre>' in cab and "cites no clause" in cab
    for rid in VIOLATED:
        sec = _section(html, rid)
        # the failure detail, the diagram inline, its story and the links to the files
        assert '<pre class="detail">' in sec and "is false" in sec
        assert sec.count('<svg xmlns="http://www.w3.org/2000/svg" class="cex-diagram"') == 1
        assert '<pre class="story">' in sec
        for ext in ("json", "svg"):
            name = f"counterexamples/fenwick/{rid}.{ext}"
            assert f'href="{name}"' in sec and (site / "evidence" / name).is_file()
    impossible = _section(html, "impossible")
    assert "why vacuous" in impossible and "impossible within the scope" in impossible


def test_traceability_lists_the_rules_citing_nothing_and_links_them(site):
    html = (site / "evidence" / "index.html").read_text()
    row = re.search(r'<tr class="clause no-clause">.*?</tr>', html, re.S).group()
    assert re.findall(r'href="#([^"]+)"', row) == ["rule-fenwick/cab-flips", "rule-fenwick/impossible"]
    for target in re.findall(r'href="#([^"]+)"', html):
        assert f'id="{target}"' in html


def test_a_report_from_the_cache_shows_the_time_of_the_original_solve(site, monkeypatch):
    monkeypatch.chdir(site)
    cold = json.loads((site / "evidence" / "timings.json").read_text())
    if any(t["cached"] for t in cold["rules"]):     # the rerun test before filled the cache
        assert main(["check", "fenwick.toml", "--report", "evidence-cold", "--no-cache"]) == 1
        cold = json.loads((site / "evidence-cold" / "timings.json").read_text())
    assert not any(t["cached"] or "original_seconds" in t for t in cold["rules"])
    assert "from the cache" not in (site / "evidence-cold" / "index.html").read_text() \
        if (site / "evidence-cold").exists() else True
    assert main(["check", "fenwick.toml", "--report", "evidence-warm"]) == 1
    warm = json.loads((site / "evidence-warm" / "timings.json").read_text())
    assert all(t["cached"] for t in warm["rules"])
    # the original solve took more than the replay, and the totals add up
    assert all(t["original_seconds"] > t["seconds"] for t in warm["rules"])
    assert abs(warm["original_total_seconds"] - sum(t["original_seconds"] for t in warm["rules"])) < 0.01
    html = (site / "evidence-warm" / "index.html").read_text()
    time_line = re.search(r'<p id="time">.*?</p>', html, re.S).group()
    assert "4 of them came from the cache" in time_line
    assert f"{warm['original_total_seconds']:.3f} s when they were first solved" in time_line
    for t in warm["rules"]:
        assert f"from the cache; solved in {t['original_seconds']:.3f} s" in _section(html, t["rule"])


def test_user_text_is_escaped_control_characters_too(tmp_path, monkeypatch):
    """A rule title and refs with markup, in a pack file whose name holds markup and a control
    character, and a second pack whose title holds a bell (an input error, listed on the
    page): all shown as text, never as markup or raw control characters."""
    monkeypatch.chdir(tmp_path)
    name = "odd\x01<i>name.toml"
    (tmp_path / name).write_text(
        '[pack]\nname = "odd"\ntitle = "Odd <b>pack</b>"\nlegs = 1\n\n[[rule]]\nid = "a"\n'
        'title = "<img src=x onerror=alert(1)> bell"\nnote = "a <u>note</u>"\n'
        'expect = "true"\nrefs = ["<script>clause</script>"]\n')
    (tmp_path / "bad\x1b[31m.toml").write_text(
        '[pack]\nname = "bad"\ntitle = "t"\nlegs = 1\n\n[[rule]]\nid = "b"\ntitle = "\\u0007"\nexpect = "true"\n')
    assert main(["check", ".", "--report", "rep", "--no-files"]) == 2
    html = (tmp_path / "rep" / "index.html").read_text()
    for markup in ("<img", "<script", "<b>pack", "<i>name", "<u>note"):
        assert markup not in html
    assert "&lt;img src=x onerror=alert(1)&gt; bell" in html and "a &lt;u&gt;note&lt;/u&gt;" in html
    assert "odd\\x01&lt;i&gt;name.toml" in html and "&lt;script&gt;clause&lt;/script&gt;" in html
    errors = html[html.index('id="input-errors"'):]
    assert "bad\\x1b[31m.toml" in errors and "U+0007" in errors
    assert not re.search("[\x00-\x08\x0b\x0c\x0e-\x1f\x7f]", html)

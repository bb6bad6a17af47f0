"""The evidence report of ``verifier check --report DIR``: a self-contained HTML page (no
network fetches: styles inline, diagrams inline SVG), a manifest and the counterexamples.

Files in DIR:

- ``manifest.json``: canonical JSON (sorted keys, indent 2). Everything in it is a function of
  the packs, the options and the tool versions, except the one field ``generated`` (UTC time of
  the run; ``SOURCE_DATE_EPOCH`` fixes it), so a re-run on an unchanged pack gives the same
  manifest but for that field. Timings are not in it.
- ``timings.json``: seconds per rule (they vary from run to run); for a verdict whose solver
  answers came from the cache, ``original_seconds``: what it took when they were solved.
- ``index.html``: the page; it shows the timings too. It is laid out for reading and printing:
  a first screen that says what holds under what (per pack its counts and scope, the overall
  counts, the caution), a compact verdict table, one section per rule (its text, verdict and
  proof, failure detail, counterexample or counterexample to induction drawn inline with its
  story, links to the files), the traceability of clauses to rules, the assumptions, the packs.
  Its print style sheet starts each rule's section on a new page.
- ``counterexamples/<pack>/<rule>.json`` and ``.svg``: copies of the counterexample files and
  their diagrams, each checked by re-simulation (verifier show) before it is copied; likewise
  ``<rule>.induction.json`` and ``.induction.svg`` for counterexamples to induction.

- ``.verifier-report``: a marker, written first, so that a second run writing the same
  report at the same time knows the folder is a report before its manifest exists.

A directory that exists, is not empty and has neither a manifest of ours nor the marker is
never written into. Each file is written atomically (a temporary file beside it, then a
rename); a counterexample and its diagram are written both or neither.
"""

from __future__ import annotations

import datetime as _dt
import hashlib
import json
import os
import platform
import re
from html import escape
from pathlib import Path

from verifier.about import CAUTION, __version__
from verifier.errors import UsageError, VerifierError, visible
from verifier.evidence import cexfile, ctistory, diagram, story
from verifier.run import coverage
from verifier.run.engine import proof_detail, proof_words
from verifier.smt.solve import DEFAULT_RLIMIT, DEFAULT_TIMEOUT, SOLVER
from verifier.world.scenario import fmt

FORMAT = "verifier-report/1"
VERDICT_MARK = {"holds": "PASS", "violated": "FAIL", "vacuous": "FAIL", "bounded": "OPEN",
                "unknown": "OPEN", "error": "ERROR"}


def _sha(data: bytes) -> str:
    return hashlib.sha256(data).hexdigest()


def _generated() -> str:
    epoch = os.environ.get("SOURCE_DATE_EPOCH")
    if epoch and epoch.isdigit():
        t = _dt.datetime.fromtimestamp(int(epoch), _dt.timezone.utc)
    else:
        t = _dt.datetime.now(_dt.timezone.utc)
    return t.replace(microsecond=0).isoformat().replace("+00:00", "Z")


_FILE_REF = {"type": ["object", "null"],
             "properties": {"file": {"type": ["string", "null"]}, "diagram": {"type": ["string", "null"]}}}
# What a manifest must look like before this module reads it again (ensure_ours, prepare_dir):
# the part of the format that is read back, as a JSON Schema (draft 4 subset: type, required,
# properties, items). Every manifest ``build`` writes satisfies it (tests/test_input_edges.py
# checks that with the jsonschema library).
MANIFEST_SCHEMA = {
    "type": "object",
    "required": ["format", "packs"],
    "properties": {
        "format": {"type": "string"},
        "packs": {"type": "array", "items": {
            "type": "object", "required": ["rules"],
            "properties": {"name": {"type": "string"}, "rules": {"type": "array", "items": {
                "type": "object",
                "properties": {"id": {"type": "string"}, "counterexample": _FILE_REF,
                               "counterexample_to_induction": _FILE_REF}}}}}},
        "files": {"type": "object"},
    },
}
_JSON_TYPES = {"object": dict, "array": list, "string": str, "null": type(None)}


def manifest_problem(doc, schema=MANIFEST_SCHEMA, where: str = "manifest") -> str | None:
    """The first way ``doc`` departs from ``schema`` (the subset above), or None."""
    kinds = schema.get("type")
    if kinds is not None:
        kinds = [kinds] if isinstance(kinds, str) else kinds
        if not any(isinstance(doc, _JSON_TYPES[k]) for k in kinds):
            return f"{where} must be {' or '.join(kinds)}, not {type(doc).__name__}"
    if isinstance(doc, dict):
        for k in schema.get("required", ()):
            if k not in doc:
                return f"{where} has no '{k}'"
        for k, sub in schema.get("properties", {}).items():
            if k in doc:
                problem = manifest_problem(doc[k], sub, f"{where}.{k}")
                if problem:
                    return problem
    if isinstance(doc, list) and "items" in schema:
        for i, x in enumerate(doc):
            problem = manifest_problem(x, schema["items"], f"{where}[{i}]")
            if problem:
                return problem
    return None


MARKER = ".verifier-report"
_TEMPORARY = re.compile(r"^\..+\.tmp$")     # cexfile.write_files' temporary files


def _has_marker(out: Path) -> bool:
    try:
        return (out / MARKER).read_text(encoding="utf-8").strip() == FORMAT
    except (OSError, UnicodeDecodeError):
        return False


def ensure_ours(out: Path) -> None:
    """Refuse (UsageError, exit 2) a path that exists and is not an empty directory or a report
    of ours. Called before any rule is checked, and again before writing. A report that
    another run is writing at this moment is ours: it has the marker (written first, before
    any manifest), and a folder holding only temporary files of ours counts as empty."""
    out = Path(out)
    if out.exists() and not out.is_dir():
        raise UsageError(f"report directory {out.as_posix()} exists and is not a directory; not overwritten")
    if (out.is_dir() and any(not _TEMPORARY.match(p.name) for p in out.iterdir())
            and not (_has_marker(out) and not (out / "manifest.json").exists())):
        _read_manifest(out)


def _read_manifest(out: Path) -> dict:
    """The manifest of the report in ``out``, checked against MANIFEST_SCHEMA; a UsageError if
    it is missing, not ours or malformed (then nothing in ``out`` is touched)."""
    manifest = out / "manifest.json"
    ours, problem, doc = False, None, None
    try:
        if manifest.is_file() and manifest.stat().st_size <= 64 * 1024 * 1024:
            doc = json.loads(manifest.read_text(encoding="utf-8"))
            ours = isinstance(doc, dict) and str(doc.get("format", "")).startswith("verifier-report/")
            problem = manifest_problem(doc) if ours else None
    except (OSError, ValueError, RecursionError):
        ours = False
    if not ours:
        raise UsageError(f"report directory {out.as_posix()} exists and is not a verifier report "
                         "(it has no manifest.json of ours); not overwritten: choose a new or "
                         "empty directory")
    if problem:
        raise UsageError(f"report directory {out.as_posix()}: its manifest.json is malformed "
                         f"({problem}); not overwritten: repair or remove it, or choose a new or "
                         "empty directory")
    return doc


def prepare_dir(out: Path) -> None:
    """Refuse a directory that is not ours; clear the files we wrote last time."""
    ensure_ours(out)
    old = out / "manifest.json"
    if old.is_file():
        # remove exactly the files the last report listed, nothing else
        doc = _read_manifest(out)
        names = ["index.html", "timings.json"]
        for p in doc.get("packs", []):
            for r in p.get("rules", []):
                for c in (r.get("counterexample") or {}, r.get("counterexample_to_induction") or {}):
                    names += [c.get("file"), c.get("diagram")]
        root = out.resolve()
        for name in names:
            if not isinstance(name, str):
                continue
            target = (out / name).resolve()
            if root in target.parents and target.is_file():
                target.unlink()
    out.mkdir(parents=True, exist_ok=True)
    cexfile.write_atomic(out / MARKER, FORMAT + "\n", root=out)


def _natural(text: str):
    return [(0, int(t), "") if t.isdigit() else (1, 0, t) for t in re.split(r"(\d+)", text)]


def traceability(packs, results) -> list:
    """Each cited clause, the rules citing it and their verdicts (sorted)."""
    verdicts = {(p.name, r.rule): r.verdict for p in results for r in p.results}
    table: dict = {}
    for pack in packs:
        for rule in pack.rules + pack.lemmas:
            if (pack.name, rule.id) not in verdicts:
                continue
            for ref in rule.refs or ("(no clause cited)",):
                clause = " ".join(str(ref).split())
                table.setdefault(clause, []).append(
                    {"pack": pack.name, "rule": rule.id, "verdict": verdicts[(pack.name, rule.id)]})
    return [{"clause": c, "rules": sorted(rs, key=lambda x: (x["pack"], x["rule"]))}
            for c, rs in sorted(table.items(), key=lambda kv: (kv[0] == "(no clause cited)", _natural(kv[0])))]


def _assumptions(pack) -> dict:
    def formulas(d):
        return {k: {"text": f.text, "source": "default" if f.default else "pack"} for k, f in sorted(d.items())}
    return {"world": pack.scope.as_json(), "q_scale": pack.q_scale, "rounding": pack.rounding,
            "legs": "any" if pack.unbounded else pack.legs,
            "params": {k: fmt(v[1]) for k, v in sorted(pack.params.items())},
            "onboard": formulas(pack.onboard), "trackside": formulas(pack.trackside)}


def build(packs, results, diags, opts, *, explained: dict, margins: dict | None = None) -> tuple[dict, dict]:
    """The manifest and the timings (plain data)."""
    by_pack = {p.name: p for p in packs}
    budget = opts.rlimit if opts.rlimit is not None else DEFAULT_RLIMIT
    counts = dict.fromkeys(VERDICT_MARK, 0)
    out_packs, timings = [], []
    for pr in results:
        pack = by_pack[pr.name]
        rules = []
        for r in pr.results:
            counts[r.verdict] += 1
            rule = pack.rule(r.rule)
            cex = cti = None
            if r.counterexample and (pr.name, r.rule) in explained:
                e = explained[(pr.name, r.rule)]
                cex = {"file": e["file"], "sha256": e["sha256"], "diagram": e["diagram"],
                       "diagram_sha256": e["diagram_sha256"], "checked_values": e["checked"]}
            if r.induction and (pr.name, r.rule, "induction") in explained:
                e = explained[(pr.name, r.rule, "induction")]
                cti = {"file": e["file"], "sha256": e["sha256"], "diagram": e["diagram"],
                       "diagram_sha256": e["diagram_sha256"], "checked_values": e["checked"]}
            rules.append({
                "id": r.rule, "title": r.title, "line": r.line,
                "given": rule.given.text if rule.given else None,
                "implicit_premise": r.premise, "expect": rule.expect.text,
                "refs": list(rule.refs), "note": rule.note or None, "bound": r.bound, "verdict": r.verdict,
                "proved_for": proof_words(r), "proof_detail": proof_detail(r) or None,
                "error_kind": r.kind or None, "message": r.message, "minimal": r.minimal,
                "solver": r.solver or SOLVER, "rlimit_budget": budget, "rlimit_used": r.rlimit,
                "solver_checks": r.checks, "counterexample": cex, "witness": r.witness,
                "role": r.role, "proof": r.proof, "counterexample_to_induction": cti,
            })
            t = {"pack": pr.name, "rule": r.rule, "seconds": round(r.seconds, 3), "cached": r.cached}
            if r.original_seconds is not None:
                t["original_seconds"] = round(r.original_seconds, 3)
            timings.append(t)
        out_packs.append({"name": pack.name, "title": pack.title, "path": pack.path,
                          "sha256": pack.sha256, "assumptions": _assumptions(pack),
                          "scope": pr.scope, "rules": rules})
    manifest = {
        "format": FORMAT,
        "generated": _generated(),
        "caution": CAUTION,
        "tool": {"verifier": __version__, "python": platform.python_version(),
                 "python_implementation": platform.python_implementation(), "solver": SOLVER},
        "options": {"legs": opts.legs, "rules": list(opts.rules), "rlimit_per_check": budget,
                    "timeout_per_rule": opts.timeout if opts.timeout is not None else DEFAULT_TIMEOUT},
        "packs": out_packs,
        "input_errors": [d.as_json() for d in diags if d.severity == "error"],
        "summary": counts,
        "traceability": traceability(packs, results),
        "files": {"page": "index.html", "timings": "timings.json"},
    }
    if margins is not None:     # computed by the run stage (verifier margin), never here
        manifest["margins"] = margins
    total = round(sum(t["seconds"] for t in timings), 3)
    original = round(sum(t.get("original_seconds", t["seconds"]) for t in timings), 3)
    return manifest, {"format": FORMAT, "rules": timings, "total_seconds": total,
                      "original_total_seconds": original}


def write_report(out: Path, packs, results, diags, opts, margins: dict | None = None) -> Path:
    """Write the report into ``out``; return the page's path. ``margins``: pack name -> the
    margins of its rules as JSON (``verifier.run.margin``), shown in a section of their own."""
    out = Path(out)
    prepare_dir(out)
    by_pack = {p.name: p for p in packs}
    explained: dict = {}
    stories: dict = {}
    for pr in results:
        for r in pr.results:
            if r.induction:
                _copy_induction(out, by_pack[pr.name], pr.name, r, explained, stories)
            if not r.counterexample:
                continue
            src = Path(r.counterexample)
            try:
                e = story.explain_file(src, pack=by_pack[pr.name])
            except VerifierError as exc:
                stories[(pr.name, r.rule)] = ("error", str(exc), None)
                continue
            rel = Path("counterexamples") / pr.name / f"{r.rule}.json"
            data = src.read_bytes()
            svg = diagram.render(e.doc, e.rule, e.state)
            cexfile.write_files(out, [(out / rel, data.decode("utf-8")),
                                      (out / rel.with_suffix(".svg"), svg)])
            explained[(pr.name, r.rule)] = {
                "file": rel.as_posix(), "sha256": _sha(data), "diagram": rel.with_suffix(".svg").as_posix(),
                "diagram_sha256": _sha(svg.encode("utf-8")), "checked": e.checked}
            stories[(pr.name, r.rule)] = ("ok", e.text, svg)
    manifest, timings = build(packs, results, diags, opts, explained=explained, margins=margins)
    cexfile.write_atomic(out / "timings.json", cexfile.dumps(timings), root=out)
    page = render_html(manifest, timings, stories, packs)
    cexfile.write_atomic(out / "index.html", page, root=out)
    cexfile.write_atomic(out / "manifest.json", cexfile.dumps(manifest), root=out)
    return out / "index.html"


def _copy_induction(out: Path, pack, name: str, r, explained: dict, stories: dict) -> None:
    """Check a counterexample to induction by re-simulation, then copy it and its diagram."""
    key = (name, r.rule, "induction")
    src = Path(r.induction)
    try:
        e = ctistory.explain_file(src, pack=pack)
    except VerifierError as exc:
        stories[key] = ("error", str(exc), None)
        return
    rel = Path("counterexamples") / name / f"{r.rule}.induction.json"
    data = src.read_bytes()
    svg = diagram.render_induction(e.doc, e.rule, e.views)
    cexfile.write_files(out, [(out / rel, data.decode("utf-8")), (out / rel.with_suffix(".svg"), svg)])
    explained[key] = {"file": rel.as_posix(), "sha256": _sha(data),
                      "diagram": rel.with_suffix(".svg").as_posix(),
                      "diagram_sha256": _sha(svg.encode("utf-8")), "checked": e.checked}
    stories[key] = ("ok", e.text, svg)


def proof_cell(r: dict) -> str:
    """The kind of proof of a manifest rule, in the words of the table ("up to 2 legs", "any
    number of legs", "at 7 legs"), with why an any-number proof was not made."""
    p = r.get("proof") or {}
    out = r.get("proved_for") or ""
    if p.get("induction") and p.get("kind") != "induction":
        out += f"; not for any number ({p['induction']})"
    return out


# ---- the page --------------------------------------------------------------------------------

CSS = """
*{box-sizing:border-box}
html{-webkit-text-size-adjust:100%}
body{font-family:"DejaVu Sans",Verdana,Arial,sans-serif;font-size:14px;line-height:1.45;color:#1a1a1a;
 margin:0 auto;max-width:1180px;padding:16px 24px 48px;background:#fff;overflow-wrap:break-word}
h1{font-size:24px;margin:8px 0 4px}
h2{font-size:19px;margin:30px 0 8px;border-bottom:2px solid #1a1a1a;padding-bottom:2px}
h3{font-size:16px;margin:0 0 6px}h4{font-size:14px;margin:14px 0 4px}
a{color:#0b4f8a}
table{border-collapse:collapse;width:100%;margin:6px 0 12px}
th,td{border:1px solid #9a9a9a;padding:4px 6px;text-align:left;vertical-align:top;overflow-wrap:anywhere}
th{background:#ececec}thead{display:table-header-group}
code,pre{font-family:"DejaVu Sans Mono",Consolas,monospace;font-size:12.5px}
pre{background:#f6f6f6;border:1px solid #cfcfcf;padding:4px 10px;margin:0 0 6px;white-space:pre-wrap;
 overflow-wrap:anywhere}
.caution{border:3px double #1a1a1a;padding:10px 14px;background:#fffbe6;margin:12px 0}
.verdict{font-weight:bold;white-space:nowrap}
.v-holds{background:#e7f4ea}.v-violated,.v-vacuous{background:#fbe4e6}.v-unknown,.v-bounded{background:#fff3d6}
.v-error{background:#efe3f7}
.mark{display:inline-block;min-width:3.6em;border:1px solid #1a1a1a;padding:0 4px;margin-right:4px;
 text-align:center;font-size:11px;background:#fff;font-weight:bold}
.muted{color:#555}.small{font-size:12.5px}.num{text-align:right;white-space:nowrap}
.num div{white-space:normal}
table.packs td.counts{white-space:nowrap}
#rule-table{table-layout:fixed}
#rule-table col.c-rule{width:52%}#rule-table col.c-verdict{width:14%}#rule-table col.c-proof{width:22%}
#rule-table col.c-time{width:12%}
#rule-table tr.pack-row th{background:#dcdcdc;font-size:13.5px}
#rule-table .title{display:block}
section.rule{border:1px solid #9a9a9a;border-left-width:6px;padding:10px 14px 6px;margin:14px 0}
section.rule.v-holds{border-left-color:#2e7d32}section.rule.v-violated,section.rule.v-vacuous{border-left-color:#b71c1c}
section.rule.v-bounded,section.rule.v-unknown{border-left-color:#a86b00}section.rule.v-error{border-left-color:#6a1b9a}
section.rule,section.rule.v-holds,section.rule.v-violated,section.rule.v-vacuous,section.rule.v-bounded,
section.rule.v-unknown,section.rule.v-error{background:#fff}
.rule-head{display:flex;flex-wrap:wrap;gap:4px 12px;align-items:baseline}
.back{margin-left:auto;font-size:12.5px}
dl.kv{display:grid;grid-template-columns:max-content minmax(0,1fr);gap:2px 14px;margin:6px 0}
dl.kv dt{font-weight:bold}dl.kv dd{margin:0;min-width:0}
.diagram{border:1px solid #cfcfcf;margin:8px 0;max-width:100%}
.diagram svg{display:block;max-width:100%;height:auto}
details{margin:4px 0}
ul.cites{list-style:none;margin:0;padding:0}ul.cites li{margin:1px 0}
@media print{
 @page{size:A4;margin:14mm 12mm}
 body{max-width:none;padding:0;font-size:11pt}
 *{-webkit-print-color-adjust:exact;print-color-adjust:exact}
 a{color:inherit;text-decoration:none}
 h2{break-after:avoid}h3,h4{break-after:avoid}
 tr,.caution,dl.kv,pre,.diagram{break-inside:avoid}
 section.rule{break-before:page;border:none;padding:0;margin:0}
 .back,.no-print{display:none}
 details>pre{white-space:pre-wrap}
}
"""

_SURROGATE = re.compile("[\ud800-\udfff]")


def _e(x) -> str:
    """Text for the page: escaped, control characters and stray surrogates (a file name read
    from bytes that are not UTF-8) written as visible escapes."""
    text = "" if x is None else str(x)
    text = _SURROGATE.sub(lambda m: f"\\u{ord(m.group()):04x}", visible(text, keep="\n\t"))
    return escape(text)


def _plural(n: int, word: str) -> str:
    return f"{n} {word}{'' if n == 1 else 's'}"


def _anchors(manifest: dict) -> dict:
    """A unique element id for each rule's section, keyed by (pack index, rule id); two packs
    may share a name."""
    out, seen = {}, set()
    for i, p in enumerate(manifest["packs"]):
        for r in p["rules"]:
            base = f"rule-{p['name']}/{r['id']}"
            anchor, n = base, 1
            while anchor in seen:
                n += 1
                anchor = f"{base}~{n}"
            seen.add(anchor)
            out[(i, r["id"])] = anchor
    return out


def _counts(rules, verdicts=VERDICT_MARK) -> str:
    n = {v: 0 for v in verdicts}
    for r in rules:
        n[r["verdict"]] += 1
    return ", ".join(f"{c} {v}" for v, c in n.items() if c) or "none checked"


def _pack_counts(rules) -> str:
    own = [r for r in rules if r["role"] != "lemma"]
    lemmas = [r for r in rules if r["role"] == "lemma"]
    out = f"{_plural(len(own), 'rule')}: {_counts(own)}"
    if lemmas:
        out += f"; {_plural(len(lemmas), 'lemma')}: {_counts(lemmas)}"
    return out


def _time(t: dict | None, inline: bool = False) -> str:
    """A rule's time cell: this run's seconds, and where the answers came from the cache the
    seconds of the original solve."""
    if t is None:
        return ""
    out = f'{t["seconds"]:.3f} s'
    if "original_seconds" in t:
        how = "from the cache" if t.get("cached") else "partly from the cache"
        tag = "span" if inline else "div"
        out += (f'{"; " if inline else ""}<{tag} class="muted small">{how}; solved in '
                f'{t["original_seconds"]:.3f} s</{tag}>')
    return out


def _evidence(a, kind: str, r: dict, story, c: dict | None, missing: str, pack: str) -> None:
    """One explained evidence file in a rule's section: a counterexample (kind cex) or a
    counterexample to induction (cti), its diagram and its story; or why there is none."""
    what = "Counterexample" if kind == "cex" else "Counterexample to induction"
    a(f'<section class="{kind}" id="{kind}-{_e(pack)}/{_e(r["id"])}"><h4>{what}</h4>')
    if kind == "cti":
        a('<p class="muted small">A state in which the rule holds and, one leg later, one in which '
          "it does not; the first state need not be reachable. It is not a counterexample: the "
          "rule holds up to its bound and was not proved for any number of legs.</p>")
    if story is None:
        a(f'<p class="muted">{_e(missing)}</p></section>')
        return
    status, text, svg = story
    if status != "ok":
        a(f'<p><strong>The file failed its check and is not explained:</strong></p>'
          f'<pre>{_e(text)}</pre></section>')
        return
    a(f'<p class="small">File <a href="{_e(c["file"])}">{_e(c["file"])}</a>, diagram '
      f'<a href="{_e(c["diagram"])}">{_e(c["diagram"])}</a>; {c["checked_values"]} recorded values '
      f're-checked by simulation. <span class="muted">sha256 <code>{_e(c["sha256"])}</code></span></p>')
    a(f'<div class="diagram">{svg}</div>')
    a(f'<pre class="story">{_e(text)}</pre></section>')


def _first_screen(a, manifest: dict, timings: dict, anchors: dict) -> None:
    """What holds, under what: the caution, the overall counts and the time, and per pack one
    line with its counts and its scope."""
    a(f'<div class="caution" id="caution"><strong>Caution.</strong> {_e(manifest["caution"])} '
      'The verdicts below hold for the stated model and scope only (see '
      '<a href="#assumptions">Assumptions</a>).</div>')
    a('<h2 id="summary">What holds, under what</h2>')
    rules = [r for p in manifest["packs"] for r in p["rules"]]
    line = f"{_plural(sum(r['role'] != 'lemma' for r in rules), 'rule')}: {_counts([r for r in rules if r['role'] != 'lemma'])}"
    lemmas = [r for r in rules if r["role"] == "lemma"]
    if lemmas:
        line += f"; {_plural(len(lemmas), 'lemma')}: {_counts(lemmas)}"
    errors = len(manifest["input_errors"])
    if errors:
        line += f'; <a href="#input-errors">{_plural(errors, "input error")}</a> (those packs were not checked)'
    a(f'<p id="overall"><strong>Overall.</strong> {line}.</p>')
    rows = timings["rules"]
    cached = sum(1 for t in rows if t.get("cached"))
    partly = sum(1 for t in rows if "original_seconds" in t and not t.get("cached"))
    words = f"<strong>Time.</strong> {timings['total_seconds']:.3f} s for the {_plural(len(rows), 'verdict')} in this run"
    if cached or partly:
        words += (f"; {cached} of them came from the cache"
                  + (f" and {partly} in part" if partly else "")
                  + " (the cached answers replayed in the simulator). Solving them took "
                  f"{timings['original_total_seconds']:.3f} s when they were first solved")
    a(f'<p id="time">{words}.</p>')
    a('<table class="packs" id="pack-summary"><colgroup><col style="width:16%"><col style="width:15%">'
      '<col style="width:21%"><col style="width:29%"><col style="width:19%"></colgroup>'
      '<thead><tr><th>Pack</th><th>Verdicts</th>'
      "<th>Legs and groups</th><th>World and odometry</th><th>Designs</th></tr></thead><tbody>")
    for i, p in enumerate(manifest["packs"]):
        parts = dict(coverage.parts(p["scope"])) if p.get("scope") else {}
        name = f'<a href="#assumptions-{_e(p["name"])}">{_e(p["name"])}</a>'
        legs = parts.get("scope", "")
        if parts.get("own bound"):
            legs += f"; own bounds: {parts['own bound']}"
        world = "; ".join(x for x in (parts.get("world"), parts.get("odometry")) if x)
        a(f'<tr class="pack" data-pack="{_e(p["name"])}"><td>{name}<div class="muted small">{_e(p["title"])}</div></td>'
          f'<td>{_e(_pack_counts(p["rules"]))}</td><td>{_e(legs)}</td>'
          f'<td class="small">{_e(world)}</td><td class="small">{_e(parts.get("designs", ""))}</td></tr>')
    a("</tbody></table>")
    o = manifest["options"]
    a(f'<p class="muted small">Options: bound override {_e(o["legs"] if o["legs"] is not None else "none")}, '
      f'rules {_e(", ".join(o["rules"]) or "all")}, resource budget (z3 rlimit) {o["rlimit_per_check"]} '
      f'per solver check, wall-clock guard {_e(o["timeout_per_rule"])} s per rule. Contents: '
      '<a href="#rule-table">verdicts</a>, <a href="#rules">rules in detail</a>, '
      '<a href="#traceability">traceability</a>, <a href="#assumptions">assumptions</a>, '
      '<a href="#packs">packs</a>.</p>')


def _verdict(r: dict) -> str:
    words = r["verdict"] + (f" ({r['error_kind']})" if r["error_kind"] else "")
    return f'<span class="mark">{VERDICT_MARK[r["verdict"]]}</span>{_e(words)}'


def _proof_small(r: dict) -> str:
    """The proof column's second line: how, or why not for any number of legs."""
    p = r.get("proof") or {}
    if p.get("kind") == "induction":
        lemmas = p.get("lemmas") or []
        return f"k-induction, depth {p['depth']}" + (f", {_plural(len(lemmas), 'lemma')}" if lemmas else "")
    if p.get("induction"):
        return f"not for any number: {p['induction']}"
    if p.get("deepened_from") is not None:
        return f"base case deepened from {p['deepened_from']}"
    return ""


def _verdict_table(a, manifest: dict, secs: dict, anchors: dict) -> None:
    a('<h2 id="verdicts">Verdicts</h2>')
    a('<table id="rule-table"><colgroup><col class="c-rule"><col class="c-verdict"><col class="c-proof">'
      '<col class="c-time"></colgroup><thead><tr><th>Rule</th><th>Verdict</th><th>Proof and bound</th>'
      "<th>Time</th></tr></thead><tbody>")
    for i, p in enumerate(manifest["packs"]):
        a(f'<tr class="pack-row"><th colspan="4">{_e(p["name"])} <span class="muted">({_e(p["path"])}; '
          f'{_e(_pack_counts(p["rules"]))})</span></th></tr>')
        for r in p["rules"]:
            anchor = anchors[(i, r["id"])]
            small = _proof_small(r)
            a(f'<tr class="rule v-{_e(r["verdict"])}" data-pack="{_e(p["name"])}" data-rule="{_e(r["id"])}" '
              f'data-verdict="{_e(r["verdict"])}">'
              f'<td>{"lemma " if r["role"] == "lemma" else ""}<a href="#{_e(anchor)}"><code>{_e(r["id"])}</code></a>'
              f'<span class="title">{_e(r["title"])}</span></td>'
              f'<td class="verdict">{_verdict(r)}</td>'
              f'<td>{_e(r.get("proved_for"))}'
              + (f'<div class="muted small">{_e(small)}</div>' if small else "") + "</td>"
              f'<td class="num">{_time(secs.get((p["name"], r["id"])))}</td></tr>')
    a("</tbody></table>")


def _rule_section(a, p: dict, r: dict, anchor: str, t: dict | None, stories: dict) -> None:
    role = "Lemma" if r["role"] == "lemma" else "Rule"
    a(f'<section class="rule v-{_e(r["verdict"])}" id="{_e(anchor)}" data-pack="{_e(p["name"])}" '
      f'data-rule="{_e(r["id"])}">')
    a(f'<div class="rule-head"><h3>{_e(r["title"])}</h3><a class="back" href="#rule-table">back to the verdicts</a></div>')
    a(f'<p class="small">{role} <code>{_e(r["id"])}</code> of pack {_e(p["name"])}, '
      f'<code>{_e(p["path"])}:{r["line"]}</code></p>')
    a('<dl class="kv">')
    a(f'<dt>given</dt><dd><pre class="given">{_e(r["given"] or "(always)")}</pre></dd>')
    if r["implicit_premise"]:
        a(f'<dt>implicit premise</dt><dd><pre class="premise">{_e(r["implicit_premise"])}</pre></dd>')
    a(f'<dt>expect</dt><dd><pre class="expect">{_e(r["expect"])}</pre></dd>')
    a(f'<dt>refs</dt><dd>{"<br>".join(_e(x) for x in r["refs"]) or "<span class=muted>cites no clause</span>"}</dd>')
    if r.get("note"):
        a(f'<dt>note</dt><dd>{_e(r["note"])}</dd>')
    a(f'<dt>verdict</dt><dd class="verdict">{_verdict(r)}</dd>')
    proof = _e(proof_cell(r))
    if r.get("proof_detail"):
        proof += f'<div class="small">{_e(r["proof_detail"])}</div>'
    elif (r.get("proof") or {}).get("deepened_from") is not None:
        proof += f'<div class="small">base case deepened from {_e(r["proof"]["deepened_from"])} legs</div>'
    a(f'<dt>{"proved for" if r["verdict"] == "holds" else "checked"}</dt><dd>{proof}</dd>')
    if r["message"] and r["verdict"] != "holds":
        label = {"violated": "failure", "vacuous": "why vacuous", "bounded": "why not proved",
                 "unknown": "why undecided", "error": "error"}.get(r["verdict"], "detail")
        a(f'<dt>{label}</dt><dd><pre class="detail">{_e(r["message"])}</pre></dd>')
    a(f'<dt>time</dt><dd>{_time(t, inline=True)}</dd>')
    a(f'<dt>solver</dt><dd>{_e(r["solver"])}; rlimit {r["rlimit_used"]} of {r["rlimit_budget"]} a check; '
      f'{_plural(r["solver_checks"], "check")}</dd>')
    a("</dl>")
    if r["verdict"] == "violated":
        _evidence(a, "cex", r, stories.get((p["name"], r["id"])), r["counterexample"],
                  "No counterexample file was written (check ran with --no-files).", p["name"])
    if r["verdict"] == "bounded":
        _evidence(a, "cti", r, stories.get((p["name"], r["id"], "induction")),
                  r["counterexample_to_induction"],
                  "No counterexample to induction file was written.", p["name"])
    a("</section>")


def _margins_section(a, margins: dict, by_name: dict) -> None:
    """How far each rule that holds is from failing, the thresholds of the [world] bounds and
    the assumptions each proof needs (DESIGN 9), as computed by ``verifier margin``."""
    a('<h2 id="margins">Margins</h2>')
    a('<p class="muted">For each rule that holds: its slack (the least distance from failing over '
      "the worlds in scope), the furthest value of each [world] bound of the real world at which it "
      "still holds (the onboard and trackside designs keep the pack's values) and the assumptions "
      "its proof needs. A margin is a property of the stated model, like a verdict.</p>")
    a('<table id="margin-table"><colgroup><col style="width:26%"><col></colgroup><thead><tr><th>Rule</th>'
      "<th>Slack, thresholds and assumptions</th></tr></thead><tbody>")
    for pack, rules in sorted(margins.items()):
        for m in rules:
            anchor = by_name.get((pack, m["id"]))
            name = f'<a href="#{_e(anchor)}"><code>{_e(m["id"])}</code></a>' if anchor else f'<code>{_e(m["id"])}</code>'
            if m["verdict"] != "holds":
                a(f'<tr class="margin"><td>{name}</td><td class="muted">{_e(m["verdict"])}: no margin</td></tr>')
                continue
            items = [f'slack of <code>{_e(s["part"])}</code>: {_e(s["words"])}' for s in m["slack"]]
            if not m["slack"]:
                items.append("not a distance rule: no slack")
            items += [f'<code>{_e(t["key"])}</code>: {_e(t["words"])}' for t in m["thresholds"]]
            asm = m.get("assumptions")
            if asm:
                items.append("needs: " + (", ".join(f"<code>{_e(x)}</code>" for x in asm["needed"]) or "nothing named"))
                if asm["not_needed"]:
                    items.append("holds whatever: " + ", ".join(f"<code>{_e(x)}</code>" for x in asm["not_needed"]))
            if m.get("any_number_of_legs"):
                items.append(f"found up to the base bound of {m['legs']} legs (the verdict is for any number)")
            a(f'<tr class="margin" data-rule="{_e(m["id"])}"><td>{name}</td><td><ul class="cites">'
              + "".join(f"<li>{x}</li>" for x in items) + "</ul></td></tr>")
    a("</tbody></table>")


def render_html(manifest: dict, timings: dict, stories: dict, packs) -> str:
    secs = {(t["pack"], t["rule"]): t for t in timings["rules"]}
    anchors = _anchors(manifest)
    by_name = {}
    for (i, rid), anchor in anchors.items():
        by_name.setdefault((manifest["packs"][i]["name"], rid), anchor)
    tool = manifest["tool"]
    h: list[str] = []
    a = h.append
    a("<!DOCTYPE html>")
    a('<html lang="en"><head><meta charset="utf-8">')
    a('<meta name="viewport" content="width=device-width, initial-scale=1">')
    a('<link rel="icon" href="data:,">')
    a("<title>verifier evidence report</title>")
    a(f"<style>{CSS}</style></head><body>")
    a("<h1>Evidence report</h1>")
    a(f'<p class="muted small">Generated {_e(manifest["generated"])} by verifier {_e(tool["verifier"])} '
      f'with {_e(tool["solver"])} on Python {_e(tool["python"])} ({_e(tool["python_implementation"])}). '
      'Manifest: <a href="manifest.json">manifest.json</a>; timings: <a href="timings.json">timings.json</a>.</p>')
    _first_screen(a, manifest, timings, anchors)
    _verdict_table(a, manifest, secs, anchors)

    if manifest.get("margins") is not None:
        _margins_section(a, manifest["margins"], by_name)

    a('<h2 id="rules">Rules in detail</h2>')
    for i, p in enumerate(manifest["packs"]):
        for r in p["rules"]:
            _rule_section(a, p, r, anchors[(i, r["id"])], secs.get((p["name"], r["id"])), stories)

    # traceability
    a('<h2 id="traceability">Traceability</h2>')
    a('<p class="muted">Each clause cited by a rule (the refs of the pack, as written), the rules '
      "citing it and their verdicts; the last row holds the rules that cite no clause.</p>")
    a('<table id="trace-table"><colgroup><col style="width:28%"><col></colgroup><thead><tr><th>Clause</th>'
      "<th>Rules citing it, with their verdicts</th></tr></thead><tbody>")
    for row in manifest["traceability"]:
        rules = "".join(f'<li><span class="mark">{VERDICT_MARK[x["verdict"]]}</span>{_e(x["verdict"])} '
                        f'<a href="#{_e(by_name[(x["pack"], x["rule"])])}">{_e(x["pack"])}/{_e(x["rule"])}</a></li>'
                        for x in row["rules"])
        none = row["clause"] == "(no clause cited)"
        a(f'<tr class="clause{" no-clause" if none else ""}"><td>'
          + ("<em>no clause cited</em>" if none else _e(row["clause"]))
          + f'</td><td><ul class="cites">{rules}</ul></td></tr>')
    a("</tbody></table>")

    # assumptions
    a('<h2 id="assumptions">Assumptions of the model</h2>')
    a("<p>The verdicts quantify over the worlds of the model of the design contract (one or two balise "
      "groups, relative positioning in the LRBG frame, odometry with split over- and under-reading bounds, "
      "exact arithmetic) inside each pack's scope, up to each rule's bound of movement legs, or for any "
      "number of legs where the table says so (k-induction over the legs, DESIGN 4.7). These are "
      "the scope and error bounds actually used, and the onboard and trackside formulas assessed.</p>")
    for p in manifest["packs"]:
        asm = p["assumptions"]
        w = asm["world"]
        a(f'<h3 id="assumptions-{_e(p["name"])}">{_e(p["name"])}: {_e(p["title"])}</h3>')
        if p.get("scope"):    # what the verdicts cover, as in the first screen
            a(f'<dl class="kv scope" id="scope-{_e(p["name"])}">')
            for label, text in coverage.parts(p["scope"]):
                a(f"<dt>{_e(label)}</dt><dd>{_e(text)}</dd>")
            a("</dl>")
        a('<dl class="kv">')
        rows = [("balises", f"{w['balises'][0]}..{w['balises'][1]}"),
                ("location accuracy (Q_LOCACC)", f"{w['locacc'][0]} m .. {w['locacc'][1]} m"),
                ("train length", f"{w['train_length'][0]} m .. {w['train_length'][1]} m"),
                ("antenna behind the front", f"{w['antenna'][0]} m .. {w['antenna'][1]} m"),
                ("leg distance", f"{w['leg_distance'][0]} m .. {w['leg_distance'][1]} m"),
                ("over-reading bound", f"{w['odometry_over']['fixed']} m + {w['odometry_over']['rate']} x measured distance"),
                ("under-reading bound", f"{w['odometry_under']['fixed']} m + {w['odometry_under']['rate']} x measured distance"),
                ("balise detection error", f"at most {w['detection']} m"),
                ("error bound basis", w["odometry_basis"]),
                ("pack bound (legs)", asm["legs"]),
                ("Q_SCALE", asm["q_scale"]), ("rounding", asm["rounding"])]
        for k, v in rows:
            a(f"<dt>{_e(k)}</dt><dd>{_e(v)}</dd>")
        for k, v in asm["params"].items():
            a(f"<dt>params.{_e(k)}</dt><dd>{_e(v)}</dd>")
        a("</dl>")
        a('<table class="formulas"><colgroup><col style="width:22%"><col><col style="width:9%"></colgroup>'
          '<thead><tr><th>Output</th><th>Formula</th><th>From</th></tr></thead><tbody>')
        for side in ("onboard", "trackside"):
            for k, f in asm[side].items():
                a(f'<tr><td><code>{"est" if side == "onboard" else "rbc"}.{_e(k)}</code></td>'
                  f'<td><code>{_e(f["text"])}</code></td><td>{_e(f["source"])}</td></tr>')
        a("</tbody></table>")

    # packs
    a('<h2 id="packs">Packs</h2><table id="pack-table"><colgroup><col style="width:18%"><col style="width:34%">'
      '<col></colgroup><thead><tr><th>Name</th><th>Path</th><th>sha256</th></tr></thead><tbody>')
    for p in manifest["packs"]:
        a(f'<tr><td>{_e(p["name"])}</td><td>{_e(p["path"])}</td><td><code>{_e(p["sha256"])}</code></td></tr>')
    a("</tbody></table>")
    for pack in packs:
        a(f'<details class="no-print"><summary>Source of {_e(pack.path)}</summary><pre>{_e(pack.text)}</pre></details>')
    if manifest["input_errors"]:
        a('<h2 id="input-errors">Input errors (these packs were not checked)</h2><ul>')
        for d in manifest["input_errors"]:
            a(f'<li><code>{_e(d["file"])}:{d["line"]}:{d["column"]}</code> {_e(d["message"])}</li>')
        a("</ul>")
    a(f'<div class="caution"><strong>Caution.</strong> {_e(manifest["caution"])}</div>')
    a("</body></html>")
    return "\n".join(h) + "\n"

"""The evidence report of ``verifier check --report DIR``: a self-contained HTML page (no
network fetches: styles inline, diagrams inline SVG), a manifest and the counterexamples.

Files in DIR:

- ``manifest.json``: canonical JSON (sorted keys, indent 2). Everything in it is a function of
  the packs, the options and the tool versions, except the one field ``generated`` (UTC time of
  the run; ``SOURCE_DATE_EPOCH`` fixes it), so a re-run on an unchanged pack gives the same
  manifest but for that field. Timings are not in it.
- ``timings.json``: seconds per rule (they vary from run to run).
- ``index.html``: the page; it shows the timings too.
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
from verifier.errors import UsageError, VerifierError
from verifier.evidence import cexfile, ctistory, diagram, story
from verifier.run import coverage
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


def build(packs, results, diags, opts, *, explained: dict) -> tuple[dict, dict]:
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
                "refs": list(rule.refs), "bound": r.bound, "verdict": r.verdict,
                "error_kind": r.kind or None, "message": r.message, "minimal": r.minimal,
                "solver": r.solver or SOLVER, "rlimit_budget": budget, "rlimit_used": r.rlimit,
                "solver_checks": r.checks, "counterexample": cex, "witness": r.witness,
                "role": r.role, "proof": r.proof, "counterexample_to_induction": cti,
            })
            timings.append({"pack": pr.name, "rule": r.rule, "seconds": round(r.seconds, 3),
                            "cached": r.cached})
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
    total = round(sum(t["seconds"] for t in timings), 3)
    return manifest, {"format": FORMAT, "rules": timings, "total_seconds": total}


def write_report(out: Path, packs, results, diags, opts) -> Path:
    """Write the report into ``out``; return the page's path."""
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
    manifest, timings = build(packs, results, diags, opts, explained=explained)
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
    """The kind of proof of a manifest rule, in words."""
    p = r.get("proof") or {}
    if p.get("kind") == "induction":
        lemmas = p.get("lemmas") or []
        return (f"any number of legs (k-induction, depth {p['depth']}, base case {p['base_legs']} "
                f"legs" + (f"; lemmas {', '.join(lemmas)}" if lemmas else "") + ")")
    n = r["bound"]
    out = f"{n} leg{'s' if n != 1 else ''}"
    if p.get("induction"):
        out += f"; not for any number ({p['induction']})"
    return out


# ---- the page --------------------------------------------------------------------------------

CSS = """
body{font-family:"DejaVu Sans",Verdana,Arial,sans-serif;font-size:14px;line-height:1.45;color:#1a1a1a;
 margin:0 auto;max-width:1180px;padding:16px 24px 48px;background:#fff}
h1{font-size:24px;margin:8px 0 4px}h2{font-size:19px;margin:28px 0 8px;border-bottom:2px solid #1a1a1a;
 padding-bottom:2px}h3{font-size:16px;margin:22px 0 6px}
table{border-collapse:collapse;width:100%;margin:6px 0 12px}
th,td{border:1px solid #9a9a9a;padding:4px 6px;text-align:left;vertical-align:top}
th{background:#ececec}code,pre{font-family:"DejaVu Sans Mono",Consolas,monospace;font-size:12.5px}
pre{background:#f6f6f6;border:1px solid #cfcfcf;padding:8px 10px;white-space:pre-wrap}
.caution{border:3px double #1a1a1a;padding:10px 14px;background:#fffbe6;margin:12px 0}
.verdict{font-weight:bold;white-space:nowrap}
.v-holds{background:#e7f4ea}.v-violated,.v-vacuous{background:#fbe4e6}.v-unknown,.v-bounded{background:#fff3d6}
.v-error{background:#efe3f7}
.mark{display:inline-block;min-width:3.6em;border:1px solid #1a1a1a;padding:0 4px;margin-right:4px;
 text-align:center;font-size:11px;background:#fff}
.muted{color:#555}.num{text-align:right;white-space:nowrap}
.diagram{overflow-x:auto;border:1px solid #cfcfcf;margin:8px 0}
dl.kv{display:grid;grid-template-columns:max-content 1fr;gap:2px 14px}dl.kv dt{font-weight:bold}
dl.kv dd{margin:0}
"""


def _e(x) -> str:
    return escape("" if x is None else str(x))


def _evidence(a, kind: str, p: dict, r: dict, story, c: dict | None, missing: str) -> None:
    """One explained evidence file on the page: a counterexample (kind cex) or a counterexample
    to induction (cti), its diagram and its story; or why there is none."""
    a(f'<section class="{kind}" id="{kind}-{_e(p["name"])}-{_e(r["id"])}">')
    a(f'<h3>{_e(p["name"])} / {_e(r["id"])}</h3>')
    if story is None:
        a(f'<p class="muted">{_e(missing)}</p></section>')
        return
    status, text, svg = story
    if status != "ok":
        a(f'<p><strong>The {"counterexample " if kind == "cex" else ""}file failed its check and is '
          f'not explained:</strong></p><pre>{_e(text)}</pre></section>')
        return
    a(f'<p>File <a href="{_e(c["file"])}">{_e(c["file"])}</a> (sha256 <code>{_e(c["sha256"])}</code>), '
      f'diagram <a href="{_e(c["diagram"])}">{_e(c["diagram"])}</a>; {c["checked_values"]} recorded '
      "values re-checked by simulation.</p>")
    a(f'<div class="diagram">{svg}</div>')
    a(f"<pre class=\"story\">{_e(text)}</pre></section>")


def render_html(manifest: dict, timings: dict, stories: dict, packs) -> str:
    secs = {(t["pack"], t["rule"]): t["seconds"] for t in timings["rules"]}
    cached = {(t["pack"], t["rule"]) for t in timings["rules"] if t.get("cached")}
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
    a(f'<p class="muted">Generated {_e(manifest["generated"])} by verifier {_e(tool["verifier"])} '
      f'with {_e(tool["solver"])} on Python {_e(tool["python"])} ({_e(tool["python_implementation"])}). '
      'Manifest: <a href="manifest.json">manifest.json</a>; timings: <a href="timings.json">timings.json</a>.</p>')
    a(f'<div class="caution" id="caution"><strong>Caution.</strong> {_e(manifest["caution"])} '
      "The verdicts below hold for the stated model and scope only: see Assumptions.</div>")
    s = manifest["summary"]
    a('<h2 id="summary">Summary</h2><p>' + ", ".join(f"{s[k]} {k}" for k in VERDICT_MARK)
      + f"; {len(manifest['input_errors'])} input error(s). Total solver time "
        f"{timings['total_seconds']} s.</p>")
    o = manifest["options"]
    a(f'<p class="muted">Options: bound override {_e(o["legs"] if o["legs"] is not None else "none")}, '
      f'rules {_e(", ".join(o["rules"]) or "all")}, resource budget (z3 rlimit) {o["rlimit_per_check"]} '
      f'per solver check, wall-clock guard {_e(o["timeout_per_rule"])} s per rule.</p>')

    # what each pack's verdicts cover
    a('<h2 id="scope">Scope of the verdicts</h2>')
    a('<p class="muted">Every verdict of a pack rests on this scope: the bound of movement legs '
      "(or any number, with the base case and depth of the induction), the world's ranges and "
      "error bounds, and the designs assessed (details under Assumptions).</p>")
    for p in manifest["packs"]:
        if not p.get("scope"):
            continue
        a(f'<h3 id="scope-{_e(p["name"])}">{_e(p["name"])}</h3><dl class="kv scope">')
        for label, text in coverage.parts(p["scope"]):
            a(f"<dt>{_e(label)}</dt><dd>{_e(text)}</dd>")
        a("</dl>")

    # rules
    a('<h2 id="rules">Rules</h2>')
    a('<table id="rule-table"><thead><tr><th>Pack</th><th>Rule</th><th>Verdict</th><th>Proved for</th>'
      '<th>Time</th><th>Solver</th><th>rlimit used / budget</th><th>Checks</th><th>Cites</th></tr></thead><tbody>')
    for p in manifest["packs"]:
        for r in p["rules"]:
            anchor = f"rule-{p['name']}-{r['id']}"
            verdict = r["verdict"] + (f" ({r['error_kind']})" if r["error_kind"] else "")
            text = "".join([
                f'<div><strong>{_e(r["title"])}</strong></div>',
                f'<div><span class="muted">given</span> <code>{_e(r["given"] or "(always)")}</code></div>',
                (f'<div><span class="muted">implicit premise</span> <code>{_e(r["implicit_premise"])}</code></div>'
                 if r["implicit_premise"] else ""),
                f'<div><span class="muted">expect</span> <code>{_e(r["expect"])}</code></div>',
                (f'<div class="muted">{_e(r["message"])}</div>' if r["message"] and r["verdict"] != "holds" else ""),
                (f'<div><a href="#cex-{_e(p["name"])}-{_e(r["id"])}">counterexample</a></div>'
                 if r["counterexample"] else ""),
                (f'<div><a href="#cti-{_e(p["name"])}-{_e(r["id"])}">counterexample to induction</a></div>'
                 if r["counterexample_to_induction"] else ""),
            ])
            a(f'<tr class="rule v-{_e(r["verdict"])}" id="{_e(anchor)}" data-pack="{_e(p["name"])}" '
              f'data-rule="{_e(r["id"])}" data-verdict="{_e(r["verdict"])}">'
              f'<td>{_e(p["name"])}<div class="muted">{_e(p["path"])}:{r["line"]}</div></td>'
              f'<td>{"lemma " if r["role"] == "lemma" else ""}<code>{_e(r["id"])}</code>{text}</td>'
              f'<td class="verdict"><span class="mark">{VERDICT_MARK[r["verdict"]]}</span>{_e(verdict)}</td>'
              f'<td>{_e(proof_cell(r))}</td>'
              f'<td class="num">{secs.get((p["name"], r["id"]), 0):.3f} s'
              f'{" (cached verdict, replayed)" if (p["name"], r["id"]) in cached else ""}</td>'
              f'<td>{_e(r["solver"])}</td>'
              f'<td class="num">{r["rlimit_used"]} / {r["rlimit_budget"]}</td>'
              f'<td class="num">{r["solver_checks"]}</td>'
              f'<td>{"<br>".join(_e(x) for x in r["refs"]) or "<span class=muted>none</span>"}</td></tr>')
    a("</tbody></table>")

    # traceability
    a('<h2 id="traceability">Traceability</h2>')
    a('<p class="muted">Each clause cited by a rule (the refs of the pack, as written), the rules '
      "citing it and their verdicts.</p>")
    a('<table id="trace-table"><thead><tr><th>Clause</th><th>Rules citing it</th><th>Verdicts</th></tr></thead><tbody>')
    for row in manifest["traceability"]:
        rules = "<br>".join(f'<a href="#rule-{_e(x["pack"])}-{_e(x["rule"])}">{_e(x["pack"])}/{_e(x["rule"])}</a>'
                            for x in row["rules"])
        verdicts = "<br>".join(f'<span class="mark">{VERDICT_MARK[x["verdict"]]}</span>{_e(x["verdict"])}'
                               for x in row["rules"])
        a(f'<tr class="clause"><td>{_e(row["clause"])}</td><td>{rules}</td><td>{verdicts}</td></tr>')
    a("</tbody></table>")

    # counterexamples
    a('<h2 id="counterexamples">Counterexamples</h2>')
    any_cex = False
    for p in manifest["packs"]:
        for r in p["rules"]:
            key = (p["name"], r["id"])
            if r["verdict"] != "violated":
                continue
            any_cex = True
            _evidence(a, "cex", p, r, stories.get(key), r["counterexample"],
                      "No counterexample file was written (check ran with --no-files).")
    if not any_cex:
        a("<p>No rule was violated.</p>")

    # counterexamples to induction
    ctis = [(p, r) for p in manifest["packs"] for r in p["rules"] if r["verdict"] == "bounded"]
    if ctis:
        a('<h2 id="induction">Counterexamples to induction</h2>')
        a('<p class="muted">Rules that hold up to their bound but were not proved for any number of '
          "legs. Each file shows a state in which the rule holds and, one leg later, one in which it "
          "does not; the first state need not be reachable. They are not counterexamples.</p>")
    for p, r in ctis:
        _evidence(a, "cti", p, r, stories.get((p["name"], r["id"], "induction")),
                  r["counterexample_to_induction"], r["message"])

    # assumptions
    a('<h2 id="assumptions">Assumptions of the model</h2>')
    a("<p>The verdicts quantify over the worlds of the model of the design contract (one balise group, "
      "relative positioning in the LRBG frame, odometry with split over- and under-reading bounds, "
      "exact arithmetic) inside each pack's scope, up to each rule's bound of movement legs, or for any "
      "number of legs where the table says so (k-induction over the legs, DESIGN 4.7). These are "
      "the scope and error bounds actually used, and the onboard and trackside formulas assessed.</p>")
    for p in manifest["packs"]:
        asm = p["assumptions"]
        w = asm["world"]
        a(f'<h3 id="assumptions-{_e(p["name"])}">{_e(p["name"])}: {_e(p["title"])}</h3><dl class="kv">')
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
        a('<table class="formulas"><thead><tr><th>Output</th><th>Formula</th><th>From</th></tr></thead><tbody>')
        for side in ("onboard", "trackside"):
            for k, f in asm[side].items():
                a(f'<tr><td><code>{"est" if side == "onboard" else "rbc"}.{_e(k)}</code></td>'
                  f'<td><code>{_e(f["text"])}</code></td><td>{_e(f["source"])}</td></tr>')
        a("</tbody></table>")

    # packs
    a('<h2 id="packs">Packs</h2><table id="pack-table"><thead><tr><th>Name</th><th>Path</th><th>sha256</th></tr></thead><tbody>')
    for p in manifest["packs"]:
        a(f'<tr><td>{_e(p["name"])}</td><td>{_e(p["path"])}</td><td><code>{_e(p["sha256"])}</code></td></tr>')
    a("</tbody></table>")
    for pack in packs:
        a(f'<details><summary>Source of {_e(pack.path)}</summary><pre>{_e(pack.text)}</pre></details>')
    if manifest["input_errors"]:
        a('<h2 id="input-errors">Input errors (these packs were not checked)</h2><ul>')
        for d in manifest["input_errors"]:
            a(f'<li><code>{_e(d["file"])}:{d["line"]}:{d["column"]}</code> {_e(d["message"])}</li>')
        a("</ul>")
    a(f'<div class="caution"><strong>Caution.</strong> {_e(manifest["caution"])}</div>')
    a("</body></html>")
    return "\n".join(h) + "\n"

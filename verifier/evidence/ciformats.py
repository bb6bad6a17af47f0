"""Verdicts in the formats CI servers read: JUnit XML and SARIF 2.1.0 (``check --format``).

JUnit: one test case per rule (and lemma); violated and vacuous are failures, unknown, bounded
(not proved for any number of legs) and error are errors; a pack that could not be loaded is an
error test case of its own. Each case says what kind of proof its verdict is.

SARIF 2.1.0 (OASIS standard): one result per violated, vacuous or unknown rule, located at the
rule's line in its pack, with the counterexample file (and its diagram) as related locations.
Violated and vacuous results are ``kind: fail, level: error``; unknown is ``kind: open`` (the
tool could not decide, SARIF 2.1.0 section 3.27.9), whose level must then be ``none``. Rules
with verdict ``error`` and packs that could not be loaded are tool execution notifications.
``bounded`` (holds up to its bound, not proved for any number of legs, DESIGN 4.7) is ``open``
like unknown, with the counterexample to induction as a related location. Every result and
rule carries the kind of proof in its properties; every result the scope its verdict rests on
(``evidence.coverage``) and the run every pack's scope. A JUnit test suite (a pack) carries its
scope and the caution as ``<properties>``.
"""

from __future__ import annotations

import hashlib
import json
from xml.etree import ElementTree as ET

from verifier.about import CAUTION, __version__
from verifier.errors import visible
from verifier.run import coverage
from verifier.run.engine import proof_detail, proof_words
from verifier.smt.solve import SOLVER

SARIF_SCHEMA = "https://json.schemastore.org/sarif-2.1.0.json"
FAILURES = ("violated", "vacuous")


def _proof(r) -> str:
    return proof_words(r) + (f" ({proof_detail(r)})" if proof_detail(r) else "")


def _detail(r) -> str:
    lines = [f"{r.title}", f"verdict: {r.verdict}" + (f" ({r.kind})" if r.kind else "")
             + f", for {_proof(r)}"]
    if r.premise:
        lines.append(f"implicit premise: {r.premise}")
    if r.counterexample:
        lines.append(f"counterexample: {r.counterexample}")
    if r.induction:
        lines.append(f"counterexample to induction: {r.induction}")
    if r.message:
        lines.append(r.message)
    return "\n".join(lines)


def junit(results, diags) -> str:
    """JUnit XML (the common Ant/Surefire dialect) for the verdicts."""
    root = ET.Element("testsuites", name="verifier")
    tot = dict(tests=0, failures=0, errors=0, time=0.0)
    for p in results:
        suite = ET.SubElement(root, "testsuite", name=p.name, file=p.path)
        if p.scope:     # what every verdict of the pack covers (evidence.coverage)
            props = ET.SubElement(suite, "properties")
            for label, text in coverage.parts(p.scope):
                ET.SubElement(props, "property", name=f"verifier.{label.replace(' ', '_')}", value=text)
            ET.SubElement(props, "property", name="verifier.caution", value=CAUTION)
        st = dict(tests=0, failures=0, errors=0, time=0.0)
        for r in p.results:
            case = ET.SubElement(suite, "testcase", name=("lemma " if r.role == "lemma" else "") + r.rule,
                                 classname=p.name, file=p.path,
                                 line=str(r.line), time=f"{r.seconds:.3f}")
            st["tests"] += 1
            st["time"] += r.seconds
            if r.verdict in FAILURES:
                st["failures"] += 1
                el = ET.SubElement(case, "failure", type=r.verdict,
                                   message=r.message or f"rule {r.rule} is {r.verdict}")
                el.text = _detail(r)
            elif r.verdict in ("unknown", "bounded", "error"):
                st["errors"] += 1
                el = ET.SubElement(case, "error", type=r.verdict + (f" ({r.kind})" if r.kind else ""),
                                   message=r.message or f"rule {r.rule} is {r.verdict}")
                el.text = _detail(r)
            else:
                out = ET.SubElement(case, "system-out")
                out.text = f"holds for {_proof(r)}"
        for k in ("tests", "failures", "errors"):
            suite.set(k, str(st[k]))
            tot[k] += st[k]
        suite.set("skipped", "0")
        suite.set("time", f"{st['time']:.3f}")
        tot["time"] += st["time"]
    errors = [d for d in diags if d.severity == "error"]
    if errors:
        suite = ET.SubElement(root, "testsuite", name="input", tests=str(len(errors)), failures="0",
                              errors=str(len(errors)), skipped="0", time="0.000")
        for d in errors:
            case = ET.SubElement(suite, "testcase", name=f"{d.file}:{d.line}:{d.column}",
                                 classname="input", file=d.file, line=str(d.line), time="0.000")
            el = ET.SubElement(case, "error", type="input", message=d.message)
            el.text = d.render()
        tot["tests"] += len(errors)
        tot["errors"] += len(errors)
    for k in ("tests", "failures", "errors"):
        root.set(k, str(tot[k]))
    root.set("time", f"{tot['time']:.3f}")
    ET.indent(root)
    # XML 1.0 allows no C0 control but tab, newline and return, not even as a reference: any
    # that reached a name, a path or a message is written as a visible escape (\x1b)
    text = ET.tostring(root, encoding="unicode")
    return '<?xml version="1.0" encoding="UTF-8"?>\n' + visible(text, keep="\n\t\r") + "\n"


def _loc(uri: str, line: int | None = None, column: int | None = None) -> dict:
    phys: dict = {"artifactLocation": {"uri": uri, "uriBaseId": "%SRCROOT%"}}
    if line:
        phys["region"] = {"startLine": max(1, line)}
        if column:
            phys["region"]["startColumn"] = max(1, column)
    return {"physicalLocation": phys}


def sarif(results, diags) -> dict:
    """A SARIF 2.1.0 log (plain data) for the verdicts."""
    rules, results_out, notes = [], [], []
    index: dict = {}
    for p in results:
        for r in p.results:
            rid = f"{p.name}/{r.rule}"
            index[rid] = len(rules)
            rules.append({"id": rid, "name": r.rule,
                          "shortDescription": {"text": r.title},
                          "properties": {"pack": p.name, "pack_path": p.path, "line": r.line,
                                         "role": r.role, "proof": r.proof}})
            if r.verdict in FAILURES or r.verdict in ("unknown", "bounded"):
                fail = r.verdict in FAILURES
                words = {"violated": "is violated", "vacuous": "is vacuous (no world in scope satisfies its given)",
                         "unknown": "could not be decided (the solver gave up)",
                         "bounded": "holds but is not proved for any number of legs"}[r.verdict]
                text = f"{r.role.capitalize()} {rid} {words}, for up to {r.bound} leg{'s' if r.bound != 1 else ''}"
                if r.message:
                    text += f": {r.message}"
                if r.counterexample:
                    text += f". Counterexample: {r.counterexample}"
                if r.induction:
                    text += f". Counterexample to induction: {r.induction}"
                res = {"ruleId": rid, "ruleIndex": index[rid],
                       "kind": "fail" if fail else "open", "level": "error" if fail else "none",
                       "message": {"text": text},
                       "locations": [_loc(p.path, r.line)],
                       "partialFingerprints": {
                           "verifierRule/v1": hashlib.sha256(rid.encode("utf-8")).hexdigest()},
                       "properties": {"verdict": r.verdict, "bound": r.bound,
                                      "counterexample": r.counterexample,
                                      "implicit_premise": r.premise, "proof": r.proof,
                                      "counterexample_to_induction": r.induction,
                                      "scope": coverage.one_line(p.scope) if p.scope else None}}
                if r.counterexample:
                    svg = r.counterexample[:-5] + ".svg" if r.counterexample.endswith(".json") else None
                    related = [{"id": 1, **_loc(r.counterexample), "message": {"text": "counterexample file"}}]
                    if svg:
                        related.append({"id": 2, **_loc(svg), "message": {"text": "counterexample diagram"}})
                    res["relatedLocations"] = related
                if r.induction:
                    related = res.setdefault("relatedLocations", [])
                    related.append({"id": len(related) + 1, **_loc(r.induction),
                                    "message": {"text": "counterexample to induction"}})
                    related.append({"id": len(related) + 1, **_loc(r.induction[:-5] + ".svg"),
                                    "message": {"text": "diagram of the counterexample to induction"}})
                results_out.append(res)
            elif r.verdict == "error":
                notes.append({"level": "error",
                              "message": {"text": f"rule {rid} could not be checked ({r.kind}): {r.message}"},
                              "locations": [_loc(p.path, r.line)],
                              "descriptor": {"id": rid, "index": index[rid]}})
    for d in diags:
        if d.severity != "error":
            continue
        notes.append({"level": "error", "message": {"text": d.message},
                      "locations": [_loc(d.file, d.line, d.column)]})
    run = {
        "tool": {"driver": {"name": "verifier", "version": __version__,
                            "rules": rules,
                            "properties": {"solver": SOLVER, "caution": CAUTION}}},
        "properties": {"caution": CAUTION,
                       "scopes": {p.name: {**p.scope, "words": coverage.one_line(p.scope)}
                                  for p in results if p.scope}},
        "columnKind": "unicodeCodePoints",
        "invocations": [{"executionSuccessful": not any(n["level"] == "error" for n in notes),
                         "toolExecutionNotifications": notes}],
        "results": results_out,
    }
    return {"$schema": SARIF_SCHEMA, "version": "2.1.0", "runs": [run]}


def sarif_text(results, diags) -> str:
    return json.dumps(sarif(results, diags), indent=2, sort_keys=True, ensure_ascii=False) + "\n"


def render(fmt: str, results, diags) -> str:
    """The text of ``check --format junit|sarif``."""
    return junit(results, diags) if fmt == "junit" else sarif_text(results, diags)

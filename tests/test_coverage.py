"""Every output that prints a verdict prints the scope it rests on (evidence.coverage).

The expected words are the pack's own [world] values written below, and the bounds the design
contract gives (DESIGN 3: command line, then rule, then pack; DESIGN 4.7: the base case of a
proof for any number of legs is at least depth - 1 legs).
"""

from __future__ import annotations

import json
import xml.etree.ElementTree as ET

from verifier.cli import main

PACK = """[pack]
name = "dunmore-scope"
title = "Dunmore Yard shunting (scope test)"
legs = 1

[world]
train_length = ["20 m", "250 m"]
leg_distance = ["0 m", "700 m"]
locacc = ["1 m", "6 m"]
odometry_over = { fixed = "4 m", rate = "3 %" }
detection = "2 m"

[onboard]
q_scale = "1 m"
l_doubtover = "lrbg.locacc + est.bound_over + est.bound_under"

[[rule]]
id = "front-known"
title = "The front is reported"
expect = "train.length >= 20 m"

[[rule]]
id = "two-leg-rule"
title = "A rule with its own bound"
legs = 2
expect = "train.length <= 250 m"

[[rule]]
id = "broken"
title = "A false rule"
expect = "train.length >= 30 m"
"""


def _run(tmp_path, monkeypatch, capsys, *args):
    monkeypatch.chdir(tmp_path)
    (tmp_path / "p.toml").write_text(PACK)
    code = main(["check", "p.toml", "--no-files", "--no-cache", *args])
    return code, capsys.readouterr().out


def test_the_table_prints_the_scope_under_each_pack_within_100_columns(tmp_path, monkeypatch, capsys):
    code, out = _run(tmp_path, monkeypatch, capsys)
    assert code == 1
    head = out.split("  holds")[0]
    assert "scope     up to 1 leg; 1 group" in head
    assert "train 20..250 m" in head and "each leg 0..700 m" in head and "Q_LOCACC 1..6 m" in head
    assert "over-reading 4 m + 3 %" in " ".join(head.split())
    assert "under-reading 5 m + 5 %" in " ".join(head.split())        # DESIGN 4.1 default kept
    assert "detection error 2 m" in " ".join(head.split())
    assert "the pack's l_doubtover (defaults elsewhere)" in " ".join(head.split())
    assert "Q_SCALE 1 m" in " ".join(head.split())
    assert "two-leg-rule (up to 2 legs)" in " ".join(head.split())    # its own bound
    assert max(len(line) for line in out.splitlines()) <= 100


def test_a_legs_option_and_any_number_of_legs_are_said(tmp_path, monkeypatch, capsys):
    _, out = _run(tmp_path, monkeypatch, capsys, "--legs", "2")
    assert "up to 2 legs (--legs 2)" in out and "own bound" not in out   # --legs overrides rules
    _, out = _run(tmp_path, monkeypatch, capsys, "--legs", "any", "--induction-depth", "3",
                  "--max-legs", "5", "--rule", "front-known")
    assert ("any number of legs (k-induction: base case up to 2 legs, step depth 1..3; a rule whose "
            "step fails is checked on up to 5 legs)") in " ".join(out.split())


def test_json_sarif_and_junit_carry_the_scope(tmp_path, monkeypatch, capsys):
    _, out = _run(tmp_path, monkeypatch, capsys, "--json")
    scope = json.loads(out)["packs"][0]["scope"]
    assert scope["legs"] == 1 and scope["world"]["train_length"] == ["20", "250"]
    assert scope["onboard"]["own_formulas"] == ["l_doubtover"] and scope["rule_bounds"] == {"two-leg-rule": 2}

    _, out = _run(tmp_path, monkeypatch, capsys, "--format", "sarif")
    run = json.loads(out)["runs"][0]
    assert run["properties"]["scopes"]["dunmore-scope"]["legs"] == 1
    assert "caution" in run["properties"]
    (res,) = run["results"]                     # the one violated rule
    assert "up to 1 leg" in res["properties"]["scope"] and "train 20..250 m" in res["properties"]["scope"]

    _, out = _run(tmp_path, monkeypatch, capsys, "--format", "junit")
    suite = ET.fromstring(out).find("testsuite")
    props = {p.get("name"): p.get("value") for p in suite.find("properties")}
    assert props["verifier.scope"].startswith("up to 1 leg")
    assert "train 20..250 m" in props["verifier.world"] and "EN 50126" in props["verifier.caution"]


def test_the_report_has_a_scope_section_per_pack(tmp_path, monkeypatch, capsys):
    _run(tmp_path, monkeypatch, capsys, "--report", "rep")
    manifest = json.loads((tmp_path / "rep" / "manifest.json").read_text())
    assert manifest["packs"][0]["scope"]["world"]["detection"] == "2"
    page = (tmp_path / "rep" / "index.html").read_text()
    section = page.split('id="scope-dunmore-scope"')[1].split("</dl>")[0]
    assert "up to 1 leg" in section and "detection error 2 m" in section


def test_the_run_a_note_cites_really_breaks_the_bounded_rule(capsys):
    """rules/confidence-interval.toml says automatic-step-stays-in-range is false for long runs
    and names a scenario that shows it. Hand-worked: 28 legs x 12 km + 2 m antenna = 336,002 m,
    more than 32766 x 10 m = 327,660 m, the most the 10 m step codes (SUBSET-026 7.5.1.13:
    32767 means unknown; sending 32767 above 32766 is this tool's design choice)."""
    root = __import__("pathlib").Path(__file__).resolve().parent.parent
    note = next(r["note"] for r in __import__("tomllib").loads(
        (root / "rules" / "confidence-interval.toml").read_text())["rule"]
        if r["id"] == "automatic-step-stays-in-range")
    assert "examples/scenarios/long-run-336-km.toml" in note
    code = main(["simulate", str(root / "examples" / "scenarios" / "long-run-336-km.toml"),
                 "--pack", str(root / "rules" / "confidence-interval.toml")])
    out = capsys.readouterr().out
    assert code == 1
    assert "VIOLATED        automatic-step-stays-in-range" in out
    assert "D_LRBG 32767" in out and "front 336002 m" in out
    assert "warning: this world is outside the pack's scope" not in out


ONE_BALISE = """[lrbg]
balises = 1
read = 1
[[legs]]
running = "forward"
distance = "100 m"
"""
REVERSE = """[lrbg]
balises = 2
read = 2
[train]
antenna = "2 m"
[passage]
direction = "reverse"
running = "forward"
[[legs]]
running = "forward"
distance = "100 m"
"""


def test_simulate_gives_the_true_reason_for_32767_and_names_the_safe_ends(tmp_path, capsys):
    root = __import__("pathlib").Path(__file__).resolve().parent.parent
    pack = str(root / "rules" / "position-report.toml")
    (tmp_path / "one.toml").write_text(ONE_BALISE)
    main(["simulate", str(tmp_path / "one.toml"), "--pack", pack])
    out = capsys.readouterr().out
    report = next(line for line in out.splitlines() if line.startswith("report:"))
    assert "D_LRBG 32767" in report and "direction over the group is unknown" in report
    assert "out of range" not in out
    # Hand-worked (DESIGN 4.1 defaults, SUBSET-041 5.3.1.1 bound 5 m + 5 %): front first against
    # the group, antenna 2 m, 100 m: the front is at -102 m; both doubts 5 + 5 = 10 m plus the
    # 1 m detection error on top (the default, docs/facts.md) = 11 m; facing reverse, the max
    # safe front is the one further along the reverse direction.
    (tmp_path / "rev.toml").write_text(REVERSE)
    main(["simulate", str(tmp_path / "rev.toml"), "--pack", pack])
    out = capsys.readouterr().out
    trackside = next(line for line in out.splitlines() if line.startswith("trackside:"))
    assert "min safe front -91 m, max safe front -113 m" in trackside


def test_verifier_test_says_what_its_passes_cover(tmp_path, monkeypatch, capsys):
    """A pass of `verifier test` is a test in the worlds tried: the header says their legs
    (generated worlds of a pack for any number of legs: 6, docs/implementations.md) and that the
    onboard is the implementation, not the pack's design."""
    root = __import__("pathlib").Path(__file__).resolve().parent.parent
    monkeypatch.chdir(tmp_path)
    args = ["test", str(root / "rules" / "position-report.toml"), "--impl", "kestrel_onboard:report",
            "--path", str(root / "examples"), "--rule", "qualifier-codes", "--no-smt",
            "--max-examples", "3", "--no-files"]
    assert main(args) == 0
    out = " ".join(capsys.readouterr().out.split())
    assert "scope worlds of up to 6 legs (generated), solver worlds up to 3 legs; a test in these worlds, not a proof" in out
    assert "onboard: the implementation kestrel_onboard:report; trackside: the default design" in out
    assert main(args + ["--json"]) == 0
    (rep,) = json.loads(capsys.readouterr().out)["implementations"]
    assert rep["scope"]["tested"]["generated_legs"] == 6 and rep["scope"]["world"]["leg_distance"] == ["0", "5000"]

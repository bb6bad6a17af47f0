"""Commands as a user runs them: replay and simulate (check is covered in test_verdicts)."""

from __future__ import annotations

import json
from pathlib import Path

from conftest import pack_text, rule_toml
from verifier.cli import main

ROOT = Path(__file__).resolve().parent.parent


def _project(tmp_path, monkeypatch, rules):
    monkeypatch.chdir(tmp_path)
    (tmp_path / "rules").mkdir()
    p = tmp_path / "rules" / "p.toml"
    p.write_text(pack_text(rules, legs=1))
    return p


def test_replay_statuses(tmp_path, monkeypatch, capsys):
    p = _project(tmp_path, monkeypatch, rule_toml("a", "legs.count == 0") + rule_toml("b", "legs.count == 0")
                 + rule_toml("c", "legs.count == 0"))
    assert main(["check"]) == 1
    capsys.readouterr()
    assert main(["replay"]) == 0
    assert capsys.readouterr().out.count("still violated  counterexamples") == 3
    # edit rule a, remove rule b, weaken rule c's claim so that the world no longer violates it
    text = p.read_text()
    text = text.replace('id = "a"\ntitle = "a"\nexpect = "legs.count == 0"', 'id = "a"\ntitle = "a"\nexpect = "legs.count <= 0"')
    text = text.replace('[[rule]]\nid = "b"\ntitle = "b"\nexpect = "legs.count == 0"\n', "")
    p.write_text(text)
    assert main(["replay"]) == 1
    out = capsys.readouterr().out
    assert "rule changed" in out and "counterexamples/t/a.json" in out and "still violates it" in out
    assert "rule gone" in out and "counterexamples/t/b.json" in out
    assert "still violated  counterexamples/t/c.json" in out


def test_replay_now_holds_when_the_design_is_fixed_outside_the_rule(tmp_path, monkeypatch, capsys):
    # the rule text is unchanged but a definition it uses (the onboard design) changes: the file
    # records the definitions' hashes, so this is reported as a change, and the world is re-judged
    p = _project(tmp_path, monkeypatch, rule_toml("r", "rbc.l_doubtover >= est.l_doubtover", "rbc.placed"))
    p.write_text(p.read_text().replace("legs = 1\n", 'legs = 1\n\n[onboard]\nrounding = "nearest"\n'))
    assert main(["check"]) == 1
    p.write_text(p.read_text().replace('rounding = "nearest"', 'rounding = "widen"'))
    capsys.readouterr()
    assert main(["replay"]) == 1
    assert "rule changed" in capsys.readouterr().out


def test_replay_of_a_foreign_file_is_exit_2(tmp_path, monkeypatch, capsys):
    monkeypatch.chdir(tmp_path)
    (tmp_path / "x.json").write_text('{"format": "something-else/9"}')
    assert main(["replay", "x.json"]) == 2
    assert "x.json:1:1: error: not a counterexample file: field 'format'" in capsys.readouterr().err


def test_simulate_toml_scenario(tmp_path, monkeypatch, capsys):
    monkeypatch.chdir(tmp_path)
    (tmp_path / "p.toml").write_text(pack_text(rule_toml("side", "report.q_dlrbg == nominal", "rbc.placed")))
    # the terminus worked by hand (docs/facts.md): 120 m in, change of cab: front at -3 - 120 + 100
    (tmp_path / "s.toml").write_text(
        '[lrbg]\nbalises = 2\nread = 2\nlocacc = "5 m"\n'
        '[train]\nlength = "100 m"\nantenna = "3 m"\n'
        '[passage]\ndirection = "reverse"\nrunning = "forward"\n'
        '[[legs]]\nrunning = "forward"\ndistance = "120 m"\n'
        '[[legs]]\ncab_change = true\nrunning = "forward"\ndistance = "0 m"\n')
    assert main(["simulate", "s.toml", "--pack", "p.toml"]) == 1
    out = capsys.readouterr().out
    assert "real:      front -23 m" in out
    assert "Q_DLRBG 0" in out and "Q_DIRLRBG 1" in out
    assert "VIOLATED        side" in out


def test_simulate_bad_scenario_names_the_field(tmp_path, monkeypatch, capsys):
    monkeypatch.chdir(tmp_path)
    (tmp_path / "p.toml").write_text(pack_text(rule_toml("a", "true")))
    (tmp_path / "s.json").write_text(json.dumps({"train": {"length": "long"}}))
    assert main(["simulate", "s.json", "--pack", "p.toml"]) == 2
    assert "world.train.length: expected a length" in capsys.readouterr().err


def test_demo_counterexample_replays_as_scenario(tmp_path, monkeypatch, capsys):
    monkeypatch.chdir(ROOT)
    f = "counterexamples/kestrel-quay/rounding-keeps-doubts.json"
    assert main(["simulate", f, "--pack", "rules/demo/kestrel-quay.toml"]) == 1
    assert "VIOLATED        rounding-keeps-doubts" in capsys.readouterr().out


def test_a_counterexample_of_a_rule_that_now_holds_is_kept_and_named(tmp_path, capsys, monkeypatch):
    """Nothing lost: the old file stays, and check says it no longer matches the verdict."""
    from conftest import pack_text, rule_toml
    monkeypatch.chdir(tmp_path)
    (tmp_path / "p.toml").write_text(pack_text(rule_toml("r", "legs.count == 0"), legs=1))
    assert main(["check", "p.toml"]) == 1
    cex = tmp_path / "counterexamples" / "t" / "r.json"
    assert cex.exists()
    capsys.readouterr()
    (tmp_path / "p.toml").write_text(pack_text(rule_toml("r", "legs.count <= 1"), legs=1))
    assert main(["check", "p.toml"]) == 0
    err = capsys.readouterr().err
    assert cex.exists()
    assert "note: counterexamples/t/r.json is from an earlier run: rule r now holds" in err


def test_no_path_and_no_rules_folder_says_what_the_default_is(tmp_path, capsys, monkeypatch):
    monkeypatch.chdir(tmp_path)
    assert main(["check"]) == 2
    assert "no PATH given and no rules/ folder here" in capsys.readouterr().err

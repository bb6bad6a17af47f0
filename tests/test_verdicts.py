"""Verdicts, budgets and exit codes (DESIGN 5)."""

from __future__ import annotations

import json

from conftest import pack_text, rule_toml
from verifier.cli import main
from verifier.api import CheckOptions, check_rule
from verifier.run.engine import PackResult, RuleResult, exit_code
from verifier.run.loader import load_pack

HARD = ("along(report.q_dirlrbg, actual.front - rbc.min_safe_front) >= 0 m and "
        "along(report.q_dirlrbg, rbc.max_safe_front - actual.front) >= 0 m")


def test_tiny_budget_gives_unknown_never_holds(write_pack, tmp_path):
    pack = load_pack(write_pack(pack_text(rule_toml("hard", HARD, "rbc.placed"), legs=2)))
    res = check_rule(pack, pack.rules[0], CheckOptions(rlimit=2000, out=tmp_path))
    assert res.verdict == "unknown"
    # with the default budget the same rule is proved
    assert check_rule(pack, pack.rules[0], CheckOptions(out=tmp_path)).verdict == "holds"


def test_cli_unknown_exits_3(tmp_path, capsys, monkeypatch):
    monkeypatch.chdir(tmp_path)
    (tmp_path / "p.toml").write_text(pack_text(rule_toml("hard", HARD, "rbc.placed"), legs=2))
    assert main(["check", "p.toml", "--rlimit", "2000", "--json"]) == 3
    doc = json.loads(capsys.readouterr().out)
    assert doc["summary"]["unknown"] == 1 and doc["summary"]["holds"] == 0


def test_json_output_shape(tmp_path, capsys, monkeypatch):
    monkeypatch.chdir(tmp_path)
    (tmp_path / "p.toml").write_text(pack_text(
        rule_toml("ok", "legs.count <= 1") + rule_toml("bad", "legs.count == 0")
        + rule_toml("never", "true", "lrbg.read > lrbg.balises"), legs=1))
    assert main(["check", "p.toml", "--json"]) == 1
    doc = json.loads(capsys.readouterr().out)
    rules = {r["id"]: r for r in doc["packs"][0]["rules"]}
    # DESIGN 7, with the proof kind and the lemmas of DESIGN 4.7
    assert set(doc) == {"packs", "errors", "summary", "lemma_summary"}
    assert set(doc["packs"][0]) == {"name", "path", "scope", "rules", "lemmas"}
    assert set(rules["ok"]) == {"id", "verdict", "bound", "seconds", "counterexample", "witness",
                                "message", "proof", "counterexample_to_induction"}
    assert rules["ok"]["proof"] == {"kind": "bounded", "legs": 1}
    assert rules["ok"]["verdict"] == "holds" and rules["ok"]["witness"] is not None
    assert rules["bad"]["verdict"] == "violated"
    assert rules["bad"]["counterexample"] == "counterexamples/t/bad.json"
    assert rules["never"]["verdict"] == "vacuous"
    assert doc["summary"] == {"holds": 1, "violated": 1, "vacuous": 1, "bounded": 0, "unknown": 0,
                              "error": 0}


def test_vacuous_alone_exits_1(tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    (tmp_path / "p.toml").write_text(pack_text(rule_toml("never", "true", "train.length < 1 m")))
    assert main(["check", "p.toml"]) == 1


def _r(verdict, kind=""):
    return RuleResult("p", "r", "t", 1, verdict, 1, 0.0, kind=kind)


def test_exit_code_precedence_4_2_1_3():
    # DESIGN 5: when several apply, the first of 4, 2, 1, 3 wins
    def code(*vs, bad_input=False):
        return exit_code([PackResult("p", "p.toml", tuple(vs))], bad_input)
    assert code(_r("holds")) == 0
    assert code(_r("unknown")) == 3
    assert code(_r("unknown"), _r("violated")) == 1
    assert code(_r("unknown"), _r("vacuous")) == 1
    assert code(_r("violated"), bad_input=True) == 2
    assert code(_r("violated"), _r("error", "internal"), bad_input=True) == 4


def test_bound_precedence(write_pack, tmp_path):
    # DESIGN 3: --legs, then the rule's legs, then the pack's, then 3
    text = pack_text(rule_toml("a", "legs.count <= 1") + "legs = 1\n" + rule_toml("b", "legs.count <= 1"), legs=2)
    pack = load_pack(write_pack(text))
    a, b = pack.rules
    assert (pack.bound_for(a), pack.bound_for(b), pack.bound_for(a, 4)) == (1, 2, 4)
    assert check_rule(pack, a, CheckOptions(out=tmp_path)).verdict == "holds"
    assert check_rule(pack, b, CheckOptions(out=tmp_path)).verdict == "violated"
    assert check_rule(pack, a, CheckOptions(legs=2, out=tmp_path)).verdict == "violated"


def test_vacuous_rule_names_the_conflicting_parts_of_its_given(write_pack, tmp_path):
    # train.length is at most 1000 m in the default scope (DESIGN 4.1): the first item is
    # impossible on its own; the two read counts contradict each other.
    text = pack_text(rule_toml("long", "true", "passage.seen != unknown and train.length > 2 km")
                     + rule_toml("clash", "true", "lrbg.read == 1 and cab_changes == 0 and lrbg.read >= 2"))
    pack = load_pack(write_pack(text))
    long_, clash = (check_rule(pack, r, CheckOptions(out=tmp_path)) for r in pack.rules)
    assert long_.verdict == clash.verdict == "vacuous"
    assert "'train.length > 2 km' is impossible" in long_.message
    assert "'lrbg.read == 1' and 'lrbg.read >= 2' cannot hold together" in clash.message
    assert "cab_changes" not in clash.message


def test_an_undecided_question_is_decided_by_number_of_legs(write_pack, tmp_path, whole_check_refused):
    """Split by legs.count, fewest first, gives the very verdicts and minimal worlds of the
    whole check: the least violating count is the first satisfiable case (DESIGN 6 ladder)."""
    text = pack_text(rule_toml("hard", HARD, "rbc.placed")
                     + rule_toml("two-legs-cab", "cab_changes <= 1", "legs.count == 2")
                     + rule_toml("never", "true", "lrbg.read > lrbg.balises"), legs=2)
    pack = load_pack(write_pack(text))
    plain = {r.id: check_rule(pack, r, CheckOptions(out=tmp_path / "plain")) for r in pack.rules}
    refused = whole_check_refused()
    split = {r.id: check_rule(pack, r, CheckOptions(out=tmp_path / "split")) for r in pack.rules}
    assert refused                       # the seeded limit did bite
    for rid in plain:
        a, b = plain[rid], split[rid]
        assert (a.verdict, a.witness, a.message) == (b.verdict, b.witness, b.message), rid
    assert [split[r].verdict for r in ("hard", "two-legs-cab", "never")] == ["holds", "violated", "vacuous"]
    # the counterexample needs both legs to change cab: 2 legs, 2 cab changes, found in case 2
    files = sorted((tmp_path / "split").rglob("*.json"))
    assert [f.name for f in files] == ["two-legs-cab.json"]
    same = tmp_path / "plain" / files[0].relative_to(tmp_path / "split")
    assert files[0].read_bytes() == same.read_bytes()          # byte for byte
    legs = json.loads(files[0].read_text())["world"]["legs"]
    assert len(legs) == 2 and all(leg["cab_change"] for leg in legs)

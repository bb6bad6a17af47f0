"""``verifier check --crosscheck``: second solver on the same obligations, boundary worlds
replayed in the simulator, and any disagreement turned into an internal error (exit 4)."""

import json
from pathlib import Path

import pytest

from verifier import crosscheck
from verifier.cli import main
from verifier.loader import load_pack
from verifier.smt import second
from verifier.smt.concrete import boundary_worlds
from verifier.world.scenario import world_from_flat
from verifier.world.sim import State, applies, evaluate, scope_problems

ROOT = Path(__file__).resolve().parent.parent
PACK = ROOT / "tests" / "packs" / "diff-export.toml"
pytestmark = pytest.mark.skipif(not second.available(), reason="cvc5 (verifier[crosscheck]) not installed")


def _run(capsys, *extra):
    code = main(["check", str(PACK), "--no-files", "--no-cache", "--json", "--crosscheck", *extra])
    return code, json.loads(capsys.readouterr().out)


def test_crosscheck_agrees_and_says_which_checks_ran(capsys):
    code, doc = _run(capsys)
    assert code == 1                               # one violated, one vacuous rule, on purpose
    verdicts = {r["id"]: r["verdict"] for r in doc["packs"][0]["rules"]}
    assert verdicts == {"cab-change-flips": "violated", "seen-known-with-two-balises": "holds",
                        "no-such-world": "vacuous", "second-leg-counted": "holds",
                        "travel-rounded": "holds"}
    xc = doc["crosscheck"]
    assert len(xc["checks"]) == 3
    assert "second solver" in xc["checks"][0] and "cvc5" in xc["checks"][0]
    assert "boundary worlds" in xc["checks"][1] and "replayed" in xc["checks"][2]
    c = xc["counts"]
    assert c["obligations"] == 9 and c["second_agree"] == 9 and c["disagreements"] == 0
    assert c["boundary_worlds"] >= 8


def test_table_output_names_the_checks(capsys):
    code = main(["check", str(PACK), "--no-files", "--no-cache", "--crosscheck", "--rule", "travel-rounded"])
    out = capsys.readouterr().out
    assert code == 0
    assert "crosscheck: (a) same obligation, second solver" in out
    assert "agreed on 2 of 2 obligations" in out


def test_second_solver_disagreement_is_an_internal_error(capsys, monkeypatch):
    """Seeded fault: the second solver answers the opposite of z3 on every obligation."""
    real = second.solve_text

    def contrary(text, timeout=60.0, parse_only=False):
        ans = real(text, timeout, parse_only)
        flipped = {"sat": "unsat", "unsat": "sat"}.get(ans.status, ans.status)
        return second.Answer(flipped, ans.reason, ans.seconds)
    monkeypatch.setattr(second, "solve_text", contrary)
    code, doc = _run(capsys, "--rule", "seen-known-with-two-balises")
    assert code == 4
    rule = doc["packs"][0]["rules"][0]
    assert rule["verdict"] == "error"
    assert "z3 verdict holds" in rule["message"] and "cvc5 1.4.2 says sat" in rule["message"]


def test_simulator_disagreement_on_a_boundary_world_is_an_internal_error(capsys, monkeypatch):
    """Seeded fault: the simulator's expect is negated, so the boundary replay must disagree."""
    monkeypatch.setattr(crosscheck, "evaluate", lambda node, st, env: not evaluate(node, st, env))
    code, doc = _run(capsys, "--rule", "travel-rounded")
    assert code == 4
    msg = doc["packs"][0]["rules"][0]["message"]
    assert "solver says expect is True, simulator says False" in msg


def test_missing_cvc5_is_a_usage_error(capsys, monkeypatch):
    monkeypatch.setattr(second, "available", lambda: False)
    code = main(["check", str(PACK), "--no-files", "--no-cache", "--crosscheck"])
    assert code == 2
    assert "verifier[crosscheck]" in capsys.readouterr().err


def test_boundary_worlds_are_distinct_in_scope_and_replay():
    pack = load_pack(PACK)
    rule = pack.rule("travel-rounded")
    samples = boundary_worlds(pack, rule, 2, count=4)
    assert len(samples) >= 3
    worlds = [world_from_flat(s.world) for s in samples]
    assert len(set(worlds)) == len(worlds)
    for s, w in zip(samples, worlds):
        assert scope_problems(w, pack.scope, 2) == []
        st = State(pack, w)
        assert applies(rule, st) and s.given
        assert bool(evaluate(rule.expect.node, st, {})) == s.expect
    # the first question asks for a world on the boundary of the rounding comparison
    assert samples[0].why.startswith("on the boundary of abs(round_to(est.travelled, 1 m)")


def test_a_vacuous_verdict_with_a_world_of_the_given_is_a_disagreement():
    pack = load_pack(PACK)
    n, problems = crosscheck._boundary(pack, pack.rule("travel-rounded"), 2, "vacuous", 1, 10.0)
    assert n == 1 and "verdict is vacuous" in problems[0]

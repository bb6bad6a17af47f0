"""A pack's rules assume the lemmas proved over every world they cover (solve.lemma_facts).

A proved lemma is true in every world in scope, so assuming it may change the solver's work but
never an answer. The tests below each fail if the engine assumed a lemma it had not proved over
the rule's worlds, or if assuming one changed a verdict, a witness or a counterexample. Every
expected verdict is worked by hand in the test.
"""

from __future__ import annotations

from pathlib import Path

from conftest import pack_text, rule_toml

from verifier.api import CheckOptions, check_packs
from verifier.run.engine import usable_lemmas
from verifier.run.loader import load_pack

ROOT = Path(__file__).resolve().parent.parent


def lemma_toml(lid: str, expect: str) -> str:
    return f'[[lemma]]\nid = "{lid}"\ntitle = "{lid}"\nexpect = "{expect}"\n'


def run(path, **kw):
    kw.setdefault("out", None)
    return {r.rule: r for r in check_packs([load_pack(path)], CheckOptions(**kw))[0].results}


def test_a_false_lemma_is_never_assumed(write_pack):
    # by hand: with up to 2 legs a world of one leg exists, so "legs.count == 0" is false; were
    # it assumed, "legs.count <= 0" would look proved. It must stay violated at 1 leg.
    path = write_pack(pack_text(lemma_toml("never-moves", "legs.count == 0")
                                + rule_toml("stands-still", "legs.count <= 0"), legs=2))
    res = run(path)
    assert res["never-moves"].verdict == "violated"
    assert res["stands-still"].verdict == "violated"
    assert res["stands-still"].world["legs"] and len(res["stands-still"].world["legs"]) == 1


def test_a_lemma_that_holds_up_to_fewer_legs_is_not_assumed_beyond(write_pack):
    # by hand: lemmas are proved for any number of legs. "legs.count <= 5" holds up to 5 legs
    # and is not inductive; with --max-legs 4 it is bounded: holds up to 4 legs. A rule checked
    # up to 6 legs (its own bound) that says the same is violated by a world of 6 legs; had
    # the lemma been assumed there, it would look proved.
    path = write_pack(pack_text(lemma_toml("at-most-five", "legs.count <= 5")
                                + lemma_toml("never-moves", "legs.count == 0")
                                + rule_toml("also-at-most-five", "legs.count <= 5") + "legs = 6\n",
                                legs=1))
    res = run(path, max_legs=4)
    assert res["at-most-five"].verdict == "bounded" and res["at-most-five"].bound == 4
    assert res["also-at-most-five"].verdict == "violated"
    assert len(res["also-at-most-five"].world["legs"]) == 6
    # which lemmas a bounded check may assume: the bounded one up to its 4 legs, never the
    # false one
    pack = load_pack(path)
    proved = [(lem, res[lem.id]) for lem in pack.lemmas]
    assert [lem.id for lem in usable_lemmas(proved, 3)] == ["at-most-five"]
    assert [lem.id for lem in usable_lemmas(proved, 4)] == ["at-most-five"]
    assert [lem.id for lem in usable_lemmas(proved, 5)] == []


def test_assumed_lemmas_change_no_answer_on_the_shipped_envelope_rules(tmp_path):
    # The envelope rules of confidence-interval at 2 legs, with the pack's lemmas (proved at 2
    # legs first and assumed) and with the lemmas taken out of the pack: the same verdicts and
    # the same minimal witnesses (DESIGN 6 fixes them from the worlds alone).
    src = ROOT / "rules" / "confidence-interval.toml"
    text = src.read_text(encoding="utf-8")
    pack = load_pack(src)
    first = text.index("[[lemma]]")
    after = text.index("[[rule]]")
    bare_text = text[:first] + text[after:]
    chosen = ("real-front-inside-interval", "inside-after-one-cab-change", "safe-rear-end")
    opts = CheckOptions(out=None, legs=2, rules=chosen)
    with_lemmas = {r.rule: r for r in check_packs([pack], opts)[0].results}
    bare_path = tmp_path / "confidence-interval.toml"
    bare_path.write_text(bare_text, encoding="utf-8")
    without = check_packs([load_pack(bare_path)], opts)[0].results
    without = {r.rule: r for r in without}
    for rid in chosen:
        assert with_lemmas[rid].verdict == without[rid].verdict == "holds"
        assert with_lemmas[rid].witness == without[rid].witness


def test_under_legs_k_a_lemma_is_assumed_only_once_proved_for_any_number_of_legs(write_pack):
    # by hand: "legs.count <= 5" holds up to 5 legs and is not inductive (a state of 5 legs
    # and one more leg make 6), so under --legs 7 it is never proved first: the lemma and a
    # rule saying the same are both violated by a world of 6 legs. "cab_changes <= legs.count"
    # is inductive (a leg adds at most one change of cab): proved first, its own check up to
    # 7 legs says so.
    path = write_pack(pack_text(lemma_toml("at-most-five", "legs.count <= 5")
                                + lemma_toml("a-change-a-leg", "cab_changes <= legs.count")
                                + rule_toml("also-at-most-five", "legs.count <= 5"), legs=2))
    res = run(path, legs=7)
    assert res["at-most-five"].verdict == "violated"
    assert res["also-at-most-five"].verdict == "violated"
    assert len(res["also-at-most-five"].world["legs"]) == 6
    assert "" == res["at-most-five"].message or "k-induction first" not in res["at-most-five"].message
    assert res["a-change-a-leg"].verdict == "holds" and res["a-change-a-leg"].bound == 7
    assert "proved for any number of legs by k-induction first" in res["a-change-a-leg"].message

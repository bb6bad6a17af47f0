"""Rules for any number of legs that the induction step does not prove (DESIGN 4.7): the base
case deepened before the answer is `bounded`, vacuity decided for any number of legs, quantifier
bodies that read G1 or an information item, and legs[i] reached through a let.

Every expected leg count is worked by hand in the test: the tool's output is never pasted back.
"""

from __future__ import annotations

import json

import pytest
from conftest import pack_text, rule_toml

from verifier.api import CheckOptions, check_packs
from verifier.check.unbounded import plan_for, rule_formulas
from verifier.cli import main
from verifier.errors import PackError
from verifier.run.engine import proof_words
from verifier.run.loader import load_pack

EXACT = 'leg_distance = ["0 m", "10 m"]\nodometry_over = { fixed = "0 m", rate = "0 %" }\n' \
        'odometry_under = { fixed = "0 m", rate = "0 %" }\ndetection = "0 m"'
ITEM = '[[info]]\nid = "eoa"\ngroup = 1\nat = "500 m"\nvalid = "{valid}"\n'


def any_pack(write_pack, rules: str, *, world: str = "", extra: str = ""):
    text = pack_text(rules, legs=3, world=world, extra=extra)
    return write_pack(text.replace("legs = 3", 'legs = "any"'))


def run(path, **kw):
    kw.setdefault("out", None)
    return {r.rule: r for r in check_packs([load_pack(path)], CheckOptions(**kw))[0].results}


# ---- deepening the base case (issue 17, point 3) ---------------------------------------------

def test_a_count_false_at_5_legs_is_violated_at_5_legs(write_pack, tmp_path):
    # by hand: with at most 4 legs at most 4 of them run backward; 5 legs all backward make 5.
    # The base case is up to 3 legs; the step fails (a state with 4 backward legs, one more).
    p = any_pack(write_pack, rule_toml("few-backward", "count(l in legs: l.running == backward) <= 4"))
    out = tmp_path / "cx"
    got = run(p, out=out)["few-backward"]
    assert got.verdict == "violated" and got.bound == 5 and not got.unbounded
    assert got.proof["deepened_from"] == 3 and proof_words(got) == "at 5 legs"
    assert "holds up to 4, fails at 5" in got.message
    doc = json.loads((out / "t" / "few-backward.json").read_text())
    assert doc["format"] == "verifier-counterexample/1" and doc["bound"] == 5
    legs = doc["world"]["legs"]
    assert len(legs) == 5 and all(leg["running"] == "backward" for leg in legs)
    assert not (out / "t" / "few-backward.induction.json").exists()


def test_cab_changes_at_most_6_is_violated_at_7_legs(write_pack):
    # by hand: one cab change a leg at most, so 7 changes need 7 legs
    p = any_pack(write_pack, rule_toml("few-cabs", "cab_changes <= 6"), world=EXACT)
    got = run(p)["few-cabs"]
    assert got.verdict == "violated" and got.bound == 7 and got.minimal
    assert "cab_changes is 7" in got.message


def test_a_sum_of_odometer_readings_is_violated_at_the_first_leg_count_that_exceeds_it(write_pack):
    # by hand: legs of at most 10 m read exactly, so 4 legs read at most 40 m and 5 legs up to
    # 50 m: the least violating world has 5 legs
    p = any_pack(write_pack, rule_toml("odometer-sum", "sum(l in legs: l.odometer) <= 40 m"), world=EXACT)
    got = run(p)["odometer-sum"]
    assert got.verdict == "violated" and got.bound == 5 and got.minimal


def test_deepening_stops_at_max_legs_and_says_how_far_it_holds(write_pack, tmp_path, monkeypatch):
    p = any_pack(write_pack, rule_toml("few-cabs", "cab_changes <= 6"))
    out = tmp_path / "cx"
    got = run(p, out=out, max_legs=5)["few-cabs"]
    assert got.verdict == "bounded" and got.bound == 5 and got.proof["legs"] == 5
    assert "holds up to 5 legs (the base case deepened from 3 legs)" in got.message
    cti = json.loads((out / "t" / "few-cabs.induction.json").read_text())
    assert cti["bound"] == 5
    # the same through the command line: bounded keeps exit code 3
    monkeypatch.chdir(tmp_path)
    assert main(["check", str(p), "--max-legs", "5", "--no-files", "--no-cache"]) == 3
    with pytest.raises(SystemExit) as bad:          # argparse: a usage error
        main(["check", str(p), "--max-legs", "99"])
    assert bad.value.code == 2


def test_deepening_stops_when_its_budget_runs_out(write_pack, monkeypatch):
    from verifier.run import induct
    monkeypatch.setattr(induct, "deepening_budget", lambda rlimit: 0)
    p = any_pack(write_pack, rule_toml("few-cabs", "cab_changes <= 6"))
    got = run(p)["few-cabs"]
    assert got.verdict == "bounded" and got.bound == 3
    assert "the deepening budget ran out before 4 legs" in got.message


def test_a_rule_proved_by_induction_is_not_deepened(write_pack, monkeypatch):
    from verifier.run import engine
    calls = []
    monkeypatch.setattr(engine, "_deepened", lambda *a: calls.append(a))
    p = any_pack(write_pack, rule_toml("cabs", "cab_changes <= legs.count"))
    got = run(p)["cabs"]
    assert got.verdict == "holds" and got.unbounded and calls == []


# ---- vacuity for any number of legs (point 2) -------------------------------------------------

def test_a_given_impossible_up_to_the_base_case_only_is_not_vacuous(write_pack):
    # the issue's example: legs.count >= 4 cannot hold up to 3 legs, but it can at 4, where
    # 3 cab changes break cab_changes <= 2 (by hand: 4 legs, the first three change cab)
    p = any_pack(write_pack, rule_toml("four", "cab_changes <= 2", "legs.count >= 4"))
    got = run(p)["four"]
    assert got.verdict == "violated" and got.bound == 4
    assert "cab_changes is 3" in got.message
    # a bounded pack keeps its vacuity up to its bound
    bounded = write_pack(pack_text(rule_toml("four", "cab_changes <= 2", "legs.count >= 4"), legs=3), "b.toml")
    got = run(bounded)["four"]
    assert got.verdict == "vacuous" and "(up to 3 legs)" in got.message


def test_vacuous_for_any_number_of_legs_when_the_negation_is_proved(write_pack):
    # no state after any number of legs has more cab changes than legs (a fact of the domain)
    p = any_pack(write_pack, rule_toml("never", "legs.count >= 0", "cab_changes > legs.count"))
    got = run(p)["never"]
    assert got.verdict == "vacuous" and got.unbounded and proof_words(got) == "any number of legs"
    assert "for any number of legs" in got.message and "up to 3 legs" not in got.message


def test_a_given_never_met_up_to_max_legs_but_not_proved_is_bounded(write_pack, monkeypatch):
    # legs.count >= 6 is impossible up to 5 legs, possible at 6: with --max-legs 5 the tool
    # knows only that no world of up to 5 legs satisfies it
    p = any_pack(write_pack, rule_toml("six", "cab_changes <= 1", "legs.count >= 6"))
    got = run(p, max_legs=5)["six"]
    assert got.verdict == "bounded" and got.bound == 5
    assert "up to 5 legs" in got.message and "that it never holds is not proved" in got.message
    monkeypatch.chdir(p.parent)
    assert main(["check", str(p), "--max-legs", "5", "--no-files", "--no-cache"]) == 3


# ---- quantifier bodies reading G1 or an information item (point 4) ----------------------------

def test_a_body_reading_g1_is_carried_as_static(write_pack):
    # one group: G1 is the LRBG, at most 8 balises, so no leg sees more than 8 (by hand)
    p = any_pack(write_pack, rule_toml("g1", "count(l in legs: g1.balises > 8 or lrbg.group != 1) == 0"))
    got = run(p)["g1"]
    assert got.verdict == "holds" and got.unbounded


def test_accepted_in_a_body_is_a_parameter_of_the_state(write_pack):
    # the default onboard accepts an item by the train's orientation, which cab changes flip:
    # the body is read at the state, one accumulator per value (DESIGN 4.7)
    # beside it, the item's data next to a leg field is static (no parameter), and where a
    # one-way item really is (500 m) is read as a Bool of the state
    rule = rule_toml("accepted", "count(l in legs: info.eoa.accepted) <= legs.count") + rule_toml(
        "item", "all(l in legs: l.distance <= info.eoa.at + 4500 m and info.eoa.real == 500 m)")
    p = any_pack(write_pack, rule, extra=ITEM.format(valid="nominal"))
    pack = load_pack(p)
    plan = plan_for(pack, rule_formulas(pack.rule("accepted")))
    fam = [f for f in plan.accumulators if f.text == "count(l in legs: $1)"]
    assert plan.unsupported == () and len(fam) == 1 and len(fam[0].params) == 1
    got = run(p)
    assert got["accepted"].verdict == "holds" and got["accepted"].unbounded
    assert got["item"].verdict == "holds" and got["item"].unbounded


def test_the_issues_accepted_count_is_refuted_not_a_crash(write_pack):
    # count(l in legs: info.eoa.accepted) <= 5: a both-ways item is always accepted, so 6 legs
    # make 6 (by hand)
    p = any_pack(write_pack, rule_toml("info-count", "count(l in legs: info.eoa.accepted) <= 5"),
                 extra=ITEM.format(valid="both"))
    got = run(p)["info-count"]
    assert got.verdict == "violated" and got.bound == 6


def test_where_a_both_ways_item_really_is_changes_with_the_legs(write_pack):
    # a both-ways item lies along the train's orientation, which cab changes flip: a Length
    # that changes, so the state cannot carry one value per case (and nothing crashes)
    p = any_pack(write_pack, rule_toml("real", "all(l in legs: l.distance <= info.eoa.real + 5500 m)"),
                 extra=ITEM.format(valid="both"))
    got = run(p, max_legs=3)["real"]
    assert got.verdict == "bounded" and got.proof["induction"] == "not attempted"
    assert "info.eoa.real" in got.message and "is a Length" in got.message


# ---- legs[i] through a let (point 6) ----------------------------------------------------------

def test_legs_i_through_a_let_makes_the_implicit_premise(write_pack):
    lets = '[let]\nsecond_cab = "legs[2].cab_change"\n'
    p = write_pack(pack_text(rule_toml("second", "cab_changes <= 2", "not second_cab"), legs=3, extra=lets))
    pack = load_pack(p)
    assert pack.rule("second").premise_legs == 2
    got = run(p)["second"]
    assert got.verdict == "holds" and got.premise == "legs.count >= 2"
    assert len(got.witness["legs"]) >= 2


def test_legs_i_through_a_let_is_refused_in_a_design_formula(write_pack):
    lets = '[let]\nsecond_cab = "legs[2].cab_change"\n[onboard]\nq_dlrbg = "if second_cab then unknown else unknown"\n'
    p = write_pack(pack_text(rule_toml("r", "cab_changes <= 3"), extra=lets))
    with pytest.raises(PackError) as err:
        load_pack(p)
    text = err.value.diagnostics[0].message
    assert "legs[2] cannot be used in a design formula" in text and "let 'second_cab'" in text

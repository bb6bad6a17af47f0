"""Margins (DESIGN 9): slack, thresholds of the real world's bounds, the assumptions a proof
needs; the command, its JSON and the report's section.

The hand-worked values of the shipped confidence-interval pack are in test_facts.py; here: the
split between the real world and the designs, the cores (each needed assumption removed alone
lets a violating world in: one solve each), replay in the simulator, and the outputs."""

from __future__ import annotations

import json
from fractions import Fraction as F
from pathlib import Path

import pytest

from conftest import pack_text, rule_toml
from verifier.cli import main
from verifier.lang.scope import Bound, with_bound
from verifier.run.loader import load_pack
from verifier.run.margin import MarginOptions, margins
from verifier.smt import margin as M
from verifier.world.scenario import world_from_flat
from verifier.world.sim import Leg, State, World, applies, holds, scope_problems
from verifier.lang.vocab import Running

RULES = Path(__file__).parent.parent / "rules"


def _shipped(rule_id):
    pack = load_pack(RULES / "confidence-interval.toml")
    return pack, next(r for r in pack.rules if r.id == rule_id)


def test_vary_moves_the_real_world_only():
    # a real over-reading rate of 10 % admits a world that the pack's 5 % does not, while the
    # onboard's bound (est.bound_over, read by the default doubt formulas) keeps the pack's
    # 5 m + 5 % x 1000 m + 1 m = 56 m (SUBSET-041 5.3.1.1 from memory, as in test_facts.py)
    pack, _ = _shipped("real-front-inside-interval")
    world = World(balises=2, read=2, locacc=F(0), antenna=F(2), length=F(200),
                  legs=(Leg(False, Running.FORWARD, F(900), F(1000)),))   # over-read by 100 m
    real = with_bound(pack.scope, "odometry_over.rate", F(1, 10))
    assert real.odometry_over == Bound(F(5), F(1, 10))
    assert scope_problems(world, pack.scope, 1) != []      # 100 > 5 + 50 + 1
    assert scope_problems(world, real, 1) == []            # 100 <= 5 + 100 + 1
    assert State(pack, world).get("est.bound_over") == 56


def test_core_each_needed_assumption_alone_lets_a_violation_in():
    pack, rule = _shipped("real-front-inside-interval")
    core = M.core(pack, rule, 1)
    # the envelope rests on the reading-error bounds and the detection error, and on the doubt
    # and trackside formulas; it holds whatever the train length, the antenna, the leg distance
    assert {"world.detection", "world.odometry_over", "world.odometry_under",
            "[onboard] l_doubtover", "[onboard] l_doubtunder"} <= set(core.needed)
    assert {"world.train_length.low", "world.train_length.high", "world.antenna.high",
            "world.leg_distance"} <= set(core.not_needed)
    assert core.undecided == ()
    for name in core.needed:      # one solve each: without it alone the rule fails
        found = M.world_without(pack, rule, 1, name)
        assert found, name
        if name.startswith("world."):
            # the simulator agrees: the world is outside the scope, and the rule fails in it
            world = world_from_flat(found)
            assert scope_problems(world, pack.scope, 1) != [], name
            st = State(pack, world)
            assert applies(rule, st) and not holds(rule, st), name
    for name in core.not_needed[:2]:
        assert M.needed_alone(pack, rule, 1, name) is False, name


def _small(write_pack, rules, **kw):
    return load_pack(write_pack(pack_text(rules, legs=1, **kw)))


def test_margins_replayed_and_not_a_distance_rule(write_pack, tmp_path):
    # the train's front is where the antenna is plus the antenna's offset: a hand-worked slack.
    # train.length - train.antenna >= 0 m has slack 0 when the antenna may be at the front's end...
    # here the scope puts the antenna at 2..30 m and the train at 100..200 m: least 100 - 30 = 70 m
    rules = (rule_toml("gap", "train.length - train.antenna >= 60 m")
             + rule_toml("known", "passage.seen != unknown", given="lrbg.read >= 2")
             + rule_toml("broken", "actual.front == est.front"))
    pack = _small(write_pack, rules, world='train_length = ["100 m", "200 m"]')
    run = margins(pack, MarginOptions(vary=("train_length.low", "detection"), core=False,
                                      out=tmp_path / "out"), files=_files(tmp_path / "out"))
    by = {m.rule: m for m in run.rules}
    gap = by["gap"]
    assert gap.errors == ()
    (s,) = gap.slacks
    assert (s.status, s.low, s.high) == ("slack", F(10), F(10))    # 100 - 30 - 60
    low, det = gap.thresholds
    # the rule fails once a train shorter than 90 m (30 m antenna + 60 m) is in scope
    assert (low.status, low.holds_at, low.fails_at) == ("exact", F(90), F(90) - F(1, 1000))
    assert det.status == "beyond"             # the rule does not read the detection error
    assert Path(gap.files["slack"]).exists() and Path(gap.files["train_length.low"]).exists()
    assert by["known"].slacks == () and by["known"].verdict == "holds"
    assert by["broken"].verdict == "violated" and by["broken"].thresholds == ()


def test_a_bound_the_core_does_not_need_is_not_searched_and_the_search_agrees(write_pack):
    # the same rule as above: its proof needs the train's least length and the antenna's
    # greatest offset, never the detection error, so the detection error's threshold is
    # "holds whatever it is" without a search; the search itself (core off) finds no failure
    # up to its limit, and the train length's threshold is searched as before
    rules = rule_toml("gap", "train.length - train.antenna >= 60 m")
    pack = _small(write_pack, rules, world='train_length = ["100 m", "200 m"]')
    opts = dict(vary=("train_length.low", "detection"), out=None)
    (with_core,) = margins(pack, MarginOptions(**opts)).rules
    (searched,) = margins(pack, MarginOptions(core=False, **opts)).rules
    assert {"world.train_length.low", "world.antenna.high"} <= set(with_core.core.needed)
    assert "world.detection" in with_core.core.not_needed
    low, det = with_core.thresholds
    assert (det.status, det.holds_at, det.fails_at) == ("not_needed", None, None)
    assert "world.detection" in det.reason
    assert (low.status, low.holds_at) == ("exact", F(90))
    assert searched.thresholds[1].status == "beyond" and searched.thresholds[0] == low


def test_slack_of_each_pair_of_a_chain(write_pack):
    # the antenna is 2..30 m behind the front (the default [world] antenna range): in
    # 1 m <= train.antenna <= 40 m the first pair is at least 2 - 1 = 1 m from failing, the
    # second 40 - 30 = 10 m; both worlds replayed by the simulator (no errors)
    pack = _small(write_pack, rule_toml("chain", "1 m <= train.antenna <= 40 m"))
    (m,) = margins(pack, MarginOptions(vary=(), core=False)).rules
    assert m.errors == ()
    assert [(s.status, s.high, s.index) for s in m.slacks] == [("slack", F(1), 0), ("slack", F(10), 1)]


def _files(out):
    from verifier.evidence.files import Files
    return Files(out)


def test_cli_margin_json_deterministic_and_table(write_pack, tmp_path, capsys, monkeypatch):
    monkeypatch.chdir(tmp_path)
    path = write_pack(pack_text(rule_toml("gap", "train.length - train.antenna >= 60 m"), legs=1,
                                world='train_length = ["100 m", "200 m"]'))
    args = ["margin", str(path), "--vary", "train_length.low", "--no-files", "--json"]
    assert main(args) == 0
    first = capsys.readouterr().out
    assert main(args) == 0
    assert capsys.readouterr().out == first       # the same input, byte-identical JSON
    doc = json.loads(first)
    (r,) = doc["rules"]
    assert r["least_slack"]["high"] == "10" and r["thresholds"][0]["holds_at"] == "90"
    assert "world.train_length.low" in r["assumptions"]["needed"]
    assert main(["margin", str(path), "--vary", "train_length.low", "--no-files",
                 "--report", "rep"]) == 0
    out = capsys.readouterr().out
    assert "gap" in out and "holds down to 90 m" in out and "stated model" in out
    page = (tmp_path / "rep" / "index.html").read_text(encoding="utf-8")
    assert 'id="margins"' in page and "holds down to 90 m" in page
    assert "margins" in json.loads((tmp_path / "rep" / "manifest.json").read_text(encoding="utf-8"))


def test_cli_margin_usage_errors(write_pack, capsys):
    path = write_pack(pack_text(rule_toml("r", "true"), legs=1))
    assert main(["margin", str(path), "--vary", "detecton", "--no-files"]) == 2
    assert "did you mean 'detection'" in capsys.readouterr().err


@pytest.mark.thorough
def test_every_default_key_of_the_main_envelope():
    # real-front-inside-interval at 1 leg, every default key (about 20 s): the reading-error
    # bounds and the detection error are the design's own figures (worked in test_facts.py);
    # the rest never make it fail: the onboard reads the Q_LOCACC the group sends (its offset
    # stays within it), the rule reads the front only (any train length), and a leg long enough
    # to leave the codable range leaves the rule's given (rbc.placed) too
    pack, rule = _shipped("real-front-inside-interval")
    (m,) = margins(pack, MarginOptions(rules=(rule.id,), legs=1)).rules
    assert m.errors == ()
    got = {t.key: (t.status, t.holds_at) for t in m.thresholds}
    assert got == {
        "odometry_over.rate": ("exact", F(1, 20)), "odometry_under.rate": ("exact", F(1, 20)),
        "odometry_over.fixed": ("exact", F(5)), "odometry_under.fixed": ("exact", F(5)),
        "detection": ("exact", F(1)),
        # the core shows the proof needs none of these bounds' constraints: no search
        "locacc.low": ("not_needed", None), "locacc.high": ("not_needed", None),
        "leg_distance.low": ("not_needed", None), "leg_distance.high": ("not_needed", None),
        "train_length.low": ("not_needed", None), "train_length.high": ("not_needed", None)}


@pytest.mark.parametrize("path, rule_id, needs", [
    # the qualifiers are the onboard's own: they hold whatever the scope's bounds
    ("position-report.toml", "qualifiers-match-the-real-train", {"[onboard] q_dirlrbg", "[onboard] q_dirtrain"}),
    # at 1 leg a relocation happens at the end of the only leg: from G2 on, the only reading
    # error is G2's detection error, so no odometry bound is needed (a leg after G2 would need it)
    ("relocation.toml", "real-front-inside-interval-after-relocation", {"world.detection"}),
])
def test_cores_of_other_shipped_packs_are_each_needed(path, rule_id, needs):
    pack = load_pack(RULES / path)
    rule = next(r for r in pack.rules if r.id == rule_id)
    core = M.core(pack, rule, 1)
    assert needs <= set(core.needed)
    assert not any(n.startswith("world.odometry") for n in core.needed)
    for name in core.needed:      # one solve each
        assert M.needed_alone(pack, rule, 1, name) is True, name

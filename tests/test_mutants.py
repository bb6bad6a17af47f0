"""Seeded mutants of a pack's onboard and trackside design (``verifier mutate PACK``)."""

import glob
import json
from pathlib import Path

import pytest

from verifier.cli import main
from verifier.errors import PackError
from verifier.run.loader import load_pack
from verifier.trust.mutate import build, mutants, run_catalogue, run_mutants

ROOT = Path(__file__).resolve().parent.parent
PACK = ROOT / "tests" / "packs" / "diff-mutants.toml"


@pytest.fixture(scope="module")
def pack():
    return load_pack(PACK)


@pytest.fixture(scope="module")
def report(pack):
    return run_mutants(pack, timeout=20)


def test_every_operator_of_the_issue_is_generated(pack):
    ops = {m.operator for m in mutants(pack)}
    assert {"flip a sign", "swap over and under", "drop a term", "change a rounding mode",
            "travelled distance replaced by displacement"} <= ops
    assert len({m.key for m in mutants(pack)}) == len(mutants(pack))


def test_mutants_load_as_ordinary_packs(pack):
    m = next(m for m in mutants(pack) if m.operator == "travelled distance replaced by displacement")
    mp = build(pack, m)
    assert "abs(est.front_passage)" in mp.onboard[m.target.split(" ")[1]].text
    assert mp.rules == pack.rules or [r.id for r in mp.rules] == [r.id for r in pack.rules]


def test_a_mutant_that_breaks_observability_is_invalid(pack):
    from verifier.trust.mutate import Mutant
    bad = Mutant("trackside est_front", "flip a sign", "rbc.d_lrbg", "actual.front",
                 "along(report.q_dlrbg, actual.front)")
    with pytest.raises(PackError):
        build(pack, bad)


def test_the_test_pack_kills_at_least_90_percent(report):
    c = report.counts()
    assert report.ratio() >= 0.90, report.text()
    assert c["killed"] >= 50
    by_op = {}
    for r in report.results:
        by_op.setdefault(r.mutant.operator, set()).add(r.status)
    # over- and under-reading bounds differ in this pack's scope, so swapping them is caught
    assert "killed" in by_op["swap over and under"]
    assert "killed" in by_op["travelled distance replaced by displacement"]
    assert "killed" in by_op["change a rounding mode"]


def test_survivors_say_why(report):
    for r in report.results:
        if r.status == "survived":
            assert r.by, r.mutant.describe()
    # dropping abs() from D_LRBG makes a negative code, sent as 32767: no rule here asks that
    # a known passage near the group is placed, so it survives (rules/fixed-scale.toml would)
    drop_abs = [r for r in report.results if r.mutant.operator == "drop abs" and "d_lrbg" in r.mutant.target]
    assert drop_abs and drop_abs[0].status == "survived"


def test_equivalent_mutants_leave_the_denominator(tmp_path):
    """With symmetric reading bounds (the defaults) swapping over and under changes nothing:
    SMT proves it and the mutant is not counted."""
    f = tmp_path / "sym.toml"
    f.write_text(PACK.read_text().replace('odometry_over = { fixed = "2 m", rate = "2 %" }\n', "")
                 .replace('odometry_under = { fixed = "6 m", rate = "8 %" }\n', "")
                 .replace('name = "diff-mutants"', 'name = "sym"'))
    p = load_pack(f)
    swap = [m for m in mutants(p) if m.target == "onboard l_doubtover" and m.original == "est.bound_over"
            and m.operator == "swap over and under"]
    from verifier.trust.mutate import CatalogueReport
    rep = run_mutants(p, timeout=20, limit=None, killed_elsewhere={m.key: "x" for m in mutants(p) if m not in swap})
    statuses = {r.status for r in rep.results if r.mutant in swap}
    assert statuses == {"equivalent"}
    assert rep.ratio() == 1.0 and isinstance(CatalogueReport((rep,), 0.0).ratio(), float)


def test_mutate_command(capsys):
    code = main(["mutate", str(PACK), "--json"])
    doc = json.loads(capsys.readouterr().out)
    assert code == 0
    assert doc["packs"][0]["counts"]["killed"] >= 50 and doc["ratio"] >= 0.9


@pytest.mark.thorough
def test_shipped_packs_kill_at_least_90_percent():
    # about 4 CPU minutes, on the two cores of CI: the longest test, run by .ci/run after the
    # README's test command (pytest -m thorough); test_the_test_pack_kills_at_least_90_percent
    # keeps a mutation analysis in every run
    """Every shipped pack except the demos (whose designs are wrong on purpose, so their rules
    are violated before any mutation) must together kill 90 % of the non-equivalent mutants.
    route.toml is left out for its cost (445 CPU s alone, measured 5 December 2026, against about
    600 for all the others): its design is the default one the other packs analyse, and the
    mutants of its own part (the list and the re-referral) are refuted in tests/test_route.py."""
    paths = sorted(p for p in glob.glob(str(ROOT / "rules" / "**" / "*.toml"), recursive=True)
                   if "/demo/" not in p and not p.endswith("/route.toml"))
    rep = run_catalogue([load_pack(p) for p in paths], timeout=20, jobs=2)
    assert rep.ratio() >= 0.90, [r.mutant.describe() for r in rep.survivors()]


def test_a_survivor_names_the_rules_left_unasked_for_an_undecided_original(pack):
    # a rule whose question about the original design was undecided is not asked about the
    # mutant: the survivor must say so, not "no rule of the pack is violated"
    from verifier.trust.mutate import _relevant, baseline, _decide_all
    m = next(x for x in mutants(pack) if x.operator == "drop abs" and "d_lrbg" in x.target)
    base = baseline(pack, 20.0)
    reader = next(r.id for r in pack.rules if _relevant(r, m) and base[r.id] == "unsat")
    (kept,) = _decide_all(pack, [m], base, 20.0, None)
    (unsure,) = _decide_all(pack, [m], {**base, reader: "unknown"}, 20.0, None)
    assert kept.status == unsure.status == "survived"
    assert "not asked" not in kept.by and "no rule of the pack is violated" in kept.by
    assert f"not asked: {reader} (undecided for the original design)" in unsure.by

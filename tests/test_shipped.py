"""The shipped packs: every rule of the assessed designs is proved, and the demo's mistakes are
refuted. The expected verdicts are argued by hand in each rule's `note` (and for the envelope,
in DESIGN 4.4: each move adds its error to the side the default doubts put it on); they were
written before the tool ran, not copied from its output."""

from __future__ import annotations

from pathlib import Path

import pytest

from verifier.engine import CheckOptions, check_packs
from verifier.loader import load_all

ROOT = Path(__file__).resolve().parent.parent

DEMO_EXPECTED = {
    "group-direction-known": "holds",               # two balises read give the direction
    "real-front-inside-interval": "violated",       # mistakes 1-3 each break it
    "doubt-covers-travelled-distance": "violated",  # mistake 1: displacement, not distance
    "rounding-keeps-doubts": "violated",            # mistake 2: nearest rounding
    "orientation-after-turning-back": "violated",   # mistake 3: cab change forgotten
    "front-stays-on-arrival-side": "violated",      # the assessor's own wrong assumption
}


@pytest.fixture(scope="module")
def results(tmp_path_factory):
    packs, diags = load_all([ROOT / "rules"])
    assert [d for d in diags if d.severity == "error"] == []
    out = tmp_path_factory.mktemp("cx")
    return {p.name: {r.rule: r for r in p.results} for p in check_packs(packs, CheckOptions(out=out))}


def test_every_pack_has_its_minimum_of_rules(results):
    assert len(results["position-report"]) >= 12
    assert len(results["confidence-interval"]) >= 10


@pytest.mark.parametrize("pack", ["position-report", "confidence-interval", "fixed-scale"])
def test_assessed_designs_are_proved(results, pack):
    bad = {rid: (r.verdict, r.message) for rid, r in results[pack].items() if r.verdict != "holds"}
    assert bad == {}
    assert all(r.witness is not None for r in results[pack].values())


def test_demo_mistakes_are_refuted(results):
    got = {rid: r.verdict for rid, r in results["kestrel-quay"].items()}
    assert got == DEMO_EXPECTED


def test_every_shipped_rule_cites_a_source_and_a_caught_mistake():
    packs, _ = load_all([ROOT / "rules"])
    for pack in packs:
        for rule in pack.rules:
            assert rule.refs, f"{pack.name}/{rule.id} has no refs"
            assert rule.note.strip(), f"{pack.name}/{rule.id} has no note"

"""``verifier selftest --report DIR`` writes one dossier with every part and the versions."""

import json
from pathlib import Path

import pytest

from verifier.trust import selftest
from verifier.smt import second

ROOT = Path(__file__).resolve().parent.parent
PACKS = ROOT / "tests" / "packs"


@pytest.mark.skipif(not second.available(), reason="cvc5 (verifier[crosscheck]) not installed")
def test_small_selftest_writes_the_dossier(tmp_path):
    plan = selftest.Plan(catalogue=(str(PACKS / "diff-export.toml"),),
                         mutant_packs=(str(PACKS / "diff-mutants.toml"),),
                         worlds=200, fuzz=200, seed=1, workers=1)
    data = selftest.run(plan, tmp_path, progress=lambda m: None)
    doc = (tmp_path / "validation.md").read_text()
    saved = json.loads((tmp_path / "validation.json").read_text())
    assert saved["passed"] == data["passed"]
    for part in ("differential", "crosscheck", "mutants", "fuzz"):
        assert part in saved and "passed" in saved[part]
    assert saved["differential"]["worlds"] == 200 and saved["differential"]["passed"]
    assert saved["crosscheck"]["counts"]["second_agree"] == 9
    assert saved["mutants"]["ratio"] >= 0.9
    assert saved["fuzz"]["inputs"] == 200
    assert saved["versions"]["z3-solver"] == "5.4.1.0" and saved["versions"]["cvc5"] == "1.4.2"
    for heading in ("## Versions", "## 1. Simulator against SMT encoding", "## 2. Same obligation, second solver",
                    "## 3. Seeded mutants", "## 4. Fuzzed input", "T2"):
        assert heading in doc
    assert "not against a real train" in doc


def test_default_plan_uses_the_profile():
    plan = selftest.default_plan(ROOT, "ci")
    assert plan.worlds == 15_000 and plan.fuzz == 10_000
    assert any(p.endswith("diff-basic.toml") for p in plan.catalogue)
    assert not any("/demo/" in p for p in plan.mutant_packs)
    assert selftest.default_plan(ROOT, "thorough").worlds == 100_000

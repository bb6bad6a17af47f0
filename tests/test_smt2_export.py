"""Exported proof obligations (``verifier check --smt2 DIR``): portable SMT-LIB 2.6 files that
z3 and cvc5 both re-solve to the engine's verdict."""

import json
from pathlib import Path

import pytest

from verifier.cli import main
from verifier.run.loader import load_pack
from verifier.smt import second
from verifier.smt.export import declared_status, nonstandard, obligations, parse_sexprs, z3_status

ROOT = Path(__file__).resolve().parent.parent
PACK = ROOT / "tests" / "packs" / "diff-export.toml"
needs_cvc5 = pytest.mark.skipif(not second.available(), reason="cvc5 (verifier[crosscheck]) not installed")


@pytest.fixture(scope="module")
def exported(tmp_path_factory):
    out = tmp_path_factory.mktemp("smt2")
    code = main(["check", str(PACK), "--no-files", "--no-cache", "--json", "--smt2", str(out)])
    return out, code


def test_one_pair_of_files_per_rule(exported, capsys):
    out, code = exported
    assert code == 1          # one rule is violated and one vacuous on purpose
    names = sorted(p.name for p in (out / "diff-export").iterdir())
    ids = [r.id for r in load_pack(PACK).rules]
    assert names == sorted([f"{i}.smt2" for i in ids] + [f"{i}.given.smt2" for i in ids])


def test_files_are_portable(exported):
    out, _ = exported
    for f in sorted(out.rglob("*.smt2")):
        text = f.read_text()
        assert "(set-logic QF_LIRA)" in text
        assert text.rstrip().endswith("(check-sat)\n(exit)")
        assert nonstandard(text) == [], f.name
        assert declared_status(text) in ("sat", "unsat")


@needs_cvc5
def test_both_solvers_agree_with_the_verdicts(exported):
    """Same obligation, second solver: z3 and cvc5 each read the file alone (cvc5 with strict
    SMT-LIB parsing) and must answer its declared status, which is the engine's verdict."""
    out, _ = exported
    expected = {"cab-change-flips": ("sat", "sat"), "seen-known-with-two-balises": ("unsat", "sat"),
                "no-such-world": ("unsat", "unsat"), "second-leg-counted": ("unsat", "sat"),
                "travel-rounded": ("unsat", "sat")}
    for rule, (violation, given) in expected.items():
        for path, want in ((out / "diff-export" / f"{rule}.smt2", violation),
                           (out / "diff-export" / f"{rule}.given.smt2", given)):
            text = path.read_text()
            assert declared_status(text) == want, path.name
            assert z3_status(text, timeout=60) == want, path.name
            answer = second.solve_text(text, timeout=60)
            assert answer.status == want, (path.name, answer.reason)


def test_nonstandard_operators_are_found():
    assert nonstandard("(declare-fun x () Int)(assert ((_ pbeq 1 1) (> x 0)))") == ["(_ pbeq 1 1)"]
    assert nonstandard("(declare-fun p () Bool)(assert (and p))") == ["one-argument and"]
    assert nonstandard("(declare-fun x () Real)(assert (let ((a!1 (+ x 1.0))) (> a!1 0.0)))") == []
    assert nonstandard("(assert (foo 1))") == ["foo"]


def test_sexpr_reader_rejects_broken_text():
    from verifier.errors import InternalError
    for bad in ("(assert (> x 0)", "(assert x))"):
        with pytest.raises(InternalError):
            parse_sexprs(bad)


def test_rule_text_with_newlines_stays_in_comments(tmp_path):
    pack = tmp_path / "p.toml"
    pack.write_text('[pack]\nname = "p"\ntitle = "t"\nlegs = 1\n\n[[rule]]\nid = "r"\n'
                    'title = "t"\nexpect = """legs.count >= 0\n  and true"""\n')
    p = load_pack(pack)
    texts = obligations(p, p.rules[0], 1, "holds")
    for text in texts.values():
        assert all(line.startswith(";") or line.startswith("(") or line == ""
                   for line in text.splitlines() if not line.startswith(" "))
        assert z3_status(text) in ("sat", "unsat")
    assert z3_status(texts["violation"]) == "unsat"


@needs_cvc5
def test_every_catalogue_obligation_reads_in_cvc5():
    """Every rule of every loadable pack (shipped and test) exports to text that cvc5 parses and
    type-checks in strict mode (solving them all is the cross-check's job, not this test's)."""
    from verifier.trust.differential import catalogue
    count = 0
    for path in catalogue((ROOT / "rules", ROOT / "tests" / "packs")):
        if Path(path).name.startswith("route-"):
            continue    # route.toml exports every construct of a route; these two add only size
        pack = load_pack(path)
        for rule in pack.rules:
            for kind, text in obligations(pack, rule, pack.bound_for(rule)).items():
                answer = second.solve_text(text, parse_only=True)
                assert answer.reason == "parsed", (pack.name, rule.id, kind, answer.reason)
                count += 1
    assert count >= 20


def test_json_output_unchanged_by_smt2(exported, tmp_path, capsys):
    main(["check", str(PACK), "--no-files", "--no-cache", "--json", "--smt2", str(tmp_path)])
    doc = json.loads(capsys.readouterr().out)
    assert {r["id"]: r["verdict"] for r in doc["packs"][0]["rules"]}["no-such-world"] == "vacuous"

"""Fuzzed input: generated and mutated rule files and expressions through loader and checker.

Each input must end in a clean error (diagnostics with file:line:col) or a verdict: never an
uncaught exception, never a hang (a hard time limit per input), never a file written. At least
30 % of the inputs must get past the parser to the type checker and at least 10 % to the solver.
How many: the validation profile (``VERIFIER_PROFILE``: ci 10,000; thorough 50,000).
"""

import random
from pathlib import Path

import pytest

from verifier.trust.differential import catalogue
from verifier.errors import PackError
from verifier.trust.fuzz import ExprGen, Input, _pack_around, inputs, run_fuzz, run_one
from verifier.run.loader import load_pack
from verifier.trust.strategies import profile

ROOT = Path(__file__).resolve().parent.parent
LIMIT = 30.0       # seconds per input, a hang guard (each solver question has a 5 s budget)

# Failures this fuzzer found (and that are now fixed) are pinned as regression tests at the end
# of this file. A new failure signature can be listed here while it is being fixed.
KNOWN: dict = {}


def _known(detail: str) -> bool:
    return any(all(part in detail for part in k.split("|")) for k in KNOWN)


@pytest.mark.thorough
def test_fuzzed_inputs_end_in_a_clean_error_or_a_verdict(record_property):
    # the validation profile's sweep (ci: 10,000 inputs): .ci/run runs it after the README's
    # test command (pytest -m thorough); the quick sample below runs in every suite
    fuzz_and_judge(record_property, quick=False)


def test_a_quick_sample_of_fuzzed_inputs_ends_in_a_clean_error_or_a_verdict(record_property):
    fuzz_and_judge(record_property, quick=True)


QUICK_INPUTS = 1_000


def fuzz_and_judge(record_property, quick: bool):
    prof = profile()
    seed = prof["seed"] if prof["seed"] is not None else random.SystemRandom().randrange(2**32)
    paths = catalogue((ROOT / "rules", ROOT / "tests" / "packs"))
    n = QUICK_INPUTS if quick else prof["fuzz"]
    report = run_fuzz(n, seed, paths, workers=1 if quick else prof["workers"], limit=LIMIT)
    shares = {s: f"{100 * report.share(s):.1f} %" for s in report.stages}
    text = (f"fuzz: {report.inputs} inputs (seed {seed}), reached {shares}, results {report.results}, "
            f"slowest {report.slowest:.2f} s, total {report.seconds:.1f} s")
    print(text)
    record_property("fuzz", text)
    assert report.inputs >= n
    unexpected = [f for f in report.failures if not _known(f[3])]
    assert not unexpected, unexpected[:5]
    assert report.share("type-checker") >= 0.30
    assert report.share("solver") >= 0.10
    assert report.slowest < LIMIT


def test_every_kind_of_input_is_generated():
    kinds = {i.kind for i in inputs(1, 400, [(ROOT / "tests/packs/diff-basic.toml").read_text()])}
    assert kinds == {"expr", "mistyped", "expr-mutated", "pack-mutated", "deep", "huge", "bytes"}


@pytest.mark.parametrize("groups", [1, 2])
def test_generated_expressions_are_mostly_well_typed(tmp_path, groups):
    """The generator's well-typed expressions must load: otherwise the solver share is luck.
    Two-group packs must also name the second group and the information item (DESIGN 4.8, 4.9)."""
    rnd = random.Random(5)
    loaded, named = 0, set()
    for i in range(60):
        gen = ExprGen(rnd, depth=3, groups=groups)
        f = tmp_path / f"g{i}.toml"
        f.write_text(_pack_around(rnd, [(gen.boolean(), gen.boolean())], groups))
        try:
            pack = load_pack(f)
            loaded += 1
        except PackError:
            continue
        assert pack.scope.groups == groups
        text = f.read_text()
        named |= {n for n in ("g2.", "info.mark.") if n in text.split("[[rule]]", 1)[1]}
    assert loaded >= 50
    assert named == ({"g2.", "info.mark."} if groups == 2 else set())


def test_run_one_notices_a_crash_and_a_written_file(tmp_path, monkeypatch):
    """The harness can fail: a loader that raises an unexpected exception is a crash, and a
    stray file in the sandbox is reported."""
    good = _pack_around(random.Random(1), [(None, "legs.count >= 0")]).encode()
    import verifier.check.typer as typer
    real = typer.check_pack

    def broken(raw):
        raise KeyError("boom")
    monkeypatch.setattr(typer, "check_pack", broken)
    assert run_one(Input("expr", good), tmp_path).result == "crash"
    monkeypatch.setattr(typer, "check_pack", real)

    def writes(raw):
        (tmp_path / "stray.txt").write_text("x")
        return real(raw)
    monkeypatch.setattr(typer, "check_pack", writes)
    out = run_one(Input("expr", good), tmp_path, full=False)
    assert out.result == "file written" and "stray.txt" in out.detail


def test_clean_errors_render_with_a_place(tmp_path):
    out = run_one(Input("bytes", b"\xff\xfe[pack"), tmp_path)
    assert out.result == "error" and out.stage == "toml-or-structure"
    out = run_one(Input("expr", _pack_around(random.Random(2), [(None, "train.length > 1")]).encode()), tmp_path)
    assert out.result == "error" and out.stage == "type-checker"


def test_found_by_fuzzing_huge_integer_is_a_clean_error(tmp_path):
    f = tmp_path / "p.toml"
    f.write_text('[pack]\nname = "p"\ntitle = "t"\nlegs = ' + "9" * 5000 + "\n")
    with pytest.raises(PackError):
        load_pack(f)


def test_found_by_fuzzing_deep_if_chain_is_a_clean_error(tmp_path):
    f = tmp_path / "p.toml"
    f.write_text(_pack_around(random.Random(3), [(None, "if true then " * 1000 + "true" + " else false" * 1000)]))
    with pytest.raises(PackError):
        load_pack(f)


def test_found_by_fuzzing_param_naming_a_let_is_a_clean_error(tmp_path):
    f = tmp_path / "p.toml"
    f.write_text('[pack]\nname = "p"\ntitle = "t"\n\n[params]\nx = "if flag then 1 m else 0 m"\n\n'
                 '[let]\nflag = "true"\n\n[[rule]]\nid = "r"\ntitle = "t"\nexpect = "params.x >= 0 m"\n')
    with pytest.raises(PackError):
        load_pack(f)


def test_found_by_fuzzing_info_id_of_the_wrong_type_is_a_clean_error(tmp_path):
    f = tmp_path / "p.toml"
    f.write_text('[pack]\nname = "p"\ntitle = "t"\n\n[[info]]\nid = ["eoa"]\nat = "5 m"\nvalid = "both"\n\n'
                 '[[rule]]\nid = "r"\ntitle = "t"\nexpect = "true"\n')
    with pytest.raises(PackError) as e:
        load_pack(f)
    assert "info id must be a name" in str(e.value)


# ---- the corpus of input edges (tests/fuzz-corpus/README.md) ---------------------------------------

CORPUS = ROOT / "tests" / "fuzz-corpus"


def _expect(path: Path) -> tuple[str, str]:
    first = path.read_text(encoding="utf-8").split("\n", 1)[0]
    assert first.startswith("# expect: "), f"{path.name}: the first line must say what to expect"
    kind, _, what = first[len("# expect: "):].partition(": ")
    return kind, what


def _short_and_plain(diags) -> None:
    import re
    for d in diags:
        shown = d.render()
        assert len(shown) < 800, shown[:200]
        assert not re.search("[\x00-\x08\x0b-\x1f\x7f-\x9f]", shown), shown[:200]


@pytest.mark.parametrize("entry", sorted(p.name for p in CORPUS.iterdir() if p.name != "README.md"))
def test_corpus_entry(entry, tmp_path, monkeypatch):
    path = CORPUS / entry
    if entry.endswith(".toml"):
        kind, what = _expect(path)
        sandbox = tmp_path / "sandbox"
        sandbox.mkdir()
        monkeypatch.chdir(sandbox)
        out = run_one(Input("corpus", path.read_bytes()), sandbox, LIMIT, full=False)
        if kind == "error":
            assert (out.result, what in out.detail) == ("error", True), out
            from verifier.run.loader import load_all
            try:
                packs, diags = load_all([path])     # as `verifier check` reads it
            except PackError as exc:
                packs, diags = [], exc.diagnostics
            assert not packs and any(what in d.message for d in diags), diags
            _short_and_plain(diags)
        else:
            assert kind == "verdict" and out.result not in ("error", "crash", "hang"), out
            pack = load_pack(path)
            from verifier.smt.concrete import violation_status
            answers = {violation_status(pack, r, 1, rlimit=20_000_000, timeout=20) for r in pack.rules}
            assert answers <= {"sat", "unsat"}, answers
            assert {"holds" if a == "unsat" else "violated" for a in answers} == set(what.split(","))
            if pack.unbounded:      # a pack for any number of legs goes through the induction too
                from verifier.api import CheckOptions, check_packs
                (res,) = check_packs([pack], CheckOptions(out=None, induction_depth=1, max_legs=0))
                assert all(r.verdict != "error" for r in res.results), res.results
    elif entry.endswith(".manifest.json"):
        from verifier.errors import UsageError
        from verifier.evidence.report import prepare_dir
        out = tmp_path / "report"
        out.mkdir()
        (out / "manifest.json").write_bytes(path.read_bytes())
        (out / "index.html").write_text("kept")
        with pytest.raises(UsageError) as exc:
            prepare_dir(out)
        assert "manifest.json is malformed" in str(exc.value)
        assert (out / "index.html").read_text() == "kept"
    else:
        _corpus_file(path, tmp_path)


def _corpus_file(path: Path, tmp_path: Path) -> None:
    import os
    import signal
    from verifier.run.loader import discover
    kind, what = _expect(path)
    word, *arg = path.read_text(encoding="utf-8").strip().split("\n")[-1].split()
    if word == "many":
        n = int(arg[0])
        for i in range(n):
            (tmp_path / f"p{i:05d}.toml").write_text("")
        twice = [tmp_path / "sub" / ".." / f"p{i:05d}.toml" for i in range(n)]
        (tmp_path / "sub").mkdir()
        assert (kind, len(discover([tmp_path, *twice]))) == ("found", int(what))
        return
    if word == "fifo":
        target = tmp_path / "pipe.toml"
        os.mkfifo(target)
    elif word == "device":
        target = Path(arg[0])
        if not target.exists():
            pytest.skip(f"no {target}")
    else:
        assert word == "oversize", word
        from verifier.lang.source import MAX_FILE_BYTES
        target = tmp_path / "big.toml"
        target.write_text('[pack]\nname = "big"\ntitle = "t"\n\n[[rule]]\nid = "a"\ntitle = "t"\n'
                          'expect = "true"\n#' + "x" * MAX_FILE_BYTES + "\n")

    def blocked(*_):
        raise TimeoutError("the read blocked")
    old = signal.signal(signal.SIGALRM, blocked)
    signal.alarm(10)
    try:
        with pytest.raises(PackError) as exc:
            load_pack(target)
    finally:
        signal.alarm(0)
        signal.signal(signal.SIGALRM, old)
    assert kind == "error" and what in exc.value.diagnostics[0].message
    _short_and_plain(exc.value.diagnostics)

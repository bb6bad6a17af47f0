"""--jobs: worker processes solve SMT-LIB text; order and files are those of a serial run."""

from __future__ import annotations

from pathlib import Path

import pytest

from verifier.run.cache import Cache
from verifier.api import CheckOptions, check_packs
from verifier.errors import UsageError
from verifier.run.loader import load_pack
from verifier.run.parallel import check_jobs
from verifier.smt import smtlib, solve

ROOT = Path(__file__).resolve().parent.parent
DEMO = ROOT / "rules" / "demo" / "kestrel-quay.toml"


def _files(root: Path) -> dict:
    return {p.relative_to(root).as_posix(): p.read_bytes() for p in sorted(root.rglob("*")) if p.is_file()}


def _results(res):
    return [(p.name, r.rule, r.verdict, r.bound, r.counterexample and Path(r.counterexample).name,
             r.witness, r.message, r.minimal) for p in res for r in p.results]


def test_jobs_and_cache_give_the_files_of_a_cold_serial_run(tmp_path):
    pack = load_pack(DEMO, "rules/demo/kestrel-quay.toml")
    serial = check_packs([pack], CheckOptions(out=tmp_path / "serial"))
    par = check_packs([pack], CheckOptions(out=tmp_path / "jobs2", jobs=2))
    cache = Cache(tmp_path / "cache")
    check_packs([pack], CheckOptions(out=None, cache=cache))              # fill the cache
    warm = check_packs([pack], CheckOptions(out=tmp_path / "warm", jobs=2, cache=Cache(tmp_path / "cache")))
    assert _results(serial) == _results(par) == _results(warm)
    assert _files(tmp_path / "serial") == _files(tmp_path / "jobs2") == _files(tmp_path / "warm")
    # and they are the committed sample evidence, byte for byte
    for name, data in _files(tmp_path / "serial").items():
        if name.endswith(".json"):
            assert (ROOT / "counterexamples" / name).read_bytes() == data


def test_text_path_solves_like_the_direct_path():
    pack = load_pack(DEMO)
    rule = pack.rule("front-stays-on-arrival-side")
    direct = solve.solve_rule(pack, rule, 2)
    query = smtlib.export_rule(pack, rule, 2)
    assert "(declare-fun legs.count () Int)" in query.text      # plain SMT-LIB, no z3 objects
    via_text = smtlib.solve_query(query)
    assert (direct.verdict, direct.world, direct.smt_values) == (via_text.verdict, via_text.world, via_text.smt_values)


@pytest.mark.parametrize("bad", [0, -1, 65])
def test_jobs_range(bad):
    with pytest.raises(UsageError):
        check_jobs(bad)


def test_lemmas_then_rules_share_one_pool_and_match_a_serial_run():
    # position-report has lemmas and rules: the two phases of a check (lemmas first, then the
    # rules that assume them) run in one pool of two workers, and give the serial results
    pack = load_pack(ROOT / "rules" / "position-report.toml")
    opts = dict(out=None, legs=1)
    serial = check_packs([pack], CheckOptions(**opts))
    par = check_packs([pack], CheckOptions(**opts, jobs=2))
    assert _results(serial) == _results(par)
    assert any(r.role == "lemma" for r in par[0].results)


def test_jobs_default_is_one_worker_per_core_unless_the_environment_says(monkeypatch):
    from verifier.run import parallel
    monkeypatch.delenv("VERIFIER_JOBS", raising=False)
    assert parallel.resolve_jobs(None) == parallel.auto_jobs()
    assert 1 <= parallel.auto_jobs() <= parallel.AUTO_JOBS_MAX
    monkeypatch.setattr(parallel.os, "sched_getaffinity", lambda pid: set(range(32)))
    assert parallel.auto_jobs() == parallel.AUTO_JOBS_MAX          # at most 8 on a big machine
    monkeypatch.setenv("VERIFIER_JOBS", "3")
    assert parallel.resolve_jobs(None) == 3
    assert parallel.resolve_jobs(2) == 2                           # --jobs wins over the variable
    monkeypatch.setenv("VERIFIER_JOBS", "auto")
    assert parallel.resolve_jobs(None) == parallel.AUTO_JOBS_MAX
    for bad in ("many", "0", "65"):
        monkeypatch.setenv("VERIFIER_JOBS", bad)
        with pytest.raises(UsageError, match="VERIFIER_JOBS|--jobs"):
            parallel.resolve_jobs(None)


def test_check_takes_jobs_auto_on_the_command_line(tmp_path, capsys):
    from verifier.cli import main
    code = main(["check", str(DEMO), "--jobs", "auto", "--no-cache", "--json", "--out", str(tmp_path)])
    assert code == 1                 # the demo is refuted on purpose
    assert '"violated"' in capsys.readouterr().out

"""The verdict cache: only what an edit reaches is solved again; bad files are never trusted."""

from __future__ import annotations

import json

from verifier.run.cache import Cache, rule_key
from verifier.check.typer import check_pack
from verifier.api import CheckOptions, check_packs
from verifier.lang.pack import parse_pack_text
from verifier.run.parallel import solve_in_order
from verifier.smt.solve import Solved


def _pack(short: str = "100 m"):
    """50 rules, legs = 0 (cheap to solve); rules r03, r17, r41 use the let `short`."""
    lines = ['[pack]\nname = "fifty"\ntitle = "fifty rules"\nlegs = 0\n',
             f'[let]\nshort = "train.length <= {short}"\n']
    for i in range(50):
        if i in (3, 17, 41):
            lines.append(f'[[rule]]\nid = "r{i:02}"\ntitle = "t"\ngiven = "short"\n'
                         f'expect = "train.antenna <= train.length"\n')
        else:
            lines.append(f'[[rule]]\nid = "r{i:02}"\ntitle = "t"\n'
                         f'expect = "train.length >= {i} m or lrbg.read >= 1"\n')
    return check_pack(parse_pack_text("\n".join(lines), "fifty.toml"))


def _solved_ids(pack, cache):
    return [r.id for r, p in zip(pack.rules, solve_in_order([(pack, r) for r in pack.rules], cache=cache))
            if not p.cached]


def test_editing_one_let_resolves_only_its_rules(tmp_path):
    base = _pack()
    assert len(_solved_ids(base, Cache(tmp_path))) == 50           # cold: everything
    assert _solved_ids(base, Cache(tmp_path)) == []                 # warm: nothing
    edited = _pack("50 m")
    assert _solved_ids(edited, Cache(tmp_path)) == ["r03", "r17", "r41"]
    # and the cached run gives the very results of a cold run without cache
    warm = check_packs([edited], CheckOptions(out=None, cache=Cache(tmp_path)))
    cold = check_packs([edited], CheckOptions(out=None))
    strip = lambda res: [(r.rule, r.verdict, r.witness, r.message) for p in res for r in p.results]  # noqa: E731
    assert strip(warm) == strip(cold)


def test_key_covers_what_decides_the_verdict():
    a = _pack()
    r = a.rules[3]
    assert rule_key(a, r, 0) != rule_key(_pack("50 m"), _pack("50 m").rules[3], 0)   # its let
    assert rule_key(a, r, 0) != rule_key(a, r, 1)                                     # the bound
    assert rule_key(a, a.rules[0], 0) == rule_key(_pack("50 m"), _pack("50 m").rules[0], 0)  # unrelated let


def test_unknown_and_cut_short_results_are_never_stored(tmp_path):
    c = Cache(tmp_path)
    assert not c.put("a" * 64, Solved("unknown", reason="timeout"))
    assert not c.put("b" * 64, Solved("violated", world={}, minimal=False))
    assert not list(tmp_path.rglob("*.json"))


def test_corrupted_and_foreign_files_are_ignored_with_a_warning(tmp_path):
    pack = _pack()
    todo = [(pack, r) for r in pack.rules[:2]]
    list(solve_in_order(todo, cache=Cache(tmp_path)))
    assert len(list(tmp_path.rglob("*.json"))) == 2
    files = [Cache(tmp_path)._file(rule_key(pack, r, 0)) for _, r in todo]
    # 1: a tampered verdict with the checksum left as it was; 2: a file of another format
    doc = json.loads(files[0].read_text())
    doc["solved"]["verdict"] = "vacuous"
    files[0].write_text(json.dumps(doc))
    files[1].write_text(json.dumps({"format": "someone-else/3", "solved": {}}))
    seen = []
    cache = Cache(tmp_path, warn=seen.append)
    again = list(solve_in_order(todo, cache=cache))
    assert [p.cached for p in again] == [False, False]                 # both solved afresh
    assert [p.solved.verdict for p in again] == ["holds", "holds"]
    assert len(seen) == 2 and any("checksum" in w for w in seen) and any("foreign" in w for w in seen)
    # 3: bytes that are not JSON at all
    files[0].write_bytes(b"\x00\xff garbage")
    seen.clear()
    again = list(solve_in_order(todo, cache=Cache(tmp_path, warn=seen.append)))
    assert [p.cached for p in again] == [False, True] and len(seen) == 1 and "not valid JSON" in seen[0]
    seen.clear()
    assert [p.cached for p in solve_in_order(todo, cache=Cache(tmp_path, warn=seen.append))] == [True, True]
    assert seen == []        # rewritten by the run before


def test_editing_a_design_formula_resolves_only_the_rules_that_reach_it(tmp_path):
    """The demo's mistake 3 (q_dirlrbg blind to cab changes) mended: only the rules whose
    dependency closure reaches onboard q_dirlrbg are solved again. The two doubt and group rules
    do not read the orientation; their cached answers are reused, with the compared values
    worked out again by today's encoding (the engine checks them against the simulator, so a
    stale value would be an internal error)."""
    from pathlib import Path

    from verifier.run.loader import load_pack
    root = Path(__file__).resolve().parent.parent
    text = (root / "rules" / "demo" / "kestrel-quay.toml").read_text(encoding="utf-8")
    old_line = 'q_dirlrbg = "if passage.running == forward then passage.seen else flip(passage.seen)"'
    assert old_line in text
    (tmp_path / "a").mkdir()
    (tmp_path / "b").mkdir()
    (tmp_path / "a" / "kq.toml").write_text(text, encoding="utf-8")
    (tmp_path / "b" / "kq.toml").write_text(text.replace(old_line, 'q_dirlrbg = "if (passage.running == '
                                            'forward) == (cab_changes != 1) then passage.seen else '
                                            'flip(passage.seen)"'), encoding="utf-8")
    base, edited = load_pack(tmp_path / "a" / "kq.toml"), load_pack(tmp_path / "b" / "kq.toml")
    cache = Cache(tmp_path / "cache")
    _solved_ids(base, cache)
    again = _solved_ids(edited, Cache(tmp_path / "cache"))
    reach = [r.id for r in edited.rules if ("onboard", "q_dirlrbg") in r.deps]
    assert again == reach
    assert "doubt-covers-travelled-distance" not in again and "group-direction-known" not in again
    assert "orientation-after-turning-back" in again
    warm = check_packs([edited], CheckOptions(out=None, cache=Cache(tmp_path / "cache")))
    cold = check_packs([edited], CheckOptions(out=None))
    strip = lambda res: [(r.rule, r.verdict, r.witness, r.message) for p in res for r in p.results]  # noqa: E731
    assert strip(warm) == strip(cold)
    assert "error" not in {r.verdict for p in warm for r in p.results}
    verdicts = {r.rule: r.verdict for p in warm for r in p.results}
    assert verdicts["orientation-after-turning-back"] == "holds"     # the mended mistake


def test_stale_compared_values_from_the_cache_would_be_caught(tmp_path, monkeypatch):
    """Seeded fault: reuse the cached compared values as they were stored (under the old
    design). The engine's comparison with the simulator must then fail on a reused rule whose
    report values the edit changed, which is why a hit recomputes them."""
    from pathlib import Path

    from verifier.run import parallel
    from verifier.run.loader import load_pack
    root = Path(__file__).resolve().parent.parent
    text = (root / "rules" / "demo" / "kestrel-quay.toml").read_text(encoding="utf-8")
    (tmp_path / "a").mkdir()
    (tmp_path / "b").mkdir()
    (tmp_path / "a" / "kq.toml").write_text(text, encoding="utf-8")
    # mistake 1 mended: the over-reading doubt from the distance travelled. It changes the
    # report's L_DOUBTOVER in most worlds, and the group rule does not read it
    old_line = "world.odometry_over.rate * est.d_lrbg"
    assert old_line in text
    (tmp_path / "b" / "kq.toml").write_text(
        text.replace(old_line, "world.odometry_over.rate * est.travelled"), encoding="utf-8")
    base, edited = load_pack(tmp_path / "a" / "kq.toml"), load_pack(tmp_path / "b" / "kq.toml")
    _solved_ids(base, Cache(tmp_path / "cache"))
    monkeypatch.setattr(parallel, "_today", lambda hit, pack, bound, evaluators: hit)
    res = check_packs([edited], CheckOptions(out=None, cache=Cache(tmp_path / "cache")))
    bad = {r.rule: r.message for p in res for r in p.results if r.verdict == "error"}
    assert bad and all("simulator and solver disagree" in m for m in bad.values())


def test_a_cached_verdict_carries_the_seconds_of_its_original_solve(tmp_path):
    """Each entry records what its solve took; a verdict taken from the cache carries this
    run's replay time plus that record (the report shows it as the time of the original
    solve), and a verdict solved afresh has no such figure."""
    pack = _pack()
    todo = [(pack, r) for r in pack.rules[:3]]
    fresh = list(solve_in_order(todo, cache=Cache(tmp_path)))
    recorded = [json.loads(Cache(tmp_path)._file(rule_key(pack, r, 0)).read_text())["solved"]["seconds"]
                for _, r in todo]
    assert [round(x, 9) for x in recorded] == [round(p.seconds, 9) for p in fresh]
    assert all(x > 0 for x in recorded)
    again = list(solve_in_order(todo, cache=Cache(tmp_path)))
    assert [(p.cached, p.seconds, p.recorded) for p in again] == [(True, 0.0, x) for x in recorded]

    cold = check_packs([pack], CheckOptions(out=None, rules=("r00", "r01")))
    assert [r.original_seconds for p in cold for r in p.results] == [None, None]
    warm = check_packs([pack], CheckOptions(out=None, rules=("r00", "r01"), cache=Cache(tmp_path)))
    for r, x in zip(warm[0].results, recorded):
        assert r.cached and abs(r.original_seconds - (r.seconds + x)) < 1e-9


def test_an_entry_without_its_seconds_is_not_trusted(tmp_path):
    pack = _pack()
    todo = [(pack, pack.rules[0])]
    list(solve_in_order(todo, cache=Cache(tmp_path)))
    f = Cache(tmp_path)._file(rule_key(pack, pack.rules[0], 0))
    doc = json.loads(f.read_text())
    del doc["solved"]["seconds"]
    doc["sha256"] = __import__("hashlib").sha256(json.dumps(doc["solved"], sort_keys=True).encode()).hexdigest()
    f.write_text(json.dumps(doc))
    seen = []
    assert [p.cached for p in solve_in_order(todo, cache=Cache(tmp_path, warn=seen.append))] == [False]
    assert len(seen) == 1 and "malformed" in seen[0]

"""The same pack gives byte-identical counterexample files, and the committed demo evidence is
exactly what a fresh run writes."""

from __future__ import annotations

from pathlib import Path

from verifier.cli import main

ROOT = Path(__file__).resolve().parent.parent


def _files(d: Path) -> dict:
    return {p.relative_to(d).as_posix(): p.read_bytes() for p in sorted(d.rglob("*")) if p.is_file()}


def test_demo_counterexamples_regenerate_byte_for_byte(tmp_path, monkeypatch):
    monkeypatch.chdir(ROOT)   # paths inside the files are relative to the checkout
    out1, out2 = tmp_path / "a", tmp_path / "b"
    assert main(["check", "rules/demo", "--out", str(out1)]) == 1
    assert main(["check", "rules/demo", "--out", str(out2)]) == 1
    first, second = _files(out1), _files(out2)
    assert first == second
    demos = ("kestrel-quay", "marrow-vale-approach", "marrow-vale-route")
    committed = {k: v for d in demos for k, v in
                 ((f"{d}/{n}", b) for n, b in _files(ROOT / "counterexamples" / d).items())}
    assert {k.split("/", 1)[0] for k in first} == set(demos), "every demo pack leaves evidence"
    assert first == committed, sorted(set(first) ^ set(committed))


def test_no_temporary_files_left(tmp_path, monkeypatch):
    monkeypatch.chdir(ROOT)
    main(["check", "rules/demo", "--out", str(tmp_path), "--rule", "rounding-keeps-doubts"])
    names = [p.name for p in tmp_path.rglob("*")]
    assert not [n for n in names if n.endswith(".tmp")]
    assert "rounding-keeps-doubts.json" in names


def test_files_get_ordinary_permissions(tmp_path, monkeypatch):
    """Evidence is shared: under umask 022 a counterexample and its picture are 0644 like any
    new file (a first-user trial found the temporary file's 0600 kept)."""
    import os
    import stat
    monkeypatch.chdir(ROOT)
    old = os.umask(0o022)
    try:
        main(["check", "rules/demo", "--out", str(tmp_path), "--rule", "rounding-keeps-doubts"])
    finally:
        os.umask(old)
    files = [p for p in tmp_path.rglob("*") if p.is_file()]
    assert {p.suffix for p in files} == {".json", ".svg"}
    assert {stat.S_IMODE(p.stat().st_mode) for p in files} == {0o644}

"""The flow goes one way: world/ (the simulator) imports neither z3 nor verifier.smt, and only
verifier/smt/ imports z3. Checked on the source text of every module (static imports)."""

from __future__ import annotations

import ast
from pathlib import Path

PKG = Path(__file__).resolve().parent.parent / "verifier"


def _imports(path: Path) -> set[str]:
    tree = ast.parse(path.read_text(encoding="utf-8"))
    out = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            out |= {a.name for a in node.names}
        elif isinstance(node, ast.ImportFrom) and node.module:
            out.add(node.module)
    return out


def test_only_smt_imports_z3():
    offenders = [p.relative_to(PKG).as_posix() for p in PKG.rglob("*.py")
                 if "smt" not in p.relative_to(PKG).parts
                 and any(m == "z3" or m.startswith("z3.") for m in _imports(p))]
    assert offenders == []


def test_world_imports_neither_z3_nor_smt():
    offenders = []
    for p in (PKG / "world").rglob("*.py"):
        for m in _imports(p):
            if m == "z3" or m.startswith(("z3.", "verifier.smt", "verifier.engine", "cvc5")):
                offenders.append(f"{p.name}: {m}")
    assert offenders == []


def test_no_eval_of_rule_text():
    for p in PKG.rglob("*.py"):
        tree = ast.parse(p.read_text(encoding="utf-8"))
        for node in ast.walk(tree):
            if isinstance(node, ast.Call) and isinstance(node.func, ast.Name):
                assert node.func.id not in ("eval", "exec"), p


def test_the_check_runs_on_a_real_module(tmp_path):
    # the detector itself must be able to fail
    bad = tmp_path / "m.py"
    bad.write_text("import z3\nfrom verifier.smt import encode\n")
    assert {"z3", "verifier.smt"} <= _imports(bad)

"""Rule text is parsed, never evaluated as Python (the import rules are in test_import_graph)."""

from __future__ import annotations

import ast
from pathlib import Path

PKG = Path(__file__).resolve().parent.parent / "verifier"


def _calls(path: Path) -> set[str]:
    tree = ast.parse(path.read_text(encoding="utf-8"))
    return {n.func.id for n in ast.walk(tree) if isinstance(n, ast.Call) and isinstance(n.func, ast.Name)}


def test_no_eval_or_exec_in_the_package():
    offenders = [p.name for p in PKG.rglob("*.py") if _calls(p) & {"eval", "exec", "compile"}]
    assert offenders == []


def test_the_detector_can_fail(tmp_path):
    bad = tmp_path / "m.py"
    bad.write_text("x = eval('1 + 1')\n")
    assert "eval" in _calls(bad)

"""The simulator and the SMT encoding are independent implementations (DESIGN 2): world/ imports
neither z3 nor verifier.smt, and only verifier/smt/ imports z3 at all."""

import ast
import subprocess
import sys
from pathlib import Path

PKG = Path(__file__).resolve().parent.parent / "verifier"


def _imports(path: Path) -> set[str]:
    tree = ast.parse(path.read_text(encoding="utf-8"))
    out = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            out.update(a.name for a in node.names)
        elif isinstance(node, ast.ImportFrom) and node.module:
            out.add(node.module)
            out.update(f"{node.module}.{a.name}" for a in node.names)
    return out


def test_world_imports_neither_z3_nor_smt():
    for f in sorted((PKG / "world").glob("*.py")):
        bad = {m for m in _imports(f) if m == "z3" or m.startswith(("z3.", "verifier.smt", "cvc5"))}
        assert not bad, f"{f.name} imports {sorted(bad)}"


def test_only_smt_imports_solvers():
    for f in sorted(PKG.rglob("*.py")):
        if "smt" in f.relative_to(PKG).parts:
            continue
        bad = {m for m in _imports(f) if m in ("z3", "cvc5") or m.startswith(("z3.", "cvc5."))}
        assert not bad, f"{f.relative_to(PKG)} imports {sorted(bad)}"


def test_simulating_loads_no_solver():
    code = ("import sys; from verifier.loader import load_pack; from verifier.world.sim import State, World;"
            "p = load_pack(sys.argv[1]); State(p, World()).get('rbc.placed');"
            "bad = [m for m in sys.modules if m.split('.')[0] in ('z3', 'cvc5') or m.startswith('verifier.smt')];"
            "assert not bad, bad")
    pack = Path(__file__).parent / "packs" / "diff-basic.toml"
    r = subprocess.run([sys.executable, "-c", code, str(pack)], capture_output=True, text=True)
    assert r.returncode == 0, r.stderr

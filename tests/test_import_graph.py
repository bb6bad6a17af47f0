"""The import structure of the package (DEVELOPERS.md, "One direction of flow"): layers that
import only downwards, no circle, no import hidden inside a function, no private name taken
from another module; the simulator and the encoding are independent implementations (DESIGN
2): world/ imports neither z3 nor verifier.smt, smt/ nothing of world/, and only verifier/smt/
imports z3 at all.

Run it as a script to print the package drawing kept in DEVELOPERS.md:
``.venv/bin/python tests/test_import_graph.py``."""

from __future__ import annotations

import ast
import subprocess
import sys
from pathlib import Path

PKG = Path(__file__).resolve().parent.parent / "verifier"
DEVELOPERS = PKG.parent / "DEVELOPERS.md"

# bottom first; a module may import its own layer (without a circle) and the layers below it
LAYERS = [
    ("base", ("verifier.about", "verifier.errors")),
    ("lang", ("verifier.lang",)),
    ("check", ("verifier.check",)),
    ("world", ("verifier.world",)),
    ("smt", ("verifier.smt",)),
    ("run", ("verifier.run",)),
    ("evidence", ("verifier.evidence",)),
    ("api", ("verifier.api",)),
    ("trust", ("verifier.trust",)),
    ("implcheck", ("verifier.implcheck",)),
    ("recheck", ("verifier.recheck",)),
    ("cli", ("verifier.cli", "verifier.terminal")),
]
FACADE = "verifier"     # verifier/__init__.py: names the public API, loads it on first use

# imports inside a function that are allowed, each with its reason
LOCAL_OK = {
    "verifier": "the facade (PEP 562): `import verifier` loads no solver, reading or simulating "
                "a pack neither",
    "verifier.implcheck.plugin": "a pytest plugin is imported into every pytest session: it "
                                 "loads the checker only when a test asks for it",
}
HEAVY = {"verifier.trust.strategies": "Hypothesis, loaded by importing it"}


def modules() -> dict[str, Path]:
    out = {}
    for f in sorted(PKG.rglob("*.py")):
        parts = f.relative_to(PKG.parent).with_suffix("").parts
        name = ".".join(parts[:-1] if parts[-1] == "__init__" else parts)
        out[name] = f
    return out


MODULES = modules()


def _target(node: ast.ImportFrom, alias: ast.alias) -> str:
    full = f"{node.module}.{alias.name}"
    return full if full in MODULES else node.module


def _inner_ids(tree: ast.AST) -> set:
    out = set()
    for fn in ast.walk(tree):
        if isinstance(fn, (ast.FunctionDef, ast.AsyncFunctionDef, ast.Lambda)):
            out.update(id(n) for n in ast.walk(fn) if n is not fn)
    return out


def edges(path: Path) -> list[tuple[str, bool, str | None]]:
    """(module imported, inside a function?, name imported) for every verifier import."""
    tree = ast.parse(path.read_text(encoding="utf-8"))
    inner = _inner_ids(tree)
    out = []
    for n in ast.walk(tree):
        local = id(n) in inner
        if isinstance(n, ast.Import):
            out += [(a.name, local, None) for a in n.names if a.name.split(".")[0] == "verifier"]
        elif isinstance(n, ast.ImportFrom) and n.module and n.level == 0 \
                and n.module.split(".")[0] == "verifier":
            out += [(_target(n, a), local, a.name) for a in n.names]
        elif isinstance(n, ast.ImportFrom) and n.level:
            out.append(("<relative>", local, None))
        elif (isinstance(n, ast.Call) and isinstance(n.func, ast.Attribute)
              and n.func.attr == "import_module"):
            arg = n.args[0] if n.args else None     # a user's module (verifier test) is no edge
            if isinstance(arg, ast.Constant) and str(arg.value).split(".")[0] == "verifier":
                out.append((arg.value, True, None))
    return out


def layer_of(module: str) -> int:
    for i, (_, prefixes) in enumerate(LAYERS):
        if any(module == p or module.startswith(p + ".") for p in prefixes):
            return i
    raise KeyError(module)


def graph() -> dict[str, set]:
    """Module -> the modules it imports at module level (the facade's lazy names left out)."""
    return {m: {t for t, local, _ in edges(f) if not local and t in MODULES and t != FACADE}
            for m, f in MODULES.items()}


def cycles(g: dict[str, set]) -> list[list[str]]:
    """Every strongly connected component of more than one module (Tarjan)."""
    index, low, stack, on, out, count = {}, {}, [], set(), [], [0]

    def visit(v):
        index[v] = low[v] = count[0]
        count[0] += 1
        stack.append(v)
        on.add(v)
        for w in sorted(g.get(v, ())):
            if w not in index:
                visit(w)
                low[v] = min(low[v], low[w])
            elif w in on:
                low[v] = min(low[v], index[w])
        if low[v] == index[v]:
            comp = []
            while True:
                w = stack.pop()
                on.discard(w)
                comp.append(w)
                if w == v:
                    break
            if len(comp) > 1 or v in g.get(v, ()):
                out.append(sorted(comp))

    for v in sorted(g):
        if v not in index:
            visit(v)
    return out


def drawing() -> str:
    """The layers and the imports between them, as a Mermaid flowchart (top: the command line);
    an arrow implied by two others is left out (the transitive reduction)."""
    g = graph()
    names = [name for name, _ in LAYERS]
    arrows = set()
    for m, targets in g.items():
        if m == FACADE:
            continue
        for t in targets:
            a, b = layer_of(m), layer_of(t)
            if a != b:
                arrows.add((names[a], names[b]))
    def reaches(a, b, skip):
        todo, seen = [a], set()
        while todo:
            x = todo.pop()
            for y in {q for p, q in arrows if p == x and (p, q) != skip}:
                if y == b:
                    return True
                if y not in seen:
                    seen.add(y)
                    todo.append(y)
        return False

    arrows = {e for e in arrows if not reaches(e[0], e[1], e)}   # implied arrows left out
    lines = ["flowchart TD"]
    for name, prefixes in reversed(LAYERS):
        label = " ".join(p.replace("verifier.", "") + ("/" if (PKG / p.split(".", 1)[1]).is_dir() else "")
                         for p in prefixes)
        lines.append(f'    {name}["{label}"]')
    for a, b in sorted(arrows, key=lambda e: (-names.index(e[0]), -names.index(e[1]))):
        lines.append(f"    {a} --> {b}")
    return "\n".join(lines)


# ---- the rules --------------------------------------------------------------------------------

def test_every_module_has_a_layer():
    for m in MODULES:
        if m != FACADE:
            layer_of(m)


def test_imports_run_downwards_only():
    up = []
    for m, targets in graph().items():
        if m == FACADE:
            continue
        up += [f"{m} -> {t}" for t in sorted(targets) if layer_of(t) > layer_of(m)]
    assert up == []


def test_no_circle():
    assert cycles(graph()) == []


def test_no_import_inside_a_function():
    hidden = []
    for m, f in MODULES.items():
        for target, local, _ in edges(f):
            if local and m not in LOCAL_OK and target not in HEAVY:
                hidden.append(f"{m} -> {target}")
    assert hidden == []


def test_no_relative_import():
    bad = [m for m, f in MODULES.items() for t, _, _ in edges(f) if t == "<relative>"]
    assert bad == []


def test_no_private_name_across_modules():
    bad = []
    for m, f in MODULES.items():
        tree = ast.parse(f.read_text(encoding="utf-8"))
        imported = {}       # local name -> verifier module, for `module._name`
        for target, _, name in edges(f):
            if name and name.startswith("_") and not name.startswith("__") and target != m:
                bad.append(f"{m} imports {target}.{name}")
        for n in ast.walk(tree):
            if isinstance(n, ast.ImportFrom) and n.module and n.module.startswith("verifier"):
                for a in n.names:
                    if f"{n.module}.{a.name}" in MODULES:
                        imported[a.asname or a.name] = f"{n.module}.{a.name}"
        for n in ast.walk(tree):
            if (isinstance(n, ast.Attribute) and isinstance(n.value, ast.Name)
                    and n.value.id in imported and n.attr.startswith("_")
                    and not n.attr.startswith("__")):
                bad.append(f"{m} uses {imported[n.value.id]}.{n.attr}")
    assert bad == []


def test_the_facade_names_what_exists():
    import verifier
    for name in verifier.__all__:
        assert getattr(verifier, name) is not None, name


def test_world_imports_neither_z3_nor_smt():
    for m, f in MODULES.items():
        if m.startswith("verifier.world"):
            bad = {t for t, _, _ in edges(f) if t.startswith("verifier.smt")}
            text = f.read_text(encoding="utf-8")
            assert not bad and "import z3" not in text and "import cvc5" not in text, m


def test_smt_imports_nothing_of_the_simulator():
    for m, f in MODULES.items():
        if m.startswith("verifier.smt"):
            bad = {t for t, _, _ in edges(f) if t.startswith("verifier.world")}
            assert not bad, f"{m} imports {sorted(bad)}"


def _solver_imports(path: Path) -> set[str]:
    tree = ast.parse(path.read_text(encoding="utf-8"))
    out = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            out.update(a.name for a in node.names)
        elif isinstance(node, ast.ImportFrom) and node.module:
            out.add(node.module)
    return {m for m in out if m.split(".")[0] in ("z3", "cvc5")}


def test_only_smt_imports_solvers():
    for m, f in MODULES.items():
        if not m.startswith("verifier.smt"):
            assert not _solver_imports(f), f"{m} imports {sorted(_solver_imports(f))}"


def test_evidence_calls_neither_engine_nor_solver():
    """Evidence reads results and files and may simulate again: from the run stage and smt/
    it takes no function that checks or solves (constants and result types only)."""
    bad = []
    for m, f in MODULES.items():
        if m.startswith("verifier.evidence"):
            for target, _, name in edges(f):
                if target.startswith("verifier.smt") and not (name and name.isupper()):
                    bad.append(f"{m} -> {target}.{name}")
                if target == "verifier.run.engine" and name in ("check_packs", "check_rule"):
                    bad.append(f"{m} -> {target}.{name}")
                if target.startswith("verifier.run.") and target.split(".")[-1] in ("induct", "parallel", "cache"):
                    if name not in ("plan_with_lemmas", "replay_states"):
                        bad.append(f"{m} -> {target}.{name}")
    assert bad == []


def test_the_drawing_in_developers_md_is_current():
    assert "```mermaid\n" + drawing() + "\n```" in DEVELOPERS.read_text(encoding="utf-8")


def test_simulating_loads_no_solver():
    code = ("import sys; from verifier.run.loader import load_pack; from verifier.world.sim import State, World;"
            "p = load_pack(sys.argv[1]); State(p, World()).get('rbc.placed');"
            "bad = [m for m in sys.modules if m.split('.')[0] in ('z3', 'cvc5') or m.startswith('verifier.smt')];"
            "assert not bad, bad")
    pack = Path(__file__).parent / "packs" / "diff-basic.toml"
    r = subprocess.run([sys.executable, "-c", code, str(pack)], capture_output=True, text=True)
    assert r.returncode == 0, r.stderr


# ---- the detectors can fail -------------------------------------------------------------------

def test_the_detectors_can_fail(tmp_path):
    f = tmp_path / "m.py"
    f.write_text("import os\nfrom verifier.run import engine\n\ndef g(user):\n"
                 "    from verifier.evidence.story import _Doc\n    import importlib\n"
                 "    importlib.import_module('verifier.cli')\n    importlib.import_module(user)\n")
    got = edges(f)
    assert ("verifier.run.engine", False, "engine") in got
    assert ("verifier.evidence.story", True, "_Doc") in got
    assert ("verifier.cli", True, None) in got and len(got) == 3
    assert cycles({"a": {"b"}, "b": {"c"}, "c": {"a"}, "d": {"a"}}) == [["a", "b", "c"]]
    assert layer_of("verifier.cli") > layer_of("verifier.run.engine") > layer_of("verifier.lang.ast")


if __name__ == "__main__":
    print(drawing())

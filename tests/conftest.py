from __future__ import annotations

import os
import textwrap
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent
pytest_plugins = ["pytester"]
# `verifier check` starts one worker per core by default; the suite runs its many small checks
# serially (pytest-xdist already has a worker per core). Tests of --jobs name it or set this.
os.environ.setdefault("VERIFIER_JOBS", "1")   # the pytest plugin of verifier is tested in subprocesses


def pack_text(rules: str, *, name: str = "t", legs: int = 2, world: str = "", onboard: str = "",
              extra: str = "") -> str:
    """A small pack: a header, optional [world]/[onboard] lines, then the given rule tables."""
    parts = [f'[pack]\nname = "{name}"\ntitle = "test pack"\nlegs = {legs}\n']
    if world:
        parts.append("[world]\n" + textwrap.dedent(world).strip() + "\n")
    if onboard:
        parts.append("[onboard]\n" + textwrap.dedent(onboard).strip() + "\n")
    if extra:
        parts.append(textwrap.dedent(extra).strip() + "\n")
    parts.append(textwrap.dedent(rules).strip() + "\n")
    return "\n".join(parts)


def rule_toml(rid: str, expect: str, given: str | None = None) -> str:
    def q(s):
        return '"' + s.replace("\\", "\\\\").replace('"', '\\"') + '"'
    out = f'[[rule]]\nid = "{rid}"\ntitle = "{rid}"\nexpect = {q(expect)}\n'
    if given:
        out += f"given = {q(given)}\n"
    return out


@pytest.fixture
def write_pack(tmp_path):
    def write(text: str, name: str = "pack.toml") -> Path:
        p = tmp_path / name
        p.write_text(text, encoding="utf-8")
        return p
    return write


@pytest.fixture
def whole_check_refused(monkeypatch):
    """Seeded limit: call it to make the first check without assumptions of each solver session
    (a whole question: the violation, the given, a diff relation) answer unknown, as when it
    runs out of budget; the real check still runs, so the session has a solver to ask why.
    Returns the list that records each refusal."""
    def install():
        import z3

        from verifier.smt import solve
        real, refused = solve.SolverSession.check, []

        def check(self, *assumptions):
            if not assumptions and not getattr(self, "_refused", False):
                self._refused = True
                refused.append(len(self.facts))
                real(self, *assumptions)
                return z3.unknown
            return real(self, *assumptions)
        monkeypatch.setattr(solve.SolverSession, "check", check)
        return refused
    return install

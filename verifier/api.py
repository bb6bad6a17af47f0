"""The public Python API (README, docs/design.md 7): read packs, check them with their evidence
files written, simulate one world. It wires the run stage to the evidence writer; the tools
and the command line call it."""

from __future__ import annotations

from typing import Callable

from verifier.evidence.files import Files
from verifier.run import engine
from verifier.run.engine import CheckOptions, PackResult, RuleResult
from verifier.run.loader import load_all, load_pack
from verifier.run import margin as run_margin
from verifier.run.margin import MarginOptions, MarginRun
from verifier.world.sim import State as simulate

__all__ = ["CheckOptions", "MarginOptions", "MarginRun", "margins", "PackResult", "RuleResult", "check_packs", "check_rule", "load_all",
           "load_pack", "simulate"]


def _files(opts: CheckOptions) -> Files | None:
    return Files(opts.out) if opts.out is not None else None


def check_packs(packs: list, opts: CheckOptions = CheckOptions(),
                progress: Callable | None = None) -> list[PackResult]:
    """Check every selected rule of every pack, in file order; counterexample and induction
    files (each with its diagram) go under ``opts.out`` unless it is None."""
    return engine.check_packs(packs, opts, progress, files=_files(opts))


def check_rule(pack, rule, opts: CheckOptions = CheckOptions()) -> RuleResult:
    """One rule up to its bound (no induction), its counterexample written under ``opts.out``."""
    return engine.check_rule(pack, rule, opts, files=_files(opts))


def margins(pack, opts: MarginOptions = MarginOptions(), progress: Callable | None = None) -> MarginRun:
    """The margins of the rules of ``pack`` that hold (DESIGN 9): slack, thresholds of the
    [world] bounds in ``opts.vary``, the assumptions each proof needs; the worlds found go
    under ``opts.out`` (``<pack>/<rule>.<what>.json``) unless it is None."""
    files = Files(opts.out) if opts.out is not None else None
    return run_margin.margins(pack, opts, files, progress)

"""The command line: thin subcommands over library calls (DESIGN 7).

Exit codes of ``check``: 0 all hold; 1 some violated or vacuous; 2 bad input or usage;
3 none violated but some unknown (a budget ran out) or bounded (holds up to its bound, not
proved for any number of legs); 4 internal cross-check failure (4 > 2 > 1 > 3).
"""

from __future__ import annotations

import argparse
import json
import sys
import time
from pathlib import Path

from verifier.about import CAUTION, __version__
from verifier.api import CheckOptions, MarginOptions, check_packs, margins
from verifier.errors import PackError, UsageError, VerifierError, WriteError, suggest
from verifier.evidence.cexfile import stale_files
from verifier.evidence.ciformats import render
from verifier.evidence.report import ensure_ours, write_report
from verifier.evidence.show import show
from verifier.evidence.text import simulate_text
from verifier.implcheck import interface, runner
from verifier.implcheck.replay import fresh_doc
from verifier.implcheck.runner import describe_sources
from verifier.recheck import diff
from verifier.recheck.replay import replay_paths
from verifier.run import coverage
from verifier.run.cache import Cache
from verifier.run.engine import VERDICTS, exit_code, proof_detail, proof_words
from verifier.run.loader import load_all, load_pack
from verifier.run.executor import EXECUTORS, SCHEDULER_ENV, resolve_executor
from verifier.run.margin import margin_table
from verifier.run.parallel import MAX_JOBS, auto_jobs, check_jobs, resolve_jobs
from verifier.smt.export import write_for_results
from verifier.terminal import COLOR_CHOICES, LiveProgress, print_table, wants_color
from verifier.trust import selftest
from verifier.trust.crosscheck import crosscheck_results
from verifier.trust.mutate import run_catalogue
from verifier.world.scenario import read_scenario

EXIT_OK, EXIT_FAIL, EXIT_INPUT, EXIT_UNKNOWN, EXIT_INTERNAL = 0, 1, 2, 3, 4


def _print_diags(diags) -> None:
    for d in diags:
        print(d.render(), file=sys.stderr)


def _with_jobs_and_cache(opts, args):
    """--jobs, --executor, --scheduler and --no-cache (see verifier.run.parallel,
    verifier.run.executor and verifier.run.cache)."""
    import attrs

    spec = resolve_executor(args.executor, resolve_jobs(args.jobs), args.scheduler)
    cache = None if args.no_cache else Cache(warn=lambda w: print(f"verifier: warning: {w}", file=sys.stderr))
    return attrs.evolve(opts, jobs=spec.jobs, executor=spec.kind, scheduler=spec.scheduler, cache=cache)


def _executor(args, jobs: int | None):
    """The executor of mutate, test and selftest: ``jobs`` local worker processes (default 1),
    or Dask (a LocalCluster of ``jobs`` workers, default one per core, or --scheduler's)."""
    if jobs is None:
        jobs = auto_jobs() if args.executor == "dask" else 1
    return resolve_executor(args.executor, check_jobs(jobs), args.scheduler)


def cmd_check(args) -> int:

    if not args.paths and not Path("rules").exists():
        raise UsageError("no PATH given and no rules/ folder here: name the pack files or folders "
                         "to check (the default, rules/, is looked for in the current folder)")
    packs, diags = load_all(args.paths or ["rules"])
    _print_diags(diags)
    input_errors = any(d.severity == "error" for d in diags)
    opts = CheckOptions(legs=args.legs, rules=tuple(args.rule or ()), timeout=args.timeout,
                        rlimit=args.rlimit, out=None if args.no_files else Path(args.out),
                        induction_depth=args.induction_depth, max_legs=args.max_legs)
    opts = _with_jobs_and_cache(opts, args)
    fmt = "json" if args.json else args.format
    if args.crosscheck:
        import importlib.util
        if importlib.util.find_spec("cvc5") is None:   # say so before any solving
            raise UsageError("--crosscheck needs cvc5: pip install 'verifier[crosscheck]'")
    if args.report:
        ensure_ours(Path(args.report))  # refuse a foreign directory before any work
    if opts.out is not None and opts.out.exists() and not opts.out.is_dir():
        raise UsageError(f"--out {opts.out.as_posix()} exists and is not a directory: counterexample "
                         "files go into a folder (give a new or existing folder, or --no-files)")
    progress = LiveProgress(sys.stderr.isatty() and not args.json, wants_color(args.color, sys.stderr))
    try:
        results = check_packs(packs, opts, progress)
    finally:
        progress.clear()
    cross = None
    if args.crosscheck:
        results, cross = crosscheck_results(packs, results, opts)
    if fmt in ("junit", "sarif"):
        print(render(fmt, results, diags), end="")
    elif fmt == "json":
        counts = dict.fromkeys(VERDICTS, 0)
        lemma_counts = dict.fromkeys(VERDICTS, 0)
        for p in results:
            for r in p.results:
                (lemma_counts if r.role == "lemma" else counts)[r.verdict] += 1
        doc = {"packs": [{"name": p.name, "path": p.path, "scope": p.scope,
                          "rules": [r.as_json() for r in p.results if r.role == "rule"],
                          "lemmas": [r.as_json() for r in p.results if r.role == "lemma"]}
                         for p in results],
               "errors": [d.as_json() for d in diags if d.severity == "error"],
               "summary": counts, "lemma_summary": lemma_counts}
        if cross is not None:
            doc["crosscheck"] = cross.as_json()
        print(json.dumps(doc, indent=2, sort_keys=True))
    else:
        print_table(results, diags, color=wants_color(args.color, sys.stdout))
    if cross is not None and fmt != "json":
        print(cross.summary(), file=sys.stderr if fmt in ("junit", "sarif") else sys.stdout)
    # files that could not be written are said after the verdicts, with the path and the
    # operating system's reason, and make the exit code 2 (4 still wins)
    unwritten = [r.write_error for p in results for r in p.results if r.write_error]
    if args.report:
        try:
            page = write_report(Path(args.report), packs, results, diags, opts)
            print(f"report: {page.as_posix()}", file=sys.stderr)
        except WriteError as exc:
            unwritten.append(f"the report: {exc}")
    if args.smt2:
        try:
            n = len(write_for_results(Path(args.smt2), packs, results))
            print(f"smt2: {n} SMT-LIB files in {Path(args.smt2).as_posix()}", file=sys.stderr)
        except OSError as exc:
            unwritten.append(f"the SMT-LIB files: {_os_words(exc)}")
    if opts.out is not None:
        _note_stale_files(opts.out, packs, results)
    for text in unwritten:
        print(f"verifier: error: {text}", file=sys.stderr)
    code = exit_code(results, input_errors)
    return EXIT_INPUT if unwritten and code != EXIT_INTERNAL else code


def _os_words(exc: OSError) -> str:
    """An OSError as "cannot write PATH: reason" when it names a file."""
    if exc.filename is not None and exc.strerror:
        return f"{Path(exc.filename).as_posix()}: {exc.strerror}"
    return str(exc)


def _note_stale_files(out: Path, packs, results) -> None:
    """Say which evidence files left by an earlier run no longer match their rule's verdict
    (``cexfile.stale_files``). They are kept (they may be archived evidence); ``verifier
    replay`` re-judges them."""
    for path, rule_id, words in stale_files(out, packs, results):
        print(f"note: {path.as_posix()} is from an earlier run: rule {rule_id} {words}; the file "
              f"is kept ('verifier replay' re-judges it; delete it if it is no longer evidence)",
              file=sys.stderr)


def cmd_margin(args) -> int:
    pack = load_pack(args.pack)
    opts = MarginOptions(rules=tuple(args.rule or ()), vary=tuple(args.vary) if args.vary else MarginOptions().vary,
                         legs=args.legs, rlimit=args.rlimit,
                         timeout=args.timeout if args.timeout is not None else MarginOptions().timeout,
                         core=not args.no_core, out=None if args.no_files else Path(args.out))
    if args.report:
        ensure_ours(Path(args.report))  # refuse a foreign directory before any work
    if opts.out is not None and opts.out.exists() and not opts.out.is_dir():
        raise UsageError(f"--out {opts.out.as_posix()} exists and is not a directory")
    def progress(p, rule):   # a line a rule on a terminal (the searches take a while)
        if sys.stderr.isatty():
            print(f"margin: {p.name}/{rule}", file=sys.stderr)

    run = margins(pack, opts, progress=progress)
    doc = run.as_json()
    if args.json:
        print(json.dumps({**doc, "caution": CAUTION}, indent=2, sort_keys=True))
    else:
        print(margin_table(run))
    if args.report:
        try:
            page = write_report(Path(args.report), [pack], [run.checked], [],
                                CheckOptions(legs=args.legs, rules=opts.rules, rlimit=args.rlimit),
                                margins={pack.name: doc["rules"]})
            print(f"report: {page.as_posix()}", file=sys.stderr)
        except WriteError as exc:
            print(f"verifier: error: the report: {exc}", file=sys.stderr)
            return EXIT_INPUT
    if any(m.errors for m in run.rules):
        return EXIT_INTERNAL
    return EXIT_OK


def cmd_diff(args) -> int:
    """verifier diff OLD NEW (logic in verifier.recheck.diff)."""
    cache = None if args.no_cache else Cache(warn=lambda w: print(f"verifier: warning: {w}", file=sys.stderr))
    progress = LiveProgress(sys.stderr.isatty() and not args.json, wants_color("auto", sys.stderr))
    opts = diff.DiffOptions(legs=args.legs, rlimit=args.rlimit, timeout=args.timeout,
                            jobs=check_jobs(args.jobs), cache=cache,
                            out=Path(args.out) if args.out else None,
                            rules=tuple(args.rule or ()), progress=progress.say,
                            induction_depth=args.induction_depth, max_legs=args.max_legs)
    try:
        diffs = diff.diff_specs(args.old, args.new, opts)
    finally:
        progress.clear()
    if args.json:
        print(json.dumps(diff.as_json(diffs, args.old, args.new), indent=2, sort_keys=True))
    else:
        print(diff.table(diffs, args.old, args.new))
    return diff.exit_code(diffs)


def cmd_mutate(args) -> int:
    """verifier mutate PACK... (logic in verifier.trust.mutate)."""
    spec = _executor(args, args.jobs)
    packs = [load_pack(p) for p in args.packs]
    rep = run_catalogue(packs, timeout=args.timeout, executor=spec)
    if args.json:
        print(json.dumps(rep.as_json(), indent=2, sort_keys=True))
    else:
        print("\n".join(p.text() for p in rep.packs))
        ratio = rep.ratio()
        print(f"kill ratio over {len(packs)} pack(s): " + (f"{100 * ratio:.1f} %" if ratio is not None else "n/a"))
    return EXIT_OK


def cmd_selftest(args) -> int:
    """verifier selftest --report DIR (logic in verifier.trust.selftest)."""
    plan = selftest.default_plan(Path("."), args.profile)
    spec = _executor(args, plan.workers) if args.executor == "dask" else None
    data = selftest.run(plan, Path(args.report), progress=lambda m: print(m, file=sys.stderr),
                        executor=spec)
    print(f"selftest: {'all criteria met' if data['passed'] else 'some criteria NOT met'}; "
          f"dossier: {(Path(args.report) / 'validation.md').as_posix()}")
    return EXIT_OK if data["passed"] else EXIT_FAIL


def _impl_table(rep) -> str:
    lines = [f"implementation {rep.onboard.spec} ({rep.onboard.module_file or 'no file'}, sha256 "
             f"{rep.onboard.module_sha256[:16]}...)"
             + (f" with trackside {rep.trackside.spec}" if rep.trackside else "")
             + f" against pack {rep.pack} ({rep.path})"]
    if rep.scope:
        lines += coverage.lines(rep.scope)
    width = max((len(r.rule) for r in rep.rules), default=10)
    for r in rep.rules:
        lines.append(f"  {r.status:<11} {r.rule:<{width}}  {r.worlds} world{'s' if r.worlds != 1 else ''} "
                     f"({describe_sources(r.sources)}), "
                     f"given held in {r.applied}")
        if r.status == "failed":
            n = len(r.world.legs)
            lines.append(f"              found by {r.found_by}; shrunk to {n} leg{'s' if n != 1 else ''}"
                         + (f" (from {r.legs_before})" if r.legs_before != n else ""))
            if r.counterexample:
                lines.append(f"              counterexample: {r.counterexample}")
        if r.message:
            lines.append(f"              {r.message}")
    for f in rep.findings:
        lines.append(f"  contract    {f.kind}: {f.message}" + (f" (at {f.where})" if f.where else ""))
        if f.file:
            lines.append(f"              world: {f.file} (found by {f.found_by})")
    if rep.output is not None and rep.output.bytes:
        lines.append(f"  output      {rep.output.summary()}")
    counts: dict = {}
    for r in rep.rules:
        counts[r.status] = counts.get(r.status, 0) + 1
    lines.append(f"summary: {', '.join(f'{counts.get(k, 0)} {k}' for k in ('passed', 'failed', 'not checked'))}; "
                 f"{len(rep.findings)} contract finding{'s' if len(rep.findings) != 1 else ''}; "
                 f"{rep.calls} calls of the implementation in {rep.seconds:.1f} s")
    lines.append(f"note: {CAUTION}")
    return "\n".join(lines)


def cmd_test(args) -> int:
    """verifier test PACK --impl MODULE:FUNCTION (logic in verifier.implcheck)."""
    reports = []
    spec = _executor(args, args.jobs)
    progress = LiveProgress(sys.stderr.isatty() and not args.json, wants_color("auto", sys.stderr))
    for path in args.packs:
        pack = load_pack(path)
        _print_diags(pack.warnings)
        onboard = args.impl or pack.implementation.get("onboard")
        if not onboard:
            raise UsageError(f"no implementation for {pack.path}: give --impl MODULE:FUNCTION or set "
                             "onboard in its [implementation] table")
        search = tuple(args.path or ()) + tuple(pack.implementation.get("path", ()))
        loaded = interface.load(onboard, search)
        ts = args.trackside_impl or pack.implementation.get("trackside")
        trackside = interface.load(ts, search) if ts else None
        opts = runner.ImplOptions(
            max_examples=args.max_examples, seed=args.seed, smt=not args.no_smt,
            hypothesis=not args.no_hypothesis, out=None if args.no_files else Path(args.out),
            call_timeout=args.call_timeout, legs=args.legs, rules=tuple(args.rule or ()),
            executor=spec,
            cache=None if args.no_cache else Cache(warn=lambda w: print(f"verifier: warning: {w}", file=sys.stderr)))
        if opts.rules:
            unknown = [r for r in opts.rules if r not in {x.id for x in pack.rules}]
            if unknown:
                raise UsageError(f"pack {pack.name} has no rule '{unknown[0]}'"
                                 + suggest(unknown[0], [x.id for x in pack.rules]))
        try:
            rep = runner.check(pack, loaded, trackside, opts, progress=progress.say)
        finally:
            progress.clear()
        reports.append(rep)
    if args.json:
        print(json.dumps({"implementations": [r.as_json() for r in reports]}, indent=2, sort_keys=True))
    else:
        print("\n".join(_impl_table(r) for r in reports))
    codes = [r.exit_code() for r in reports]
    return EXIT_FAIL if EXIT_FAIL in codes else max(codes, default=EXIT_OK)


def cmd_replay(args) -> int:
    outcomes = replay_paths(args.paths or ["counterexamples"], impl=args.impl, search=tuple(args.path or ()))
    width = max((len(o.file) for o in outcomes), default=10)
    status = max([15] + [len(o.status) for o in outcomes])     # "still not inductive" is 19
    for o in outcomes:
        print(f"{o.status:<{status}} {o.file:<{width}}  {o.detail}")
    if not outcomes:
        print("no counterexample files found")
    counts: dict = {}
    for o in outcomes:
        counts[o.status] = counts.get(o.status, 0) + 1
    print("summary: " + (", ".join(f"{v} {k}" for k, v in sorted(counts.items())) or "nothing replayed"))
    return EXIT_OK if all(o.status in ("still violated", "still not inductive", "still breaks")
                          for o in outcomes) else EXIT_FAIL


def cmd_show(args) -> int:
    text, svg = show(args.file, pack_path=args.pack, svg=args.svg, recompute=fresh_doc)
    print(text)
    if svg:
        print(f"diagram: {svg}", file=sys.stderr)
    return EXIT_OK


def cmd_simulate(args) -> int:
    world = read_scenario(args.scenario)
    pack = load_pack(args.pack)
    _print_diags(pack.warnings)
    text, ok = simulate_text(pack, world, args.legs)
    print(text)
    return EXIT_OK if ok else EXIT_FAIL


# ---- numeric options: one set of argparse types, so a bad value is a usage error (exit 2)
# before any work, for every subcommand alike.
MAX_SECONDS = 1_000_000          # about 11.6 days; z3 takes its time-out as 32-bit milliseconds
MAX_RLIMIT = 2 ** 32 - 1         # z3's rlimit is a 32-bit count: a larger one wraps (0 = none)


def _whole(text: str, lo: int | None, hi: int | None, what: str) -> int:
    span = (f"{lo}..{hi}" if hi is not None else f"{lo} or more") if lo is not None else "any"
    try:
        n = int(text, 10)
    except ValueError:
        n = None
    if n is None or (lo is not None and n < lo) or (hi is not None and n > hi):
        raise argparse.ArgumentTypeError(f"must be a whole number {span} ({what}), not {text!r}")
    return n


def count_arg(lo: int | None, hi: int | None, what: str):
    """An argparse type: a whole number in lo..hi (None: unbounded on that side)."""
    def parse(text: str) -> int:
        return _whole(text, lo, hi, what)
    parse.__name__ = what      # argparse names the type in some messages
    return parse


def seconds_arg(text: str) -> float:
    """An argparse type: a finite number of seconds, more than 0 and at most MAX_SECONDS
    (nan, inf and 1e308 are refused, not passed on to a conversion that fails later)."""
    import math
    try:
        x = float(text)
    except ValueError:
        x = math.nan
    if not (math.isfinite(x) and 0 < x <= MAX_SECONDS):
        raise argparse.ArgumentTypeError(f"must be a number of seconds more than 0 and at most "
                                         f"{MAX_SECONDS}, not {text!r}")
    return x


_bound_arg = count_arg(0, 8, "movement legs")
_depth_arg = count_arg(1, 8, "induction depth")
_max_legs_arg = count_arg(0, 32, "deepest base case")    # verifier.run.induct.MAX_MAX_LEGS
_rlimit_arg = count_arg(1, MAX_RLIMIT, "solver budget per check")
_examples_arg = count_arg(1, 1_000_000, "examples per rule")
_seed_arg = count_arg(0, None, "seed")


def _jobs_arg(text: str) -> int:
    return _whole(text, 1, MAX_JOBS, "worker processes")


def _jobs_or_auto(text: str):
    """--jobs of check: a number of worker processes, or 'auto' (one per core, at most 8)."""
    return "auto" if text == "auto" else _jobs_arg(text)


def _legs_arg(text: str):
    """--legs of check: a whole number 0..8, or 'any'."""
    if text == "any":
        return "any"
    try:
        return _bound_arg(text)
    except argparse.ArgumentTypeError:
        raise argparse.ArgumentTypeError(f"must be a whole number 0..8 or 'any', not {text!r}") from None


def _executor_args(p, what: str) -> None:
    """--executor and --scheduler, alike for every subcommand that fans work out."""
    p.add_argument("--executor", choices=EXECUTORS, default="local",
                   help=f"{what}: local (default: --jobs worker processes on this "
                        "machine) or dask (a Dask cluster: --scheduler's, else a LocalCluster "
                        "started for the run; needs verifier[dask]); the output is the same")
    p.add_argument("--scheduler", metavar="ADDRESS",
                   help=f"with --executor dask: the Dask scheduler, e.g. tcp://HOST:8786 "
                        f"(default: ${SCHEDULER_ENV}, else a LocalCluster)")


def build_parser() -> argparse.ArgumentParser:
    p = argparse.ArgumentParser(
        prog="verifier",
        description="Prove or refute safety rules about balise-group-relative train positioning. "
                    + CAUTION)
    p.add_argument("--version", action="version", version=f"verifier {__version__}")
    sub = p.add_subparsers(dest="command", metavar="COMMAND")

    c = sub.add_parser("check", help="prove or refute every rule of the packs",
                       description="Check every rule of the given packs (files or directories, "
                                   "default rules/) for every world in scope. Exit code: 0 all "
                                   "hold; 1 violated or vacuous; 2 bad input; 3 none violated but some "
                                   "unknown (a budget ran out) or bounded (holds up to its bound, "
                                   "not proved for any number of legs); 4 internal cross-check "
                                   "failure.")
    c.add_argument("paths", nargs="*", metavar="PATH", help="pack files or directories (default: rules/)")
    c.add_argument("--json", action="store_true", help="print one JSON object instead of the table")
    c.add_argument("--legs", type=_legs_arg, metavar="K", help="bound: movement legs after the passage, "
                   "0..8, or 'any' to prove every rule for any number of legs (overrides packs and rules)")
    c.add_argument("--induction-depth", type=_depth_arg, default=4, metavar="N",
                   help="for rules with legs = \"any\": the deepest induction step tried, 1..8 "
                        "(default 4; the base case covers at least N - 1 legs)")
    c.add_argument("--max-legs", type=_max_legs_arg, default=12, metavar="N",
                   help="for rules with legs = \"any\" whose induction step is not proved: deepen "
                        "the base case one leg at a time up to N legs (default 12) within the "
                        "rule's budget, before answering bounded; a counterexample found so is "
                        "violated")
    c.add_argument("--rule", action="append", metavar="ID", help="check only this rule (repeatable)")
    c.add_argument("--timeout", type=seconds_arg, metavar="SECONDS", help="wall-clock guard per rule (default 120)")
    c.add_argument("--rlimit", type=_rlimit_arg, metavar="N", help="deterministic solver budget per check (default 500000000)")
    c.add_argument("--out", default="counterexamples", metavar="DIR", help="where counterexample files go (default: counterexamples/ in the current folder)")
    c.add_argument("--no-files", action="store_true", help="write no counterexample files")
    c.add_argument("--jobs", type=_jobs_or_auto, default=None, metavar="N",
                   help="solve rules in N worker processes, or 'auto': one per core, at most 8 "
                        "(the default, or $VERIFIER_JOBS); the results and files are the same "
                        "for any N")
    _executor_args(c, "where the rules' solver questions are solved")
    c.add_argument("--no-cache", action="store_true", help="solve every rule again; neither read nor write the cache (.verifier-cache/ in the current folder)")
    c.add_argument("--format", choices=("table", "json", "junit", "sarif"), default="table",
                   help="output on stdout: table (default), json (as --json), junit (XML, one test "
                        "case per rule) or sarif (SARIF 2.1.0)")
    c.add_argument("--color", choices=COLOR_CHOICES, default="auto",
                   help="colour the table's verdicts (their words stay): auto (default: when stdout "
                        "is a terminal and NO_COLOR is not set), always, or never (the plain text, "
                        "as when piped). JSON, JUnit and SARIF output is never coloured")
    c.add_argument("--report", metavar="DIR", help="also write an evidence report (index.html, "
                   "manifest.json, counterexamples) into DIR, which must be new, empty or a report")
    c.add_argument("--crosscheck", action="store_true", help="re-solve every obligation with cvc5 "
                   "(same obligation, second solver) and replay solver-chosen boundary worlds in the "
                   "simulator; a disagreement is an internal error (exit 4). Needs verifier[crosscheck]")
    c.add_argument("--smt2", metavar="DIR", help="write each rule's proof obligations as portable "
                   "SMT-LIB 2.6 files (DIR/<pack>/<rule>.smt2 and .given.smt2) for any solver")
    c.set_defaults(func=cmd_check)

    d = sub.add_parser("diff", help="compare two versions of a pack: verdicts, coverage, claims",
                       description="Compare OLD and NEW (pack files, directories, or REV:PATH in the "
                                   "working git repository). Exit code: 0 no verdict changes; 1 some "
                                   "verdict changes; 2 bad input; 3 something unknown; 4 internal "
                                   "cross-check failure. Writes files only with --out.")
    d.add_argument("old", metavar="OLD")
    d.add_argument("new", metavar="NEW")
    d.add_argument("--json", action="store_true", help="print one JSON object instead of the table")
    d.add_argument("--legs", type=_bound_arg, metavar="K", help="bound for both sides (overrides packs and rules)")
    d.add_argument("--induction-depth", type=_depth_arg, default=4, metavar="N",
                   help="as for check: the deepest induction step tried for rules with legs = \"any\" (default 4)")
    d.add_argument("--max-legs", type=_max_legs_arg, default=12, metavar="N",
                   help="as for check: how far the base case of a rule whose step is not proved is deepened (default 12)")
    d.add_argument("--out", metavar="DIR", help="write distinguishing worlds and counterexamples under DIR (default: write nothing)")
    d.add_argument("--timeout", type=seconds_arg, metavar="SECONDS", help="wall-clock guard per question (default 120)")
    d.add_argument("--rlimit", type=_rlimit_arg, metavar="N", help="deterministic solver budget per check")
    d.add_argument("--jobs", type=_jobs_arg, default=1, metavar="N", help="decide verdicts in N worker processes")
    d.add_argument("--no-cache", action="store_true", help="neither read nor write .verifier-cache/")
    d.add_argument("--rule", action="append", metavar="ID",
                   help="compare only this rule (repeatable); relating an envelope rule can take minutes")
    d.set_defaults(func=cmd_diff)

    m = sub.add_parser("mutate", help="seed small errors into packs' designs and see which the rules catch",
                       description="Mutate the onboard and trackside formulas of each PACK (flip a sign, "
                                   "swap over and under, drop a term, change a rounding mode, travelled "
                                   "distance for displacement, ...) and report killed, surviving, "
                                   "equivalent and invalid mutants, and the kill ratio.")
    m.add_argument("packs", nargs="+", metavar="PACK")
    m.add_argument("--json", action="store_true", help="print one JSON object")
    m.add_argument("--timeout", type=seconds_arg, default=20.0, metavar="SECONDS", help="per solver question (default 20)")
    m.add_argument("--jobs", type=_jobs_arg, default=None, metavar="N",
                   help="decide mutants in N worker processes (default 1; with --executor dask "
                        "and no --scheduler: the LocalCluster's workers, default one per core)")
    _executor_args(m, "where the mutants are decided")
    m.set_defaults(func=cmd_mutate)

    st = sub.add_parser("selftest", help="write the tool validation dossier",
                        description="Run the differential suite, the second-solver re-check, the "
                                    "mutation report and the fuzz summary; write them with the versions "
                                    "used as DIR/validation.md (and .json). Exit 0 when every criterion is met.")
    st.add_argument("--report", required=True, metavar="DIR")
    st.add_argument("--profile", choices=("ci", "thorough"), help="validation profile (default: VERIFIER_PROFILE or ci)")
    _executor_args(st, "where the differential sweep's world batches and the mutants run")
    st.set_defaults(func=cmd_selftest)

    t = sub.add_parser("test", help="check your own implementation against a rule pack",
                       description="Use a rule pack as the test oracle of your implementation: worlds "
                                   "from the solver (where each rule is tight, and its witness), from "
                                   "archived counterexamples and from Hypothesis go through your "
                                   "onboard function (docs/implementations.md); every rule is checked "
                                   "on what it returns, the rest of the world from the simulator. A "
                                   "failure is made minimal and written as a counterexample file. Exit "
                                   "code: 0 every rule passed; 1 a rule failed or the implementation "
                                   "broke the interface; 2 bad input; 3 some rule could not be checked.")
    t.add_argument("packs", nargs="+", metavar="PACK")
    t.add_argument("--impl", metavar="MODULE:FUNCTION", help="the onboard implementation (default: "
                   "the pack's [implementation] onboard)")
    t.add_argument("--trackside-impl", metavar="MODULE:FUNCTION", help="a trackside implementation "
                   "(default: the pack's [implementation] trackside, else the pack's trackside formulas)")
    t.add_argument("--path", action="append", metavar="DIR", help="put DIR on the import path (repeatable)")
    t.add_argument("--rule", action="append", metavar="ID", help="check only this rule (repeatable)")
    t.add_argument("--max-examples", type=_examples_arg, default=200, metavar="N",
                   help="Hypothesis examples per rule (default 200)")
    t.add_argument("--seed", type=_seed_arg, metavar="N", help="Hypothesis seed (default: a fixed one, so "
                   "that runs repeat)")
    t.add_argument("--legs", type=_bound_arg, metavar="K", help="legs of generated worlds (default: the "
                   "rule's bound; 6 for legs = \"any\")")
    t.add_argument("--no-smt", action="store_true", help="no worlds from the solver")
    t.add_argument("--no-hypothesis", action="store_true", help="no worlds from Hypothesis")
    t.add_argument("--call-timeout", type=seconds_arg, default=5.0, metavar="SECONDS",
                   help="time limit per call of the implementation (default 5)")
    t.add_argument("--out", default="counterexamples", metavar="DIR",
                   help="where counterexample files go (DIR/<pack>/impl/<module.function>/)")
    t.add_argument("--no-files", action="store_true", help="write no files")
    t.add_argument("--no-cache", action="store_true", help="do not use .verifier-cache/ for the solver's witnesses")
    t.add_argument("--json", action="store_true", help="print one JSON object")
    t.add_argument("--jobs", type=_jobs_arg, default=None, metavar="N",
                   help="solve the rules' witnesses in N worker processes (default 1; with "
                        "--executor dask and no --scheduler: the LocalCluster's workers, default "
                        "one per core)")
    _executor_args(t, "where the solver's witnesses are solved (the implementation always runs "
                      "here)")
    t.set_defaults(func=cmd_test)

    r = sub.add_parser("replay", help="re-run archived counterexamples against today's rules",
                       description="For each counterexample file: still violated, now holds, rule "
                                   "changed or rule gone; for each counterexample to induction "
                                   "(.induction.json): still not inductive, no longer breaks, rule "
                                   "changed or rule gone. Exit 0 when every file still says what it said.")
    r.add_argument("paths", nargs="*", metavar="PATH", help="counterexample files or directories (default: counterexamples/)")
    r.add_argument("--impl", metavar="MODULE:FUNCTION", help="replay counterexamples of an "
                   "implementation with this one (default: the one each file records)")
    r.add_argument("--path", action="append", metavar="DIR", help="put DIR on the import path (repeatable)")
    r.set_defaults(func=cmd_replay)

    m = sub.add_parser("margin", help="how far each rule that holds is from failing, and what its proof needs",
                       description="Check PACK, then for every rule that holds: its slack (the least "
                                   "distance from failing over the worlds in scope, with that world), "
                                   "the threshold of each [world] bound named by --vary (moved in the "
                                   "real world only; the designs keep the pack's values), and the named "
                                   "assumptions its proof needs. Margins are found up to the rule's bound "
                                   "(the base bound of a proof for any number of legs). Exit code: 0 "
                                   "done; 2 bad input; 4 the simulator disagreed with a margin's world.")
    m.add_argument("pack", metavar="PACK")
    m.add_argument("--rule", action="append", metavar="ID", help="only this rule (repeatable)")
    m.add_argument("--vary", action="append", metavar="KEY",
                   help="a [world] bound whose threshold to find (repeatable; default: "
                        + ", ".join(MarginOptions().vary) + "; also antenna.low, antenna.high)")
    m.add_argument("--legs", type=_bound_arg, metavar="K", help="bound: movement legs, 0..8 (default: the rule's)")
    m.add_argument("--no-core", action="store_true", help="leave out the assumptions each proof needs")
    m.add_argument("--timeout", type=seconds_arg, metavar="SECONDS", help="wall-clock guard per search (default 120)")
    m.add_argument("--rlimit", type=_rlimit_arg, metavar="N", help="deterministic solver budget per check (default 500000000)")
    m.add_argument("--json", action="store_true", help="print one JSON object instead of the table")
    m.add_argument("--out", default="margins", metavar="DIR",
                   help="where the worlds go (DIR/<pack>/<rule>.slack.json, DIR/<pack>/<rule>.<key>.json, "
                        "each with its diagram; default margins/, apart from the counterexamples that "
                        "replay re-judges)")
    m.add_argument("--no-files", action="store_true", help="write no world files")
    m.add_argument("--report", metavar="DIR", help="also write an evidence report with a margins section")
    m.set_defaults(func=cmd_margin)

    s = sub.add_parser("simulate", help="evaluate one hand-written world exactly",
                       description="Print the real state, the estimate, the position report with "
                                   "its packet codes and each rule's outcome for one scenario "
                                   "(TOML or JSON, or a counterexample file).")
    s.add_argument("scenario", metavar="SCENARIO")
    s.add_argument("--pack", required=True, metavar="PACK", help="the pack whose designs and rules to apply")
    s.add_argument("--legs", type=_bound_arg, metavar="K", help="bound used for the scope check")
    s.set_defaults(func=cmd_simulate)

    w = sub.add_parser("show", help="explain a counterexample file in words, after re-checking it",
                       description="Re-simulate the recorded world under its pack, check every "
                                   "recorded value, then tell the story of the counterexample. "
                                   "Exit 2 when the file is not a counterexample, of a newer "
                                   "format, or no longer matches its own recorded values.")
    w.add_argument("file", metavar="FILE")
    w.add_argument("--pack", metavar="PACK", help="the pack the file was found with (default: "
                   "its recorded path, from here or a folder above the file)")
    w.add_argument("--svg", metavar="OUT", help="also write the diagram to OUT (an .svg file), "
                   "or to stdout instead of the story with '-'")
    w.set_defaults(func=cmd_show)
    return p


def main(argv=None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    if not getattr(args, "func", None):
        parser.print_help()
        return EXIT_INPUT
    legs = getattr(args, "legs", None)      # the ranges of numbers: the argparse types above
    if legs == "any" and args.command != "check":
        print("verifier: error: --legs any is for 'verifier check' (here the bound is a number of legs)",
              file=sys.stderr)
        return EXIT_INPUT
    try:
        return args.func(args)
    except PackError as exc:
        _print_diags(exc.diagnostics)
        return EXIT_INPUT
    except UsageError as exc:
        print(f"verifier: error: {exc}", file=sys.stderr)
        return EXIT_INPUT
    except VerifierError as exc:
        print(f"verifier: internal error: {exc}", file=sys.stderr)
        return EXIT_INTERNAL
    except KeyboardInterrupt:
        print("verifier: interrupted", file=sys.stderr)
        return 130
    except BrokenPipeError:   # e.g. `verifier check | head`: the reader went away
        import os
        os.dup2(os.open(os.devnull, os.O_WRONLY), sys.stdout.fileno())
        return 0
    except OSError as exc:    # a file that cannot be read or written: the place, not a traceback
        print(f"verifier: error: {exc if hasattr(exc, 'reason') else _os_words(exc)}", file=sys.stderr)
        return EXIT_INPUT


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())

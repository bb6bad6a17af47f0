"""Solving many rules: the cache first, then SMT-LIB queries, serially or in worker processes.

Every rule that the cache does not answer is encoded in this process and printed as SMT-LIB
text (:func:`verifier.smt.smtlib.export_rule`); the text is solved in a fresh z3 context by
:func:`verifier.smt.smtlib.solve_query`, here (``jobs == 1``) or in a worker process. Text goes
in, plain data comes out, and both paths solve the same text the same way, so the results, and
the files the engine writes from them, do not depend on ``jobs``. Results are handed back in
the order of the rules, whatever order the workers finish in. Where the workers run (worker
processes here, or a Dask cluster) is :mod:`verifier.run.executor`'s business; a query whose
result cannot be had from them (a worker lost) is ``unknown``, never ``holds``, and is not
cached.
"""

from __future__ import annotations

import os
import time

import attrs

from verifier.errors import TaskLost, UsageError
from verifier.run.cache import rule_key
from verifier.run.executor import ExecutorSpec, open_executor
from verifier.smt import smtlib, solve
from verifier.smt.concrete import Evaluator, compared_values

MAX_JOBS = 64
AUTO_JOBS_MAX = 8       # "auto" never starts more workers than this
JOBS_ENV = "VERIFIER_JOBS"


@attrs.frozen
class Presolved:
    """A solver result for the engine, with where it came from."""

    solved: object          # verifier.smt.solve.Solved
    seconds: float          # time spent encoding and solving (0 for a cache hit)
    cached: bool = False
    recorded: float = 0.0   # a cache hit: the seconds its original solve took


def _work(query, limits: dict):
    """The worker: SMT-LIB text in, plain data out."""
    t0 = time.monotonic()
    solved = smtlib.solve_query(query, **limits)
    return solved, time.monotonic() - t0


def _today(hit, pack, bound, evaluators: dict):
    """A cached result with its compared values computed again by today's encoding in its
    world (they depend on designs the cache key leaves out); None if that fails."""
    k = (id(pack), bound)
    if k not in evaluators:
        evaluators[k] = Evaluator(pack, bound)
    values = compared_values(evaluators[k], hit.world)
    return None if values is None else attrs.evolve(hit, smt_values=values)


def check_jobs(jobs: int) -> int:
    if not isinstance(jobs, int) or not 1 <= jobs <= MAX_JOBS:
        raise UsageError(f"--jobs must be 1..{MAX_JOBS}")
    return jobs


def auto_jobs() -> int:
    """Worker processes for ``--jobs auto``: one per core this process may run on, at most
    :data:`AUTO_JOBS_MAX` (each worker holds a z3 context of its own)."""
    try:
        cores = len(os.sched_getaffinity(0))
    except (AttributeError, OSError):       # pragma: no cover - not Linux
        cores = os.cpu_count() or 1
    return max(1, min(cores, AUTO_JOBS_MAX))


def resolve_jobs(jobs) -> int:
    """``--jobs``: a number, ``"auto"``, or None for the default, which is ``$VERIFIER_JOBS``
    (a number or ``auto``) or else ``auto``. The results and files never depend on it."""
    if jobs is None:
        jobs = os.environ.get(JOBS_ENV, "auto").strip() or "auto"
        if jobs != "auto":
            try:
                jobs = int(jobs)
            except ValueError:
                raise UsageError(f"{JOBS_ENV} must be a number of worker processes 1..{MAX_JOBS} "
                                 f"or 'auto', got {jobs!r}") from None
    if jobs == "auto":
        return auto_jobs()
    return check_jobs(jobs)


def open_pool(jobs: int):
    """A pool of ``jobs`` local worker processes for :func:`solve_in_order` (``pool=``, wrapped
    in a :class:`SharedPool`), to be used as a context manager."""
    return open_executor(ExecutorSpec("local", jobs))


def solve_in_order(todo, *, legs=None, timeout=None, rlimit=None, witness=True, jobs=1,
                   cache=None, bounds=None, assume=None, pool=None):
    """Yield a :class:`Presolved` for each (pack, rule) of ``todo``, in order.

    ``cache`` is a :class:`verifier.run.cache.Cache` or None. ``bounds`` gives each rule's bound
    (default: the pack's ``bound_for``); ``assume`` each rule's proved lemmas (default none,
    see :func:`verifier.smt.solve.lemma_facts`: they change the work, never the answer, so the
    cache key leaves them out). With ``jobs == 1`` each rule is solved when its result is asked
    for (so progress reports stay live). ``pool`` (a :class:`SharedPool`) is used instead of a
    pool of its own, and left open; with a pool on a cluster (``--executor dask``) every query
    the cache does not answer goes to it, even a single one."""
    check_jobs(jobs)
    limits = {"witness": witness}
    if timeout is not None:
        limits["timeout"] = timeout
    if rlimit is not None:
        limits["rlimit"] = rlimit
    plan, took = [], []      # took: the recorded seconds of each cache hit
    evaluators: dict = {}
    for n, (pack, rule) in enumerate(todo):
        bound = pack.bound_for(rule, legs) if bounds is None else bounds[n]
        key = rule_key(pack, rule, bound, witness) if cache is not None else None
        got = cache.lookup(key) if key is not None else None
        hit, recorded = got if got is not None else (None, 0.0)
        if hit is not None and hit.world is not None:
            hit = _today(hit, pack, bound, evaluators)
            if hit is None:
                cache.count_as_miss()
        plan.append((pack, rule, bound, key, hit, assume[n] if assume is not None else ()))
        took.append(recorded)

    def done(key, solved, seconds) -> Presolved:
        if cache is not None:
            cache.put(key, solved, witness, seconds)
        return Presolved(solved, seconds)

    unsolved = sum(1 for p in plan if p[4] is None)
    if (pool is None and jobs == 1) or unsolved == 0 or (
            unsolved == 1 and not (pool is not None and pool.spec.remote)):
        for (pack, rule, bound, key, hit, lemmas), recorded in zip(plan, took):
            if hit is not None:
                yield Presolved(hit, 0.0, True, recorded)
                continue
            t0 = time.monotonic()
            query = smtlib.export_rule(pack, rule, bound, lemmas)
            solved, _ = _work(query, limits)
            yield done(key, solved, time.monotonic() - t0)
        return

    if pool is None:
        with open_pool(jobs) as own:
            yield from _in_pool(own, plan, took, limits, done)
        return
    yield from _in_pool(pool.get(), plan, took, limits, done, shared=True)


class SharedPool:
    """One executor (:mod:`verifier.run.executor`) for several :func:`solve_in_order` calls (a
    check's lemmas, then its rules), started when the first of them needs it; a context manager
    that ends its workers on leaving (at once, cancelling what is queued, if an exception is
    leaving). ``spec`` is an :class:`ExecutorSpec`, or a number of local worker processes."""

    def __init__(self, spec):
        if not isinstance(spec, ExecutorSpec):
            spec = ExecutorSpec("local", spec)
        check_jobs(spec.jobs)
        self.spec = spec
        self.pool = None

    def get(self):
        if self.pool is None:
            self.pool = open_executor(self.spec)
        return self.pool

    def __enter__(self):
        return self

    def __exit__(self, kind, exc, tb):
        if self.pool is not None:
            self.pool.__exit__(kind, exc, tb)
        return False


def lost(exc: TaskLost, what: str):
    """The answer for a query whose result could not be had: ``unknown``, with why."""
    return solve.Solved("unknown", minimal=False, reason=f"no result for {what}: {exc}")


def _in_pool(pool, plan, took, limits, done, shared: bool = False):
    """Submit every query the cache did not answer to ``pool``; yield the results in order.
    A caller that stops asking (the generator closed) cancels what is left; a shared pool
    stays open for the next caller, unless it is an interrupt or an error."""
    futures = {}
    try:
        for i, (pack, rule, bound, key, hit, lemmas) in enumerate(plan):
            if hit is None:
                t0 = time.monotonic()
                query = smtlib.export_rule(pack, rule, bound, lemmas)
                futures[i] = (pool.submit(_work, query, limits), time.monotonic() - t0)
        for i, (pack, rule, bound, key, hit, _) in enumerate(plan):
            if hit is not None:
                yield Presolved(hit, 0.0, True, took[i])
                continue
            future, export_seconds = futures[i]
            try:
                solved, seconds = pool.outcome(future)
            except TaskLost as exc:     # unknown, and not cached: a later run asks again
                yield Presolved(lost(exc, f"{pack.name}/{rule.id}"), export_seconds)
                continue
            yield done(key, solved, export_seconds + seconds)
    except GeneratorExit:
        if not shared:
            pool.stop()
        pool.cancel(f for f, _ in futures.values())
        raise
    except BaseException:     # Ctrl-C, or the caller gave up: nothing more is solved
        pool.stop()
        raise

"""Differential comparison of the two implementations of DESIGN 4 on one concrete world.

The simulator (:mod:`verifier.world.sim`) and the SMT encoding evaluated on the same world
(:mod:`verifier.smt.concrete`) must give equal values for every vocabulary name, every per-leg
field of every active leg, every ``let``, and every rule's ``given`` (with its implicit
premise) and ``expect`` (compared where the rule applies: elsewhere ``legs[i]`` may name a leg
that does not exist). This module only sees plain values on both sides.
"""

from __future__ import annotations

from fractions import Fraction
from pathlib import Path

import attrs

from verifier.errors import PackError, TaskLost
from verifier.lang.vocab import INFO_FIELDS, LEG, info_fields_for, names_for
from verifier.run.executor import ExecutorSpec, open_executor
from verifier.run.loader import discover, load_pack, pack_from_source, pack_source
from verifier.smt.concrete import Evaluator
from verifier.world.scenario import fmt, world_to_data
from verifier.world.sim import State, World, applies, evaluate, scope_problems


@attrs.frozen
class Difference:
    name: str
    simulator: object
    encoding: object

    def __str__(self) -> str:
        return f"{self.name}: simulator {_show(self.simulator)}, encoding {_show(self.encoding)}"


def _show(v) -> str:
    if isinstance(v, Fraction):
        return fmt(v) + " (" + str(v) + ")" if v.denominator != 1 else fmt(v)
    return str(v)


def plain(v):
    """A simulator value as the plain data the encoding side returns."""
    if hasattr(v, "word"):
        return v.word
    return v


def flat(world: World) -> dict:
    """A world as the flat plain dict taken by the concrete encoding."""
    return {
        "balises": world.balises, "read": world.read, "linked": world.linked,
        "locacc": world.locacc, "offset": world.offset, "length": world.length,
        "antenna": world.antenna, "direction": world.direction.word, "running": world.running.word,
        "detect_error": world.detect_error,
        "legs": [{"cab_change": leg.cab_change, "running": leg.running.word,
                  "distance": leg.distance, "odometer": leg.odometer} for leg in world.legs],
        # G2 .. GN of a route under "g2" .. "gN" (DESIGN 4.10), as scenario files write them
        **{f"g{k}": _flat_group(g) for k, g in enumerate(world.route, 2)},
    }


def _flat_group(g) -> dict:
    return {"distance": g.distance, "side": g.side.word, "orientation": g.orientation.word,
            "balises": g.balises, "read": g.read, "linked": g.linked, "locacc": g.locacc,
            "offset": g.offset, "found": g.found, "at": g.at, "detect_error": g.detect_error}


@attrs.frozen
class SimSide:
    values: dict
    legs: tuple
    lets: dict
    given: dict
    expect: dict
    state: State = attrs.field(eq=False, repr=False)


def simulate(pack, world: World) -> SimSide:
    st = State(pack, world)
    values = {name: plain(st.get(name)) for name in names_for(pack.scope.groups)}
    for item in pack.infos:
        for field in info_fields_for(pack.scope.groups):
            values[f"info.{item.id}.{field}"] = plain(st.info_value(item.id, field))
    legs = tuple({f: plain(leg[f]) for f in LEG} for leg in st.legs)
    lets = {}
    for name in pack.lets:
        try:
            lets[name] = plain(st.formula(("let", name)))
        except IndexError:       # a let naming legs[i] beyond this world's legs
            st._memo.pop(("let", name), None)
    given, expect = {}, {}
    for rule in pack.rules:
        given[rule.id] = applies(rule, st)
        if given[rule.id]:
            expect[rule.id] = bool(evaluate(rule.expect.node, st, {}))
    return SimSide(values, legs, lets, given, expect, st)


def compare(sim: SimSide, enc) -> list[Difference]:
    """Every value on which the simulator and the encoding (a ``Concrete``) disagree."""
    out = []
    if not enc.scope_ok:
        return [Difference("scope", "inside", "outside (the encoding's constraints reject the inputs)")]
    for name, v in sim.values.items():
        if enc.values.get(name) != v:
            out.append(Difference(name, v, enc.values.get(name)))
    for i, (sl, el) in enumerate(zip(sim.legs, enc.legs), 1):
        for f, v in sl.items():
            if el.get(f) != v:
                out.append(Difference(f"legs[{i}].{f}", v, el.get(f)))
    if len(sim.legs) != len(enc.legs):
        out.append(Difference("legs.count", len(sim.legs), len(enc.legs)))
    for name, v in sim.lets.items():
        if enc.lets.get(name) != v:
            out.append(Difference(f"let {name}", v, enc.lets.get(name)))
    for rid, g in sim.given.items():
        if enc.given.get(rid) != g:
            out.append(Difference(f"rule {rid} given", g, enc.given.get(rid)))
        elif g and enc.expect.get(rid) != sim.expect[rid]:
            out.append(Difference(f"rule {rid} expect", sim.expect[rid], enc.expect.get(rid)))
    return out


def in_scope(pack, world: World, bound: int) -> list[str]:
    return scope_problems(world, pack.scope, bound)


# ---- the differential run ----------------------------------------------------------------------

def catalogue(paths=("rules", "tests/packs")) -> list[str]:
    """Every pack file under ``paths`` that loads without errors (shipped and test catalogues;
    packs that are meant to fail loading are simply left out)."""
    out = []
    for root in paths:
        p = Path(root)
        if not p.exists():
            continue
        for f in discover([p]):
            try:
                load_pack(f)
            except PackError:
                continue
            out.append(f.as_posix())
    return out


@attrs.frozen
class DiffReport:
    """The result of a differential run (plain data, picklable, JSON-able)."""

    worlds: int
    per_pack: dict              # pack name -> worlds evaluated
    rule_checks: int            # (world, rule) pairs whose given (and expect) were compared
    values_compared: int
    unique_checks: int          # worlds on which uniqueness of every encoded value was proved
    corners: dict               # corner -> hits
    failures: tuple             # dicts: pack, world (scenario data), differences
    seconds: float
    seeds: tuple
    packs: tuple

    def as_json(self) -> dict:
        return attrs.asdict(self)


def sweep_batch(job: tuple) -> DiffReport:
    """A worker's task: one batch of ``n`` worlds from its own seed, over packs sent as text
    with their hashes (:func:`verifier.run.loader.pack_source`)."""
    sources, n, seed, unique_every = job
    paths = [s[0] for s in sources]
    import time

    from hypothesis import HealthCheck, given, settings
    from hypothesis import seed as hseed

    from verifier.trust.strategies import CornerTally, corners, largest_bound, pack_worlds

    t0 = time.monotonic()
    packs = [pack_from_source(s) for s in sources]
    evaluators: dict = {}
    tally = CornerTally()
    per_pack: dict = {}
    counts = {"rules": 0, "values": 0, "unique": 0}
    failure: list = []

    @settings(max_examples=n, deadline=None, database=None, suppress_health_check=list(HealthCheck),
              derandomize=False, print_blob=False)
    @hseed(seed)
    @given(pack_worlds(packs))
    def one(pair):
        pack, world = pair
        bound = largest_bound(pack)
        problems = scope_problems(world, pack.scope, bound)
        if problems:
            failure[:] = [{"pack": pack.name, "world": world_to_data(world),
                           "differences": ["generator left the scope: " + "; ".join(problems)]}]
            raise AssertionError(problems)
        if pack.path not in evaluators:   # by path: two versions of a pack share a name
            evaluators[pack.path] = Evaluator(pack, bound)
        sim = simulate(pack, world)
        check_unique = unique_every and tally.worlds % unique_every == 0
        enc = evaluators[pack.path].evaluate(flat(world), unique=bool(check_unique))
        diffs = [str(d) for d in compare(sim, enc)]
        if enc.unique is False:
            diffs.append("the encoding does not determine: " + ", ".join(enc.ambiguous))
        tally.add(corners(world, pack.scope, bound, sim.state))
        per_pack[pack.name] = per_pack.get(pack.name, 0) + 1
        counts["rules"] += len(pack.rules)
        counts["values"] += (len(sim.values) + sum(len(x) for x in sim.legs) + len(sim.lets)
                             + len(sim.given) + len(sim.expect))
        counts["unique"] += bool(enc.unique)
        if diffs:
            failure[:] = [{"pack": pack.name, "world": world_to_data(world), "differences": diffs}]
            raise AssertionError("\n".join(diffs))

    try:
        one()
    except Exception as exc:  # noqa: BLE001 - the shrunk failure is reported as data
        if not failure:
            failure.append({"pack": "?", "world": None, "differences": [f"{type(exc).__name__}: {exc}"]})
    return DiffReport(tally.worlds, per_pack, counts["rules"], counts["values"], counts["unique"],
                      tally.as_json()["corners"], tuple(failure), time.monotonic() - t0, (seed,),
                      tuple(paths))


def _outcome(ex, future, job) -> DiffReport:
    """A batch's report; a lost batch as a report of no worlds with one failure saying so."""
    try:
        return ex.outcome(future)
    except TaskLost as exc:
        return DiffReport(0, {}, 0, 0, 0, {}, ({"pack": "?", "world": None, "differences": [
            f"the batch of {job[1]} worlds from seed {job[2]} has no result: {exc}"]},), 0.0,
            (job[2],), tuple(s[0] for s in job[0]))


def run_differential(paths, worlds: int, seed: int | None = None, workers: int = 2,
                     unique_every: int = 25, executor: ExecutorSpec | None = None) -> DiffReport:
    """Evaluate ``worlds`` generated worlds (split into ``workers`` batches, each with its own
    seed derived from ``seed``) in the simulator and in the encoding; see :class:`DiffReport`.
    The batches run in as many local worker processes, or as tasks on ``executor`` (for example
    a Dask cluster): the report depends on ``workers``, never on where the batches ran. A batch
    whose result is lost is a failure of the sweep, never a pass.

    Every ``unique_every``-th world also proves that the encoding's values are determined by the
    inputs (a second check: no other model with the same inputs differs anywhere)."""
    import random
    import time

    t0 = time.monotonic()
    paths = tuple(paths)
    if seed is None:
        seed = random.SystemRandom().randrange(2**32)
    workers = max(1, workers)
    sources = tuple(pack_source(load_pack(p)) for p in paths)
    share = [worlds // workers + (1 if i < worlds % workers else 0) for i in range(workers)]
    jobs = [(sources, n, seed + i, unique_every) for i, n in enumerate(share)]
    spec = executor or ExecutorSpec("local", workers)
    if not spec.parallel:
        parts = [sweep_batch(job) for job in jobs]
    else:
        with open_executor(spec) as ex:
            futures = [ex.submit(sweep_batch, job) for job in jobs]
            parts = [_outcome(ex, f, job) for f, job in zip(futures, jobs)]
    per_pack: dict = {}
    corners: dict = {}
    for p in parts:
        for k, v in p.per_pack.items():
            per_pack[k] = per_pack.get(k, 0) + v
        for k, v in p.corners.items():
            corners[k] = corners.get(k, 0) + v
    return DiffReport(sum(p.worlds for p in parts), per_pack, sum(p.rule_checks for p in parts),
                      sum(p.values_compared for p in parts), sum(p.unique_checks for p in parts),
                      corners, tuple(f for p in parts for f in p.failures), time.monotonic() - t0,
                      tuple(s for p in parts for s in p.seeds), paths)

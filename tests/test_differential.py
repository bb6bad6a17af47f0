"""Differential testing: the simulator and the SMT encoding evaluated on the same worlds.

The worlds come from :mod:`verifier.trust.strategies` (inside each pack's scope, leaning on the
corners); the packs are the shipped catalogue (rules/) and the test catalogue (tests/packs/).
For each world every vocabulary name, every per-leg field, every ``let`` and every rule's given
and expect must have the same value in both implementations.

How many worlds: the validation profile (``VERIFIER_PROFILE``, default ``ci`` = 15,000 worlds on
2 worker processes; ``thorough`` = 100,000, see docs/validation.md).
"""

from fractions import Fraction as F
from pathlib import Path

import attrs
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from verifier.trust.differential import catalogue, compare, flat, run_differential, simulate
from verifier.run.loader import load_pack
from verifier.smt.concrete import Evaluator
from verifier.trust.strategies import CORNERS, ROUTE_CORNERS, corners, largest_bound, profile, worlds
from verifier.lang.scope import Scope
from verifier.world.sim import Leg, State, World, scope_problems
from verifier.lang.vocab import Direction, Running

ROOT = Path(__file__).resolve().parent.parent
PACKS = ROOT / "tests" / "packs"
FEW = settings(max_examples=150, deadline=None, database=None, derandomize=True,
               suppress_health_check=list(HealthCheck))


@pytest.fixture(scope="module")
def basic():
    return load_pack(PACKS / "diff-basic.toml")


def test_catalogue_has_the_test_packs():
    found = catalogue((ROOT / "rules", PACKS))
    names = {Path(p).name for p in found}
    assert {"diff-basic.toml", "diff-operators.toml", "diff-nearest.toml", "diff-down.toml",
            "diff-designs.toml"} <= names


@pytest.mark.thorough
def test_simulator_and_encoding_agree_on_generated_worlds(record_property):
    # the validation profile's sweep (ci: 15,000 worlds, every corner hit): .ci/run runs it
    # after the README's test command (pytest -m thorough)
    prof = profile()
    paths = catalogue((ROOT / "rules", PACKS))
    report = run_differential(paths, prof["worlds"], seed=prof["seed"], workers=prof["workers"])
    text = [f"profile {prof['name']}: {report.worlds} worlds over {len(report.per_pack)} packs, "
            f"{report.rule_checks} rule evaluations, {report.values_compared} values compared, "
            f"{report.unique_checks} uniqueness proofs, {report.seconds:.1f} s, seeds {report.seeds}"]
    text += [f"  {n:7d}  {c}" for c, n in report.corners.items()]
    print("\n".join(text))
    record_property("differential", "\n".join(text))
    assert not report.failures, report.failures
    assert report.worlds >= prof["worlds"]
    assert report.unique_checks >= prof["worlds"] // 50
    missed = [c for c in list(CORNERS) + list(ROUTE_CORNERS) if not report.corners.get(c)]
    assert not missed, f"corners never hit: {missed}"


QUICK_WORLDS = 2_000
ROUTE_PACKS = [ROOT / "rules" / "route.toml", PACKS / "route-short-list.toml", PACKS / "route-reverse.toml"]


def test_simulator_and_encoding_agree_on_routes_across_hand_overs():
    # DESIGN 4.10 in both implementations: worlds of the route packs with three hand-overs and
    # more, an item referred to a group that has just left the onboard's list and one referred
    # to the current LRBG's predecessor, each value of each world compared
    report = run_differential(ROUTE_PACKS, 300, seed=11, workers=1)
    assert not report.failures, report.failures
    for corner in ("3+ hand-overs", "an item referred to a group that has left the list",
                   "an item referred to the current LRBG's predecessor",
                   "a group rejected after a hand-over", "a group passed unseen"):
        assert report.corners.get(corner, 0) >= 5, (corner, report.corners.get(corner))


def test_simulator_and_encoding_agree_on_a_quick_sample():
    # every run of the suite: a tenth of the ci profile's worlds over the same packs, the same
    # comparison (the corners are required by the thorough sweep above, not here)
    paths = catalogue((ROOT / "rules", PACKS))
    report = run_differential(paths, QUICK_WORLDS, seed=profile()["seed"] or 1, workers=1)
    assert not report.failures, report.failures
    assert report.worlds >= QUICK_WORLDS
    assert report.unique_checks >= QUICK_WORLDS // 50


# ---- the comparison itself can fail ------------------------------------------------------------

def test_compare_reports_a_changed_onboard_formula(tmp_path):
    """Simulate one pack and evaluate the encoding of a pack whose L_DOUBTOVER is 1 cm larger:
    the comparison must name est.l_doubtover (and what depends on it)."""
    text = (PACKS / "diff-basic.toml").read_text()
    changed = text.replace("[let]", '[onboard]\nl_doubtover = "lrbg.locacc + est.bound_over + 1 cm"\n\n[let]')
    (tmp_path / "changed.toml").write_text(changed)
    pack, other = load_pack(PACKS / "diff-basic.toml"), load_pack(tmp_path / "changed.toml")
    world = World(locacc=F(12), length=F(200), antenna=F(5),
                  legs=(Leg(distance=F(1000), odometer=F(1000)),))
    diffs = compare(simulate(pack, world), Evaluator(other, 3).evaluate(flat(world)))
    names = {d.name for d in diffs}
    assert "est.l_doubtover" in names
    # 12 m + 5 m + 5 % of 1000 m + 1 m detection = 68 m (SUBSET-041 5.3.1.1 from memory,
    # FACTS.md "Accuracy"; the detection error on top by default)
    d = next(d for d in diffs if d.name == "est.l_doubtover")
    assert (d.simulator, d.encoding) == (F(68), F(6801, 100))


def test_values_agree_on_a_worked_world(basic):
    """The terminus case worked by hand (FACTS.md, common practice): front first in reverse,
    cab change, front first out; both sides must agree with the hand values."""
    world = World(balises=2, read=2, locacc=F(0), length=F(100), antenna=F(3),
                  direction=Direction.REVERSE, running=Running.FORWARD,
                  legs=(Leg(False, Running.FORWARD, F(150), F(150)),
                        Leg(True, Running.FORWARD, F(20), F(20))))
    sim = simulate(basic, world)
    enc = Evaluator(basic, 3).evaluate(flat(world), unique=True)
    assert compare(sim, enc) == []
    assert enc.unique is True
    # ran in 150 m after the passage, more than length - antenna = 97 m (FACTS.md terminus):
    # after the change the front (former rear) is on the reverse side, orientation nominal.
    assert sim.values["actual.orientation"] == "nominal" == enc.values["actual.orientation"]
    assert sim.values["actual.front"] == F(-153 + 100 + 20) == enc.values["actual.front"]
    assert enc.values["report.q_dlrbg"] == "reverse"


# ---- scope: both sides draw the same border ------------------------------------------------------

def _outside(world: World, scope: Scope, how: int) -> World:
    """A world just outside the scope in one way (1 mm or one unit beyond a border)."""
    mm = F(1, 1000)
    if how == 0:
        return attrs.evolve(world, offset=world.locacc + mm)
    if how == 1:
        return attrs.evolve(world, detect_error=scope.detection + mm)
    if how == 2:
        return attrs.evolve(world, antenna=world.length + mm)
    if how == 3:
        return attrs.evolve(world, read=world.balises + 1)
    if how == 4:
        return attrs.evolve(world, length=scope.train_length[1] + mm)
    if how == 5:
        return attrs.evolve(world, locacc=world.locacc + F(1, 2))
    if not world.legs:
        return attrs.evolve(world, balises=scope.balises[1] + 1, read=1)
    last = world.legs[-1]
    if how == 6:
        return attrs.evolve(world, legs=world.legs[:-1] + (attrs.evolve(last, distance=scope.leg_distance[1] + mm),))
    # over-reading 1 mm beyond what the bound allows after the last leg (the detection error
    # counts against the odometry bound only when it is inside it, DESIGN 4.1)
    over = max(F(0), -world.detect_error) if scope.detection_in_odometry else F(0)
    measured = F(0)
    for leg in world.legs[:-1]:
        over += max(F(0), leg.odometer - leg.distance)
        measured += leg.odometer
    b = scope.odometry_over
    odo = (b.fixed + b.rate * measured - over + last.distance) / (1 - b.rate) + mm
    return attrs.evolve(world, legs=world.legs[:-1] + (attrs.evolve(last, odometer=odo),))


@FEW
@given(worlds(Scope(), 3), st.integers(0, 7))
def test_encoding_and_simulator_draw_the_same_scope_border(basic, world, how):
    assert scope_problems(world, basic.scope, 3) == []
    out = _outside(world, basic.scope, how)
    assert scope_problems(out, basic.scope, 3), (how, out)
    assert not _evaluator(basic).evaluate(flat(out)).scope_ok, (how, out)


_EVALUATORS: dict = {}


def _evaluator(pack):
    if pack.name not in _EVALUATORS:
        _EVALUATORS[pack.name] = Evaluator(pack, largest_bound(pack))
    return _EVALUATORS[pack.name]


# ---- the strategies themselves -------------------------------------------------------------------

DIFF_PACKS = [load_pack(p) for p in sorted(PACKS.glob("diff-*.toml"))]


@FEW
@given(st.data())
def test_worlds_stay_in_every_catalogue_scope(data):
    for pack in DIFF_PACKS:
        k = largest_bound(pack)
        world = data.draw(worlds(pack.scope, k))
        assert scope_problems(world, pack.scope, k) == []


def test_corners_are_named_from_the_world(basic):
    world = World(balises=1, read=1, locacc=F(63), offset=F(-63), length=F(10), antenna=F(2),
                  detect_error=F(1), legs=(Leg(True, Running.FORWARD, F(0), F(0)),
                                           Leg(False, Running.BACKWARD, F(5000), F(5000)),
                                           Leg(True, Running.FORWARD, F(0), F(0))))
    hit = corners(world, basic.scope, 3, State(basic, world))
    assert {"single-balise group", "passage unknown", "locacc at scope high", "offset at bound",
            "train length at scope low", "antenna at scope low", "detection error at bound",
            "zero-length leg", "leg distance at scope high", "legs at the bound",
            "cab change on the first leg", "cab change on the last leg"} <= hit
    assert "no legs" not in hit and "estimate exactly 0" not in hit

"""The Hypothesis strategies on routes of groups (DESIGN 4.10): every drawn world is inside its
pack's scope, the found groups are really found (the detection equations hold exactly), and the
drawn worlds reach the places a route adds: three hand-overs and more, a list of LRBGs that has
dropped a group, items referred to the current LRBG's predecessor and to a group that has left
the list. Only the simulator is used here (the encoding of routes is checked elsewhere)."""

from __future__ import annotations

import hashlib
from collections import Counter

import pytest
from hypothesis import HealthCheck, given, settings

from verifier.lang.vocab import INFO_FIELDS, names_for
from verifier.run.loader import pack_from_source
from verifier.trust.differential import flat
from verifier.trust.strategies import ROUTE_CORNERS, corners, largest_bound, worlds
from verifier.world.scenario import world_from_flat
from verifier.world.sim import State, handover, scope_problems

SOME = settings(max_examples=300, deadline=None, database=None, derandomize=True,
                suppress_health_check=list(HealthCheck))


def _pack(name: str, world: str, groups: str, infos: str, legs: int = 5):
    text = (f'[pack]\nname = "{name}"\ntitle = "route {name}"\nlegs = {legs}\n\n[world]\n{world}\n\n'
            f'{groups}\n{infos}\n[[rule]]\nid = "r"\ntitle = "r"\nexpect = "lrbg.group >= 1"\n')
    return pack_from_source((f"{name}.toml", text, hashlib.sha256(text.encode()).hexdigest()))


def _item(i: str, group: int, at: str, valid: str) -> str:
    return f'[[info]]\nid = "{i}"\ngroup = {group}\nat = "{at}"\nvalid = "{valid}"\n\n'


def _group(number: int, distance: str, orientation: str = "any", balises: str = "[1, 3]",
           locacc: str = '["0 m", "4 m"]') -> str:
    return (f"[[group]]\nnumber = {number}\ndistance = {distance}\norientation = \"{orientation}\"\n"
            f"balises = {balises}\nlocacc = {locacc}\n\n")


ITEMS4 = (_item("home", 1, "50 m", "both") + _item("second", 2, "30 m", "nominal")
          + _item("third", 3, "20 m", "both") + _item("fourth", 4, "10 m", "reverse"))

# four groups, a list of two: the third LRBG pushes G1 out of the onboard's list
SHORT_LIST = _pack("short-list", 'groups = 4\nhistory = 2\ng2_distance = ["100 m", "300 m"]\n'
                   'leg_distance = ["0 m", "800 m"]\nlocacc = ["0 m", "5 m"]',
                   _group(3, '["100 m", "400 m"]') + _group(4, '["150 m", "300 m"]', "same"), ITEMS4)
# a longer route running the reverse way, [[group]] tables for G2 too, and one-balise groups
REVERSE_ROUTE = _pack("reverse-route", 'groups = 6\nhistory = 3\ng2_side = "reverse"\n'
                      'leg_distance = ["0 m", "1 km"]',
                      _group(2, '["50 m", "200 m"]', "opposite", "1") + _group(3, '"300 m"')
                      + _group(4, '["100 m", "500 m"]', "same", "[2, 4]", '"0 m"')
                      + _group(5, '["100 m", "200 m"]', "any", "1") + _group(6, '["100 m", "900 m"]'),
                      ITEMS4 + _item("fifth", 5, "0 m", "both") + _item("sixth", 6, "1 km", "nominal"),
                      legs=6)
# three groups with the default [[group]] ranges (50 m .. 3 km) and the default legs
DEFAULTS = _pack("defaults", "groups = 3", "", _item("far", 3, "100 m", "both"), legs=4)
PACKS = [SHORT_LIST, REVERSE_ROUTE, DEFAULTS]


def _draws(pack, n: int = 150) -> list:
    """``n`` worlds of ``pack`` as the strategy draws them (reproducible: derandomized)."""
    out = []

    @settings(SOME, max_examples=n)
    @given(worlds(pack.scope, largest_bound(pack)))
    def collect(world):
        out.append(world)
    collect()
    return out


@pytest.fixture(scope="module")
def drawn():
    return {pack.name: _draws(pack) for pack in PACKS}


@pytest.mark.parametrize("pack", PACKS, ids=lambda p: p.name)
def test_every_drawn_route_world_is_inside_the_scope(pack, drawn):
    bound = largest_bound(pack)
    for world in drawn[pack.name]:
        assert len(world.route) == pack.scope.groups - 1
        assert scope_problems(world, pack.scope, bound) == [], world
        # every group after G2 runs the route's way (DESIGN 4.10)
        assert {g.side for g in world.route} == {world.g2.side}
        # the plain form carries every group, and reads back as the same world
        assert world_from_flat(flat(world)) == world


@pytest.mark.parametrize("pack", PACKS, ids=lambda p: p.name)
def test_found_groups_are_found_by_construction(pack, monkeypatch):
    """The legs are built so that each planned group is found exactly: the last-resort trimming
    of a world that left the scope is never needed (nor is any filtering)."""
    import verifier.trust.strategies as strategies
    trimmed = []
    real = strategies._in_scope

    def spy(world, scope, bound):
        out = real(world, scope, bound)
        trimmed.append(out != world)
        return out
    monkeypatch.setattr(strategies, "_in_scope", spy)
    worlds_ = _draws(pack, 100)
    assert len(trimmed) >= len(worlds_) and not any(trimmed)
    assert sum(g.found for w in worlds_ for g in w.route) >= len(worlds_)


def test_drawn_routes_hand_over_three_times_and_more(drawn):
    stages = Counter(len(handover(w, SHORT_LIST.scope).stages)
                     for w in drawn[SHORT_LIST.name])
    # G1, then G2, G3 and G4 one after the other: all four LRBGs of the route
    assert stages[4] >= 10, stages
    assert stages[1] and stages[2] and stages[3], stages
    longer = Counter(len(handover(w, REVERSE_ROUTE.scope).stages) for w in drawn[REVERSE_ROUTE.name])
    assert sum(n for s, n in longer.items() if s >= 4) >= 10, longer


def test_drawn_routes_refer_items_to_the_predecessor_and_to_a_group_that_left_the_list(drawn):
    left, previous = 0, 0
    for world in drawn[SHORT_LIST.name]:
        st = State(SHORT_LIST, world)
        h = st.handover
        groups = {i.group for i in SHORT_LIST.infos}
        gone = {s.group for s in h.stages} - set(h.history)
        if gone & groups:
            left += 1
            # an item of a group that left the list is rejected (3.6.2.2.2 c, DESIGN 4.10)
            for item in SHORT_LIST.infos:
                if item.group in gone:
                    assert st.info_value(item.id, "remembered") is False
                    assert st.info_value(item.id, "accepted") is False
        if h.previous in groups:
            previous += 1
            assert st.get("lrbg.previous") == h.previous
    assert left >= 10 and previous >= 10, (left, previous)


@pytest.mark.parametrize("pack", PACKS, ids=lambda p: p.name)
def test_the_simulator_reads_every_name_of_a_drawn_route_world(pack, drawn):
    names = names_for(pack.scope.groups)
    assert "g3.found" in names and f"g{pack.scope.groups}.lrbg" in names
    for world in drawn[pack.name][:120]:
        st = State(pack, world)
        for name in names:
            st.get(name)
        for item in pack.infos:
            for field in INFO_FIELDS:
                st.info_value(item.id, field)


def test_the_tally_names_every_route_corner(drawn):
    tally_hits = Counter()
    for pack in PACKS:
        bound = largest_bound(pack)
        for world in drawn[pack.name]:
            tally_hits.update(corners(world, pack.scope, bound, State(pack, world)))
    missed = [c for c in ROUTE_CORNERS if not tally_hits[c]]
    assert not missed, missed


@pytest.mark.parametrize("groups", [3, 5])
def test_generated_route_packs_load_and_name_the_later_groups(tmp_path, groups):
    """The fuzzer's generator knows routes (not drawn by its inputs yet): its well-typed
    expressions over a route load, and some name a group after G2."""
    import random

    from verifier.errors import PackError
    from verifier.run.loader import load_pack
    from verifier.trust.fuzz import ExprGen, _pack_around
    rnd = random.Random(7)
    loaded, later = 0, False
    for i in range(60):
        gen = ExprGen(rnd, depth=3, groups=groups)
        f = tmp_path / f"r{i}.toml"
        f.write_text(_pack_around(rnd, [(gen.boolean(), gen.boolean())], groups))
        try:
            pack = load_pack(f)
        except PackError:
            continue
        loaded += 1
        assert pack.scope.groups == groups and len(pack.infos) == 1
        rules = f.read_text().split("[[rule]]", 1)[1]
        later |= any(f"g{k}." in rules for k in range(3, groups + 1))
    assert loaded >= 50 and later

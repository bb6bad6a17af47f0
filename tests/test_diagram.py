"""The counterexample diagram: well-formed, deterministic SVG whose geometry says what the
numbers say (the real front outside or inside the drawn interval), with an inset exactly when
the deciding margin is under 1 % of the axis. No solver: worlds are written by hand."""

from __future__ import annotations

import textwrap
from fractions import Fraction
from xml.etree import ElementTree as ET

import pytest

from verifier.evidence import cexfile, diagram
from verifier.run.loader import load_pack
from verifier.world.scenario import world_from_data
from verifier.world.sim import State, evaluate, scope_problems

SVG = "{http://www.w3.org/2000/svg}"

PACK = textwrap.dedent("""\
    [pack]
    name = "larkspur"
    title = "Larkspur Sidings"
    legs = 2

    [world]
    train_length = ["20 m", "1000 m"]
    detection_in_odometry = true      # the worlds below were worked with the detection inside

    [onboard]
    q_scale = "10 cm"
    rounding = "down"

    [[rule]]
    id = "max-safe-ahead"
    title = "The max safe front end is never behind the real front end"
    given = "rbc.placed"
    expect = "actual.front <= rbc.max_safe_front"

    [[rule]]
    id = "min-safe-behind"
    title = "Written for nominal-facing trains only: min safe front <= real front in the LRBG frame"
    given = "rbc.placed"
    expect = "rbc.min_safe_front <= actual.front"
    """)

# truncating the doubts to 10 cm leaves the real front 0.1 m beyond the max safe front of an
# 800 m train: the margin is far under 1 % of the axis
NEAR = {"legs": [{"cab_change": True, "distance": "0", "odometer": "5.21", "running": "backward"}],
        "lrbg": {"balises": 1, "linked": True, "locacc": "0", "offset": "0", "read": 1},
        "passage": {"detect_error": "0", "direction": "reverse", "running": "forward"},
        "train": {"antenna": "2", "length": "800"}}
# three balises, an offset mark and 5 m location accuracy; the train faces reverse, so in the
# LRBG frame its min safe front lies above the real front, 34 m away (far over 1 % of the axis),
# although the real front is inside the interval: rule min-safe-behind is wrongly written
FAR = {"legs": [{"cab_change": False, "distance": "300", "odometer": "310", "running": "forward"}],
       "lrbg": {"balises": 3, "linked": False, "locacc": "5", "offset": "2", "read": 2},
       "passage": {"detect_error": "0", "direction": "nominal", "running": "backward"},
       "train": {"antenna": "2", "length": "60"}}
RULE = {id(NEAR): "max-safe-ahead", id(FAR): "min-safe-behind"}


@pytest.fixture(scope="module")
def pack(tmp_path_factory):
    p = tmp_path_factory.mktemp("diagram") / "larkspur.toml"
    p.write_text(PACK)
    return load_pack(p, "larkspur.toml")


def _render(pack, world_data):
    world = world_from_data(world_data)
    st = State(pack, world)
    rule = pack.rule(RULE.get(id(world_data), "max-safe-ahead"))
    assert not scope_problems(world, pack.scope, 2)
    doc = cexfile.build(pack, rule, st, verdict="violated", bound=2, solver="test", minimal=True)
    return diagram.render(doc, rule, st), st


def _texts(root):
    return ["".join(t.itertext()) for t in root.iter(SVG + "text")]


def test_same_input_same_bytes(pack, tmp_path):
    a, _ = _render(pack, NEAR)
    b, _ = _render(pack, NEAR)
    assert a == b
    # no float formatting leaks: every number has at most 2 decimals
    import re
    assert not re.search(r'="-?\d+\.\d{3,}"', a)


def test_well_formed_with_title_legend_and_group(pack):
    svg, st = _render(pack, FAR)
    root = ET.fromstring(svg)
    assert root.get("class") == "cex-diagram"
    assert root.find(SVG + "title").text.startswith("larkspur / min-safe-behind: violated")
    texts = _texts(root)
    # the balises numbered by N_PIG 0..2
    squares = [t for t in root.iter(SVG + "rect") if t.get("width") == "12" and t.get("height") == "12"]
    assert len(squares) == 3 + 1          # three balises plus the legend's sample
    for n in ("0", "1", "2"):
        assert n in texts
    assert "nominal" in texts
    assert "Legend" in texts
    assert any(t.startswith("Q_LOCACC") for t in texts)
    assert "real mark 2 m" in texts
    # one row per stage: the detection instant and the end of the leg
    assert "At detection" in texts and "After leg 1" in texts
    assert f"real front {st.get('actual.front')} m" in texts


def _interval_and_real(root):
    hatch = [r for r in root.iter(SVG + "rect") if "hatch" in (r.get("fill") or "") and r.get("height") == "18"]
    assert len(hatch) == 1
    x, w = Fraction(hatch[0].get("x")), Fraction(hatch[0].get("width"))
    circles = [c for c in root.iter(SVG + "circle") if c.get("r") == "4.5"]
    real = Fraction(circles[0].get("cx"))   # the first one is the trackside row, before the legend
    return x, x + w, real


@pytest.mark.parametrize("world", [NEAR, FAR])
def test_real_front_drawn_where_the_numbers_put_it(pack, world):
    svg, st = _render(pack, world)
    lo_v, hi_v = sorted((st.get("rbc.min_safe_front"), st.get("rbc.max_safe_front")))
    real_v = st.get("actual.front")
    lo, hi, real = _interval_and_real(ET.fromstring(svg))
    assert (lo <= real <= hi) == (lo_v <= real_v <= hi_v)
    # NEAR: outside (0.1 m beyond the max safe front); FAR: inside, the rule is what is wrong
    assert (lo_v <= real_v <= hi_v) == (world is FAR)


def test_inset_only_for_a_margin_under_one_percent(pack):
    near, st = _render(pack, NEAR)
    margin = st.get("actual.front") - st.get("rbc.max_safe_front")
    assert margin == Fraction(1, 10)
    texts = _texts(ET.fromstring(near))
    assert "Magnified" in texts
    assert "0.1 m" in texts                  # the margin itself, written on the inset
    far, st2 = _render(pack, FAR)
    assert not evaluate(pack.rule("min-safe-behind").expect.node, st2, {})
    assert st2.get("rbc.min_safe_front") - st2.get("actual.front") == 34
    assert "Magnified" not in _texts(ET.fromstring(far))


def test_written_beside_the_json(pack, tmp_path):
    world = world_from_data(FAR)
    st = State(pack, world)
    rule = pack.rule("min-safe-behind")
    doc = cexfile.build(pack, rule, st, verdict="violated", bound=2, solver="test", minimal=True)
    target = diagram.write_beside(tmp_path / "c" / "min-safe-behind.json", doc, rule, st)
    assert target == tmp_path / "c" / "min-safe-behind.svg"
    assert target.read_text() == diagram.render(doc, rule, st)


def test_unplaced_report_says_so(pack):
    lone = {**NEAR, "lrbg": {"balises": 1, "linked": False, "locacc": "5", "offset": "0", "read": 1}}
    svg, st = _render(pack, lone)
    assert not st.get("rbc.placed")
    texts = _texts(ET.fromstring(svg))
    assert any("does not place the train" in t for t in texts)


@pytest.mark.parametrize("world", [NEAR, FAR])
def test_whole_train_as_the_trackside_places_it(pack, world):
    """The dashed outline runs from the min safe rear end to the max safe front end, and the
    real rear is marked where it is. Min safe rear end = min safe front end - train length along
    the reported orientation (SUBSET-026 3.6.1.7, docs/facts.md), worked here in Fractions."""
    svg, st = _render(pack, world)
    root = ET.fromstring(svg)
    length = Fraction(world["train"]["length"])
    sign = 1 if st.get("report.q_dirlrbg").word == "nominal" else -1
    min_rear = st.get("rbc.min_safe_front") - sign * length
    assert st.get("rbc.min_safe_rear") == min_rear
    texts = _texts(root)
    assert f"min safe rear {diagram.m(min_rear)}" in texts
    assert f"real rear {diagram.m(st.get('actual.rear'))}" in texts
    # geometry: the outline's ends sit at min safe rear and max safe front on the metre axis
    (outline,) = [r for r in root.iter(SVG + "rect") if r.get("stroke-dasharray") == "5 3"
                  and r.get("height") == "26"]
    lo, hi, _ = _interval_and_real(root)
    x0, x1 = Fraction(outline.get("x")), Fraction(outline.get("x")) + Fraction(outline.get("width"))
    assert x0 <= lo and hi <= x1                 # the interval lies inside the whole train
    ends = sorted((min_rear, st.get("rbc.max_safe_front")))
    span = (x1 - x0) / (ends[1] - ends[0])       # pixels per metre, from the outline itself
    assert abs((lo - x0) - span * (min(st.get("rbc.min_safe_front"), st.get("rbc.max_safe_front")) - ends[0])) < 1


def test_whole_train_words_name_the_ends_outside():
    """Worked by hand from the demo's orientation counterexample: the trackside places the
    train from 30.1 m to 85.9 m, the real train runs from -2 m to 38 m: its rear is outside."""
    from verifier.evidence.story import whole_train_words
    F = Fraction
    assert whole_train_words(F(-2), F(38), F(859, 10), F(301, 10)) == (
        "The trackside places the whole train between 30.1 m and 85.9 m (min safe rear to max safe "
        "front); the real rear, at -2 m, is outside it.")
    assert whole_train_words(F(10), F(20), F(0), F(30)) == ""

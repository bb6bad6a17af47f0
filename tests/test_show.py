"""`verifier show`: the story of a counterexample, told only after the file passed a fresh
simulation of its recorded world; bad files are refused with the field named (exit 2)."""

from __future__ import annotations

import json
import os
import re
import textwrap
from pathlib import Path

import pytest

from verifier.cli import main
from verifier.evidence import diagram, story

PACK = textwrap.dedent("""\
    [pack]
    name = "harrowgate"
    title = "Cab changes at Harrowgate Loop"
    legs = 1

    [world]
    train_length = ["20 m", "400 m"]

    [[rule]]
    id = "cab-change-flips"
    title = "After a cab change in leg 1 the reported orientation is flipped"
    given = "legs[1].cab_change and passage.seen != unknown"
    expect = "report.q_dirlrbg == flip(passage.seen)"
    refs = ["SUBSET-026 5.12.2.3"]

    [[rule]]
    id = "front-inside"
    title = "The real front lies between min and max safe front"
    given = "rbc.placed"
    expect = "rbc.min_safe_front <= actual.front and actual.front <= rbc.max_safe_front"
    """)


@pytest.fixture(scope="module")
def site(tmp_path_factory):
    """A working directory with the pack, checked once (z3), its counterexamples written."""
    root = tmp_path_factory.mktemp("show")
    (root / "harrowgate.toml").write_text(PACK, encoding="utf-8")
    old = os.getcwd()
    os.chdir(root)
    try:
        assert main(["check", "harrowgate.toml"]) == 1
    finally:
        os.chdir(old)
    return root


@pytest.fixture
def here(site, monkeypatch):
    monkeypatch.chdir(site)
    return site


CEX = "counterexamples/harrowgate/cab-change-flips.json"
CEX2 = "counterexamples/harrowgate/front-inside.json"


def test_story_tells_the_recorded_values(here, capsys):
    assert main(["show", CEX]) == 0
    out = capsys.readouterr().out
    doc = json.loads(Path(CEX).read_text())
    d, w = doc["derived"], doc["world"]
    # the implicit premise of legs[1] is said in words
    assert "implicit premise: legs.count >= 1" in out
    assert "it only applies to worlds with at least 1 leg" in out
    # group, train, each leg
    assert f"{w['lrbg']['balises']} balise" in out and f"{w['lrbg']['read']} read" in out
    assert f"{w['train']['length']} m long" in out
    assert "Leg 1: at standstill the driver changes cab" in out  # the rule's premise forces it
    assert f"real distance {w['legs'][0]['distance']} m, measured {w['legs'][0]['odometer']} m" in out
    # real and estimated front after the leg
    assert f"real front {d['legs'][0]['actual_front']} m, estimated front {d['legs'][0]['est_front']} m" in out
    # the report as lengths and as packet codes
    assert f"D_LRBG {d['report.code.d_lrbg']}," in out
    assert f"Q_DIRLRBG {d['report.code.q_dirlrbg']}," in out
    assert f"Q_SCALE {d['report.code.q_scale']}," in out
    # the failed part, both sides with their values
    f = doc["failed"]
    assert f"Left side  {f['left']['text']} = {f['left']['value']}" in out
    assert f"Right side {f['right']['text']} = {f['right']['value']}" in out
    assert "Checked: all" in out and "Caution:" in out


def test_story_of_an_interval_rule_places_the_real_front(here):
    e = story.explain_file(CEX2)
    d = e.doc["derived"]
    lo, hi = sorted((float(d["rbc.min_safe_front"]), float(d["rbc.max_safe_front"])))
    real = float(d["actual.front"])
    assert ("is inside" in e.text) == (lo <= real <= hi)
    assert f"the min safe front at {d['rbc.min_safe_front']} m" in e.text


def _edit(src: str, dst: Path, change) -> Path:
    doc = json.loads(Path(src).read_text())
    change(doc)
    dst.write_text(json.dumps(doc, sort_keys=True, indent=2) + "\n")
    return dst


def _line_of(path: Path, needle: str) -> int:
    for i, line in enumerate(path.read_text().splitlines(), 1):
        if needle in line:
            return i
    raise AssertionError(needle)


def test_edited_derived_value_is_caught_with_its_line(here, capsys):
    bad = _edit(CEX, here / "edited.json", lambda d: d["derived"].__setitem__("actual.front", "999"))
    assert main(["show", str(bad)]) == 2
    err = capsys.readouterr().err
    line = _line_of(bad, '"actual.front": "999"')
    assert f"edited.json:{line}:" in err
    assert "field 'derived.actual.front'" in err and "edited or corrupted" in err


def test_edited_world_is_caught(here, capsys):
    def longer(d):
        d["world"]["train"]["length"] = str(int(d["world"]["train"]["length"]) + 7)
    bad = _edit(CEX, here / "longer.json", longer)
    assert main(["show", str(bad)]) == 2
    err = capsys.readouterr().err
    # the recorded derived values no longer follow from the edited world
    assert re.search(r"field 'derived\.[a-z_.\[\]0-9]+'", err), err


def test_edited_rule_text_is_caught(here, capsys):
    bad = _edit(CEX, here / "rule.json", lambda d: d["rule"].__setitem__("expect", "true"))
    assert main(["show", str(bad)]) == 2
    assert "field 'rule.expect'" in capsys.readouterr().err


def test_newer_format_is_refused(here, capsys):
    bad = _edit(CEX, here / "newer.json", lambda d: d.__setitem__("format", "verifier-counterexample/2"))
    assert main(["show", str(bad)]) == 2
    err = capsys.readouterr().err
    assert "field 'format'" in err and "newer" in err


def test_not_a_counterexample(here, capsys):
    assert main(["show", "harrowgate.toml"]) == 2
    assert "not a counterexample file" in capsys.readouterr().err
    (here / "other.json").write_text('{"name": "x"}\n')
    assert main(["show", "other.json"]) == 2
    assert "no field 'format'" in capsys.readouterr().err


def test_changed_pack_is_refused(here, capsys, tmp_path):
    moved = tmp_path / "harrowgate.toml"
    moved.write_text(PACK.replace("400 m", "500 m"))
    assert main(["show", CEX, "--pack", str(moved)]) == 2
    assert "field 'pack.sha256'" in capsys.readouterr().err
    moved.write_text(PACK)
    assert main(["show", CEX, "--pack", str(moved)]) == 0


def test_show_svg_is_the_diagram_beside_the_file(here, tmp_path, capsys):
    beside = Path(CEX).with_suffix(".svg").read_bytes()
    out = tmp_path / "again.svg"
    assert main(["show", CEX, "--svg", str(out)]) == 0
    assert out.read_bytes() == beside                 # byte-identical, written twice
    e = story.explain_file(CEX)
    assert diagram.render(e.doc, e.rule, e.state).encode() == beside


def test_field_lines_follow_nesting():
    text = '{\n  "a": {\n    "b": [\n      {"c": 1},\n      {"c": 2}\n    ]\n  },\n  "d": "x"\n}\n'
    lines = story.field_lines(text)
    assert lines["a"] == (2, 3)
    assert lines["a.b[2]"] == (5, 7)
    assert lines["a.b[2].c"] == (5, 8)
    assert lines["d"] == (8, 3)

"""Small slips in what users read: a count of one with a plural noun, "balise(s)", a dangling
label in a diagram, parentheses inside parentheses, a column pushed out of line."""

from __future__ import annotations

import re
from pathlib import Path

from conftest import pack_text, rule_toml
from verifier.cli import main
from verifier.lang.numbers import counted
from verifier.run.loader import load_pack

# from tests/test_replay_lemmas.py: true, but not inductive without a lemma; with a base case of
# one leg and a step of depth 1 it is "bounded" after deepening, and gets a counterexample to
# induction
ONE_CAB = ("actual.orientation == (if passage.running == forward then flip(passage.direction) "
           "else passage.direction)")
BOUNDED = rule_toml("one", ONE_CAB, "cab_changes == 1")
FAST = ("--legs", "any", "--induction-depth", "1", "--max-legs", "1")   # base case of 1 leg
ONE_LEGS = re.compile(r"(?<![\d.])1 legs\b")


def test_counted():
    assert [counted(n, "leg") for n in (0, 1, 2)] == ["0 legs", "1 leg", "2 legs"]
    assert counted(1, "cab change") == "1 cab change" and counted(3, "balise") == "3 balises"


def test_one_leg_is_said_in_the_singular_in_the_table_and_the_files(tmp_path, monkeypatch, capsys):
    monkeypatch.chdir(tmp_path)
    (tmp_path / "p.toml").write_text(pack_text(BOUNDED + rule_toml("few", "train.length >= 10 m"), legs=1))
    assert main(["check", "p.toml", "--no-cache", *FAST]) == 3
    out = capsys.readouterr().out
    assert "over a base case of up to 1 leg\n" in out             # the proof of few
    assert "holds up to 1 leg" in out                             # one: bounded at its base case
    assert not ONE_LEGS.search(out), out
    cti = tmp_path / "counterexamples" / "t" / "one.induction.json"
    svg = cti.with_suffix(".svg").read_text()
    assert "bounded (holds up to 1 leg)" in svg and not ONE_LEGS.search(svg)
    assert main(["show", str(cti)]) == 0
    story = capsys.readouterr().out
    assert "It holds for up to 1 leg (checked" in story and not ONE_LEGS.search(story)


def test_the_vacuity_warning_says_one_leg(write_pack):
    text = pack_text(rule_toml("a", "legs[2].distance >= 0 m"), legs=1)
    (w,) = load_pack(write_pack(text), "p.toml").warnings
    assert w.message == ("rule a reads legs[2] but its bound is 1 leg: it can never apply "
                         "(vacuous) unless checked with more --legs")


def test_simulate_counts_balises_in_words(tmp_path, monkeypatch, capsys):
    monkeypatch.chdir(tmp_path)
    (tmp_path / "p.toml").write_text(pack_text(rule_toml("a", "true"), legs=1))
    for n, words in ((1, "1 balise, 1 read"), (2, "2 balises, 2 read")):
        (tmp_path / "s.toml").write_text(
            f"[lrbg]\nbalises = {n}\nread = {n}\nlinked = true\n\n[train]\nlength = \"100 m\"\n")
        assert main(["simulate", "s.toml", "--pack", "p.toml"]) == 0
        out = capsys.readouterr().out
        assert f"group: {words}, linked" in out and "balise(s)" not in out


def test_an_unplaced_report_is_labelled_like_a_placed_one(tmp_path, monkeypatch):
    # a single unlinked balise: the direction is unknown and the report places nothing
    monkeypatch.chdir(tmp_path)
    (tmp_path / "p.toml").write_text(pack_text(rule_toml("a", "rbc.placed"), legs=0))
    assert main(["check", "p.toml", "--no-cache"]) == 1
    svg = (tmp_path / "counterexamples" / "t" / "a.svg").read_text()
    labels = re.findall(r'<text x="16"[^>]*>([^<]*)</text>', svg)
    i = labels.index("no interval,")
    assert labels[i + 1] == "real front" and "no interval:" not in labels


def _depth(line: str) -> int:
    deepest = depth = 0
    for ch in line:
        depth += {"(": 1, ")": -1}.get(ch, 0)
        deepest = max(deepest, depth)
    return deepest


def test_diff_table_has_no_parentheses_inside_parentheses(tmp_path, monkeypatch, capsys):
    monkeypatch.chdir(tmp_path)
    (tmp_path / "old.toml").write_text(pack_text(rule_toml("r", "legs.count <= 1"), legs=1))
    (tmp_path / "new.toml").write_text(pack_text(rule_toml("r", "legs.count == 0"), legs=1))
    assert main(["diff", "old.toml", "new.toml", "--no-cache"]) == 1
    out = capsys.readouterr().out
    assert "claim old-only (the old claim holds and the new one fails, a counterexample to the new rule)" in out
    assert [line for line in out.splitlines() if _depth(line) > 1] == []


def test_replay_keeps_its_columns_with_a_long_status(tmp_path, monkeypatch, capsys):
    monkeypatch.chdir(tmp_path)
    (tmp_path / "p.toml").write_text(pack_text(BOUNDED + rule_toml("none", "legs.count == 0"), legs=1))
    assert main(["check", "p.toml", "--no-cache", *FAST]) == 1
    capsys.readouterr()
    assert main(["replay"]) == 0
    lines = [line for line in capsys.readouterr().out.splitlines() if "counterexamples/" in line]
    assert sorted(line.split(" counterexamples/")[0].strip() for line in lines) == [
        "still not inductive", "still violated"]
    assert len({line.index("counterexamples/") for line in lines}) == 1, lines

"""verifier replay judges a counterexample to induction with the pack's lemmas of today."""

from __future__ import annotations

from conftest import pack_text, rule_toml
from verifier.cli import main

# True for one change of cab (the front end moves to the other cab: DESIGN 4.1), but not
# inductive alone: a state after no change of cab is arbitrary. The lemma o0 (the orientation
# before any change of cab) makes it provable (as in tests/test_induction.py, without the report).
ORIENTATION_0 = ("cab_changes == 0 implies actual.orientation == (if passage.running == forward "
                 "then passage.direction else flip(passage.direction))")
ONE_CAB = ("actual.orientation == (if passage.running == forward then flip(passage.direction) "
           "else passage.direction)")
LEMMA = rule_toml("o0", ORIENTATION_0).replace("[[rule]]", "[[lemma]]")
RULE = rule_toml("one", ONE_CAB, "cab_changes == 1")
FAST = ("--legs", "any", "--induction-depth", "1")   # base case of 1 leg, step depth 1: cheap


def test_replay_uses_lemmas_added_since_and_names_them(tmp_path, monkeypatch, capsys):
    monkeypatch.chdir(tmp_path)
    pack = tmp_path / "p.toml"
    pack.write_text(pack_text(RULE, legs=1))
    assert main(["check", "p.toml", "--no-cache", *FAST]) == 3               # bounded
    cti = tmp_path / "counterexamples" / "t" / "one.induction.json"
    assert cti.is_file()
    capsys.readouterr()
    assert main(["replay"]) == 0
    assert "still not inductive" in capsys.readouterr().out
    # the lemma that proves the rule is added: replay must not say "still not inductive"
    pack.write_text(pack_text(LEMMA + RULE, legs=1))
    assert main(["replay"]) == 1
    out = capsys.readouterr().out
    assert "still not inductive" not in out
    assert "lemmas changed" in out and "added o0" in out
    # and check agrees that the lemma proves it
    assert main(["check", "p.toml", "--no-cache", "--no-files", *FAST]) == 0


def test_check_names_every_file_its_verdicts_no_longer_back(tmp_path, monkeypatch, capsys):
    """A counterexample whose rule is now bounded, and a counterexample to induction whose rule
    now holds, are each named (and kept)."""
    monkeypatch.chdir(tmp_path)
    pack = tmp_path / "p.toml"
    pack.write_text(pack_text(rule_toml("one", "legs.count <= 0"), legs=1))
    assert main(["check", "p.toml", "--no-cache", *FAST]) == 1                 # violated at 1 leg
    cex = tmp_path / "counterexamples" / "t" / "one.json"
    cti = tmp_path / "counterexamples" / "t" / "one.induction.json"
    assert cex.is_file()
    capsys.readouterr()
    pack.write_text(pack_text(RULE, legs=1))
    assert main(["check", "p.toml", "--no-cache", *FAST]) == 3                 # bounded, with its file
    err = capsys.readouterr().err
    assert f"note: {cex.relative_to(tmp_path).as_posix()} is from an earlier run: rule one is now bounded" in err
    assert cti.is_file() and "one.induction.json is from an earlier run" not in err
    pack.write_text(pack_text(LEMMA + RULE, legs=1))
    assert main(["check", "p.toml", "--no-cache", *FAST]) == 0
    err = capsys.readouterr().err
    assert "one.json is from an earlier run: rule one now holds" in err
    assert "one.induction.json is from an earlier run: rule one now holds" in err
    assert cex.is_file() and cti.is_file()                               # kept

"""verifier replay judges a counterexample to induction with the pack's lemmas of today."""

from __future__ import annotations

from conftest import pack_text, rule_toml
from verifier.cli import main

# From tests/test_induction.py: true for one change of cab, provable only with the lemma o0
# (the orientation before any change of cab), so without it the rule stays bounded.
ORIENTATION_0 = ("cab_changes == 0 implies actual.orientation == (if passage.running == forward "
                 "then passage.direction else flip(passage.direction))")
ONE_CAB = ("report.q_dirlrbg == (if passage.running == forward then flip(passage.direction) "
           "else passage.direction)")
LEMMA = rule_toml("o0", ORIENTATION_0).replace("[[rule]]", "[[lemma]]")
RULE = rule_toml("one", ONE_CAB, "passage.seen != unknown and cab_changes == 1")


def test_replay_uses_lemmas_added_since_and_names_them(tmp_path, monkeypatch, capsys):
    monkeypatch.chdir(tmp_path)
    pack = tmp_path / "p.toml"
    pack.write_text(pack_text(RULE, legs=2).replace("legs = 2", 'legs = "any"'))
    assert main(["check", "p.toml", "--no-cache"]) == 3               # bounded
    cti = tmp_path / "counterexamples" / "t" / "one.induction.json"
    assert cti.is_file()
    capsys.readouterr()
    assert main(["replay"]) == 0
    assert "still not inductive" in capsys.readouterr().out
    # the lemma that proves the rule is added: replay must not say "still not inductive"
    pack.write_text(pack_text(LEMMA + RULE, legs=2).replace("legs = 2", 'legs = "any"'))
    assert main(["replay"]) == 1
    out = capsys.readouterr().out
    assert "still not inductive" not in out
    assert "lemmas changed" in out and "added o0" in out
    # and check agrees that the lemma proves it
    assert main(["check", "p.toml", "--no-cache", "--no-files"]) == 0

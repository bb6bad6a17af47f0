"""verifier diff: each edit classified as worked out by hand, with replayable worlds."""

from __future__ import annotations

import json
import subprocess
from pathlib import Path

import pytest

from verifier.recheck import diff
from verifier.cli import main
from verifier.run.gitrev import load_side
from verifier.run.loader import load_pack

ROOT = Path(__file__).resolve().parent.parent
PACKS = ROOT / "tests" / "packs"


def _by_id(diffs):
    return {r.id: r for d in diffs for r in d.rules}


def _assert_replayable(rule_diff, old_pack, new_pack):
    """Every world found is confirmed again by the simulator from its file content alone."""
    found = [w for w in rule_diff.worlds if w.status == "found"]
    for w in found:
        doc = json.loads(json.dumps(w.doc))       # as written and read back
        assert diff.replay_distinction(doc, old_pack, new_pack), (w.kind, w.direction)
    return {(w.kind, w.direction): w.doc for w in found}


def test_edited_given_and_expect_of_the_small_pack():
    old, new = load_pack(PACKS / "edit-base.toml"), load_pack(PACKS / "edit-given-expect.toml")
    diffs = diff.diff_packs([old], [new])
    rules = _by_id(diffs)
    # seen-when-read-twice: given read >= 2 became read >= 3. Every world with read >= 3 has
    # read >= 2, not conversely (read = 2): coverage narrower. Both versions hold (two balises
    # read always show the direction), so both claims are valid: equivalent.
    r = rules["seen-when-read-twice"]
    assert (r.status, r.edits, r.coverage, r.claim) == ("edited", ("given",), "narrower", "equivalent")
    assert (r.old.verdict, r.new.verdict, r.verdict_changed) == ("holds", "holds", False)
    worlds = _assert_replayable(r, old, new)
    assert set(worlds) == {("coverage", "old-only")}
    # minimal: fewest balises that allow read = 2, read itself 2
    assert worlds[("coverage", "old-only")]["world"]["lrbg"] == {
        "balises": 2, "read": 2, "linked": False, "locacc": "0", "offset": "0"}
    # length-floor: expect length >= 20 m became >= 10 m, given empty. length >= 20 implies
    # length >= 10, not conversely: the new claim is implied by the old one, i.e. weaker, and
    # a world with 10 <= length < 20 tells them apart; the least on the grid is 10 m (the
    # scope's lowest length). Old violated (10 m trains exist), new holds: verdict changes.
    r = rules["length-floor"]
    assert (r.edits, r.coverage, r.claim) == (("expect",), "same", "weaker")
    assert (r.old.verdict, r.new.verdict, r.verdict_changed) == ("violated", "holds", True)
    worlds = _assert_replayable(r, old, new)
    assert set(worlds) == {("claim", "new-only")}
    doc = worlds[("claim", "new-only")]
    assert doc["world"]["train"]["length"] == "10"
    assert doc["outcome"]["old"] == {"given": True, "expect": False, "claim": False}
    assert doc["outcome"]["new"] == {"given": True, "expect": True, "claim": True}
    assert r.old.world["train"]["length"] == "10"        # the old counterexample
    assert rules["short-is-short"].status == rules["antenna-inside-train"].status == "unchanged"
    assert diff.exit_code(diffs) == 1
    assert diffs[0].sections == ()      # only rules were edited


def test_edited_let_reaches_only_its_rules():
    old, new = load_pack(PACKS / "edit-base.toml"), load_pack(PACKS / "edit-let.toml")
    diffs = diff.diff_packs([old], [new])
    rules = _by_id(diffs)
    # short_train: length <= 100 m became <= 50 m. short-is-short's given narrows (a 51 m
    # train, the least whole-metre length above 50, is covered only by the old one); its
    # expect (length <= 100 m) holds under both, so both claims are valid: equivalent.
    r = rules["short-is-short"]
    assert (r.status, r.edits, r.coverage, r.claim) == ("edited", ("let.short_train",), "narrower", "equivalent")
    worlds = _assert_replayable(r, old, new)
    assert worlds[("coverage", "old-only")]["world"]["train"]["length"] == "51"
    assert [x.id for x in diffs[0].rules if x.status == "edited"] == ["short-is-short"]
    (sec,) = diffs[0].sections
    assert (sec.key, sec.change, sec.reaches, sec.changes_verdict) == (
        "let.short_train", "edited", ("short-is-short",), ())
    assert diff.exit_code(diffs) == 0


def test_shipped_position_report_edits(tmp_path):
    text = (ROOT / "rules" / "position-report.toml").read_text(encoding="utf-8")
    old_given = 'given = "passage.seen != unknown and passage.running == forward and cab_changes == 0"'
    assert old_given in text
    edited = text.replace(old_given, 'given = "passage.seen != unknown and passage.running == forward"')
    edited = edited.replace('given = "lrbg.read >= 2"\n', 'given = "lrbg.read >= 2 or lrbg.linked"\n', 1)
    (tmp_path / "pr.toml").write_text(edited, encoding="utf-8")
    old, new = load_pack(ROOT / "rules" / "position-report.toml"), load_pack(tmp_path / "pr.toml")
    diffs = diff.diff_packs([old], [new], diff.DiffOptions(legs=1))
    rules = _by_id(diffs)
    # front-first-keeps-orientation lost "cab_changes == 0": coverage wider (a world with a
    # cab change is newly covered). The new claim (fewer conditions, same conclusion) implies
    # the old one; the old does not imply the new, since after a cab change the orientation
    # flips: stronger, and the new version is violated (holds -> violated).
    r = rules["front-first-keeps-orientation"]
    assert (r.coverage, r.claim, r.old.verdict, r.new.verdict) == ("wider", "stronger", "holds", "violated")
    worlds = _assert_replayable(r, old, new)
    assert set(worlds) == {("coverage", "new-only"), ("claim", "old-only")}
    cex = worlds[("claim", "old-only")]
    assert [leg["cab_change"] for leg in cex["world"]["legs"]] == [True]   # one leg, one cab change
    assert cex["outcome"]["new"]["claim"] is False
    # seen-from-reading-order gained "or lrbg.linked": wider (read 1, linked is new); linking
    # also gives the direction, so both versions hold: equivalent.
    r = rules["seen-from-reading-order"]
    assert (r.coverage, r.claim, r.old.verdict, r.new.verdict) == ("wider", "equivalent", "holds", "holds")
    w = _assert_replayable(r, old, new)[("coverage", "new-only")]["world"]["lrbg"]
    assert (w["read"], w["linked"]) == (1, True)
    assert sum(1 for x in rules.values() if x.status == "edited") == 2
    assert diff.exit_code(diffs) == 1
    assert "claim stronger: the new version is true in fewer worlds: it asks more" in \
        diff.table(diffs, "old", "new")


def test_demo_pack_edit_and_cli_output(tmp_path, monkeypatch, capsys):
    text = (ROOT / "rules" / "demo" / "kestrel-quay.toml").read_text(encoding="utf-8")
    edited = text.replace('given = "lrbg.read >= 2"\n', 'given = "lrbg.read >= 2 or lrbg.linked"\n', 1)
    assert edited != text
    (tmp_path / "kq.toml").write_text(edited, encoding="utf-8")
    import shutil
    shutil.copy(ROOT / "rules" / "demo" / "kestrel-quay.toml", tmp_path / "kq-old.toml")
    monkeypatch.chdir(tmp_path)
    # group-direction-known: read >= 2 widened by "or linked" (a linked single reading is new);
    # the design takes the direction from linking too, so both hold: equivalent claims.
    code = main(["diff", "kq-old.toml", "kq.toml", "--json", "--no-cache"])
    doc = json.loads(capsys.readouterr().out)
    assert code == 0
    (pack,) = doc["packs"]
    rules = {r["id"]: r for r in pack["rules"]}
    r = rules["group-direction-known"]
    assert (r["status"], r["coverage"], r["claim"], r["verdict_changed"]) == ("edited", "wider", "equivalent", False)
    assert [w["direction"] for w in r["worlds"]] == ["new-only"]
    assert sum(1 for x in rules.values() if x["status"] == "unchanged") == 5
    assert not (tmp_path / "counterexamples").exists()     # a diff writes nothing unless asked
    assert not (tmp_path / "out").exists()
    code = main(["diff", "kq-old.toml", "kq.toml", "--no-cache", "--out", "out"])
    table = capsys.readouterr().out
    assert code == 0 and "coverage wider  claim equivalent" in table
    files = sorted(p.name for p in (tmp_path / "out").rglob("*.json"))
    assert files == ["group-direction-known.coverage-new-only.json"]
    assert not (tmp_path / "counterexamples").exists()


def _git(cwd, *args):
    subprocess.run(["git", *args], cwd=cwd, check=True, capture_output=True)


def test_git_revisions_and_bad_input(tmp_path, monkeypatch, capsys):
    base = (PACKS / "edit-base.toml").read_text(encoding="utf-8")
    (tmp_path / "p.toml").write_text(base, encoding="utf-8")
    _git(tmp_path, "init", "-q")
    _git(tmp_path, "add", "p.toml")
    _git(tmp_path, "-c", "user.name=t", "-c", "user.email=t@example.invalid", "commit", "-q", "-m", "base")
    (tmp_path / "p.toml").write_text((PACKS / "edit-let.toml").read_text(encoding="utf-8"), encoding="utf-8")
    monkeypatch.chdir(tmp_path)
    (old,) = load_side("HEAD:p.toml", "OLD")
    assert old.path == "HEAD:p.toml" and old.rule("short-is-short").given.text == "short_train"
    assert main(["diff", "HEAD:p.toml", "p.toml", "--no-cache"]) == 0
    assert "section edited   let.short_train: reaches short-is-short" in capsys.readouterr().out
    # a missing revision: exit 2, the side named
    assert main(["diff", "nosuchrev:p.toml", "p.toml", "--no-cache"]) == 2
    err = capsys.readouterr().err
    assert "OLD" in err and "nosuchrev" in err
    # a file that fails to load on one side
    (tmp_path / "bad.toml").write_text(base.replace('expect = "train.length >= 20 m"', 'expect = "train.lenght >= 20 m"'),
                                       encoding="utf-8")
    assert main(["diff", "p.toml", "bad.toml", "--no-cache"]) == 2
    err = capsys.readouterr().err
    assert "bad.toml" in err and "NEW:" in err and "OLD" not in err
    # two packs with different names
    (tmp_path / "other.toml").write_text(base.replace('name = "edit-demo"', 'name = "other"'), encoding="utf-8")
    assert main(["diff", "p.toml", "other.toml", "--no-cache"]) == 2
    assert "'edit-demo'" in capsys.readouterr().err
    assert not (tmp_path / "counterexamples").exists()


def test_added_and_removed_rules_change_verdicts():
    old = load_pack(PACKS / "edit-base.toml")
    text = (PACKS / "edit-base.toml").read_text(encoding="utf-8")
    cut = text.index('[[rule]]\nid = "antenna-inside-train"')
    from verifier.check.typer import check_pack
    from verifier.lang.pack import parse_pack_text
    new = check_pack(parse_pack_text(text[:cut] + '[[rule]]\nid = "read-at-most-balises"\ntitle = "t"\n'
                                     'expect = "lrbg.read <= lrbg.balises"\n', "new.toml"))
    rules = _by_id(diff.diff_packs([old], [new]))
    assert (rules["antenna-inside-train"].status, rules["antenna-inside-train"].old.verdict) == ("removed", "holds")
    assert (rules["read-at-most-balises"].status, rules["read-at-most-balises"].new.verdict) == ("added", "holds")
    assert rules["read-at-most-balises"].verdict_changed and rules["antenna-inside-train"].verdict_changed


@pytest.mark.parametrize("spec", ["nosuch.toml", "HEAD:nosuch/dir"])
def test_missing_sides_are_usage_errors(spec, capsys, monkeypatch):
    monkeypatch.chdir(ROOT)
    assert main(["diff", spec, str(PACKS / "edit-base.toml"), "--no-cache"]) == 2
    assert "OLD" in capsys.readouterr().err


@pytest.mark.parametrize("edits, claim, words", [
    # an edit of the rule's own text: the new version asks more / less
    (("expect",), "stronger", "the new version is true in fewer worlds: it asks more"),
    (("given", "let.x"), "weaker", "the new version is true in more worlds: it asks less"),
    # only the design was edited: the same rule is met in fewer worlds (the design got worse)
    (("onboard.l_doubtover",), "stronger",
     "after the edit of onboard.l_doubtover, the new version is true in fewer worlds: "
     "the design meets this rule in fewer worlds"),
    (("trackside.min_safe_front",), "weaker",
     "after the edit of trackside.min_safe_front, the new version is true in more worlds: "
     "the design meets this rule in more worlds"),
    (("expect",), "incomparable", "each version is true in some world where the other is false"),
    (("expect",), "equivalent", ""),
])
def test_claim_meaning_says_what_stronger_means(edits, claim, words):
    """'Stronger' is true in fewer worlds (the definition in verifier/recheck/diff.py, worked by hand):
    for an edited design that is the design getting worse, and the words must say so."""
    side = diff.SideVerdict("holds", 1)
    r = diff.RuleDiff("r", "edited", side, side, edits=edits, claim=claim)
    assert r.claim_meaning() == words
    assert r.as_json()["claim_meaning"] == (words or None)


def _cab_condition_dropped(tmp_path):
    """The shipped position-report pack and a copy whose front-first-keeps-orientation lost
    "cab_changes == 0" (worked by hand in test_shipped_position_report_edits)."""
    text = (ROOT / "rules" / "position-report.toml").read_text(encoding="utf-8")
    old_given = 'given = "passage.seen != unknown and passage.running == forward and cab_changes == 0"'
    assert old_given in text
    (tmp_path / "pr.toml").write_text(
        text.replace(old_given, 'given = "passage.seen != unknown and passage.running == forward"'),
        encoding="utf-8")
    return load_pack(ROOT / "rules" / "position-report.toml"), load_pack(tmp_path / "pr.toml")


def test_an_undecided_claim_is_narrowed_by_the_versions_own_worlds(tmp_path, monkeypatch):
    """Seeded limit: the solver leaves both claim questions undecided. The new version's own
    counterexample (a cab change after a front-first passage, worked by hand in the test above)
    has the old claim true and the new one false, so the simulator confirms 'old-only' from it;
    the converse stays undecided: 'stronger or incomparable', never a guess."""
    from verifier.smt import relate
    old, new = _cab_condition_dropped(tmp_path)
    real = relate.relate

    def undecided_claims(*args, **kw):
        return tuple(d if d.kind == "coverage" else relate.Distinction(d.kind, d.direction, "unknown",
                                                                       reason="canceled")
                     for d in real(*args, **kw))
    monkeypatch.setattr(relate, "relate", undecided_claims)
    diffs = diff.diff_packs([old], [new], diff.DiffOptions(legs=1))
    r = _by_id(diffs)["front-first-keeps-orientation"]
    assert (r.old.verdict, r.new.verdict, r.coverage, r.claim) == \
        ("holds", "violated", "wider", "stronger or incomparable")
    claims = {w.direction: w for w in r.worlds if w.kind == "claim"}
    assert claims["old-only"].status == "found" and claims["old-only"].doc["minimal"] is False
    assert "not minimised" in claims["old-only"].reason
    assert claims["new-only"].status == "unknown"
    assert diff.replay_distinction(json.loads(json.dumps(claims["old-only"].doc)), old, new)
    assert "whether the converse also happens was not decided" in r.claim_meaning()


def test_relations_undecided_whole_are_decided_per_number_of_legs(tmp_path, whole_check_refused):
    """Seeded limit: each question's first whole check answers unknown. Asked again per number
    of legs (fewest first), the relations and minimal worlds are those of the whole checks."""
    old, new = _cab_condition_dropped(tmp_path)
    rule = "front-first-keeps-orientation"

    def relations():
        r = _by_id(diff.diff_packs([old], [new], diff.DiffOptions(legs=1)))[rule]
        return r.coverage, r.claim, [(w.kind, w.direction, w.status, w.doc and w.doc["world"])
                                     for w in r.worlds]
    plain = relations()
    refused = whole_check_refused()
    assert relations() == plain and plain[:2] == ("wider", "stronger")
    assert refused


def test_diff_rule_option_compares_only_that_rule(tmp_path, capsys, monkeypatch):
    old, new = _cab_condition_dropped(tmp_path)
    monkeypatch.chdir(tmp_path)
    args = ["diff", str(ROOT / "rules" / "position-report.toml"), "pr.toml", "--legs", "1", "--no-cache"]
    code = main(args + ["--json", "--rule", "front-first-keeps-orientation"])
    doc = json.loads(capsys.readouterr().out)
    assert code == 1                                   # holds -> violated, as worked above
    assert [r["id"] for p in doc["packs"] for r in p["rules"]] == ["front-first-keeps-orientation"]
    assert main(args + ["--rule", "front-first-keeps-orientaton"]) == 2
    assert "did you mean 'front-first-keeps-orientation'?" in capsys.readouterr().err


def test_diff_reports_progress_before_each_slow_step(tmp_path):
    old, new = _cab_condition_dropped(tmp_path)
    said = []
    diff.diff_packs([old], [new], diff.DiffOptions(legs=1, progress=said.append))
    assert said[0] == "diff: deciding 2 verdicts"          # one edited rule, both sides
    assert said[1:] == ["diff: [1/1] relating the two versions of position-report/"
                        "front-first-keeps-orientation (coverage and claim, up to 1 leg)"]


# Lemmas are part of a pack's meaning, and diff decides verdicts as check does: the rule below is
# true for one change of cab but provable for any number of legs only with the lemma o0 (as in
# tests/test_replay_lemmas.py).
ANY_OLD = """[pack]
name = "t"
title = "t"
legs = "any"

[[rule]]
id = "one"
title = "one"
given = "cab_changes == 1"
expect = "actual.orientation == (if passage.running == forward then flip(passage.direction) else passage.direction)"
"""
ANY_NEW = ANY_OLD.replace("[[rule]]", """[[lemma]]
id = "o0"
title = "o0"
expect = "cab_changes == 0 implies actual.orientation == (if passage.running == forward then passage.direction else flip(passage.direction))"

[[rule]]""")


def test_an_added_lemma_is_a_change_and_verdicts_use_checks_bounds(tmp_path):
    from verifier.recheck.diff import DiffOptions, diff_specs, exit_code, table
    from verifier.api import CheckOptions, check_packs
    from verifier.run.loader import load_pack
    (tmp_path / "old.toml").write_text(ANY_OLD)
    (tmp_path / "new.toml").write_text(ANY_NEW)
    opts = DiffOptions(induction_depth=1, max_legs=3)
    (d,) = diff_specs(str(tmp_path / "old.toml"), str(tmp_path / "new.toml"), opts)
    rules = {r.id: r for r in d.rules}
    assert rules["o0"].status == "added" and rules["o0"].role == "lemma"
    assert rules["one"].status == "edited" and "lemma.o0" in rules["one"].edits
    assert (rules["one"].old.verdict, rules["one"].new.verdict) == ("bounded", "holds")
    assert rules["one"].new.proof == "any number of legs"
    # the same verdict and bound as check with the same options
    (old_check,) = check_packs([load_pack(tmp_path / "old.toml")],
                               CheckOptions(out=None, induction_depth=1, max_legs=3))
    assert (old_check.results[0].verdict, old_check.results[0].bound) == ("bounded", rules["one"].old.bound)
    assert rules["one"].bound == old_check.results[0].proof["legs"] == 3   # DESIGN 4.7: base 3
    text = table([d], "old", "new")
    assert "1 added" in text and "added     lemma o0" in text
    assert "section added    lemma.o0: reaches one" in text
    assert exit_code([d]) == 1

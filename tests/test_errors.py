"""Bad input: every case gives file:line:col diagnostics with the source line and a caret,
exit code 2, no traceback, and no counterexample file. Golden texts are written by hand."""

from __future__ import annotations

from pathlib import Path

import pytest

from conftest import pack_text, rule_toml
from verifier.cli import main
from verifier.errors import PackError
from verifier.run.loader import load_all, load_pack


def _errors(write_pack, text):
    path = write_pack(text)
    with pytest.raises(PackError) as exc:
        load_pack(path, "p.toml")
    return [d.render() for d in exc.value.diagnostics]


def test_unknown_name_with_suggestion_golden(write_pack):
    text = pack_text(rule_toml("a", "lrbg.raed >= 2"))
    (msg,) = _errors(write_pack, text)
    assert msg == (
        "p.toml:9:11: error: rule a expect: unknown name 'lrbg.raed'; did you mean 'lrbg.read'?\n"
        '    expect = "lrbg.raed >= 2"\n'
        "              ^~~~~~~~~")


def test_unit_error_points_at_subexpression_golden(write_pack):
    text = pack_text(rule_toml("a", "train.length > 2 m and est.front + 1 > 0 m"))
    (msg,) = _errors(write_pack, text)
    assert msg == (
        "p.toml:9:34: error: rule a expect: cannot add Length and Count (a length needs a unit, such as '5 m')\n"
        '    expect = "train.length > 2 m and est.front + 1 > 0 m"\n'
        + " " * (4 + 33) + "^~~~~~~~~~~~~")


def test_nonlinear_product_golden(write_pack):
    text = pack_text(rule_toml("a", "est.travelled * lrbg.read > 0 m"))
    (msg,) = _errors(write_pack, text)
    assert msg.startswith("p.toml:9:11: error: rule a expect: multiplication needs a constant on one side")


def test_hidden_truth_in_onboard_formula_golden(write_pack):
    text = pack_text(rule_toml("a", "true"), onboard='l_doubtover = "lrbg.locacc + abs(lrbg.offset)"')
    (msg,) = _errors(write_pack, text)
    assert msg == (
        "p.toml:7:34: error: onboard l_doubtover: the onboard cannot read 'lrbg.offset' (hidden truth)\n"
        '    l_doubtover = "lrbg.locacc + abs(lrbg.offset)"\n'
        "                                     ^~~~~~~~~~~")


def test_hidden_truth_through_a_let_is_caught(write_pack):
    text = pack_text(rule_toml("a", "true"), onboard='d_lrbg = "cheat"',
                     extra='[let]\ncheat = "abs(actual.front)"')
    (msg,) = _errors(write_pack, text)
    assert "cannot read 'actual.front' (hidden truth), read through let 'cheat'" in msg


def test_hidden_truth_through_a_let_points_at_the_let_once(write_pack):
    """The caret sits on the let's name inside the formula, a let used through another let is
    named, and the default trackside formulas that read the faulty one are not blamed again."""
    text = pack_text(rule_toml("a", "true"),
                     extra='[let]\ntruth = "inner"\ninner = "actual.front > 0 m"\n'
                           '[trackside]\nest_front = "if truth then rbc.d_lrbg else 0 m"')
    (msg,) = _errors(write_pack, text)
    assert msg == (
        "p.toml:10:17: error: trackside est_front: the trackside cannot read 'actual.front' "
        "(hidden truth), read through let 'truth' (which uses let 'inner')\n"
        '    est_front = "if truth then rbc.d_lrbg else 0 m"\n'
        "                    ^~~~~")


def test_the_exact_report_length_names_what_the_trackside_reads(write_pack):
    text = pack_text(rule_toml("a", "true"),
                     extra='[trackside]\nest_front = "report.d_lrbg"')
    (msg,) = _errors(write_pack, text)
    assert "cannot read 'report.d_lrbg' (the exact length before coding, read by nobody; " \
           "the trackside reads 'rbc.d_lrbg')" in msg


def test_all_errors_reported_not_just_the_first(write_pack):
    text = pack_text(rule_toml("a", "nominal + 1 m > 0 m") + rule_toml("a", "true")
                     + rule_toml("c", "legs[1].odometr > 0 m"), world='train_length = ["20 m", "10 m"]')
    msgs = _errors(write_pack, text)
    joined = "\n".join(msgs)
    assert len(msgs) == 4
    assert "low 20 m is above high 10 m" in joined
    assert "cannot add Direction and Length" in joined
    assert "duplicate rule id 'a'" in joined
    assert "did you mean 'odometer'" in joined


def test_unknown_key_and_table(write_pack):
    text = pack_text(rule_toml("a", "true").replace("title", "titel")) + "[wrold]\nx = 1\n"
    msgs = "\n".join(_errors(write_pack, text))
    assert "unknown key 'titel' in [[rule]]; did you mean 'title'?" in msgs
    assert "rule is missing 'title'" in msgs
    assert "unknown table 'wrold'; did you mean 'world'?" in msgs


def test_malformed_toml_position(write_pack):
    (msg,) = _errors(write_pack, '[pack]\nname = "x"\ntitle = "unterminated\n')
    assert msg.startswith("p.toml:3:") and "malformed TOML" in msg


def test_syntax_error_column(write_pack):
    (msg,) = _errors(write_pack, pack_text(rule_toml("a", "lrbg.read >= and true")))
    assert msg.startswith("p.toml:9:24: error: in rule a expect: unexpected 'and'")


def test_deep_nesting_and_huge_numbers_are_clean_errors(write_pack):
    deep = "(" * 200 + "true" + ")" * 200
    (msg,) = _errors(write_pack, pack_text(rule_toml("a", deep)))
    assert "nested deeper than" in msg
    huge = pack_text(rule_toml("a", "train.length < " + "9" * 400 + " m"))
    # a huge literal is fine (exact arithmetic): it loads
    assert load_pack(write_pack(huge, "h.toml")).rules[0].id == "a"


def test_cycle_between_onboard_formulas(write_pack):
    text = pack_text(rule_toml("a", "true"), onboard='d_lrbg = "est.l_doubtover"\nl_doubtover = "est.d_lrbg"')
    assert any("cycle" in m for m in _errors(write_pack, text))


def test_cli_bad_input_exit_2_no_traceback_no_file(tmp_path, capsys, monkeypatch):
    monkeypatch.chdir(tmp_path)
    (tmp_path / "rules").mkdir()
    (tmp_path / "rules" / "bad.toml").write_text(pack_text(rule_toml("a", "lrbg.raed >= 2")))
    code = main(["check", "rules"])
    out = capsys.readouterr()
    assert code == 2
    assert "rules/bad.toml:9:11: error:" in out.err and "Traceback" not in out.err
    assert not (tmp_path / "counterexamples").exists()


def test_cli_unknown_rule_id_is_usage_error(tmp_path, capsys, monkeypatch):
    monkeypatch.chdir(tmp_path)
    (tmp_path / "p.toml").write_text(pack_text(rule_toml("a", "true")))
    assert main(["check", "p.toml", "--rule", "nope"]) == 2
    assert "no rule with id 'nope'" in capsys.readouterr().err


def test_cli_misspelt_rule_id_gets_a_suggestion(tmp_path, capsys, monkeypatch):
    monkeypatch.chdir(tmp_path)
    (tmp_path / "p.toml").write_text(pack_text(rule_toml("real-front-inside-interval", "true")))
    assert main(["check", "p.toml", "--rule", "real-front-inside-intervl"]) == 2
    assert "did you mean 'real-front-inside-interval'?" in capsys.readouterr().err


# ---- definitions nothing reads: a warning at the key, the check goes on

UNUSED = """
[params]
spare = "5 m"
margin = "2 m"

[let]
idle = "legs.count == 1"
short = "legs.count <= 1"
"""


def test_unused_param_and_let_are_warned_at_their_keys_golden(write_pack):
    text = pack_text(rule_toml("a", "short and train.length >= params.margin"), extra=UNUSED)
    pack = load_pack(write_pack(text), "p.toml")
    assert [d.render() for d in pack.warnings] == [
        "p.toml:7:1: warning: parameter 'spare' is never read: no rule, lemma, design formula, "
        "let or other parameter uses it\n"
        '    spare = "5 m"\n'
        "    ^~~~~",
        "p.toml:11:1: warning: let 'idle' is never read: no rule, lemma, design formula or other "
        "let uses it\n"
        '    idle = "legs.count == 1"\n'
        "    ^~~~",
    ]


def test_a_name_read_by_another_definition_is_used(write_pack):
    # spare read by the parameter margin, idle by the let short, margin by the onboard design;
    # a quantifier variable named like a let does not read it
    extra = UNUSED.replace('margin = "2 m"', 'margin = "params.spare + 2 m"').replace(
        'short = "legs.count <= 1"', 'short = "idle or legs.count == 0"') + '\nshadow = "true"\n'
    text = pack_text(rule_toml("a", "short and all(shadow in legs: shadow.distance >= 0 m)"),
                     onboard='l_doubtover = "lrbg.locacc + params.margin + est.bound_over"',
                     extra=extra)
    pack = load_pack(write_pack(text), "p.toml")
    assert [d.message for d in pack.warnings] == [
        "let 'shadow' is never read: no rule, lemma, design formula or other let uses it"]


def test_unused_names_warn_on_stderr_and_leave_the_verdicts(write_pack, tmp_path, monkeypatch, capsys):
    path = write_pack(pack_text(rule_toml("a", "legs.count >= 0"), legs=1, extra=UNUSED))
    monkeypatch.chdir(tmp_path)
    assert main(["check", str(path), "--no-files", "--no-cache"]) == 0      # warnings only
    err = capsys.readouterr().err
    assert "warning: parameter 'spare' is never read" in err
    assert "warning: parameter 'margin' is never read" in err
    assert "warning: let 'idle' is never read" in err and "warning: let 'short' is never read" in err


def test_shipped_packs_define_nothing_unused():
    root = Path(__file__).resolve().parent.parent
    packs, diags = load_all([root / "rules"])
    assert packs and not [d.render() for d in diags if "never read" in d.message]

"""Edges of the input: names, empty checks, files that are not packs, huge and odd text.

Each case is a bad or extreme input that must end in a clean, placed error (or, for a long
flat chain, in a verdict), never a hang, a traceback or invalid output."""

from __future__ import annotations

import json
import os
import signal
import textwrap
from pathlib import Path
from xml.etree import ElementTree as ET

import attrs
import pytest

from conftest import pack_text, rule_toml
from verifier.cli import main
from verifier.errors import Diagnostic, PackError, UsageError
from verifier.lang import ast
from verifier.lang.parser import parse
from verifier.run.loader import discover, load_pack


def _diags(path, shown="p.toml"):
    with pytest.raises(PackError) as exc:
        load_pack(path, shown)
    return exc.value.diagnostics


@pytest.fixture
def guard():
    """A hard limit on one call: a read that blocks fails the test instead of hanging it."""
    def on_alarm(*_):
        raise TimeoutError("blocked")
    old = signal.signal(signal.SIGALRM, on_alarm)
    signal.alarm(10)
    yield
    signal.alarm(0)
    signal.signal(signal.SIGALRM, old)


# ---- slugs are matched whole ----------------------------------------------------------------

@pytest.mark.parametrize("where", ["pack", "rule"])
def test_a_slug_with_a_trailing_newline_is_refused(write_pack, where):
    # "$" also matches before a final newline: the id would become a file name with a newline
    if where == "pack":
        text = pack_text(rule_toml("a", "true"), name="nl-name\\n")
    else:
        text = pack_text('[[rule]]\nid = "nl-rule\\n"\ntitle = "t"\nexpect = "true"\n')
    (d,) = [d for d in _diags(write_pack(text)) if d.severity == "error"]
    assert "must be a slug" in d.message and "\\n" in d.message


def test_an_identifier_with_a_trailing_newline_is_refused(write_pack):
    text = pack_text(rule_toml("a", "true"), extra='[params]\n"x\\n" = "1 m"\n'
                     '\n[[info]]\nid = "eoa\\n"\nat = "5 m"\nvalid = "both"\n')
    messages = [d.message for d in _diags(write_pack(text))]
    assert any("parameter name" in m and "plain identifier" in m for m in messages)
    assert any("info id must be a name" in m for m in messages)


# ---- checking nothing is an input error ---------------------------------------------------------

def _check(capsys, *paths):
    code = main(["check", "--no-files", "--no-cache", *map(str, paths)])
    return code, capsys.readouterr()


def test_an_empty_folder_is_no_rules_found(tmp_path, capsys):
    (tmp_path / "empty").mkdir()
    code, out = _check(capsys, tmp_path / "empty")
    assert code == 2
    assert "no rules found" in out.err


def test_a_folder_of_upper_case_toml_files_is_no_rules_found_with_a_hint(tmp_path, capsys):
    (tmp_path / "FS.TOML").write_text(pack_text(rule_toml("a", "true")))
    code, out = _check(capsys, tmp_path)
    assert code == 2
    assert "no rules found" in out.err and "FS.TOML" in out.err


def test_a_pack_without_rules_is_no_rules_found(tmp_path, capsys):
    p = tmp_path / "bare.toml"
    p.write_text('[pack]\nname = "bare"\ntitle = "Dunmore Yard, nothing yet"\n')
    code, out = _check(capsys, p)
    assert code == 2
    assert "the pack has no [[rule]]" in out.err and "no rules found" in out.err


# ---- only regular files of a sane size are read -------------------------------------------

def test_a_fifo_is_refused_without_blocking(tmp_path, guard):
    fifo = tmp_path / "pipe.toml"
    os.mkfifo(fifo)
    (d,) = _diags(fifo)
    assert "not a regular file" in d.message
    # and a folder holding one checks nothing rather than hanging
    assert discover([tmp_path]) == []


@pytest.mark.parametrize("command", ["show", "simulate", "replay"])
def test_a_fifo_given_to_show_simulate_or_replay_is_refused_without_blocking(tmp_path, guard, capsys, command):
    from verifier.cli import main
    fifo = tmp_path / "pipe.json"
    os.mkfifo(fifo)
    args = [command, str(fifo)] + (["--pack", "rules/position-report.toml"] if command == "simulate" else [])
    code = main(args)
    err = capsys.readouterr()
    assert code in (1, 2) and "not a regular file (a FIFO)" in err.err + err.out


@pytest.mark.skipif(not Path("/dev/zero").exists(), reason="no /dev/zero")
def test_dev_zero_is_refused_without_reading_it(guard):
    (d,) = _diags("/dev/zero", "/dev/zero")
    assert "not a regular file" in d.message


def test_a_file_over_the_size_cap_is_refused(tmp_path):
    from verifier.lang.source import MAX_FILE_BYTES
    p = tmp_path / "big.toml"
    # valid TOML (one long comment), so only the size can refuse it
    p.write_text(pack_text(rule_toml("a", "true")) + "#" + "x" * MAX_FILE_BYTES + "\n")
    (d,) = _diags(p)
    assert "larger than" in d.message and "MB" in d.message


# ---- report manifests are checked before they are used ----------------------------------------

@pytest.mark.parametrize("doc", [
    '{"format": "verifier-report/1", "packs": 5}',
    '{"format": "verifier-report/1", "packs": [{"rules": 7}]}',
    '{"format": "verifier-report/1", "packs": [{"rules": [{"counterexample": [1]}]}]}',
    '{"format": "verifier-report/1", "packs": [{"rules": [{"counterexample": {"file": 3}}]}]}',
])
def test_a_malformed_report_manifest_is_a_usage_error(tmp_path, doc):
    from verifier.evidence.report import ensure_ours, prepare_dir
    out = tmp_path / "report"
    out.mkdir()
    (out / "manifest.json").write_text(doc)
    (out / "index.html").write_text("kept")
    for call in (ensure_ours, prepare_dir):
        with pytest.raises(UsageError) as exc:
            call(out)
        assert "manifest.json" in str(exc.value) and "not overwritten" in str(exc.value)
    assert (out / "index.html").read_text() == "kept"
    # the schema says so too, read by an independent validator
    jsonschema = pytest.importorskip("jsonschema")
    from verifier.evidence.report import MANIFEST_SCHEMA
    with pytest.raises(jsonschema.ValidationError):
        jsonschema.Draft4Validator(MANIFEST_SCHEMA).validate(json.loads(doc))


def test_a_well_formed_report_manifest_is_read_and_its_files_replaced(tmp_path):
    """Every file the last report listed goes, counterexamples to induction too (they stayed
    behind before); files it did not list stay."""
    from verifier.evidence.report import MANIFEST_SCHEMA, prepare_dir
    out = tmp_path / "report"
    (out / "counterexamples" / "p").mkdir(parents=True)
    doc = {"format": "verifier-report/1", "packs": [{"name": "p", "rules": [
        {"id": "a", "counterexample": {"file": "counterexamples/p/a.json", "diagram": "counterexamples/p/a.svg"}},
        {"id": "b", "counterexample": None,
         "counterexample_to_induction": {"file": "counterexamples/p/b.induction.json", "diagram": None}}]}]}
    (out / "manifest.json").write_text(json.dumps(doc))
    for name in ("index.html", "counterexamples/p/a.json", "counterexamples/p/a.svg", "notes.txt",
                 "counterexamples/p/b.induction.json"):
        (out / name).write_text("old")
    prepare_dir(out)
    # (.verifier-report: the marker prepare_dir writes first, see report.MARKER)
    assert sorted(p.name for p in out.rglob("*") if p.is_file()) == [".verifier-report", "manifest.json", "notes.txt"]
    jsonschema = pytest.importorskip("jsonschema")
    jsonschema.Draft4Validator(MANIFEST_SCHEMA).validate(doc)


# ---- a long flat chain is not nesting -------------------------------------------------------------

def _depth(node) -> int:
    best, stack = 0, [(node, 1)]
    while stack:
        n, d = stack.pop()
        best = max(best, d)
        stack.extend((c, d + 1) for c in ast.children(n))
    return best


@pytest.mark.parametrize("op, term, ty", [("and", "legs.count >= {i}", None),
                                           ("or", "legs.count == {i}", None),
                                           ("+", "{i} m", "sum"),
                                           ("*", "1", "product")])
def test_a_flat_chain_of_2000_terms_parses_shallow(op, term, ty):
    text = f" {op} ".join(term.format(i=i % 7) for i in range(2000))
    node = parse(text)
    assert _depth(node) <= 20
    # the same terms, in the same order, left to right
    leaves, stack = [], [node]
    while stack:
        n = stack.pop()
        if isinstance(n, ast.Binary) and n.op == op:
            stack.extend((n.right, n.left))
        else:
            leaves.append(text[n.start:n.end])
    assert leaves == [term.format(i=i % 7) for i in range(2000)]
    assert (node.start, node.end) == (0, len(text))
    # a short chain keeps its left-nested shape (existing packs encode as before)
    short = parse(f"a {op} b {op} c")
    assert isinstance(short.left, ast.Binary) and short.left.op == op
    assert isinstance(short.right, (ast.Name, ast.Num))
    # real nesting is still refused
    from verifier.lang.parser import ExprSyntaxError
    for text in ("(" * 100 + "true" + ")" * 100, "not " * 2000 + "true",
                 " implies ".join(["true"] * 2000)):
        with pytest.raises(ExprSyntaxError) as exc:
            parse(text)
        assert "nested deeper than 64 levels" in exc.value.message


def test_a_flat_chain_of_2000_terms_goes_through_typer_encoder_and_simulator(tmp_path):
    """2,000 conjuncts, the last false when there is a leg: a verdict (violated) whose world the
    simulator replays, and a sum of 2,000 lengths whose value is worked by hand."""
    from verifier.api import CheckOptions, check_packs
    conj = " and ".join(["legs.count >= 0"] * 1999 + ["legs.count == 0"])
    total = " + ".join(["1 cm"] * 2000)        # 2,000 cm = 20 m
    p = tmp_path / "chain.toml"
    p.write_text(pack_text(rule_toml("conj", conj) + "\n" + rule_toml("sum", f"{total} == 20 m"), legs=1))
    pack = load_pack(p, "chain.toml")
    (res,) = check_packs([pack], CheckOptions(legs=1, out=tmp_path / "cex", witness=False))
    verdicts = {r.rule: r.verdict for r in res.results}
    assert verdicts == {"conj": "violated", "sum": "holds"}
    conj_result = next(r for r in res.results if r.rule == "conj")
    assert conj_result.counterexample     # replayed and written: the simulator agreed


# ---- long text is cut in echoes -----------------------------------------------------------------

def test_a_1_mb_expression_is_not_echoed_whole(write_pack):
    text = pack_text(rule_toml("a", "legs.count >= 0 and " + "x" * 1_000_000))
    (d,) = _diags(write_pack(text))
    shown = d.render()
    assert len(shown) < 800
    assert "..." in shown
    head, line, caret = shown.split("\n")
    # the caret still stands under the start of the name
    assert line[caret.index("^")] == "x" and line[caret.index("^") - 1] == " "


def test_a_long_source_line_keeps_its_caret_far_right():
    line = "y" * 5000 + " z"
    d = Diagnostic("f.toml", 3, 5002, "here", source_line=line)
    _, echo, caret = d.render().split("\n")
    assert len(echo) < 140 and echo[caret.index("^")] == "z"


# ---- numbers too long to read ----------------------------------------------------------------------

def test_a_number_of_5000_digits_in_an_expression_points_at_the_literal(write_pack):
    text = pack_text(rule_toml("a", "legs.count < " + "1" * 5000))
    (d,) = _diags(write_pack(text))
    expect_col = len('expect = "legs.count < ') + 1
    assert (d.line, d.column) == (9, expect_col)
    assert "number is too long" in d.message and "set_int_max_str_digits" not in d.message


def test_a_toml_integer_of_5000_digits_points_at_the_literal(write_pack):
    text = '[pack]\nname = "p"\ntitle = "t"\nlegs = ' + "9" * 5000 + "\n"
    (d,) = _diags(write_pack(text))
    assert (d.line, d.column) == (4, 8)
    assert "number is too long" in d.message and "set_int_max_str_digits" not in d.message


# ---- discover is linear --------------------------------------------------------------------------

def test_discover_resolves_each_path_once_and_keeps_the_first_of_duplicates(tmp_path, monkeypatch):
    n = 300
    for i in range(n):
        (tmp_path / f"p{i:04d}.toml").write_text("")
    (tmp_path / "sub").mkdir()
    (tmp_path / "sub" / "q.toml").write_text("")
    calls = []
    real = Path.resolve

    def counting(self, *a, **k):
        calls.append(self)
        return real(self, *a, **k)
    monkeypatch.setattr(Path, "resolve", counting)
    named = tmp_path / "p0007.toml"
    found = discover([named, tmp_path, tmp_path / "sub" / ".." / "p0007.toml", tmp_path / "sub"])
    assert found[0] == named
    assert len(found) == n + 1
    assert len({real(p) for p in found}) == n + 1
    assert len(calls) <= 2 * (n + 4)       # was about n * n / 2


# ---- control characters ----------------------------------------------------------------------

@pytest.mark.parametrize("field, value", [
    ("rule title", "Kestrel Quay\\u001b[2J"),
    ("pack title", "Marrow Vale\\u0007"),
    ("rule note", "ok\\nthen\\u0000"),
    ("refs", "SUBSET-026 3.6\\u001b"),
])
def test_control_characters_in_pack_text_are_refused(write_pack, field, value):
    rule = f'[[rule]]\nid = "a"\ntitle = "t"\nexpect = "true"\n'
    if field == "rule title":
        rule = rule.replace('title = "t"', f'title = "{value}"')
    elif field == "rule note":
        rule += f'note = "{value}"\n'
    elif field == "refs":
        rule += f'refs = ["{value}"]\n'
    text = pack_text(rule)
    if field == "pack title":
        text = text.replace('title = "test pack"', f'title = "{value}"')
    (d,) = _diags(write_pack(text))
    assert "control character" in d.message and "U+00" in d.message
    # newlines and tabs in a note are fine
    text = pack_text('[[rule]]\nid = "a"\ntitle = "t"\nexpect = "true"\nnote = "two\\nlines\\tand a tab"\n')
    assert load_pack(write_pack(text, "ok.toml")).rules[0].note == "two\nlines\tand a tab"


def test_control_characters_from_other_sources_are_escaped_in_junit():
    from verifier.evidence.ciformats import render
    d = Diagnostic("yard\x1b[2J.toml", 1, 1, "bad \x07 thing", source_line="x\x1by")
    xml = render("junit", [], [d])
    root = ET.fromstring(xml)          # well-formed XML 1.0
    case = root.find("testsuite/testcase")
    assert "\x1b" not in xml and "\\x1b" in case.get("file")


DIAGRAM_PACK = textwrap.dedent("""\
    [pack]
    name = "larkspur"
    title = "Larkspur Sidings"
    legs = 1

    [[rule]]
    id = "max-safe-ahead"
    title = "The max safe front end is never behind the real front end"
    given = "rbc.placed"
    expect = "actual.front <= rbc.max_safe_front"
    """)
WORLD = {"legs": [{"cab_change": True, "distance": "0", "odometer": "5.21", "running": "backward"}],
         "lrbg": {"balises": 1, "linked": True, "locacc": "0", "offset": "0", "read": 1},
         "passage": {"detect_error": "0", "direction": "reverse", "running": "forward"},
         "train": {"antenna": "2", "length": "800"}}


def test_control_characters_from_other_sources_are_escaped_in_the_diagram_and_story(tmp_path):
    from verifier.evidence import cexfile, diagram
    from verifier.evidence.story import story_text
    from verifier.world.scenario import world_from_data
    from verifier.world.sim import State
    p = tmp_path / "larkspur.toml"
    p.write_text(DIAGRAM_PACK)
    pack = load_pack(p, "lark\x1bspur.toml")      # a file name with ESC in it
    rule = attrs.evolve(pack.rule("max-safe-ahead"), title="clear \x1b[2J the \x9b screen")
    st = State(pack, world_from_data(WORLD))
    doc = cexfile.build(pack, rule, st, verdict="violated", bound=1, solver="test", minimal=True)
    svg = diagram.render(doc, rule, st)
    ET.fromstring(svg)
    assert "\x1b" not in svg and "\\x1b" in svg
    text = story_text(doc, pack, rule, st, shown="c.json", checked=1)
    assert "\x1b" not in text and "\x9b" not in text and "\\x1b[2J" in text

"""The check table on a terminal (colour, the words kept) and piped (plain, as it always was),
NO_COLOR, --color, and the live progress line; terminals are real pseudo-terminals here."""

from __future__ import annotations

import os
import pty
import re
import select
import struct
import subprocess
import sys
import termios
import fcntl
from pathlib import Path

import pytest
from rich.text import Text

from conftest import pack_text, rule_toml
from verifier import terminal
from verifier.cli import main
from verifier.run.engine import PackResult, RuleResult

ROOT = Path(__file__).resolve().parent.parent
ESC = "\x1b["
ANSI = re.compile(r"\x1b\[[0-9;?]*[A-Za-z]")
# a rule that holds and one that is violated, in one small pack
RULES = rule_toml("stays", "legs.count <= 1") + rule_toml("breaks", "legs.count == 0")


def _pack(tmp_path) -> Path:
    p = tmp_path / "rules" / "p.toml"
    p.parent.mkdir()
    p.write_text(pack_text(RULES, legs=1))
    return p


def _env(**extra) -> dict:
    env = {k: v for k, v in os.environ.items() if k not in ("NO_COLOR", "FORCE_COLOR", "COLUMNS")}
    env.update(extra)
    return env


def _run_in_terminal(cwd, args, env, columns=120, stderr_too=False) -> tuple[int, str, str]:
    """Run the CLI with stdout (and stderr, when asked) on a pseudo-terminal of ``columns``
    columns; what the terminal received and what went to the stderr pipe."""
    master, slave = pty.openpty()
    fcntl.ioctl(slave, termios.TIOCSWINSZ, struct.pack("HHHH", 40, columns, 0, 0))
    proc = subprocess.Popen([sys.executable, "-m", "verifier.cli", *args], cwd=cwd, env=env,
                            stdin=subprocess.DEVNULL, stdout=slave,
                            stderr=slave if stderr_too else subprocess.PIPE)
    os.close(slave)
    chunks = []
    while True:
        ready, _, _ = select.select([master], [], [], 60)
        if not ready:
            break
        try:
            data = os.read(master, 65536)
        except OSError:          # the child closed the terminal
            break
        if not data:
            break
        chunks.append(data)
    err = proc.stderr.read().decode() if proc.stderr else ""
    code = proc.wait(60)
    os.close(master)
    return code, b"".join(chunks).decode().replace("\r\n", "\n"), err


# ---- the plain table, byte for byte as before colour existed

def _result(rule, verdict, seconds, **kw) -> RuleResult:
    return RuleResult(pack="p", rule=rule, title=rule, line=1, verdict=verdict, bound=1,
                      seconds=seconds, **kw)


FIXED = [PackResult("p", "rules/p.toml", (
    _result("stays", "holds", 0.25),
    _result("breaks", "violated", 1.5, counterexample="counterexamples/p/breaks.json",
            message="legs.count == 0 is false: legs.count is 1", cached=True),
    _result("slow", "error", 12.0, kind="internal", message="the solver crashed"),
))]


def test_plain_table_is_the_text_of_before():
    # the layout as `verifier check` printed it before colour existed, written out by hand
    assert terminal.plain_table(FIXED, []) == "\n".join([
        "pack p (rules/p.toml)",
        "  holds     stays   up to 1 leg          0.25 s",
        "  violated  breaks  up to 1 leg          1.50 s  (cached)",
        "            counterexample: counterexamples/p/breaks.json",
        "            legs.count == 0 is false: legs.count is 1",
        "  error (internal) slow    up to 1 leg         12.00 s",
        "            the solver crashed",
        "summary: 1 holds, 1 violated, 0 vacuous, 0 bounded, 0 unknown, 1 error",
        "note: verifier checks rules against a stated model, not against a real train. Its verdicts support,",
        "      and never replace, a safety case prepared under EN 50126/50128/50129, local rules and licensed",
        "      practice.",
    ])


def test_piped_output_is_the_plain_renderer_even_when_the_environment_asks_for_colour(tmp_path):
    _pack(tmp_path)
    env = _env(FORCE_COLOR="1", TERM="xterm-256color", COLUMNS="60")
    out = subprocess.run([sys.executable, "-m", "verifier.cli", "check", "--no-files", "--no-cache"],
                         cwd=tmp_path, env=env, capture_output=True, text=True, timeout=120)
    assert out.returncode == 1
    assert ESC not in out.stdout and ESC not in out.stderr
    # the same lines as the plain renderer gives for these verdicts (the seconds aside)
    got = re.sub(r"\d+\.\d\d s", "S", out.stdout)
    assert "  holds     stays   up to 1 leg          S\n" in got
    assert "  violated  breaks  up to 1 leg          S\n" in got
    assert max(len(line) for line in out.stdout.splitlines()) <= 100     # not folded to COLUMNS


def test_check_prints_what_plain_table_renders(tmp_path, monkeypatch, capsys):
    monkeypatch.chdir(tmp_path)
    _pack(tmp_path)
    seen = []
    real = terminal.plain_table
    monkeypatch.setattr(terminal, "plain_table", lambda *a: seen.append(real(*a)) or seen[-1])
    assert main(["check", "--no-files", "--no-cache"]) == 1
    assert capsys.readouterr().out == seen[0] + "\n"


# ---- colour

def test_color_always_colours_the_verdicts_and_keeps_the_words(tmp_path, monkeypatch, capsys):
    monkeypatch.chdir(tmp_path)
    _pack(tmp_path)
    monkeypatch.setenv("NO_COLOR", "1")       # an explicit --color always wins (no-color.org)
    assert main(["check", "--no-files", "--no-cache", "--color", "always"]) == 1
    out = capsys.readouterr().out
    assert "\x1b[32mholds\x1b[0m" in out                       # green, and the word
    assert "\x1b[1;31mviolated\x1b[0m" in out                  # bold red, and the word
    plain = ANSI.sub("", out)
    assert "  holds     stays" in plain and "  violated  breaks" in plain
    assert plain.splitlines()[-4].startswith("summary: 1 holds, 1 violated, 0 vacuous")


def test_color_never_and_json_stay_plain(tmp_path, monkeypatch, capsys):
    monkeypatch.chdir(tmp_path)
    _pack(tmp_path)
    assert main(["check", "--no-files", "--color", "never"]) == 1
    assert ESC not in capsys.readouterr().out
    assert main(["check", "--no-files", "--color", "always", "--json"]) == 1
    out = capsys.readouterr().out
    assert ESC not in out and out.startswith("{")
    assert main(["check", "--no-files", "--color", "always", "--format", "junit"]) == 1
    assert ESC not in capsys.readouterr().out


def test_a_terminal_gets_colour_and_no_color_takes_it_away(tmp_path):
    _pack(tmp_path)
    args = ["check", "--no-files", "--no-cache"]
    code, screen, _ = _run_in_terminal(tmp_path, args, _env(TERM="xterm-256color"))
    assert code == 1
    assert "\x1b[32mholds" in screen and "\x1b[1;31mviolated" in screen
    assert "stays" in screen and "breaks" in screen
    code, screen, _ = _run_in_terminal(tmp_path, args, _env(TERM="xterm-256color", NO_COLOR="1"))
    assert code == 1
    assert ESC not in screen
    assert "  holds     stays" in screen and "  violated  breaks" in screen
    code, screen, _ = _run_in_terminal(tmp_path, args, _env(TERM="dumb"))
    assert ESC not in screen


def test_a_narrow_terminal_folds_the_table_to_its_width(tmp_path):
    _pack(tmp_path)
    code, screen, _ = _run_in_terminal(tmp_path, ["check", "--no-files", "--no-cache"],
                                       _env(TERM="xterm-256color"), columns=64)
    lines = ANSI.sub("", screen).splitlines()
    assert code == 1 and max(len(line) for line in lines) <= 64
    note = next(i for i, line in enumerate(lines) if line.startswith("note: "))
    assert lines[note + 1].startswith("      ") and lines[note + 1][6] != " "   # under its text


def test_wants_color():
    class Tty:
        def isatty(self):
            return True

    assert terminal.wants_color("auto", Tty(), {}) is True
    assert terminal.wants_color("auto", Tty(), {"NO_COLOR": "1"}) is False
    assert terminal.wants_color("auto", Tty(), {"NO_COLOR": ""}) is True     # empty: not set
    assert terminal.wants_color("auto", Tty(), {"TERM": "dumb"}) is False
    assert terminal.wants_color("auto", object(), {}) is False               # not a terminal
    assert terminal.wants_color("never", Tty(), {}) is False
    assert terminal.wants_color("always", object(), {"NO_COLOR": "1"}) is True


def test_fold_carries_the_styles_onto_the_folded_lines():
    line = Text.assemble(("note:", "cyan"), " ", ("alpha", "red"), " beta gamma ", ("delta", "green"))
    out = terminal.fold([line], 18)
    assert [t.plain for t in out] == ["note: alpha beta", "      gamma delta"]
    styled = [(t.plain[s.start:s.end], str(s.style)) for t in out for s in t.spans]
    assert styled == [("note:", "cyan"), ("alpha", "red"), ("delta", "green")]


# ---- the live progress line

def test_progress_line_shows_rules_done_time_and_the_rule(tmp_path):
    _pack(tmp_path)
    code, screen, _ = _run_in_terminal(tmp_path, ["check", "--no-files", "--no-cache"],
                                       _env(TERM="xterm-256color"), stderr_too=True)
    assert code == 1
    shown = ANSI.sub("", screen)
    assert re.search(r"[01]/2 rules done .* \d+\.\d s t/(stays|breaks)", shown)
    assert "  holds     stays" in shown          # the table follows, the progress line gone


@pytest.mark.parametrize("flag", [[], ["--json"]])
def test_no_progress_line_when_stderr_is_piped(tmp_path, flag):
    _pack(tmp_path)
    _, _, err = _run_in_terminal(tmp_path, ["check", "--no-files", "--no-cache", *flag],
                                 _env(TERM="xterm-256color"))
    assert "rules done" not in err and ESC not in err

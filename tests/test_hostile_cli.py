"""Hostile use of the command line: bad numbers, places files cannot go, interrupts, killed
parents. Each case was a traceback, a wrong exit code or a silent change of meaning."""

from __future__ import annotations

import errno
import json
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest

from conftest import ROOT, pack_text, rule_toml
from verifier.cli import main

FAST = pack_text(rule_toml("ok", "legs.count <= 1") + rule_toml("bad", "legs.count == 0"), legs=1)


# ---- 3. bad numbers are usage errors at parse time --------------------------------------

# every numeric option of every subcommand, with values that are not numbers of its kind
BAD_NUMBERS = [
    (cmd, opt, value)
    for cmd, opts in {
        "check": {"--timeout": ["nan", "inf", "-inf", "1e308", "0", "-1"],
                  "--rlimit": ["0", "-5", "4294967296", "1.5"],
                  "--jobs": ["0", "-1", "65"],
                  "--induction-depth": ["0", "9", "-1"],
                  "--legs": ["-1", "9", "nan"]},
        "diff": {"--timeout": ["nan", "inf", "-1"], "--rlimit": ["0", "-5"],
                 "--jobs": ["0"], "--legs": ["9", "-1"]},
        "mutate": {"--timeout": ["nan", "inf", "0"], "--jobs": ["0"]},
        "test": {"--max-examples": ["0", "-1"], "--call-timeout": ["nan", "-1", "inf", "0"],
                 "--legs": ["9", "-1"], "--seed": ["-1", "x"]},
        "simulate": {"--legs": ["9", "-1"]},
    }.items()
    for opt, values in opts.items() for value in values]

POSITIONAL = {"check": ["p.toml"], "diff": ["p.toml", "p.toml"], "mutate": ["p.toml"],
              "test": ["p.toml", "--impl", "nowhere:f"], "simulate": ["w.toml", "--pack", "p.toml"]}


@pytest.mark.parametrize("cmd,opt,value", BAD_NUMBERS)
def test_a_bad_number_is_a_usage_error(cmd, opt, value, tmp_path, monkeypatch, capsys):
    monkeypatch.chdir(tmp_path)
    (tmp_path / "p.toml").write_text(FAST)
    with pytest.raises(SystemExit) as exc:
        main([cmd, *POSITIONAL[cmd], f"{opt}={value}", "--no-cache"] if cmd in ("check", "diff", "test")
             else [cmd, *POSITIONAL[cmd], f"{opt}={value}"])
    assert exc.value.code == 2
    err = capsys.readouterr().err
    assert "usage:" in err and f"argument {opt}" in err and repr(value) in err
    assert "Traceback" not in err
    assert not (tmp_path / "counterexamples").exists()    # refused before any work


@pytest.mark.parametrize("argv", [["check", "p.toml", "--timeout", "0.5", "--rlimit", "4294967295",
                                   "--jobs", "64", "--induction-depth", "8", "--legs", "1"],
                                  ["check", "p.toml", "--timeout", "1e6", "--legs", "any"]])
def test_the_extremes_of_each_range_are_accepted(argv, tmp_path, monkeypatch, capsys):
    monkeypatch.chdir(tmp_path)
    (tmp_path / "p.toml").write_text(FAST)
    assert main(argv + ["--no-cache", "--no-files"]) == 1      # 'bad' is violated
    assert "violated  bad" in capsys.readouterr().out

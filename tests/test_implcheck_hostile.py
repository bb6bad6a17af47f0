"""An implementation under test that misbehaves beyond a wrong answer: it exits, interrupts,
prints, changes the working directory, returns values whose own methods fail, recurses without
end. Each is a contract finding (or, at import, one usage error line), never the verifier's exit
code, a traceback or output mixed into ``--json``; a real Ctrl-C still stops the run. And the
pytest plugin: a bad ``--verifier-impl`` is one usage error, a ``--verifier-pack`` run collects
nothing else unless asked.
"""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
import textwrap
import time
from pathlib import Path

import pytest

from verifier.cli import main
from verifier.implcheck import interface
from verifier.implcheck.runner import Checker, ImplOptions, check
from verifier.run.loader import load_pack
from verifier.world.sim import World

ROOT = Path(__file__).resolve().parent.parent
EXAMPLES = ROOT / "examples"
PACK = ROOT / "rules" / "position-report.toml"
QUICK = ["--no-smt", "--no-cache", "--no-files", "--max-examples", "5", "--rule", "qualifier-codes"]
GOOD = "dict(q_scale=1, d_lrbg=2, q_dlrbg=1, q_dirlrbg=1, q_dirtrain=1, l_doubtover=5, l_doubtunder=5)"


def module(tmp_path: Path, name: str, body: str) -> str:
    (tmp_path / f"{name}.py").write_text(textwrap.dedent(body))
    return str(tmp_path)


@pytest.fixture(scope="module")
def pack():
    return load_pack(PACK)


# ---- exits and interrupts -------------------------------------------------------------------

@pytest.mark.parametrize("name, body, words", [
    ("exits_0", "import sys\ndef report(obs):\n    sys.exit(0)\n", "SystemExit (sys.exit(0))"),
    ("exits_3", "def report(obs):\n    raise SystemExit(3)\n", "SystemExit (sys.exit(3))"),
    ("interrupts", "def report(obs):\n    raise KeyboardInterrupt\n", "KeyboardInterrupt, raised by the code itself"),
])
def test_an_exit_or_interrupt_in_the_implementation_is_a_finding(tmp_path, capsys, name, body, words):
    # before: exit 0 and no output ("every rule passed"), exit 3, exit 130 "interrupted"
    path = module(tmp_path, name, body)
    code = main(["test", str(PACK), "--impl", f"{name}:report", "--path", path, *QUICK])
    out = capsys.readouterr().out
    assert code == 1
    assert f"contract    exception: {name}:report raised {words}" in out
    assert f"{name}.py:" in out.split(words)[1].splitlines()[0]     # located at the user's line


@pytest.mark.parametrize("name, body, words", [
    ("exits_at_import", "import sys\nsys.exit(5)\n", "it called sys.exit(5) while being imported"),
    ("interrupts_at_import", "raise KeyboardInterrupt\n", "it raised KeyboardInterrupt itself (no Ctrl-C reached the verifier)"),
])
def test_an_exit_at_import_is_one_usage_error(tmp_path, capsys, name, body, words):
    path = module(tmp_path, name, body)
    code = main(["test", str(PACK), "--impl", f"{name}:report", "--path", path, *QUICK])
    err = capsys.readouterr().err
    assert code == 2
    assert err.strip().splitlines() == [f"verifier: error: cannot import {name!r} for {name}:report: {words}"]


def test_a_real_ctrl_c_stops_the_run_even_when_the_implementation_swallows_it(tmp_path):
    # the implementation catches KeyboardInterrupt and carries on; the verifier saw the SIGINT
    # and stops with 130 (before: the run went on, one slow call after another)
    marker = tmp_path / "called"
    path = module(tmp_path, "swallows", f"""
        import time
        from pathlib import Path
        def report(obs):
            Path({str(marker)!r}).touch()
            try:
                time.sleep(3)
            except KeyboardInterrupt:
                pass
            return {GOOD}
    """)
    proc = subprocess.Popen(
        [sys.executable, "-m", "verifier.cli", "test", str(PACK), "--impl", "swallows:report",
         "--path", path, "--call-timeout", "30", *QUICK],
        stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, cwd=tmp_path,
        preexec_fn=lambda: signal.signal(signal.SIGINT, signal.SIG_DFL))
    try:
        deadline = time.monotonic() + 60
        while not marker.exists() and time.monotonic() < deadline and proc.poll() is None:
            time.sleep(0.05)
        assert marker.exists()
        proc.send_signal(signal.SIGINT)
        out, err = proc.communicate(timeout=8)
    finally:
        if proc.poll() is None:
            proc.kill()
            proc.communicate()
    assert proc.returncode == 130 and "verifier: interrupted" in err
    assert out == ""


# ---- output, working directory ----------------------------------------------------------------

def test_what_the_implementation_prints_stays_out_of_json_and_is_counted(tmp_path, capfd):
    # per call: print("noise") is 6 bytes, os.write(1, ...) 3 and the echo subprocess 5
    path = module(tmp_path, "noisy", f"""
        import os, subprocess, sys
        def report(obs):
            print("noise")
            os.write(1, b"fd\\n")
            subprocess.run(["echo", "echo"])
            return {GOOD}
    """)
    code = main(["test", str(PACK), "--impl", "noisy:report", "--path", path, "--json", *QUICK])
    out = capfd.readouterr().out
    doc = json.loads(out)["implementations"][0]      # before: "noise" lines ahead of the JSON
    assert code == 0
    assert doc["captured_output"]["bytes"] == 14 * doc["calls"]
    assert doc["captured_output"]["calls"] == doc["calls"]
    assert doc["captured_output"]["head"].startswith("noise\nfd\necho\n")


def test_an_implementation_that_changes_directory_does_not_move_the_files(tmp_path, monkeypatch, capsys):
    here, elsewhere = tmp_path / "here", tmp_path / "elsewhere"
    here.mkdir()
    elsewhere.mkdir()
    path = module(tmp_path, "wanders", f"""
        import os
        import kestrel_onboard_buggy
        def report(obs):
            os.chdir({str(elsewhere)!r})
            return kestrel_onboard_buggy.report_cab(obs)
    """)
    monkeypatch.chdir(here)
    code = main(["test", str(PACK), "--impl", "wanders:report", "--path", path, "--path", str(EXAMPLES),
                 "--out", "cx", "--no-cache", "--max-examples", "20", "--rule", "one-cab-change-flips-orientation"])
    out = capsys.readouterr().out
    assert code == 1
    written = "cx/position-report/impl/wanders.report/one-cab-change-flips-orientation.json"
    assert f"counterexample: {written}" in out
    assert (here / written).is_file() and not (elsewhere / "cx").exists()
    assert Path.cwd() == here


# ---- return values the validator must survive -------------------------------------------------

HOSTILE = """
    from decimal import Decimal
    GOOD = {good}
    class LoudStr(str):
        def __repr__(self):
            raise RuntimeError("repr")
    class SilentError(Exception):
        def __str__(self):
            raise RuntimeError("str")
    def report(obs):
        {ret}
"""


@pytest.mark.parametrize("ret, kind, words", [
    ("return dict(GOOD, d_lrbg=10 ** 5000)", "out of range", "'d_lrbg' is a whole number of 5,001 digits"),
    ("return dict(GOOD, d_lrbg=LoudStr('3'))", "wrong type", "(a packet code), got a LoudStr whose repr raised RuntimeError"),
    ("return dict(GOOD, d_lrbg_m=Decimal('sNaN'))", "out of range", "'d_lrbg_m' is Decimal('sNaN')"),
    ("raise SilentError()", "exception", "raised SilentError: (its message could not be read: RuntimeError)"),
])
def test_a_return_value_that_breaks_the_validator_is_a_finding(tmp_path, pack, ret, kind, words):
    name = f"hostile_{abs(hash(ret)) % 10**8}"
    path = module(tmp_path, name, HOSTILE.format(good=GOOD, ret=ret))
    opts = ImplOptions(out=None, max_examples=5, smt=False, rules=("qualifier-codes",))
    rep = check(pack, interface.load(f"{name}:report", (path,)), opts=opts)
    assert [(f.kind, words in f.message) for f in rep.findings] == [(kind, True)]


def test_an_int_subclass_is_taken_by_its_value_without_calling_its_methods(tmp_path, pack):
    # an IntEnum code is an int: its value counts; a subclass whose comparisons and repr raise
    # crashed the validator before
    path = module(tmp_path, "odd_ints", f"""
        GOOD = {GOOD}
        class Odd(int):
            def __repr__(self):
                raise RuntimeError("repr")
            def __ge__(self, other):
                raise RuntimeError("ge")
            def __le__(self, other):
                raise RuntimeError("le")
            def __index__(self):
                return 7
        def report(obs):
            return dict(GOOD, d_lrbg=Odd(2))
    """)
    st = Checker(pack, interface.load("odd_ints:report", (path,))).state(World())
    assert not isinstance(st, interface.Finding)
    assert type(st.report.d_lrbg) is int and st.report.d_lrbg == 2


def test_the_place_of_a_recursion_error_resolves_one_path_not_every_frame(tmp_path, pack, monkeypatch):
    # a RecursionError carries a thousand frames; resolving each frame's path made a run 25 times
    # slower than with a plain exception (bench figures in the report, not timed here)
    path = module(tmp_path, "recurses", "def report(obs):\n    return report(obs)\n")
    loaded = interface.load("recurses:report", (path,))
    resolved = []
    real = Path.resolve
    monkeypatch.setattr(Path, "resolve", lambda self, *a, **k: resolved.append(self) or real(self, *a, **k))
    st = Checker(pack, loaded).state(World())
    assert st.kind == "exception" and "RecursionError" in st.message
    assert st.where.endswith("recurses.py:2")
    assert len(resolved) <= 3


# ---- the pytest plugin ------------------------------------------------------------------------

def test_the_plugin_gives_one_usage_error_for_an_unimportable_implementation(pytester):
    res = pytester.runpytest_subprocess("-p", "no:cacheprovider", "--verifier-pack", str(PACK),
                                        "--verifier-impl", "no_such_module:report")
    err = res.stderr.str()
    assert res.ret == pytest.ExitCode.USAGE_ERROR
    assert "INTERNALERROR" not in err + res.stdout.str()
    assert ("ERROR: --verifier-pack " + str(PACK) + ": cannot import 'no_such_module' for "
            "no_such_module:report: ModuleNotFoundError: No module named 'no_such_module'") in err


def test_a_pack_run_collects_no_testpaths_unless_asked(pytester):
    # a project whose configuration names testpaths, as this repository's pyproject does
    pytester.makeini("[pytest]\ntestpaths = tests\naddopts = -p no:cacheprovider\n")
    pytester.mkdir("tests")
    (pytester.path / "tests" / "test_project.py").write_text("def test_project_suite():\n    assert False\n")
    args = ("--verifier-pack", str(PACK), "--verifier-impl", "kestrel_onboard:report",
            "--verifier-path", str(EXAMPLES), "--co", "-q")
    alone = pytester.runpytest_subprocess(*args)
    text = alone.stdout.str()
    assert "verifier::position-report::qualifier-codes" in text
    assert "test_project_suite" not in text and "15 tests collected" in text
    both = pytester.runpytest_subprocess(*args, "tests")
    assert "test_project_suite" in both.stdout.str() and "16 tests collected" in both.stdout.str()


def test_the_fixture_takes_a_function_that_has_no_source_file():
    # a callable made by exec (a notebook, a generated wrapper) has "<string>" for its file:
    # it is named without a file and hash instead of a FileNotFoundError
    space: dict = {"__name__": "__main__"}       # as at a prompt: a module with a loader
    exec(f"def report(obs):\n    return {GOOD}\n", space)
    loaded = interface.wrap(space["report"])
    assert (loaded.module_file, loaded.module_sha256) == ("", "")
    value, finding = interface.call_checked(loaded, None, interface.validate_report)
    assert finding is None and value.d_lrbg == 2

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
                  "--rlimit": ["0", "-5", "4294967296"],
                  "--jobs": ["0", "-1", "65"],
                  "--induction-depth": ["0", "9", "-1"],
                  "--legs": ["-1", "9"]},
        "diff": {"--timeout": ["nan", "inf", "-1"], "--rlimit": ["0", "-5"],
                 "--jobs": ["0"], "--legs": ["9", "-1"]},
        "mutate": {"--timeout": ["nan", "inf", "0"], "--jobs": ["0"]},
        "test": {"--max-examples": ["0", "-1"], "--call-timeout": ["nan", "-1", "inf", "0"],
                 "--legs": ["9", "-1"], "--seed": ["-1"]},
        "simulate": {"--legs": ["9", "-1"]},
        "margin": {"--timeout": ["nan", "inf", "0"], "--rlimit": ["0", "-5"], "--legs": ["9", "-1"]},
    }.items()
    for opt, values in opts.items() for value in values]

POSITIONAL = {"check": ["p.toml"], "diff": ["p.toml", "p.toml"], "mutate": ["p.toml"],
              "test": ["p.toml", "--impl", "nowhere:f"], "simulate": ["w.toml", "--pack", "p.toml"],
              "margin": ["p.toml"]}


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


@pytest.mark.parametrize("opt,last,past", [("--timeout", "1000000", "1000000.5"),
                                            ("--rlimit", "4294967295", "4294967296"),
                                            ("--jobs", "64", "65"), ("--induction-depth", "8", "9"),
                                            ("--legs", "8", "9")])
def test_the_last_value_of_each_range_is_taken_and_the_next_refused(opt, last, past, tmp_path,
                                                                     monkeypatch, capsys):
    monkeypatch.chdir(tmp_path)
    (tmp_path / "p.toml").write_text(FAST)
    assert main(["check", "p.toml", opt, last, "--no-cache", "--no-files"]) == 1   # 'bad' is violated
    assert "violated  bad" in capsys.readouterr().out
    with pytest.raises(SystemExit) as exc:
        main(["check", "p.toml", opt, past, "--no-cache", "--no-files"])
    assert exc.value.code == 2 and f"argument {opt}" in capsys.readouterr().err

# ---- 4. where files go, and when they cannot -----------------------------------------------

def _check(tmp_path, monkeypatch, capsys, *args):
    monkeypatch.chdir(tmp_path)
    (tmp_path / "p.toml").write_text(FAST)
    code = main(["check", "p.toml", "--no-cache", *args])
    out, err = capsys.readouterr()
    return code, out, err


def _verdicts_printed(out):
    return "holds     ok" in out and "violated  bad" in out and "summary: 1 holds, 1 violated" in out


def _temporaries(root: Path):
    return [p for p in root.rglob("*") if p.name.endswith(".tmp")]


def test_out_naming_a_file_is_refused_before_any_work(tmp_path, monkeypatch, capsys):
    (tmp_path / "afile").write_text("mine")
    code, out, err = _check(tmp_path, monkeypatch, capsys, "--out", "afile")
    assert code == 2 and "--out afile exists and is not a directory" in err
    assert "Traceback" not in err and (tmp_path / "afile").read_text() == "mine"


def test_a_file_where_a_folder_goes_is_reported_after_the_verdicts(tmp_path, monkeypatch, capsys):
    # stands in for a folder that cannot be written (the tests run as root, whom chmod does
    # not stop): counterexamples/t must be a folder and is a file
    (tmp_path / "counterexamples").mkdir()
    (tmp_path / "counterexamples" / "t").write_text("in the way")
    code, out, err = _check(tmp_path, monkeypatch, capsys)
    assert code == 2 and _verdicts_printed(out)
    assert "verifier: error: cannot write counterexamples/t: exists and is not a directory" in err
    assert "not written: cannot write counterexamples/t" in out


def test_a_full_disk_leaves_the_earlier_pair_whole(tmp_path, monkeypatch, capsys):
    """ENOSPC while the diagram is written (simulated in-process: the second fsync fails, as
    it would when the disk fills up during the second file): the verdicts are printed, the
    path and the reason are said, exit 2, and the counterexample and diagram of the earlier
    run are left as they were (neither is replaced, no temporary file stays)."""
    from verifier.evidence import cexfile
    assert _check(tmp_path, monkeypatch, capsys)[0] == 1
    pair = [tmp_path / "counterexamples" / "t" / n for n in ("bad.json", "bad.svg")]
    before = [p.read_bytes() for p in pair]
    for p in pair:
        p.write_bytes(p.read_bytes() + b"\n")       # to tell a rewrite from the earlier file
    before = [p.read_bytes() for p in pair]
    real, calls = os.fsync, []

    def fsync(fd):
        calls.append(fd)
        if len(calls) == 2:
            raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))
        return real(fd)
    monkeypatch.setattr(cexfile.os, "fsync", fsync)
    code, out, err = _check(tmp_path, monkeypatch, capsys)
    assert code == 2 and _verdicts_printed(out) and "Traceback" not in err
    assert f"cannot write counterexamples/t/bad.svg: {os.strerror(errno.ENOSPC)}" in err
    assert [p.read_bytes() for p in pair] == before
    assert not _temporaries(tmp_path)


def test_a_failed_rename_leaves_no_half_pair(tmp_path, monkeypatch, capsys):
    from verifier.evidence import cexfile
    real = os.replace

    def replace(src, dst):
        if str(dst).endswith(".svg"):
            raise OSError(errno.EIO, os.strerror(errno.EIO))
        return real(src, dst)
    monkeypatch.setattr(cexfile.os, "replace", replace)
    code, out, err = _check(tmp_path, monkeypatch, capsys, "--json")
    assert code == 2
    bad = {r["id"]: r for r in json.loads(out)["packs"][0]["rules"]}["bad"]
    assert bad["verdict"] == "violated" and bad["counterexample"] is None
    assert bad["write_error"] == f"cannot write counterexamples/t/bad.svg: {os.strerror(errno.EIO)}"
    folder = tmp_path / "counterexamples" / "t"
    assert not list(folder.iterdir())          # neither the .json nor the .svg, no temporary


def test_a_counterexample_to_induction_that_cannot_be_written(tmp_path, monkeypatch, capsys):
    """The same for the file of a counterexample to induction (verdict bounded)."""
    from verifier.evidence import cexfile
    real = os.replace

    def replace(src, dst):
        if str(dst).endswith(".induction.svg"):
            raise OSError(errno.EIO, os.strerror(errno.EIO))
        return real(src, dst)
    monkeypatch.setattr(cexfile.os, "replace", replace)
    monkeypatch.chdir(tmp_path)
    (tmp_path / "p.toml").write_text(pack_text(rule_toml("few", "legs.count <= 3"), legs=3)
                                     .replace("legs = 3", 'legs = "any"'))
    code = main(["check", "p.toml", "--no-cache", "--max-legs", "0"])
    out, err = capsys.readouterr()
    assert code == 2 and "bounded   few" in out and "summary: 0 holds, 0 violated, 0 vacuous, 1 bounded" in out
    assert f"cannot write counterexamples/t/few.induction.svg: {os.strerror(errno.EIO)}" in err
    assert not list((tmp_path / "counterexamples" / "t").iterdir())

def test_a_link_out_of_out_is_not_followed_and_one_inside_it_is(tmp_path, monkeypatch, capsys):
    elsewhere = tmp_path / "elsewhere"
    elsewhere.mkdir()
    (tmp_path / "out").mkdir()
    (tmp_path / "out" / "t").symlink_to(elsewhere)
    code, out, err = _check(tmp_path, monkeypatch, capsys, "--out", "out")
    assert code == 2 and _verdicts_printed(out)
    assert f"cannot write out/t: a symbolic link to {elsewhere.resolve().as_posix()}, outside out" in err
    assert not list(elsewhere.iterdir())
    # a link that stays inside --out is followed
    (tmp_path / "out" / "t").unlink()
    (tmp_path / "out" / "real").mkdir()
    (tmp_path / "out" / "t").symlink_to(tmp_path / "out" / "real")
    code, out, err = _check(tmp_path, monkeypatch, capsys, "--out", "out")
    assert code == 1, err
    assert sorted(p.name for p in (tmp_path / "out" / "real").iterdir()) == ["bad.json", "bad.svg"]


def test_a_second_report_run_while_the_first_is_writing(tmp_path, monkeypatch, capsys):
    """Two runs with the same --report DIR, interleaved: the second starts (and finishes)
    while the first has copied its counterexamples and not yet written its manifest. Both
    must succeed and leave a whole report."""
    from verifier.evidence import report
    real, inner = report.render_html, []

    def render_html(*a, **k):
        if not inner:                       # the first run, in the middle of its writing
            inner.append(None)
            inner[0] = main(["check", "p.toml", "--no-cache", "--report", "evidence"])
        return real(*a, **k)
    monkeypatch.setattr(report, "render_html", render_html)
    code, out, err = _check(tmp_path, monkeypatch, capsys, "--report", "evidence")
    assert inner == [1] and code == 1, err
    assert "not a verifier report" not in err
    doc = json.loads((tmp_path / "evidence" / "manifest.json").read_text())
    files = [r["counterexample"] for p in doc["packs"] for r in p["rules"] if r["counterexample"]]
    for c in files:
        assert (tmp_path / "evidence" / c["file"]).is_file() and (tmp_path / "evidence" / c["diagram"]).is_file()
    assert not _temporaries(tmp_path / "evidence")


def test_a_report_that_cannot_be_written_is_said_after_the_verdicts(tmp_path, monkeypatch, capsys):
    from verifier.evidence import cexfile
    real = os.fsync

    def fsync(fd):
        if "index.html" in os.readlink(f"/proc/self/fd/{fd}"):
            raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))
        return real(fd)
    monkeypatch.setattr(cexfile.os, "fsync", fsync)
    code, out, err = _check(tmp_path, monkeypatch, capsys, "--report", "evidence")
    assert code == 2 and _verdicts_printed(out) and "Traceback" not in err
    assert f"cannot write evidence/index.html: {os.strerror(errno.ENOSPC)}" in err
    assert not _temporaries(tmp_path / "evidence")


# ---- 5. interrupts and workers -----------------------------------------------------------

HARD = ("along(report.q_dirlrbg, actual.front - rbc.min_safe_front) >= 0 m and "
        "along(report.q_dirlrbg, rbc.max_safe_front - actual.front) >= 0 m")
# 'hard' takes z3 about 20 s at 4 legs on the 2-core CI machine (the first check alone more
# than 3 s), so a signal sent a few seconds in arrives while z3 is solving it
SLOW = pack_text(rule_toml("ok", "legs.count <= 4") + rule_toml("hard", HARD, "rbc.placed"), legs=4)
SLOW2 = pack_text(rule_toml("hard", HARD, "rbc.placed") + rule_toml("hard2", HARD, "rbc.placed"), legs=4)


def _start(tmp_path, text, *args):
    (tmp_path / "p.toml").write_text(text)
    env = {**os.environ, "PYTHONPATH": str(ROOT)}
    # SIGINT must be deliverable (a shell starts background jobs with it ignored, and Python
    # then installs no KeyboardInterrupt handler)
    # output to files, not pipes: a worker that outlives its parent would hold a pipe open
    with open(tmp_path / "out.txt", "w") as out, open(tmp_path / "err.txt", "w") as err:
        proc = subprocess.Popen([sys.executable, "-m", "verifier.cli", "check", "p.toml", *args],
                                cwd=tmp_path, env=env, stdout=out, stderr=err,
                                preexec_fn=lambda: signal.signal(signal.SIGINT, signal.SIG_DFL))
    proc.tmp = tmp_path
    return proc


def _alive(pid: int) -> bool:
    try:
        state = Path(f"/proc/{pid}/stat").read_text().rsplit(")", 1)[1].split()[0]
    except OSError:
        return False
    return state != "Z"      # a zombie has exited (its new parent has not reaped it yet)


def _workers(pid: int, n: int, wait: float = 8.0) -> list[int]:
    """The pids of the pool's worker processes of ``pid`` once there are ``n`` of them."""
    t0 = time.monotonic()
    while time.monotonic() - t0 < wait:
        kids = []
        for stat in Path("/proc").glob("[0-9]*/stat"):
            try:
                fields = stat.read_text().rsplit(")", 1)[1].split()
                cmd = (stat.parent / "cmdline").read_bytes()
            except OSError:
                continue
            if int(fields[1]) == pid and b"spawn_main" in cmd:
                kids.append(int(stat.parent.name))
        if len(kids) >= n:
            return kids
        time.sleep(0.1)
    raise AssertionError(f"no {n} workers of {pid} after {wait} s")


def _finish(proc, timeout):
    try:
        proc.wait(timeout=timeout)
    except subprocess.TimeoutExpired:
        proc.kill()
        proc.wait()
        raise AssertionError(f"still running {timeout} s after the signal") from None
    return (proc.tmp / "out.txt").read_text(), (proc.tmp / "err.txt").read_text()


@pytest.mark.skipif(sys.platform != "linux", reason="reads /proc")
def test_ctrl_c_during_a_z3_check_stops_the_run_with_130_and_caches_only_finished_rules(tmp_path):
    proc = _start(tmp_path, SLOW, "--no-files")
    time.sleep(3.5)                      # 'ok' is done, z3 is inside the first check of 'hard'
    assert proc.poll() is None
    proc.send_signal(signal.SIGINT)
    t0 = time.monotonic()
    out, err = _finish(proc, 5)
    assert proc.returncode == 130, (out, err)
    assert "interrupted" in err and "Traceback" not in err
    assert time.monotonic() - t0 < 3
    assert "summary" not in out           # no verdicts for a run that did not finish
    stored = [p for p in (tmp_path / ".verifier-cache").rglob("*.json") if not p.name.startswith(".")]
    assert len(stored) == 1               # 'ok' only, never 'hard' as an interrupted unknown
    assert not [p for p in (tmp_path / ".verifier-cache").rglob("*") if p.name.endswith(".tmp")]


@pytest.mark.skipif(sys.platform != "linux", reason="reads /proc")
def test_ctrl_c_to_the_parent_of_busy_workers_ends_them_at_once(tmp_path):
    proc = _start(tmp_path, SLOW2, "--no-files", "--no-cache", "--jobs", "2")
    workers = _workers(proc.pid, 2)
    try:
        time.sleep(1.0)
        proc.send_signal(signal.SIGINT)          # the parent only, as `kill -INT` does
        out, err = _finish(proc, 5)
        assert proc.returncode == 130, (out, err)
        assert "interrupted" in err and "internal error" not in err
        t0 = time.monotonic()
        while any(_alive(w) for w in workers) and time.monotonic() - t0 < 3:
            time.sleep(0.05)
        assert not [w for w in workers if _alive(w)]
    finally:
        for w in workers:
            if _alive(w):
                os.kill(w, signal.SIGKILL)


@pytest.mark.skipif(sys.platform != "linux", reason="reads /proc")
def test_workers_exit_when_the_parent_is_killed(tmp_path):
    proc = _start(tmp_path, SLOW2, "--no-files", "--no-cache", "--jobs", "2")
    workers = _workers(proc.pid, 2)
    try:
        time.sleep(1.0)                          # both are solving
        proc.kill()
        proc.wait()
        t0 = time.monotonic()
        while any(_alive(w) for w in workers) and time.monotonic() - t0 < 3:
            time.sleep(0.05)
        assert not [w for w in workers if _alive(w)], "workers outlived their killed parent"
    finally:
        for w in workers:
            if _alive(w):
                os.kill(w, signal.SIGKILL)


def test_every_check_outside_a_session_turns_z3s_ctrl_c_answer_into_an_interrupt():
    """z3 answers SIGINT with unknown 'interrupted from keyboard' (measured); the induction
    step, the concrete checks and the export all check through solve.check, which raises."""
    import pathlib

    import z3

    from verifier.smt import solve

    class Interrupted:
        def check(self, *_):
            return z3.unknown

        def reason_unknown(self):
            return solve.INTERRUPTED
    with pytest.raises(KeyboardInterrupt):
        solve.check(Interrupted())
    smt = pathlib.Path(solve.__file__).parent
    for name in ("induction.py", "concrete.py", "export.py"):
        text = (smt / name).read_text()
        assert not __import__("re").search(r"(?<![\w.])s\.check\(", text), name

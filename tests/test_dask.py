"""--executor dask: the rules' queries, the mutants and the differential sweep's batches run on a
Dask cluster; what the tool prints and writes is that of a serial run (``--jobs 1``).

One LocalCluster of two worker processes serves the module (its start-up costs seconds); the
runs reach it by its address, as a team's own scheduler would be reached (``--scheduler``)."""

from __future__ import annotations

import contextlib
import io
import json
import os
import shutil
import signal
from pathlib import Path

import pytest

from verifier.api import CheckOptions, check_packs
from verifier.cli import main
from verifier.errors import TaskLost, UsageError
from verifier.run import executor as executor_mod
from verifier.run.cache import Cache
from verifier.run.executor import ExecutorSpec, local_cluster_options, open_executor, resolve_executor
from verifier.run.loader import load_pack
from verifier.run.parallel import SharedPool, solve_in_order
from verifier.trust.differential import run_differential
from verifier.trust.mutate import run_mutants

ROOT = Path(__file__).resolve().parent.parent
PACKS = [str(ROOT / "rules" / "position-report.toml"), str(ROOT / "rules" / "relocation.toml"),
         str(ROOT / "rules" / "demo" / "kestrel-quay.toml")]     # the demo pack writes files


@pytest.fixture(scope="module")
def cluster():
    distributed = pytest.importorskip("distributed")
    c = distributed.LocalCluster(**local_cluster_options(2))
    client = distributed.Client(c, set_as_default=False)
    try:
        yield c.scheduler_address, client
    finally:
        client.close()
        c.close()


def _files(root: Path) -> dict:
    return {p.relative_to(root).as_posix(): p.read_bytes() for p in sorted(root.rglob("*")) if p.is_file()}


def _run(argv, where: Path) -> tuple[int, str, dict]:
    """``verifier ARGV`` in the folder ``where`` (its files go to ``where/counterexamples``, a
    name that the JSON repeats): exit code, stdout, the files written."""
    out, here = io.StringIO(), os.getcwd()
    os.chdir(where)
    try:
        with contextlib.redirect_stdout(out):
            code = main([*argv, "--out", "counterexamples"])
    finally:
        os.chdir(here)
    return code, out.getvalue(), _files(where / "counterexamples")


def _timeless(text: str) -> dict:
    """The JSON of a check less its one measured field, each rule's ``seconds`` (which two
    serial runs do not share either)."""
    doc = json.loads(text)
    for p in doc["packs"]:
        for r in p["rules"] + p["lemmas"]:
            r.pop("seconds")
    return doc


@pytest.fixture(scope="module")
def serial(tmp_path_factory):
    """``verifier check --jobs 1`` on the packs: (exit code, JSON text, files written)."""
    return _run(["check", *PACKS, "--json", "--jobs", "1", "--no-cache"],
                tmp_path_factory.mktemp("serial"))


def test_check_on_a_cluster_prints_and_writes_what_jobs_1_does(cluster, serial, tmp_path):
    address, _ = cluster
    code, text, files = _run(["check", *PACKS, "--json", "--executor", "dask", "--scheduler",
                              address, "--no-cache"], tmp_path)
    assert code == serial[0] == 1                   # the demo pack has violated rules
    assert _timeless(text) == _timeless(serial[1])
    assert files == serial[2]
    assert any(n.endswith(".json") for n in files) and any(n.endswith(".svg") for n in files)


# the shipped packs that PACKS leaves out: with the plain suite's comparison, every shipped pack
OTHER_PACKS = [str(ROOT / "rules" / "confidence-interval.toml"), str(ROOT / "rules" / "fixed-scale.toml"),
               str(ROOT / "rules" / "demo" / "marrow-vale-approach.toml"),
               str(ROOT / "rules" / "demo" / "marrow-vale-route.toml")]
# Left out of the cluster comparisons for their cost alone: a task is a rule's SMT-LIB text
# whatever the pack, and the route demo above sends route tasks (route.toml: 45 s a check).
LEFT_OUT = [str(ROOT / "rules" / "route.toml")]


def test_packs_and_other_packs_are_every_shipped_pack():
    shipped = {str(p) for p in (ROOT / "rules").rglob("*.toml")}
    assert shipped == set(PACKS) | set(OTHER_PACKS) | set(LEFT_OUT)
    assert not set(PACKS) & set(OTHER_PACKS) and not (set(PACKS) | set(OTHER_PACKS)) & set(LEFT_OUT)


@pytest.mark.thorough
def test_check_of_every_shipped_pack_on_a_cluster_is_that_of_jobs_1(cluster, tmp_path):
    # the packs of the plain suite's comparison (PACKS) are not checked again here
    address, _ = cluster
    (tmp_path / "a").mkdir()
    (tmp_path / "b").mkdir()
    code1, text1, files1 = _run(["check", *OTHER_PACKS, "--json", "--jobs", "1", "--no-cache"],
                                tmp_path / "a")
    code2, text2, files2 = _run(["check", *OTHER_PACKS, "--json", "--executor", "dask", "--scheduler",
                                 address, "--no-cache"], tmp_path / "b")
    assert code1 == code2
    assert _timeless(text1) == _timeless(text2)
    assert files1 == files2


def test_a_worker_killed_mid_run_changes_no_verdict(cluster, serial):
    """When the first rule's result is in (every other rule's query is then queued or running
    on the two workers), one worker process is killed (SIGKILL): the scheduler runs its tasks
    again on the other worker (and on the one its nanny restarts), and every verdict is the
    serial one."""
    address, client = cluster
    pids = client.run(os.getpid)                    # worker address -> its process id
    victim = sorted(pids.values())[0]
    killed = []

    def progress(n, total, pack, rule, res):
        if res is not None and rule.role == "rule" and not killed:
            os.kill(victim, signal.SIGKILL)
            killed.append(n)

    packs = [load_pack(PACKS[0])]                   # lemmas, then rules: two phases
    results = check_packs(packs, CheckOptions(out=None, jobs=2, executor="dask", scheduler=address),
                          progress)
    expected = {(p["name"], r["id"]): r["verdict"] for p in json.loads(serial[1])["packs"]
                for r in p["rules"] + p["lemmas"]}
    got = {(p.name, r.rule): r.verdict for p in results for r in p.results}
    assert killed
    assert got == {k: v for k, v in expected.items() if k[0] in {p.name for p in packs}}
    with pytest.raises(ProcessLookupError):
        os.kill(victim, 0)                          # it was killed indeed


def test_a_lost_query_is_unknown_and_not_cached(tmp_path):
    """A query whose worker is lost for good (TaskLost from the executor) is unknown with the
    reason said, never holds, and the cache keeps nothing for it."""
    class Lost:
        spec = ExecutorSpec("dask", 2)

        def submit(self, fn, *args):
            return None

        def outcome(self, future):
            raise TaskLost("the Dask worker running it was lost (KilledWorker: test)")

        def cancel(self, futures):
            pass

        def stop(self):
            pass

    class Pool:
        spec = Lost.spec

        def get(self):
            return Lost()

    pack = load_pack(ROOT / "rules" / "relocation.toml")
    cache = Cache(tmp_path / "cache")
    todo = [(pack, r) for r in pack.rules[:2]]
    got = list(solve_in_order(todo, jobs=2, pool=Pool(), cache=cache))
    assert [g.solved.verdict for g in got] == ["unknown", "unknown"]
    assert "worker running it was lost" in got[0].solved.reason
    assert not list((tmp_path / "cache").rglob("*.json"))


def test_a_task_that_kills_every_worker_is_lost_not_answered(tmp_path):
    """Dask's side of the above: a task whose worker dies more often than the scheduler allows
    (allowed-failures 0 here: the first death) comes back as TaskLost."""
    dask = pytest.importorskip("dask")
    distributed = pytest.importorskip("distributed")
    with dask.config.set({"distributed.scheduler.allowed-failures": 0}):
        c = distributed.LocalCluster(**local_cluster_options(1))
    try:
        with open_executor(ExecutorSpec("dask", 1, c.scheduler_address)) as ex:
            f = ex.submit(os._exit, 1)
            with pytest.raises(TaskLost, match="lost"):
                ex.outcome(f)
    finally:
        c.close()


def test_a_pack_edit_invalidates_exactly_as_locally(cluster, tmp_path):
    """Check a copy of a pack on the cluster with a cache; edit one rule's expect (same meaning,
    other text); check again: exactly that rule is solved again, as in a local run."""
    address, _ = cluster
    src = ROOT / "rules" / "demo" / "kestrel-quay.toml"
    pack_file = tmp_path / "kestrel-quay.toml"
    shutil.copy(src, pack_file)
    first = load_pack(pack_file)
    edited_rule = first.rules[0]
    dask_opts = CheckOptions(out=None, jobs=2, executor="dask", scheduler=address,
                             cache=Cache(tmp_path / "cache-dask"))
    check_packs([first], dask_opts)
    shutil.copytree(tmp_path / "cache-dask", tmp_path / "cache-local")
    _edit_first_expect(pack_file)
    edited = load_pack(pack_file)
    on_dask = check_packs([edited], attrs_evolve(dask_opts, cache=Cache(tmp_path / "cache-dask")))
    local = check_packs([edited], CheckOptions(out=None, jobs=1, cache=Cache(tmp_path / "cache-local")))
    solved_again = [r.rule for r in on_dask[0].results if not r.cached]
    assert solved_again == [edited_rule.id]
    assert [(r.rule, r.cached, r.verdict) for r in on_dask[0].results] == \
        [(r.rule, r.cached, r.verdict) for r in local[0].results]


def attrs_evolve(opts, **kw):
    import attrs
    return attrs.evolve(opts, **kw)


def _edit_first_expect(path: Path) -> None:
    """Wrap the first rule's expect in parentheses: the same meaning, another text (so another
    obligation key for that rule alone)."""
    lines = path.read_text(encoding="utf-8").splitlines(keepends=True)
    seen_rule = False
    for i, line in enumerate(lines):
        if line.strip() == "[[rule]]":
            seen_rule = True
        if seen_rule and line.startswith("expect = \"") and line.rstrip().endswith("\""):
            body = line.rstrip()[len('expect = "'):-1]
            lines[i] = f'expect = "({body})"\n'
            break
    else:
        raise AssertionError("no one-line expect found to edit")
    path.write_text("".join(lines), encoding="utf-8")


def test_mutate_on_a_cluster_reports_what_jobs_1_does(cluster):
    """The first 10 mutants of the test pack, serially and as tasks on the cluster (the pack
    travels as text with its hash; each mutant is a task)."""
    address, _ = cluster
    pack = load_pack(ROOT / "tests" / "packs" / "diff-mutants.toml")
    serial = run_mutants(pack, timeout=20, limit=10)
    with open_executor(ExecutorSpec("dask", 2, address)) as ex:
        on_dask = run_mutants(pack, timeout=20, limit=10, executor=ex)
    # the statuses are the serial ones; which rule is named as the killer may differ (a serial
    # run asks first the rules that killed most so far), so it is left out
    assert [(r.mutant, r.status) for r in serial.results] == [(r.mutant, r.status) for r in on_dask.results]
    assert serial.counts() == on_dask.counts() and serial.ratio() == on_dask.ratio()
    assert on_dask.counts()["killed"] > 0


def test_differential_sweep_on_a_cluster_reports_what_local_workers_do(cluster):
    """The report depends on the number of batches (each has its own seed), never on where
    they ran: one batch on the cluster is one batch in a local worker process, two are two.
    (A batch run inside this pytest process is not compared: here Hypothesis generated other
    worlds from the same seed, as measured; a worker process is a fresh interpreter.)"""
    address, _ = cluster
    paths = [str(ROOT / "tests" / "packs" / "diff-basic.toml")]
    spec, local = ExecutorSpec("dask", 2, address), ExecutorSpec("local", 2)

    def plain(rep):
        doc = rep.as_json()
        doc.pop("seconds")
        return doc
    one_local = run_differential(paths, 30, seed=7, workers=1, executor=local)
    one_dask = run_differential(paths, 30, seed=7, workers=1, executor=spec)
    two_local = run_differential(paths, 30, seed=7, workers=2, executor=local)
    two_dask = run_differential(paths, 30, seed=7, workers=2, executor=spec)
    assert plain(one_local) == plain(one_dask)
    assert plain(two_local) == plain(two_dask)
    assert one_dask.worlds == two_dask.worlds == 30 and not two_dask.failures


def test_a_scheduler_that_is_not_there_is_a_usage_error(capsys, monkeypatch):
    pytest.importorskip("distributed")
    monkeypatch.setattr(executor_mod, "CONNECT_SECONDS", 1)
    code = main(["check", PACKS[1], "--executor", "dask", "--scheduler", "tcp://127.0.0.1:9",
                 "--no-cache", "--no-files"])
    err = capsys.readouterr().err
    assert code == 2
    assert "cannot reach the Dask scheduler at 'tcp://127.0.0.1:9'" in err
    assert "Traceback" not in err


def test_the_scheduler_comes_from_the_environment(monkeypatch):
    pytest.importorskip("distributed")
    monkeypatch.setenv(executor_mod.SCHEDULER_ENV, "tcp://10.0.0.7:8786")
    assert resolve_executor("dask", 2, None) == ExecutorSpec("dask", 2, "tcp://10.0.0.7:8786")
    assert resolve_executor("dask", 2, "tcp://h:1").scheduler == "tcp://h:1"     # the option wins
    assert resolve_executor("local", 3, None) == ExecutorSpec("local", 3, None)


def test_a_missing_extra_is_a_usage_error_that_says_how_to_install(monkeypatch, capsys):
    import importlib.util
    real = importlib.util.find_spec
    monkeypatch.setattr(importlib.util, "find_spec",
                        lambda name, *a: None if name == "distributed" else real(name, *a))
    with pytest.raises(UsageError, match=r"pip install 'verifier\[dask\]'"):
        resolve_executor("dask", 2, None)
    assert main(["mutate", PACKS[1], "--executor", "dask"]) == 2
    assert "pip install" in capsys.readouterr().err


def test_scheduler_without_dask_is_a_usage_error():
    with pytest.raises(UsageError, match="--scheduler is for --executor dask"):
        resolve_executor("local", 1, "tcp://h:8786")


def test_the_default_path_never_imports_dask(tmp_path):
    """``import verifier``, the command line and a local check of a one-rule pack leave Dask
    unloaded (it is imported only when an executor of kind dask is opened)."""
    import subprocess
    import sys
    code = ("import sys, verifier\n"
            "from verifier.cli import main\n"
            "from verifier.run.loader import load_pack\n"
            "from verifier.api import CheckOptions, check_packs\n"
            f"pack = load_pack({PACKS[1]!r})\n"
            "check_packs([pack], CheckOptions(out=None, jobs=1, legs=1, rules=(pack.rules[0].id,)))\n"
            "assert not [m for m in sys.modules if m.split('.')[0] in ('dask', 'distributed')]\n")
    subprocess.run([sys.executable, "-c", code], check=True, cwd=tmp_path)


def test_shared_pool_takes_a_number_of_local_workers_as_before():
    assert SharedPool(3).spec == ExecutorSpec("local", 3)


def test_ctrl_c_cancels_the_runs_tasks_on_the_cluster(cluster):
    """An interrupt leaving the executor cancels every task it submitted: the scheduler forgets
    them (the queued ones never run) while the cluster itself stays up for others."""
    import time
    address, client = cluster
    with pytest.raises(KeyboardInterrupt):
        with open_executor(ExecutorSpec("dask", 2, address)) as ex:
            for i in range(6):
                ex.submit(time.sleep, 1 + i * 0.001)
            raise KeyboardInterrupt
    left = None
    for _ in range(100):          # the cancellation reaches the scheduler asynchronously
        left = client.run_on_scheduler(lambda dask_scheduler: len(dask_scheduler.tasks))
        if left == 0:
            break
        time.sleep(0.1)
    assert left == 0
    assert len(client.scheduler_info()["workers"]) == 2


def test_verifier_test_on_a_cluster_reports_what_a_local_run_does(cluster, capsys):
    """`verifier test`: the rules' witnesses are solved on the cluster, the implementation runs
    here; the report is the local one (but for its measured seconds)."""
    address, _ = cluster
    argv = ["test", PACKS[0], "--impl", "kestrel_onboard:report", "--path", str(ROOT / "examples"),
            "--rule", "seen-from-reading-order", "--max-examples", "20", "--no-files",
            "--no-cache", "--json"]
    docs = []
    for extra in ([], ["--executor", "dask", "--scheduler", address]):
        assert main(argv + extra) == 0
        doc = json.loads(capsys.readouterr().out)
        for rep in doc["implementations"]:
            rep.pop("seconds", None)
        docs.append(doc)
    assert docs[0] == docs[1]
    assert docs[0]["implementations"][0]["rules"][0]["worlds"] > 0


def test_without_a_scheduler_a_local_cluster_is_started_quietly_and_closed(tmp_path, capfd):
    """``--executor dask`` alone starts a LocalCluster for the run: the JSON is that of a
    serial run, nothing of Dask's reaches stderr, and no worker process is left behind."""
    import multiprocessing
    pytest.importorskip("distributed")
    argv = ["check", PACKS[1], "--rule", "relocation-resets-the-doubts", "--json", "--no-cache",
            "--no-files"]
    assert main(argv + ["--jobs", "1"]) == 0
    serial_out = capfd.readouterr().out
    before = {p.pid for p in multiprocessing.active_children()}
    assert main(argv + ["--executor", "dask", "--jobs", "1"]) == 0
    got = capfd.readouterr()
    assert _timeless(got.out) == _timeless(serial_out)
    assert got.err == ""
    assert {p.pid for p in multiprocessing.active_children()} <= before

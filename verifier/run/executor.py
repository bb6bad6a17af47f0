"""Where independent work runs: worker processes on this machine, or a Dask cluster.

One seam for every fan-out of the tool (the rules of a check, the mutants of ``mutate``, the
world batches of the differential sweep, the solver's worlds of ``verifier test``): an
executor takes a top-level function of the installed package and plain arguments (SMT-LIB
text, a pack's text with its hash, numbers), and hands back futures; :meth:`outcome` gives a
future's result or raises :class:`TaskLost` when it cannot be had. The caller keeps the
cache, writes every file and reads the results in its own order, so what the tool prints and
writes does not depend on the executor.

- ``local`` (the default): a pool of ``--jobs`` worker processes (``spawn``), as ever.
- ``dask``: ``dask.distributed`` (the optional extra ``verifier[dask]``), on the scheduler at
  ``--scheduler`` / ``$VERIFIER_DASK_SCHEDULER``, or else on a ``LocalCluster`` of ``--jobs``
  worker processes started for the run and closed after it. A worker lost in the middle of a
  task: Dask runs the task again elsewhere; one that still has no result is :class:`TaskLost`,
  which each caller turns into ``unknown`` (never ``holds``).

Dask is imported here only, inside the functions that need it: ``import verifier`` and the
default path never load it.
"""

from __future__ import annotations

import multiprocessing
import os
import signal
import sys
import threading
import time
from concurrent.futures import ProcessPoolExecutor
from concurrent.futures.process import BrokenProcessPool

import attrs

from verifier.errors import TaskLost, UsageError

EXECUTORS = ("local", "dask")
SCHEDULER_ENV = "VERIFIER_DASK_SCHEDULER"
CONNECT_SECONDS = 5          # how long to wait for a scheduler before saying it is not there
RETRIES = 2                  # Dask's own retries of a task that raised (a worker lost is retried
                             # by the scheduler itself, up to its allowed-failures)
INSTALL_HINT = "pip install 'verifier[dask]' (or, in a checkout, pip install -e '.[dask]')"


@attrs.frozen
class ExecutorSpec:
    """Which executor a run uses: ``kind`` (``local`` or ``dask``), ``jobs`` (local worker
    processes, or the workers of a LocalCluster) and ``scheduler`` (a Dask scheduler's address,
    or None)."""

    kind: str = "local"
    jobs: int = 1
    scheduler: str | None = None

    @property
    def parallel(self) -> bool:
        """Whether work goes to an executor at all (a local run of one job solves in-process)."""
        return self.kind == "dask" or self.jobs > 1

    @property
    def remote(self) -> bool:
        """Whether even a single task goes to the executor (on a cluster, not on this machine)."""
        return self.kind == "dask"


def resolve_executor(kind: str | None, jobs: int, scheduler: str | None) -> ExecutorSpec:
    """``--executor``, ``--jobs`` and ``--scheduler`` (or ``$VERIFIER_DASK_SCHEDULER``) as a
    spec; a usage error when they do not go together."""
    kind = kind or "local"
    if kind not in EXECUTORS:
        raise UsageError(f"--executor must be one of {', '.join(EXECUTORS)}, not {kind!r}")
    if kind == "local":
        if scheduler:
            raise UsageError("--scheduler is for --executor dask (the local executor uses --jobs "
                             "worker processes on this machine)")
        return ExecutorSpec("local", jobs, None)
    import importlib.util
    if importlib.util.find_spec("distributed") is None:     # say so before any work
        raise UsageError(f"--executor dask needs Dask's distributed scheduler: {INSTALL_HINT}")
    if not scheduler:
        scheduler = os.environ.get(SCHEDULER_ENV, "").strip() or None
    return ExecutorSpec("dask", jobs, scheduler)


def open_executor(spec: ExecutorSpec):
    """An executor for ``spec``, to be used as a context manager (it ends its workers, or its
    LocalCluster, on leaving; at once, cancelling what is queued, if an exception is leaving)."""
    if spec.kind == "dask":
        return DaskExecutor(spec)
    return ProcessExecutor(spec.jobs)


class Executor:
    """What every kind of executor offers (callers never ask which kind they have):
    ``submit(fn, *args)`` a future; ``outcome(future)`` its result, or :class:`TaskLost`;
    ``cancel(futures)``; ``stop()`` now, cancelling what is queued; ``close()`` after the
    work. As a context manager it closes on leaving, or stops if an exception is leaving."""

    def __enter__(self):
        return self

    def __exit__(self, kind, exc, tb):
        if kind is None:
            self.close()
        else:
            self.stop()
        return False


# ---- local worker processes -------------------------------------------------------------------

def worker_init(parent: int) -> None:
    """Each local worker: exit when the parent process dies, and leave Ctrl-C to the parent.

    Without this a worker whose parent was killed (SIGKILL, an OOM kill) goes on solving its
    query to the end, and longer if its next one was queued. On Linux the kernel sends the
    worker SIGKILL when its parent dies (prctl PR_SET_PDEATHSIG); everywhere, a daemon thread
    also watches ``os.getppid()`` (z3 releases the GIL while it solves, so the thread runs).
    SIGINT is ignored: the parent stops the workers itself (:meth:`ProcessExecutor.stop`), so a
    Ctrl-C that reaches the whole process group never kills an idle worker, which would read
    as a lost worker instead of an interrupt."""
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    if sys.platform.startswith("linux"):
        try:
            import ctypes
            libc = ctypes.CDLL(None, use_errno=True)
            libc.prctl(1, signal.SIGKILL, 0, 0, 0)     # PR_SET_PDEATHSIG = 1
        except (OSError, AttributeError):              # pragma: no cover - no prctl
            pass
    if os.getppid() != parent:     # the parent died before the line above
        os._exit(1)

    def watch():
        while os.getppid() == parent:
            time.sleep(0.5)
        os._exit(1)
    threading.Thread(target=watch, name="verifier-parent-watch", daemon=True).start()


class ProcessExecutor(Executor):
    """``jobs`` worker processes on this machine (``spawn``: no z3 state inherited)."""

    kind = "local"

    def __init__(self, jobs: int):
        ctx = multiprocessing.get_context("spawn")
        self.jobs = jobs
        self.pool = ProcessPoolExecutor(max_workers=jobs, mp_context=ctx, initializer=worker_init,
                                        initargs=(os.getpid(),))

    def submit(self, fn, *args):
        return self.pool.submit(fn, *args)

    def outcome(self, future):
        """The task's result; :class:`TaskLost` when a worker process died (the whole pool is
        broken then: every task still pending is lost with it)."""
        try:
            return future.result()
        except BrokenProcessPool as exc:
            raise TaskLost(f"a worker process died: {exc}") from None

    def cancel(self, futures) -> None:
        for f in futures:
            f.cancel()

    def stop(self) -> None:
        """Stop now: cancel what is queued and end the workers, which may be in the middle of a
        long z3 check (``shutdown`` alone would wait for it)."""
        procs = list((getattr(self.pool, "_processes", None) or {}).values())   # shutdown forgets them
        self.pool.shutdown(wait=False, cancel_futures=True)
        for proc in procs:
            try:
                proc.terminate()
            except (OSError, AttributeError):   # pragma: no cover - already gone
                pass

    def close(self) -> None:
        self.pool.shutdown(wait=True)


# ---- Dask ---------------------------------------------------------------------------------------

def _distributed():
    """The ``distributed`` module, or a usage error that says how to install it."""
    try:
        import distributed
    except ImportError:
        raise UsageError(f"--executor dask needs Dask's distributed scheduler: {INSTALL_HINT}") from None
    return distributed


def _quiet() -> None:
    """Dask's own log lines (a worker restarted, a connection closed) stay off the terminal:
    what the run found is said by the tool, and ``--json`` output stays one JSON object."""
    import logging
    for name in ("distributed", "dask", "tornado", "bokeh"):
        logging.getLogger(name).setLevel(logging.CRITICAL)


class Interrupted(Exception):
    """A task that z3 stopped on a Ctrl-C in its worker (see :func:`run_task`)."""


def run_task(fn, *args):
    """What a Dask worker runs: ``fn(*args)``. z3 takes SIGINT for itself while it solves,
    even where the process ignores it, and the solver turns it into KeyboardInterrupt
    (``verifier.smt.solve.raise_if_interrupted``); in a Dask worker that would end the worker
    process with a traceback on the terminal. It is an ordinary failure of the task here: the
    client, interrupted by the same Ctrl-C, is cancelling the run anyway."""
    try:
        return fn(*args)
    except KeyboardInterrupt:
        raise Interrupted("stopped by an interrupt in the worker") from None


def _interrupts_to_the_client(distributed):
    """A worker plugin for the LocalCluster this run starts: its worker processes ignore SIGINT,
    as the local pool's do (:func:`worker_init`). A Ctrl-C at the terminal reaches the whole
    process group; the client then cancels the tasks and closes the cluster itself, instead of
    every worker dying with a traceback and its nanny starting it again. (Defined here, it
    travels to the workers by value; a team's own cluster is left as it is.)"""
    class IgnoreInterrupts(distributed.WorkerPlugin):
        def setup(self, worker):
            signal.signal(signal.SIGINT, signal.SIG_IGN)
    return IgnoreInterrupts()


def local_cluster_options(workers: int) -> dict:
    """A LocalCluster of ``workers`` single-threaded worker processes on this machine, with no
    dashboard; its scheduler's small HTTP server (health, metrics) on a free port of localhost
    only, not on 8787 of every interface."""
    import logging
    return dict(n_workers=workers, threads_per_worker=1, processes=True, host="127.0.0.1",
                dashboard_address=None, scheduler_kwargs={"dashboard_address": "127.0.0.1:0"},
                silence_logs=logging.CRITICAL)


class DaskExecutor(Executor):
    """Tasks on a Dask cluster: the scheduler at ``spec.scheduler``, or a LocalCluster of
    ``spec.jobs`` worker processes (one thread each, no dashboard) started here."""

    kind = "dask"

    def __init__(self, spec: ExecutorSpec):
        distributed = _distributed()
        _quiet()
        self.cluster = None
        self.futures: set = set()      # submitted and not yet read: what stop() cancels
        self.lost = (distributed.KilledWorker, distributed.comm.CommClosedError)
        try:
            if spec.scheduler:
                try:
                    self.client = distributed.Client(spec.scheduler, timeout=f"{CONNECT_SECONDS}s",
                                                     set_as_default=False)
                except (OSError, TimeoutError, ValueError, TypeError) as exc:
                    raise UsageError(f"cannot reach the Dask scheduler at {spec.scheduler!r} within "
                                     f"{CONNECT_SECONDS} s ({type(exc).__name__}: {exc}); start one "
                                     "with 'dask scheduler' and give its address, e.g. "
                                     "tcp://HOST:8786") from None
            else:
                self.cluster = distributed.LocalCluster(**local_cluster_options(spec.jobs))
                self.client = distributed.Client(self.cluster, set_as_default=False)
                self.client.register_plugin(_interrupts_to_the_client(distributed), name="verifier-sigint")
        except BaseException:
            self._close_cluster()
            raise
        self.jobs = spec.jobs

    def submit(self, fn, *args):
        f = self.client.submit(run_task, fn, *args, pure=False, retries=RETRIES)
        self.futures.add(f)
        return f

    def outcome(self, future):
        """The task's result; :class:`TaskLost` when the cluster could not give it (its workers
        were lost as often as the scheduler allows, or the connection to it went away)."""
        import concurrent.futures
        try:
            result = future.result()
        except self.lost as exc:
            raise TaskLost(f"the Dask worker running it was lost ({type(exc).__name__}: {exc})") from None
        except (concurrent.futures.CancelledError, OSError) as exc:
            raise TaskLost(f"the Dask cluster did not return it ({type(exc).__name__}: {exc})") from None
        self.futures.discard(future)   # read: the cluster may release its result now
        return result

    def cancel(self, futures) -> None:
        futures = list(futures)
        if futures:
            try:
                self.client.cancel(futures)
            except Exception:   # noqa: BLE001 - the cluster may be gone already
                pass

    def stop(self) -> None:
        """Cancel every future of this run on the cluster, then close."""
        self.cancel(self.futures)
        self.close()

    def close(self) -> None:
        try:
            self.client.close()
        except Exception:   # noqa: BLE001 - closing a client whose scheduler went away
            pass
        self._close_cluster()

    def _close_cluster(self) -> None:
        if self.cluster is not None:
            try:
                self.cluster.close()
            except Exception:   # noqa: BLE001
                pass
            self.cluster = None

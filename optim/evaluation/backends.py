"""Parallel backends: score one population's candidates on threads, worker processes or a Dask cluster.

Every backend takes the candidates of one population and returns one
``(score, kind, message)`` per candidate, in candidate order, as
:func:`optim.evaluation.evaluator.score_candidates` does in-process; the
:class:`~optim.evaluation.evaluator.Evaluator` picks the backend (:func:`backend_kind`).

- :class:`ThreadBackend`: joblib threads, for objectives that wait on other
  programs (``Problem.parallel == "threads"``).
- :class:`ProcessBackend`: worker processes of loky, joblib's process
  executor, for Python objectives that hold the GIL, and for every
  per-candidate objective under a timeout (a process can be killed, a thread
  cannot).
- :class:`DaskBackend`: the workers of a Dask cluster, through a
  ``distributed.Client``.

The two process backends share one scheduling loop that places results back
by index, stops evaluations that exceed the timeout (killing the worker
processes running them and handing the other unfinished candidates out
again) and survives workers that die: the candidates of a broken batch are
evaluated again one by one, those that break a worker even when evaluated
alone are charged with a ``crash``. The objective is shipped to each worker
once per run (pickled by value when it comes from a user's ``file.py``), not
once per candidate.
"""

from __future__ import annotations

import contextlib
import logging
import math
import os
import pickle
import re
import sys
import time
import uuid
from collections import deque
from dataclasses import dataclass
from typing import Optional

import numpy as np

from optim.errors import OptimError
from optim.evaluation.evaluator import score_candidates
from optim.problem import Problem

__all__ = [
    "WorkerError",
    "ClusterUnavailable",
    "ThreadBackend",
    "ProcessBackend",
    "DaskBackend",
    "backend_kind",
    "make_backend",
    "ship_problem",
    "worker_status",
    "USER_MODULE_PREFIX",
]

#: Modules made by :mod:`optim.objectives.loader` from a user's ``file.py`` have names that
#: start with this; no other process can import them, so they travel by value.
USER_MODULE_PREFIX = "_optim_user_objective_"

#: Seconds to wait for a Dask scheduler to answer, for a worker to (re)start.
CONNECT_TIMEOUT = 20.0
WORKER_WAIT = 60.0

_CRASH = "the worker process died while evaluating this candidate (evaluated again alone, it died again){}"
_TIMEOUT = "the evaluation did not finish within search.timeout = {:g} s; its worker process was stopped"
_LOST = (
    "lost the connection to the Dask scheduler at {}; start it again (dask scheduler) and resume the run "
    "from its checkpoint"
)


class WorkerError(OptimError):
    """The workers cannot evaluate the objective (it cannot be shipped, they cannot start, the cluster is gone)."""


class ClusterUnavailable(WorkerError):
    """The Dask scheduler cannot be reached, was lost during the run, or has no workers."""


class _ObjectiveUnavailable(RuntimeError):
    """Raised in a worker whose copy of the objective could not be unpickled."""


# -- the worker side ------------------------------------------------------------------------------
_INSTALLED: dict = {}
_INSTALL_ERRORS: dict = {}
_INSTALLS = 0


def _timeout_errors() -> tuple:
    """What waiting too long raises: one class from Python 3.11 on, three before."""
    import asyncio
    import concurrent.futures

    return (TimeoutError, asyncio.TimeoutError, concurrent.futures.TimeoutError)


def _first_line(exc: BaseException) -> str:
    text = f"{type(exc).__name__}: {exc}".strip()
    return text.splitlines()[0] if text else type(exc).__name__


def _install(token: str, payload: bytes) -> None:
    """Unpickle the objective shipped for run ``token`` into this worker (once per worker and run)."""
    global _INSTALLS
    _INSTALLS += 1
    try:
        _INSTALLED[token] = pickle.loads(payload)
    except Exception as exc:  # reported by every task that needs it, as a WorkerError in the main process
        _INSTALL_ERRORS[token] = _first_line(exc)


def _uninstall(token: str) -> None:
    _INSTALLED.pop(token, None)
    _INSTALL_ERRORS.pop(token, None)


def _score_rows(token: str, X: np.ndarray) -> list:
    """The task a worker runs: score candidates with the objective installed for ``token``."""
    problem = _INSTALLED.get(token)
    if problem is None:
        raise _ObjectiveUnavailable(_INSTALL_ERRORS.get(token, "the objective was never installed on this worker"))
    return score_candidates(problem, X)


def _ready(delay: float) -> int:
    time.sleep(delay)
    return os.getpid()


async def _end_worker_process() -> None:
    """Run in a Dask worker's event loop (so even while its task thread hangs): end the process now."""
    os._exit(1)


def worker_status() -> dict:
    """What this worker process holds: its pid, how many objectives it has unpickled, the runs installed."""
    return {"pid": os.getpid(), "installs": _INSTALLS, "objectives": sorted(_INSTALLED)}


def ship_problem(problem: Problem) -> bytes:
    """The objective pickled for workers, user-file modules by value (cloudpickle), everything else by reference.

    Raises
    ------
    WorkerError
        When the objective cannot be pickled (e.g. it holds an open file or a lock).
    """
    try:
        import cloudpickle  # a dependency of joblib since 1.5
    except ImportError:
        from joblib.externals import cloudpickle  # vendored by older joblib

    modules = [m for name, m in list(sys.modules.items()) if name.startswith(USER_MODULE_PREFIX) and m is not None]
    for module in modules:
        cloudpickle.register_pickle_by_value(module)
    try:
        return cloudpickle.dumps(problem)
    except Exception as exc:
        raise WorkerError(
            f"the objective {problem.name!r} cannot be sent to worker processes "
            f"({_first_line(exc)}); run it with search.jobs: 1 and no search.timeout, "
            f"or make it picklable"
        ) from None
    finally:
        for module in modules:
            cloudpickle.unregister_pickle_by_value(module)


# -- the scheduling loop shared by the process and Dask backends ----------------------------------
@dataclass
class _Task:
    """Candidates (row indices) evaluated by one worker call; a ``solo`` task runs with nothing beside it."""

    rows: np.ndarray
    solo: bool = False

    def suspects(self) -> list:
        """What to try after this task's worker died: its candidates one per task, then each of those alone."""
        if self.rows.size > 1:
            return [_Task(self.rows[i : i + 1]) for i in range(self.rows.size)]
        return [_Task(self.rows, solo=True)]


def _run_tasks(pool, X: np.ndarray, timeout: Optional[float]) -> list:
    """Score ``X`` on ``pool``; outcomes in candidate order whatever the completion order.

    At most ``pool.capacity()`` tasks are out at once, so each starts as soon as
    it is handed out and its clock (``timeout``) starts then. Without a timeout
    the candidates go out in chunks; with one, one candidate per task.
    """
    count = X.shape[0]
    outcomes: list = [None] * count
    size = 1 if timeout is not None else max(1, math.ceil(count / (4 * pool.capacity())))
    queue = deque(_Task(np.arange(start, min(start + size, count))) for start in range(0, count, size))
    running: dict = {}
    try:
        while queue or running:
            capacity = pool.capacity()
            while queue and len(running) < capacity and not any(t.solo for t, _ in running.values()):
                if queue[0].solo and running:
                    break
                task = queue.popleft()
                future = pool.submit(X[task.rows])
                running[future] = (task, None if timeout is None else time.monotonic() + timeout)
            if not running:
                continue
            deadlines = [d for _, d in running.values() if d is not None]
            wait = max(0.0, min(deadlines) - time.monotonic()) if deadlines else None
            for future in pool.wait(list(running), wait):
                task, _ = running.pop(future)
                status, value = pool.result(future)
                if status == "ok":
                    for i, outcome in zip(task.rows, value, strict=True):
                        outcomes[i] = tuple(outcome)
                elif task.solo:
                    outcomes[task.rows[0]] = (math.nan, "crash", _CRASH.format(value))
                else:
                    queue.extendleft(reversed(task.suspects()))
            now = time.monotonic()
            expired = [f for f, (_, d) in running.items() if d is not None and d <= now and not f.done()]
            if expired:
                for future in expired:
                    task, _ = running.pop(future)
                    outcomes[task.rows[0]] = (math.nan, "timeout", _TIMEOUT.format(timeout))
                unfinished = list(running)
                queue.extendleft(reversed([running[f][0] for f in unfinished]))
                running.clear()
                pool.kill(expired, unfinished)
    except BaseException:
        pool.reset(list(running))
        raise
    return outcomes


# -- backends -------------------------------------------------------------------------------------
class ThreadBackend:
    """Per-candidate evaluations on ``workers`` joblib threads (for objectives that wait on other programs)."""

    kind = "threads"

    def __init__(self, problem: Problem, workers: int):
        self.problem, self.workers = problem, int(workers)

    def score(self, X: np.ndarray) -> list:
        from joblib import Parallel, delayed

        chunks = np.array_split(np.arange(X.shape[0]), min(X.shape[0], self.workers * 4))
        parts = Parallel(n_jobs=self.workers, backend="threading")(
            delayed(score_candidates)(self.problem, X[c]) for c in chunks
        )
        return [outcome for part in parts for outcome in part]

    def close(self) -> None:
        """Nothing to stop: joblib's threads end with each call."""


def _exit_detail(exc: BaseException) -> str:
    found = re.search(r"exit codes of the workers are \{([^}]*)\}", str(exc))
    return f" (worker exit: {found.group(1)})" if found else ""


class ProcessBackend:
    """Per-candidate evaluations in ``workers`` local worker processes (loky, joblib's process executor).

    The objective is pickled once and unpickled once per worker process (the
    executor's initializer). A worker that dies breaks the executor: a new one
    is started and the candidates that were out are evaluated again, one by
    one. An evaluation that exceeds ``timeout`` seconds is recorded as a
    timeout; the worker processes are then killed (with any program they
    started) and the other unfinished candidates are handed out again.
    """

    kind = "processes"

    def __init__(self, problem: Problem, workers: int = 1, timeout: Optional[float] = None):
        self.workers, self.timeout = max(1, int(workers)), timeout
        self.token = uuid.uuid4().hex
        self._payload = ship_problem(problem)
        self._executor = None
        self._broken = False

    def score(self, X: np.ndarray) -> list:
        return _run_tasks(self, X, self.timeout)

    # the pool interface of _run_tasks
    def capacity(self) -> int:
        return self.workers

    def _start(self) -> None:
        from joblib.externals.loky import ProcessPoolExecutor

        self._executor = ProcessPoolExecutor(
            max_workers=self.workers, initializer=_install, initargs=(self.token, self._payload)
        )
        self._broken = False
        if self.timeout is not None:
            self._warm_up()

    def _warm_up(self) -> None:
        """Wait until every worker process has started and unpickled the objective, so no clock runs during it."""
        from joblib.externals.loky import BrokenProcessPool

        seen = set()
        try:
            for _ in range(50):
                futures = [self._executor.submit(_ready, 0.02) for _ in range(self.workers)]
                seen.update(f.result(timeout=WORKER_WAIT) for f in futures)
                if len(seen) >= self.workers:
                    return
        except (BrokenProcessPool, *_timeout_errors()) as exc:
            self._discard()
            raise WorkerError(f"the worker processes could not start ({_first_line(exc)})") from None

    def _discard(self) -> None:
        executor, self._executor = self._executor, None
        if executor is not None:
            executor.shutdown(wait=True, kill_workers=True)

    def submit(self, rows: np.ndarray):
        from joblib.externals.loky import BrokenProcessPool
        from joblib.externals.loky.process_executor import ShutdownExecutorError

        for _ in range(2):
            if self._broken:
                self._discard()
            if self._executor is None:
                self._start()
            try:
                return self._executor.submit(_score_rows, self.token, rows)
            except (BrokenProcessPool, ShutdownExecutorError):  # broke before its futures told us
                self._broken = True
        raise WorkerError("the worker processes keep dying before they take any work")

    @staticmethod
    def wait(futures, timeout):
        import concurrent.futures

        done, _ = concurrent.futures.wait(futures, timeout=timeout, return_when=concurrent.futures.FIRST_COMPLETED)
        return done

    def result(self, future):
        from joblib.externals.loky import BrokenProcessPool
        from joblib.externals.loky.process_executor import ShutdownExecutorError

        exc = future.exception()
        if exc is None:
            return "ok", future.result()
        if isinstance(exc, (BrokenProcessPool, ShutdownExecutorError)):  # a pool broken by some worker's death
            self._broken = True
            return "crash", _exit_detail(exc)
        if isinstance(exc, _ObjectiveUnavailable):
            raise WorkerError(f"the worker processes cannot load the objective: {exc}")
        raise WorkerError(f"a worker process failed outside the objective: {_first_line(exc)}")

    def kill(self, expired, unfinished) -> None:
        self._discard()

    def reset(self, running) -> None:
        self._discard()

    def close(self) -> None:
        """Kill the worker processes (a later evaluation starts new ones)."""
        self._discard()


def _import_distributed():
    try:
        import distributed
    except ImportError:
        raise WorkerError(
            "running on Dask needs dask and distributed; install them with pip install 'optim[cluster]'"
        ) from None
    return distributed


def _installer(token: str, payload: bytes):
    """A worker plugin that unpickles the objective on every worker, including workers that join or restart later."""
    from distributed.diagnostics.plugin import WorkerPlugin

    class ObjectiveInstaller(WorkerPlugin):
        def __init__(self, token, payload):
            self.token, self.payload = token, payload

        def setup(self, worker):
            from optim.evaluation import backends as workers

            workers._install(self.token, self.payload)

        def teardown(self, worker):
            from optim.evaluation import backends as workers

            workers._uninstall(self.token)

    return ObjectiveInstaller(token, payload)


class DaskBackend:
    """Per-candidate evaluations on a Dask cluster.

    Parameters
    ----------
    problem : Problem
        The objective; optim (and what the objective imports) must be
        installed on the workers.
    address : str or distributed.Client
        A scheduler address (``tcp://host:8786``), ``"local"`` for a new
        ``LocalCluster`` of ``local_workers`` single-threaded worker processes
        that lives until :meth:`close`, or a client used as it is.
    timeout : float or None
        Seconds per evaluation; a worker running a longer one is restarted by
        its nanny.
    local_workers : int
        Workers of the ``"local"`` cluster.

    Notes
    -----
    The objective reaches the workers once per run through a worker plugin,
    which the scheduler also gives to workers that join or restart later; a
    task carries only its candidates. At most one task per worker thread is
    out at a time.
    """

    kind = "dask"

    def __init__(self, problem: Problem, address, timeout: Optional[float] = None, local_workers: int = 2):
        distributed = _import_distributed()
        self.timeout = timeout
        self.token = uuid.uuid4().hex
        payload = ship_problem(problem)
        self._client = self._cluster = None
        self._own_client = False
        self._plugin: Optional[str] = None
        self._capacity = 0
        try:
            if isinstance(address, distributed.Client):
                self._client = address
            elif address == "local":
                self._cluster = self._local_cluster(distributed, int(local_workers))
                self._client, self._own_client = distributed.Client(self._cluster), True
            else:
                try:
                    self._client = distributed.Client(address, timeout=CONNECT_TIMEOUT)
                except (OSError, *_timeout_errors()) as exc:
                    raise ClusterUnavailable(
                        f"cannot reach the Dask scheduler at {address!r} ({_first_line(exc)}); start one with "
                        f"`dask scheduler` and workers with `dask worker ADDRESS`, or use --dask local"
                    ) from None
                self._own_client = True
            self.address = self._client.scheduler.address
            self._plugin = f"optim-objective-{self.token}"
            self._client.register_plugin(_installer(self.token, payload), name=self._plugin)
        except BaseException:
            self.close()
            raise

    @staticmethod
    def _local_cluster(distributed, workers: int):
        import dask

        # a worker that dies fails its task at once (the default retries it on three more workers); no dashboard,
        # and the scheduler's small HTTP server (health, metrics) on a free local port instead of 0.0.0.0:8787
        with dask.config.set({"distributed.scheduler.allowed-failures": 0}):
            return distributed.LocalCluster(
                n_workers=workers,
                threads_per_worker=1,
                processes=True,
                dashboard_address=None,
                scheduler_kwargs={"dashboard_address": "127.0.0.1:0"},
            )

    def score(self, X: np.ndarray) -> list:
        self._capacity = 0
        return _run_tasks(self, X, self.timeout)

    # the pool interface of _run_tasks
    def _lost(self) -> ClusterUnavailable:
        return ClusterUnavailable(_LOST.format(self.address))

    def _check_connected(self) -> None:
        if self._client.status != "running":
            raise self._lost()

    @contextlib.contextmanager
    def _connection(self):
        """Errors of a client that lost its scheduler become :class:`ClusterUnavailable`."""
        try:
            yield
        except WorkerError:
            raise
        except Exception:
            if self._client.status != "running":
                raise self._lost() from None
            raise

    def capacity(self) -> int:
        if self._capacity:
            return self._capacity
        self._check_connected()
        with self._connection():
            try:
                threads = sum(self._client.nthreads().values())
                if threads == 0:
                    self._client.wait_for_workers(1, timeout=WORKER_WAIT)
                    threads = sum(self._client.nthreads().values())
            except _timeout_errors():
                raise ClusterUnavailable(
                    f"the Dask cluster at {self.address} has no workers; start some with `dask worker {self.address}`"
                ) from None
        self._capacity = max(1, threads)
        return self._capacity

    def submit(self, rows: np.ndarray):
        self._check_connected()
        with self._connection():
            return self._client.submit(_score_rows, self.token, rows, pure=False)

    def wait(self, futures, timeout):
        import distributed

        poll = 5.0 if timeout is None else min(max(timeout, 0.01), 5.0)
        with self._connection():  # futures cancelled by a lost connection, a closed comm, ...
            try:
                done, _ = distributed.wait(futures, timeout=poll, return_when="FIRST_COMPLETED")
            except _timeout_errors():
                done = set()
        if not done:
            self._check_connected()
        return done

    def result(self, future):
        from distributed.scheduler import KilledWorker

        if future.status == "finished":
            return "ok", future.result()
        if future.status != "error":
            raise self._lost()
        exc = future.exception()
        if isinstance(exc, KilledWorker):
            self._capacity = 0
            return "crash", ""
        if isinstance(exc, _ObjectiveUnavailable):
            raise WorkerError(f"the Dask workers cannot load the objective: {exc}")
        raise WorkerError(
            f"a Dask worker failed outside the objective: {_first_line(exc)} (is the same version "
            f"of optim installed on the workers?)"
        )

    def kill(self, expired, unfinished) -> None:
        keys = {f.key for f in expired}
        with self._connection():
            victims = [w for w, held in self._client.processing().items() if keys & set(held)]
            self._client.cancel(list(expired) + list(unfinished))
            if victims:
                # A hung evaluation cannot be stopped inside a worker: end the worker process at once (its nanny
                # starts a fresh one); a graceful restart_workers takes seconds longer for the same outcome.
                self._client.run(_end_worker_process, workers=victims, wait=False)
                give_up = time.monotonic() + WORKER_WAIT
                while set(victims) & set(self._client.nthreads()) and time.monotonic() < give_up:
                    time.sleep(0.05)  # until the scheduler has let the old workers go, so no task goes to them
        self._capacity = 0

    def reset(self, running) -> None:
        if self._client is not None and self._client.status == "running" and running:
            with contextlib.suppress(Exception):  # on the way out of an error already being raised
                self._client.cancel(running)

    def close(self) -> None:
        """Remove the objective from the workers; close the client and cluster this backend opened."""
        client, cluster = self._client, self._cluster
        self._client = self._cluster = None
        if client is not None and self._plugin is not None and client.status == "running":
            try:
                client.unregister_worker_plugin(self._plugin)
            except Exception:  # cleanup of a cluster that is going away: nothing more to do
                pass
        if client is not None and self._own_client:
            # a lost client's reconnection attempts are cancelled here: no traceback for an error already reported
            loggers = [logging.getLogger(n) for n in ("distributed", "distributed.client", "distributed.utils")]
            levels = [logger.level for logger in loggers]
            if client.status != "running":
                for logger in loggers:
                    logger.setLevel(logging.CRITICAL + 1)
            try:
                client.close(timeout=CONNECT_TIMEOUT)
            finally:
                for logger, level in zip(loggers, levels, strict=True):
                    logger.setLevel(level)
        if cluster is not None:
            cluster.close(timeout=CONNECT_TIMEOUT)


def backend_kind(problem: Problem, jobs: int = 1, timeout: Optional[float] = None, dask=None) -> str:
    """Where per-candidate evaluations run: ``vectorized`` (one call, in-process), ``serial``, ``threads``,
    ``processes`` or ``dask``."""
    if problem.vectorized:
        return "vectorized"
    if dask is not None:
        return "dask"
    if timeout is not None:
        return "processes"
    if jobs > 1:
        return "threads" if getattr(problem, "parallel", "processes") == "threads" else "processes"
    return "serial"


def make_backend(problem: Problem, jobs: int = 1, timeout: Optional[float] = None, dask=None):
    """The backend for these settings, or ``None`` when evaluations run in this process."""
    kind = backend_kind(problem, jobs, timeout, dask)
    if kind == "dask":
        return DaskBackend(problem, dask, timeout, local_workers=jobs if jobs > 1 else 2)
    if kind == "processes":
        return ProcessBackend(problem, jobs, timeout)
    if kind == "threads":
        return ThreadBackend(problem, jobs)
    return None

"""Per-candidate evaluations on this machine: joblib threads or loky worker processes.

- :class:`ThreadBackend`: joblib threads, for objectives that wait on other
  programs (``Problem.parallel == "threads"``).
- :class:`ProcessBackend`: worker processes of loky, joblib's process
  executor, for Python objectives that hold the GIL, and for every
  per-candidate objective under a timeout (a process can be killed, a thread
  cannot).

Each returns one ``(score, kind, message)`` per candidate, in candidate order,
as :func:`optim.evaluation.scoring.score_candidates` does in-process.
"""

from __future__ import annotations

import re
import uuid
from typing import Optional

import numpy as np

from optim.evaluation.scoring import score_candidates
from optim.evaluation.shipping import (
    ObjectiveUnavailable,
    WorkerError,
    install,
    pid_after_pause,
    score_rows,
    ship_problem,
)
from optim.evaluation.tasks import WORKER_WAIT, run_tasks, timeout_errors
from optim.problem import Problem
from optim.text import first_line

__all__ = ["ThreadBackend", "ProcessBackend"]


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
        return run_tasks(self, X, self.timeout)

    # the pool interface of run_tasks
    def capacity(self) -> int:
        return self.workers

    def _start(self) -> None:
        from joblib.externals.loky import ProcessPoolExecutor

        self._executor = ProcessPoolExecutor(
            max_workers=self.workers, initializer=install, initargs=(self.token, self._payload)
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
                futures = [self._executor.submit(pid_after_pause, 0.02) for _ in range(self.workers)]
                seen.update(f.result(timeout=WORKER_WAIT) for f in futures)
                if len(seen) >= self.workers:
                    return
        except (BrokenProcessPool, *timeout_errors()) as exc:
            self._discard()
            raise WorkerError(f"the worker processes could not start ({first_line(exc)})") from None

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
                return self._executor.submit(score_rows, self.token, rows)
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
        if isinstance(exc, ObjectiveUnavailable):
            raise WorkerError(f"the worker processes cannot load the objective: {exc}")
        raise WorkerError(f"a worker process failed outside the objective: {first_line(exc)}")

    def kill(self, expired, unfinished) -> None:
        self._discard()

    def reset(self, running) -> None:
        self._discard()

    def close(self) -> None:
        """Kill the worker processes (a later evaluation starts new ones)."""
        self._discard()

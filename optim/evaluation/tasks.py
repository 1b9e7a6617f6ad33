"""The scheduling loop shared by the process and Dask backends.

:func:`run_tasks` hands a population's candidates out to a pool of workers,
places results back by index, stops evaluations that exceed the timeout
(the pool kills the worker processes running them and the other unfinished
candidates are handed out again) and survives workers that die: the
candidates of a broken task are evaluated again one by one, and those that
break a worker even when evaluated alone are charged with a ``crash``.

A pool offers ``capacity()``, ``submit(rows)``, ``wait(futures, timeout)``,
``result(future)`` (``("ok", outcomes)`` or ``("crash", detail)``),
``kill(expired, unfinished)`` and ``reset(running)``.
"""

from __future__ import annotations

import math
import time
from collections import deque
from dataclasses import dataclass
from typing import Optional

import numpy as np

__all__ = ["WORKER_WAIT", "run_tasks", "timeout_errors"]

#: Seconds to wait for a worker to (re)start.
WORKER_WAIT = 60.0

_CRASH = "the worker process died while evaluating this candidate (evaluated again alone, it died again){}"
_TIMEOUT = "the evaluation did not finish within search.timeout = {:g} s; its worker process was stopped"


def timeout_errors() -> tuple:
    """What waiting too long raises: one class from Python 3.11 on, three before."""
    import asyncio
    import concurrent.futures

    return (TimeoutError, asyncio.TimeoutError, concurrent.futures.TimeoutError)


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


def run_tasks(pool, X: np.ndarray, timeout: Optional[float]) -> list:
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

"""The objective, shipped once per run to worker processes, and the tasks those workers run.

In the main process :func:`ship_problem` pickles the objective (a user's
``file.py`` module by value, everything else by reference). On a worker,
:func:`install` unpickles it once per run token, and :func:`score_rows` (the
task every process and Dask backend submits) scores candidates with it, as
:func:`~optim.evaluation.scoring.score_candidates` does in-process.
"""

from __future__ import annotations

import os
import pickle
import sys
import time

import numpy as np

from optim.errors import OptimError
from optim.evaluation.scoring import score_candidates
from optim.problem import Problem
from optim.text import first_line

__all__ = [
    "WorkerError",
    "ObjectiveUnavailable",
    "USER_MODULE_PREFIX",
    "install",
    "uninstall",
    "score_rows",
    "pid_after_pause",
    "worker_status",
    "ship_problem",
]

#: Modules made by :mod:`optim.objectives.loader` from a user's ``file.py`` have names that
#: start with this; no other process can import them, so they travel by value.
USER_MODULE_PREFIX = "_optim_user_objective_"


class WorkerError(OptimError):
    """The workers cannot evaluate the objective (it cannot be shipped, they cannot start, the cluster is gone)."""


class ObjectiveUnavailable(RuntimeError):
    """Raised in a worker whose copy of the objective could not be unpickled."""


# -- the worker side ------------------------------------------------------------------------------
_INSTALLED: dict = {}
_INSTALL_ERRORS: dict = {}
_INSTALLS = 0


def install(token: str, payload: bytes) -> None:
    """Unpickle the objective shipped for run ``token`` into this worker (once per worker and run)."""
    global _INSTALLS
    _INSTALLS += 1
    try:
        _INSTALLED[token] = pickle.loads(payload)
    except Exception as exc:  # reported by every task that needs it, as a WorkerError in the main process
        _INSTALL_ERRORS[token] = first_line(exc)


def uninstall(token: str) -> None:
    """Forget the objective of run ``token`` on this worker."""
    _INSTALLED.pop(token, None)
    _INSTALL_ERRORS.pop(token, None)


def score_rows(token: str, X: np.ndarray) -> list:
    """The task a worker runs: score candidates with the objective installed for ``token``."""
    problem = _INSTALLED.get(token)
    if problem is None:
        raise ObjectiveUnavailable(_INSTALL_ERRORS.get(token, "the objective was never installed on this worker"))
    return score_candidates(problem, X)


def pid_after_pause(delay: float) -> int:
    """Sleep ``delay`` seconds and return this worker's pid (to see every worker process has started)."""
    time.sleep(delay)
    return os.getpid()


def worker_status() -> dict:
    """What this worker process holds: its pid, how many objectives it has unpickled, the runs installed."""
    return {"pid": os.getpid(), "installs": _INSTALLS, "objectives": sorted(_INSTALLED)}


# -- the main-process side ------------------------------------------------------------------------
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
            f"({first_line(exc)}); run it with search.jobs: 1 and no search.timeout, "
            f"or make it picklable"
        ) from None
    finally:
        for module in modules:
            cloudpickle.unregister_pickle_by_value(module)

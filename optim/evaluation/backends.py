"""Choose where per-candidate evaluations run: in this process, on threads, in worker processes or on Dask.

Every backend takes the candidates of one population and returns one
``(score, kind, message)`` per candidate, in candidate order, as
:func:`optim.evaluation.scoring.score_candidates` does in-process:
:class:`~optim.evaluation.local.ThreadBackend` and
:class:`~optim.evaluation.local.ProcessBackend` on this machine,
:class:`~optim.evaluation.dask_backend.DaskBackend` on a cluster. The choice
depends only on the settings and on the problem's ``vectorized`` and
``parallel`` attributes.
"""

from __future__ import annotations

from typing import Optional

from optim.evaluation.dask_backend import DaskBackend
from optim.evaluation.local import ProcessBackend, ThreadBackend
from optim.problem import Problem

__all__ = ["backend_kind", "make_backend"]


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
        return "threads" if problem.parallel == "threads" else "processes"
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

"""Turn a :class:`~optim.problem.Problem` into scores for a population.

Vectorised problems are called once per population, in this process.
Per-candidate objectives are called once per candidate
(:func:`~optim.evaluation.scoring.score_candidates`): in this process, or in
parallel by the backend :mod:`optim.evaluation.backends` chooses (threads,
local worker processes, a Dask cluster), which also enforce ``timeout`` and
survive workers that die. Whatever runs them, scores are placed back by
candidate index and faults are recorded in candidate order, so the results
never depend on which evaluation finished first.

An optional cache serves candidates that were already scored; cache hits are
counted apart from real objective calls. Failures (an exception, a missing or
non-finite score, a result of the wrong shape or type, a crash, a timeout)
never stop a run by themselves: the candidate is scored as the worst possible
value and the fault is kept for the run records.
"""

from __future__ import annotations

import math
import weakref
from dataclasses import dataclass, field
from typing import Any, List, Optional

import numpy as np

from optim.evaluation.backends import backend_kind, make_backend
from optim.evaluation.scoring import Failure, candidate_text, score_candidates
from optim.problem import Problem

__all__ = ["Evaluator"]


@dataclass
class Evaluator:
    """Scores populations for one run and keeps honest counts.

    Parameters
    ----------
    problem : Problem
        The objective.
    jobs : int
        Parallel workers for per-candidate objectives (1 = serial); with
        ``dask="local"``, the number of Dask workers (at least 2).
    cache : bool
        Serve repeated candidates from a cache instead of calling the objective.
    timeout : float or None
        Seconds one per-candidate evaluation may take; a longer one is stopped
        (its worker process is killed) and recorded as kind ``timeout``. With a
        timeout every evaluation runs in a worker process, even with ``jobs=1``.
    dask : str, distributed.Client or None
        Evaluate on a Dask cluster: a scheduler address, ``"local"`` for a
        two-worker ``LocalCluster`` that lives as long as the evaluator, or a
        client to use as it is.
    calls, cache_hits, failure_count, failures
        The counts to start from (see Attributes): zero and empty for a new run.

    Attributes
    ----------
    calls : int
        Candidates passed to the objective (cache hits excluded).
    cache_hits : int
        Candidates served from the cache.
    failures : list of Failure
        Faults not yet collected by :meth:`take_failures`.
    failure_count : int
        All faults so far.

    Notes
    -----
    Worker processes and Dask connections are opened at the first evaluation
    that needs them and kept until :meth:`close` (the evaluator is also a
    context manager); a later evaluation opens them again.
    """

    problem: Problem
    jobs: int = 1
    cache: bool = False
    timeout: Optional[float] = None
    dask: Any = None
    calls: int = 0
    cache_hits: int = 0
    failure_count: int = 0
    failures: List[Failure] = field(default_factory=list)
    _cache: dict = field(default_factory=dict, repr=False)
    _backend: Any = field(default=None, repr=False)
    _finalizer: Any = field(default=None, repr=False)

    def __post_init__(self):
        self.worst = -np.inf if self.problem.goal == "maximize" else np.inf
        if isinstance(self.jobs, bool) or int(self.jobs) != self.jobs or self.jobs < 1:
            raise ValueError(f"jobs must be a whole number >= 1; got {self.jobs!r}")
        self.jobs = int(self.jobs)
        if self.timeout is not None:
            if isinstance(self.timeout, bool) or not float(self.timeout) > 0 or not math.isfinite(self.timeout):
                raise ValueError(f"timeout must be a number of seconds > 0, or None; got {self.timeout!r}")
            self.timeout = float(self.timeout)

    # -- where evaluations run ------------------------------------------------------------------
    @property
    def backend_name(self) -> str:
        """Where per-candidate evaluations run: ``vectorized``, ``serial``, ``threads``, ``processes`` or ``dask``."""
        return backend_kind(self.problem, self.jobs, self.timeout, self.dask)

    def _parallel_backend(self):
        if self._backend is None:
            backend = make_backend(self.problem, self.jobs, self.timeout, self.dask)
            if backend is None:
                return None
            self._backend = backend
            self._finalizer = weakref.finalize(self, backend.close)
        return self._backend

    def close(self) -> None:
        """Stop the worker processes, Dask client and local cluster this evaluator started."""
        if self._finalizer is not None:
            self._finalizer()
        self._backend, self._finalizer = None, None

    def __enter__(self) -> "Evaluator":
        return self

    def __exit__(self, *exc) -> bool:
        self.close()
        return False

    # -- checkpoints ----------------------------------------------------------------------------
    def get_state(self) -> dict:
        """Counters and the cache, for checkpoints (pending failures must be taken first)."""
        state = {"calls": self.calls, "cache_hits": self.cache_hits, "failure_count": self.failure_count}
        if self._cache:
            keys = list(self._cache)
            state["cache_keys"] = np.frombuffer(b"".join(keys), dtype=np.uint8).reshape(len(keys), -1)
            state["cache_values"] = np.array([self._cache[k] for k in keys], dtype=np.float64)
        return state

    def set_state(self, state: dict) -> None:
        self.calls = int(state["calls"])
        self.cache_hits = int(state["cache_hits"])
        self.failure_count = int(state["failure_count"])
        self.failures = []
        self._cache = {}
        if "cache_keys" in state:
            keys = np.asarray(state["cache_keys"], dtype=np.uint8)
            for row, value in zip(keys, np.asarray(state["cache_values"], dtype=np.float64), strict=True):
                self._cache[row.tobytes()] = float(value)

    def take_failures(self) -> List[Failure]:
        """Return and forget the faults recorded since the last call."""
        out, self.failures = self.failures, []
        return out

    # -- scoring --------------------------------------------------------------------------------
    def __call__(self, X: np.ndarray) -> np.ndarray:
        """Scores of the candidates ``X``; failed candidates get the worst value (±inf)."""
        X = np.ascontiguousarray(X, dtype=np.uint8)
        count = X.shape[0]
        scores = np.empty(count, dtype=np.float64)
        if count == 0:
            return scores
        if not self.cache:
            scores[:] = self._evaluate_fresh(X)
            return scores
        keys = [row.tobytes() for row in X]
        todo_index, todo_keys, seen = [], [], {}
        for i, key in enumerate(keys):
            if key in self._cache:
                scores[i] = self._cache[key]
                self.cache_hits += 1
            elif key in seen:
                self.cache_hits += 1
            else:
                seen[key] = i
                todo_index.append(i)
                todo_keys.append(key)
        if todo_index:
            fresh = self._evaluate_fresh(X[todo_index])
            for key, value in zip(todo_keys, fresh, strict=True):
                self._cache[key] = value
        for i, key in enumerate(keys):
            if key in seen:
                scores[i] = self._cache[key]
        return scores

    def _evaluate_fresh(self, X: np.ndarray) -> np.ndarray:
        self.calls += X.shape[0]
        if self.problem.vectorized:
            return self._evaluate_vectorized(X)
        return self._evaluate_each(X)

    def _evaluate_vectorized(self, X: np.ndarray) -> np.ndarray:
        count = X.shape[0]
        try:
            raw = self.problem.evaluate(X)
        except Exception:  # user code failed on the batch: isolate the faulty candidates
            return self._evaluate_each(X)
        try:
            values = np.asarray(raw, dtype=np.float64)
        except (TypeError, ValueError):
            self._record_batch(X, "type", f"the objective returned {type(raw).__name__}, not numbers")
            return np.full(count, self.worst)
        if values.shape != (count,):
            values = values.reshape(-1) if values.size == count else None
        if values is None:
            self._record_batch(
                X, "shape", f"the objective returned shape {np.shape(raw)} for {count} candidates; expected ({count},)"
            )
            return np.full(count, self.worst)
        bad = ~np.isfinite(values)
        for i in np.flatnonzero(bad):
            kind = "nan" if np.isnan(values[i]) else "inf"
            self._record(X[i], kind, f"the objective returned {values[i]}")
        return np.where(bad, self.worst, values)

    def _evaluate_each(self, X: np.ndarray) -> np.ndarray:
        backend = None if self.problem.vectorized else self._parallel_backend()
        outcomes = score_candidates(self.problem, X) if backend is None else backend.score(X)
        scores = np.empty(X.shape[0])
        for i, (value, kind, message) in enumerate(outcomes):  # candidate order, whoever finished first
            if kind is None:
                scores[i] = value
            else:
                scores[i] = self.worst
                self._record(X[i], kind, message)
        return scores

    def _record(self, x: np.ndarray, kind: str, message: str):
        self.failure_count += 1
        self.failures.append(Failure(candidate_text(x), kind, message))

    def _record_batch(self, X: np.ndarray, kind: str, message: str):
        for x in X:
            self._record(x, kind, message)

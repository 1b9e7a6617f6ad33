"""Turn a :class:`~optim.problem.Problem` into scores for a population.

Vectorised problems are called once per population, in this process.
Per-candidate objectives are called once per candidate: in this process, or
in parallel by one of the backends of :mod:`optim.evaluation.backends` (threads, local
worker processes, a Dask cluster), which also enforce ``timeout`` and survive
workers that die. Whatever runs them, scores are placed back by candidate
index and faults are recorded in candidate order, so the results never depend
on which evaluation finished first.

An optional cache serves candidates that were already scored; cache hits are
counted apart from real objective calls. Failures (an exception, a missing or
non-finite score, a result of the wrong shape or type, a crash, a timeout)
never stop a run by themselves: the candidate is scored as the worst possible
value and the fault is kept for the run records.
"""

from __future__ import annotations

import math
import numbers
import os
import traceback
import weakref
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, List, Optional

import numpy as np

from optim.problem import FunctionProblem, Problem

__all__ = ["Evaluator", "Failure", "EvaluationFailure", "candidate_text", "score_candidates", "FAILURE_KINDS"]

#: The kinds of fault the evaluator itself records (objectives may raise
#: :class:`EvaluationFailure` with kinds of their own, e.g. ``exit`` or ``no-score``).
FAILURE_KINDS = {
    "exception": "the objective raised an exception",
    "nan": "the objective returned NaN",
    "inf": "the objective returned an infinite value",
    "shape": "the objective returned the wrong number of values",
    "type": "the objective returned something that is not a number",
    "crash": "the worker process evaluating the candidate died",
    "timeout": "the evaluation took longer than search.timeout",
}

_OPTIM_DIR = str(Path(__file__).resolve().parent) + os.sep


class EvaluationFailure(Exception):
    """Raised by an objective to report a failed evaluation of a known kind.

    ``kind`` is a short word (``exit``, ``timeout``, ``no-score`` …) and the
    message says what happened; the candidate is scored as worst and recorded.
    """

    def __init__(self, kind: str, message: str):
        super().__init__(message)
        self.kind = kind

    def __reduce__(self):
        return (type(self), (self.kind, str(self)))


@dataclass
class Failure:
    """One candidate whose evaluation failed."""

    candidate: str
    kind: str
    message: str

    def to_dict(self) -> dict:
        return {"candidate": self.candidate, "kind": self.kind, "message": self.message}


def candidate_text(x: np.ndarray) -> str:
    """A candidate as a string of digits (base-36 digits beyond 9)."""
    digits = "0123456789abcdefghijklmnopqrstuvwxyz"
    if int(np.max(x, initial=0)) < 10:
        return (np.asarray(x, dtype=np.uint8) + ord("0")).tobytes().decode("ascii")
    return "".join(digits[int(v)] if v < 36 else f"({int(v)})" for v in x)


def _first_line(exc: BaseException) -> str:
    text = f"{type(exc).__name__}: {exc}".strip()
    return text.splitlines()[0] if text else type(exc).__name__


def _where(exc: BaseException) -> str:
    """`` (at file:line)`` of the innermost frame outside optim itself.

    Code shipped to a worker by value (cloudpickle) has the file name
    ``<dynamic-code>``; its module's ``__file__`` names the file, as in-process.
    """
    found = ""
    for frame, line in traceback.walk_tb(exc.__traceback__):
        filename = frame.f_code.co_filename
        if filename.startswith("<") and isinstance(frame.f_globals.get("__file__"), str):
            filename = frame.f_globals["__file__"]
        if not filename.startswith(_OPTIM_DIR):
            found = f" (at {filename}:{line})"
    return found


def _short(value, limit: int = 60) -> str:
    text = repr(value)
    return text if len(text) <= limit else text[: limit - 3] + "..."


def _as_score(value):
    """Check what an objective returned for one candidate: ``(score, kind or None, message)``."""
    if isinstance(value, (str, bytes)):
        return math.nan, "type", f"the objective returned the text {_short(value)}, not a number"
    if isinstance(value, (np.ndarray, list, tuple)):
        try:
            array = np.asarray(value, dtype=np.float64)
        except (TypeError, ValueError):
            return math.nan, "type", f"the objective returned a {type(value).__name__} that is not made of numbers"
        if array.size != 1:
            return (
                math.nan,
                "shape",
                f"the objective returned a {type(value).__name__} of shape {array.shape}; expected one number",
            )
        number = float(array.reshape(-1)[0])
    elif isinstance(value, numbers.Real) or hasattr(type(value), "__float__"):
        try:
            number = float(value)
        except (TypeError, ValueError, OverflowError) as exc:
            return math.nan, "type", f"the objective returned {_short(value)}, not a number ({_first_line(exc)})"
    else:
        what = "None" if value is None else f"a {type(value).__name__}"
        return math.nan, "type", f"the objective returned {what}, not a number"
    if math.isnan(number):
        return math.nan, "nan", "the objective returned nan"
    if math.isinf(number):
        return math.nan, "inf", f"the objective returned {number}"
    return number, None, ""


def _score_one(problem: Problem, x: np.ndarray):
    try:
        if isinstance(problem, FunctionProblem) and not problem.vectorized:
            value = problem.function(x.copy())  # the raw value, so a wrong type is named as such
        else:
            value = problem.evaluate_one(x.copy())
    except EvaluationFailure as exc:
        return math.nan, exc.kind, str(exc)
    except (Exception, SystemExit) as exc:  # the objective is user code: any exception is a recorded fault
        return math.nan, "exception", _first_line(exc) + _where(exc)
    return _as_score(value)


def score_candidates(problem: Problem, X: np.ndarray) -> list:
    """Score each row of ``X`` with one objective call, in this process.

    Returns one ``(score, kind, message)`` per row: ``kind`` is ``None`` for a
    good score, else the fault's kind (see :data:`FAILURE_KINDS`) and
    ``score`` is NaN. This is what every backend's workers run.
    """
    return [_score_one(problem, x) for x in np.asarray(X, dtype=np.uint8)]


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
        from optim.evaluation.backends import backend_kind

        return backend_kind(self.problem, self.jobs, self.timeout, self.dask)

    def _parallel_backend(self):
        if self._backend is None:
            from optim.evaluation.backends import make_backend

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

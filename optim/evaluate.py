"""Turn a :class:`~optim.problem.Problem` into scores for a population.

Vectorised problems are called once per population. Per-candidate objectives
are called once per candidate, serially or in parallel through joblib. An
optional cache serves candidates that were already scored; cache hits are
counted apart from real objective calls. Failures (an exception, a missing or
non-finite score, a result of the wrong shape) never stop a run by
themselves: the candidate is scored as the worst possible value and the fault
is kept for the run records.
"""

from __future__ import annotations

import traceback
from dataclasses import dataclass, field
from typing import List, Optional

import numpy as np

from optim.problem import Problem

__all__ = ["Evaluator", "Failure", "EvaluationFailure", "candidate_text"]


class EvaluationFailure(Exception):
    """Raised by an objective to report a failed evaluation of a known kind.

    ``kind`` is a short word (``exit``, ``timeout``, ``no-score`` …) and the
    message says what happened; the candidate is scored as worst and recorded.
    """

    def __init__(self, kind: str, message: str):
        super().__init__(message)
        self.kind = kind


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


def _score_one(problem: Problem, x: np.ndarray):
    """Score one candidate; returns ``(score, failure kind or None, message)``."""
    try:
        value = problem.evaluate_one(x)
    except EvaluationFailure as exc:
        return np.nan, exc.kind, str(exc)
    except Exception as exc:  # the objective is user code: any exception is a recorded fault
        tb = traceback.extract_tb(exc.__traceback__)
        where = f" (at {tb[-1].filename}:{tb[-1].lineno})" if tb else ""
        return np.nan, "exception", _first_line(exc) + where
    try:
        value = float(value)
    except (TypeError, ValueError):
        return np.nan, "type", f"the objective returned {type(value).__name__}, not a number"
    if not np.isfinite(value):
        return np.nan, "nan", f"the objective returned {value}"
    return value, None, ""


def _score_chunk(problem: Problem, X: np.ndarray):
    return [_score_one(problem, x) for x in X]


@dataclass
class Evaluator:
    """Scores populations for one run and keeps honest counts.

    Parameters
    ----------
    problem : Problem
        The objective.
    jobs : int
        Parallel workers for per-candidate objectives (1 = serial).
    cache : bool
        Serve repeated candidates from a cache instead of calling the objective.

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
    """

    problem: Problem
    jobs: int = 1
    cache: bool = False
    calls: int = 0
    cache_hits: int = 0
    failure_count: int = 0
    failures: List[Failure] = field(default_factory=list)
    _cache: dict = field(default_factory=dict, repr=False)

    def __post_init__(self):
        self.worst = -np.inf if self.problem.goal == "maximize" else np.inf

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
            for row, value in zip(keys, np.asarray(state["cache_values"], dtype=np.float64)):
                self._cache[row.tobytes()] = float(value)

    def take_failures(self) -> List[Failure]:
        """Return and forget the faults recorded since the last call."""
        out, self.failures = self.failures, []
        return out

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
            for key, value in zip(todo_keys, fresh):
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
            self._record(X[i], "nan", f"the objective returned {values[i]}")
        return np.where(bad, self.worst, values)

    def _evaluate_each(self, X: np.ndarray) -> np.ndarray:
        if self.jobs > 1 and X.shape[0] > 1:
            from joblib import Parallel, delayed

            chunks = np.array_split(np.arange(X.shape[0]), min(self.jobs * 4, X.shape[0]))
            prefer = "threads" if getattr(self.problem, "parallel", "processes") == "threads" else "processes"
            parts = Parallel(n_jobs=self.jobs, prefer=prefer)(
                delayed(_score_chunk)(self.problem, X[c]) for c in chunks
            )
            outcomes = [o for part in parts for o in part]
        else:
            outcomes = _score_chunk(self.problem, X)
        scores = np.empty(X.shape[0])
        for i, (value, kind, message) in enumerate(outcomes):
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

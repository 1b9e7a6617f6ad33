"""Score candidates one objective call at a time, in this process, and describe what went wrong.

This is the pure part of evaluation: no cache, no counters, no workers. The
:class:`~optim.evaluation.evaluator.Evaluator` runs :func:`score_candidates`
in-process and every backend's workers run it on their share of a population.
A fault (an exception, a missing or non-finite score, a result of the wrong
shape or type) never escapes: it comes back as a kind and a one-line message.
"""

from __future__ import annotations

import math
import numbers
import os
import traceback
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from optim.problem import Problem
from optim.text import first_line

__all__ = ["EvaluationFailure", "Failure", "FAILURE_KINDS", "candidate_text", "score_candidates"]

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

#: The folder of the optim package: frames in it are not where a user's objective failed.
_OPTIM_DIR = str(Path(__file__).resolve().parents[1]) + os.sep


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
            return math.nan, "type", f"the objective returned {_short(value)}, not a number ({first_line(exc)})"
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
        value = problem.raw_value(x.copy())  # unconverted, so a wrong type is named as such
    except EvaluationFailure as exc:
        return math.nan, exc.kind, str(exc)
    except (Exception, SystemExit) as exc:  # the objective is user code: any exception is a recorded fault
        return math.nan, "exception", first_line(exc) + _where(exc)
    return _as_score(value)


def score_candidates(problem: Problem, X: np.ndarray) -> list:
    """Score each row of ``X`` with one objective call, in this process.

    Returns one ``(score, kind, message)`` per row: ``kind`` is ``None`` for a
    good score, else the fault's kind (see :data:`FAILURE_KINDS`) and
    ``score`` is NaN. This is what every backend's workers run.
    """
    return [_score_one(problem, x) for x in np.asarray(X, dtype=np.uint8)]

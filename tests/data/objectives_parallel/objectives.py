"""Objectives for the parallel-evaluation tests (invented for these tests; no reference values).

Loaded as ``objectives.py:NAME`` by ``optim.objectives.loader``, so worker processes
and Dask workers get them by value, as they would a user's file.
"""

import os
import time

import numpy as np

from optim.problem import Problem

#: Candidates whose first four values are these raise an exception in ``score``.
UNLUCKY = (1, 1, 0, 1)


def _value(X):
    """Vectorised value of ``score``: matching neighbours plus half the ones, weighted by position."""
    X = np.asarray(X, dtype=np.float64)
    same = (X[:, 1:] == X[:, :-1]).astype(np.float64)
    weights = 1.0 + np.arange(same.shape[1]) / 16.0  # dyadic: exact sums in any order, batch or one by one
    return same @ weights + 0.5 * X.sum(axis=1)


def score(x):
    """A per-candidate objective with an occasional deterministic fault."""
    if tuple(int(v) for v in x[:4]) == UNLUCKY:
        raise ValueError("unlucky prefix")
    return float(_value(x[None, :])[0])


#: What ``faults`` does for each value of 4*x0 + 2*x1 + x2, and the failure kind the evaluator must record.
FAULTS = {0: "exception", 1: "nan", 2: "inf", 3: "shape", 4: "type", 5: "type"}


def faults(x):
    """Every kind of bad result, chosen by the first three values; 6 and 7 give a good score."""
    code = 4 * int(x[0]) + 2 * int(x[1]) + int(x[2])
    if code == 0:
        raise RuntimeError("the model did not converge")
    if code == 1:
        return float("nan")
    if code == 2:
        return -float("inf")
    if code == 3:
        return np.ones(3)
    if code == 4:
        return None
    if code == 5:
        return "fast"
    return float(np.sum(x))


class Troublemaker(Problem):
    """Scores like ``score`` (without its fault) but misbehaves on one candidate, which the first population holds.

    ``fault`` says how: ``exit`` ends the worker process (``os._exit(1)``), ``hang`` sleeps ``seconds``,
    ``raise`` raises an exception (the reference behaviour: an ordinary recorded fault).
    """

    vectorized = False

    def __init__(self, n, fault, seconds):
        super().__init__(n, name="troublemaker")
        self.fault, self.seconds = fault, float(seconds)
        self.culprit = (np.arange(n) % 2).astype(np.uint8)

    def evaluate(self, X):
        return _value(X)

    def evaluate_one(self, x):
        if np.array_equal(x, self.culprit):
            if self.fault == "exit":
                os._exit(1)
            if self.fault == "hang":
                time.sleep(self.seconds)
            raise RuntimeError("this candidate is trouble")
        return float(_value(x[None, :])[0])

    def initial_candidates(self):
        return self.culprit[None, :]


def troublemaker(n=16, fault="raise", seconds=60.0):
    """A :class:`Troublemaker`.

    Parameters
    ----------
    n : int
        Number of variables.
    fault : str
        ``exit``, ``hang`` or ``raise``.
    seconds : float
        How long ``hang`` sleeps.
    """
    return Troublemaker(n, fault, seconds)


def sleepy(x):
    """Sleeps 0.05 s, then scores like ``score`` without its fault (so a run is caught in mid-generation)."""
    time.sleep(0.05)
    return float(_value(x[None, :])[0])


def staggered(x):
    """The lower the code 2*x0 + x1, the longer it takes, so parallel evaluations finish in reverse order.

    Codes 0 and 1 fail (with their code in the message); 2 and 3 score ``code + sum(x[2:])``.
    """
    code = 2 * int(x[0]) + int(x[1])
    time.sleep(0.05 * (3 - code))
    if code < 2:
        raise ValueError(f"code {code}")
    return float(code + np.sum(x[2:]))

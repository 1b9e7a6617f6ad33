"""Example user objectives for the loader tests (an invented lamp-row scenario).

A row of lamps is switched on (1) or off (0); the objectives below score rows
in different styles so that every way of handing an objective to the loader
is exercised.
"""

import numpy as np

from optim.problem import FunctionProblem, Problem

LAMP_LIMIT = 3


class AlternatingLamps(Problem):
    """Count neighbouring lamps in different states (best: strictly alternating).

    Parameters
    ----------
    n : int
        Number of lamps in the row.
    bonus : float
        Added to every score.
    """

    def __init__(self, n=10, bonus=0.0):
        super().__init__(n, optimum=n - 1 + bonus, optimum_source="alternating row", name="lamps")
        self.bonus = float(bonus)

    def evaluate(self, X):
        X = np.asarray(X, dtype=np.uint8)
        return (X[:, 1:] != X[:, :-1]).sum(axis=1) + self.bonus


class NotAProblem:
    """A class that does not derive from Problem."""


READY_MADE = AlternatingLamps(n=5)


def weighted_lamps(n=6, weight=2.0):
    """Score each lit lamp by ``weight``.

    Parameters
    ----------
    n : int
        Number of lamps.
    weight : float
        Score of one lit lamp; must be positive.
    """
    if weight <= 0:
        raise ValueError(f"weight must be positive; got {weight}")
    return FunctionProblem(lambda X: weight * X.sum(axis=1), n, vectorized=True, name="weighted-lamps")


def sized_lamps(size, pattern="alternating"):
    """A factory with a required parameter."""
    if not isinstance(pattern, str):
        raise TypeError(f"pattern must be a string; got {type(pattern).__name__}")
    return AlternatingLamps(n=size)


def lamp_count_text(n=4):
    """A factory that wrongly returns a number instead of a Problem."""
    return 7


def lit_every_third(x):
    """Per-candidate objective: lamps matching the pattern 'on, off, off, on, ...'."""
    pattern = (np.arange(len(x)) % 3 == 0).astype(np.uint8)
    return float(np.sum(x == pattern))


def lit_total(X):
    """Vectorised objective: the number of lit lamps of every row."""
    return X.sum(axis=1)


def two_rows(x, y):
    """Takes two candidates: not usable as an objective function."""
    return float(np.sum(x != y))


def _private_helper():
    return None

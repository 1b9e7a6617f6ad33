"""OneMax: the number of ones in a bit string.

A standard first test for search methods on bit strings (common practice, no
source): every variable contributes independently, so the all-ones string is
the unique optimum.
"""

from __future__ import annotations

import numpy as np

from optim.problem import Problem
from optim_problems._checks import population_of, require_int

__all__ = ["OneMax", "onemax"]


class OneMax(Problem):
    """The number of ones in a bit string; see :func:`onemax`."""

    def __init__(self, n: int = 100):
        n = require_int("n", n, 1)
        super().__init__(
            n,
            goal="maximize",
            optimum=n,
            optimum_source="n, reached by all ones (each variable adds at most one)",
            name="onemax",
        )

    def evaluate(self, X: np.ndarray) -> np.ndarray:
        X = population_of(self, X)
        return X.sum(axis=1, dtype=np.int64).astype(np.float64)


def onemax(n: int = 100) -> OneMax:
    """Build the OneMax problem.

    Parameters
    ----------
    n : int
        Number of bits (at least 1).

    Returns
    -------
    OneMax
        A maximisation problem whose optimum ``n`` is reached by all ones.
    """
    return OneMax(n)

"""OneMax: the number of ones in a bit string.

A standard first test for search methods on bit strings (common practice, no
source): every variable contributes independently, so the all-ones string is
the unique optimum.
"""

from __future__ import annotations

import numpy as np

from optim.problem import Problem

__all__ = ["OneMax", "onemax"]


def _require_int(name: str, value, minimum: int) -> int:
    if isinstance(value, (bool, np.bool_)) or not isinstance(value, (int, np.integer)) or value < minimum:
        raise ValueError(f"{name} must be an integer >= {minimum}; got {value!r}")
    return int(value)


class OneMax(Problem):
    """The number of ones in a bit string; see :func:`onemax`."""

    def __init__(self, n: int = 100):
        n = _require_int("n", n, 1)
        super().__init__(
            n,
            goal="maximize",
            optimum=n,
            optimum_source="n, reached by all ones (each variable adds at most one)",
            name="onemax",
        )

    def evaluate(self, X: np.ndarray) -> np.ndarray:
        X = np.asarray(X, dtype=np.uint8)
        if X.ndim != 2 or X.shape[1] != self.n:
            raise ValueError(f"{self.name}: expected a population of shape (count, {self.n}); got {X.shape}")
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

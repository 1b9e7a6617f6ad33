"""Hierarchical if-and-only-if (HIFF).

Watson, R. A., Hornby, G. S. & Pollack, J. B. (1998), "Modeling
building-block interdependency". For a block ``B``: a single bit scores 1;
otherwise ``f(B) = f(L) + f(R) + (|B| if all bits of B are equal else 0)``
with ``L`` and ``R`` its two halves. The optimum ``n (log2 n + 1)`` is reached
by all zeros and by all ones.
"""

from __future__ import annotations

import numpy as np

from optim.problem import Problem
from optim_problems._checks import population_of

__all__ = ["Hiff", "hiff"]


class Hiff(Problem):
    """Hierarchical if-and-only-if (Watson, Hornby & Pollack, 1998); see :func:`hiff`.

    Attributes
    ----------
    levels : int
        ``log2(n)``, the number of levels above the single bits.
    """

    def __init__(self, n: int = 64):
        if isinstance(n, (bool, np.bool_)) or not isinstance(n, (int, np.integer)) or n < 2 or int(n) & (int(n) - 1):
            raise ValueError(f"n must be a power of two >= 2; got {n!r}")
        n = int(n)
        levels = n.bit_length() - 1
        super().__init__(
            n,
            goal="maximize",
            optimum=n * (levels + 1),
            optimum_source="n (log2 n + 1), reached by all zeros and all ones (Watson, Hornby & Pollack 1998)",
            name="hiff",
        )
        self.levels = levels

    def evaluate(self, X: np.ndarray) -> np.ndarray:
        X = population_of(self, X)
        scores = np.full(X.shape[0], self.n, dtype=np.int64)
        values = X
        uniform = np.ones(X.shape, dtype=bool)
        size = 1
        for _ in range(self.levels):
            size *= 2
            uniform = uniform[:, 0::2] & uniform[:, 1::2] & (values[:, 0::2] == values[:, 1::2])
            values = values[:, 0::2]
            scores += size * uniform.sum(axis=1)
        return scores.astype(np.float64)


def hiff(n: int = 64) -> Hiff:
    """Build the HIFF problem (Watson, Hornby & Pollack, 1998).

    Parameters
    ----------
    n : int
        Number of bits, a power of two (at least 2).

    Returns
    -------
    Hiff
        A maximisation problem with optimum ``n (log2 n + 1)``.
    """
    return Hiff(n)

"""The one-dimensional Ising ring with ferromagnetic couplings.

The spins of the Ising model (Ising, 1925, "Beitrag zur Theorie des
Ferromagnetismus") sit on a cycle; the score is the number of equal
neighbouring pairs ``x_i == x_{(i+1) mod n}``. Used as a symmetric test
problem by Van Hoyweghen, Goldberg & Naudts (2002), "From TwoMax to the Ising
model: easy and hard symmetrical problems". The optimum ``n`` is reached by
all zeros and by all ones.
"""

from __future__ import annotations

import numpy as np

from optim.problem import Problem
from optim_problems._checks import population_of, require_int

__all__ = ["IsingRing", "ising_ring"]


class IsingRing(Problem):
    """Equal neighbouring pairs on a cycle (Ising, 1925); see :func:`ising_ring`."""

    def __init__(self, n: int = 100):
        n = require_int("n", n, 3)
        super().__init__(
            n,
            goal="maximize",
            optimum=n,
            optimum_source="n, reached by all zeros and all ones (every pair equal)",
            name="ising-ring",
        )

    def evaluate(self, X: np.ndarray) -> np.ndarray:
        X = population_of(self, X)
        equal = X == np.roll(X, -1, axis=1)
        return equal.sum(axis=1, dtype=np.int64).astype(np.float64)


def ising_ring(n: int = 100) -> IsingRing:
    """Build the ferromagnetic Ising ring (Ising, 1925).

    Parameters
    ----------
    n : int
        Number of spins on the cycle (at least 3, so that the ring is a
        simple cycle).

    Returns
    -------
    IsingRing
        A maximisation problem with optimum ``n``.
    """
    return IsingRing(n)

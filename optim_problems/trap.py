"""Concatenated deceptive trap functions.

Deb, K. & Goldberg, D. E. (1993), "Analyzing deception in trap functions".
The string is split into disjoint blocks of ``k`` bits. A block scores ``k``
when all its bits are 1 and ``k - 1 - u`` otherwise, where ``u`` is its number
of ones, so every block leads a bit-wise hill climber towards all zeros while
the optimum is all ones.
"""

from __future__ import annotations

import numpy as np

from optim.problem import Problem
from optim_problems._checks import population_of, require_int

__all__ = ["ConcatenatedTrap", "trap"]


class ConcatenatedTrap(Problem):
    """Concatenated trap of order ``k`` (Deb & Goldberg, 1993); see :func:`trap`.

    Attributes
    ----------
    k : int
        Order of each trap (bits per block).
    blocks : numpy.ndarray
        Shape ``(n // k, k)``, int64: the variable positions of each block,
        i.e. the true linkage of the problem.
    """

    def __init__(self, n: int = 60, k: int = 3, shuffle: bool = False, seed: int = 0):
        k = require_int("k", k, 2)
        n = require_int("n", n, 1)
        if n % k:
            raise ValueError(f"n must be a positive multiple of k={k}; got n={n}")
        if not isinstance(shuffle, (bool, np.bool_)):
            raise ValueError(f"shuffle must be true or false; got {shuffle!r}")
        seed = require_int("seed", seed, 0)
        positions = np.arange(n, dtype=np.int64)
        if shuffle:
            positions = np.random.default_rng(seed).permutation(n).astype(np.int64)
        super().__init__(
            n,
            goal="maximize",
            optimum=n,
            optimum_source="n, reached by all ones (Deb & Goldberg 1993)",
            name=f"trap-{k}-shuffled" if shuffle else f"trap-{k}",
        )
        self.k = k
        self.shuffled = bool(shuffle)
        self.seed = seed
        self.blocks = positions.reshape(n // k, k)

    def evaluate(self, X: np.ndarray) -> np.ndarray:
        X = population_of(self, X)
        ones = X[:, self.blocks].sum(axis=2, dtype=np.int64)
        block_values = np.where(ones == self.k, self.k, self.k - 1 - ones)
        return block_values.sum(axis=1).astype(np.float64)


def trap(n: int = 60, k: int = 3, shuffle: bool = False, seed: int = 0) -> ConcatenatedTrap:
    """Build a concatenated deceptive trap (Deb & Goldberg, 1993).

    Parameters
    ----------
    n : int
        Number of bits, a positive multiple of ``k``.
    k : int
        Order of each trap, the number of bits per block (at least 2).
    shuffle : bool
        Scatter the blocks over the string with a seeded random permutation
        of the variable positions, so that blocks are not contiguous.
    seed : int
        Seed of ``numpy.random.default_rng`` for the permutation (used only
        when ``shuffle`` is true).

    Returns
    -------
    ConcatenatedTrap
        A maximisation problem whose optimum ``n`` is reached by all ones; its
        ``blocks`` attribute gives the positions of each block.
    """
    return ConcatenatedTrap(n, k, shuffle, seed)

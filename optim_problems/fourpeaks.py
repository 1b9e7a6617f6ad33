"""Four Peaks.

Baluja, S. & Caruana, R. (1995), "Removing the genetics from the standard
genetic algorithm". With ``head`` the number of leading ones and ``tail`` the
number of trailing zeros, ``f = max(head, tail) + R`` where the reward ``R``
is ``n`` when both ``head > t`` and ``tail > t``, and 0 otherwise. The two
global optima (``t + 1`` leading ones then zeros, or ``t + 1`` trailing zeros
after ones) score ``2n - t - 1``; all ones and all zeros are wide local optima
scoring ``n``.
"""

from __future__ import annotations

import numpy as np

from optim.problem import Problem
from optim_problems._checks import population_of, require_int

__all__ = ["FourPeaks", "four_peaks"]


class FourPeaks(Problem):
    """Four Peaks (Baluja & Caruana, 1995); see :func:`four_peaks`."""

    def __init__(self, n: int = 60, t: int = 6):
        n = require_int("n", n, 2)
        t = require_int("t", t, 0)
        if 2 * t + 2 > n:
            raise ValueError(
                f"t must satisfy 0 <= t <= (n - 2) / 2 so that the reward can be reached; got t={t} with n={n}"
            )
        super().__init__(
            n,
            goal="maximize",
            optimum=2 * n - t - 1,
            optimum_source="2n - t - 1, reached by t+1 leading ones then zeros (Baluja & Caruana 1995)",
            name=f"four-peaks-t{t}",
        )
        self.t = t

    def evaluate(self, X: np.ndarray) -> np.ndarray:
        X = population_of(self, X)
        # argmin finds the first zero and argmax the last one; rows without
        # such a bit are all ones (head = n) or all zeros (tail = n).
        head = np.where(X.all(axis=1), self.n, np.argmin(X, axis=1))
        tail = np.where(X.any(axis=1), np.argmax(X[:, ::-1], axis=1), self.n)
        reward = np.where((head > self.t) & (tail > self.t), self.n, 0)
        return (np.maximum(head, tail) + reward).astype(np.float64)


def four_peaks(n: int = 60, t: int = 6) -> FourPeaks:
    """Build the Four Peaks problem (Baluja & Caruana, 1995).

    Parameters
    ----------
    n : int
        Number of bits (at least 2).
    t : int
        Threshold: the reward ``n`` is paid when the leading ones and the
        trailing zeros both exceed ``t``; ``0 <= t <= (n - 2) / 2``, which keeps
        the optimum ``2n - t - 1`` reachable.

    Returns
    -------
    FourPeaks
        A maximisation problem with optimum ``2n - t - 1``.
    """
    return FourPeaks(n, t)

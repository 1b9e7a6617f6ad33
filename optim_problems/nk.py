"""NK fitness landscapes (Kauffman 1993, "The Origins of Order").

Each of the ``n`` binary variables ``i`` has ``K`` neighbours and a table
``f_i`` of ``2**(K+1)`` numbers drawn uniformly from ``[0, 1)``; the fitness of
a candidate is the mean over ``i`` of ``f_i`` at the bits of ``i`` and its
neighbours::

    F(x) = (1/n) * sum_i f_i[index_i(x)],
    index_i(x) = x_i * 2**K + sum_{j=1..K} x_{nb_i[j]} * 2**(K-j)

(the own bit is the most significant). Neighbourhoods:

``"adjacent"``
    the K next variables cyclically, ``i+1 … i+K (mod n)``; this cyclic model
    is the standard one and the only one offered (no open-boundary variant).
``"random"``
    K distinct other variables drawn uniformly for each ``i`` (kept sorted).

Exact optimum: for the adjacent model, the dynamic programme of
:func:`adjacent_optimum` (Wright, Thompson & Zhang 2000, "The computational
complexity of N-K fitness functions"), O(n * 4**K) work; for random
neighbourhoods, enumeration of all ``2**n`` candidates for small ``n``.
"""

from __future__ import annotations

from typing import Tuple

import numpy as np

from optim.problem import Problem
from optim_problems._instances import exhaustive_maximum, resolve_solve_option

__all__ = [
    "NKLandscape",
    "NEIGHBOURHOODS",
    "adjacent_neighbours",
    "random_neighbours",
    "adjacent_optimum",
    "brute_force_optimum",
    "nk_landscape",
]

NEIGHBOURHOODS = ("adjacent", "random")
#: ``solve="auto"`` runs the dynamic programme when ``n * 4**K`` is at most this.
AUTO_DP_WORK = 1 << 24
#: ``solve="auto"`` enumerates random-neighbourhood landscapes up to this ``n``.
AUTO_BRUTE_FORCE_N = 20
#: Hard cap on ``n`` for :func:`brute_force_optimum`.
_ENUMERATION_CAP = 26
#: Largest ``K`` accepted (tables of ``2**(K+1)`` entries per variable).
MAX_K = 20
#: Entries of the (prefix, state) value table processed at once by the DP.
_DP_BLOCK = 1 << 20


class NKLandscape(Problem):
    """An NK landscape given its neighbour lists and tables.

    Parameters
    ----------
    neighbours : array_like of int, shape (n, K)
        ``neighbours[i]`` are the K neighbours of variable ``i`` (not ``i``).
    tables : array_like of float, shape (n, 2**(K+1))
        ``tables[i][index]`` is ``f_i`` at the table index of the module docstring.
    neighbourhood : str
        Label of how the neighbours were chosen ("adjacent", "random" or other).
    optimum, optimum_source, name
        As for :class:`optim.problem.Problem`.
    """

    def __init__(
        self,
        neighbours,
        tables,
        neighbourhood="custom",
        optimum=None,
        optimum_source=None,
        name="nk",
    ):
        tables = np.asarray(tables, dtype=np.float64)
        if tables.ndim != 2:
            raise ValueError("tables must have shape (n, 2**(K+1))")
        n = tables.shape[0]
        neighbours = np.asarray(neighbours, dtype=np.int64)
        if neighbours.ndim != 2 or neighbours.shape[0] != n:
            raise ValueError(f"neighbours must have shape (n, K) with n = {n} rows")
        k = neighbours.shape[1]
        if tables.shape[1] != 1 << (k + 1):
            raise ValueError(f"tables must have 2**(K+1) = {1 << (k + 1)} columns; got {tables.shape[1]}")
        if neighbours.size and (neighbours.min() < 0 or neighbours.max() >= n):
            raise ValueError(f"neighbours must lie in 0..{n - 1}")
        if np.any(neighbours == np.arange(n)[:, None]):
            raise ValueError("a variable cannot be its own neighbour")
        super().__init__(n, goal="maximize", optimum=optimum, optimum_source=optimum_source, name=name)
        self.k = k
        self.neighbours = neighbours
        self.tables = tables
        self.neighbourhood = neighbourhood
        self._columns = np.concatenate([np.arange(n)[:, None], neighbours], axis=1)
        self._offsets = np.arange(n, dtype=np.int64) * tables.shape[1]

    @property
    def is_adjacent(self) -> bool:
        """Whether the neighbours are ``i+1 … i+K (mod n)``."""
        return bool(np.array_equal(self.neighbours, adjacent_neighbours(self.n, self.k)))

    def table_indices(self, X: np.ndarray) -> np.ndarray:
        """Index into ``tables[i]`` for each candidate and variable (int64, ``(count, n)``)."""
        X = np.asarray(X, dtype=np.uint8)
        if X.ndim != 2 or X.shape[1] != self.n:
            raise ValueError(f"expected a population of shape (count, {self.n}); got {X.shape}")
        index = np.zeros(X.shape, dtype=np.int64)
        for position in range(self.k + 1):
            index <<= 1
            index |= X[:, self._columns[:, position]]
        return index

    def evaluate(self, X: np.ndarray) -> np.ndarray:
        index = self.table_indices(X)
        return self.tables.ravel()[index + self._offsets].mean(axis=1)

    def describe(self) -> dict:
        summary = super().describe()
        summary.update(k=self.k, neighbourhood=self.neighbourhood)
        return summary


def adjacent_neighbours(n: int, k: int) -> np.ndarray:
    """Neighbours ``i+1 … i+k (mod n)`` of each variable, shape ``(n, k)``."""
    return (np.arange(n)[:, None] + np.arange(1, k + 1)[None, :]) % n


def random_neighbours(n: int, k: int, rng: np.random.Generator) -> np.ndarray:
    """For each variable, ``k`` distinct other variables drawn uniformly, sorted."""
    neighbours = np.empty((n, k), dtype=np.int64)
    for i in range(n):
        others = rng.choice(n - 1, size=k, replace=False)
        neighbours[i] = np.sort(others + (others >= i))
    return neighbours


def _dp_values(tables: np.ndarray, k: int, prefixes: np.ndarray, record: bool):
    """Best sum of ``f_t`` over the cyclic chain for each fixed first-K-bits prefix.

    The state after step ``t`` holds bits ``x_{t+1} … x_{t+K}`` (first the most
    significant); step ``t`` appends ``x_{t+K}`` (free while ``t+K < n``, else
    the prefix bit it wraps to) and adds ``f_t`` of the window
    ``x_t … x_{t+K}``. Returns the values and, with ``record``, which dropped
    bit ``x_t`` was best for each step and new state.
    """
    n = tables.shape[0]
    states = 1 << k
    new_state = np.arange(states)
    window0, window1 = new_state, new_state + states
    before0, before1 = window0 >> 1, window1 >> 1
    value = np.full((prefixes.shape[0], states), -np.inf)
    value[np.arange(prefixes.shape[0]), prefixes] = 0.0
    choices = np.zeros((n, prefixes.shape[0], states), dtype=bool) if record else None
    for t in range(n):
        keep0 = value[:, before0] + tables[t, window0]
        keep1 = value[:, before1] + tables[t, window1]
        if record:
            choices[t] = keep1 > keep0
        value = np.maximum(keep0, keep1)
        if t + k >= n:
            forced = (prefixes >> (k - 1 - (t + k - n))) & 1
            value[(new_state[None, :] & 1) != forced[:, None]] = -np.inf
    return value[np.arange(prefixes.shape[0]), prefixes], choices


def adjacent_optimum(problem: NKLandscape) -> Tuple[float, np.ndarray]:
    """Exact optimum of an adjacent-neighbourhood (cyclic) NK landscape.

    Dynamic programming after Wright, Thompson & Zhang 2000 ("The
    computational complexity of N-K fitness functions"): fix the first K bits
    (``2**K`` prefixes), then sweep the positions carrying the last K bits as
    the state, vectorised over prefixes and states; O(n * 4**K) work. A second
    sweep for the best prefix records the choices and recovers an assignment.

    Returns
    -------
    best : float
        The largest fitness (mean of the ``f_i``), as ``evaluate`` scores the assignment.
    assignment : numpy.ndarray
        A uint8 vector reaching it.
    """
    if not problem.is_adjacent:
        raise ValueError("the dynamic programme needs the adjacent (cyclic) neighbourhood")
    n, k = problem.n, problem.k
    states = 1 << k
    block = max(1, _DP_BLOCK // states)
    best_sum, best_prefix = -np.inf, 0
    for start in range(0, states, block):
        prefixes = np.arange(start, min(states, start + block))
        sums, _ = _dp_values(problem.tables, k, prefixes, record=False)
        where = int(np.argmax(sums))
        if sums[where] > best_sum:
            best_sum, best_prefix = float(sums[where]), int(prefixes[where])
    _, choices = _dp_values(problem.tables, k, np.array([best_prefix]), record=True)
    assignment = np.zeros(n, dtype=np.uint8)
    state = best_prefix
    for t in range(n - 1, -1, -1):
        window = state + (states if choices[t, 0, state] else 0)
        assignment[(t + k) % n] = window & 1
        state = window >> 1
    return problem.evaluate_one(assignment), assignment


def brute_force_optimum(problem: NKLandscape) -> Tuple[float, np.ndarray]:
    """Exact optimum of any NK landscape by enumerating all ``2**n`` candidates."""
    if problem.n > _ENUMERATION_CAP:
        raise ValueError(f"enumeration is limited to n <= {_ENUMERATION_CAP}; got n={problem.n}")
    return exhaustive_maximum(problem.evaluate, problem.n)


def nk_landscape(n: int = 20, k: int = 3, neighbourhood: str = "adjacent", seed: int = 0, solve="auto") -> NKLandscape:
    """A random NK landscape (Kauffman 1993).

    Parameters
    ----------
    n : int
        Number of variables.
    k : int
        Neighbours per variable (0 <= k < n).
    neighbourhood : {"adjacent", "random"}
        Cyclic next-k neighbours, or k distinct random others per variable.
    seed : int
        Seed of the generator (neighbours first, then the tables).
    solve : bool or "auto"
        Compute the exact optimum (DP if adjacent and cheaper, else enumeration); "auto": only if small.
    """
    if int(n) != n or n < 1:
        raise ValueError(f"n must be a positive integer; got {n!r}")
    if int(k) != k or not 0 <= k < n or k > MAX_K:
        raise ValueError(f"k must be an integer with 0 <= k < n and k <= {MAX_K}; got {k!r}")
    if neighbourhood not in NEIGHBOURHOODS:
        raise ValueError(f"neighbourhood must be one of {NEIGHBOURHOODS}; got {neighbourhood!r}")
    n, k = int(n), int(k)
    rng = np.random.default_rng(seed)
    if neighbourhood == "adjacent":
        neighbours = adjacent_neighbours(n, k)
    else:
        neighbours = random_neighbours(n, k, rng)
    tables = rng.random((n, 1 << (k + 1)))
    problem = NKLandscape(
        neighbours,
        tables,
        neighbourhood=neighbourhood,
        name=f"nk:n{n}-k{k}-{neighbourhood}-seed{seed}",
    )
    dp_work = n * 4**k if problem.is_adjacent else np.inf
    enumeration_work = n * (k + 1) * 2**n if n <= _ENUMERATION_CAP else np.inf
    use_dp = dp_work <= enumeration_work
    small = dp_work <= AUTO_DP_WORK if use_dp else n <= AUTO_BRUTE_FORCE_N
    if resolve_solve_option(solve, small):
        if use_dp:
            problem.optimum, _ = adjacent_optimum(problem)
            problem.optimum_source = "dynamic programming (Wright, Thompson & Zhang 2000)"
        else:
            problem.optimum, _ = brute_force_optimum(problem)
            problem.optimum_source = "enumeration of all 2**n candidates"
    return problem

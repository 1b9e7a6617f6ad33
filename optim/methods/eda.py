"""Estimation of distribution: sample, select the fittest, refit the model, repeat."""

from __future__ import annotations

import time
from typing import Optional

import numpy as np

from optim.methods.base import Method, StepOutcome, uniform_candidates
from optim.models import make_model

__all__ = ["DistributionSearch", "truncation_select", "survivor_count"]


def truncation_select(fitness: np.ndarray, fraction: float) -> np.ndarray:
    """Indices of the best ``ceil(fraction · len)`` entries (at least two), best first.

    Ties keep their original order (a stable sort), so selection is deterministic.

    References
    ----------
    H. Mühlenbein and D. Schlierkamp-Voosen, "Predictive models for the breeder
    genetic algorithm", Evolutionary Computation 1(1), 1993 (truncation selection).
    """
    return np.argsort(-fitness, kind="stable")[: survivor_count(fitness.shape[0], fraction)]


def survivor_count(count: int, fraction: float) -> int:
    """How many of ``count`` candidates :func:`truncation_select` keeps."""
    return min(count, max(2, int(np.ceil(fraction * count - 1e-9))))


class DistributionSearch(Method):
    """Generational estimation-of-distribution search with a pluggable model.

    Each step after the first: keep the fittest ``select`` fraction of the
    current pool (truncation selection), fit the model to them, sample new
    candidates and evaluate them. With ``elitism`` the kept candidates stay in
    the pool and only ``population − kept`` new ones are drawn; without it the
    pool is replaced by ``population`` new candidates.

    Parameters
    ----------
    problem, rng
        The objective and this method's random stream.
    model : {"tree", "forest", "univariate"}
        The probability model (see :mod:`optim.models`).
    population : int
        Pool size per generation.
    select : float
        Fraction of the pool kept as survivors, in (0, 1].
    prior : float
        Dirichlet pseudo-count of the model's probability tables.
    elitism : bool
        Whether survivors stay in the next pool.
    alpha : float
        Significance level of the forest's edge test.

    References
    ----------
    H. Mühlenbein and G. Paaß, "From recombination of genes to the estimation
    of distributions I. Binary parameters", PPSN IV, 1996 (the scheme, UMDA);
    S. Baluja and S. Davies, "Using optimal dependency-trees for combinatorial
    optimization", ICML 1997 (Chow-Liu trees inside the loop).
    """

    def __init__(
        self,
        problem,
        rng,
        model: str = "tree",
        population: int = 500,
        select: float = 0.5,
        prior: float = 1.0,
        elitism: bool = True,
        alpha: float = 0.01,
    ):
        super().__init__(problem, rng)
        self.name = model
        self.population = int(population)
        self.select = float(select)
        self.elitism = bool(elitism)
        options = {"alpha": alpha} if model == "forest" else {}
        self._model = make_model(model, problem.cardinality, prior=prior, **options)
        self.pool: Optional[np.ndarray] = None
        self._selection = (None, None)  # (the pool_fitness array it was made for, its survivors)
        self._fitted_on: Optional[int] = None
        self.pool_fitness: Optional[np.ndarray] = None
        self._converged = False

    def step(self, fitness, budget):
        if self.pool is None:
            return self._first_step(fitness, budget)
        seconds = {}
        start = time.perf_counter()
        kept = self.selected()
        survivors, survivor_fitness = self.pool[kept], self.pool_fitness[kept]
        self._converged = bool(np.all(survivors == survivors[:1]))
        self._model.fit(survivors)
        self._fitted_on = int(survivors.shape[0])
        seconds["fit"] = time.perf_counter() - start
        wanted = self.population - kept.shape[0] if self.elitism else self.population
        count = max(1, min(wanted, budget))
        start = time.perf_counter()
        X = self._model.sample(count, self.rng)
        seconds["sample"] = time.perf_counter() - start
        f = fitness(X)
        if self.elitism:
            self.pool = np.concatenate([survivors, X])
            self.pool_fitness = np.concatenate([survivor_fitness, f])
        else:
            self.pool, self.pool_fitness = X, f
        return StepOutcome(X, f, seconds)

    def _first_step(self, fitness, budget):
        count = min(self.population, budget)
        start = time.perf_counter()
        given = self.problem.initial_candidates()
        parts = []
        if given is not None:
            parts.append(np.asarray(given, dtype=np.uint8).reshape(-1, self.problem.n)[:count])
        parts.append(uniform_candidates(self.problem, count - sum(p.shape[0] for p in parts), self.rng))
        X = np.concatenate(parts)
        seconds = {"sample": time.perf_counter() - start}
        f = fitness(X)
        self.pool, self.pool_fitness = X, f
        return StepOutcome(X, f, seconds)

    def selected(self) -> np.ndarray:
        """Indices of the current pool's survivors (:func:`truncation_select`), made once per pool."""
        made_for, kept = self._selection
        if made_for is not self.pool_fitness:
            kept = truncation_select(self.pool_fitness, self.select)
            self._selection = (self.pool_fitness, kept)
        return kept

    @property
    def model_entropy(self):
        if not self._model.fitted:
            return float(np.log(self.problem.cardinality).sum())
        return self._model.entropy()

    @property
    def converged(self):
        return self._converged

    def model(self):
        return self._model if self._model.fitted else None

    @property
    def fitted_on(self):
        return self._fitted_on

    def get_state(self):
        state = {"converged": self._converged}
        if self.pool is not None:
            state["pool"] = self.pool.copy()
            state["pool_fitness"] = self.pool_fitness.copy()
        if self._model.fitted:
            state["model"] = self._model.get_state()
        return state

    def set_state(self, state):
        self._converged = bool(state.get("converged", False))
        self._fitted_on = None
        if "pool" in state:
            self.pool = np.asarray(state["pool"], dtype=np.uint8)
            self.pool_fitness = np.asarray(state["pool_fitness"], dtype=np.float64)
        if "model" in state:
            self._model.set_state(state["model"])

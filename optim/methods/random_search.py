"""Uniform random search: the baseline every method must beat."""

from __future__ import annotations

import numpy as np

from optim.methods.base import Method, StepOutcome, uniform_candidates

__all__ = ["RandomSearch"]


class RandomSearch(Method):
    """Draw ``population`` uniformly random candidates per step (common practice, no source)."""

    name = "random"

    def __init__(self, problem, rng, population: int = 100):
        super().__init__(problem, rng)
        self.population = int(population)

    def step(self, fitness, budget):
        X = uniform_candidates(self.problem, min(self.population, budget), self.rng)
        return StepOutcome(X, fitness(X))

    @property
    def model_entropy(self):
        return float(np.log(self.problem.cardinality).sum())

    def get_state(self):
        return {}

    def set_state(self, state):
        return None

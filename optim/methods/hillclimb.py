"""Random-restart first-improvement hill climbing."""

from __future__ import annotations

from typing import Optional

import numpy as np

from optim.methods.base import Method, StepOutcome, uniform_candidates

__all__ = ["HillClimber"]


class HillClimber(Method):
    """Random-restart hill climber over single-variable changes.

    From the current point, the neighbours (every change of one variable to
    another of its values) are tried in a fresh random order; the first one
    that is strictly better becomes the current point. When no neighbour is
    better (a local optimum), the climb restarts from a uniformly random point.
    Every neighbour tried counts as one evaluation (common practice, no source).

    For vectorised objectives the remaining neighbours are scored in growing
    batches, but only the neighbours a one-at-a-time climber would have tried
    (up to and including the first improvement) are kept and counted, so the
    run, its counts and its results are those of the sequential climber. For
    per-candidate objectives (external commands, Python functions) every
    candidate handed to the objective is counted; ``lookahead`` of them are
    scored at a time (1 = strictly sequential).

    Parameters
    ----------
    problem, rng
        The objective and this method's random stream.
    population : int
        Evaluations per driver step (so its log has the same grain as the others').
    lookahead : int
        Neighbours scored together for per-candidate objectives.
    """

    name = "hillclimb"

    def __init__(self, problem, rng, population: int = 100, lookahead: int = 1):
        super().__init__(problem, rng)
        self.population = int(population)
        self.lookahead = max(1, int(lookahead))
        card = problem.cardinality
        self._move_variable = np.repeat(np.arange(problem.n), card - 1)
        self._move_offset = np.concatenate([np.arange(1, k) for k in card]).astype(np.int64)
        self.current: Optional[np.ndarray] = None
        self.current_fitness = -np.inf
        self.order: Optional[np.ndarray] = None
        self.position = 0
        self.restarts = 0

    def _neighbours(self, moves: np.ndarray) -> np.ndarray:
        X = np.repeat(self.current[None, :], moves.shape[0], axis=0)
        var = self._move_variable[moves]
        rows = np.arange(moves.shape[0])
        card = self.problem.cardinality[var]
        X[rows, var] = ((X[rows, var].astype(np.int64) + self._move_offset[moves]) % card).astype(np.uint8)
        return X

    def _starting_point(self) -> np.ndarray:
        """The problem's first known configuration for the first climb, uniform random points after that."""
        given = self.problem.initial_candidates() if self.restarts == 0 else None
        if given is not None and len(given):
            return np.asarray(given, dtype=np.uint8).reshape(-1, self.problem.n)[:1].copy()
        return uniform_candidates(self.problem, 1, self.rng)

    def _adopt(self, x: np.ndarray, f: float):
        self.current, self.current_fitness = x.copy(), float(f)
        self.order = self.rng.permutation(self._move_variable.shape[0])
        self.position = 0

    def step(self, fitness, budget):
        limit = min(self.population, budget)
        used_X, used_f = [], []
        used = 0
        speculative = self.problem.vectorized
        batch = 8
        while used < limit:
            if self.current is None:
                x = self._starting_point()
                f = fitness(x)
                used_X.append(x)
                used_f.append(f)
                used += 1
                self._adopt(x[0], f[0])
                continue
            remaining = self.order.shape[0] - self.position
            width = min(remaining, limit - used, batch if speculative else self.lookahead)
            moves = self.order[self.position : self.position + width]
            X = self._neighbours(moves)
            f = fitness(X)
            better = np.flatnonzero(f > self.current_fitness)
            if better.size:
                taken = better[0] + 1 if speculative else width
                used_X.append(X[:taken])
                used_f.append(f[:taken])
                used += taken
                self._adopt(X[better[0]], f[better[0]])
                batch = 8
                continue
            used_X.append(X)
            used_f.append(f)
            used += width
            self.position += width
            batch *= 2
            if self.position >= self.order.shape[0]:
                self.current = None
                self.restarts += 1
        return StepOutcome(np.concatenate(used_X), np.concatenate(used_f))

    def get_state(self):
        state = {"restarts": self.restarts, "position": self.position}
        if self.current is not None:
            state.update(current=self.current.copy(), current_fitness=self.current_fitness, order=self.order.copy())
        return state

    def set_state(self, state):
        self.restarts = int(state["restarts"])
        self.position = int(state["position"])
        if "current" in state:
            self.current = np.asarray(state["current"], dtype=np.uint8)
            self.current_fitness = float(state["current_fitness"])
            self.order = np.asarray(state["order"], dtype=np.int64)
        else:
            self.current, self.order = None, None

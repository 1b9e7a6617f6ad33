"""A population size nobody has to guess: interleaved runs of doubling size under one budget."""

from __future__ import annotations

from typing import List, Optional

import numpy as np

from optim.methods.base import Method, StepOutcome
from optim.methods.eda import DistributionSearch, truncation_select

__all__ = ["PopulationLadder", "SMALLEST_POPULATION", "GENERATIONS_PER_RUNG", "STALL_GENERATIONS"]

#: Population of the first run; every new run doubles the largest one made so far.
SMALLEST_POPULATION = 32
#: The base ``m`` of the counter: a run of population ``N`` takes ``m - 1`` generations for every generation of
#: the run of population ``2N``. Harik & Lobo (1999) use 4 (from memory); 8 is used here because with an
#: elitist model-based search small runs keep creeping upwards instead of converging, and m = 8 spent fewer
#: evaluations than m = 4 on the benchmark problems of ``optim bench`` (see docs/bench.md).
GENERATIONS_PER_RUNG = 8
#: A run is dropped once the mean fitness of its survivors has not risen for this many of its generations.
STALL_GENERATIONS = 5


class PopulationLadder(Method):
    """Estimation-of-distribution runs of populations 32, 64, 128, … sharing one budget.

    The scheme of the parameter-less genetic algorithm (Harik & Lobo, 1999)
    applied to :class:`~optim.methods.eda.DistributionSearch`. Several runs
    are alive at once, each with twice the population of the one before; a
    counter in base ``m`` (:data:`GENERATIONS_PER_RUNG`) decides which run
    takes the next generation, so a run takes ``m − 1`` generations for every
    generation of the next larger run. When the counter carries past the
    largest run, a new run with twice the largest population so far starts
    (unless its first generation would not fit in the remaining budget).
    A run is dropped

    - when a larger run has a higher mean fitness (its pool is then no longer
      worth its evaluations, Harik & Lobo, 1999), together with every smaller run;
    - when its survivors have become identical (it has converged);
    - when the mean fitness of its survivors has not risen for
      :data:`STALL_GENERATIONS` of its generations (with elitism and a prior in
      the model tables such a run keeps sampling one unchanged model).

    Every step advances one run by one generation and returns what that
    generation evaluated, so the driver's budget counts every evaluation of
    every run. All runs draw from the one generator passed in.

    Parameters
    ----------
    problem, rng
        The objective and this method's random stream.
    model : {"tree", "forest", "univariate"}
        The model of every run.
    select, prior, elitism, alpha
        As for :class:`~optim.methods.eda.DistributionSearch`, the same for every run.
    smallest : int
        Population of the first run (at least 4).
    rung_ratio : int
        The base ``m`` of the counter (at least 2).
    stall : int
        Generations without a rise of the survivors' mean fitness after which a run is dropped.

    References
    ----------
    G. R. Harik and F. G. Lobo, "A parameter-less genetic algorithm", GECCO 1999.
    """

    def __init__(self, problem, rng, model: str = "tree", select: float = 0.5, prior: float = 1.0,
                 elitism: bool = True, alpha: float = 0.01, smallest: int = SMALLEST_POPULATION,
                 rung_ratio: int = GENERATIONS_PER_RUNG, stall: int = STALL_GENERATIONS):
        super().__init__(problem, rng)
        if int(smallest) != smallest or smallest < 4:
            raise ValueError(f"The 'smallest' parameter of PopulationLadder must be a whole number >= 4. "
                             f"Got {smallest!r} instead.")
        if int(rung_ratio) != rung_ratio or rung_ratio < 2:
            raise ValueError(f"The 'rung_ratio' parameter of PopulationLadder must be a whole number >= 2. "
                             f"Got {rung_ratio!r} instead.")
        if int(stall) != stall or stall < 1:
            raise ValueError(f"The 'stall' parameter of PopulationLadder must be a whole number >= 1. "
                             f"Got {stall!r} instead.")
        self.name = model
        self.model_kind = model
        self.select, self.prior, self.elitism, self.alpha = float(select), float(prior), bool(elitism), alpha
        self.smallest, self.rung_ratio, self.stall = int(smallest), int(rung_ratio), int(stall)
        self.runs: List[DistributionSearch] = []
        self.digits: List[int] = []
        self.survivor_means: List[float] = []
        self.stale: List[int] = []
        self.largest = 0
        self.started = 0
        self.dropped = 0

    # -- the runs ---------------------------------------------------------------------------------
    def _new_run(self, population: int) -> DistributionSearch:
        return DistributionSearch(self.problem, self.rng, model=self.model_kind, population=population,
                                  select=self.select, prior=self.prior, elitism=self.elitism, alpha=self.alpha)

    def _next_population(self) -> int:
        return self.smallest if self.largest == 0 else 2 * self.largest

    def _add_run(self) -> None:
        population = self._next_population()
        self.runs.append(self._new_run(population))
        self.digits.append(0)
        self.survivor_means.append(-np.inf)
        self.stale.append(0)
        self.largest = population
        self.started += 1

    def _next_run(self, budget: int) -> int:
        """Advance the base-m counter; the highest digit that changes names the run to step.

        A carry past the largest run starts a new run, unless its first generation would not fit in
        the remaining ``budget``: then the largest live run takes the generation.
        """
        index = 0
        while index < len(self.digits) and self.digits[index] + 1 == self.rung_ratio:
            self.digits[index] = 0
            index += 1
        if index == len(self.digits):
            if self.runs and self._next_population() > budget:
                index -= 1
            else:
                self._add_run()
        self.digits[index] += 1
        return index

    @staticmethod
    def _pool_mean(run: DistributionSearch) -> float:
        finite = run.pool_fitness[np.isfinite(run.pool_fitness)]
        return float(finite.mean()) if finite.size else -np.inf

    def _survivor_mean(self, run: DistributionSearch) -> float:
        kept = truncation_select(run.pool_fitness, self.select)
        finite = run.pool_fitness[kept][np.isfinite(run.pool_fitness[kept])]
        return float(finite.mean()) if finite.size else -np.inf

    def _update(self, index: int) -> None:
        run = self.runs[index]
        mean = self._survivor_mean(run)
        if mean > self.survivor_means[index]:
            self.survivor_means[index], self.stale[index] = mean, 0
        else:
            self.stale[index] += 1

    def _drop(self) -> None:
        """Remove dominated, converged and stalled runs."""
        means = [self._pool_mean(run) for run in self.runs]
        count = len(self.runs)
        keep = [True] * count
        best_above = -np.inf
        for index in range(count - 1, -1, -1):
            if best_above > means[index]:
                keep[:index + 1] = [False] * (index + 1)
                break
            best_above = max(best_above, means[index])
        for index, run in enumerate(self.runs):
            if run.converged or self.stale[index] >= self.stall:
                keep[index] = False
        if all(keep):
            return
        self.dropped += keep.count(False)
        for name in ("runs", "digits", "survivor_means", "stale"):
            setattr(self, name, [item for item, kept in zip(getattr(self, name), keep) if kept])

    # -- the Method interface ---------------------------------------------------------------------
    def step(self, fitness, budget):
        index = self._next_run(budget)
        outcome = self.runs[index].step(fitness, budget)
        self._update(index)
        self._drop()
        return StepOutcome(outcome.candidates, outcome.fitness, outcome.seconds)

    def _best_run(self) -> Optional[DistributionSearch]:
        """The live run with the highest mean fitness of its pool (the larger one on ties)."""
        best, best_mean = None, -np.inf
        for run in self.runs:
            if run.pool is None:
                continue
            mean = self._pool_mean(run)
            if best is None or mean >= best_mean:
                best, best_mean = run, mean
        return best

    @property
    def populations(self) -> List[int]:
        """Population of each live run, smallest first."""
        return [run.population for run in self.runs]

    @property
    def model_entropy(self):
        best = self._best_run()
        if best is None:
            return float(np.log(self.problem.cardinality).sum())
        return best.model_entropy

    def model(self):
        best = self._best_run()
        return None if best is None else best.model()

    def get_state(self):
        return {
            "smallest": self.smallest,
            "rung_ratio": self.rung_ratio,
            "stall": self.stall,
            "largest": self.largest,
            "started": self.started,
            "dropped": self.dropped,
            "populations": np.array(self.populations, dtype=np.int64),
            "digits": np.array(self.digits, dtype=np.int64),
            "survivor_means": np.array(self.survivor_means, dtype=np.float64),
            "stale": np.array(self.stale, dtype=np.int64),
            "runs": [run.get_state() for run in self.runs],
        }

    def set_state(self, state):
        self.smallest, self.rung_ratio = int(state["smallest"]), int(state["rung_ratio"])
        self.stall, self.largest = int(state["stall"]), int(state["largest"])
        self.started, self.dropped = int(state["started"]), int(state["dropped"])
        self.runs = []
        for population, run_state in zip(np.asarray(state["populations"]).tolist(), state["runs"]):
            run = self._new_run(int(population))
            run.set_state(run_state)
            self.runs.append(run)
        self.digits = [int(d) for d in np.asarray(state["digits"]).tolist()]
        self.survivor_means = [float(m) for m in np.asarray(state["survivor_means"]).tolist()]
        self.stale = [int(s) for s in np.asarray(state["stale"]).tolist()]

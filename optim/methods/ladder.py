"""A population size nobody has to guess: restarts with a doubled population under one budget."""

from __future__ import annotations

from typing import List, Optional

import numpy as np

from optim.methods.base import Method, StepOutcome
from optim.methods.eda import DistributionSearch, survivor_count

__all__ = ["PopulationLadder", "SMALLEST_POPULATION", "STALL_GENERATIONS", "RATE_WINDOW", "SLOW_RATE"]

#: Population of the first run; every later run doubles the one before.
SMALLEST_POPULATION = 32
#: A run ends once the mean fitness of its survivors has not risen for this many of its generations.
STALL_GENERATIONS = 5
#: The replacement rate is averaged over this many of a run's latest generations.
RATE_WINDOW = 5
#: A run ends once, on average over :data:`RATE_WINDOW` generations, fewer than this fraction of the
#: candidates a generation drew are kept by the next selection. Chosen on the problems of ``optim bench``
#: (0.1, 0.15, 0.2, 0.25, 0.3 and 0.35 were tried; 0.3 spent the fewest evaluations; see README).
SLOW_RATE = 0.3

#: Why a run ended, as recorded in :attr:`PopulationLadder.rungs`.
ENDINGS = ("converged", "stalled", "slow", "live")


class PopulationLadder(Method):
    """Estimation-of-distribution runs of populations 32, 64, 128, … one after another, under one budget.

    The first run has :data:`SMALLEST_POPULATION` candidates. When a run
    ends, the next one starts afresh (uniform random candidates) with twice
    the population. A run ends

    - when its survivors have become identical (*converged*);
    - when the mean fitness of its survivors has not risen for ``stall``
      generations (*stalled*);
    - with elitism, when it has become *slow*: averaged over its latest
      ``window`` generations, fewer than ``rate`` of the candidates a generation
      drew were good enough to be kept by the next selection. Such a run has
      stopped learning from its samples: with the prior in the model tables
      it creeps upwards by chance variations, which a larger population does
      at a fraction of the evaluations on most problems.

    Population sizing by restarts with an increasing population follows the
    restart strategy of Auger & Hansen (2005); the goal, a search with no
    population to set, is that of the parameter-less genetic algorithm of
    Harik & Lobo (1999), whose scheme runs the populations side by side. Run
    one after another, the population that first succeeds is close to the
    smallest that does, and the failed smaller runs before it cost about as
    much as it does together (each costs about half the next). The rule for
    slow runs is this project's.

    A run whose successor would not fit in the remaining budget goes on until
    the budget is spent. Every step advances the current run by one
    generation and returns what that generation evaluated, so the driver's
    budget counts every evaluation of every run.

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
    stall : int
        Generations without a rise of the survivors' mean fitness after which a run ends.
    window : int
        Generations over which the replacement rate is averaged.
    rate : float
        Replacement rate in [0, 1) below which a run ends as slow (0 disables the rule).

    References
    ----------
    A. Auger and N. Hansen, "A restart CMA evolution strategy with increasing
    population size", IEEE CEC 2005 (restarts with a doubled population);
    G. R. Harik and F. G. Lobo, "A parameter-less genetic algorithm", GECCO 1999.
    """

    def __init__(
        self,
        problem,
        rng,
        model: str = "tree",
        select: float = 0.5,
        prior: float = 1.0,
        elitism: bool = True,
        alpha: float = 0.01,
        smallest: int = SMALLEST_POPULATION,
        stall: int = STALL_GENERATIONS,
        window: int = RATE_WINDOW,
        rate: float = SLOW_RATE,
    ):
        super().__init__(problem, rng)
        for name, value, least in (("smallest", smallest, 4), ("stall", stall, 1), ("window", window, 1)):
            if isinstance(value, bool) or int(value) != value or value < least:
                raise ValueError(
                    f"The {name!r} parameter of PopulationLadder must be a whole number >= {least}. "
                    f"Got {value!r} instead."
                )
        if isinstance(rate, bool) or not 0.0 <= float(rate) < 1.0:
            raise ValueError(
                f"The 'rate' parameter of PopulationLadder must be a number in [0, 1). Got {rate!r} instead."
            )
        self.name = model
        self.model_kind = model
        self.select, self.prior, self.elitism, self.alpha = float(select), float(prior), bool(elitism), alpha
        self.smallest, self.stall, self.window, self.rate = int(smallest), int(stall), int(window), float(rate)
        self.run: Optional[DistributionSearch] = None
        self.survivor_mean = -np.inf
        self.stale = 0
        self.rates: List[float] = []
        self.rungs: List[dict] = []

    # -- the runs ---------------------------------------------------------------------------------
    @property
    def population(self) -> Optional[int]:
        """Population of the current run (``None`` before the first step)."""
        return None if self.run is None else self.run.population

    def _next_population(self) -> int:
        return self.smallest if self.run is None else 2 * self.run.population

    def ending(self) -> Optional[str]:
        """Why the current run should end (``"converged"``, ``"stalled"``, ``"slow"``), or ``None``."""
        if self.run is None or self.run.pool is None:
            return None
        if self.run.converged:
            return "converged"
        if self.stale >= self.stall:
            return "stalled"
        recent = self.rates[-self.window :]
        if self.rate > 0 and len(recent) == self.window and float(np.mean(recent)) < self.rate:
            return "slow"
        return None

    def _climb(self, reason: Optional[str]) -> None:
        if self.run is not None:
            self.rungs[-1]["ending"] = reason
        population = self._next_population()
        self.run = DistributionSearch(
            self.problem,
            self.rng,
            model=self.model_kind,
            population=population,
            select=self.select,
            prior=self.prior,
            elitism=self.elitism,
            alpha=self.alpha,
        )
        self.rungs.append({"population": population, "evaluations": 0, "ending": "live"})
        self.survivor_mean, self.stale, self.rates = -np.inf, 0, []

    def _observe(self, carried: int, drawn: int) -> None:
        """Update the stall count and the replacement rate after a generation that drew ``drawn`` candidates.

        The pool is the ``carried`` survivors of the previous selection followed by the ``drawn``
        new candidates; the rate is the share of those new candidates that the next selection keeps.
        """
        pool_fitness = self.run.pool_fitness
        kept = self.run.selected()
        values = pool_fitness[kept]
        values = values[np.isfinite(values)]
        mean = float(values.mean()) if values.size else -np.inf
        if mean > self.survivor_mean:
            self.survivor_mean, self.stale = mean, 0
        else:
            self.stale += 1
        if self.elitism and carried > 0 and drawn > 0:
            self.rates.append(float(np.count_nonzero(kept >= carried)) / drawn)
            del self.rates[: -self.window]

    # -- the Method interface ---------------------------------------------------------------------
    def step(self, fitness, budget):
        if self.run is None:
            self._climb(None)
        else:
            reason = self.ending()
            if reason is not None and self._next_population() <= budget:
                self._climb(reason)
        run = self.run
        carried = 0 if run.pool is None else survivor_count(run.pool.shape[0], self.select)
        outcome = run.step(fitness, budget)
        self.rungs[-1]["evaluations"] += outcome.evaluations
        self._observe(carried if run.elitism else 0, outcome.evaluations)
        return StepOutcome(outcome.candidates, outcome.fitness, outcome.seconds)

    @property
    def populations(self) -> List[int]:
        """Population of every run so far, the current one last."""
        return [rung["population"] for rung in self.rungs]

    @property
    def model_entropy(self):
        if self.run is None:
            return float(np.log(self.problem.cardinality).sum())
        return self.run.model_entropy

    def model(self):
        return None if self.run is None else self.run.model()

    @property
    def fitted_on(self):
        return None if self.run is None else self.run.fitted_on

    def get_state(self):
        state = {
            "smallest": self.smallest,
            "stall": self.stall,
            "window": self.window,
            "rate": self.rate,
            "survivor_mean": np.array([self.survivor_mean], dtype=np.float64),
            "stale": self.stale,
            "rates": np.array(self.rates, dtype=np.float64),
            "rung_populations": np.array([r["population"] for r in self.rungs], dtype=np.int64),
            "rung_evaluations": np.array([r["evaluations"] for r in self.rungs], dtype=np.int64),
            "rung_endings": np.array([ENDINGS.index(r["ending"]) for r in self.rungs], dtype=np.int64),
        }
        if self.run is not None:
            state["run"] = self.run.get_state()
        return state

    def set_state(self, state):
        self.smallest, self.stall = int(state["smallest"]), int(state["stall"])
        self.window, self.rate = int(state["window"]), float(state["rate"])
        self.survivor_mean = float(np.asarray(state["survivor_mean"], dtype=np.float64).reshape(-1)[0])
        self.stale = int(state["stale"])
        self.rates = [float(r) for r in np.asarray(state["rates"]).tolist()]
        self.rungs = [
            {"population": int(p), "evaluations": int(e), "ending": ENDINGS[int(k)]}
            for p, e, k in zip(
                np.asarray(state["rung_populations"]).tolist(),
                np.asarray(state["rung_evaluations"]).tolist(),
                np.asarray(state["rung_endings"]).tolist(),
                strict=False,
            )
        ]
        self.run = None
        if "run" in state:
            self.run = DistributionSearch(
                self.problem,
                self.rng,
                model=self.model_kind,
                population=self.rungs[-1]["population"],
                select=self.select,
                prior=self.prior,
                elitism=self.elitism,
                alpha=self.alpha,
            )
            self.run.set_state(state["run"])

"""Search methods that the driver in :mod:`optim.search` runs under one budget."""

from typing import Union

from optim.methods.base import Method, StepOutcome
from optim.methods.eda import DistributionSearch, truncation_select
from optim.methods.hillclimb import HillClimber
from optim.methods.ladder import PopulationLadder
from optim.methods.random_search import RandomSearch

__all__ = [
    "Method",
    "StepOutcome",
    "DistributionSearch",
    "HillClimber",
    "PopulationLadder",
    "RandomSearch",
    "METHODS",
    "learns_model",
    "AUTO",
    "AUTO_STEP",
    "make_method",
    "truncation_select",
]

#: The method names a run config accepts.
METHODS = ("tree", "forest", "univariate", "hillclimb", "random")

#: The methods that sample their candidates from a probability model fitted to the survivors.
_MODEL_METHODS = frozenset({"tree", "forest", "univariate"})


def learns_model(name: str) -> bool:
    """Whether the method called ``name`` samples its candidates from a fitted probability model."""
    return name in _MODEL_METHODS


#: The ``population`` value that asks for no fixed population: the model-based methods run a
#: :class:`PopulationLadder`; the hill climber and random search log every :data:`AUTO_STEP` evaluations.
AUTO = "auto"
AUTO_STEP = 100


def make_method(
    name: str,
    problem,
    rng,
    population: Union[int, str],
    select: float = 0.5,
    prior: float = 1.0,
    elitism: bool = True,
    alpha: float = 0.01,
    lookahead: int = 1,
) -> Method:
    """Build a method by name; an unknown name raises ``ValueError`` listing the valid ones.

    ``population="auto"`` gives the model-based methods a :class:`PopulationLadder` and the others
    a step of :data:`AUTO_STEP` evaluations.
    """
    if isinstance(population, str):
        if population != AUTO:
            raise ValueError(f"The population must be a whole number >= 2 or {AUTO!r}. Got {population!r} instead.")
        if name in ("tree", "forest", "univariate"):
            return PopulationLadder(problem, rng, model=name, select=select, prior=prior, elitism=elitism, alpha=alpha)
        population = AUTO_STEP
    if name in ("tree", "forest", "univariate"):
        return DistributionSearch(
            problem, rng, model=name, population=population, select=select, prior=prior, elitism=elitism, alpha=alpha
        )
    if name == "hillclimb":
        return HillClimber(problem, rng, population=population, lookahead=lookahead)
    if name == "random":
        return RandomSearch(problem, rng, population=population)
    raise ValueError(f"Unknown method {name!r}; choose one of {list(METHODS)}.")

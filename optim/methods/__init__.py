"""Search methods that the driver in :mod:`optim.search` runs under one budget."""

from optim.methods.base import Method, StepOutcome
from optim.methods.eda import DistributionSearch, truncation_select
from optim.methods.hillclimb import HillClimber
from optim.methods.random_search import RandomSearch

__all__ = ["Method", "StepOutcome", "DistributionSearch", "HillClimber", "RandomSearch", "METHODS", "make_method",
           "truncation_select"]

#: The method names a run config accepts.
METHODS = ("tree", "forest", "univariate", "hillclimb", "random")


def make_method(name: str, problem, rng, population: int, select: float = 0.5, prior: float = 1.0,
                elitism: bool = True, alpha: float = 0.01, lookahead: int = 1) -> Method:
    """Build a method by name; an unknown name raises ``ValueError`` listing the valid ones."""
    if name in ("tree", "forest", "univariate"):
        return DistributionSearch(problem, rng, model=name, population=population, select=select, prior=prior,
                                  elitism=elitism, alpha=alpha)
    if name == "hillclimb":
        return HillClimber(problem, rng, population=population, lookahead=lookahead)
    if name == "random":
        return RandomSearch(problem, rng, population=population)
    raise ValueError(f"Unknown method {name!r}; choose one of {list(METHODS)}.")

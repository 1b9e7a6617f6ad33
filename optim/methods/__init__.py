"""Search methods that the driver in :mod:`optim.search` runs under one budget."""

from optim.methods.base import Method, StepOutcome
from optim.methods.eda import DistributionSearch, truncation_select
from optim.methods.hillclimb import HillClimber
from optim.methods.ladder import PopulationLadder
from optim.methods.random_search import RandomSearch
from optim.methods.registry import (
    AUTO,
    AUTO_STEP,
    METHOD_SPECS,
    METHODS,
    MethodSpec,
    checked_population,
    learns_model,
    make_method,
    method_spec,
)

__all__ = [
    "Method",
    "StepOutcome",
    "DistributionSearch",
    "HillClimber",
    "PopulationLadder",
    "RandomSearch",
    "MethodSpec",
    "METHOD_SPECS",
    "METHODS",
    "AUTO",
    "AUTO_STEP",
    "method_spec",
    "learns_model",
    "checked_population",
    "make_method",
    "truncation_select",
]

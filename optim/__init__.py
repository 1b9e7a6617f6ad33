"""optim: estimation-of-distribution search for discrete black-box problems."""

__version__ = "0.1.0"

from optim.api import maximize, minimize, optimize
from optim.evaluation.evaluator import Evaluator
from optim.models import DependencyForest, DependencyTree, Univariate
from optim.problem import FunctionProblem, Problem
from optim.search import Search, SearchResult, SearchSettings, StopRules

__all__ = [
    "__version__",
    "maximize",
    "minimize",
    "optimize",
    "Problem",
    "FunctionProblem",
    "Search",
    "SearchSettings",
    "StopRules",
    "SearchResult",
    "Evaluator",
    "Univariate",
    "DependencyTree",
    "DependencyForest",
]

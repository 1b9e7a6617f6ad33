"""Objectives: the problem registry, user objectives loaded from code, external commands.

:mod:`optim.objectives.registry` maps short names to factories (the benchmark and
scheduling families of :mod:`optim_problems` are imported only when first used);
:mod:`optim.objectives.loader` turns ``path/to/file.py:callable`` or
``package.module:callable`` into a problem; :mod:`optim.objectives.command` scores
candidates by running an external program.
"""

from optim.objectives.loader import (
    REQUIRED,
    FactoryParameter,
    ProblemError,
    build_problem,
    factory_parameters,
    load_object,
)
from optim.objectives.registry import PROBLEMS, available, get_factory, make_problem

__all__ = [
    "PROBLEMS",
    "ProblemError",
    "FactoryParameter",
    "REQUIRED",
    "available",
    "get_factory",
    "factory_parameters",
    "make_problem",
    "build_problem",
    "load_object",
]

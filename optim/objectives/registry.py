"""Benchmark problems, the problem registry, and loading user objectives.

:data:`PROBLEMS` maps each short name to its factory, written as
``"module:callable"`` and imported only when first used; registering a
problem is one line. :func:`make_problem` builds a problem from a registered
name or from a reference to user code (see :mod:`optim.objectives.loader`).
"""

from __future__ import annotations

import difflib
import importlib
from typing import Any, Callable, Mapping, Optional

from optim.problem import Problem

from optim.objectives.loader import (
    REQUIRED,
    FactoryParameter,
    ProblemError,
    build_problem,
    factory_parameters,
    load_object,
)

__all__ = [
    "PROBLEMS",
    "ProblemError",
    "FactoryParameter",
    "REQUIRED",
    "available",
    "get_factory",
    "factory_parameters",
    "make_problem",
]

#: Short name -> factory, as ``"module:callable"`` (or the callable itself).
PROBLEMS: dict[str, Any] = {
    "onemax": "optim_problems.onemax:onemax",
    "trap": "optim_problems.trap:trap",
    "four-peaks": "optim_problems.fourpeaks:four_peaks",
    "hiff": "optim_problems.hiff:hiff",
    "ising-ring": "optim_problems.ising:ising_ring",
    "machine-assignment": "optim_problems.scheduling:machine_assignment",
    "staff-roster": "optim_problems.rostering:staff_roster",
    "service-latency": "optim_problems.service_demo:service_latency",
    "max-sat": "optim_problems.maxsat:max_sat",
    "max-cut": "optim_problems.maxcut:max_cut",
    "knapsack": "optim_problems.knapsack:knapsack",
    "nk": "optim_problems.nk:nk_landscape",
    "command": "optim.objectives.command:command",
}


def available() -> list[str]:
    """The registered problem names, sorted."""
    return sorted(PROBLEMS)


def get_factory(name: str) -> Callable:
    """The factory registered under ``name``.

    Parameters
    ----------
    name : str
        A name from :func:`available`.

    Returns
    -------
    callable
        The factory (a function or Problem subclass).

    Raises
    ------
    ProblemError
        When ``name`` is not registered; the message lists the valid names
        and the nearest one.
    """
    if not isinstance(name, str) or name not in PROBLEMS:
        names = available()
        close = difflib.get_close_matches(str(name), names, n=1, cutoff=0.5)
        hint = f"did you mean {close[0]!r}? " if close else ""
        raise ProblemError(
            f"unknown problem {name!r}; {hint}known problems: {', '.join(names)} "
            f"(or use 'path/to/file.py:callable' or 'package.module:callable')"
        )
    entry = PROBLEMS[name]
    if not isinstance(entry, str):
        return entry
    module_name, attribute = entry.split(":", 1)
    return getattr(importlib.import_module(module_name), attribute)


def make_problem(use: str, params: Optional[Mapping[str, Any]] = None, base_dir=None) -> Problem:
    """Build a problem from a registered name or a reference to user code.

    Parameters
    ----------
    use : str
        A registered name (see :func:`available`), ``path/to/file.py:callable``
        or ``package.module:callable``.
    params : mapping or None
        Parameters of the problem.
    base_dir : str, pathlib.Path or None
        Folder that a relative file path is resolved against (the folder of
        the configuration file); the current directory when ``None``.

    Returns
    -------
    Problem
        The built problem. A registered name is always a factory. How a loaded
        object is used (a Problem instance, a Problem subclass, a factory, or
        a plain objective function marked by ``n`` in ``params``) is set out
        in :func:`optim.objectives.loader.build_problem`.

    Raises
    ------
    ProblemError
        With a one-line message for every loading or parameter mistake.
    """
    if not isinstance(use, str) or not use.strip():
        raise ProblemError(f"a problem must be named by a non-empty string; got {use!r}")
    use = use.strip()
    if use in PROBLEMS or ":" not in use:
        return build_problem(get_factory(use), params, label=use, plain_functions=False)
    return build_problem(load_object(use, base_dir), params, label=use)

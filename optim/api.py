"""The Python entry points: :func:`maximize` and :func:`minimize`."""

from __future__ import annotations

from typing import Callable, Optional, Union

from optim.problem import FunctionProblem, Problem
from optim.search import Search, SearchResult, SearchSettings, StopRules

__all__ = ["maximize", "minimize", "optimize"]


def optimize(
    objective: Union[Problem, Callable],
    n: Optional[int] = None,
    goal: Optional[str] = None,
    method: str = "tree",
    *,
    cardinality=None,
    vectorized: bool = False,
    population: Union[int, str] = SearchSettings.population,
    select: float = SearchSettings.select,
    prior: float = SearchSettings.prior,
    elitism: bool = SearchSettings.elitism,
    alpha: float = SearchSettings.alpha,
    jobs: int = SearchSettings.jobs,
    cache: Optional[bool] = SearchSettings.cache,
    timeout: Optional[float] = SearchSettings.timeout,
    dask: Optional[str] = SearchSettings.dask,
    budget: int = StopRules.evaluations,
    target="optimum",
    patience: Optional[int] = None,
    collapse: bool = True,
    max_failures: Optional[float] = StopRules.max_failures,
    seed: int = 0,
    on_generation=None,
) -> SearchResult:
    """Search for the best candidate of ``objective``.

    ``objective`` is a :class:`~optim.problem.Problem`, or a function scoring
    one candidate (a ``uint8`` array of length ``n``), or, with
    ``vectorized=True``, a function scoring a ``(count, n)`` population.
    For a Problem, ``goal`` (when given) must agree with the problem's own.
    The other parameters are those of :class:`~optim.search.SearchSettings`
    and :class:`~optim.search.StopRules` (``budget`` is ``evaluations``).
    """
    if isinstance(objective, Problem):
        problem = objective
        if goal is not None and goal != problem.goal:
            raise ValueError(f"The problem {problem.name!r} is to be {problem.goal}d, not {goal}d.")
    else:
        if n is None:
            raise ValueError("The 'n' parameter is required when the objective is a plain function.")
        problem = FunctionProblem(objective, n, cardinality=cardinality, goal=goal or "maximize", vectorized=vectorized)
    settings = SearchSettings(
        method=method,
        population=population,
        select=select,
        prior=prior,
        elitism=elitism,
        alpha=alpha,
        jobs=jobs,
        cache=cache,
        timeout=timeout,
        dask=dask,
    )
    stop = StopRules(evaluations=budget, target=target, patience=patience, collapse=collapse, max_failures=max_failures)
    search = Search(problem, settings, stop, seed=seed)
    with search.evaluator:  # worker processes or a cluster connection live as long as the search
        return search.run(on_generation)


def maximize(objective, n=None, method: str = "tree", **options) -> SearchResult:
    """Maximise ``objective``; see :func:`optimize` for the options."""
    return optimize(objective, n, "maximize", method, **options)


def minimize(objective, n=None, method: str = "tree", **options) -> SearchResult:
    """Minimise ``objective``; see :func:`optimize` for the options."""
    return optimize(objective, n, "minimize", method, **options)

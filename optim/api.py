"""The Python entry points: :func:`maximize` and :func:`minimize`."""

from __future__ import annotations

from typing import Callable, Optional, Union

from optim.errors import ParameterError
from optim.problem import FunctionProblem, Problem
from optim.search import SearchResult, SearchSettings, StopRules, run_search

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

    Every value is checked before the search starts: a broken rule raises a ``ValueError``
    (:class:`~optim.errors.ParameterError`) whose one line names the parameter, what it must be and
    what was given.

    Parameters
    ----------
    objective : Problem or callable
        A :class:`~optim.problem.Problem`, or a function scoring one candidate (a ``uint8`` array of
        length ``n``), or, with ``vectorized=True``, a function scoring a ``(count, n)`` population.
    n : int or None
        Number of variables (>= 1); required for a function, ignored for a Problem.
    goal : {"maximize", "minimize"} or None
        Direction of optimisation; for a function ``None`` means ``"maximize"``, for a Problem it
        must agree with the problem's own goal when given.
    method : str
        One of the registered methods (:data:`optim.methods.METHODS`).
    cardinality : int, sequence of int or None
        Number of values of each variable of a function (2 when ``None``).
    vectorized : bool
        Whether the function scores a whole population in one call.
    population : int or "auto"
        As for :class:`~optim.search.SearchSettings`.
    select : float
        As for :class:`~optim.search.SearchSettings`.
    prior : float
        As for :class:`~optim.search.SearchSettings`.
    elitism : bool
        As for :class:`~optim.search.SearchSettings`.
    alpha : float
        As for :class:`~optim.search.SearchSettings`.
    jobs : int
        As for :class:`~optim.search.SearchSettings`.
    cache : bool or None
        As for :class:`~optim.search.SearchSettings`.
    timeout : float or None
        As for :class:`~optim.search.SearchSettings`.
    dask : str or None
        As for :class:`~optim.search.SearchSettings`.
    budget : int
        The evaluation budget (>= 1), never exceeded (``evaluations`` of :class:`~optim.search.StopRules`).
    target : float, "optimum" or None
        As for :class:`~optim.search.StopRules`.
    patience : int or None
        As for :class:`~optim.search.StopRules`.
    collapse : bool
        As for :class:`~optim.search.StopRules`.
    max_failures : float or None
        As for :class:`~optim.search.StopRules`.
    seed : int
        The single seed every random draw of the run flows from.
    on_generation : callable or None
        ``on_generation(search, record)`` is called after every generation with the
        :class:`~optim.search.Search` and its log record.

    Returns
    -------
    SearchResult
        The best candidate, its score, the counts and the history of the run.
    """
    if isinstance(objective, Problem):
        problem = objective
        if goal is not None and goal != problem.goal:
            raise ValueError(f"The problem {problem.name!r} is to be {problem.goal}d, not {goal}d.")
    else:
        if n is None:
            raise ParameterError("n", "a whole number >= 1 (required when the objective is a plain function)", n)
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
    try:
        stop = StopRules(
            evaluations=budget, target=target, patience=patience, collapse=collapse, max_failures=max_failures
        )
    except ParameterError as error:
        raise (error.renamed("budget") if error.parameter == "evaluations" else error) from None
    return run_search(problem, settings, stop, seed, on_generation)


def maximize(objective, n=None, method: str = "tree", **options) -> SearchResult:
    """Maximise ``objective``: :func:`optimize` with ``goal="maximize"``.

    Parameters
    ----------
    objective : Problem or callable
        As for :func:`optimize`.
    n : int or None
        As for :func:`optimize`.
    method : str
        As for :func:`optimize`.
    **options
        Any keyword of :func:`optimize` (``population``, ``budget``, ``seed``, ...).

    Returns
    -------
    SearchResult
        As for :func:`optimize`.
    """
    return optimize(objective, n, "maximize", method, **options)


def minimize(objective, n=None, method: str = "tree", **options) -> SearchResult:
    """Minimise ``objective``: :func:`optimize` with ``goal="minimize"``.

    Parameters
    ----------
    objective : Problem or callable
        As for :func:`optimize`.
    n : int or None
        As for :func:`optimize`.
    method : str
        As for :func:`optimize`.
    **options
        Any keyword of :func:`optimize` (``population``, ``budget``, ``seed``, ...).

    Returns
    -------
    SearchResult
        As for :func:`optimize`.
    """
    return optimize(objective, n, "minimize", method, **options)

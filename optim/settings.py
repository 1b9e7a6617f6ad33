"""How to search and when to stop: the settings of a run, each value checked when it is made.

:class:`SearchSettings` (the method and its parameters) and :class:`StopRules` (the budget and the
stop rules) are the one place where every entry path's parameters are checked: the Python API
builds them from keywords, run and sweep configs from YAML (adding file, line and key to the
message), so one rule has one home and one message format.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Optional, Union

from optim.errors import ParameterError
from optim.methods import METHODS, checked_population
from optim.parameters import flag, one_of, or_none, real_number, text, whole_number

__all__ = ["SearchSettings", "StopRules"]


@dataclass
class SearchSettings:
    """How to search. These defaults are the documented defaults of run configs.

    Every value is checked when the settings are made (a broken rule raises
    :class:`~optim.errors.ParameterError`, a ``ValueError`` naming the parameter) and kept in its plain
    Python type (``select=1`` becomes ``1.0``).

    Parameters
    ----------
    method : str
        One of the registered methods (:data:`optim.methods.METHODS`): ``tree``, ``forest``,
        ``univariate``, ``hillclimb``, ``random``.
    population : int or "auto"
        Candidates per generation (for the hill climber and random search: evaluations per logged step).
        ``"auto"`` (the default) runs populations of doubling size one after another under the one
        budget, each until it converges, stalls or stops learning from its samples
        (:class:`optim.methods.ladder.PopulationLadder`); for the hill climber and random search it
        logs every 100 evaluations.
    select : float
        Fraction of the pool kept by truncation selection, in (0, 1].
    prior : float
        Dirichlet pseudo-count in the model's probability tables, >= 0.
    elitism : bool
        Keep the selected candidates in the next generation's pool.
    alpha : float
        Significance level of the forest's edge test, in (0, 1).
    jobs : int
        Parallel workers for per-candidate objectives, >= 1 (for such objectives the hill climber
        scores this many neighbours at a time).
    cache : bool or None
        Serve repeated candidates from a cache; ``None`` lets the problem decide
        (``Problem.cache_by_default``, true for external commands). The budget still counts every candidate the
        method asks for, so a cache never changes a run's course; the objective calls saved
        are reported as ``cache_hits`` beside ``objective_calls``.
    timeout : float or None
        Seconds (> 0) one per-candidate evaluation may take; a longer one is stopped and recorded as a
        ``timeout`` failure (the evaluations then run in worker processes, even with ``jobs = 1``).
    dask : str or None
        Evaluate on a Dask cluster: a scheduler address (``tcp://host:8786``) or ``"local"`` for a
        local cluster of ``max(jobs, 2)`` workers that lives as long as the run.
    """

    method: str = "tree"
    population: Union[int, str] = "auto"
    select: float = 0.5
    prior: float = 1.0
    elitism: bool = True
    alpha: float = 0.01
    jobs: int = 1
    cache: Optional[bool] = None
    timeout: Optional[float] = None
    dask: Optional[str] = None

    def __post_init__(self):
        self.method = one_of("method", self.method, METHODS)
        self.population = checked_population(self.population)
        self.select = real_number("select", self.select, 0, 1, low_open=True)
        self.prior = real_number("prior", self.prior, 0)
        self.elitism = flag("elitism", self.elitism)
        self.alpha = real_number("alpha", self.alpha, 0, 1, low_open=True, high_open=True)
        self.jobs = whole_number("jobs", self.jobs, least=1)
        self.cache = or_none(flag, "cache", self.cache, "the problem decides")
        self.timeout = or_none(real_number, "timeout", self.timeout, "no limit", low=0, low_open=True)
        self.dask = or_none(text, "dask", self.dask, "evaluate on this machine")


_TARGET_RULE = "a number, 'optimum' (the problem's known optimum) or None/null (no target)"
_FAILURES_RULE = (
    "a whole number of failures (>= 1) or a fraction of the evaluations in [0, 1), "
    "or None/null (never stop for failures)"
)


def _checked_target(target) -> Union[float, str, None]:
    if target is None or (isinstance(target, str) and target == "optimum"):
        return target
    try:
        return real_number("target", target)
    except ParameterError:
        raise ParameterError("target", _TARGET_RULE, target) from None


def _checked_failure_limit(limit) -> Union[int, float, None]:
    if limit is None:
        return None
    try:
        limit = real_number("max_failures", limit, 0)
    except ParameterError:
        raise ParameterError("max_failures", _FAILURES_RULE, limit) from None
    if limit < 1:
        return limit
    if not limit.is_integer():
        raise ParameterError("max_failures", _FAILURES_RULE, limit)
    return int(limit)


@dataclass
class StopRules:
    """When to stop; the first rule that holds ends the run.

    Every value is checked when the rules are made (a broken rule raises
    :class:`~optim.errors.ParameterError`, a ``ValueError`` naming the parameter).

    Parameters
    ----------
    evaluations : int
        The evaluation budget (>= 1), never exceeded.
    target : float, "optimum" or None
        Stop once a score at least this good is found; ``"optimum"`` uses the
        problem's known optimum (no target when it has none); ``None`` disables.
    patience : int or None
        Stop after this many (>= 1) generations without improvement of the best score.
    collapse : bool
        Stop when the selected candidates are all identical.
    max_failures : float or None
        Stop when more evaluations than this have failed: a whole number >= 1 is
        a count, a number in [0, 1) a fraction of the evaluations so far (checked
        from the 20th evaluation on); ``None`` never stops for failures.
    """

    evaluations: int = 100_000
    target: Union[float, str, None] = "optimum"
    patience: Optional[int] = None
    collapse: bool = True
    max_failures: Optional[float] = 0.5

    def __post_init__(self):
        self.evaluations = whole_number("evaluations", self.evaluations, least=1)
        self.target = _checked_target(self.target)
        self.patience = or_none(whole_number, "patience", self.patience, "no patience rule", least=1)
        self.collapse = flag("collapse", self.collapse)
        self.max_failures = _checked_failure_limit(self.max_failures)

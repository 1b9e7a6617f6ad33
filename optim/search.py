"""The search driver: one loop, one budget, any method.

:class:`Search` holds the whole state of a run explicitly and advances it one
generation per :meth:`Search.step`, so a run can be checkpointed and resumed.
Every method runs under the same accounting: each candidate handed to the
objective is one evaluation, and the evaluation budget is a hard cap.
The goal (maximise or minimise) is handled here and only here: methods see a
*fitness* that is always to be maximised.
"""

from __future__ import annotations

import time
from contextlib import contextmanager
from dataclasses import dataclass, field
from typing import Callable, Iterator, List, Optional

import numpy as np

from optim.evaluation import Evaluator, candidate_text
from optim.methods import make_method
from optim.problem import Problem
from optim.settings import SearchSettings, StopRules

__all__ = ["SearchSettings", "StopRules", "SearchResult", "Search", "STOP_REASONS", "open_search", "run_search"]

#: Why a run ended.
STOP_REASONS = {
    "target": "reached the target score",
    "budget": "used the whole evaluation budget",
    "patience": "no improvement for `patience` generations",
    "collapsed": "the selected candidates became identical (the model collapsed)",
    "failures": "too many evaluations failed (stop.max_failures); the objective looks broken",
}


@dataclass
class SearchResult:
    """What a finished search returns.

    Parameters
    ----------
    best_solution : numpy.ndarray
        The best candidate found, a ``uint8`` array of length ``n``.
    best_score : float
        Its score (``nan`` when every evaluation failed).
    evaluations : int
        Candidates evaluated, each counted once (repeats served from the cache included).
    generations : int
        Steps of the method.
    stop_reason : str
        Why the run ended: a key of :data:`STOP_REASONS`, or ``"running"``.
    evaluations_to_target : int or None
        The evaluation at which the target was first reached; ``None`` when it was not.
    target : float or None
        The target score the run used.
    seed : int
        The run's seed.
    method : str
        The method's name.
    history : list of dict
        One log record per generation (see :meth:`Search.step`).
    model : object
        The last probability model of a model-based method, otherwise ``None``.
    failures : int
        Evaluations that failed (no score).
    cache_hits : int
        Evaluations served from the cache.
    objective_calls : int
        Candidates the objective itself scored.
    """

    best_solution: np.ndarray
    best_score: float
    evaluations: int
    generations: int
    stop_reason: str
    evaluations_to_target: Optional[int]
    target: Optional[float]
    seed: int
    method: str
    history: List[dict] = field(default_factory=list)
    model: object = None
    failures: int = 0
    cache_hits: int = 0
    objective_calls: int = 0

    @property
    def solution_text(self) -> str:
        """The best candidate written as text (see :func:`optim.evaluation.evaluator.candidate_text`)."""
        return candidate_text(self.best_solution)

    def to_dict(self) -> dict:
        """The JSON-friendly summary written as ``result.json``.

        Returns
        -------
        dict
            The fields of the result except ``history`` and ``model``; the solution as text.
        """
        return {
            "best_score": self.best_score if np.isfinite(self.best_score) else None,
            "best_solution": self.solution_text,
            "evaluations": self.evaluations,
            "generations": self.generations,
            "stop_reason": self.stop_reason,
            "evaluations_to_target": self.evaluations_to_target,
            "target": self.target,
            "seed": self.seed,
            "method": self.method,
            "failures": self.failures,
            "cache_hits": self.cache_hits,
            "objective_calls": self.objective_calls,
        }


def _resolve_target(target, problem: Problem) -> Optional[float]:
    return problem.optimum if target == "optimum" else target


class Search:
    """A run of one method on one problem, advanced one generation at a time.

    Parameters
    ----------
    problem : Problem
        The objective.
    settings : SearchSettings
        Method and its parameters.
    stop : StopRules
        When to stop.
    seed : int
        The single seed every random draw of the run flows from
        (``numpy.random.SeedSequence(seed)``).
    evaluator : Evaluator, optional
        Provide one to share a cache or a parallel backend; built from
        ``settings`` otherwise.

    Attributes
    ----------
    last_candidates : numpy.ndarray
        The candidates the latest step evaluated, in evaluation order.
    last_scores : numpy.ndarray
        Their scores (``nan`` for a failed evaluation).
    """

    def __init__(
        self,
        problem: Problem,
        settings: Optional[SearchSettings] = None,
        stop: Optional[StopRules] = None,
        seed: int = 0,
        evaluator: Optional[Evaluator] = None,
    ):
        self.problem = problem
        self.settings = settings or SearchSettings()
        self.stop = stop or StopRules()
        self.seed = int(seed)
        method_stream = np.random.SeedSequence(self.seed).spawn(1)[0]
        self.rng = np.random.Generator(np.random.PCG64(method_stream))
        s = self.settings
        self.method = make_method(
            s.method,
            problem,
            self.rng,
            population=s.population,
            select=s.select,
            prior=s.prior,
            elitism=s.elitism,
            alpha=s.alpha,
            jobs=s.jobs,
        )
        cache = problem.cache_by_default if s.cache is None else s.cache
        self.evaluator = evaluator or Evaluator(problem, jobs=s.jobs, cache=bool(cache), timeout=s.timeout, dask=s.dask)
        self.sign = 1.0 if problem.goal == "maximize" else -1.0
        self.target = _resolve_target(self.stop.target, problem)
        self.generation = 0
        self.evaluations = 0
        self.best_fitness = -np.inf
        self.best_solution: Optional[np.ndarray] = None
        self.evaluations_to_target: Optional[int] = None
        self.stale_generations = 0
        self.stop_reason: Optional[str] = None
        self.history: List[dict] = []
        self.elapsed = 0.0
        self._evaluate_seconds = 0.0
        self.last_candidates = np.zeros((0, problem.n), dtype=np.uint8)
        self.last_scores = np.zeros(0)

    # -- the goal lives here ------------------------------------------------------------------
    def _fitness(self, X: np.ndarray) -> np.ndarray:
        start = time.perf_counter()
        scores = self.evaluator(X)
        self._evaluate_seconds += time.perf_counter() - start
        return self.sign * scores

    def _score(self, fitness: float) -> float:
        return float(self.sign * fitness)

    def _meets_target(self, fitness: np.ndarray) -> np.ndarray:
        target_fitness = self.sign * self.target
        tolerance = 1e-9 * max(1.0, abs(self.target))
        return fitness >= target_fitness - tolerance

    # -- stepping -----------------------------------------------------------------------------
    @property
    def finished(self) -> bool:
        """``True`` once a stop rule has held."""
        return self.stop_reason is not None

    def step(self) -> dict:
        """Run one generation and return its log record.

        Returns
        -------
        dict
            The generation's record: ``generation``, ``evaluations``, ``best``, ``mean``,
            ``generation_best``, ``model_entropy``, ``population``, ``failures``, ``cache_hits``,
            ``objective_calls``, ``seconds`` and the split of its time (``time``).
        """
        if self.finished:
            raise RuntimeError(f"the search has already stopped ({self.stop_reason})")
        started = time.perf_counter()
        self._evaluate_seconds = 0.0
        budget = self.stop.evaluations - self.evaluations
        outcome = self.method.step(self._fitness, budget)
        fitness = outcome.fitness
        self.last_candidates = outcome.candidates
        self.last_scores = np.where(np.isfinite(fitness), self.sign * fitness, np.nan)
        before = self.evaluations
        self.evaluations += outcome.evaluations
        if self.evaluations > self.stop.evaluations:
            raise RuntimeError("a method exceeded the evaluation budget")  # a bug, never the user's fault
        improved = False
        if fitness.size:
            best_here = int(np.argmax(fitness))
            if fitness[best_here] > self.best_fitness or self.best_solution is None:
                self.best_fitness = float(fitness[best_here])
                self.best_solution = outcome.candidates[best_here].copy()
                improved = True
            if self.target is not None and self.evaluations_to_target is None:
                hits = np.flatnonzero(self._meets_target(fitness))
                if hits.size:
                    self.evaluations_to_target = before + int(hits[0]) + 1
        self.stale_generations = 0 if improved else self.stale_generations + 1
        finite = fitness[np.isfinite(fitness)]
        entropy = self.method.model_entropy
        seconds = dict(outcome.seconds)
        seconds["evaluate"] = self._evaluate_seconds
        self.elapsed += time.perf_counter() - started
        record = {
            "generation": self.generation,
            "evaluations": self.evaluations,
            "best": self._score(self.best_fitness) if np.isfinite(self.best_fitness) else None,
            "mean": self._score(float(finite.mean())) if finite.size else None,
            "generation_best": self._score(float(finite.max())) if finite.size else None,
            "model_entropy": None if entropy is None else float(entropy),
            "population": getattr(self.method, "population", None),
            "failures": self.evaluator.failure_count,
            "cache_hits": self.evaluator.cache_hits,
            "objective_calls": self.evaluator.calls,
            "seconds": round(self.elapsed, 6),
            "time": {k: round(v, 6) for k, v in seconds.items()},
        }
        self.history.append(record)
        self.generation += 1
        self.stop_reason = self._check_stop()
        return record

    def _check_stop(self) -> Optional[str]:
        if self.evaluations_to_target is not None:
            return "target"
        if self.evaluations >= self.stop.evaluations:
            return "budget"
        if self.stop.patience is not None and self.stale_generations >= self.stop.patience:
            return "patience"
        if self.stop.collapse and self.method.converged:
            return "collapsed"
        limit, failed = self.stop.max_failures, self.evaluator.failure_count
        if limit is not None and failed:
            if limit >= 1 and failed > limit:
                return "failures"
            if limit < 1 and self.evaluations >= 20 and failed > limit * self.evaluations:
                return "failures"
        return None

    def run(self, on_generation: Optional[Callable[["Search", dict], None]] = None) -> SearchResult:
        """Step until a stop rule holds.

        Parameters
        ----------
        on_generation : callable or None
            Called as ``on_generation(search, record)`` after each step.

        Returns
        -------
        SearchResult
            The outcome of the run.
        """
        while not self.finished:
            record = self.step()
            if on_generation is not None:
                on_generation(self, record)
        return self.result()

    def result(self) -> SearchResult:
        """The outcome so far (complete once :attr:`finished`).

        Returns
        -------
        SearchResult
            The best candidate so far, its score and the counts.
        """
        if self.best_solution is None:
            raise RuntimeError("no candidate has been evaluated yet")
        best_score = self._score(self.best_fitness) if np.isfinite(self.best_fitness) else float("nan")
        return SearchResult(
            best_solution=self.best_solution.copy(),
            best_score=best_score,
            evaluations=self.evaluations,
            generations=self.generation,
            stop_reason=self.stop_reason or "running",
            evaluations_to_target=self.evaluations_to_target,
            target=self.target,
            seed=self.seed,
            method=self.settings.method,
            history=list(self.history),
            model=self.method.model(),
            failures=self.evaluator.failure_count,
            cache_hits=self.evaluator.cache_hits,
            objective_calls=self.evaluator.calls,
        )

    # -- checkpoints ----------------------------------------------------------------------------
    def get_state(self) -> dict:
        """Everything needed to continue this search exactly (nested dicts of arrays and plain values).

        Returns
        -------
        dict
            What :meth:`set_state` restores.
        """
        return {
            "generation": self.generation,
            "evaluations": self.evaluations,
            "best_fitness": float(self.best_fitness),
            "best_solution": None if self.best_solution is None else self.best_solution.copy(),
            "evaluations_to_target": self.evaluations_to_target,
            "stale_generations": self.stale_generations,
            "stop_reason": self.stop_reason,
            "history": [dict(r) for r in self.history],
            "elapsed": self.elapsed,
            "rng": self.rng.bit_generator.state,
            "method": self.method.get_state(),
            "evaluator": self.evaluator.get_state(),
        }

    def set_state(self, state: dict) -> None:
        """Restore what :meth:`get_state` returned (into a Search built with the same settings).

        Parameters
        ----------
        state : dict
            What :meth:`get_state` returned.
        """
        self.generation = int(state["generation"])
        self.evaluations = int(state["evaluations"])
        self.best_fitness = float(state["best_fitness"])
        best = state.get("best_solution")
        self.best_solution = None if best is None else np.asarray(best, dtype=np.uint8)
        self.evaluations_to_target = state["evaluations_to_target"]
        self.stale_generations = int(state["stale_generations"])
        self.stop_reason = state["stop_reason"]
        self.history = [dict(r) for r in state["history"]]
        self.elapsed = float(state["elapsed"])
        self.rng.bit_generator.state = state["rng"]
        self.method.set_state(state["method"])
        self.evaluator.set_state(state["evaluator"])


@contextmanager
def open_search(
    problem: Problem,
    settings: Optional[SearchSettings] = None,
    stop: Optional[StopRules] = None,
    seed: int = 0,
) -> Iterator[Search]:
    """A :class:`Search` whose evaluator lives exactly as long as the ``with`` block.

    Every entry point drives its searches through this (the Python API, the runner, sweeps and the
    benchmarks): worker processes, a Dask cluster or its connection start with the search and are
    closed when the block ends, however it ends.

    Parameters
    ----------
    problem : Problem
        The objective.
    settings : SearchSettings or None
        The method and its parameters (the defaults when ``None``).
    stop : StopRules or None
        When to stop (the defaults when ``None``).
    seed : int
        The run's seed.

    Yields
    ------
    Search
        The search, not yet stepped.
    """
    search = Search(problem, settings, stop, seed=seed)
    with search.evaluator:
        yield search


def run_search(
    problem: Problem,
    settings: Optional[SearchSettings] = None,
    stop: Optional[StopRules] = None,
    seed: int = 0,
    on_generation: Optional[Callable[[Search, dict], None]] = None,
) -> SearchResult:
    """Run a search to its end in :func:`open_search`; the parameters are those of :func:`open_search`.

    ``on_generation(search, record)`` is called after each step.

    Returns
    -------
    SearchResult
        The outcome of the run.
    """
    with open_search(problem, settings, stop, seed) as search:
        return search.run(on_generation)

"""Sample efficiency for ``optim bench``: evaluations to the optimum over many seeded runs.

Every figure is a count of objective evaluations, so it does not depend on
the machine. A run succeeds when it reaches the problem's known optimum
within its budget; ``median_evaluations`` is the median of the evaluations
to the optimum over the successful runs (``None`` when none succeeded) and is
always read together with ``successes``. The runs are spread over worker
processes with joblib; each worker keeps BLAS to one thread (threadpoolctl,
when installed) so the workers do not compete for the cores.
"""

from __future__ import annotations

import math
import time
from dataclasses import dataclass
from statistics import median
from typing import Callable, Dict, Iterable, List, Optional, Sequence, Tuple, Union

import numpy as np

__all__ = [
    "ProblemSpec",
    "problem_spec",
    "Task",
    "run_task",
    "run_tasks",
    "summarise",
    "fit_exponent",
    "efficiency_tasks",
    "population_tasks",
    "scaling_tasks",
    "efficiency_section",
    "population_section",
    "scaling_section",
]


@dataclass(frozen=True)
class ProblemSpec:
    """A benchmark problem: a registered name and its parameters.

    ``seeded`` problems take the run's seed as their instance seed, so every
    run of a series meets a different instance (e.g. a different shuffle of
    the trap's positions).
    """

    key: str
    use: str
    params: Tuple[Tuple[str, object], ...]
    seeded: bool = False

    @property
    def label(self) -> str:
        shown = " ".join(f"{k}={v}" for k, v in self.params if k not in ("shuffle",))
        return f"{self.key} {shown}" + (" shuffled" if dict(self.params).get("shuffle") else "")

    def build(self, seed: int):
        from optim import objectives

        params = dict(self.params)
        if self.seeded:
            params["seed"] = int(seed)
        return objectives.make_problem(self.use, params)


def problem_spec(key: str, use: str, seeded: bool = False, **params) -> ProblemSpec:
    """A :class:`ProblemSpec` from keyword parameters."""
    return ProblemSpec(key, use, tuple(sorted(params.items())), seeded)


@dataclass(frozen=True)
class Task:
    """One seeded run: a problem, a method, a population (a number or ``"auto"``) and a budget."""

    spec: ProblemSpec
    method: str
    population: Union[int, str]
    seed: int
    budget: int


def run_task(task: Task) -> dict:
    """Run one search to its end; returns the evaluations to the optimum (or ``None``) and the cost."""
    from optim.search import SearchSettings, StopRules, run_search

    start = time.perf_counter()
    limits = _one_blas_thread()
    try:
        problem = task.spec.build(task.seed)
        result = run_search(
            problem,
            SearchSettings(method=task.method, population=task.population),
            StopRules(evaluations=task.budget, target="optimum"),
            seed=task.seed,
        )
    finally:
        if limits is not None:
            limits.unregister()
    return {
        "evaluations_to_target": result.evaluations_to_target,
        "evaluations": result.evaluations,
        "stop_reason": result.stop_reason,
        "seconds": time.perf_counter() - start,
    }


def _one_blas_thread():
    try:
        from threadpoolctl import threadpool_limits
    except ImportError:
        return None
    return threadpool_limits(limits=1, user_api="blas")


def run_tasks(
    tasks: Iterable[Task], workers: int, progress: Optional[Callable[[int, int], None]] = None
) -> Dict[Task, dict]:
    """Run every distinct task once, on ``workers`` processes (``1``: in this process)."""
    unique = list(dict.fromkeys(tasks))
    # the long runs first, so the workers finish together
    unique.sort(key=lambda t: (-t.budget, -int(dict(t.spec.params).get("n", 0))))
    results: Dict[Task, dict] = {}
    if workers <= 1:
        for done, task in enumerate(unique, 1):
            results[task] = run_task(task)
            if progress is not None:
                progress(done, len(unique))
        return results
    from joblib import Parallel, delayed

    outputs = Parallel(n_jobs=workers, return_as="generator")(delayed(run_task)(task) for task in unique)
    for done, (task, output) in enumerate(zip(unique, outputs, strict=True), 1):
        results[task] = output
        if progress is not None:
            progress(done, len(unique))
    return results


def summarise(outcomes: Sequence[dict]) -> dict:
    """Successes, median evaluations to the optimum (successful runs) and the evaluations of every run."""
    hits = [o["evaluations_to_target"] for o in outcomes if o["evaluations_to_target"] is not None]
    return {
        "seeds": len(outcomes),
        "successes": len(hits),
        "median_evaluations": float(median(hits)) if hits else None,
        "evaluations_to_target": [o["evaluations_to_target"] for o in outcomes],
        "seconds": float(sum(o["seconds"] for o in outcomes)),
    }


def fit_exponent(sizes: Sequence[float], evaluations: Sequence[float]) -> Optional[float]:
    """Slope of the least-squares line through ``(log n, log evaluations)``; ``None`` with fewer than two points.

    If evaluations grow like ``c · n^b``, the slope is ``b`` (common practice, no source).
    """
    points = [(math.log(n), math.log(e)) for n, e in zip(sizes, evaluations, strict=True) if e is not None and e > 0]
    if len(points) < 2:
        return None
    x, y = np.array(points).T
    return float(np.polyfit(x, y, 1)[0])


# -- the three sections: their tasks, then their tables ------------------------------------------------------
def efficiency_tasks(config) -> List[Task]:
    return [
        Task(spec, method, config.efficiency_population, seed, config.budget)
        for spec in config.problems
        for method in config.methods
        for seed in range(config.seeds)
    ]


def efficiency_section(config, results: Dict[Task, dict]) -> List[dict]:
    rows = []
    for spec in config.problems:
        for method in config.methods:
            outcomes = [
                results[Task(spec, method, config.efficiency_population, seed, config.budget)]
                for seed in range(config.seeds)
            ]
            rows.append(
                dict(
                    problem=spec.key,
                    label=spec.label,
                    method=method,
                    population=config.efficiency_population,
                    budget=config.budget,
                    **summarise(outcomes),
                )
            )
    return rows


def _population_settings(config) -> List[Union[int, str]]:
    return list(config.ladder_populations) + ["auto"]


def population_tasks(config) -> List[Task]:
    return [
        Task(spec, "tree", population, seed, config.budget)
        for spec in config.problems
        for population in _population_settings(config)
        for seed in range(config.seeds)
    ]


def _best_fixed(rows: List[dict], seeds: int, reliable: float) -> Optional[dict]:
    """The fixed population with the fewest median evaluations among those reaching the optimum reliably."""
    fine = [
        r
        for r in rows
        if r["population"] != "auto" and r["median_evaluations"] is not None and r["successes"] >= reliable * seeds
    ]
    return min(fine, key=lambda r: r["median_evaluations"]) if fine else None


def population_section(config, results: Dict[Task, dict]) -> List[dict]:
    """Per problem: every fixed population and ``auto``, the best reliable fixed one and auto's ratio to it."""
    section = []
    for spec in config.problems:
        rows = []
        for population in _population_settings(config):
            outcomes = [results[Task(spec, "tree", population, seed, config.budget)] for seed in range(config.seeds)]
            rows.append(dict(population=population, **summarise(outcomes)))
        best = _best_fixed(rows, config.seeds, config.reliable)
        auto = rows[-1]
        ratio = None
        if best is not None and auto["median_evaluations"] is not None:
            ratio = auto["median_evaluations"] / best["median_evaluations"]
        section.append(
            {
                "problem": spec.key,
                "label": spec.label,
                "method": "tree",
                "budget": config.budget,
                "rows": rows,
                "best_fixed_population": None if best is None else best["population"],
                "best_fixed_median": None if best is None else best["median_evaluations"],
                "auto_successes": auto["successes"],
                "auto_median": auto["median_evaluations"],
                "auto_to_best_ratio": ratio,
            }
        )
    return section


def _scaling_spec(n: int) -> ProblemSpec:
    return problem_spec("trap", "trap", seeded=True, n=n, k=3, shuffle=True)


def _scaling_populations(config, n: int) -> List[Union[int, str]]:
    return list(dict.fromkeys(int(round(multiple * n)) for multiple in config.scaling_multiples)) + ["auto"]


def scaling_tasks(config) -> List[Task]:
    return [
        Task(_scaling_spec(n), "tree", population, seed, config.scaling_budget)
        for n in config.scaling_sizes
        for population in _scaling_populations(config, n)
        for seed in range(config.seeds)
    ]


def scaling_section(config, results: Dict[Task, dict]) -> dict:
    """Evaluations to the optimum on shuffled trap-3 against n, for ``auto`` and the best fixed population."""
    table = []
    for n in config.scaling_sizes:
        spec = _scaling_spec(n)
        rows = []
        for population in _scaling_populations(config, n):
            outcomes = [
                results[Task(spec, "tree", population, seed, config.scaling_budget)] for seed in range(config.seeds)
            ]
            rows.append(dict(population=population, **summarise(outcomes)))
        best = _best_fixed(rows, config.seeds, config.reliable)
        table.append({"n": n, "rows": rows, "auto": rows[-1], "best_fixed": best})
    sizes = [entry["n"] for entry in table]

    def exponent(pick):
        values = [pick(entry) for entry in table]
        if any(v is None for v in values):
            return None
        return fit_exponent(sizes, values)

    return {
        "problem": "trap k=3 shuffled",
        "method": "tree",
        "budget": config.scaling_budget,
        "population_multiples": list(config.scaling_multiples),
        "sizes": table,
        "exponent_auto": exponent(
            lambda e: (
                e["auto"]["median_evaluations"] if e["auto"]["successes"] >= config.reliable * config.seeds else None
            )
        ),
        "exponent_best_fixed": exponent(
            lambda e: None if e["best_fixed"] is None else e["best_fixed"]["median_evaluations"]
        ),
    }

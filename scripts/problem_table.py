"""Print, for each problem family, the instance, its reference optimum and how fast two methods reach it.

For every row the script builds the instance of a bundled config (or a variant
of it), then runs the tree method (the config's population) and the
random-restart hill climber over the same seeds and the same evaluation
budget, each stopping at the reference optimum. A run succeeds when it reaches
the optimum within the budget. The median counts a failed run as more than
the budget, so it is shown as "> budget" when fewer than half the runs
succeed.

Usage::

    python scripts/problem_table.py [--seeds 5] [--budget 100000] [--jobs 2]

The output is a Markdown table.
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path
from typing import List, NamedTuple, Optional, Sequence

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from optim.runs.config import load_run_config  # noqa: E402
from optim.runs.runner import build_problem  # noqa: E402
from optim.search import Search, SearchSettings, StopRules  # noqa: E402

__all__ = ["Row", "ROWS", "measure", "main"]


class Row(NamedTuple):
    """One line of the table: a config and the overrides that make its instance."""

    label: str
    config: str
    overrides: Sequence[str] = ()


ROWS = (
    Row("max-sat", "configs/max-sat.yaml"),
    Row("max-cut", "configs/max-cut.yaml"),
    Row("knapsack", "configs/knapsack.yaml"),
    Row("nk (adjacent)", "configs/nk.yaml"),
    Row("nk (random)", "configs/nk.yaml", ("problem.neighbourhood=random", "problem.n=20", "problem.k=3")),
    Row("machine-assignment (index)", "configs/machine-assignment.yaml"),
    Row("machine-assignment (bits)", "configs/machine-assignment.yaml", ("problem.encoding=bits",)),
    Row("staff-roster", "configs/staff-roster.yaml"),
    Row("service-latency", "configs/service-latency.yaml", ("problem.noise=0",)),
)


def _run(problem, method: str, population: int, budget: int, seed: int) -> Optional[int]:
    """Evaluations until the optimum was first reached, or None."""
    settings = SearchSettings(method=method, population=population)
    result = Search(problem, settings, StopRules(evaluations=budget, target="optimum"), seed=seed).run()
    return result.evaluations_to_target


def _median_text(hits: List[Optional[int]], budget: int) -> str:
    values = np.array([budget + 1 if h is None else h for h in hits], dtype=float)
    middle = float(np.median(values))
    return f"> {budget:,}" if middle > budget else f"{middle:,.0f}"


def measure(row: Row, seeds: Sequence[int], budget: int, jobs: int = 1) -> dict:
    """Build the row's instance and run both methods over ``seeds``."""
    overrides = list(row.overrides) + ["search.method=tree"]
    config = load_run_config(ROOT / row.config, overrides)
    problem = build_problem(config)
    if problem.optimum is None:
        raise SystemExit(f"{row.label}: the instance has no reference optimum")
    tasks = [
        (method, population, seed)
        for method, population in (("tree", config.search.population), ("hillclimb", 100))
        for seed in seeds
    ]
    started = time.perf_counter()
    if jobs > 1:
        from joblib import Parallel, delayed

        hits = Parallel(n_jobs=jobs)(delayed(_run)(problem, m, p, budget, s) for m, p, s in tasks)
    else:
        hits = [_run(problem, m, p, budget, s) for m, p, s in tasks]
    count = len(seeds)
    cards = np.unique(problem.cardinality)
    size = f"{problem.n}" if cards.tolist() == [2] else f"{problem.n} × {'/'.join(map(str, cards))} values"
    return {
        "label": row.label,
        "instance": problem.name,
        "size": size,
        "optimum": f"{problem.optimum:.6g}",
        "source": problem.optimum_source,
        "tree_population": config.search.population,
        "tree": (sum(h is not None for h in hits[:count]), _median_text(hits[:count], budget)),
        "hillclimb": (sum(h is not None for h in hits[count:]), _median_text(hits[count:], budget)),
        "seconds": time.perf_counter() - started,
    }


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--seeds", type=int, default=5, help="runs per method (seeds 1..N)")
    parser.add_argument("--budget", type=int, default=100_000, help="evaluation budget of every run")
    parser.add_argument("--jobs", type=int, default=1, help="runs carried out in parallel")
    args = parser.parse_args(argv)
    seeds = list(range(1, args.seeds + 1))
    print(
        f"Evaluations to the reference optimum, {args.seeds} seeds, budget {args.budget:,} per run "
        f"(median; successes in brackets).\n"
    )
    print("| family | instance | variables | optimum (source) | tree (population) | hillclimb |")
    print("| --- | --- | --- | --- | --- | --- |")
    for row in ROWS:
        found = measure(row, seeds, args.budget, args.jobs)
        tree_ok, tree_median = found["tree"]
        climb_ok, climb_median = found["hillclimb"]
        print(
            f"| {found['label']} | {found['instance']} | {found['size']} | {found['optimum']} "
            f"({found['source']}) | {tree_median} ({tree_ok}/{args.seeds}; pop {found['tree_population']}) | "
            f"{climb_median} ({climb_ok}/{args.seeds}) |",
            flush=True,
        )
    return 0


if __name__ == "__main__":
    raise SystemExit(main())

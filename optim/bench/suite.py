"""``optim bench``: how few evaluations the methods need, and how small the tool's own work is.

One run measures, in this order:

``fit``
    Mutual information + spanning tree, and the whole ``DependencyTree.fit``,
    as ratios to the bare float32 product ``X.T @ X`` of the same shape
    (:mod:`optim.bench.timing`).
``sampling``
    Drawing ``N`` candidates from a fitted tree as a ratio to ``rng.random((N, n))``.
``generation``
    One generation on OneMax split into fit, sample, evaluate and bookkeeping.
``memory``
    The peak resident set size of a run, in a child process (:mod:`optim.bench.memory`).
``efficiency``, ``population``, ``scaling``
    Evaluations to the optimum over seeded runs (:mod:`optim.bench.efficiency`).
``targets``
    Every target of :data:`optim.bench.report.TARGETS`, met or not.

The results go to ``bench.json`` (and the same tables as ``bench.md``).
"""

from __future__ import annotations

import dataclasses
import datetime as _dt
import sys
import time
from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable, Optional, Tuple, Union

from optim.bench.efficiency import ProblemSpec, problem_spec
from optim.methods import METHODS

__all__ = ["BenchConfig", "FULL", "QUICK", "BENCH_FILE", "BENCH_TABLES", "run_bench", "write_bench"]

BENCH_FILE = "bench.json"
BENCH_TABLES = "bench.md"

#: The problems of the sample-efficiency sections.
_PROBLEMS = (
    problem_spec("trap", "trap", seeded=True, n=60, k=3, shuffle=True),
    problem_spec("hiff", "hiff", n=64),
    problem_spec("ising-ring", "ising-ring", n=100),
    problem_spec("four-peaks", "four-peaks", n=60, t=6),
    problem_spec("onemax", "onemax", n=200),
)


@dataclass(frozen=True)
class BenchConfig:
    """Sizes and repetitions of one benchmark run (see :data:`FULL` and :data:`QUICK`)."""

    mode: str = "full"
    fit_sizes: Tuple[int, ...] = (100, 500, 1000, 2000)
    samples_per_variable: int = 4
    repeats: int = 15
    timing_seconds: float = 3.0
    generation_n: int = 1000
    generation_population: int = 4000
    generation_count: int = 3
    memory_n: int = 2000
    memory_population: int = 8000
    memory_generations: int = 3
    problems: Tuple[ProblemSpec, ...] = _PROBLEMS
    methods: Tuple[str, ...] = METHODS
    efficiency_population: Union[int, str] = 1000
    seeds: int = 10
    budget: int = 200_000
    ladder_populations: Tuple[int, ...] = (250, 500, 1000, 2000)
    scaling_sizes: Tuple[int, ...] = (30, 60, 120, 240)
    scaling_multiples: Tuple[float, ...] = tuple(round(2 * 2 ** (k / 2), 2) for k in range(9))  # 2n … 32n
    scaling_budget: int = 1_000_000
    reliable: float = 0.9
    workers: int = 2
    sections: Tuple[str, ...] = field(
        default=("fit", "sampling", "generation", "memory", "throughput", "efficiency", "population", "scaling")
    )

    def to_dict(self) -> dict:
        data = dataclasses.asdict(self)
        data["problems"] = [spec.label for spec in self.problems]
        return data


#: The full benchmark (by hand: it takes long; run it in the background).
FULL = BenchConfig()

#: Small sizes and three seeds: a few minutes on two cores (what CI runs).
QUICK = BenchConfig(
    mode="quick",
    fit_sizes=(100, 500),
    repeats=9,
    timing_seconds=2.0,
    generation_n=300,
    generation_population=1200,
    generation_count=2,
    memory_n=500,
    memory_population=2000,
    memory_generations=2,
    seeds=3,
    budget=50_000,
    scaling_sizes=(30, 60, 120),
    scaling_multiples=(4.0, 5.66, 8.0, 11.31, 16.0),
    scaling_budget=200_000,
)


def _stderr(message: str) -> None:
    print(message, file=sys.stderr, flush=True)


def run_bench(config: BenchConfig = FULL, log: Optional[Callable[[str], None]] = _stderr) -> dict:
    """Run every section of ``config`` and return the report (what ``bench.json`` holds)."""
    from optim import __version__
    from optim.bench import efficiency as bench_search, memory as bench_memory, timing as bench_timing
    from optim.bench.report import check_targets

    say = log or (lambda message: None)
    started = time.perf_counter()
    report = {
        "version": __version__,
        "mode": config.mode,
        "created": _dt.datetime.now(_dt.timezone.utc).strftime("%Y-%m-%dT%H:%M:%SZ"),
        "settings": config.to_dict(),
        "machine": bench_timing.machine_info(),
    }
    sections = set(config.sections)
    if "fit" in sections:
        say("bench: model fit")
        report["fit"] = bench_timing.measure_fit(
            config.fit_sizes, config.samples_per_variable, config.repeats, config.timing_seconds
        )
    if "sampling" in sections:
        say("bench: sampling")
        report["sampling"] = bench_timing.measure_sampling(
            config.fit_sizes, config.samples_per_variable, config.repeats, config.timing_seconds
        )
    if "generation" in sections:
        say("bench: one generation")
        report["generation"] = bench_timing.measure_generation(
            config.generation_n, config.generation_population, config.generation_count
        )
    report["machine"]["load_average_after_timing"] = bench_timing.load_average()
    if "memory" in sections:
        say("bench: peak memory (child process)")
        report["memory"] = bench_memory.measure_memory(
            config.memory_n, config.memory_population, config.memory_generations
        )
    if "throughput" in sections:
        from optim.bench.throughput import throughput_benchmark

        say("bench: evaluation throughput (serial, 2 workers, local Dask)")
        report["throughput"] = throughput_benchmark(quick=config.mode == "quick")
    planned = {
        "efficiency": (bench_search.efficiency_tasks, bench_search.efficiency_section),
        "population": (bench_search.population_tasks, bench_search.population_section),
        "scaling": (bench_search.scaling_tasks, bench_search.scaling_section),
    }
    wanted = [name for name in planned if name in sections]
    if wanted:
        tasks = [task for name in wanted for task in planned[name][0](config)]
        step = max(1, len(set(tasks)) // 20)

        def progress(done: int, total: int) -> None:
            if done % step == 0 or done == total:
                say(f"bench: search runs {done}/{total}")

        results = bench_search.run_tasks(tasks, config.workers, progress)
        for name in wanted:
            report[name] = planned[name][1](config, results)
    report["targets"] = check_targets(report)
    report["seconds"] = time.perf_counter() - started
    return report


def write_bench(report: dict, out) -> Path:
    """Write ``bench.json`` and ``bench.md`` into the folder ``out`` (made if needed); returns the JSON path."""
    from optim.bench.report import format_markdown
    from optim.files import atomic_write, to_json

    folder = Path(out)
    folder.mkdir(parents=True, exist_ok=True)
    path = folder / BENCH_FILE
    atomic_write(path, (to_json(report) + "\n").encode("utf-8"))
    atomic_write(folder / BENCH_TABLES, format_markdown(report).encode("utf-8"))
    return path

"""Throughput of parallel evaluation, for ``optim bench``.

An objective that sleeps 50 ms per candidate is scored serially, by two
local worker processes (``--jobs 2``), by the same with a timeout (one
candidate per task, so the timeout can be kept), and by a two-worker local
Dask cluster. For each: evaluations per second, the ideal rate (workers /
sleep time) and the tool's overhead per evaluation against that ideal
(measured seconds per evaluation minus sleep time / workers). Starting the
workers is timed apart and left out of the rates. The figures are reported,
never asserted: they depend on the machine.
"""

from __future__ import annotations

import importlib.util
import os
import platform
import time
from typing import Optional

import numpy as np

from optim.evaluation.evaluator import Evaluator
from optim.problem import FunctionProblem

__all__ = ["SLEEP_SECONDS", "throughput_benchmark", "format_throughput"]

#: How long the benchmark objective takes per candidate.
SLEEP_SECONDS = 0.05

_VARIABLES = 24


def _nap(x) -> float:
    """The benchmark objective: sleep, then count the ones (module level, so workers import it)."""
    time.sleep(SLEEP_SECONDS)
    return float(np.sum(x))


def _modes(dask_available: bool):
    yield "serial", 1, {}
    yield "jobs 2", 2, {"jobs": 2}
    yield "jobs 2, timeout", 2, {"jobs": 2, "timeout": 60.0}
    if dask_available:
        yield "dask local, 2 workers", 2, {"dask": "local", "jobs": 2}


def _measure(label: str, workers: int, options: dict, X: np.ndarray) -> dict:
    problem = FunctionProblem(_nap, X.shape[1], name="nap")
    start = time.perf_counter()
    with Evaluator(problem, **options) as evaluator:
        evaluator(X[:workers])  # starts the workers (and the cluster); timed apart
        startup = time.perf_counter() - start - SLEEP_SECONDS
        start = time.perf_counter()
        scores = evaluator(X)
        seconds = time.perf_counter() - start
        failures = evaluator.failure_count
    if failures or not np.array_equal(scores, X.sum(axis=1).astype(np.float64)):
        raise RuntimeError(f"the benchmark objective failed under {label!r}; the figures would mean nothing")
    count = X.shape[0]
    ideal = SLEEP_SECONDS * count / workers
    return {
        "mode": label,
        "workers": workers,
        "evaluations": count,
        "seconds": round(seconds, 4),
        "per_second": round(count / seconds, 2),
        "ideal_per_second": round(workers / SLEEP_SECONDS, 2),
        "overhead_ms": round(1000.0 * (seconds - ideal) / count, 3),
        "startup_seconds": round(max(0.0, startup), 3),
    }


def throughput_benchmark(quick: bool = False, evaluations: Optional[int] = None) -> dict:
    """Measure evaluation throughput serially, with two local worker processes and on a local Dask cluster.

    Parameters
    ----------
    quick : bool
        40 evaluations per mode instead of 200 (a few seconds in all).
    evaluations : int, optional
        Evaluations per mode, overriding ``quick``.

    Returns
    -------
    dict
        ``sleep_seconds``, ``machine`` (cpus, python, platform), ``rows`` (one
        dict per mode: ``mode``, ``workers``, ``evaluations``, ``seconds``,
        ``per_second``, ``ideal_per_second``, ``overhead_ms``,
        ``startup_seconds``) and ``skipped`` (modes that could not run, with why).
    """
    count = int(evaluations) if evaluations is not None else (40 if quick else 200)
    rng = np.random.default_rng(0)
    X = rng.integers(0, 2, size=(count, _VARIABLES), dtype=np.uint8)
    dask_available = importlib.util.find_spec("distributed") is not None
    rows = [_measure(label, workers, options, X) for label, workers, options in _modes(dask_available)]
    missing = "dask and distributed are not installed (pip install 'optim[cluster]')"
    skipped = [] if dask_available else [{"mode": "dask local, 2 workers", "why": missing}]
    return {
        "sleep_seconds": SLEEP_SECONDS,
        "machine": {"cpus": os.cpu_count(), "python": platform.python_version(), "platform": platform.platform()},
        "rows": rows,
        "skipped": skipped,
    }


def format_throughput(result: dict) -> str:
    """The result of :func:`throughput_benchmark` as a Markdown table with a short legend."""
    lines = [
        f"Evaluation throughput, objective sleeping {1000 * result['sleep_seconds']:g} ms per candidate "
        f"({result['machine']['cpus']} CPUs, Python {result['machine']['python']})",
        "",
        "| mode | workers | evaluations | seconds | evaluations/s | ideal/s | overhead per evaluation (ms) "
        "| worker start (s) |",
        "| --- | ---: | ---: | ---: | ---: | ---: | ---: | ---: |",
    ]
    for row in result["rows"]:
        lines.append(
            f"| {row['mode']} | {row['workers']} | {row['evaluations']} | {row['seconds']:.3f} "
            f"| {row['per_second']:.1f} | {row['ideal_per_second']:.1f} | {row['overhead_ms']:.2f} "
            f"| {row['startup_seconds']:.2f} |"
        )
    for row in result.get("skipped", []):
        lines.append(f"| {row['mode']} | – | – | – | – | – | – | skipped: {row['why']} |")
    lines += ["", "ideal = workers / sleep time; overhead = measured seconds per evaluation − sleep time / workers."]
    return "\n".join(lines)

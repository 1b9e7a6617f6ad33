"""Timings for ``optim bench``: the tool's own work as ratios to bare numpy operations.

Absolute seconds depend on the machine and on whatever else it is doing, so
every figure is a ratio to a reference operation of the same shape timed in
the same process, the two interleaved repetition by repetition (in
alternating order) so that a slow spell hits both. The ratio reported is the
ratio of the two minimum times (the least disturbed repetition of each,
common practice, no source); the median of the per-repetition ratios is given
beside it.
"""

from __future__ import annotations

import gc
import platform
import time
from statistics import median
from typing import Callable, Dict, List, Optional, Sequence

import numpy as np

__all__ = [
    "time_ratio",
    "time_ratios",
    "measure_fit",
    "measure_sampling",
    "measure_generation",
    "machine_info",
    "blas_info",
    "load_average",
]


def _seconds(operation: Callable[[], object]) -> float:
    start = time.perf_counter()
    operation()
    return time.perf_counter() - start


def time_ratios(
    reference: Callable[[], object],
    candidates: Dict[str, Callable[[], object]],
    repeats: int,
    min_seconds: float = 0.0,
    max_repeats: int = 1000,
) -> Dict[str, Dict[str, float]]:
    """Time each candidate against ``reference``, all interleaved, ``repeats`` times each or more.

    Every repetition times the reference and every candidate once, in an order
    rotated from one repetition to the next, so they share the same conditions.
    Repetitions go on past ``repeats`` until the candidates and the reference
    have taken ``min_seconds`` together (at most ``max_repeats``), so that
    short operations get many chances at an undisturbed run.

    Returns
    -------
    dict
        For each candidate: ``candidate_seconds`` and ``reference_seconds``
        (minimum over the repetitions), ``ratio`` (their quotient) and
        ``median_ratio`` (median of the per-repetition quotients).
    """
    if int(repeats) < 1:
        raise ValueError(f"The 'repeats' parameter of time_ratios must be at least 1. Got {repeats!r} instead.")
    names = ["__reference__"] + list(candidates)
    operations = dict(candidates, __reference__=reference)
    for name in names:  # warm caches, imports and thread pools
        operations[name]()
    times: Dict[str, List[float]] = {name: [] for name in names}
    was_enabled = gc.isenabled()
    gc.disable()
    try:
        repeat, spent = 0, 0.0
        while repeat < int(repeats) or (spent < min_seconds and repeat < max_repeats):
            shift = repeat % len(names)
            for name in names[shift:] + names[:shift]:
                took = _seconds(operations[name])
                times[name].append(took)
                spent += took
            repeat += 1
    finally:
        if was_enabled:
            gc.enable()
    reference_times = times["__reference__"]
    best_reference = min(reference_times)
    return {
        name: {
            "candidate_seconds": min(times[name]),
            "reference_seconds": best_reference,
            "ratio": min(times[name]) / best_reference,
            "median_ratio": median(c / r for c, r in zip(times[name], reference_times, strict=True)),
            "repeats": len(reference_times),
        }
        for name in candidates
    }


def time_ratio(
    candidate: Callable[[], object], reference: Callable[[], object], repeats: int, min_seconds: float = 0.0
) -> Dict[str, float]:
    """:func:`time_ratios` for one candidate."""
    return time_ratios(reference, {"candidate": candidate}, repeats, min_seconds)["candidate"]


def _binary_sample(n: int, samples: int, seed: int) -> np.ndarray:
    return (np.random.default_rng(seed).random((samples, n)) < 0.5).astype(np.uint8)


def measure_fit(
    sizes: Sequence[int], samples_per_variable: int, repeats: int, min_seconds: float = 0.0, seed: int = 0
) -> List[dict]:
    """Model fitting against the bare float32 product ``X.T @ X`` of the same shape.

    For each ``n``: uniformly random binary data with ``N = samples_per_variable · n``
    rows; timed are (a) the mutual-information matrix plus the maximum spanning
    tree, (b) the whole :meth:`DependencyTree.fit` (with its conditional tables).
    """
    from optim.info import mutual_information
    from optim.models.spanning import maximum_spanning_tree
    from optim.models.tree import DependencyTree

    rows = []
    for n in sizes:
        N = samples_per_variable * n
        X = _binary_sample(n, N, seed + n)
        F = X.astype(np.float32)
        model = DependencyTree(prior=1.0)
        timing = time_ratios(
            lambda F=F: F.T @ F,
            {
                "structure": lambda X=X: maximum_spanning_tree(mutual_information(X, prior=1.0)),
                "fit": lambda X=X, model=model: model.fit(X),
            },
            repeats,
            min_seconds,
        )
        information_tree, whole_fit = timing["structure"], timing["fit"]
        rows.append(
            {
                "n": n,
                "samples": N,
                "product_seconds": whole_fit["reference_seconds"],
                "information_tree_seconds": information_tree["candidate_seconds"],
                "information_tree_ratio": information_tree["ratio"],
                "information_tree_median_ratio": information_tree["median_ratio"],
                "fit_seconds": whole_fit["candidate_seconds"],
                "fit_ratio": whole_fit["ratio"],
                "fit_median_ratio": whole_fit["median_ratio"],
                "repeats": whole_fit["repeats"],
            }
        )
    return rows


def measure_sampling(
    sizes: Sequence[int], samples_per_variable: int, repeats: int, min_seconds: float = 0.0, seed: int = 0
) -> List[dict]:
    """Drawing ``N`` candidates from a fitted tree against ``rng.random((N, n))``.

    The tree is fitted to uniformly random binary data of the same shape.
    """
    from optim.models.tree import DependencyTree

    rows = []
    for n in sizes:
        N = samples_per_variable * n
        model = DependencyTree(prior=1.0).fit(_binary_sample(n, N, seed + n))
        rng = np.random.default_rng(seed)
        timing = time_ratio(
            lambda model=model, N=N, rng=rng: model.sample(N, rng),
            lambda N=N, n=n, rng=rng: rng.random((N, n)),
            repeats,
            min_seconds,
        )
        depth = _tree_depth(model)
        rows.append(
            {
                "n": n,
                "samples": N,
                "tree_depth": depth,
                "uniform_seconds": timing["reference_seconds"],
                "sample_seconds": timing["candidate_seconds"],
                "ratio": timing["ratio"],
                "median_ratio": timing["median_ratio"],
                "repeats": timing["repeats"],
            }
        )
    return rows


def _tree_depth(model) -> int:
    """Edges on the longest path from a root (the number of levels the sampler steps through, minus one)."""
    depth = np.zeros(model.parents.shape[0], dtype=np.int64)
    for node in model.order:
        if model.parents[node] >= 0:
            depth[node] = depth[model.parents[node]] + 1
    return int(depth.max())


def measure_generation(n: int, population: int, generations: int, seed: int = 0) -> dict:
    """One generation of the tree method on OneMax, split into fit, sample, evaluate and bookkeeping.

    The first (random) generation is run and left out; each of the next
    ``generations`` is timed as a whole around :meth:`Search.step`, and split
    by the ``time`` record of its log entry; bookkeeping is the rest. Medians
    over the timed generations are reported.
    """
    from optim.objectives import make_problem
    from optim.search import SearchSettings, StopRules, open_search

    problem = make_problem("onemax", {"n": n})
    parts: Dict[str, List[float]] = {"fit": [], "sample": [], "evaluate": [], "bookkeeping": [], "step": []}
    with open_search(
        problem,
        SearchSettings(method="tree", population=population),
        StopRules(evaluations=10**12, target=None, collapse=False),
        seed=seed,
    ) as search:
        search.step()
        for _ in range(int(generations)):
            wall = _seconds(search.step)
            timing = search.history[-1]["time"]
            for key in ("fit", "sample", "evaluate"):
                parts[key].append(float(timing.get(key, 0.0)))
            parts["bookkeeping"].append(
                max(wall - sum(float(timing.get(k, 0.0)) for k in ("fit", "sample", "evaluate")), 0.0)
            )
            parts["step"].append(wall)
    seconds = {key: median(values) for key, values in parts.items()}
    return {
        "problem": f"onemax n={n}",
        "n": n,
        "population": population,
        "generations_timed": int(generations),
        "seconds": seconds,
        "shares": {key: seconds[key] / seconds["step"] for key in ("fit", "sample", "evaluate", "bookkeeping")},
    }


def blas_info() -> List[dict]:
    """The BLAS libraries numpy uses and their thread counts (needs ``threadpoolctl``)."""
    try:
        from threadpoolctl import threadpool_info
    except ImportError:
        return []
    keep = ("user_api", "internal_api", "prefix", "version", "num_threads", "threading_layer", "architecture")
    return [{k: pool.get(k) for k in keep if k in pool} for pool in threadpool_info()]


def load_average() -> Optional[List[float]]:
    """The 1, 5 and 15 minute load averages (how busy the machine was), where the system reports them."""
    import os

    try:
        return [round(x, 2) for x in os.getloadavg()]
    except (AttributeError, OSError):
        return None


def machine_info() -> dict:
    """Python, numpy, the processor count, the BLAS in use and the load average."""
    import os

    pools = blas_info()
    return {
        "python": platform.python_version(),
        "numpy": np.__version__,
        "platform": platform.platform(),
        "cpus": os.cpu_count(),
        "load_average": load_average(),
        "blas": pools,
        "blas_note": None if pools else "install threadpoolctl to see which BLAS numpy uses and its threads",
    }

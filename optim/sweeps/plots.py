"""The sweep report's plots: best score against evaluations, and the ECDF of evaluations to target.

matplotlib is set up by :mod:`optim.plotting` (an optional extra); figures are saved atomically as PNG files.
"""

from __future__ import annotations

import warnings
from pathlib import Path
from typing import Mapping, Optional, Sequence, Tuple

import numpy as np

from optim.plotting import pyplot, save_png

__all__ = [
    "best_on_grid",
    "quartile_band",
    "ecdf_points",
    "convergence_plot",
    "ecdf_plot",
]


def best_on_grid(evaluations: Sequence[int], best: Sequence[float], grid: np.ndarray) -> np.ndarray:
    """A best-so-far curve read at ``grid``: the value of the last generation at or before each point.

    Points before the curve's first generation are ``nan``; after its last
    generation the final value holds (the best so far cannot change once a run stops).
    """
    evaluations = np.asarray(evaluations, dtype=np.float64)
    best = np.asarray([np.nan if b is None else b for b in best], dtype=np.float64)
    index = np.searchsorted(evaluations, np.asarray(grid, dtype=np.float64), side="right") - 1
    values = best[np.clip(index, 0, None)] if best.size else np.full(len(grid), np.nan)
    return np.where(index >= 0, values, np.nan)


def quartile_band(curves: Sequence[Tuple[Sequence[int], Sequence[float]]]) -> Tuple[np.ndarray, np.ndarray]:
    """The common grid of several best-so-far curves and their quartiles on it.

    Returns ``(grid, quartiles)`` with ``quartiles`` of shape ``(3, len(grid))``
    (25th, 50th, 75th percentile across the curves). The grid holds every
    evaluation count of any curve from the point where all of them have begun.
    """
    if not curves:
        return np.zeros(0), np.zeros((3, 0))
    starts = [float(evaluations[0]) for evaluations, _ in curves if len(evaluations)]
    if not starts:
        return np.zeros(0), np.zeros((3, 0))
    grid = np.unique(np.concatenate([np.asarray(e, dtype=np.float64) for e, _ in curves]))
    grid = grid[grid >= max(starts)]
    values = np.stack([best_on_grid(e, b, grid) for e, b in curves])
    if np.all(np.isnan(values)):
        return grid, np.full((3, grid.size), np.nan)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)  # grid points where every curve is nan stay nan
        quartiles = np.nanpercentile(values, [25, 50, 75], axis=0)
    return grid, quartiles


def ecdf_points(evaluations_to_target: Sequence[Optional[int]], budget: int) -> Tuple[np.ndarray, np.ndarray]:
    """Steps of the empirical distribution of evaluations to target over *all* runs.

    Returns ``(x, y)`` for a ``where="post"`` step plot: ``y`` is the fraction
    of runs that reached the target within ``x`` evaluations, so a method whose
    runs missed the target ends below 1. The last point is at ``budget``.
    """
    runs = len(evaluations_to_target)
    hits = np.sort(np.asarray([e for e in evaluations_to_target if e is not None], dtype=np.float64))
    x = np.concatenate([[1.0], hits, [float(max(budget, hits[-1] if hits.size else 1))]])
    y = np.concatenate([[0.0], np.arange(1, hits.size + 1) / max(runs, 1), [hits.size / max(runs, 1)]])
    return x, y


def _log_evaluations_axis(axes) -> None:
    from matplotlib.ticker import NullFormatter

    axes.set_xscale("log")
    axes.xaxis.set_minor_formatter(NullFormatter())
    axes.set_xlabel("evaluations")


def convergence_plot(
    curves_by_method: Mapping[str, Sequence[Tuple[Sequence[int], Sequence[float]]]],
    path,
    title: str,
    goal: str = "maximize",
    target: Optional[float] = None,
) -> Path:
    """Best score against evaluations: the median across seeds and its quartile band, one line per method."""
    plt = pyplot()
    figure, axes = plt.subplots(figsize=(6.4, 3.8))
    for label, curves in curves_by_method.items():
        grid, quartiles = quartile_band(curves)
        if grid.size == 0:
            continue
        (line,) = axes.step(grid, quartiles[1], where="post", label=label, linewidth=1.5)
        axes.fill_between(grid, quartiles[0], quartiles[2], step="post", alpha=0.2, color=line.get_color())
    if target is not None:
        axes.axhline(target, color="0.4", linestyle=":", linewidth=1, label="target")
    _log_evaluations_axis(axes)
    axes.set_ylabel("best score so far" + (" (lower is better)" if goal == "minimize" else ""))
    axes.set_title(f"{title}: median and quartiles across seeds", fontsize=10)
    axes.grid(True, which="major", alpha=0.3)
    axes.legend(fontsize=8, loc="best")
    figure.tight_layout()
    return save_png(figure, path)


def ecdf_plot(evaluations_by_method: Mapping[str, Sequence[Optional[int]]], path, title: str, budget: int) -> Path:
    """The empirical cumulative distribution of evaluations to target (all runs), one line per method."""
    plt = pyplot()
    figure, axes = plt.subplots(figsize=(6.4, 3.8))
    for label, evaluations in evaluations_by_method.items():
        x, y = ecdf_points(evaluations, budget)
        hits = sum(e is not None for e in evaluations)
        axes.step(x, y, where="post", label=f"{label} ({hits}/{len(evaluations)})", linewidth=1.5)
    _log_evaluations_axis(axes)
    hits = [e for values in evaluations_by_method.values() for e in values if e is not None]
    axes.set_xlim(left=max(1.0, min(hits, default=budget) / 2), right=budget * 1.2)
    axes.set_ylim(-0.02, 1.02)
    axes.set_ylabel("fraction of runs at target")
    axes.set_title(f"{title}: evaluations to reach the target", fontsize=10)
    axes.grid(True, which="major", alpha=0.3)
    axes.legend(fontsize=8, loc="best")
    figure.tight_layout()
    return save_png(figure, path)

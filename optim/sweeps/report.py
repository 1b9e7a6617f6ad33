"""The statistical report of a sweep: success rates, running times, confidence intervals, tests, plots.

Per problem and method (:func:`summarize`):

- successes / runs (a success is a run that reached the target);
- the median and interquartile range (Q3 - Q1, linear interpolation) of the
  evaluations to target, over the successful runs;
- the expected running time (Auger & Hansen, 2005, "Performance evaluation of
  an advanced local search evolutionary algorithm"): the evaluations of all
  runs, counted up to the target for the successful ones and in full for the
  others, divided by the number of successes (infinite without one);
- the mean final best score with a seeded percentile-bootstrap 95% interval
  (Efron & Tibshirani, 1993, "An Introduction to the Bootstrap").

Between a baseline method (the first ``tree`` method unless told otherwise)
and each other method (:func:`compare`): a two-sided Mann-Whitney U test
(``scipy.stats.mannwhitneyu``; skipped, and said so, when scipy is missing) on
the evaluations to target, where a run that missed the target counts as
``budget + 1`` evaluations, worse than every success (such runs tie with each
other); and the Vargha-Delaney A effect size (Vargha & Delaney, 2000, "A
critique and improvement of the CL common language effect size statistics of
McGraw and Wong"): the probability that a baseline run needs fewer
evaluations than a run of the other method, ties counting half.
"""

from __future__ import annotations

import math
import re
import zlib
from dataclasses import dataclass, field
from pathlib import Path
from typing import Dict, List, Optional, Sequence, Tuple

import numpy as np

from optim.runs.config import read_yaml
from optim.errors import OptimError, RunFolderError
from optim.plotting import PLOT_EXTRA_HINT, plots_available
from optim.sweeps.plots import convergence_plot, ecdf_plot
from optim.files import atomic_write
from optim.text import markdown_table
from optim.sweeps.running import SweepStore
from optim.sweeps.config import SweepConfig, parse_sweep_config

__all__ = [
    "CellSummary",
    "Comparison",
    "SweepData",
    "SweepReport",
    "load_sweep",
    "bootstrap_mean_interval",
    "expected_running_time",
    "penalised_evaluations",
    "vargha_delaney_a",
    "mann_whitney_p",
    "summarize",
    "compare",
    "write_report",
    "results_table",
    "comparisons_table",
    "BOOTSTRAP_RESAMPLES",
]

#: Resamples of the percentile bootstrap.
BOOTSTRAP_RESAMPLES = 2000


# -- statistics -----------------------------------------------------------------------------------
def bootstrap_mean_interval(
    values: Sequence[float], rng: np.random.Generator, resamples: int = BOOTSTRAP_RESAMPLES, level: float = 0.95
) -> Tuple[float, float, float]:
    """``(mean, low, high)``: the mean and its percentile-bootstrap interval (Efron & Tibshirani, 1993).

    The ``resamples`` resamples (with replacement, of the same size) are drawn
    at once; the interval is the ``(1 - level) / 2`` and ``(1 + level) / 2``
    quantiles of their means.
    """
    values = np.asarray(values, dtype=np.float64)
    if values.size == 0:
        return math.nan, math.nan, math.nan
    means = values[rng.integers(0, values.size, size=(resamples, values.size))].mean(axis=1)
    low, high = np.quantile(means, [(1 - level) / 2, (1 + level) / 2])
    return float(values.mean()), float(low), float(high)


def expected_running_time(records: Sequence[dict]) -> float:
    """Expected running time (Auger & Hansen, 2005); ``inf`` when no run reached the target."""
    successes = [r for r in records if r["hit_target"]]
    if not successes:
        return math.inf
    total = sum(r["evaluations_to_target"] if r["hit_target"] else r["evaluations"] for r in records)
    return total / len(successes)


def penalised_evaluations(records: Sequence[dict], budget: int) -> np.ndarray:
    """Evaluations to target per run, ``budget + 1`` for a run that missed it (worse than any success)."""
    return np.asarray(
        [r["evaluations_to_target"] if r["hit_target"] else budget + 1 for r in records], dtype=np.float64
    )


def vargha_delaney_a(x: Sequence[float], y: Sequence[float]) -> float:
    """Vargha-Delaney A: P(X > Y) + P(X = Y) / 2 for one value drawn from each sample (Vargha & Delaney, 2000)."""
    x = np.asarray(x, dtype=np.float64)
    y = np.sort(np.asarray(y, dtype=np.float64))
    if x.size == 0 or y.size == 0:
        return math.nan
    below = np.searchsorted(y, x, side="left")
    equal = np.searchsorted(y, x, side="right") - below
    return float((below.sum() + 0.5 * equal.sum()) / (x.size * y.size))


def mann_whitney_p(x: Sequence[float], y: Sequence[float]) -> Optional[float]:
    """Two-sided Mann-Whitney U p-value (``scipy.stats.mannwhitneyu``); ``None`` when scipy is missing."""
    try:
        from scipy.stats import mannwhitneyu
    except ImportError:
        return None
    return float(mannwhitneyu(x, y, alternative="two-sided").pvalue)


@dataclass
class CellSummary:
    """The statistics of one (problem, method) cell."""

    problem: str
    method: str
    runs: int
    successes: int
    median: Optional[float]
    q1: Optional[float]
    q3: Optional[float]
    ert: float
    mean_best: float
    ci_low: float
    ci_high: float

    @property
    def iqr(self) -> Optional[float]:
        return None if self.q1 is None else self.q3 - self.q1


@dataclass
class Comparison:
    """The baseline against one other method on one problem (evaluations to target)."""

    problem: str
    baseline: str
    method: str
    p_value: Optional[float]
    a_statistic: float
    note: str = ""


def _cell_rng(problem: str, method: str, seed: int) -> np.random.Generator:
    words = [zlib.crc32(problem.encode("utf-8")), zlib.crc32(method.encode("utf-8")), int(seed)]
    return np.random.default_rng(np.random.SeedSequence(words))


def summarize(
    problem: str, method: str, records: Sequence[dict], seed: int = 0, resamples: int = BOOTSTRAP_RESAMPLES
) -> CellSummary:
    """The statistics of one cell; the bootstrap stream depends on the labels and ``seed`` only."""
    hits = np.asarray([r["evaluations_to_target"] for r in records if r["hit_target"]], dtype=np.float64)
    q1 = median = q3 = None
    if hits.size:
        q1, median, q3 = (float(v) for v in np.percentile(hits, [25, 50, 75]))
    scores = [r["best_score"] for r in records if r["best_score"] is not None]
    mean, low, high = bootstrap_mean_interval(scores, _cell_rng(problem, method, seed), resamples)
    return CellSummary(
        problem, method, len(records), int(hits.size), median, q1, q3, expected_running_time(records), mean, low, high
    )


def compare(
    problem: str, baseline: str, baseline_records: Sequence[dict], method: str, records: Sequence[dict], budget: int
) -> Comparison:
    """Mann-Whitney U and Vargha-Delaney A of the baseline against ``method`` on evaluations to target."""
    x = penalised_evaluations(baseline_records, budget)
    y = penalised_evaluations(records, budget)
    if x.size == 0 or y.size == 0:
        return Comparison(problem, baseline, method, None, math.nan, "no runs")
    p_value = mann_whitney_p(x, y)
    note = "" if p_value is not None else "test skipped: scipy is not installed"
    # fewer evaluations is better: P(baseline < other) + ties / 2 = A(other, baseline)
    return Comparison(problem, baseline, method, p_value, vargha_delaney_a(y, x), note)


# -- reading a sweep folder ---------------------------------------------------------------------------
@dataclass
class SweepData:
    """A sweep folder's resolved config and the records of its current jobs, by (problem, method)."""

    folder: Path
    config: SweepConfig
    cells: Dict[Tuple[str, str], List[dict]]
    left_out: int
    store: SweepStore

    @property
    def records(self) -> List[dict]:
        return [r for cell in self.cells.values() for r in cell]


def load_sweep(folder) -> SweepData:
    """Read ``sweep.yaml`` and ``results.jsonl`` of a sweep folder.

    Records are grouped under the labels the current ``sweep.yaml`` gives
    their job ids; records of jobs no longer in it are left out (and counted).
    """
    folder = Path(folder)
    store = SweepStore(folder)
    config_path = folder / SweepStore.CONFIG
    if not folder.is_dir():
        raise RunFolderError(f"{folder}: no such sweep folder")
    if not config_path.exists():
        raise RunFolderError(f"{folder}: not a sweep folder (it has no {SweepStore.CONFIG}; run optim sweep first)")
    doc = read_yaml(config_path)
    if isinstance(doc.data, dict):
        doc.data.pop("version", None)
    config = parse_sweep_config(doc, path=config_path.resolve(), check_problem=False)
    labels = {job.job: (job.problem.label, job.method.label) for job in config.jobs}
    cells: Dict[Tuple[str, str], List[dict]] = {(p.label, m.label): [] for p in config.problems for m in config.methods}
    left_out = 0
    for record in store.records():
        key = labels.get(record.get("job"))
        if key is None:
            left_out += 1
        else:
            cells[key].append(record)
    for cell in cells.values():
        cell.sort(key=lambda r: r["seed"])
    return SweepData(folder, config, cells, left_out, store)


# -- the report -----------------------------------------------------------------------------------------
@dataclass
class SweepReport:
    """What :func:`write_report` computed and wrote."""

    path: Path
    table: str
    summaries: List[CellSummary]
    comparisons: List[Comparison]
    baseline: Optional[str]
    plots: List[Path] = field(default_factory=list)
    notes: List[str] = field(default_factory=list)


def _count(value: Optional[float]) -> str:
    if value is None:
        return "–"
    if math.isinf(value):
        return "∞"
    return f"{value:,.0f}" if float(value).is_integer() or abs(value) >= 100 else f"{value:,.1f}"


def _score(value: float) -> str:
    return "–" if value is None or math.isnan(value) else f"{value:.5g}"


def _p(value: Optional[float]) -> str:
    return "skipped" if value is None else f"{value:.2g}"


def results_table(summaries: Sequence[CellSummary]) -> str:
    """The main table (Markdown)."""
    header = ["problem", "method", "successes", "median evals to target", "IQR", "ERT", "mean final best", "95% CI"]
    rows = [
        [
            s.problem,
            s.method,
            f"{s.successes}/{s.runs}",
            _count(s.median),
            _count(s.iqr),
            _count(s.ert),
            _score(s.mean_best),
            f"[{_score(s.ci_low)}, {_score(s.ci_high)}]",
        ]
        for s in summaries
    ]
    return "\n".join(markdown_table(header, rows, right_align_from=2)) + "\n"


def comparisons_table(comparisons: Sequence[Comparison]) -> str:
    header = ["problem", "method", "Mann-Whitney p", f"A ({comparisons[0].baseline} faster)" if comparisons else "A"]
    rows = [
        [c.problem, c.method, _p(c.p_value), "–" if math.isnan(c.a_statistic) else f"{c.a_statistic:.2f}"]
        for c in comparisons
    ]
    return "\n".join(markdown_table(header, rows, right_align_from=2)) + "\n"


def _slug(index: int, label: str) -> str:
    return f"{index + 1:02d}-" + (re.sub(r"[^A-Za-z0-9._-]+", "-", label).strip("-") or "problem")


def _choose_baseline(config: SweepConfig, baseline: Optional[str]) -> Optional[str]:
    labels = [m.label for m in config.methods]
    if baseline is not None:
        if baseline not in labels:
            raise OptimError(f"the sweep has no method labelled {baseline!r}; its methods: {', '.join(labels)}")
        return baseline
    trees = [m.label for m in config.methods if m.settings.method == "tree"]
    return trees[0] if trees else labels[0]


def _plot_problem(data: SweepData, index: int, problem, plots_dir: Path) -> List[Path]:
    methods = [m.label for m in data.config.methods]
    cells = {m: data.cells[(problem.label, m)] for m in methods}
    curves = {}
    for method, records in cells.items():
        loaded = [data.store.curve(r["job"]) for r in records]
        curves[method] = [(c["evaluations"], c["best"]) for c in loaded if c is not None and c["evaluations"]]
    first = next((r for records in cells.values() for r in records), None)
    if first is None:
        return []
    slug = _slug(index, problem.label)
    paths = [convergence_plot(curves, plots_dir / f"{slug}-best.png", problem.label, first["goal"], first["target"])]
    if first["target"] is not None:
        evaluations = {m: [r["evaluations_to_target"] for r in records] for m, records in cells.items()}
        paths.append(
            ecdf_plot(evaluations, plots_dir / f"{slug}-ecdf.png", problem.label, data.config.stop.evaluations)
        )
    return paths


def write_report(folder, baseline: Optional[str] = None, plots: bool = True, seed: int = 0) -> SweepReport:
    """Compute the statistics of a sweep folder and write ``report.md`` and ``plots/*.png`` into it."""
    data = load_sweep(folder)
    config = data.config
    base = _choose_baseline(config, baseline)
    summaries = [
        summarize(p.label, m.label, data.cells[(p.label, m.label)], seed)
        for p in config.problems
        for m in config.methods
    ]
    comparisons = []
    for problem in config.problems:
        for method in config.methods:
            if method.label != base:
                comparisons.append(
                    compare(
                        problem.label,
                        base,
                        data.cells[(problem.label, base)],
                        method.label,
                        data.cells[(problem.label, method.label)],
                        config.stop.evaluations,
                    )
                )
    notes = []
    if data.left_out:
        notes.append(f"{data.left_out} records of jobs that are no longer in sweep.yaml were left out.")
    if any(c.p_value is None and c.note.startswith("test skipped") for c in comparisons):
        notes.append("The Mann-Whitney tests were skipped: scipy is not installed (pip install scipy).")
    written: List[Path] = []
    if plots and not plots_available():
        notes.append(f"No plots: {PLOT_EXTRA_HINT}.")
        plots = False
    if plots:
        plots_dir = data.folder / "plots"
        plots_dir.mkdir(exist_ok=True)
        for index, problem in enumerate(config.problems):
            written += _plot_problem(data, index, problem, plots_dir)
    table = results_table(summaries)
    text = _report_text(data, base, table, comparisons, written, notes)
    path = data.folder / "report.md"
    atomic_write(path, text.encode("utf-8"))
    return SweepReport(path, table, summaries, comparisons, base, written, notes)


def _report_text(
    data: SweepData,
    baseline: Optional[str],
    table: str,
    comparisons: Sequence[Comparison],
    plots: Sequence[Path],
    notes: Sequence[str],
) -> str:
    config = data.config
    records = data.records
    expected = len(config.jobs)
    target = config.stop.target
    target_text = (
        "each problem's known optimum"
        if target == "optimum"
        else "none"
        if target is None
        else f"a score of {target:g}"
    )
    lines = [
        f"# Sweep report: {config.name}",
        "",
        f"{len(records)} of {expected} runs finished: {len(config.problems)} problems × {len(config.methods)} "
        f"methods × {len(config.seeds)} seeds, at most {config.stop.evaluations:,} evaluations per run, "
        f"target: {target_text}.",
        "",
        "## Results",
        "",
        table,
        "Successes are the runs that reached the target. The median and the interquartile range "
        "(IQR = Q3 − Q1) of the evaluations to target are over the successful runs. ERT, the expected "
        "running time (Auger & Hansen 2005), is the evaluations of all runs (up to the target for the "
        "successful ones, in full for the others) divided by the number of successes; ∞ when no run "
        "succeeded. The 95% CI of the mean final best score is a percentile bootstrap "
        f"({BOOTSTRAP_RESAMPLES} resamples, seeded; Efron & Tibshirani 1993).",
        "",
    ]
    if comparisons:
        lines += [
            f"## {baseline} against each other method",
            "",
            comparisons_table(comparisons),
            "A two-sided Mann-Whitney U test (scipy.stats.mannwhitneyu) on the evaluations to target, where a "
            f"run that missed the target counts as the budget + 1 ({config.stop.evaluations + 1:,}) "
            "evaluations: worse than every success, tied with the other misses. A is the Vargha-Delaney "
            f"effect size (Vargha & Delaney 2000): the probability that a run of {baseline} needs fewer "
            "evaluations than a run of the other method, ties counting half; 0.5 means no difference.",
            "",
        ]
    if plots:
        lines += ["## Plots", ""]
        for plot in plots:
            lines += [f"![{plot.stem}](plots/{plot.name})", ""]
    if notes:
        lines += ["## Notes", ""] + [f"- {note}" for note in notes] + [""]
    return "\n".join(lines)

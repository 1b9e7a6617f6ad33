"""The sweep report: its statistics against scipy and numpy on the stored records, bootstrap coverage, plots."""

import math
import shutil
import sys
from pathlib import Path

import numpy as np
import pytest
from scipy import stats

from optim.cli import main
from optim.errors import RunFolderError
from optim.sweeps.plots import best_on_grid, ecdf_points, quartile_band
from optim.sweeps.report import (
    bootstrap_mean_interval,
    expected_running_time,
    load_sweep,
    penalised_evaluations,
    vargha_delaney_a,
    write_report,
)
from optim.sweeps.running import run_sweep
from optim.sweeps.config import load_sweep_config

PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"

# Budgets chosen so that some runs reach the target and some do not.
SWEEP = """\
name: mixed
problems:
  - {use: trap, n: 18, k: 3, shuffle: true, seed: 2, label: trap-18}
  - {use: four-peaks, n: 20, t: 2}
methods:
  - {method: tree, population: 120}
  - {method: univariate, population: 120}
  - {method: hillclimb, population: 120}
seeds: 8
stop:
  evaluations: 2400
seed: 9
"""


@pytest.fixture(scope="module")
def sweep_folder(tmp_path_factory):
    base = tmp_path_factory.mktemp("report")
    path = base / "mixed.yaml"
    path.write_text(SWEEP)
    outcome = run_sweep(load_sweep_config(path), out=base / "out", jobs=2)
    return outcome.store.path


@pytest.fixture(scope="module")
def report(sweep_folder):
    return write_report(sweep_folder)


def test_the_sweep_has_both_successes_and_failures(report):
    hits = [s.successes for s in report.summaries]
    runs = [s.runs for s in report.summaries]
    assert runs == [8] * 6
    assert sum(hits) > 0 and any(h < 8 for h in hits)


def test_cell_statistics_match_numpy_on_the_stored_records(sweep_folder, report):
    data = load_sweep(sweep_folder)
    for summary in report.summaries:
        records = data.cells[(summary.problem, summary.method)]
        hits = [r["evaluations_to_target"] for r in records if r["evaluations_to_target"] is not None]
        assert summary.successes == len(hits) == sum(r["hit_target"] for r in records)
        if hits:
            assert summary.median == pytest.approx(np.median(hits))
            assert summary.iqr == pytest.approx(stats.iqr(hits))  # scipy.stats.iqr, linear interpolation
            # ERT (Auger & Hansen 2005): evaluations of all runs until the target or the end, over successes
            spent = sum(r["evaluations_to_target"] if r["hit_target"] else r["evaluations"] for r in records)
            assert summary.ert == pytest.approx(spent / len(hits))
        else:
            assert summary.median is None and summary.ert == math.inf
        scores = [r["best_score"] for r in records]
        assert summary.mean_best == pytest.approx(np.mean(scores))
        assert summary.ci_low <= summary.mean_best <= summary.ci_high
        assert min(scores) <= summary.ci_low and summary.ci_high <= max(scores)


def test_comparisons_match_scipy_and_a_double_loop(sweep_folder, report):
    data = load_sweep(sweep_folder)
    budget = data.config.stop.evaluations
    assert report.baseline == "tree" and len(report.comparisons) == 4
    for comparison in report.comparisons:
        tree = data.cells[(comparison.problem, "tree")]
        other = data.cells[(comparison.problem, comparison.method)]
        x = [r["evaluations_to_target"] if r["hit_target"] else budget + 1 for r in tree]
        y = [r["evaluations_to_target"] if r["hit_target"] else budget + 1 for r in other]
        assert comparison.p_value == pytest.approx(stats.mannwhitneyu(x, y, alternative="two-sided").pvalue)
        wins = sum((b > a) + 0.5 * (b == a) for a in x for b in y)  # tree needs fewer evaluations
        assert comparison.a_statistic == pytest.approx(wins / (len(x) * len(y)))


def test_vargha_delaney_a_is_u_over_mn_and_a_double_loop():
    rng = np.random.default_rng(4)
    for size_x, size_y in ((7, 11), (20, 20), (1, 5)):
        x = rng.integers(0, 6, size_x).astype(float)  # many ties
        y = rng.integers(0, 6, size_y).astype(float)
        loop = sum((a > b) + 0.5 * (a == b) for a in x for b in y) / (size_x * size_y)
        assert vargha_delaney_a(x, y) == pytest.approx(loop)
        # A = U / (m n), with U the Mann-Whitney statistic of x (Vargha & Delaney 2000)
        u = stats.mannwhitneyu(x, y, alternative="two-sided").statistic
        assert vargha_delaney_a(x, y) == pytest.approx(u / (size_x * size_y))
    assert vargha_delaney_a([1.0, 2.0], [1.0, 2.0]) == 0.5
    assert vargha_delaney_a([np.inf], [3.0]) == 1.0


def test_a_missed_target_ranks_behind_every_success():
    records = [
        {"hit_target": True, "evaluations_to_target": 900, "evaluations": 1000},
        {"hit_target": False, "evaluations_to_target": None, "evaluations": 1000},
        {"hit_target": True, "evaluations_to_target": 1000, "evaluations": 1000},
    ]
    assert penalised_evaluations(records, 1000).tolist() == [900, 1001, 1000]
    # 900 + 1000 (the whole failed run) + 1000, over two successes
    assert expected_running_time(records) == pytest.approx(2900 / 2)
    assert expected_running_time(records[1:2]) == math.inf


def test_the_percentile_bootstrap_covers_the_mean_about_95_percent_of_the_time():
    # The percentile interval (Efron & Tibshirani 1993, "An Introduction to the Bootstrap", ch. 13 from memory):
    # for samples of 30 normal values its nominal 95% covers the true mean a little less often; the accepted
    # band [0.90, 0.99] is wide enough for 300 repetitions (common practice, no source).
    rng = np.random.default_rng(2024)
    repetitions, covered = 300, 0
    for _ in range(repetitions):
        sample = rng.normal(3.0, 2.0, size=30)
        mean, low, high = bootstrap_mean_interval(sample, rng, resamples=2000)
        assert mean == pytest.approx(sample.mean())
        covered += low <= 3.0 <= high
    assert 0.90 <= covered / repetitions <= 0.99


def test_the_bootstrap_is_seeded_and_narrows_with_more_data():
    values = np.random.default_rng(1).normal(size=200)
    narrow = bootstrap_mean_interval(values, np.random.default_rng(5))
    assert narrow == bootstrap_mean_interval(values, np.random.default_rng(5))
    wide = bootstrap_mean_interval(values[:20], np.random.default_rng(5))
    assert narrow[2] - narrow[1] < wide[2] - wide[1]
    assert bootstrap_mean_interval([4.0, 4.0], np.random.default_rng(0)) == (4.0, 4.0, 4.0)


def test_the_report_is_deterministic(sweep_folder, report):
    again = write_report(sweep_folder)
    assert again.table == report.table
    assert again.path.read_text() == report.path.read_text()


def test_the_report_file_holds_both_tables_and_links_the_plots(report):
    text = report.path.read_text()
    assert report.table in text
    assert "## tree against each other method" in text and "Mann-Whitney" in text
    for plot in report.plots:
        assert f"(plots/{plot.name})" in text


def test_plots_are_valid_pngs(report):
    image = pytest.importorskip("matplotlib.image")
    assert len(report.plots) == 4  # best score and ECDF for each of the two problems
    for plot in report.plots:
        data = plot.read_bytes()
        assert data.startswith(PNG_SIGNATURE) and len(data) > 5000
        pixels = image.imread(str(plot))
        assert pixels.ndim == 3 and pixels.shape[0] > 200 and pixels.shape[1] > 300
        assert pixels[..., :3].std() > 0.05  # not a blank canvas


def copy_of(folder, tmp_path):
    return Path(shutil.copytree(folder, tmp_path / "copy"))


def test_without_scipy_or_matplotlib_the_report_says_what_was_skipped(sweep_folder, tmp_path, monkeypatch):
    sweep_folder = copy_of(sweep_folder, tmp_path)
    monkeypatch.setitem(sys.modules, "scipy.stats", None)
    monkeypatch.setattr("optim.sweeps.report.plots_available", lambda: False)
    report = write_report(sweep_folder)
    text = report.path.read_text()
    assert all(c.p_value is None for c in report.comparisons)
    assert "skipped" in text and "scipy is not installed" in text
    assert "No plots" in text and "optim[plot]" in text
    assert report.plots == []


def test_best_on_grid_holds_the_last_generation_value():
    grid = np.array([5, 10, 15, 20, 100])
    values = best_on_grid([10, 20, 30], [1.0, 3.0, 4.0], grid)
    assert np.isnan(values[0])
    assert values[1:].tolist() == [1.0, 1.0, 3.0, 4.0]
    grid, quartiles = quartile_band([([10, 20], [1.0, 2.0]), ([20, 40], [5.0, 6.0])])
    assert grid.tolist() == [20, 40]
    assert quartiles[1].tolist() == [np.median([2.0, 5.0]), np.median([2.0, 6.0])]


def test_ecdf_points_count_misses_in_the_denominator():
    x, y = ecdf_points([300, None, 100, None], budget=1000)
    assert x.tolist() == [1, 100, 300, 1000]
    assert y.tolist() == [0, 0.25, 0.5, 0.5]


def test_the_report_command_prints_the_table(sweep_folder, tmp_path, capsys):
    sweep_folder = copy_of(sweep_folder, tmp_path)
    assert main(["report", str(sweep_folder), "--no-plots", "--baseline", "univariate"]) == 0
    printed = capsys.readouterr().out
    assert printed.startswith("| problem | method | successes |")
    assert "report.md" in printed
    assert "## univariate against each other method" in (sweep_folder / "report.md").read_text()


def test_a_folder_that_is_not_a_sweep_is_a_clear_error(tmp_path, capsys):
    with pytest.raises(RunFolderError, match="not a sweep folder"):
        load_sweep(tmp_path)
    assert main(["report", str(tmp_path / "missing")]) == 2
    assert "no such sweep folder" in capsys.readouterr().err

"""Tests for optim explain: the statistics, the findings on the planted-interaction demo, the files and errors."""

import importlib.util
import itertools
import json
import shutil
from pathlib import Path

import numpy as np
import pytest
import scipy.linalg
import scipy.stats

from optim.cli import main
from optim.explain import explain_run, run_summary
from optim.explain.effects import (
    adjusted_effects,
    best_candidates,
    classify_pair,
    favoured_values,
    interaction_contrasts,
    main_effects,
    wilson_interval,
)
from optim.files import read_jsonl
from optim.runs.folder import RunFolder
from optim_problems.service_demo import PLANTED, service_latency

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "configs" / "service-latency.yaml"
PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"

#: The exact 2×2 contrast of each planted kind over any background (documented in problems/service_demo.py).
EXACT_CONTRAST = {"synergy": lambda s: -s, "conflict": lambda s: s, "must-match": lambda s: -2 * s}


def _run(tmp_path_factory, name, *overrides):
    out = tmp_path_factory.mktemp(name)
    assert main(["run", str(DEMO), "--out", str(out), "--quiet", *[a for o in overrides for a in ("--set", o)]]) == 0
    folders = [p for p in out.iterdir() if p.is_dir()]
    assert len(folders) == 1
    return folders[0]


@pytest.fixture(scope="module")
def demo_run(tmp_path_factory):
    """The bundled demo config at a small budget, fixed seeds."""
    return _run(tmp_path_factory, "demo", "search.population=500", "stop.evaluations=15000", "problem.seed=3", "seed=3")


@pytest.fixture(scope="module")
def demo(demo_run):
    return explain_run(demo_run, top=12)


@pytest.fixture(scope="module")
def hill_run(tmp_path_factory):
    return _run(
        tmp_path_factory, "hill", "search.method=hillclimb", "search.population=200", "stop.evaluations=3000", "seed=4"
    )


# -- statistics against outside references --------------------------------------------------------
def test_wilson_interval_matches_scipy_and_a_published_table():
    counts = [(0, 1), (1, 1), (0, 20), (1, 29), (15, 148), (81, 263), (7, 10), (2000, 2000), (1999, 2000)]
    k, n = np.array(counts).T
    lower, upper = wilson_interval(k, n)
    for (kk, nn), lo, hi in zip(counts, lower, upper, strict=True):
        # reference: scipy.stats.binomtest(k, n).proportion_ci(method="wilson")
        ci = scipy.stats.binomtest(int(kk), int(nn)).proportion_ci(method="wilson")
        assert lo == pytest.approx(ci.low, abs=1e-12) and hi == pytest.approx(ci.high, abs=1e-12)
    # R. G. Newcombe, "Two-sided confidence intervals for the single proportion: comparison of seven
    # methods", Statistics in Medicine 17, 1998, Table II, score method (from memory)
    published = {
        (81, 263): (0.2553, 0.3662),
        (15, 148): (0.0624, 0.1605),
        (0, 20): (0.0, 0.1611),
        (1, 29): (0.0061, 0.1718),
    }
    for (kk, nn), (lo, hi) in published.items():
        got = wilson_interval(kk, nn)
        assert float(got[0]) == pytest.approx(lo, abs=5e-5) and float(got[1]) == pytest.approx(hi, abs=5e-5)
    with pytest.raises(ValueError):
        wilson_interval(3, 2)


# -- the counting trick against direct computation ----------------------------------------------
def _direct_contrast(indicator, scores, strata):
    """Per pair and stratum with boolean masks, pooled by the documented weights (a slow reference)."""
    n = indicator.shape[1]
    result = np.full((n, n), np.nan)
    spread = np.full((n, n), np.nan)
    for i, j in itertools.product(range(n), repeat=2):
        if i == j:
            continue
        total_w = total = total_var = 0.0
        for g in np.unique(strata):
            rows = strata == g
            cells = {}
            for a, b in itertools.product((0, 1), repeat=2):
                mask = rows & (indicator[:, i] == a) & (indicator[:, j] == b)
                cells[a, b] = scores[mask]
            if min(len(c) for c in cells.values()) < 2:
                continue
            w = 1.0 / sum(1.0 / len(c) for c in cells.values())
            contrast = cells[1, 1].mean() - cells[1, 0].mean() - cells[0, 1].mean() + cells[0, 0].mean()
            variance = sum(c.var(ddof=1) / len(c) for c in cells.values())
            total_w, total, total_var = total_w + w, total + w * contrast, total_var + w * w * variance
        if total_w > 0:
            result[i, j], spread[i, j] = total / total_w, np.sqrt(total_var) / total_w
    return result, spread


def test_interaction_contrasts_equal_a_direct_double_loop():
    rng = np.random.default_rng(5)
    X = rng.random((600, 7)) < np.array([0.5, 0.3, 0.8, 0.5, 0.1, 0.6, 0.97])
    scores = 100 + 3 * X[:, 0] - 5 * X[:, 0] * X[:, 1] + 2 * X[:, 3] * X[:, 4] + rng.normal(0, 1, 600)
    strata = rng.integers(0, 4, 600)
    for groups in (None, strata):
        c = interaction_contrasts(X, scores, groups)
        expected, expected_se = _direct_contrast(X, scores, np.zeros(600) if groups is None else groups)
        np.testing.assert_allclose(c.contrast, expected, rtol=1e-9, atol=1e-9, equal_nan=True)
        np.testing.assert_allclose(c.se, expected_se, rtol=1e-9, atol=1e-9, equal_nan=True)
        np.testing.assert_allclose(c.both - c.only_a - c.only_b, c.contrast, atol=1e-9, equal_nan=True)
        np.testing.assert_allclose(c.contrast, c.contrast.T, atol=1e-9, equal_nan=True)


def test_main_effects_equal_a_direct_loop():
    rng = np.random.default_rng(8)
    X = rng.random((400, 5)) < 0.4
    scores = 10 * X[:, 2] + rng.normal(0, 2, 400)
    strata = rng.integers(0, 3, 400)
    got = main_effects(X, scores, strata)
    for i in range(5):
        w_total = total = var = 0.0
        for g in range(3):
            on, off = scores[(strata == g) & X[:, i]], scores[(strata == g) & ~X[:, i]]
            w = 1 / (1 / len(on) + 1 / len(off))
            w_total, total = w_total + w, total + w * (on.mean() - off.mean())
            var += w * w * (on.var(ddof=1) / len(on) + off.var(ddof=1) / len(off))
        assert got.effect[i] == pytest.approx(total / w_total, rel=1e-9)
        assert got.se[i] == pytest.approx(np.sqrt(var) / w_total, rel=1e-9)


def test_adjusted_effects_equal_a_dummy_variable_regression():
    rng = np.random.default_rng(12)
    strata = rng.integers(0, 5, 800)
    base = rng.random(800) < 0.5
    X = np.stack(
        [base, base ^ (rng.random(800) < 0.2), rng.random(800) < 0.3 + 0.1 * strata, rng.random(800) < 0.5], axis=1
    )  # correlated columns, frequencies varying by stratum
    truth = np.array([4.0, -2.0, 1.0, 0.0])
    scores = X @ truth + 7.0 * strata + rng.normal(0, 0.5, 800)
    effect, se = adjusted_effects(X, scores, strata)
    # reference: scipy.linalg.lstsq on the indicators plus one dummy column per stratum (Frisch-Waugh-Lovell)
    design = np.hstack([X.astype(float), (strata[:, None] == np.arange(5)).astype(float)])
    coefficients, residues, _, _ = scipy.linalg.lstsq(design, scores)
    sigma2 = residues / (800 - design.shape[1])
    reference_se = np.sqrt(np.diag(np.linalg.inv(design.T @ design)) * sigma2)[:4]
    np.testing.assert_allclose(effect, coefficients[:4], rtol=1e-8, atol=1e-10)
    np.testing.assert_allclose(se, reference_se, rtol=1e-6)
    assert np.all(np.abs(effect - truth) < 5 * se)  # seeded; the true coefficients are recovered
    constant = np.hstack([X, np.ones((800, 1), dtype=bool)])
    assert np.isnan(adjusted_effects(constant, scores, strata)[0][4])  # never varies: not estimable


def test_uniform_random_candidates_show_only_the_planted_pairs(tmp_path_factory):
    # random search is a designed experiment: settings vary independently, so estimates are unconfounded
    folder = _run(
        tmp_path_factory,
        "random",
        "search.method=random",
        "search.population=1000",
        "stop.evaluations=6000",
        "problem.seed=9",
        "seed=9",
    )
    explanation = explain_run(folder)
    planted = {frozenset((p.a, p.b)) for p in PLANTED}
    found = {frozenset(p.names) for p in explanation.clear_pairs}
    assert found <= planted and len(found) >= 8
    problem = service_latency()
    interacting = {name for p in PLANTED for name in (p.a, p.b)}
    for v in explanation.variables:
        if v.name not in interacting:  # the adjusted effect is the planted main effect
            true = problem.main_effects[v.name] * (1 if v.favoured == 1 else -1)
            assert abs(v.adjusted - true) < 5 * v.adjusted_se


def test_a_published_two_level_factorial():
    # G. E. P. Box, J. S. Hunter and W. G. Hunter, Statistics for Experimenters, 2nd ed., 2005: the
    # pilot-plant 2^3 experiment (temperature T, concentration C, catalyst K), yields in standard
    # order, main effects T = 23, C = -5, K = 1.5 and interactions TC = 1.5, TK = 10, CK = 0 (from
    # memory). The book's interaction effect is half of the contrast mean(11) - mean(10) - mean(01) + mean(00).
    design = np.array(list(itertools.product((0, 1), repeat=3)))[:, ::-1].astype(bool)  # T varies fastest
    yields = np.array([60, 72, 54, 68, 52, 83, 45, 80], dtype=float)
    np.testing.assert_allclose(main_effects(design, yields).effect, [23, -5, 1.5])
    c = interaction_contrasts(design, yields)
    assert (c.contrast[0, 1] / 2, c.contrast[0, 2] / 2, c.contrast[1, 2] / 2) == pytest.approx((1.5, 10, 0))


def test_best_candidates_and_favoured_values():
    scores = np.array([5.0, 1.0, 3.0, 1.0, 9.0])
    assert best_candidates(scores, "minimize", 0.4, 2).tolist() == [1, 3]
    assert best_candidates(scores, "maximize", 0.1, 3).tolist() == [4, 0, 2]
    X = np.array([[0, 2], [1, 2], [1, 0], [0, 1]], dtype=np.uint8)
    values, counts = favoured_values(X, np.array([2, 3]))
    assert values.tolist() == [0, 2] and counts.tolist() == [2, 2]  # a tie goes to the smaller value


@pytest.mark.parametrize(
    "cells, kind, flag",
    [
        ((+3.0, +2.0, -35.0), "synergy", True),  # neither alone helps, together they do
        ((-6.0, -4.0, -30.0), "synergy", False),  # both help alone, together more than the sum
        ((+60.0, +58.0, -6.0), "must-match", False),  # mismatches are slow, either match is fine
        ((-15.0, -18.0, +12.0), "conflict", True),  # either one helps, both is worse than neither
        ((-18.0, -3.0, -10.0), "conflict", False),  # best with the first alone
        ((-20.0, -15.0, -25.0), "overlap", False),  # both help, together less than the sum
        ((+5.0, +6.0, +30.0), "conflict", False),  # each hurts alone, together much worse
        ((-1.5, -0.5, +30.0), "conflict", False),  # neither alone matters, together they hurt
        ((-0.1, 0.1, 0.05), "unclear", False),
    ],
)
def test_pair_shapes_for_both_goals(cells, kind, flag):
    only_a, only_b, both = cells
    contrast = both - only_a - only_b
    for goal, sign in (("minimize", 1.0), ("maximize", -1.0)):  # a maximised score is the mirror image
        shape = classify_pair(sign * only_a, sign * only_b, sign * both, 1.0, 1.0, sign * contrast, 1.0, goal)
        assert shape.kind == kind
        assert (shape.only_together if kind == "synergy" else shape.one_or_other) == flag


# -- the planted-interaction demo ---------------------------------------------------------------
def test_planted_pairs_are_the_strongest_interactions_with_the_right_sign(demo):
    planted = {frozenset((p.a, p.b)): p for p in PLANTED}
    assert all(frozenset(p.names) in planted for p in demo.pairs[:7])
    found = [p for p in demo.pairs[:12] if frozenset(p.names) in planted]
    assert len(found) >= 9
    isolated = {"payment-api-v3", "utc-timestamps", "prefetch-seats", "read-replicas", "optimistic-locking"}
    shaped = 0
    for pair in found:
        truth = planted[frozenset(pair.names)]
        exact = EXACT_CONTRAST[truth.kind](truth.strength)
        assert np.sign(pair.contrast) == np.sign(exact)
        assert abs(pair.contrast - exact) < max(4 * pair.se, 0.3 * abs(exact))
        assert pair.link is not None  # the model linked every planted pair at some generation
        # pairs that share no toggle with another planted pair keep their shape whatever the background
        if truth.a in isolated and pair.shape.kind != "unclear":
            assert pair.shape.kind == truth.kind
            shaped += 1
    assert shaped >= 4
    assert sum(pair.link.p_adjusted < 0.05 for pair in found) >= 8  # most links are convincing
    assert demo.goal == "minimize"


def test_important_toggles_lead_and_inert_toggles_trail_the_main_effects(demo):
    problem = service_latency()
    flipped = np.repeat(problem.optimal_settings[None, :], problem.n, axis=0)
    flipped[np.arange(problem.n), np.arange(problem.n)] ^= 1
    cost = problem.expected_latency(flipped) - problem.optimum  # noise-free cost of flipping each toggle
    order = [v.index for v in demo.variables]
    assert all(cost[i] >= 10 for i in order[:8])
    involved = {name for p in PLANTED for name in (p.a, p.b)}
    inert = [
        i for i, name in enumerate(problem.variable_names) if problem.main_effects[name] == 0 and name not in involved
    ]
    assert len(inert) == 12 and min(order.index(i) for i in inert) >= 24
    assert sum(demo.variables[order.index(i)].helps is None for i in inert) >= 7
    for v in demo.variables[:8]:  # the best candidates agree on the optimal setting of each leading toggle
        assert v.favoured == problem.optimal_settings[v.index] and v.interval[0] > 0.9 and v.helps


def test_links_report_the_fit_sizes_an_auto_run_recorded(tmp_path_factory):
    folder = _run(tmp_path_factory, "auto", "search.population=auto", "stop.evaluations=12000", "seed=5")
    populations = [record["population"] for record in RunFolder(folder).read_log()]
    assert len(set(populations)) >= 3  # the ladder restarted with larger populations
    recorded = {r["generation"]: r["fitted_on"] for r in read_jsonl(folder / RunFolder.TREES)}
    # every tree was fitted on the survivors of its run's pool: half of that run's population (select 0.5)
    assert recorded and all(size == populations[g] // 2 for g, size in recorded.items())
    explanation = explain_run(folder)
    assert len({link.fitted_on for link in explanation.links}) >= 2  # links from runs of different sizes
    for link in explanation.links:
        assert link.fitted_on == recorded[link.generation]
        assert link.g == pytest.approx(2 * recorded[link.generation] * link.peak_information)


def test_link_p_values_follow_the_chi_squared_tail(demo):
    link = demo.links[0]  # reference for the χ² tail: scipy.stats.chi2.sf
    assert link.p_value == pytest.approx(
        scipy.stats.chi2.sf(2 * link.fitted_on * link.peak_information, link.df), rel=1e-6, abs=1e-300
    )


def test_explain_command_writes_reports_and_pictures(demo_run, capsys):
    pytest.importorskip("matplotlib")  # the optional 'plot' extra
    assert main(["explain", str(demo_run), "--top", "5"]) == 0
    printed = capsys.readouterr().out
    assert "payment-api-v3 must match payment-webhooks-v3" in printed and "wrote explain.md" in printed
    for name in ("tree.png", "interactions.png", "convergence.png"):
        data = (demo_run / name).read_bytes()
        assert data.startswith(PNG_SIGNATURE) and len(data) > 5000
    text = (demo_run / "explain.md").read_text()
    for fragment in (
        "not a designed experiment",
        "Wilson",
        "mutual information",
        "help only together",
        "conflict",
        "must match",
        "## How the model sharpened",
        "tree.png",
    ):
        assert fragment in text
    document = json.loads((demo_run / "explain.json").read_text())
    assert document["run"]["goal"] == "minimize" and len(document["variables"]) == 40
    assert len(document["interactions"]) == 5 and document["links"]
    assert main(["explain", str(demo_run), "--format", "json", "--no-pictures"]) == 0
    assert json.loads(capsys.readouterr().out)["format"] == "optim-explain-1"


def test_run_summary_is_three_lines_and_the_command(demo_run):
    lines = run_summary(demo_run)
    assert len(lines) == 4
    assert "payment-api-v3 must match payment-webhooks-v3" in lines[1]
    assert lines[3].startswith("see the rest: optim explain ") and str(demo_run) in lines[3]


def test_text_report_without_matplotlib(demo_run, tmp_path, monkeypatch, capsys):
    folder = tmp_path / "copy"
    shutil.copytree(demo_run, folder)
    for name in ("tree.png", "interactions.png", "convergence.png"):
        (folder / name).unlink(missing_ok=True)
    real = importlib.util.find_spec
    monkeypatch.setattr(importlib.util, "find_spec", lambda name, *a: None if name == "matplotlib" else real(name, *a))
    assert main(["explain", str(folder)]) == 0
    assert "matplotlib is not installed" in capsys.readouterr().out
    assert not (folder / "tree.png").exists() and "matplotlib is not installed" in (folder / "explain.md").read_text()


def test_a_run_without_a_tree_says_what_it_can(hill_run, capsys):
    assert main(["explain", str(hill_run)]) == 0
    printed = capsys.readouterr().out
    assert "no dependency tree was learned" in printed
    explanation = explain_run(hill_run)
    assert not explanation.pairs_available and not explanation.links and "hill climber" in explanation.pairs_reason
    strong = {v.name: v for v in explanation.variables}
    assert strong["debug-sql-log"].favoured == 0 and strong["connection-pool"].favoured == 1
    text = (hill_run / "explain.md").read_text()
    assert "does not fit a probability model" in text and "Settings the best candidates agree on" in text
    assert not (hill_run / "tree.png").exists()
    assert (hill_run / "convergence.png").exists() == (importlib.util.find_spec("matplotlib") is not None)


def test_few_candidates_bring_cautions(tmp_path_factory):
    folder = _run(tmp_path_factory, "tiny", "search.method=random", "search.population=10", "stop.evaluations=30")
    explanation = explain_run(folder)
    assert explanation.best_count == 20
    assert any("fewer than 10" in c or "cannot be estimated" in c for c in explanation.cautions)
    assert main(["explain", str(folder), "--no-pictures"]) == 0


def test_an_unfinished_run_is_explained_with_a_note(demo_run, tmp_path):
    folder = tmp_path / "unfinished"
    shutil.copytree(demo_run, folder)
    (folder / RunFolder.RESULT).unlink()
    explanation = explain_run(folder)
    assert not explanation.data.finished and any("not finished" in n for n in explanation.notes)


@pytest.mark.parametrize(
    "damage, fragment",
    [
        ("missing", "no such run folder"),
        ("config.yaml", "not a run folder"),
        ("evaluated.npz", "incomplete run folder"),
        ("trees.jsonl", "trees.jsonl:2: expected each edge"),
    ],
)
def test_missing_or_incomplete_folders_give_one_line_and_status_2(demo_run, tmp_path, capsys, damage, fragment):
    folder = tmp_path / "damaged"
    if damage != "missing":
        shutil.copytree(demo_run, folder)
        target = folder / damage
        if damage == "trees.jsonl":
            lines = target.read_text().splitlines(keepends=True)
            lines[1] = '{"generation": 2, "edges": [[0, 99, 0.1]]}\n'
            target.write_text("".join(lines))
        else:
            target.unlink()
            (folder / "evaluated.part").unlink(missing_ok=True)
    assert main(["explain", str(folder)]) == 2
    err = capsys.readouterr().err.strip()
    assert err.startswith("optim: error: ") and fragment in err
    assert len(err.splitlines()) == 1 and "Traceback" not in err

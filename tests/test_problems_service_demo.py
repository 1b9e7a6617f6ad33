"""Tests for optim_problems.service_demo (the invented ticket-booking latency demo)."""

import itertools

import numpy as np
import pytest

from optim_problems.service_demo import PLANTED, TOGGLES, ServiceLatency, service_latency

DOCUMENTED_CONTRAST = {"synergy": -1.0, "conflict": 1.0, "must-match": -2.0}


def _slow_latency(problem, row):
    """Per-candidate reference built from the exposed structure and the documented formulas."""
    on = {name: int(v) for name, v in zip(problem.variable_names, row, strict=True)}
    total = problem.base_latency + sum(effect * on[name] for name, effect in problem.main_effects.items())
    for pair in problem.interactions:
        a, b = on[pair.a], on[pair.b]
        if pair.kind == "synergy":
            total -= pair.strength * a * b
        elif pair.kind == "conflict":
            total += pair.strength * a * b
        else:
            total += pair.strength * (a != b)
    return total


def _all_settings(n):
    return np.array(list(itertools.product((0, 1), repeat=n)), dtype=np.uint8)


def _four_corners(problem, backgrounds, a, b):
    """Scores of the settings 00, 01, 10, 11 of toggles a, b over each background."""
    i, j = problem.variable_names.index(a), problem.variable_names.index(b)
    scores = {}
    for va, vb in itertools.product((0, 1), repeat=2):
        X = backgrounds.copy()
        X[:, i], X[:, j] = va, vb
        scores[(va, vb)] = problem.evaluate(X)
    return scores


def test_evaluate_matches_slow_reference():
    rng = np.random.default_rng(31)
    problem = service_latency()
    X = rng.integers(0, 2, size=(300, 40)).astype(np.uint8)
    scores = problem.evaluate(X)
    assert scores.dtype == np.float64 and scores.shape == (300,)
    np.testing.assert_allclose(scores, [_slow_latency(problem, row) for row in X], atol=1e-9)
    assert problem.evaluate(np.zeros((1, 40), dtype=np.uint8))[0] == 250.0


@pytest.mark.parametrize("toggles", [2, 7, 12, 16])
def test_exposed_optimum_equals_brute_force(toggles):
    problem = service_latency(toggles=toggles)
    scores = problem.evaluate(_all_settings(toggles))
    assert problem.optimum == pytest.approx(scores.min(), abs=1e-9)
    assert problem.evaluate(problem.optimal_settings[None, :])[0] == pytest.approx(problem.optimum)


def test_full_optimum_by_enumerating_the_interacting_toggles():
    # All 2^17 settings of the toggles that appear in a planted pair, the
    # others set by the sign of their main effect (the sum separates).
    problem = service_latency()
    names = problem.variable_names
    relevant = sorted({names.index(t) for pair in problem.planted_pairs for t in pair[:2]})
    assert len(relevant) == 17 and problem.relevant_toggles == sorted(names[i] for i in relevant)
    base = np.array([1 if problem.main_effects[name] < 0 else 0 for name in names], dtype=np.uint8)
    X = np.repeat(base[None, :], 1 << len(relevant), axis=0)
    X[:, relevant] = _all_settings(len(relevant))
    scores = problem.evaluate(X)
    assert problem.optimum == pytest.approx(scores.min(), abs=1e-9) == 79.0
    assert np.sum(scores == scores.min()) == 1  # documented: a single best setting
    # flipping any single toggle of the optimum never helps
    flips = np.repeat(problem.optimal_settings[None, :], 40, axis=0)
    flips[np.arange(40), np.arange(40)] ^= 1
    assert problem.evaluate(flips).min() >= problem.optimum


def test_interaction_contrast_has_the_documented_value_on_any_background():
    rng = np.random.default_rng(32)
    problem = service_latency()
    backgrounds = rng.integers(0, 2, size=(200, 40)).astype(np.uint8)
    for a, b, kind in problem.planted_pairs:
        strength = next(p.strength for p in PLANTED if (p.a, p.b) == (a, b))
        f = _four_corners(problem, backgrounds, a, b)
        contrast = f[(1, 1)] - f[(1, 0)] - f[(0, 1)] + f[(0, 0)]
        np.testing.assert_allclose(contrast, DOCUMENTED_CONTRAST[kind] * strength, atol=1e-9)


def test_unplanted_pairs_do_not_interact():
    rng = np.random.default_rng(33)
    problem = service_latency()
    planted = {frozenset(pair[:2]) for pair in problem.planted_pairs}
    backgrounds = rng.integers(0, 2, size=(50, 40)).astype(np.uint8)
    checked = 0
    for a, b in itertools.combinations(problem.variable_names, 2):
        if frozenset((a, b)) in planted or rng.random() > 0.1:
            continue
        f = _four_corners(problem, backgrounds, a, b)
        np.testing.assert_allclose(f[(1, 1)] - f[(1, 0)] - f[(0, 1)] + f[(0, 0)], 0.0, atol=1e-9)
        checked += 1
    assert checked > 30


def test_noisy_contrast_keeps_its_sign():
    # noise sd 5 ms: each contrast has sd 10, the mean of 3000 has sd 0.18, and
    # the smallest planted |contrast| is 25, so a 2 ms margin is ample.
    rng = np.random.default_rng(34)
    problem = service_latency(noise=5.0, seed=7)
    backgrounds = rng.integers(0, 2, size=(3000, 40)).astype(np.uint8)
    for pair in problem.interactions:
        f = _four_corners(problem, backgrounds, pair.a, pair.b)
        mean = float(np.mean(f[(1, 1)] - f[(1, 0)] - f[(0, 1)] + f[(0, 0)]))
        assert abs(mean - DOCUMENTED_CONTRAST[pair.kind] * pair.strength) < 2.0


def test_pair_kinds_behave_as_documented_with_everything_else_off():
    problem = service_latency()
    off = np.zeros((1, 40), dtype=np.uint8)
    for a, b, kind in problem.planted_pairs:
        f = {key: value[0] for key, value in _four_corners(problem, off, a, b).items()}
        if kind == "synergy":
            assert f[(1, 0)] >= f[(0, 0)] and f[(0, 1)] >= f[(0, 0)] and f[(1, 1)] < f[(0, 0)]
        elif kind == "conflict":
            assert f[(1, 0)] < f[(0, 0)] and f[(0, 1)] < f[(0, 0)] and f[(1, 1)] > f[(0, 0)]
        else:
            assert min(f[(1, 0)], f[(0, 1)]) > max(f[(0, 0)], f[(1, 1)])


def test_structure_matches_the_module_documentation():
    problem = service_latency()
    assert [name for name, _ in TOGGLES] == problem.variable_names
    assert len(set(problem.variable_names)) == 40
    assert {kind for _, _, kind in problem.planted_pairs} == {"synergy", "conflict", "must-match"}
    assert sum(effect == 0 for effect in problem.main_effects.values()) >= 10
    for pair in problem.interactions:
        assert pair.strength > 0
        if pair.kind == "synergy":
            assert problem.main_effects[pair.a] >= 0 and problem.main_effects[pair.b] >= 0
        if pair.kind == "conflict":
            assert problem.main_effects[pair.a] < 0 and problem.main_effects[pair.b] < 0
    assert problem.goal == "minimize" and problem.binary


def test_reduced_problems_keep_only_pairs_among_their_toggles():
    small = service_latency(toggles=16)
    assert small.n == 16 and len(small.planted_pairs) == 6
    kept = set(small.variable_names)
    assert all(a in kept and b in kept for a, b, _ in small.planted_pairs)
    assert {kind for _, _, kind in small.planted_pairs} == {"synergy", "conflict", "must-match"}


def test_noise_is_seeded_and_centred():
    rng = np.random.default_rng(35)
    X = rng.integers(0, 2, size=(4000, 40)).astype(np.uint8)
    clean = service_latency().evaluate(X)
    np.testing.assert_array_equal(clean, service_latency().evaluate(X))
    first = service_latency(noise=3.0, seed=1).evaluate(X)
    again = service_latency(noise=3.0, seed=1).evaluate(X)
    other = service_latency(noise=3.0, seed=2).evaluate(X)
    np.testing.assert_array_equal(first, again)
    assert not np.array_equal(first, other)
    residual = first - clean
    # mean of 4000 draws of sd 3 has sd 0.05; sample sd within 5% of 3
    assert abs(residual.mean()) < 0.3 and abs(residual.std() - 3.0) < 0.15
    assert service_latency(noise=3.0).optimum == service_latency().optimum


def test_bad_parameters_and_candidates_are_rejected():
    with pytest.raises(ValueError, match="toggles"):
        service_latency(toggles=41)
    with pytest.raises(ValueError, match="toggles"):
        ServiceLatency(toggles=1)
    with pytest.raises(ValueError, match="noise"):
        service_latency(noise=-1.0)
    problem = service_latency(toggles=5)
    with pytest.raises(ValueError, match="shape"):
        problem.evaluate(np.zeros((2, 6), dtype=np.uint8))
    with pytest.raises(ValueError, match="0/1"):
        problem.evaluate(np.full((1, 5), 2, dtype=np.uint8))

"""Tests of optim_problems.nk: tables, neighbourhoods, vectorised fitness, DP and enumeration optima."""

import itertools

import numpy as np
import pytest

from optim_problems._instances import binary_assignments, exhaustive_maximum
from optim_problems.nk import (
    NKLandscape,
    adjacent_neighbours,
    adjacent_optimum,
    brute_force_optimum,
    nk_landscape,
    random_neighbours,
)


def _slow_fitness(problem, x):
    """Kauffman's mean of f_i, one variable at a time (own bit most significant)."""
    total = 0.0
    for i in range(problem.n):
        bits = [x[i]] + [x[j] for j in problem.neighbours[i]]
        index = 0
        for bit in bits:
            index = 2 * index + int(bit)
        total += problem.tables[i][index]
    return total / problem.n


# ---------------------------------------------------------------- objective


@pytest.mark.parametrize("neighbourhood", ["adjacent", "random"])
@pytest.mark.parametrize("n, k", [(9, 0), (12, 3), (15, 6)])
def test_evaluate_matches_per_candidate_reference(neighbourhood, n, k):
    problem = nk_landscape(n, k, neighbourhood=neighbourhood, seed=51, solve=False)
    X = np.random.default_rng(51).integers(0, 2, size=(200, n)).astype(np.uint8)
    expected = np.array([_slow_fitness(problem, x) for x in X])
    np.testing.assert_allclose(problem.evaluate(X), expected, rtol=0, atol=1e-12)
    assert problem.evaluate(X).dtype == np.float64


def test_mean_fitness_of_random_candidates_is_near_one_half():
    # Table entries are uniform on [0, 1): over 2000 candidates of a 100-variable
    # landscape the average is within 0.03 of 1/2 (many sd for the table draw).
    problem = nk_landscape(100, 4, seed=52, solve=False)
    X = np.random.default_rng(52).integers(0, 2, size=(2000, 100)).astype(np.uint8)
    assert abs(problem.evaluate(X).mean() - 0.5) < 0.03


def test_evaluate_rejects_wrong_shape():
    problem = nk_landscape(6, 2, solve=False)
    with pytest.raises(ValueError, match=r"\(count, 6\)"):
        problem.evaluate(np.zeros((2, 7), np.uint8))


# ---------------------------------------------------------------- exact optima


@pytest.mark.parametrize(
    "n, k, seed",
    [(1, 0, 1), (6, 0, 2), (8, 1, 3), (11, 2, 4), (13, 3, 5), (16, 4, 6), (12, 7, 7), (9, 8, 8)],
)
def test_dynamic_programme_equals_enumeration(n, k, seed):
    # DP after Wright, Thompson & Zhang 2000 ("The computational complexity of
    # N-K fitness functions") against enumeration of all 2**n candidates.
    problem = nk_landscape(n, k, seed=seed, solve=False)
    best, assignment = adjacent_optimum(problem)
    brute, _ = brute_force_optimum(problem)
    assert best == pytest.approx(brute, abs=1e-12)
    assert problem.evaluate_one(assignment) == best


def test_separable_landscape_optimum_is_mean_of_table_maxima():
    # With K = 0 every variable is independent, so the optimum is the mean of
    # max(f_i(0), f_i(1)) (common practice, no source).
    problem = nk_landscape(40, 0, seed=53)
    assert problem.optimum == pytest.approx(problem.tables.max(axis=1).mean(), abs=1e-12)


def test_dynamic_programme_scales_past_enumeration():
    problem = nk_landscape(120, 5, seed=54)
    assert problem.optimum_source.startswith("dynamic programming")
    # No single bit flip improves the optimum, and it beats random candidates.
    _, assignment = adjacent_optimum(problem)
    flips = np.repeat(assignment[None, :], problem.n, axis=0)
    flips[np.arange(problem.n), np.arange(problem.n)] ^= 1
    assert problem.evaluate(flips).max() <= problem.optimum + 1e-12
    X = np.random.default_rng(54).integers(0, 2, size=(500, 120)).astype(np.uint8)
    assert problem.evaluate(X).max() < problem.optimum


def test_random_neighbourhood_optimum_by_enumeration():
    problem = nk_landscape(12, 3, neighbourhood="random", seed=55)
    assert problem.optimum_source == "enumeration of all 2**n candidates"
    X = binary_assignments(12, 0, 1 << 12)
    assert problem.optimum == problem.evaluate(X).max()
    with pytest.raises(ValueError, match="adjacent"):
        adjacent_optimum(problem)


def test_exhaustive_maximum_equals_itertools_enumeration():
    rng = np.random.default_rng(56)
    weights = rng.normal(size=(8, 8))

    def quadratic(X):
        Y = X.astype(float)
        return np.einsum("ci,ij,cj->c", Y, weights, Y)

    rows = np.array(list(itertools.product([0, 1], repeat=8)), np.uint8)
    expected = quadratic(rows).max()
    best, row = exhaustive_maximum(quadratic, 8, chunk_bits=3)
    assert best == expected and quadratic(row[None])[0] == expected
    np.testing.assert_array_equal(binary_assignments(8, 0, 256), rows)
    fixed, fixed_row = exhaustive_maximum(quadratic, 8, fix_first_zero=True, chunk_bits=2)
    assert fixed == quadratic(rows[rows[:, 0] == 0]).max() and fixed_row[0] == 0


# ---------------------------------------------------------------- generation


def test_adjacent_neighbours_are_the_next_k_cyclically():
    np.testing.assert_array_equal(adjacent_neighbours(5, 2), [[1, 2], [2, 3], [3, 4], [4, 0], [0, 1]])
    assert nk_landscape(10, 3, solve=False).is_adjacent


def test_random_neighbours_are_distinct_others():
    rng = np.random.default_rng(57)
    neighbours = random_neighbours(30, 5, rng)
    for i, row in enumerate(neighbours):
        assert len(set(row)) == 5 and i not in row and np.all(np.diff(row) > 0)
        assert row.min() >= 0 and row.max() < 30
    problem = nk_landscape(30, 5, neighbourhood="random", seed=57, solve=False)
    assert not problem.is_adjacent


def test_random_neighbours_cover_all_others_evenly():
    # Each variable is picked by each of the 49 others with probability 4/49,
    # so its count is Binomial(49, 4/49) (mean 4); a count of 20 or more for
    # any of the 50 variables has probability about 2e-8.
    neighbours = random_neighbours(50, 4, np.random.default_rng(58))
    counts = np.bincount(neighbours.ravel(), minlength=50)
    assert counts.sum() == 200 and counts.max() < 20


def test_generation_is_reproducible_from_seed():
    a = nk_landscape(20, 3, neighbourhood="random", seed=9, solve=False)
    b = nk_landscape(20, 3, neighbourhood="random", seed=9, solve=False)
    c = nk_landscape(20, 3, neighbourhood="random", seed=10, solve=False)
    np.testing.assert_array_equal(a.tables, b.tables)
    np.testing.assert_array_equal(a.neighbours, b.neighbours)
    assert not np.array_equal(a.tables, c.tables)
    assert a.tables.shape == (20, 16) and a.tables.min() >= 0 and a.tables.max() < 1


# ---------------------------------------------------------------- factory


def test_factory_defaults_and_options():
    problem = nk_landscape()
    assert (problem.n, problem.k, problem.neighbourhood) == (20, 3, "adjacent")
    assert problem.optimum == pytest.approx(brute_force_optimum(problem)[0], abs=1e-12)
    assert problem.describe()["k"] == 3
    assert nk_landscape(solve=False).optimum is None
    # Too large for "auto" either way: no optimum.
    assert nk_landscape(40, 3, neighbourhood="random").optimum is None
    # K = n - 1 with small n: enumeration is cheaper than the DP.
    assert nk_landscape(10, 9).optimum_source == "enumeration of all 2**n candidates"


@pytest.mark.parametrize(
    "arguments, message",
    [
        ({"n": 0}, "n must be"),
        ({"n": 5, "k": 5}, "k must be"),
        ({"n": 5, "k": -1}, "k must be"),
        ({"neighbourhood": "ring"}, "neighbourhood must be"),
        ({"solve": "later"}, "solve must be"),
    ],
)
def test_factory_rejects_bad_parameters(arguments, message):
    with pytest.raises(ValueError, match=message):
        nk_landscape(**arguments)


def test_constructor_checks_shapes():
    with pytest.raises(ValueError, match="columns"):
        NKLandscape(adjacent_neighbours(4, 1), np.zeros((4, 3)))
    with pytest.raises(ValueError, match="own neighbour"):
        NKLandscape([[0], [0], [1]], np.zeros((3, 4)))

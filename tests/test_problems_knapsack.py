"""Tests of optim_problems.knapsack: generator, readers, repair and penalty scores, DP reference."""

from fractions import Fraction
from pathlib import Path

import numpy as np
import pytest
from scipy.optimize import Bounds, LinearConstraint, linprog, milp

from optim_problems._instances import InstanceFormatError, exhaustive_maximum
from optim_problems.knapsack import (
    KINDS,
    KnapsackProblem,
    dp_knapsack,
    generate_items,
    knapsack,
    read_items_csv,
    read_items_yaml,
)

DATA = Path(__file__).parent / "data" / "instances"
EXAMPLES = Path(__file__).parent.parent / "optim_problems" / "instances"


def _slow_repair(weights, values, capacity, x):
    """Drop the selected item of worst value/weight ratio (ties: the later
    item) until the selection fits; return the kept item indices."""

    def ratio(j):
        return Fraction(int(values[j]), int(weights[j])) if weights[j] > 0 else float("inf")

    chosen = [j for j in range(len(x)) if x[j]]
    while sum(int(weights[j]) for j in chosen) > capacity:
        worst = min(chosen, key=lambda j: (ratio(j), -j))
        chosen.remove(worst)
    return chosen


def _slow_penalty(problem, x):
    weight = sum(int(problem.weights[j]) for j in range(problem.n) if x[j])
    value = sum(int(problem.values[j]) for j in range(problem.n) if x[j])
    if weight <= problem.capacity:
        return float(value)
    ratios = [problem.values[j] / problem.weights[j] for j in range(problem.n) if problem.weights[j] > 0]
    lam = 1 + max(ratios)
    return value - lam * (weight - problem.capacity) - int(problem.values.sum())


def _milp_optimum(weights, values, capacity):
    """Reference optimum with scipy.optimize.milp (HiGHS)."""
    result = milp(
        c=-np.asarray(values, float),
        constraints=LinearConstraint(np.asarray(weights, float)[None, :], -np.inf, capacity),
        integrality=np.ones(len(weights)),
        bounds=Bounds(0, 1),
    )
    assert result.status == 0
    return round(-result.fun)


# ---------------------------------------------------------------- objective


@pytest.mark.parametrize("kind", KINDS)
def test_repair_score_matches_greedy_dropping_reference(kind):
    # data_range=10 gives many equal ratios, exercising the tie rule.
    weights, values = generate_items(25, kind=kind, data_range=10, seed=41)
    problem = KnapsackProblem(weights, values, int(weights.sum() * 0.4))
    rng = np.random.default_rng(41)
    X = rng.integers(0, 2, size=(300, 25)).astype(np.uint8)
    repaired = problem.repair(X)
    for x, r, score in zip(X, repaired, problem.evaluate(X), strict=True):
        kept = _slow_repair(weights, values, problem.capacity, x)
        assert np.flatnonzero(r).tolist() == sorted(kept)
        assert score == sum(int(values[j]) for j in kept)
    assert np.all(problem.is_feasible(repaired))
    assert np.all(repaired <= X)
    np.testing.assert_array_equal(problem.selected_weight(repaired), repaired.astype(int) @ weights)
    np.testing.assert_array_equal(problem.selected_value(X), X.astype(int) @ values)


def test_repair_keeps_zero_weight_items_and_feasible_candidates():
    problem = KnapsackProblem([0, 5, 4, 7], [3, 10, 2, 7], capacity=6)
    X = np.array([[1, 1, 1, 1], [1, 0, 1, 0], [0, 0, 0, 0]], np.uint8)
    for x, r in zip(X, problem.repair(X), strict=True):
        assert np.flatnonzero(r).tolist() == sorted(_slow_repair(problem.weights, problem.values, 6, x))
    np.testing.assert_array_equal(problem.repair(X[1:]), X[1:])


def test_penalty_score_matches_formula_and_ranks_infeasible_last():
    weights, values = generate_items(20, kind="weakly-correlated", data_range=100, seed=42)
    problem = KnapsackProblem(weights, values, int(weights.sum() * 0.3), constraint="penalty")
    rng = np.random.default_rng(42)
    X = (rng.random((400, 20)) < 0.35).astype(np.uint8)
    scores = problem.evaluate(X)
    np.testing.assert_allclose(scores, [_slow_penalty(problem, x) for x in X], rtol=1e-12)
    feasible = problem.is_feasible(X)
    assert feasible.any() and (~feasible).any()
    assert scores[~feasible].max() < 0 <= scores[feasible].min()


def test_penalty_beats_plain_linear_penalty_pitfall():
    # One heavy valuable item slightly over capacity: value - lam * excess alone
    # would rank it above the empty set, the only feasible choice.
    problem = KnapsackProblem([100], [100], capacity=99, constraint="penalty")
    scores = problem.evaluate(np.array([[1], [0]], np.uint8))
    assert scores[0] < scores[1] == 0


def test_evaluate_rejects_wrong_shape():
    problem = knapsack(items=5, solve=False)
    with pytest.raises(ValueError, match=r"\(count, 5\)"):
        problem.evaluate(np.zeros((2, 4), np.uint8))


# ---------------------------------------------------------------- exact references


@pytest.mark.parametrize("kind", KINDS)
@pytest.mark.parametrize("seed", [1, 2])
def test_dynamic_programme_agrees_with_milp(kind, seed):
    weights, values = generate_items(40, kind=kind, data_range=1000, seed=seed)
    capacity = int(weights.sum() // 2)
    best, selection = dp_knapsack(weights, values, capacity)
    assert best == _milp_optimum(weights, values, capacity)
    assert int(selection @ weights) <= capacity and int(selection @ values) == best
    for constraint in ("repair", "penalty"):
        problem = KnapsackProblem(weights, values, capacity, constraint=constraint)
        assert problem.evaluate_one(selection) == best


def test_dynamic_programme_within_dantzig_bound():
    # Dantzig 1957 ("Discrete-variable extremum problems"): the LP relaxation
    # U bounds the optimum from above, and the greedy set without the critical
    # item is within that item's value of U, so U - max value <= optimum <= U.
    weights, values = generate_items(60, kind="strongly-correlated", seed=43)
    capacity = int(weights.sum() * 0.35)
    best, _ = dp_knapsack(weights, values, capacity)
    relaxed = linprog(-values.astype(float), A_ub=weights[None, :].astype(float), b_ub=[capacity], bounds=(0, 1))
    upper = -relaxed.fun
    assert upper - values.max() - 1e-6 <= best <= upper + 1e-6


def test_dynamic_programme_equals_enumeration_with_heavy_items():
    weights = np.array([3, 9, 4, 30, 5, 7, 2, 6, 8, 1, 11, 5, 4, 40])
    values = generate_items(14, seed=44, data_range=50)[1]
    problem = KnapsackProblem(weights, values, capacity=25, constraint="penalty")
    brute, _ = exhaustive_maximum(problem.evaluate, 14)
    best, selection = dp_knapsack(weights, values, 25)
    assert best == brute == problem.evaluate_one(selection)
    value, selection = dp_knapsack([5, 6], [4, 4], 0)
    assert value == 0 and selection.tolist() == [0, 0]


# ---------------------------------------------------------------- generator


def test_generator_families_follow_their_definitions():
    # Definitions after Kellerer, Pferschy & Pisinger 2004 ("Knapsack Problems"; bounds from memory).
    r = 1000
    w, p = generate_items(2000, kind="uncorrelated", data_range=r, seed=45)
    assert w.min() >= 1 and w.max() <= r and p.min() >= 1 and p.max() <= r
    # Independent uniforms: the sample correlation is within 0.12 of 0 (about 5.4 sd).
    assert abs(np.corrcoef(w, p)[0, 1]) < 0.12
    w, p = generate_items(2000, kind="weakly-correlated", data_range=r, seed=45)
    assert np.all(np.abs(p - w) <= r // 10) and p.min() >= 1
    w, p = generate_items(2000, kind="strongly-correlated", data_range=r, seed=45)
    np.testing.assert_array_equal(p, w + r // 10)


def test_generator_is_reproducible_from_seed():
    a = generate_items(30, kind="weakly-correlated", seed=7)
    b = generate_items(30, kind="weakly-correlated", seed=7)
    c = generate_items(30, kind="weakly-correlated", seed=8)
    np.testing.assert_array_equal(a[0], b[0])
    np.testing.assert_array_equal(a[1], b[1])
    assert not np.array_equal(a[0], c[0])


def test_generator_rejects_bad_parameters():
    with pytest.raises(ValueError, match="kind must be"):
        generate_items(5, kind="anticorrelated")
    with pytest.raises(ValueError, match="items"):
        generate_items(0)
    with pytest.raises(ValueError, match="data_range"):
        generate_items(5, data_range=5)


# ---------------------------------------------------------------- factory


def test_factory_defaults():
    problem = knapsack()
    assert problem.n == 40 and problem.constraint == "repair"
    assert problem.capacity == int(problem.weights.sum() * 0.5)
    assert problem.optimum == _milp_optimum(problem.weights, problem.values, problem.capacity)
    assert "dynamic programming" in problem.optimum_source
    assert knapsack(solve=False).optimum is None
    penalty = knapsack(constraint="penalty")
    assert penalty.optimum == problem.optimum and penalty.evaluate(np.ones((1, 40), np.uint8))[0] < 0
    with pytest.raises(ValueError, match="constraint must be"):
        knapsack(constraint="ignore")
    with pytest.raises(ValueError, match="capacity_ratio"):
        knapsack(capacity_ratio=1.5)


def test_factory_reads_csv_and_yaml_examples():
    from_csv = knapsack(EXAMPLES / "knapsack-hiking-pack.csv", capacity=40)
    from_yaml = knapsack(EXAMPLES / "knapsack-hiking-pack.yaml")
    assert from_csv.variable_names == from_yaml.variable_names
    np.testing.assert_array_equal(from_csv.weights, from_yaml.weights)
    assert from_csv.optimum == from_yaml.optimum == _milp_optimum(from_csv.weights, from_csv.values, 40)
    assert knapsack(EXAMPLES / "knapsack-hiking-pack.yaml", capacity=10).capacity == 10
    with pytest.raises(ValueError, match="needs the capacity"):
        knapsack(EXAMPLES / "knapsack-hiking-pack.csv")
    with pytest.raises(ValueError, match=r"\.csv, \.yaml or \.yml"):
        knapsack(DATA / "maxcut_labels.edges")


# ---------------------------------------------------------------- readers


def test_read_csv_fixture():
    names, weights, values = read_items_csv(DATA / "knapsack_items.csv")
    assert names == ["lamp", "rope", "tent", "stove"]
    assert weights.tolist() == [4, 3, 9, 5] and values.tolist() == [10, 7, 20, 9]


def test_read_yaml_fixture():
    names, weights, values, capacity = read_items_yaml(DATA / "knapsack_items.yaml")
    assert names == ["lamp", "rope", "tent", "stove"] and capacity == 12
    assert weights.tolist() == [4, 3, 9, 5] and values.tolist() == [10, 7, 20, 9]


def _csv_error(tmp_path, text):
    path = tmp_path / "bad.csv"
    path.write_text(text)
    with pytest.raises(InstanceFormatError) as info:
        read_items_csv(path)
    assert str(path) in str(info.value)
    return info.value


def test_csv_rejects_wrong_header(tmp_path):
    error = _csv_error(tmp_path, "# items\nitem,mass,value\nlamp,1,2\n")
    assert error.line == 2 and "name,weight,value" in error.reason


def test_csv_rejects_wrong_field_count(tmp_path):
    error = _csv_error(tmp_path, "name,weight,value\nlamp,1,2\nrope,3\n")
    assert error.line == 3 and "expected 3 fields" in error.reason


@pytest.mark.parametrize("row, what", [("lamp,1.5,2", "weight"), ("lamp,1,-2", "value"), ("lamp,,2", "weight")])
def test_csv_rejects_bad_numbers(tmp_path, row, what):
    error = _csv_error(tmp_path, f"name,weight,value\nrope,1,1\n{row}\n")
    assert error.line == 3 and f"non-negative integer {what}" in error.reason


def test_csv_rejects_repeated_or_empty_name(tmp_path):
    error = _csv_error(tmp_path, "name,weight,value\nlamp,1,2\nrope,1,1\nlamp,3,3\n")
    assert error.line == 4 and "repeats line 2" in error.reason
    error = _csv_error(tmp_path, "name,weight,value\n ,1,2\n")
    assert error.line == 2 and "non-empty item name" in error.reason


def test_csv_rejects_missing_items(tmp_path):
    error = _csv_error(tmp_path, "name,weight,value\n\n")
    assert error.line == 1 and "at least one item" in error.reason


def _yaml_error(tmp_path, text):
    path = tmp_path / "bad.yaml"
    path.write_text(text)
    with pytest.raises(InstanceFormatError) as info:
        read_items_yaml(path)
    assert str(path) in str(info.value)
    return info.value


def test_yaml_rejects_invalid_syntax(tmp_path):
    error = _yaml_error(tmp_path, "capacity: 5\nitems:\n  - {name: a, weight: 1, value: 2\n")
    assert error.line is not None and error.line >= 3 and "valid YAML" in error.reason


def test_yaml_rejects_missing_or_bad_capacity(tmp_path):
    error = _yaml_error(tmp_path, "items:\n  - {name: a, weight: 1, value: 2}\n")
    assert "'capacity'" in error.reason
    error = _yaml_error(tmp_path, "capacity: lots\nitems:\n  - {name: a, weight: 1, value: 2}\n")
    assert error.line == 1 and "non-negative integer capacity" in error.reason


def test_yaml_rejects_bad_items(tmp_path):
    error = _yaml_error(tmp_path, "capacity: 5\nitems: {name: a}\n")
    assert error.line == 2 and "non-empty list" in error.reason
    error = _yaml_error(
        tmp_path,
        "capacity: 5\nitems:\n  - {name: a, weight: 1, value: 2}\n  - {name: b, value: 2}\n",
    )
    assert error.line == 4 and "name, weight, value" in error.reason
    error = _yaml_error(
        tmp_path,
        "capacity: 5\nitems:\n  - {name: a, weight: 1, value: 2}\n  - {name: b, weight: 2.5, value: 2}\n",
    )
    assert error.line == 4 and "non-negative integer weight" in error.reason
    error = _yaml_error(
        tmp_path,
        "capacity: 5\nitems:\n  - {name: a, weight: 1, value: 2}\n  - {name: a, weight: 2, value: 2}\n",
    )
    assert error.line == 4 and "repeats line 3" in error.reason


def test_yaml_rejects_unknown_key(tmp_path):
    error = _yaml_error(tmp_path, "capacity: 5\nitems:\n  - {name: a, weight: 1, value: 2}\nbudget: 3\n")
    assert error.line == 4 and "unexpected key 'budget'" in error.reason

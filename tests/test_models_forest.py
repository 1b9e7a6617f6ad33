"""Tests of the pruned Chow-Liu tree (optim.models.forest.DependencyForest).

Outside references: the G-test of independence as computed by
scipy.stats.chi2_contingency(lambda_="log-likelihood"), exact probabilities by enumeration
of all strings, scipy's entropy, networkx's forest checks, and the plain tree and
independent-marginals models as the two limits of the pruning.
"""

import itertools

import networkx as nx
import numpy as np
import pytest
import scipy.stats

from optim.models import DependencyForest, DependencyTree, Univariate


def all_strings(cardinality):
    """Every vector of the given per-variable cardinalities, shape (prod(k), n), uint8."""
    grids = np.indices(tuple(int(k) for k in cardinality)).reshape(len(cardinality), -1)
    return grids.T.astype(np.uint8)


def undirected(edges):
    return {frozenset((int(a), int(b))) for a, b in edges}


def two_independent_chains(count, rng, flip=0.1):
    """Variables 0, 2, 4, 6 form one chain and 1, 3, 5, 7 another; the chains are independent.

    Each chain starts from a fair bit and copies it along, flipping with probability ``flip``.
    Returns the sample and the set of true (within-chain) edges.
    """
    X = np.zeros((count, 8), dtype=np.uint8)
    edges = set()
    for chain in ((0, 2, 4, 6), (1, 3, 5, 7)):
        X[:, chain[0]] = rng.random(count) < 0.5
        for parent, child in zip(chain[:-1], chain[1:], strict=True):
            X[:, child] = X[:, parent] ^ (rng.random(count) < flip)
            edges.add(frozenset((parent, child)))
    return X, edges


def weakly_dependent_sample(cardinality, count, rng):
    """Rows from a near-uniform random joint table, so the edge p-values spread over (0, 1)."""
    strings = all_strings(cardinality)
    table = rng.dirichlet(np.full(strings.shape[0], 30.0))
    return strings[rng.choice(strings.shape[0], size=count, p=table)]


def g_test_p_value_by_scipy(X, parent, child, cardinality):
    """P-value of the G-test on the edge's contingency table, by scipy.

    G-test of independence: R. R. Sokal and F. J. Rohlf, "Biometry", 1981; reference
    implementation scipy.stats.chi2_contingency with lambda_="log-likelihood" and no
    continuity correction.
    """
    table = np.zeros((cardinality[parent], cardinality[child]))
    np.add.at(table, (X[:, parent], X[:, child]), 1.0)
    _, p_value, dof, _ = scipy.stats.chi2_contingency(table, correction=False, lambda_="log-likelihood")
    assert dof == (cardinality[parent] - 1) * (cardinality[child] - 1)
    return p_value


# -- 7. pruning -----------------------------------------------------------------------------
@pytest.mark.parametrize("seed", [1, 2, 3])
def test_drops_the_edge_between_independent_groups(seed):
    # The tree must join the two chains by one cross edge; the G-test (Sokal and Rohlf, 1981)
    # removes it. With alpha = 1e-7 an independent pair survives with probability about
    # 16 * 1e-7 (union over the 16 cross pairs), while a within-chain edge with flip 0.1 and
    # N = 3000 has G near 2000 and a p-value far below 1e-100.
    X, true_edges = two_independent_chains(3000, np.random.default_rng(seed))
    tree = DependencyTree(cardinality=2, prior=1.0).fit(X)
    forest = DependencyForest(cardinality=2, prior=1.0, alpha=1e-7).fit(X)
    tree_edges = undirected(tree.edges())
    assert true_edges < tree_edges and len(tree_edges - true_edges) == 1
    assert undirected(forest.edges()) == true_edges
    assert np.count_nonzero(forest.parents < 0) == 2
    graph = forest.to_networkx()
    assert nx.is_forest(graph) and nx.number_connected_components(graph) == 2
    assert {frozenset(c) for c in nx.connected_components(graph)} == {
        frozenset((0, 2, 4, 6)),
        frozenset((1, 3, 5, 7)),
    }
    (cross,) = tree_edges - true_edges
    dropped_child = next(c for c in cross if tree.parents[c] in cross)
    assert forest.parents[dropped_child] == -1
    assert forest.edge_information[dropped_child] == 0
    assert forest.edge_p_values[dropped_child] >= 1e-7


@pytest.mark.parametrize("cardinality", [[2] * 6, [3, 2, 3, 3, 2, 3]])
def test_edge_p_values_equal_scipy_g_test(cardinality):
    # Every tested edge (the unpruned tree's edges) against scipy.stats.chi2_contingency.
    X = weakly_dependent_sample(cardinality, 400, np.random.default_rng(4))
    tree = DependencyTree(cardinality=cardinality, prior=0.5).fit(X)
    forest = DependencyForest(cardinality=cardinality, prior=0.5, alpha=0.2).fit(X)
    reference = np.ones(len(cardinality))
    for parent, child in tree.edges():
        reference[child] = g_test_p_value_by_scipy(X, parent, child, cardinality)
    assert np.allclose(forest.edge_p_values, reference, rtol=1e-9, atol=1e-14)
    # The data are chosen so the test is informative: some edges kept, some dropped.
    children = tree.edges()[:, 1]
    assert 0 < np.count_nonzero(reference[children] < 0.2) < children.size
    kept = children[reference[children] < 0.2]
    assert undirected(forest.edges()) == {frozenset((int(tree.parents[c]), int(c))) for c in kept}
    assert np.all(forest.parents[children[reference[children] >= 0.2]] == -1)


def test_strong_edge_p_values_equal_scipy_in_the_far_tail():
    X, _ = two_independent_chains(400, np.random.default_rng(5), flip=0.2)
    tree = DependencyTree(cardinality=2, prior=1.0).fit(X)
    forest = DependencyForest(cardinality=2, prior=1.0, alpha=1e-9).fit(X)
    for parent, child in tree.edges():
        reference = g_test_p_value_by_scipy(X, parent, child, [2] * 8)
        if reference > 1e-280:
            assert forest.edge_p_values[child] == pytest.approx(reference, rel=1e-8)


def test_tiny_alpha_keeps_nothing_and_equals_the_univariate_model():
    # With every edge dropped the forest is the product of smoothed marginals.
    card = [3, 2, 3, 2, 2]
    X = weakly_dependent_sample(card, 300, np.random.default_rng(6))
    tree = DependencyTree(cardinality=card, prior=1.0).fit(X)
    smallest = min(g_test_p_value_by_scipy(X, p, c, card) for p, c in tree.edges())
    assert smallest > 1e-200
    forest = DependencyForest(cardinality=card, prior=1.0, alpha=smallest / 10).fit(X)
    assert np.all(forest.parents == -1)
    assert forest.edges().shape == (0, 2)
    independent = Univariate(cardinality=card, prior=1.0).fit(X)
    strings = all_strings(card)
    assert np.allclose(forest.log_prob(strings), independent.log_prob(strings), atol=1e-12)
    assert forest.entropy() == pytest.approx(independent.entropy(), abs=1e-12)


def test_strong_dependence_keeps_every_edge_and_equals_the_tree():
    rng = np.random.default_rng(7)
    X = np.zeros((2000, 6), dtype=np.uint8)
    X[:, 0] = rng.random(2000) < 0.5
    for i in range(1, 6):
        X[:, i] = X[:, i - 1] ^ (rng.random(2000) < 0.1)
    tree = DependencyTree(cardinality=2, prior=1.0).fit(X)
    forest = DependencyForest(cardinality=2, prior=1.0, alpha=0.01).fit(X)
    assert np.array_equal(forest.parents, tree.parents)
    assert np.array_equal(forest.conditionals, tree.conditionals)
    strings = all_strings([2] * 6)
    assert np.array_equal(forest.log_prob(strings), tree.log_prob(strings))
    assert forest.entropy() == pytest.approx(tree.entropy(), abs=1e-12)


# -- 3 and 4. a proper distribution: normalisation, entropy, sampling -----------------------
def _pruned_forest(cardinality, prior, seed):
    """A fitted forest that keeps about half of its tree's edges (alpha between two p-values)."""
    X = weakly_dependent_sample(cardinality, 400, np.random.default_rng(seed))
    tree = DependencyTree(cardinality=cardinality, prior=prior).fit(X)
    p_values = sorted(g_test_p_value_by_scipy(X, p, c, cardinality) for p, c in tree.edges())
    middle = len(p_values) // 2
    alpha = float(np.sqrt(p_values[middle - 1] * p_values[middle]))
    forest = DependencyForest(cardinality=cardinality, prior=prior, alpha=alpha).fit(X)
    roots = np.count_nonzero(forest.parents < 0)
    assert 1 < roots < len(cardinality)  # a genuine forest: some edges kept, some dropped
    return X, forest


@pytest.mark.parametrize(
    "cardinality, prior", [([2] * 8, 0.0), ([2] * 7, 1.0), ([3, 2, 3, 3, 2, 3], 0.0), ([3, 2, 3, 3, 2, 3], 2.0)]
)
def test_probabilities_sum_to_one_and_entropy_equals_brute_force(cardinality, prior):
    # H = -Σ p log p over all strings (C. E. Shannon, "A mathematical theory of communication", 1948).
    _, forest = _pruned_forest(cardinality, prior, seed=8)
    probs = np.exp(forest.log_prob(all_strings(cardinality)))
    assert probs.sum() == pytest.approx(1.0, abs=1e-12)
    assert forest.entropy() == pytest.approx(float(scipy.stats.entropy(probs)), abs=1e-10)


def test_kl_to_sample_of_a_forest_equals_brute_force():
    # KL(P̂ ‖ F) over the support of P̂, F = product over components of the empirical tree
    # factors (Chow and Liu, 1968, with the dropped edges treated as independence).
    card = [3, 2, 3, 3, 2, 3]
    X, forest = _pruned_forest(card, 0.0, seed=9)
    rows, counts = np.unique(X, axis=0, return_counts=True)
    p = counts / counts.sum()
    log_f = forest.log_prob(rows)  # prior 0: the empirical roots and conditionals
    assert forest.kl_to_sample() == pytest.approx(float(np.sum(p * (np.log(p) - log_f))), abs=1e-10)
    # The same model built by hand from empirical frequencies, to check log_prob itself.
    rows = rows.astype(np.int64)
    log_hand = np.zeros(rows.shape[0])
    for i in range(len(card)):
        parent = forest.parents[i]
        if parent < 0:
            log_hand += np.log(np.bincount(X[:, i], minlength=card[i])[rows[:, i]] / X.shape[0])
        else:
            table = np.zeros((card[parent], card[i]))
            np.add.at(table, (X[:, parent], X[:, i]), 1.0)
            log_hand += np.log(table[rows[:, parent], rows[:, i]] / table.sum(axis=1)[rows[:, parent]])
    assert np.allclose(log_f, log_hand, atol=1e-12)


def test_samples_match_exact_pair_marginals():
    # Binomial tolerance of 5 standard errors on every pair cell (common practice, no source);
    # the pairs across components are independent in the model and must look so.
    card = [3, 2, 3, 3, 2, 3]
    _, forest = _pruned_forest(card, 1.0, seed=10)
    strings = all_strings(card)
    probs = np.exp(forest.log_prob(strings))
    count = 200000
    draws = forest.sample(count, np.random.default_rng(11))
    assert draws.dtype == np.uint8 and draws.shape == (count, 6)
    for i, j in itertools.combinations(range(6), 2):
        cells = card[i] * card[j]
        exact = np.bincount(strings[:, i].astype(int) * card[j] + strings[:, j], weights=probs, minlength=cells)
        freq = np.bincount(draws[:, i].astype(int) * card[j] + draws[:, j], minlength=cells) / count
        assert np.all(np.abs(freq - exact) <= 5 * np.sqrt(exact * (1 - exact) / count)), (i, j)


def test_integer_weights_equal_repeated_rows():
    card = [3, 2, 3, 2, 2]
    rng = np.random.default_rng(12)
    X = weakly_dependent_sample(card, 200, rng)
    weights = rng.integers(0, 4, size=200)
    weighted = DependencyForest(cardinality=card, prior=0.5, alpha=0.3).fit(X, weights=weights)
    repeated = DependencyForest(cardinality=card, prior=0.5, alpha=0.3).fit(np.repeat(X, weights, axis=0))
    assert np.array_equal(weighted.parents, repeated.parents)
    assert np.allclose(weighted.edge_p_values, repeated.edge_p_values, rtol=1e-10, atol=1e-14)
    assert np.allclose(weighted.conditionals, repeated.conditionals, atol=1e-12)


def test_single_variable_forest():
    forest = DependencyForest(cardinality=[3], prior=0).fit(np.array([[0], [1], [1], [2]]))
    assert forest.parents.tolist() == [-1] and forest.edge_p_values.tolist() == [1.0]
    assert np.allclose(np.exp(forest.log_prob([[0], [1], [2]])), [0.25, 0.5, 0.25])


# -- 6. persistence -------------------------------------------------------------------------
def test_state_round_trip():
    card = [3, 2, 3, 3, 2, 3]
    _, forest = _pruned_forest(card, 1.0, seed=13)
    state = forest.get_state()
    assert state["kind"] == "forest" and state["alpha"] == forest.alpha
    restored = DependencyForest().set_state(state)
    strings = all_strings(card)
    assert np.array_equal(restored.log_prob(strings), forest.log_prob(strings))
    assert np.array_equal(
        restored.sample(1000, np.random.default_rng(14)), forest.sample(1000, np.random.default_rng(14))
    )
    assert np.array_equal(restored.edge_p_values, forest.edge_p_values)
    assert np.array_equal(restored.parents, forest.parents)
    assert restored.alpha == forest.alpha
    assert restored.entropy() == forest.entropy()


# -- 9. input validation --------------------------------------------------------------------
def test_bad_alpha_raises():
    for alpha in (0.0, 1.0, -0.1, 1.5, float("nan")):
        with pytest.raises(ValueError, match="'alpha'"):
            DependencyForest(alpha=alpha)


def test_bad_input_raises():
    with pytest.raises(ValueError, match="'prior'"):
        DependencyForest(prior=-1)
    model = DependencyForest(cardinality=[2, 2])
    with pytest.raises(ValueError, match=r"values 0\.\.1 in column 0"):
        model.fit(np.array([[2, 0], [0, 1]]))
    with pytest.raises(ValueError, match="'weights'"):
        model.fit(np.array([[1, 0], [0, 1]]), weights=[1.0, -1.0])


def test_unfitted_model_raises():
    model = DependencyForest()
    for use in (lambda: model.sample(2, np.random.default_rng(0)), model.entropy, model.get_state, model.edges):
        with pytest.raises(RuntimeError, match="must be fitted"):
            use()

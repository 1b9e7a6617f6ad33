"""Tests of the Chow-Liu dependency tree (optim.models.tree.DependencyTree).

Outside references: the Chow-Liu theorem checked by brute force over every labelled tree
(enumerated through Prüfer sequences), networkx's maximum spanning tree, scipy's entropy,
exact marginals by enumeration of all strings, and a known tree distribution sampled here.
"""

import itertools

import networkx as nx
import numpy as np
import pytest
import scipy.stats

from optim.info import mutual_information
from optim.models import DependencyTree
from optim.models.spanning import maximum_spanning_tree, tree_weight


# -- helpers written from the definitions ---------------------------------------------------
def all_strings(cardinality):
    """Every vector of the given per-variable cardinalities, shape (prod(k), n), uint8."""
    grids = np.indices(tuple(int(k) for k in cardinality)).reshape(len(cardinality), -1)
    return grids.T.astype(np.uint8)


def prufer_trees(n):
    """Every labelled tree on n nodes as a list of undirected edges, decoded from Prüfer sequences.

    H. Prüfer, "Neuer Beweis eines Satzes über Permutationen", 1918: sequences of length n - 2
    over n labels are in bijection with the labelled trees on n nodes.
    """
    trees = []
    for sequence in itertools.product(range(n), repeat=n - 2):
        degree = [1] * n
        for node in sequence:
            degree[node] += 1
        edges = []
        for node in sequence:
            leaf = min(v for v in range(n) if degree[v] == 1)
            edges.append((leaf, node))
            degree[leaf] -= 1
            degree[node] -= 1
        last = [v for v in range(n) if degree[v] == 1]
        edges.append((last[0], last[1]))
        trees.append(edges)
    return trees


def sample_from_joint_table(cardinality, count, rng, concentration=0.3):
    """Rows drawn from a random joint table over all strings (Dirichlet cell probabilities)."""
    strings = all_strings(cardinality)
    table = rng.dirichlet(np.full(strings.shape[0], concentration))
    return strings[rng.choice(strings.shape[0], size=count, p=table)]


def empirical(X):
    """Distinct rows of X and their relative frequencies."""
    rows, counts = np.unique(X, axis=0, return_counts=True)
    return rows.astype(np.int64), counts / counts.sum()


def pair_probabilities(rows, p, i, j, cardinality):
    """Empirical joint table of variables i and j, shape (k_i, k_j)."""
    k_i, k_j = int(cardinality[i]), int(cardinality[j])
    return np.bincount(rows[:, i] * k_j + rows[:, j], weights=p, minlength=k_i * k_j).reshape(k_i, k_j)


def marginal_probabilities(rows, p, i, cardinality):
    return np.bincount(rows[:, i], weights=p, minlength=int(cardinality[i]))


def kl_to_tree_by_brute_force(rows, p, edges, cardinality, root=0):
    """KL(P̂ ‖ T) for the tree T with these edges and the empirical conditionals of P̂.

    The sum runs over the support of P̂: Σ_x P̂(x) log(P̂(x) / T(x)), with
    T(x) = P̂(x_root) Π_i P̂(x_i | x_parent(i)).
    """
    graph = nx.Graph(list(edges))
    graph.add_nodes_from(range(rows.shape[1]))
    log_t = np.log(marginal_probabilities(rows, p, root, cardinality)[rows[:, root]])
    for parent, child in nx.bfs_edges(graph, root):
        joint = pair_probabilities(rows, p, parent, child, cardinality)
        conditional = joint / joint.sum(axis=1, keepdims=True)
        log_t = log_t + np.log(conditional[rows[:, parent], rows[:, child]])
    return float(np.sum(p * (np.log(p) - log_t)))


def empirical_mutual_information(rows, p, i, j, cardinality):
    """I(X_i; X_j) = KL(joint ‖ product of marginals), computed with scipy.stats.entropy."""
    joint = pair_probabilities(rows, p, i, j, cardinality)
    product = np.outer(joint.sum(axis=1), joint.sum(axis=0))
    return float(scipy.stats.entropy(joint.ravel(), product.ravel()))


def undirected(edges):
    return {frozenset((int(a), int(b))) for a, b in edges}


def exact_probabilities(model, cardinality):
    strings = all_strings(cardinality)
    return strings, np.exp(model.log_prob(strings))


def sample_known_tree(parents, order, conditionals, root_marginal, count, rng):
    """Ancestral sampling from a known tree, written independently of the model under test.

    ``conditionals[i]`` is the (k_parent, k_i) table of P(X_i | X_parent).
    """
    n = len(parents)
    X = np.zeros((count, n), dtype=np.uint8)
    for i in order:
        if parents[i] < 0:
            X[:, i] = rng.choice(len(root_marginal), size=count, p=root_marginal)
        else:
            table = conditionals[i][X[:, parents[i]]]
            u = rng.random(count)[:, None]
            X[:, i] = (u >= np.cumsum(table, axis=1)[:, :-1]).sum(axis=1)
    return X


def random_tree(n, rng):
    """A random labelled tree: parents and a topological order (root first)."""
    labels = rng.permutation(n)
    parents = np.full(n, -1)
    for position in range(1, n):
        parents[labels[position]] = labels[rng.integers(0, position)]
    return parents, labels


# -- 1. the Chow-Liu theorem ----------------------------------------------------------------
def test_prufer_enumeration_gives_every_labelled_tree_once():
    # Cayley's formula: n^(n-2) labelled trees on n nodes (A. Cayley, "A theorem on trees", 1889).
    for n in (3, 4, 5, 6):
        trees = prufer_trees(n)
        assert len(trees) == n ** (n - 2)
        assert len({frozenset(undirected(t)) for t in trees}) == n ** (n - 2)
        assert all(nx.is_tree(nx.Graph(t)) and nx.Graph(t).number_of_nodes() == n for t in trees)


@pytest.mark.parametrize(
    "cardinality, seed",
    [([2] * 5, 1), ([2] * 6, 2), ([2, 3, 2, 3, 3], 3), ([3, 2, 2, 3, 2, 3], 4)],
)
def test_fitted_tree_minimises_kl_over_all_trees(cardinality, seed):
    # C. K. Chow and C. N. Liu, "Approximating discrete probability distributions with dependence
    # trees", IEEE Trans. Information Theory, 1968: the maximum-weight spanning tree under
    # mutual-information weights, with empirical conditionals, minimises KL(P̂ ‖ T) over all trees.
    card = np.array(cardinality)
    n = card.shape[0]
    rng = np.random.default_rng(seed)
    X = sample_from_joint_table(card, 400, rng)
    rows, p = empirical(X)
    model = DependencyTree(cardinality=card, prior=0).fit(X)

    trees = prufer_trees(n)
    divergences = np.array([kl_to_tree_by_brute_force(rows, p, t, card) for t in trees])
    fitted_edges = undirected(model.edges())
    fitted_kl = kl_to_tree_by_brute_force(rows, p, [tuple(e) for e in fitted_edges], card)
    assert fitted_kl <= divergences.min() + 1e-9

    # kl_to_sample() is the brute-force KL of its own structure ...
    assert model.kl_to_sample() == pytest.approx(fitted_kl, abs=1e-10)
    # ... and equals -H(P̂) + Σ_i H(X_i | X_parent(i)) (Chow and Liu, 1968, the same paper).
    joint_entropy = float(-(p * np.log(p)).sum())
    conditional_sum = 0.0
    for i in range(n):
        parent = model.parents[i]
        if parent < 0:
            conditional_sum += scipy.stats.entropy(marginal_probabilities(rows, p, i, card))
        else:
            joint = pair_probabilities(rows, p, parent, i, card)
            conditional_sum += scipy.stats.entropy(joint.ravel()) - scipy.stats.entropy(joint.sum(axis=1))
    assert model.kl_to_sample() == pytest.approx(-joint_entropy + conditional_sum, abs=1e-10)

    # Total mutual information of the fitted tree is the maximum over all trees, which is also
    # what networkx's maximum spanning tree finds (networkx as reference library).
    information = np.zeros((n, n))
    for i, j in itertools.combinations(range(n), 2):
        information[i, j] = information[j, i] = empirical_mutual_information(rows, p, i, j, card)
    totals = np.array([sum(information[a, b] for a, b in t) for t in trees])
    complete = nx.Graph()
    for i, j in itertools.combinations(range(n), 2):
        complete.add_edge(i, j, weight=information[i, j])
    networkx_best = nx.maximum_spanning_tree(complete).size(weight="weight")
    fitted_total = sum(information[a, b] for a, b in (tuple(e) for e in fitted_edges))
    assert networkx_best == pytest.approx(totals.max(), abs=1e-12)
    assert fitted_total == pytest.approx(totals.max(), abs=1e-9)
    # The model's own edge weights are computed in float32 (about 1e-6 nats, see optim.info).
    assert model.edge_information.sum() == pytest.approx(totals.max(), abs=1e-5)
    # And the identity KL = -H(P̂) + Σ H(X_i) - Σ_edges I, over every tree at once.
    marginal_sum = sum(scipy.stats.entropy(marginal_probabilities(rows, p, i, card)) for i in range(n))
    assert np.allclose(divergences, -joint_entropy + marginal_sum - totals, atol=1e-10)


def test_kl_to_sample_is_zero_for_data_from_a_tree_table():
    # When the sample's empirical distribution is itself the product of its tree conditionals
    # (here: the full product table of a chain), KL(P̂ ‖ T) = 0 (Chow and Liu, 1968).
    # Chain 0 - 1 - 2 with rows repeated in exact proportion to a chain distribution.
    strings = all_strings([2, 2, 2]).astype(np.int64)
    root = np.array([0.5, 0.5])
    step = np.array([[0.75, 0.25], [0.25, 0.75]])
    p = root[strings[:, 0]] * step[strings[:, 0], strings[:, 1]] * step[strings[:, 1], strings[:, 2]]
    X = np.repeat(strings, np.rint(p * 32).astype(int), axis=0)
    model = DependencyTree(cardinality=2, prior=0).fit(X)
    assert undirected(model.edges()) == {frozenset((0, 1)), frozenset((1, 2))}
    assert model.kl_to_sample() == pytest.approx(0.0, abs=1e-12)


# -- 2. structure recovery ------------------------------------------------------------------
@pytest.mark.parametrize("seed", [5, 6, 7])
def test_recovers_the_edges_of_a_known_binary_tree(seed):
    # Consistency of the Chow-Liu estimate (Chow and Liu, 1968): with strong dependencies and
    # 20000 samples the mutual information of a true edge exceeds that of any two-step path
    # (data-processing inequality) by far more than the sampling noise.
    rng = np.random.default_rng(seed)
    n = 8
    parents, order = random_tree(n, rng)
    flips = rng.uniform(0.05, 0.2, size=n)
    conditionals = {i: np.array([[1 - flips[i], flips[i]], [flips[i], 1 - flips[i]]]) for i in range(n)}
    X = sample_known_tree(parents, order, conditionals, np.array([0.4, 0.6]), 20000, rng)
    model = DependencyTree(cardinality=2).fit(X)
    true_edges = {frozenset((int(parents[i]), i)) for i in range(n) if parents[i] >= 0}
    assert undirected(model.edges()) == true_edges


def test_recovers_the_edges_of_a_known_three_valued_tree():
    rng = np.random.default_rng(8)
    n = 7
    parents, order = random_tree(n, rng)
    conditionals = {}
    for i in range(n):
        keep = rng.uniform(0.75, 0.9)
        table = np.full((3, 3), (1 - keep) / 2)
        np.fill_diagonal(table, keep)
        conditionals[i] = table
    X = sample_known_tree(parents, order, conditionals, np.array([0.3, 0.3, 0.4]), 20000, rng)
    model = DependencyTree(cardinality=3, prior=0.5).fit(X)
    true_edges = {frozenset((int(parents[i]), i)) for i in range(n) if parents[i] >= 0}
    assert undirected(model.edges()) == true_edges


# -- 3. sampling ----------------------------------------------------------------------------
def _check_sample_against_exact_pairs(model, cardinality, count, seed):
    """Every pair and single-variable frequency within 5 binomial standard errors of the exact value."""
    strings, probs = exact_probabilities(model, cardinality)
    draws = model.sample(count, np.random.default_rng(seed))
    assert draws.dtype == np.uint8 and draws.shape == (count, len(cardinality))
    assert np.all(draws < np.asarray(cardinality)[None, :])
    n = len(cardinality)
    for i in range(n):
        exact = np.bincount(strings[:, i], weights=probs, minlength=cardinality[i])
        freq = np.bincount(draws[:, i], minlength=cardinality[i]) / count
        assert np.all(np.abs(freq - exact) <= 5 * np.sqrt(exact * (1 - exact) / count) + 1e-12)
    for i, j in itertools.combinations(range(n), 2):
        k_j = cardinality[j]
        cells = cardinality[i] * k_j
        exact = np.bincount(strings[:, i].astype(int) * k_j + strings[:, j], weights=probs, minlength=cells)
        freq = np.bincount(draws[:, i].astype(int) * k_j + draws[:, j], minlength=cells) / count
        assert np.all(np.abs(freq - exact) <= 5 * np.sqrt(exact * (1 - exact) / count) + 1e-12), (i, j)


def test_binary_samples_match_exact_pair_marginals():
    # Exact pair marginals by enumeration of exp(log_prob) over all 2^6 strings; binomial
    # tolerance of 5 standard errors (common practice, no source).
    card = [2] * 6
    X = sample_from_joint_table(card, 300, np.random.default_rng(9))
    model = DependencyTree(cardinality=card, prior=0.5).fit(X)
    _check_sample_against_exact_pairs(model, card, 200000, seed=10)


def test_three_valued_samples_match_exact_pair_marginals():
    card = [3, 3, 2, 3, 2]
    X = sample_from_joint_table(card, 300, np.random.default_rng(12))
    model = DependencyTree(cardinality=card, prior=0.5).fit(X)
    _check_sample_against_exact_pairs(model, card, 200000, seed=13)


def test_samples_with_zero_prior_stay_on_the_sample_support_of_each_edge():
    # With prior 0 a pair value never seen on an edge has probability 0 and is never drawn.
    card = [3, 2, 3, 3]
    X = sample_from_joint_table(card, 60, np.random.default_rng(14), concentration=0.1)
    model = DependencyTree(cardinality=card, prior=0).fit(X)
    draws = model.sample(20000, np.random.default_rng(15))
    for parent, child in model.edges():
        seen = set(zip(X[:, parent].tolist(), X[:, child].tolist(), strict=True))
        assert set(zip(draws[:, parent].tolist(), draws[:, child].tolist(), strict=True)) <= seen
    _check_sample_against_exact_pairs(model, card, 20000, seed=16)


def test_marginals_method_matches_enumeration():
    card = [2, 3, 3, 2, 3]
    X = sample_from_joint_table(card, 200, np.random.default_rng(17))
    model = DependencyTree(cardinality=card, prior=1.0).fit(X)
    strings, probs = exact_probabilities(model, card)
    marginals = model.marginals()
    for i, k in enumerate(card):
        assert np.allclose(marginals[i, :k], np.bincount(strings[:, i], weights=probs, minlength=k), atol=1e-12)
        assert np.all(marginals[i, k:] == 0)


@pytest.mark.parametrize(
    "cardinality, prior", [([2] * 8, 0.0), ([2] * 7, 1.0), ([3, 2, 3, 2, 3, 2], 0.5), ([3] * 5, 0.0)]
)
def test_probabilities_sum_to_one(cardinality, prior):
    X = sample_from_joint_table(cardinality, 250, np.random.default_rng(18))
    model = DependencyTree(cardinality=cardinality, prior=prior).fit(X)
    _, probs = exact_probabilities(model, cardinality)
    assert probs.sum() == pytest.approx(1.0, abs=1e-12)


# -- 4. entropy -----------------------------------------------------------------------------
@pytest.mark.parametrize(
    "cardinality, prior",
    [([2] * 8, 0.0), ([2] * 6, 0.5), ([2] * 6, 3.0), ([3, 2, 3, 3, 2], 0.0), ([3, 2, 3, 3, 2], 1.0)],
)
def test_entropy_equals_brute_force(cardinality, prior):
    # H = -Σ p log p over all strings (Shannon's definition; C. E. Shannon, "A mathematical
    # theory of communication", 1948), with 0 log 0 = 0.
    X = sample_from_joint_table(cardinality, 150, np.random.default_rng(19))
    model = DependencyTree(cardinality=cardinality, prior=prior).fit(X)
    _, probs = exact_probabilities(model, cardinality)
    assert model.entropy() == pytest.approx(float(scipy.stats.entropy(probs)), abs=1e-10)


def test_entropy_of_a_refit_model_is_recomputed():
    card = [2] * 5
    rng = np.random.default_rng(20)
    model = DependencyTree(cardinality=card).fit(sample_from_joint_table(card, 100, rng))
    first = model.entropy()
    model.fit(np.zeros((10, 5), dtype=np.uint8))
    _, probs = exact_probabilities(model, card)
    assert model.entropy() != first
    assert model.entropy() == pytest.approx(float(scipy.stats.entropy(probs)), abs=1e-10)


# -- 5. structure accessors and weights -----------------------------------------------------
@pytest.mark.parametrize("cardinality", [[2] * 7, [3, 2, 3, 2, 2, 3]])
def test_to_networkx_is_the_tree_with_mutual_information_weights(cardinality):
    card = np.array(cardinality)
    X = sample_from_joint_table(card, 500, np.random.default_rng(21))
    rows, p = empirical(X)
    model = DependencyTree(cardinality=card, prior=0).fit(X)
    graph = model.to_networkx()
    assert nx.is_tree(graph)
    assert sorted(graph.nodes) == list(range(card.shape[0]))
    for i, j, data in graph.edges(data=True):
        # float32 pair statistics in optim.info: accurate to about 1e-6 nats.
        assert data["weight"] == pytest.approx(empirical_mutual_information(rows, p, i, j, card), abs=1e-5)
    for i in graph.nodes:
        assert graph.nodes[i]["parent"] == model.parents[i]
        assert graph.nodes[i]["name"] == f"x{i}"
    named = model.to_networkx(variable_names=[f"v{i}" for i in range(card.shape[0])])
    assert named.nodes[2]["name"] == "v2"


def test_edge_weights_with_prior_are_the_information_of_the_smoothed_pair_table():
    # With prior a, each edge weight is the mutual information of the pair table with a added
    # to every cell (the convention documented in optim.info), computed here with scipy.
    card = np.array([2, 3, 2, 3, 2])
    X = sample_from_joint_table(card, 80, np.random.default_rng(22))
    prior = 2.0
    model = DependencyTree(cardinality=card, prior=prior).fit(X)
    for parent, child in model.edges():
        table = np.zeros((card[parent], card[child])) + prior
        np.add.at(table, (X[:, parent], X[:, child]), 1.0)
        joint = table / table.sum()
        product = np.outer(joint.sum(axis=1), joint.sum(axis=0))
        expected = scipy.stats.entropy(joint.ravel(), product.ravel())
        assert model.edge_information[child] == pytest.approx(expected, abs=1e-5)


@pytest.mark.parametrize("cardinality, prior", [(2, 1.0), (2, 0.0), (3, 0.5)])
def test_fit_takes_the_tree_of_the_public_functions(cardinality, prior):
    # fit uses unchecked float32 shortcuts of mutual_information and maximum_spanning_tree; with
    # few rows and copied columns many weights tie exactly, and the tree must still be the one
    # the public functions give, whose weight is that of networkx's maximum spanning tree.
    rng = np.random.default_rng(30 + cardinality)
    X = rng.integers(0, cardinality, (12, 30)).astype(np.uint8)
    X[:, 10:20] = X[:, :10]
    X[:, 25] = 0
    for root in (0, 17):
        model = DependencyTree(cardinality=cardinality, prior=prior, root=root).fit(X)
        information = mutual_information(X, cardinality, prior)
        parents, order = maximum_spanning_tree(information, root=root)
        np.testing.assert_array_equal(model.parents, parents)
        np.testing.assert_array_equal(model.order, order)
        child = np.flatnonzero(parents >= 0)
        np.testing.assert_array_equal(model.edge_information[child], information[child, parents[child]])
        graph = nx.Graph()
        for i, j in itertools.combinations(range(30), 2):
            graph.add_edge(i, j, weight=information[i, j])
        assert tree_weight(information, parents) == pytest.approx(
            nx.maximum_spanning_tree(graph).size(weight="weight"), rel=1e-12
        )


def test_binary_edge_counts_from_the_product_equal_counts_of_the_sample():
    # For unweighted binary data fit reads the edge tables off the matrix product behind the
    # mutual information; they must equal the tables counted row by row with numpy (here with a
    # row count that is no multiple of 8, for the bit-packed counter used otherwise).
    rng = np.random.default_rng(31)
    X = (rng.random((203, 25)) < rng.uniform(0.05, 0.95, 25)).astype(np.uint8)
    X[:, 7] = X[:, 3]
    model = DependencyTree(cardinality=2, prior=0.0, root=4).fit(X)
    par = np.where(model.parents < 0, np.arange(25), model.parents)
    expected = np.zeros((25, 2, 2))
    for i in range(25):
        np.add.at(expected[i], (X[:, par[i]], X[:, i]), 1.0)
    np.testing.assert_array_equal(model._edge_counts(X, None, model.parents), expected)
    conditional = expected / expected.sum(axis=2, keepdims=True)
    child = np.flatnonzero(model.parents >= 0)
    np.testing.assert_allclose(model.conditionals[child], conditional[child], rtol=1e-12)


def test_edges_parents_and_order_are_consistent():
    card = [2, 3, 2, 2, 3, 2, 2]
    X = sample_from_joint_table(card, 300, np.random.default_rng(23))
    for root in (0, 4, 6):
        model = DependencyTree(cardinality=card, root=root).fit(X)
        edges = model.edges()
        assert edges.shape == (6, 2)
        assert np.array_equal(model.parents[edges[:, 1]], edges[:, 0])
        assert np.flatnonzero(model.parents < 0).tolist() == [root]
        assert sorted(model.order.tolist()) == list(range(7)) and model.order[0] == root
        position = np.empty(7, dtype=int)
        position[model.order] = np.arange(7)
        assert np.all(position[edges[:, 0]] < position[edges[:, 1]])
        assert model.edge_information[root] == 0


def test_root_changes_direction_but_not_the_distribution():
    # A tree distribution with empirical conditionals does not depend on the root (Chow and Liu, 1968).
    card = [2, 3, 2, 3, 2]
    X = sample_from_joint_table(card, 300, np.random.default_rng(24))
    strings = all_strings(card)
    first = DependencyTree(cardinality=card, prior=0, root=0).fit(X)
    second = DependencyTree(cardinality=card, prior=0, root=3).fit(X)
    assert undirected(first.edges()) == undirected(second.edges())
    assert np.allclose(np.exp(first.log_prob(strings)), np.exp(second.log_prob(strings)), atol=1e-12)


@pytest.mark.parametrize("cardinality", [[2] * 6, [3, 2, 3, 2, 3]])
def test_integer_weights_equal_repeated_rows(cardinality):
    rng = np.random.default_rng(25)
    X = sample_from_joint_table(cardinality, 120, rng)
    weights = rng.integers(0, 4, size=X.shape[0])
    weighted = DependencyTree(cardinality=cardinality, prior=0.5).fit(X, weights=weights)
    repeated = DependencyTree(cardinality=cardinality, prior=0.5).fit(np.repeat(X, weights, axis=0))
    assert np.array_equal(weighted.parents, repeated.parents)
    assert np.allclose(weighted.conditionals, repeated.conditionals, atol=1e-12)
    assert np.allclose(weighted.edge_information, repeated.edge_information, atol=1e-6)
    assert weighted.entropy() == pytest.approx(repeated.entropy(), abs=1e-12)
    assert weighted.kl_to_sample() == pytest.approx(repeated.kl_to_sample(), abs=1e-12)


def test_fractional_weights_leave_no_negative_probability():
    # Every row below has a 1 in column 0 or column 1, so the pair cell (0, 0) is empty: with
    # prior 0 its probability must be exactly 0 and its log-probability -inf, whatever the weights.
    X = np.array([[1, 0], [0, 1], [1, 1]] * 2, dtype=np.uint8)
    rng = np.random.default_rng(29)
    for _ in range(20):
        model = DependencyTree(cardinality=2, prior=0).fit(X, weights=rng.random(6))
        assert np.all(model.conditionals >= 0)
        with np.errstate(divide="ignore", invalid="ignore"):
            assert np.isneginf(model.log_prob([[0, 0]])[0])


def test_single_variable_model():
    X = np.array([[0], [1], [1], [2]], dtype=np.uint8)
    model = DependencyTree(cardinality=[3], prior=0).fit(X)
    assert model.parents.tolist() == [-1]
    assert len(model.edges()) == 0
    assert np.allclose(np.exp(model.log_prob([[0], [1], [2]])), [0.25, 0.5, 0.25])
    assert model.entropy() == pytest.approx(float(scipy.stats.entropy([0.25, 0.5, 0.25])), abs=1e-12)


def test_cardinality_is_inferred_from_the_first_fit():
    X = np.array([[0, 2, 1], [1, 0, 0], [0, 1, 1]])
    model = DependencyTree(prior=1).fit(X)
    assert model.cardinality.tolist() == [2, 3, 2]
    strings = all_strings([2, 3, 2])
    assert np.exp(model.log_prob(strings)).sum() == pytest.approx(1.0, abs=1e-12)


def test_boolean_and_float_whole_number_samples_are_accepted():
    X = np.array([[0, 1, 1], [1, 0, 1], [1, 1, 0], [0, 0, 0]])
    reference = DependencyTree(cardinality=2).fit(X)
    for variant in (X.astype(bool), X.astype(np.float64)):
        model = DependencyTree(cardinality=2).fit(variant)
        assert np.array_equal(model.parents, reference.parents)
        assert np.allclose(model.conditionals, reference.conditionals)


# -- 6. persistence -------------------------------------------------------------------------
@pytest.mark.parametrize("cardinality", [[2] * 6, [3, 2, 3, 3, 2]])
def test_state_round_trip_gives_identical_samples_and_log_prob(cardinality):
    X = sample_from_joint_table(cardinality, 200, np.random.default_rng(26))
    model = DependencyTree(cardinality=cardinality, prior=0.7, root=2).fit(X)
    state = model.get_state()
    restored = DependencyTree().set_state(state)
    assert state["kind"] == "tree"
    strings = all_strings(cardinality)
    assert np.array_equal(restored.log_prob(strings), model.log_prob(strings))
    assert np.array_equal(
        restored.sample(1000, np.random.default_rng(27)), model.sample(1000, np.random.default_rng(27))
    )
    assert restored.entropy() == model.entropy()
    assert np.array_equal(restored.edges(), model.edges())
    with pytest.raises(RuntimeError, match="sample"):
        restored.kl_to_sample()


def test_state_is_a_copy():
    X = sample_from_joint_table([2] * 5, 100, np.random.default_rng(28))
    model = DependencyTree(cardinality=2).fit(X)
    state = model.get_state()
    kept = state["conditionals"].copy()
    model.fit(1 - X)
    assert np.array_equal(state["conditionals"], kept)


# -- 9. input validation --------------------------------------------------------------------
def test_bad_samples_raise_clear_errors():
    model = DependencyTree(cardinality=[2, 2, 3])
    with pytest.raises(ValueError, match="2-D"):
        model.fit(np.array([0, 1, 1]))
    with pytest.raises(ValueError, match=r"at least one sample \(row\)"):
        model.fit(np.zeros((0, 3)))
    with pytest.raises(ValueError, match="3 columns"):
        model.fit(np.zeros((4, 2)))
    with pytest.raises(ValueError, match=r"values 0\.\.2 in column 2 .* Got 3 instead"):
        model.fit(np.array([[0, 1, 3], [1, 0, 0]]))
    with pytest.raises(ValueError, match="non-negative"):
        model.fit(np.array([[0, -1, 0]]))
    with pytest.raises(ValueError, match="whole numbers"):
        model.fit(np.array([[0, 0.5, 1]]))
    with pytest.raises(ValueError, match="whole numbers"):
        model.fit(np.array([[0, np.nan, 1]]))


def test_values_beyond_uint8_are_rejected_not_wrapped():
    # 256 and 257 do not fit in uint8; fitting must refuse them instead of reading them as 0 and 1.
    with pytest.raises(ValueError):
        DependencyTree(cardinality=[2, 2]).fit(np.array([[0, 256], [1, 257]]))
    with pytest.raises(ValueError):
        DependencyTree().fit(np.array([[0, 256], [1, 257]]))


def test_bad_parameters_raise_clear_errors():
    for prior in (-1.0, np.nan, np.inf, "1"):
        with pytest.raises(ValueError, match="'prior'"):
            DependencyTree(prior=prior)
    X = np.array([[0, 1], [1, 0]])
    with pytest.raises(ValueError, match="'root'"):
        DependencyTree(root=2).fit(X)
    with pytest.raises(ValueError, match="'root'"):
        DependencyTree(root=-1).fit(X)


def test_bad_weights_raise_clear_errors():
    X = np.array([[0, 1], [1, 0], [1, 1]])
    model = DependencyTree(cardinality=2)
    with pytest.raises(ValueError, match=r"one entry per sample \(3\)"):
        model.fit(X, weights=[1.0, 2.0])
    for weights in ([1.0, -1.0, 1.0], [1.0, np.nan, 1.0], [1.0, np.inf, 1.0]):
        with pytest.raises(ValueError, match="'weights'.*non-negative"):
            model.fit(X, weights=weights)
    with pytest.raises(ValueError, match="'weights'.*positive sum when 'prior' is 0"):
        DependencyTree(cardinality=2, prior=0.0).fit(X, weights=[0.0, 0.0, 0.0])


def test_log_prob_checks_its_input():
    model = DependencyTree(cardinality=[2, 3]).fit(np.array([[0, 2], [1, 0]]))
    with pytest.raises(ValueError, match="2 columns"):
        model.log_prob(np.zeros((1, 3)))
    with pytest.raises(ValueError, match="in column 1"):
        model.log_prob(np.array([[0, 3]]))
    with pytest.raises(ValueError, match="2-D"):
        model.log_prob(np.array([0, 1]))


def test_unfitted_model_raises():
    model = DependencyTree()
    assert not model.fitted
    for use in (
        lambda: model.sample(3, np.random.default_rng(0)),
        lambda: model.log_prob(np.zeros((1, 2))),
        model.entropy,
        model.kl_to_sample,
        model.get_state,
        model.edges,
        model.to_networkx,
        model.marginals,
        lambda: model.n,
    ):
        with pytest.raises(RuntimeError, match="must be fitted"):
            use()

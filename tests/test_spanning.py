"""Tests of optim.models.spanning against networkx's maximum spanning tree."""

import networkx as nx
import numpy as np
import pytest

from optim.info import mutual_information
from optim.models.spanning import _prim, _prim_nonnegative, edges_from_parents, maximum_spanning_tree, tree_weight


def _random_weights(rng, n):
    half = rng.normal(size=(n, n))
    weights = half + half.T
    np.fill_diagonal(weights, rng.normal(size=n) * 100.0)  # must be ignored
    return weights


def _graph(weights):
    """Complete graph on the off-diagonal entries (no self-loops)."""
    n = weights.shape[0]
    graph = nx.Graph()
    graph.add_nodes_from(range(n))
    rows, cols = np.triu_indices(n, k=1)
    graph.add_weighted_edges_from(zip(rows.tolist(), cols.tolist(), weights[rows, cols].tolist(), strict=True))
    return graph


def _assert_is_tree(parents, order, root):
    n = parents.shape[0]
    assert parents.dtype == np.int64 and order.dtype == np.int64
    assert parents.shape == order.shape == (n,)
    assert parents[root] == -1 and np.count_nonzero(parents == -1) == 1
    assert order[0] == root
    np.testing.assert_array_equal(np.sort(order), np.arange(n))
    position = np.empty(n, dtype=np.int64)
    position[order] = np.arange(n)
    child = np.flatnonzero(parents >= 0)
    assert np.all(position[parents[child]] < position[child])  # topological order
    edges = edges_from_parents(parents)
    assert edges.shape == (n - 1, 2)
    tree = nx.Graph()
    tree.add_nodes_from(range(n))
    tree.add_edges_from(edges.tolist())
    assert nx.is_tree(tree)  # connected and acyclic


@pytest.mark.parametrize("n", [2, 3, 10, 50, 200])
def test_total_weight_and_edges_match_networkx(n):
    rng = np.random.default_rng(n)
    weights = _random_weights(rng, n)
    parents, order = maximum_spanning_tree(weights)
    _assert_is_tree(parents, order, 0)
    graph = _graph(weights)
    ours = tree_weight(weights, parents)
    for algorithm in ("prim", "kruskal"):
        reference = nx.maximum_spanning_tree(graph, algorithm=algorithm)
        expected = reference.size(weight="weight")
        assert ours == pytest.approx(expected, rel=1e-9, abs=1e-12)
        # Continuous random weights are distinct, so the maximum spanning tree is unique.
        upper = weights[np.triu_indices(n, k=1)]
        assert np.unique(upper).size == upper.size
        assert {frozenset(e) for e in edges_from_parents(parents).tolist()} == {frozenset(e) for e in reference.edges()}


@pytest.mark.parametrize("root", [0, 4, 9])
def test_any_root_gives_the_same_tree(root):
    rng = np.random.default_rng(20)
    weights = _random_weights(rng, 10)
    reference = {frozenset(e) for e in edges_from_parents(maximum_spanning_tree(weights)[0]).tolist()}
    parents, order = maximum_spanning_tree(weights, root=root)
    _assert_is_tree(parents, order, root)
    assert {frozenset(e) for e in edges_from_parents(parents).tolist()} == reference


def test_single_and_two_nodes():
    parents, order = maximum_spanning_tree(np.array([[np.nan]]))  # the diagonal is ignored
    np.testing.assert_array_equal(parents, [-1])
    np.testing.assert_array_equal(order, [0])
    assert edges_from_parents(parents).shape == (0, 2)
    assert tree_weight([[5.0]], parents) == 0.0
    parents, order = maximum_spanning_tree([[0.0, -3.0], [-3.0, 0.0]], root=1)
    np.testing.assert_array_equal(parents, [1, -1])
    np.testing.assert_array_equal(order, [1, 0])
    assert tree_weight([[0.0, -3.0], [-3.0, 0.0]], parents) == -3.0


def test_ties_are_broken_by_lowest_index():
    # All weights equal: every node joins in index order and keeps the root as its parent.
    parents, order = maximum_spanning_tree(np.ones((6, 6)))
    np.testing.assert_array_equal(order, np.arange(6))
    np.testing.assert_array_equal(parents, [-1, 0, 0, 0, 0, 0])
    # Nodes 2 and 3 tie for the first step; the lower index joins first.
    weights = np.array(
        [
            [0, 1, 5, 5],
            [1, 0, 1, 1],
            [5, 1, 0, 1],
            [5, 1, 1, 0],
        ],
        dtype=float,
    )
    parents, order = maximum_spanning_tree(weights)
    np.testing.assert_array_equal(order, [0, 2, 3, 1])
    np.testing.assert_array_equal(parents, [-1, 0, 0, 0])


def _slow_prim(weights, root):
    """Prim's rules written out as a loop over the nodes outside the tree, for small n.

    The best edge from the tree to an outside node joins next; among equal weights the lowest
    outside index wins, and for that node the tree neighbour that joined first is its parent.
    """
    n = weights.shape[0]
    inside, parents = [root], np.full(n, -1)
    while len(inside) < n:
        best = (-np.inf, None, None)
        for node in range(n):
            if node in inside:
                continue
            for tree_node in inside:  # in joining order: a later equal weight does not replace it
                if weights[tree_node, node] > best[0]:
                    best = (weights[tree_node, node], node, tree_node)
        _, node, tree_node = best
        inside.append(node)
        parents[node] = tree_node
    return parents, np.array(inside)


def _nonnegative_weights(rng, n, levels=None):
    """Symmetric non-negative weights with a zero diagonal: continuous, or from ``levels`` values (ties)."""
    if levels is None:
        half = np.abs(rng.normal(size=(n, n)))
    else:
        half = rng.integers(0, levels, (n, n)).astype(np.float64)
    weights = np.triu(half, k=1)
    return weights + weights.T


@pytest.mark.parametrize("n", [2, 3, 10, 200])
@pytest.mark.parametrize("dtype", [np.float32, np.float64])
def test_fast_path_for_nonnegative_weights_matches_networkx(n, dtype):
    # The fast path (bits read as integers) serves the dependency tree (float32) and the public
    # function on exactly symmetric non-negative input (float64); it must give the general
    # path's tree, the unique maximum spanning tree here (continuous weights, networkx).
    rng = np.random.default_rng(100 + n)
    weights = _nonnegative_weights(rng, n).astype(dtype)
    as_float64 = weights.astype(np.float64)
    reference = nx.maximum_spanning_tree(_graph(as_float64))
    expected = _prim(weights, n // 2)
    parents, order = _prim_nonnegative(weights, n // 2)
    _assert_is_tree(parents, order, n // 2)
    np.testing.assert_array_equal(parents, expected[0])
    np.testing.assert_array_equal(order, expected[1])
    assert {frozenset(e) for e in edges_from_parents(parents).tolist()} == {frozenset(e) for e in reference.edges()}
    public = maximum_spanning_tree(as_float64, root=n // 2)
    np.testing.assert_array_equal(public[0], parents)
    np.testing.assert_array_equal(public[1], order)


@pytest.mark.parametrize("seed", [0, 1, 2])
@pytest.mark.parametrize("levels", [1, 2, 3])
def test_many_ties_give_one_tree_on_every_path(seed, levels):
    # Weights from {0, ..., levels - 1}: most edges tie (all of them for levels = 1). Prim's rules
    # fix one tree; the public function, the general and the fast path must all give the one of
    # the slow loop, with the weight of networkx's maximum spanning tree.
    rng = np.random.default_rng(seed)
    n = 30
    weights = _nonnegative_weights(rng, n, levels)
    parents, order = maximum_spanning_tree(weights, root=3)
    _assert_is_tree(parents, order, 3)
    slow_parents, slow_order = _slow_prim(weights, 3)
    np.testing.assert_array_equal(parents, slow_parents)
    np.testing.assert_array_equal(order, slow_order)
    assert tree_weight(weights, parents) == nx.maximum_spanning_tree(_graph(weights)).size(weight="weight")
    for matrix in (weights, weights.astype(np.float32)):
        for path in (_prim, _prim_nonnegative):
            again = path(matrix, 3)
            np.testing.assert_array_equal(again[0], parents)
            np.testing.assert_array_equal(again[1], order)


def test_negative_zero_and_negative_weights_take_the_general_path():
    # -0.0 has its sign bit set, so the fast path would misread it; the public function must
    # notice and still follow Prim's rules (-0.0 == 0.0: they tie).
    weights = np.array([[0.0, -0.0, 0.0], [-0.0, 0.0, 1.0], [0.0, 1.0, 0.0]])
    parents, order = maximum_spanning_tree(weights)
    np.testing.assert_array_equal(order, [0, 1, 2])
    np.testing.assert_array_equal(parents, [-1, 0, 1])
    np.testing.assert_array_equal(parents, _slow_prim(weights, 0)[0])
    shifted = _nonnegative_weights(np.random.default_rng(5), 12) - 0.5
    np.testing.assert_array_equal(maximum_spanning_tree(shifted)[0], _slow_prim(shifted, 0)[0])


def test_nearly_symmetric_weights_take_the_general_path():
    # Within the symmetry tolerance but not exactly symmetric: the fast path needs exact symmetry
    # (it looks the parents up in each node's own row), so the general path must serve.
    rng = np.random.default_rng(6)
    weights = _nonnegative_weights(rng, 15)
    nudged = weights + np.triu(rng.random((15, 15)) * 1e-9, k=1)
    parents, order = maximum_spanning_tree(nudged)
    np.testing.assert_array_equal(parents, _prim(nudged, 0)[0])
    np.testing.assert_array_equal(parents, _slow_prim(nudged, 0)[0])


def test_tree_weight_and_edges():
    weights = np.array([[0, 2, 7], [2, 0, 3], [7, 3, 0]], dtype=float)
    parents, _ = maximum_spanning_tree(weights)
    np.testing.assert_array_equal(parents, [-1, 2, 0])
    np.testing.assert_array_equal(edges_from_parents(parents), [[2, 1], [0, 2]])
    assert tree_weight(weights, parents) == 10.0


def test_chow_liu_recovers_a_chain_from_samples():
    # Chow & Liu, "Approximating discrete probability distributions with dependence trees", IEEE
    # Trans. Information Theory 14(3), 1968: the maximum-MI spanning tree is the maximum-likelihood
    # tree, so for samples of a tree-shaped distribution it finds that tree. Here: a Markov chain
    # with flip probability 0.1 per link; adjacent MI ~0.37 nats, two links apart ~0.22 nats, far
    # beyond the sampling noise (~0.02) at N = 4000 (seeded).
    rng = np.random.default_rng(21)
    n, N = 12, 4000
    chain = np.empty((N, n), dtype=np.uint8)
    chain[:, 0] = rng.integers(0, 2, N)
    for i in range(1, n):
        chain[:, i] = chain[:, i - 1] ^ (rng.random(N) < 0.1)
    labels = rng.permutation(n)
    X = np.empty_like(chain)
    X[:, labels] = chain
    parents, _ = maximum_spanning_tree(mutual_information(X))
    expected = {frozenset((int(labels[i]), int(labels[i + 1]))) for i in range(n - 1)}
    assert {frozenset(e) for e in edges_from_parents(parents).tolist()} == expected


@pytest.mark.parametrize(
    "call, words",
    [
        (lambda: maximum_spanning_tree(np.zeros((2, 3))), ["'weights'", "square", "(2, 3)"]),
        (lambda: maximum_spanning_tree(np.zeros(3)), ["'weights'", "(3,)"]),
        (lambda: maximum_spanning_tree(np.zeros((0, 0))), ["'weights'", "non-empty"]),
        (lambda: maximum_spanning_tree([["a", "b"], ["c", "d"]]), ["'weights'", "numbers"]),
        (lambda: maximum_spanning_tree([[0, np.nan], [np.nan, 0]]), ["'weights'", "finite", "[0, 1]"]),
        (lambda: maximum_spanning_tree([[0, 1], [2, 0]]), ["'weights'", "symmetric"]),
        (lambda: maximum_spanning_tree(np.ones((3, 3)), root=3), ["'root'", "0..2", "Got 3"]),
        (lambda: maximum_spanning_tree(np.ones((3, 3)), root=1.0), ["'root'", "1.0"]),
        (lambda: edges_from_parents([-1, -1, 0]), ["'parents'", "exactly one root", "2"]),
        (lambda: edges_from_parents([-1, 2, 1]), ["'parents'", "cycle"]),
        (lambda: edges_from_parents([-1, 1, 0]), ["'parents'", "parents[1] = 1"]),
        (lambda: edges_from_parents([-1, 5, 0]), ["'parents'", "0..2", "parents[1] = 5"]),
        (lambda: edges_from_parents([0.0, -1.0]), ["'parents'", "integers"]),
        (lambda: tree_weight(np.ones((2, 2)), [-1, 0, 0]), ["'weights'", "(3, 3)", "(2, 2)"]),
    ],
)
def test_invalid_input_is_reported(call, words):
    with pytest.raises(ValueError) as caught:
        call()
    message = str(caught.value)
    for word in words:
        assert word in message, (word, message)

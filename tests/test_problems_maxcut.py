"""Tests of optim_problems.maxcut: reader, generator, vectorised cut value, exact references."""

from pathlib import Path

import networkx as nx
import numpy as np
import pytest
from networkx.algorithms.approximation.maxcut import one_exchange

from optim_problems._instances import InstanceFormatError
from optim_problems.maxcut import (
    MaxCutProblem,
    brute_force_max_cut,
    max_cut,
    max_cut_from_graph,
    milp_max_cut,
    random_graph_edges,
    read_edge_list,
)

DATA = Path(__file__).parent / "data" / "instances"
EXAMPLES = Path(__file__).parent.parent / "optim_problems" / "instances"


def _slow_cut(edges, x):
    """Obviously-correct cut value of one candidate, edge by edge."""
    return sum(w for a, b, w in edges if x[a] != x[b])


# ---------------------------------------------------------------- objective


def test_evaluate_matches_edge_by_edge_reference():
    rng = np.random.default_rng(31)
    n, m = 12, 60
    # Raw edges with parallel edges, both orientations, self-loops and negative weights.
    u = rng.integers(0, n, size=m)
    v = rng.integers(0, n, size=m)
    w = rng.integers(-3, 8, size=m).astype(float)
    problem = MaxCutProblem(n, u, v, w)
    X = rng.integers(0, 2, size=(300, n)).astype(np.uint8)
    expected = np.array([_slow_cut(list(zip(u, v, w, strict=True)), x) for x in X])
    np.testing.assert_allclose(problem.evaluate(X), expected, rtol=0, atol=1e-9)
    assert problem.evaluate(X).dtype == np.float64
    assert np.all(problem.u < problem.v)


def test_evaluate_agrees_with_networkx_cut_size():
    # networkx.cut_size is an outside reference for the weight between two node sets.
    graph = nx.gnp_random_graph(15, 0.4, seed=32)
    rng = np.random.default_rng(32)
    for a, b in graph.edges:
        graph[a][b]["weight"] = int(rng.integers(1, 9))
    problem = max_cut_from_graph(graph, solve=False)
    X = rng.integers(0, 2, size=(50, 15)).astype(np.uint8)
    scores = problem.evaluate(X)
    for x, score in zip(X, scores, strict=True):
        side = [node for node, bit in zip(graph.nodes, x, strict=True) if bit]
        assert score == nx.cut_size(graph, side, weight="weight")


def test_evaluate_over_several_edge_blocks():
    u, v, w = random_graph_edges(120, 0.7, weighted=True, seed=33)
    assert u.shape[0] > 4096
    problem = MaxCutProblem(120, u, v, w)
    rng = np.random.default_rng(33)
    X = rng.integers(0, 2, size=(5, 120)).astype(np.uint8)
    expected = np.array([_slow_cut(list(zip(u, v, w, strict=True)), x) for x in X])
    np.testing.assert_allclose(problem.evaluate(X), expected, rtol=0, atol=1e-9)


def test_cut_is_unchanged_by_swapping_sides():
    problem = max_cut(n=10, weighted=True, seed=34, solve=False)
    X = np.random.default_rng(34).integers(0, 2, size=(20, 10)).astype(np.uint8)
    np.testing.assert_array_equal(problem.evaluate(X), problem.evaluate(1 - X))


def test_evaluate_rejects_wrong_shape():
    problem = max_cut(n=6, solve=False)
    with pytest.raises(ValueError, match=r"\(count, 6\)"):
        problem.evaluate(np.zeros((2, 5), np.uint8))


# ---------------------------------------------------------------- exact references


@pytest.mark.parametrize(
    "n, p, weighted, seed",
    [(10, 0.5, False, 1), (12, 0.4, True, 2), (13, 0.6, True, 3), (14, 0.3, False, 4)],
)
def test_brute_force_and_milp_agree(n, p, weighted, seed):
    problem = max_cut(n=n, p=p, weighted=weighted, seed=seed, solve=False)
    brute, brute_cut = brute_force_max_cut(problem)
    milp, milp_cut = milp_max_cut(problem)
    assert brute == milp
    assert problem.evaluate_one(brute_cut) == brute
    assert problem.evaluate_one(milp_cut) == milp


def test_brute_force_and_milp_agree_with_negative_weights():
    rng = np.random.default_rng(35)
    u, v, _ = random_graph_edges(11, 0.6, seed=35)
    w = rng.integers(-5, 6, size=u.shape[0]).astype(float)
    problem = MaxCutProblem(11, u, v, w)
    brute, _ = brute_force_max_cut(problem)
    milp, cut = milp_max_cut(problem)
    assert brute == milp == problem.evaluate_one(cut)


@pytest.mark.parametrize("seed", [5, 6, 7])
def test_exact_optimum_beats_one_exchange_local_search(seed):
    problem = max_cut(n=16, p=0.5, weighted=True, seed=seed)
    graph = problem.to_networkx()
    local_value, (side, _) = one_exchange(graph, weight="weight", seed=seed)
    assert problem.optimum >= local_value
    # Half the total weight is a lower bound on the max cut for non-negative
    # weights (a uniformly random cut has that expectation; common practice, no source).
    assert problem.optimum >= problem.total_weight / 2
    x = np.array([name in side for name in problem.variable_names], np.uint8)
    assert problem.evaluate_one(x) == local_value


def test_known_max_cuts_of_standard_graphs():
    # Complete graph K_n: floor(n^2 / 4); even cycle: all edges; odd cycle:
    # all but one; complete bipartite graph: all edges (common practice, no source).
    cases = [
        (nx.complete_graph(7), 12),
        (nx.cycle_graph(10), 10),
        (nx.cycle_graph(9), 8),
        (nx.complete_bipartite_graph(3, 4), 12),
        # Petersen graph: 12 of its 15 edges (from memory; confirmed here by enumeration).
        (nx.petersen_graph(), 12),
    ]
    for graph, expected in cases:
        problem = max_cut_from_graph(graph)
        assert problem.optimum == expected, graph
        assert problem.optimum_source == "enumeration of all cuts"
        assert milp_max_cut(problem)[0] == expected


def test_brute_force_refuses_large_graphs():
    problem = max_cut(n=30, p=0.1, solve=False)
    with pytest.raises(ValueError, match="limited"):
        brute_force_max_cut(problem)


# ---------------------------------------------------------------- generator


def test_random_graph_is_reproducible_and_well_formed():
    u1, v1, w1 = random_graph_edges(20, 0.3, weighted=True, max_weight=5, seed=9)
    u2, v2, w2 = random_graph_edges(20, 0.3, weighted=True, max_weight=5, seed=9)
    np.testing.assert_array_equal(u1, u2)
    np.testing.assert_array_equal(w1, w2)
    assert np.all(u1 < v1) and np.all(v1 < 20)
    assert set(np.unique(w1)) <= set(range(1, 6))
    u3, _, _ = random_graph_edges(20, 0.3, weighted=True, max_weight=5, seed=10)
    assert not np.array_equal(u1, u3)


def test_random_graph_edge_count_matches_p():
    # 4950 pairs at p = 0.3: mean 1485, sd ~32; a margin of 200 is over 6 sd.
    u, _, w = random_graph_edges(100, 0.3, seed=11)
    assert abs(u.shape[0] - 1485) < 200
    assert np.all(w == 1)


def test_random_graph_rejects_bad_parameters():
    with pytest.raises(ValueError, match="p must"):
        random_graph_edges(5, 1.5)
    with pytest.raises(ValueError, match="n must"):
        random_graph_edges(0, 0.5)
    with pytest.raises(ValueError, match="max_weight"):
        random_graph_edges(5, 0.5, weighted=True, max_weight=0)


# ---------------------------------------------------------------- factories


def test_factory_defaults_and_solver_choice():
    default = max_cut()
    assert default.n == 16 and default.optimum_source == "enumeration of all cuts"
    by_milp = max_cut(solver="milp")
    assert by_milp.optimum == default.optimum and "milp" in by_milp.optimum_source
    assert max_cut(solve=False).optimum is None
    assert max_cut(optimum=3.0).optimum_source == "given by the user"
    assert max_cut(n=40, p=0.1).optimum is None
    with pytest.raises(ValueError, match="solver must"):
        max_cut(solver="guess")
    with pytest.raises(ValueError, match="solve must"):
        max_cut(solve="maybe")


def test_factory_is_reproducible_from_seed():
    a = max_cut(n=12, weighted=True, seed=4, solve=False)
    b = max_cut(n=12, weighted=True, seed=4, solve=False)
    np.testing.assert_array_equal(a.u, b.u)
    np.testing.assert_array_equal(a.w, b.w)


def test_from_graph_keeps_labels_and_merges_multiedges():
    graph = nx.MultiGraph()
    graph.add_edge("a", "b", weight=2)
    graph.add_edge("b", "a", weight=3)
    graph.add_edge("b", "c")
    graph.add_edge("c", "c", weight=9)
    problem = max_cut_from_graph(graph)
    assert problem.variable_names == ["a", "b", "c"]
    assert problem.u.tolist() == [0, 1] and problem.w.tolist() == [5.0, 1.0]
    assert problem.optimum == 6.0
    directed = max_cut_from_graph(nx.DiGraph([(0, 1), (1, 0), (1, 2)]), weight=None)
    assert directed.w.tolist() == [2.0, 1.0]


# ---------------------------------------------------------------- reader


def test_read_integer_labels_keeps_isolated_nodes():
    labels, u, v, w = read_edge_list(DATA / "maxcut_integers.edges")
    assert labels == ["0", "1", "2", "3", "4", "5"]
    assert u.tolist() == [0, 1, 2, 3, 0] and v.tolist() == [1, 2, 3, 0, 5]
    assert w.tolist() == [1.0, 2.5, -1.0, 4.0, 1.0]


def test_read_arbitrary_labels_in_order_of_first_appearance():
    problem = max_cut(DATA / "maxcut_labels.edges")
    assert problem.variable_names == ["ana", "ben", "cleo", "dev"]
    assert problem.total_weight == 7.0
    assert problem.optimum == brute_force_max_cut(problem)[0]


def test_read_labels_with_leading_zeros_as_names(tmp_path):
    path = tmp_path / "zeros.edges"
    path.write_text("1 01\n01 2\n")
    labels, u, v, _ = read_edge_list(path)
    assert labels == ["1", "01", "2"]
    assert u.tolist() == [0, 1] and v.tolist() == [1, 2]


def test_example_file_loads():
    problem = max_cut(EXAMPLES / "maxcut-band-rehearsal.edges")
    assert problem.n == 8 and "flute" in problem.variable_names
    assert problem.optimum == milp_max_cut(problem)[0]


def _error_for(tmp_path, text):
    path = tmp_path / "bad.edges"
    path.write_text(text)
    with pytest.raises(InstanceFormatError) as info:
        read_edge_list(path)
    assert str(path) in str(info.value)
    return info.value


def test_reader_rejects_wrong_field_count(tmp_path):
    error = _error_for(tmp_path, "# header comment\n0 1\n1 2 3 4\n")
    assert error.line == 3 and "expected 'u v' or 'u v weight'" in error.reason
    error = _error_for(tmp_path, "0 1\n7\n")
    assert error.line == 2


@pytest.mark.parametrize("weight", ["heavy", "nan", "inf"])
def test_reader_rejects_bad_weight(tmp_path, weight):
    error = _error_for(tmp_path, f"0 1 2\n1 2 {weight}\n")
    assert error.line == 2 and "finite number" in error.reason


def test_reader_rejects_file_without_edges(tmp_path):
    error = _error_for(tmp_path, "# nothing here\n\n")
    assert error.line is None and "at least one edge" in error.reason

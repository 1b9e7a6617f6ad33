"""Weighted max-cut: split the nodes of a graph in two sides, maximising the
total weight of the edges between the sides.

Candidate bit ``i`` is the side (0 or 1) of node ``i``; the score is
``sum_e w_e * (x_u != x_v)``. Parallel edges are merged (weights added) and
self-loops, which no cut can contain, are dropped. Weights may be negative.

Edge-list files hold one edge per line, ``u v`` or ``u v weight`` (weight 1
when absent), separated by spaces, tabs or commas; ``#`` starts a comment. When
every node label is a non-negative integer written without leading zeros, node
``i`` is variable ``i`` and there are ``max label + 1`` variables (labels absent
from the file are isolated nodes, so 1-based files get an unused node 0);
otherwise labels become variables in order of first appearance. The variable
names are the node labels.

Reference optima: enumeration of all ``2**(n-1)`` cuts (node 0 fixed on side 0,
since swapping the sides leaves the cut unchanged) for ``n <= 20``, or the
mixed-integer program of :func:`milp_max_cut` solved by ``scipy.optimize.milp``.
"""

from __future__ import annotations

import os
import re
from typing import List, Optional, Sequence, Tuple

import numpy as np

from optim.problem import Problem
from optim_problems._instances import (
    InstanceFormatError,
    exhaustive_maximum,
    read_instance_lines,
    resolve_solve_option,
)

__all__ = [
    "MaxCutProblem",
    "InstanceFormatError",
    "read_edge_list",
    "random_graph_edges",
    "brute_force_max_cut",
    "milp_max_cut",
    "max_cut",
    "max_cut_from_graph",
]

#: Largest node count solved by enumeration.
BRUTE_FORCE_LIMIT = 20
#: Hard cap of :func:`brute_force_max_cut` (``2**23`` cuts).
_ENUMERATION_CAP = 24
#: Largest node count that ``solve="auto"`` hands to the MILP solver.
AUTO_MILP_LIMIT = 26
#: Edge slots per block in :meth:`MaxCutProblem.evaluate` (bounds memory).
_EDGE_BLOCK = 1 << 12

_SEPARATORS = re.compile(r"[\s,]+")


class MaxCutProblem(Problem):
    """Maximise the weight of the cut of a weighted graph.

    Parameters
    ----------
    n : int
        Number of nodes.
    u, v : sequence of int
        End nodes (0-based) of each edge.
    w : sequence of float or None
        Edge weights (1 when None).
    variable_names : sequence of str or None
        Node labels.
    optimum, optimum_source, name
        As for :class:`optim.problem.Problem`.
    """

    def __init__(
        self,
        n: int,
        u: Sequence[int],
        v: Sequence[int],
        w: Optional[Sequence[float]] = None,
        variable_names=None,
        optimum=None,
        optimum_source=None,
        name="max-cut",
    ):
        super().__init__(
            n,
            goal="maximize",
            optimum=optimum,
            optimum_source=optimum_source,
            name=name,
            variable_names=variable_names,
        )
        self.u, self.v, self.w = _merge_edges(self.n, u, v, w)

    @property
    def total_weight(self) -> float:
        """Sum of all edge weights."""
        return float(self.w.sum())

    def evaluate(self, X: np.ndarray) -> np.ndarray:
        X = np.asarray(X, dtype=np.uint8)
        if X.ndim != 2 or X.shape[1] != self.n:
            raise ValueError(f"expected a population of shape (count, {self.n}); got {X.shape}")
        scores = np.zeros(X.shape[0], dtype=np.float64)
        for start in range(0, self.w.shape[0], _EDGE_BLOCK):
            stop = start + _EDGE_BLOCK
            crossing = X[:, self.u[start:stop]] != X[:, self.v[start:stop]]
            scores += crossing @ self.w[start:stop]
        return scores

    def to_networkx(self):
        """The graph as a ``networkx.Graph`` with node labels and ``weight`` attributes."""
        import networkx as nx

        graph = nx.Graph()
        graph.add_nodes_from(self.variable_names)
        names = self.variable_names
        graph.add_weighted_edges_from(
            (names[a], names[b], float(c)) for a, b, c in zip(self.u, self.v, self.w, strict=True)
        )
        return graph

    def describe(self) -> dict:
        summary = super().describe()
        summary.update(edges=int(self.w.shape[0]), total_weight=self.total_weight)
        return summary


def _merge_edges(n, u, v, w):
    u = np.asarray(u, dtype=np.int64).reshape(-1)
    v = np.asarray(v, dtype=np.int64).reshape(-1)
    w = np.ones(u.shape[0]) if w is None else np.asarray(w, dtype=np.float64).reshape(-1)
    if not (u.shape == v.shape == w.shape):
        raise ValueError("u, v and w must have one entry per edge")
    if u.size and (min(u.min(), v.min()) < 0 or max(u.max(), v.max()) >= n):
        raise ValueError(f"edge end nodes must lie in 0..{n - 1}")
    if not np.all(np.isfinite(w)):
        raise ValueError("edge weights must be finite")
    keep = u != v
    low, high, w = np.minimum(u, v)[keep], np.maximum(u, v)[keep], w[keep]
    keys, inverse = np.unique(low * n + high, return_inverse=True)
    merged = np.zeros(keys.shape[0], dtype=np.float64)
    np.add.at(merged, inverse, w)
    return keys // n, keys % n, merged


def read_edge_list(path) -> Tuple[List[str], np.ndarray, np.ndarray, np.ndarray]:
    """Read an edge-list file (format in the module docstring).

    Returns
    -------
    labels : list of str
        The node labels, one per variable.
    u, v : numpy.ndarray
        int64 end nodes of each edge.
    w : numpy.ndarray
        float64 edge weights.

    Raises
    ------
    InstanceFormatError
        On a line without 2 or 3 fields, a weight that is not a finite number,
        or a file without edges.
    """
    path = os.fspath(path)
    ends: List[Tuple[str, str]] = []
    weights: List[float] = []
    for number, text in read_instance_lines(path):
        content = text.split("#", 1)[0].strip()
        if not content:
            continue
        fields = [f for f in _SEPARATORS.split(content) if f]
        if len(fields) not in (2, 3):
            raise InstanceFormatError(path, number, f"expected 'u v' or 'u v weight', got {len(fields)} fields")
        weight = 1.0
        if len(fields) == 3:
            try:
                weight = float(fields[2])
            except ValueError:
                weight = float("nan")
            if not np.isfinite(weight):
                raise InstanceFormatError(path, number, f"expected a finite number as edge weight, got {fields[2]!r}")
        ends.append((fields[0], fields[1]))
        weights.append(weight)
    if not ends:
        raise InstanceFormatError(path, None, "expected at least one edge line 'u v [weight]'")
    labels_seen = [label for pair in ends for label in pair]
    if all(label.isdigit() and label == str(int(label)) for label in labels_seen):
        n = max(int(label) for label in labels_seen) + 1
        labels = [str(i) for i in range(n)]
        index = {label: int(label) for label in labels_seen}
    else:
        index = {}
        for label in labels_seen:
            index.setdefault(label, len(index))
        labels = list(index)
    u = np.array([index[a] for a, _ in ends], dtype=np.int64)
    v = np.array([index[b] for _, b in ends], dtype=np.int64)
    return labels, u, v, np.array(weights, dtype=np.float64)


def random_graph_edges(
    n: int, p: float, weighted: bool = False, max_weight: int = 10, seed: int = 0
) -> Tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Edges of a G(n, p) random graph (each of the ``n(n-1)/2`` pairs present
    independently with probability ``p``; Erdős & Rényi 1959, Gilbert 1959).

    With ``weighted`` the weights are integers drawn uniformly from
    ``1 … max_weight``, else all 1. Returns ``(u, v, w)``.
    """
    if int(n) != n or n < 1:
        raise ValueError(f"n must be a positive integer; got {n!r}")
    if not 0.0 <= p <= 1.0:
        raise ValueError(f"p must lie in [0, 1]; got {p!r}")
    if int(max_weight) != max_weight or max_weight < 1:
        raise ValueError(f"max_weight must be a positive integer; got {max_weight!r}")
    rng = np.random.default_rng(seed)
    u, v = np.triu_indices(n, k=1)
    present = rng.random(u.shape[0]) < p
    u, v = u[present].astype(np.int64), v[present].astype(np.int64)
    if weighted:
        w = rng.integers(1, int(max_weight) + 1, size=u.shape[0]).astype(np.float64)
    else:
        w = np.ones(u.shape[0], dtype=np.float64)
    return u, v, w


def brute_force_max_cut(problem: MaxCutProblem) -> Tuple[float, np.ndarray]:
    """Exact max cut by enumerating all ``2**(n-1)`` cuts, vectorised in chunks.

    Returns the best cut value and one assignment reaching it (node 0 on side 0).
    """
    if problem.n > _ENUMERATION_CAP:
        raise ValueError(f"enumerating 2**(n-1) cuts is limited to n <= {_ENUMERATION_CAP}; got n={problem.n}")
    return exhaustive_maximum(problem.evaluate, problem.n, fix_first_zero=True)


def milp_max_cut(problem: MaxCutProblem, time_limit: Optional[float] = None) -> Tuple[float, np.ndarray]:
    """Exact max cut with ``scipy.optimize.milp`` (HiGHS).

    Formulation (common practice, no source): binary ``x_i`` (side of node i,
    with ``x_0 = 0``) and ``y_e`` (edge e cut); maximise ``sum_e w_e y_e``
    subject to, for every edge ``e = (u, v)``::

        y_e <= x_u + x_v            y_e >= x_u - x_v
        y_e <= 2 - x_u - x_v        y_e >= x_v - x_u

    which force ``y_e = x_u XOR x_v`` for binary values, so any sign of weight
    is handled.

    Returns
    -------
    best : float
        The optimal cut value.
    assignment : numpy.ndarray
        A uint8 side vector reaching it.
    """
    try:
        from scipy.optimize import Bounds, LinearConstraint, milp
        from scipy.sparse import coo_matrix
    except ImportError as error:
        raise ImportError("the max-cut MILP reference needs scipy: pip install scipy") from error
    n, m = problem.n, problem.w.shape[0]
    if m == 0:
        return 0.0, np.zeros(n, dtype=np.uint8)
    edges = np.arange(m)
    rows, cols, data = [], [], []
    # Each block of m rows is one constraint family: coefficients on (x_u, x_v, y_e).
    for block, (cu, cv, cy) in enumerate([(-1, -1, 1), (1, 1, 1), (-1, 1, 1), (1, -1, 1)]):
        r = block * m + edges
        rows += [r, r, r]
        cols += [problem.u, problem.v, n + edges]
        data += [np.full(m, cu), np.full(m, cv), np.full(m, cy)]
    matrix = coo_matrix(
        (np.concatenate(data).astype(float), (np.concatenate(rows), np.concatenate(cols))),
        shape=(4 * m, n + m),
    ).tocsr()
    upper = np.concatenate([np.zeros(m), np.full(m, 2.0), np.full(2 * m, np.inf)])
    lower = np.concatenate([np.full(2 * m, -np.inf), np.zeros(2 * m)])
    low_bounds = np.zeros(n + m)
    high_bounds = np.ones(n + m)
    high_bounds[0] = 0.0
    options = {} if time_limit is None else {"time_limit": float(time_limit)}
    result = milp(
        c=np.concatenate([np.zeros(n), -problem.w]),
        constraints=LinearConstraint(matrix, lower, upper),
        integrality=np.ones(n + m),
        bounds=Bounds(low_bounds, high_bounds),
        options=options,
    )
    if result.status != 0 or result.x is None:
        raise RuntimeError(f"scipy.optimize.milp did not prove an optimum: {result.message}")
    assignment = np.round(result.x[:n]).astype(np.uint8)
    return float(problem.evaluate_one(assignment)), assignment


def _solve(problem: MaxCutProblem, solve, solver: str):
    if solver not in ("auto", "brute-force", "milp"):
        raise ValueError(f"solver must be 'auto', 'brute-force' or 'milp'; got {solver!r}")
    if solver == "auto":
        solver = "brute-force" if problem.n <= BRUTE_FORCE_LIMIT else "milp"
    limit = BRUTE_FORCE_LIMIT if solver == "brute-force" else AUTO_MILP_LIMIT
    if not resolve_solve_option(solve, problem.n <= limit):
        return
    if solver == "brute-force":
        problem.optimum, _ = brute_force_max_cut(problem)
        problem.optimum_source = "enumeration of all cuts"
    else:
        problem.optimum, _ = milp_max_cut(problem)
        problem.optimum_source = "scipy.optimize.milp (HiGHS), edge-variable formulation"


def max_cut_from_graph(
    G,
    weight: Optional[str] = "weight",
    solve="auto",
    solver: str = "auto",
    name: Optional[str] = None,
) -> MaxCutProblem:
    """A max-cut problem on a networkx graph.

    Nodes become variables in ``G.nodes`` order, named ``str(node)``; edges of
    a directed graph count as undirected and parallel edges of a multigraph add.

    Parameters
    ----------
    G : networkx.Graph
        The graph.
    weight : str or None
        Edge attribute holding the weight (1 when absent or when None).
    solve : bool or "auto"
        Compute the exact optimum; "auto": only for small graphs.
    solver : {"auto", "brute-force", "milp"}
        Reference method; "auto": enumeration up to 20 nodes, else MILP.
    name : str or None
        Label of the problem.
    """
    nodes = list(G.nodes)
    position = {node: i for i, node in enumerate(nodes)}
    u, v, w = [], [], []
    for a, b, data in G.edges(data=True):
        u.append(position[a])
        v.append(position[b])
        w.append(1.0 if weight is None else float(data.get(weight, 1.0)))
    problem = MaxCutProblem(
        len(nodes),
        u,
        v,
        w,
        variable_names=[str(node) for node in nodes],
        name=name or f"max-cut:graph-n{len(nodes)}",
    )
    _solve(problem, solve, solver)
    return problem


def max_cut(
    path=None,
    n: int = 16,
    p: float = 0.5,
    weighted: bool = False,
    seed: int = 0,
    solve="auto",
    solver: str = "auto",
    max_weight: int = 10,
    optimum: Optional[float] = None,
) -> MaxCutProblem:
    """A max-cut problem from an edge-list file or a G(n, p) random graph.

    Parameters
    ----------
    path : str or None
        Edge-list file ('u v [weight]' lines); when None a random graph is generated.
    n : int
        Number of nodes of the random graph.
    p : float
        Edge probability of the random graph.
    weighted : bool
        Draw integer weights 1..max_weight for the random graph (else all 1).
    seed : int
        Seed of the generator.
    solve : bool or "auto"
        Compute the exact optimum; "auto": only up to 20 nodes (enumeration) or 26 (MILP).
    solver : {"auto", "brute-force", "milp"}
        Reference method; "auto": enumeration up to 20 nodes, else MILP.
    max_weight : int
        Largest random edge weight when weighted.
    optimum : float or None
        A known best cut value to use instead of solving.
    """
    if path is not None:
        labels, u, v, w = read_edge_list(path)
        problem = MaxCutProblem(
            len(labels),
            u,
            v,
            w,
            variable_names=labels,
            name=f"max-cut:{os.path.basename(os.fspath(path))}",
        )
    else:
        u, v, w = random_graph_edges(n, p, weighted=weighted, max_weight=max_weight, seed=seed)
        kind = "weighted" if weighted else "unweighted"
        problem = MaxCutProblem(n, u, v, w, name=f"max-cut:gnp-n{n}-p{p:g}-{kind}-seed{seed}")
    if optimum is not None:
        problem.optimum = float(optimum)
        problem.optimum_source = "given by the user"
    else:
        _solve(problem, solve, solver)
    return problem

"""Maximum-weight spanning tree of a dense weight matrix (Prim's algorithm, O(n^2)).

With mutual-information weights this is the structure step of the Chow-Liu
tree (C. K. Chow and C. N. Liu, "Approximating discrete probability
distributions with dependence trees", 1968).
"""

from __future__ import annotations

import numbers

import numpy as np

__all__ = ["maximum_spanning_tree", "tree_weight", "edges_from_parents"]

# Largest tolerated |w[i, j] - w[j, i]|, relative to the largest |weight| (float32 round-off).
_SYMMETRY_TOLERANCE = 1e-6


def _check_weight_matrix(weights, caller: str):
    """``(matrix, exact)``: ``weights`` as a float64 array (a copy only when its diagonal must be
    cleared), after checks, and whether it is exactly symmetric."""
    try:
        matrix = np.asarray(weights, dtype=np.float64)
    except (TypeError, ValueError):
        raise ValueError(
            f"The 'weights' parameter of {caller} must be a square array of numbers. Got {weights!r} instead."
        ) from None
    if matrix.ndim != 2 or matrix.shape[0] != matrix.shape[1] or matrix.shape[0] == 0:
        raise ValueError(
            f"The 'weights' parameter of {caller} must be a non-empty square array of shape (n, n). "
            f"Got shape {matrix.shape} instead."
        )
    if not np.isfinite(matrix.sum()):
        finite = np.isfinite(matrix)
        np.fill_diagonal(finite, True)
        if not finite.all():
            row, col = np.argwhere(~finite)[0]
            raise ValueError(
                f"The 'weights' parameter of {caller} must hold finite numbers off the diagonal. "
                f"Got {matrix[row, col]} at [{row}, {col}] instead."
            )
        matrix = matrix.copy()
        np.fill_diagonal(matrix, 0.0)
    if (matrix == matrix.T).all():
        return matrix, True
    gap = matrix - matrix.T
    np.abs(gap, out=gap)
    largest = max(abs(float(matrix.max())), abs(float(matrix.min())), 1.0)
    if gap.max() > _SYMMETRY_TOLERANCE * largest:
        row, col = np.unravel_index(np.argmax(gap), gap.shape)
        raise ValueError(
            f"The 'weights' parameter of {caller} must be symmetric. Got weights[{row}, {col}] = "
            f"{matrix[row, col]} but weights[{col}, {row}] = {matrix[col, row]} instead."
        )
    return matrix, False


def _check_parents(parents, caller: str) -> np.ndarray:
    """``parents`` as int64 after checking that it describes one spanning tree."""
    arr = np.asarray(parents)
    if arr.ndim != 1 or arr.shape[0] == 0 or not np.issubdtype(arr.dtype, np.integer):
        raise ValueError(
            f"The 'parents' parameter of {caller} must be a non-empty 1-D array of integers. Got {parents!r} instead."
        )
    arr = arr.astype(np.int64)
    n = arr.shape[0]
    roots = np.flatnonzero(arr == -1)
    if roots.shape[0] != 1:
        raise ValueError(
            f"The 'parents' parameter of {caller} must mark exactly one root with -1. "
            f"Got {roots.shape[0]} entries equal to -1 instead."
        )
    outside = np.flatnonzero((arr < -1) | (arr >= n) | (arr == np.arange(n)))
    if outside.size:
        node = int(outside[0])
        raise ValueError(
            f"The 'parents' parameter of {caller} must give each node a parent in 0..{n - 1} other "
            f"than itself. Got parents[{node}] = {arr[node]} instead."
        )
    root = int(roots[0])
    ancestor = arr.copy()
    ancestor[root] = root
    for _ in range(max(int(n - 1).bit_length(), 1)):
        ancestor = ancestor[ancestor]
    stray = np.flatnonzero(ancestor != root)
    if stray.size:
        raise ValueError(
            f"The 'parents' parameter of {caller} must describe a tree: every node must lead to the "
            f"root {root}. Got node {int(stray[0])}, which reaches a cycle instead."
        )
    return arr


def maximum_spanning_tree(weights, root=0):
    """Maximum-weight spanning tree of a complete graph given by a dense matrix.

    Prim's algorithm on the dense matrix: the nodes outside the tree keep
    their best connection (``best``, ``best_from``), updated with a few
    vector operations per added node, so the cost is O(n^2). Ties are broken
    deterministically: among outside nodes with the same best weight the
    lowest index joins first; among equally good tree neighbours the one that
    joined first stays the parent. Exactly symmetric non-negative weights
    (mutual information, for one) take a faster form of the same steps, with
    the same result.

    Parameters
    ----------
    weights : array of float, shape (n, n)
        Symmetric edge weights (finite off the diagonal); the diagonal is ignored.
    root : int
        The node the tree grows from.

    Returns
    -------
    parents : ndarray of int64, shape (n,)
        ``parents[root] = -1``; for every other node its neighbour on the path to the root.
    order : ndarray of int64, shape (n,)
        The order in which nodes joined, starting with ``root``; every node's
        parent comes before it (a topological order).

    References
    ----------
    R. C. Prim, "Shortest connection networks and some generalizations",
    Bell System Technical Journal 36(6), 1957.
    """
    caller = "maximum_spanning_tree"
    matrix, exact = _check_weight_matrix(weights, caller)
    n = matrix.shape[0]
    if isinstance(root, (bool, np.bool_)) or not isinstance(root, numbers.Integral) or not 0 <= root < n:
        raise ValueError(f"The 'root' parameter of {caller} must be a node index in 0..{n - 1}. Got {root!r} instead.")
    if exact and matrix.view(np.int64).min() >= 0:  # no sign bit anywhere: no negative, no -0.0
        return _prim_nonnegative(matrix, int(root))
    return _prim(matrix, int(root))


def _prim(matrix: np.ndarray, root: int):
    """:func:`maximum_spanning_tree` without the checks, for any weights it accepts.

    ``matrix`` (float32 or float64, symmetric, finite off the diagonal) is
    used as given; ``root`` must be a valid node index.

    References
    ----------
    R. C. Prim, "Shortest connection networks and some generalizations",
    Bell System Technical Journal 36(6), 1957.
    """
    n = matrix.shape[0]
    order = [root]
    outside = np.ones(n, dtype=bool)
    outside[root] = False
    best = matrix[root].copy()
    best[root] = -np.inf
    # A joined node is never improved again, so best_from ends as the parents.
    best_from = np.full(n, root, dtype=np.int64)
    improved = np.empty(n, dtype=bool)
    rows, argmax, greater, copyto, unset = list(matrix), best.argmax, np.greater, np.copyto, -np.inf
    for _ in range(n - 1):
        node = argmax()
        order.append(node)
        outside[node] = False
        best[node] = unset
        row = rows[node]
        greater(row, best, out=improved)
        improved &= outside
        copyto(best_from, node, where=improved)
        copyto(best, row, where=improved)
    best_from[root] = -1
    return best_from, np.array(order, dtype=np.int64)


def _prim_nonnegative(matrix: np.ndarray, root: int):
    """:func:`_prim` for an exactly symmetric matrix of non-negative numbers: the same tree, faster.

    ``matrix`` must be float32 or float64, exactly symmetric, with finite
    off-diagonal entries whose sign bit is clear (>= 0, no -0.0); the diagonal
    is ignored; nothing is checked. Read as unsigned integers, the bits of such
    floats order like the floats. A node in the tree gets the key with every
    bit set: read unsigned, no row can beat it, so one ``maximum`` per step
    keeps it; read signed (-1), it is below every real key, so ``argmax``
    passes it by. Each step is then one ``argmax`` and one ``maximum`` instead
    of five vector operations; the parents are found after the loop
    (:func:`_parents_from_join_weights`).

    References
    ----------
    R. C. Prim, "Shortest connection networks and some generalizations",
    Bell System Technical Journal 36(6), 1957.
    """
    n = matrix.shape[0]
    unsigned, signed = (np.uint32, np.int32) if matrix.itemsize == 4 else (np.uint64, np.int64)
    keys = matrix.view(unsigned)
    best = keys[root].copy()
    as_signed = best.view(signed)
    as_signed[root] = -1
    joined_with = np.zeros(n, dtype=unsigned)
    order = [root]
    rows, argmax, maximum = list(keys), as_signed.argmax, np.maximum
    for _ in range(n - 1):
        node = argmax()
        order.append(node)
        joined_with[node] = best[node]
        as_signed[node] = -1
        maximum(best, rows[node], out=best)
    order = np.array(order, dtype=np.int64)
    return _parents_from_join_weights(matrix, order, joined_with.view(matrix.dtype)), order


def _parents_from_join_weights(matrix: np.ndarray, order: np.ndarray, weights: np.ndarray) -> np.ndarray:
    """Prim's parents, given the order in which nodes joined and the weight each joined with.

    The parent of node v is the earliest-joined node u before v with
    ``matrix[v, u] == weights[v]`` (the row of v equals its column: the matrix
    is exactly symmetric). Mostly a single entry of the row has that weight
    and is taken directly; rows with ties are settled by joining position.
    """
    n = order.shape[0]
    position = np.empty(n, dtype=np.int64)
    position[order] = np.arange(n)
    equal = matrix == weights[:, None]
    parents = equal.argmax(axis=1)
    nodes = np.arange(n)
    equal[nodes, parents] = False
    tied = equal.any(axis=1)
    equal[nodes, parents] = True
    unclear = np.flatnonzero(tied | (position[parents] >= position))
    if unclear.size:
        earlier = equal[unclear] & (position[None, :] < position[unclear, None])
        parents[unclear] = np.where(earlier, position[None, :], n).argmin(axis=1)
    parents[order[0]] = -1
    return parents


def tree_weight(weights, parents) -> float:
    """Total weight of the tree edges ``(parents[c], c)``.

    Parameters
    ----------
    weights : array of float, shape (n, n)
        Edge weights.
    parents : array of int, shape (n,)
        A tree as returned by :func:`maximum_spanning_tree`.
    """
    caller = "tree_weight"
    parents = _check_parents(parents, caller)
    matrix = np.asarray(weights, dtype=np.float64)
    n = parents.shape[0]
    if matrix.shape != (n, n):
        raise ValueError(
            f"The 'weights' parameter of {caller} must have shape ({n}, {n}) to match 'parents'. "
            f"Got shape {matrix.shape} instead."
        )
    child = np.flatnonzero(parents >= 0)
    return float(matrix[parents[child], child].sum())


def edges_from_parents(parents) -> np.ndarray:
    """The tree's edges as an int64 array of shape (n - 1, 2) of ``(parent, child)``, by child index."""
    parents = _check_parents(parents, "edges_from_parents")
    child = np.flatnonzero(parents >= 0)
    return np.column_stack((parents[child], child)).astype(np.int64)

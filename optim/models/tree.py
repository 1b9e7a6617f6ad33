"""The Chow-Liu dependency tree: the best tree-shaped distribution for a sample."""

from __future__ import annotations

from typing import Optional, Sequence

import numpy as np

from optim.info import _information_and_pair_ones
from optim.models._tables import draw_from_rows, normalise_rows, table_entropy, valid_mask
from optim.models.base import Model
from optim.samples import checked_samples
from optim.models.spanning import _prim_nonnegative

__all__ = ["DependencyTree"]

# Number of one bits of every byte (used when numpy has no bitwise_count).
_ONE_BITS = np.array([bin(value).count("1") for value in range(256)], dtype=np.uint8)


def _count_bits(packed: np.ndarray) -> np.ndarray:
    """Column sums of the one bits of a ``uint8`` array, as float64."""
    if hasattr(np, "bitwise_count"):
        bits = np.bitwise_count(packed)
    else:
        bits = _ONE_BITS[packed]
    return bits.sum(axis=0, dtype=np.int64).astype(np.float64)


def _ones_with_parent(X: np.ndarray, par: np.ndarray):
    """For 0/1 data: ``(#rows with X_i = X_par(i) = 1, #rows with X_i = 1)`` for every column ``i``.

    Eight rows are packed into the bits of one byte first, so the column
    gather and the counting touch an eighth of the data (common practice, no source).
    """
    N, n = X.shape
    full = N - N % 8
    packed = np.zeros((full // 8, n), dtype=np.uint8)
    shifted = np.empty_like(packed)
    for bit in range(8):
        np.left_shift(X[bit:full:8], bit, out=shifted)
        packed |= shifted
    both = np.take(packed, par, axis=1)
    both &= packed
    c11, c1 = _count_bits(both), _count_bits(packed)
    if full < N:
        rest = X[full:]
        c11 += (rest & rest[:, par]).sum(axis=0, dtype=np.float64)
        c1 += rest.sum(axis=0, dtype=np.float64)
    return c11, c1


class DependencyTree(Model):
    """Tree-structured distribution fitted by the method of Chow and Liu.

    ``fit`` computes the pairwise mutual information of the (smoothed)
    sample, takes its maximum-weight spanning tree (dense Prim, O(n²)) and
    estimates each variable's conditional table given its tree parent, with
    ``prior`` pseudo-counts in every cell. Among all distributions whose
    dependency graph is a tree, the fitted one is the closest in
    Kullback-Leibler divergence to the sample's empirical distribution.

    Parameters
    ----------
    cardinality : int, sequence of int or None
        Values per variable; inferred from the first data set when ``None``.
    prior : float
        Dirichlet pseudo-count (>= 0) added to every cell of every probability table.
    root : int
        The variable the spanning tree grows from (``0 … n-1``).

    Attributes (after ``fit``)
    --------------------------
    parents : ndarray of int64, shape (n,)
        Each variable's parent in the tree; ``-1`` at the root.
    order : ndarray of int64, shape (n,)
        A topological order (every parent before its children), used for
        ancestral sampling.
    conditionals : ndarray, shape (n, kmax, kmax)
        ``conditionals[i, a, b] = P(X_i = b | X_parent = a)``; for a root
        every row is its marginal distribution.
    edge_information : ndarray, shape (n,)
        Mutual information (nats) between each variable and its parent (0 at
        a root), as used to choose the tree.

    References
    ----------
    C. K. Chow and C. N. Liu, "Approximating discrete probability
    distributions with dependence trees", IEEE Transactions on Information
    Theory 14(3), 1968.
    """

    kind = "tree"

    def __init__(self, cardinality=None, prior: float = 1.0, root: int = 0):
        super().__init__(cardinality, prior)
        self.root = int(root)
        self.parents: Optional[np.ndarray] = None
        self.order: Optional[np.ndarray] = None
        self.conditionals: Optional[np.ndarray] = None
        self.edge_information: Optional[np.ndarray] = None
        self._fit_sample = None
        self._cached_entropy: Optional[float] = None

    @property
    def fitted(self) -> bool:
        return self.conditionals is not None

    # -- fitting ----------------------------------------------------------------------------
    def fit(self, X, weights=None) -> "DependencyTree":
        X, w = self._prepare(X, weights)
        n = X.shape[1]
        if not 0 <= self.root < n:
            raise ValueError(f"The 'root' parameter of DependencyTree must be in 0..{n - 1}. Got {self.root}.")
        if n == 1:
            information, pair_ones = np.zeros((1, 1)), None
            parents, order = np.array([-1]), np.array([0])
        else:
            # X, the cardinality and the weights are checked already; the float32 matrix is exactly
            # symmetric, finite and non-negative, as the fast spanning tree needs.
            information, pair_ones = _information_and_pair_ones(X, self.cardinality, w, self.prior)
            parents, order = _prim_nonnegative(information, self.root)
        parents = np.asarray(parents, dtype=np.int64)
        counts = self._edge_counts(X, w, parents, pair_ones)
        total = float(X.shape[0] if w is None else w.sum())
        parents = self._prune(parents, counts, total)
        self.parents = parents
        self.order = np.asarray(order, dtype=np.int64)
        child = np.flatnonzero(parents >= 0)
        self.edge_information = np.zeros(n)
        self.edge_information[child] = information[child, parents[child]]
        self.conditionals = self._conditionals(counts, parents)
        self._fit_sample = (X, w)
        self._cached_entropy = None
        return self

    def _prune(self, parents: np.ndarray, counts: np.ndarray, total: float) -> np.ndarray:
        """Hook for subclasses that drop edges; the tree keeps every edge."""
        return parents

    def _edge_counts(
        self, X: np.ndarray, w: Optional[np.ndarray], parents: np.ndarray, pair_ones: Optional[np.ndarray] = None
    ) -> np.ndarray:
        """Joint counts ``[i, value of parent, value of i]`` for every variable and its tree parent.

        For the root the "parent" is the root itself, so only the diagonal is filled.
        ``pair_ones``, when given, holds the exact number of rows with X_i = X_j = 1 for every
        pair (unweighted binary data), so the counts are read from it instead of the sample.
        """
        n = X.shape[1]
        kmax = int(self.cardinality.max())
        par = np.where(parents < 0, np.arange(n), parents)
        if kmax == 2:
            counts = np.empty((n, 2, 2))
            if w is None:  # whole-number counts: the differences are exact
                if pair_ones is None:
                    c11, c1 = _ones_with_parent(X, par)
                else:
                    c11 = pair_ones[np.arange(n), par].astype(np.float64)
                    c1 = np.diagonal(pair_ones).astype(np.float64)
                p1 = c1[par]
                counts[:, 1, 1] = c11
                counts[:, 0, 1] = c1 - c11
                counts[:, 1, 0] = p1 - c11
                counts[:, 0, 0] = X.shape[0] - c1 - p1 + c11
                return counts
            # weighted: every cell summed directly, so an empty cell is exactly zero
            child, parent = X.astype(bool), X[:, par].astype(bool)
            for a in (0, 1):
                for b in (0, 1):
                    cell = (parent == bool(a)) & (child == bool(b))
                    counts[:, a, b] = w @ cell
            return counts
        codes = (np.arange(n, dtype=np.int64)[None, :] * kmax + X[:, par]) * kmax + X
        flat = np.bincount(
            codes.ravel(),
            weights=None if w is None else np.repeat(w, n),
            minlength=n * kmax * kmax,
        )
        return flat.reshape(n, kmax, kmax)

    def _conditionals(self, counts: np.ndarray, parents: np.ndarray) -> np.ndarray:
        n, kmax, _ = counts.shape
        card = self.cardinality
        mask = valid_mask(card, kmax)  # (n, kmax) valid values of each variable
        smoothed = counts + self.prior
        if not mask.all():  # cells beyond a variable's (or its parent's) cardinality stay empty
            par = np.where(parents < 0, np.arange(n), parents)
            smoothed[~(mask[par][:, :, None] & mask[:, None, :])] = 0.0
        cond = normalise_rows(smoothed)
        roots = np.flatnonzero(parents < 0)
        if roots.size:
            marginal = counts[roots].sum(axis=1)  # sum over the parent axis
            marginal = normalise_rows(np.where(mask[roots], marginal + self.prior, 0.0))
            cond[roots] = marginal[:, None, :]
        return cond

    # -- using the model --------------------------------------------------------------------
    def _parent_index(self) -> np.ndarray:
        n = self.parents.shape[0]
        return np.where(self.parents < 0, np.arange(n), self.parents)

    def sample(self, count: int, rng: np.random.Generator) -> np.ndarray:
        """Ancestral sampling: each variable drawn given its parent, in topological order.

        The loop runs over variables; every step is vectorised over the ``count`` candidates.

        Parameters
        ----------
        count : int
            How many vectors to draw.
        rng : numpy.random.Generator
            The random stream the draws come from.

        Returns
        -------
        numpy.ndarray
            The vectors, ``uint8`` of shape ``(count, n)``.
        """
        self._require_fitted()
        count = int(count)
        n = self.n
        uniforms = rng.random((n, count), dtype=np.float32)
        drawn = np.empty((n, count), dtype=np.uint8)
        if self.conditionals.shape[1] == 2:
            self._draw_binary(uniforms, drawn)
            return np.ascontiguousarray(drawn.T)
        par = self._parent_index()
        for i in self.order:
            if self.parents[i] < 0:
                rows = np.broadcast_to(self.conditionals[i, 0], (count, self.conditionals.shape[2]))
            else:
                rows = self.conditionals[i][drawn[par[i]]]
            drawn[i] = draw_from_rows(rows, uniforms[i], self.cardinality[i])
        return np.ascontiguousarray(drawn.T)

    def _draw_binary(self, uniforms: np.ndarray, drawn: np.ndarray) -> None:
        """``drawn[i] = uniforms[i] < P(X_i = 1 | parent)``, one comparison per variable.

        With ``t0``, ``t1`` the chances of a one given a parent of 0 or 1 and
        ``d = t1 - t0``, ``u < t0 + d·x_parent`` is ``(u - t0) / d < x_parent``
        (``>`` when ``d < 0``), so the uniforms are shifted and scaled for all
        variables at once and the loop does one comparison with the parent's
        row. Given a parent of 0 the draw is exact; given 1 it may differ from
        ``u < t1`` by one rounding step of float32 (well below the float32
        rounding of the chances themselves). Chances of exactly 0 or 1 are
        moved to -1 and 2, out of reach of any rounding, so such draws stay exact.
        Variables whose chance does not depend on the parent (``d = 0``, roots
        among them) are drawn together before the loop.
        """
        chance = self.conditionals[:, :, 1]
        threshold = chance.astype(np.float32)
        threshold[chance <= 0.0] = -1.0
        threshold[chance >= 1.0] = 2.0
        base = threshold[:, 0]
        slope = threshold[:, 1] - base
        slope[self.parents < 0] = 0.0
        scaled = slope != 0.0
        np.subtract(uniforms, base[:, None], out=uniforms)
        with np.errstate(over="ignore"):  # a tiny slope may scale to ±inf, which still compares right
            np.divide(uniforms, np.where(scaled, slope, 1.0).astype(np.float32)[:, None], out=uniforms)
        as_bool = drawn.view(np.bool_)
        flat = np.flatnonzero(~scaled)
        as_bool[flat] = uniforms[flat] < 0.0
        steps = self.order[scaled[self.order]]
        compares = [np.less if rising else np.greater for rising in (slope[steps] > 0.0).tolist()]
        scaled_rows, parent_rows, out_rows = list(uniforms), list(drawn), list(as_bool)  # row views, made once
        for i, parent, compare in zip(steps.tolist(), self.parents[steps].tolist(), compares, strict=True):
            compare(scaled_rows[i], parent_rows[parent], out_rows[i])

    def log_prob(self, X) -> np.ndarray:
        self._require_fitted()
        X = checked_samples(X, f"{type(self).__name__}.log_prob", self.cardinality).astype(np.intp)
        with np.errstate(divide="ignore"):
            log_cond = np.log(self.conditionals)
        columns = np.arange(self.n)[None, :]
        return log_cond[columns, X[:, self._parent_index()], X].sum(axis=1)

    def marginals(self) -> np.ndarray:
        """Each variable's marginal distribution under the model, shape ``(n, kmax)``."""
        self._require_fitted()
        n, kmax, _ = self.conditionals.shape
        marg = np.zeros((n, kmax))
        for i in self.order:
            if self.parents[i] < 0:
                marg[i] = self.conditionals[i, 0]
            else:
                marg[i] = marg[self.parents[i]] @ self.conditionals[i]
        return marg

    def entropy(self) -> float:
        """Exact entropy: Σ over roots H(X_r) + Σ over the others H(X_i | X_parent(i)), in nats."""
        self._require_fitted()
        if self._cached_entropy is None:
            marg = self.marginals()
            row_entropy = table_entropy(self.conditionals)  # (n, kmax): H(X_i | parent = a)
            weights = marg[self._parent_index()]
            roots = self.parents < 0
            per_variable = np.where(roots, row_entropy[:, 0], (weights * row_entropy).sum(axis=1))
            self._cached_entropy = float(per_variable.sum())
        return self._cached_entropy

    def kl_to_sample(self) -> float:
        """KL divergence (nats) from the fitted sample's empirical distribution P̂ to the tree.

        By the identity of Chow and Liu (1968),
        KL(P̂ ‖ T) = −H(P̂) + Σᵢ H(Xᵢ) − Σ_edges I(Xᵢ; X_parent(i)),
        with every term taken from the empirical distribution. The identity
        concerns the tree with the sample's own conditional tables (no
        pseudo-counts); with ``prior = 0`` that is exactly this model.
        """
        self._require_fitted()
        if self._fit_sample is None:
            raise RuntimeError("kl_to_sample needs the sample of the last fit; a restored model has none")
        X, w = self._fit_sample
        weights = np.ones(X.shape[0]) if w is None else w
        total = weights.sum()
        _, inverse = np.unique(X, axis=0, return_inverse=True)
        joint = np.bincount(inverse.reshape(-1), weights=weights) / total
        joint = joint[joint > 0]
        joint_entropy = float(-(joint * np.log(joint)).sum())
        counts = self._edge_counts(X, w, self.parents) / total
        marginal = counts.sum(axis=1)  # (n, kmax) each variable's empirical marginal
        parent_marg = counts.sum(axis=2)  # (n, kmax) the parent's empirical marginal
        with np.errstate(divide="ignore", invalid="ignore"):
            ratio = counts / (parent_marg[:, :, None] * marginal[:, None, :])
            edge_terms = np.where(counts > 0, counts * np.log(np.where(counts > 0, ratio, 1.0)), 0.0)
        information = edge_terms.sum(axis=(1, 2))
        information[self.parents < 0] = 0.0
        return float(-joint_entropy + table_entropy(marginal).sum() - information.sum())

    # -- structure --------------------------------------------------------------------------
    def edges(self) -> np.ndarray:
        """Tree edges as an ``(edges, 2)`` array of ``(parent, child)``."""
        self._require_fitted()
        child = np.flatnonzero(self.parents >= 0)
        return np.stack([self.parents[child], child], axis=1)

    def to_networkx(self, variable_names: Optional[Sequence[str]] = None):
        """The tree as an undirected ``networkx.Graph``.

        Nodes are variable indices with attributes ``name`` and ``parent``;
        each edge has ``weight`` = mutual information in nats.

        Parameters
        ----------
        variable_names : sequence of str or None
            One name per variable for the ``name`` attribute; ``x0 … x{n-1}`` when ``None``.

        Returns
        -------
        networkx.Graph
            One node per variable, one edge per tree edge.
        """
        import networkx as nx

        self._require_fitted()
        names = list(variable_names) if variable_names is not None else [f"x{i}" for i in range(self.n)]
        graph = nx.Graph()
        for i in range(self.n):
            graph.add_node(i, name=names[i], parent=int(self.parents[i]))
        for parent, child in self.edges():
            graph.add_edge(int(parent), int(child), weight=float(self.edge_information[child]))
        return graph

    # -- persistence ------------------------------------------------------------------------
    def get_state(self) -> dict:
        self._require_fitted()
        return {
            "kind": self.kind,
            "prior": self.prior,
            "cardinality": self.cardinality.copy(),
            "parents": self.parents.copy(),
            "order": self.order.copy(),
            "conditionals": self.conditionals.copy(),
            "edge_information": self.edge_information.copy(),
        }

    def set_state(self, state: dict) -> "DependencyTree":
        self.prior = float(state["prior"])
        self.cardinality = np.asarray(state["cardinality"], dtype=np.int64)
        self.parents = np.asarray(state["parents"], dtype=np.int64)
        self.order = np.asarray(state["order"], dtype=np.int64)
        self.conditionals = np.asarray(state["conditionals"], dtype=np.float64)
        self.edge_information = np.asarray(state["edge_information"], dtype=np.float64)
        self._fit_sample = None
        self._cached_entropy = None
        return self

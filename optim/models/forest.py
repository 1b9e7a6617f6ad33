"""The dependency tree with its non-significant edges removed."""

from __future__ import annotations

import numpy as np

from optim.models.tree import DependencyTree
from optim.stats import g_test_p_value

__all__ = ["DependencyForest"]


class DependencyForest(DependencyTree):
    """A Chow-Liu tree whose edges must pass a G-test of independence.

    After the maximum-weight spanning tree is found, each edge (i, j) is
    tested: G = 2·N·Î(X_i; X_j), with Î the empirical mutual information in
    nats, against χ² with (k_i − 1)(k_j − 1) degrees of freedom. Edges whose
    p-value is not below ``alpha`` are dropped, so variables that look
    independent are modelled as independent instead of being forced into the
    tree. The result is a forest: each component has its own root.

    Parameters
    ----------
    cardinality, prior, root
        As for :class:`DependencyTree`.
    alpha : float
        Significance level of the edge test, in (0, 1).

    References
    ----------
    C. K. Chow and C. N. Liu, "Approximating discrete probability
    distributions with dependence trees", 1968 (the tree);
    R. R. Sokal and F. J. Rohlf, *Biometry*, 1981 (the G-test).
    """

    kind = "forest"

    def __init__(self, cardinality=None, prior: float = 1.0, root: int = 0, alpha: float = 0.01):
        super().__init__(cardinality, prior, root)
        alpha = float(alpha)
        if not 0.0 < alpha < 1.0:
            raise ValueError(f"The 'alpha' parameter of DependencyForest must be in (0, 1). Got {alpha} instead.")
        self.alpha = alpha
        self.edge_p_values = None

    def _prune(self, parents: np.ndarray, counts: np.ndarray, total: float) -> np.ndarray:
        n = parents.shape[0]
        child = np.flatnonzero(parents >= 0)
        joint = counts[child] / total
        marg_child = joint.sum(axis=1)
        marg_parent = joint.sum(axis=2)
        with np.errstate(divide="ignore", invalid="ignore"):
            ratio = joint / (marg_parent[:, :, None] * marg_child[:, None, :])
            terms = np.where(joint > 0, joint * np.log(np.where(joint > 0, ratio, 1.0)), 0.0)
        information = np.maximum(terms.sum(axis=(1, 2)), 0.0)
        df = (self.cardinality[child] - 1) * (self.cardinality[parents[child]] - 1)
        p_values = np.ones(n)
        p_values[child] = g_test_p_value(information, total, df)
        self.edge_p_values = p_values
        pruned = parents.copy()
        pruned[child[p_values[child] >= self.alpha]] = -1
        return pruned

    def get_state(self) -> dict:
        state = super().get_state()
        state["alpha"] = self.alpha
        state["edge_p_values"] = self.edge_p_values.copy()
        return state

    def set_state(self, state: dict) -> "DependencyForest":
        super().set_state(state)
        self.alpha = float(state["alpha"])
        self.edge_p_values = np.asarray(state["edge_p_values"], dtype=np.float64)
        return self

"""Independent marginals: the univariate marginal distribution model."""

from __future__ import annotations

import numpy as np

from optim.models._tables import draw_from_rows, normalise_rows, table_entropy, valid_mask
from optim.models.base import Model
from optim.samples import checked_samples

__all__ = ["Univariate"]


class Univariate(Model):
    """Product of independent per-variable distributions.

    The model of the univariate marginal distribution algorithm (UMDA):
    each variable's value frequencies among the selected candidates, smoothed
    by ``prior`` pseudo-counts, and no dependencies between variables.

    Parameters
    ----------
    cardinality : int, sequence of int or None
        Values per variable; inferred from the first data set when ``None``.
    prior : float
        Dirichlet pseudo-count (>= 0) added to every cell of every probability table.

    References
    ----------
    H. Mühlenbein and G. Paaß, "From recombination of genes to the estimation
    of distributions I. Binary parameters", PPSN IV, 1996.
    """

    def __init__(self, cardinality=None, prior: float = 1.0):
        super().__init__(cardinality, prior)
        self.probabilities = None  # (n, kmax), zero beyond each variable's cardinality

    @property
    def fitted(self) -> bool:
        return self.probabilities is not None

    def fit(self, X, weights=None) -> "Univariate":
        X, w = self._prepare(X, weights)
        n = X.shape[1]
        kmax = int(self.cardinality.max())
        codes = X.astype(np.int64) + (np.arange(n, dtype=np.int64) * kmax)[None, :]
        counts = np.bincount(
            codes.ravel(),
            weights=None if w is None else np.repeat(w, n),
            minlength=n * kmax,
        ).reshape(n, kmax)
        mask = valid_mask(self.cardinality, kmax)
        self.probabilities = normalise_rows(np.where(mask, counts + self.prior, 0.0))
        return self

    def sample(self, count: int, rng: np.random.Generator) -> np.ndarray:
        self._require_fitted()
        count = int(count)
        n = self.n
        if self.probabilities.shape[1] == 2:
            return (rng.random((count, n)) < self.probabilities[None, :, 1]).astype(np.uint8)
        u = rng.random((count, n))
        flat = np.broadcast_to(self.probabilities, (count,) + self.probabilities.shape)
        sizes = np.broadcast_to(self.cardinality, (count, n)).ravel()
        out = draw_from_rows(flat.reshape(count * n, -1), u.ravel(), sizes)
        return out.reshape(count, n)

    def log_prob(self, X) -> np.ndarray:
        self._require_fitted()
        X = checked_samples(X, "Univariate.log_prob", self.cardinality).astype(np.intp)
        with np.errstate(divide="ignore"):
            logp = np.log(self.probabilities)
        return logp[np.arange(self.n)[None, :], X].sum(axis=1)

    def entropy(self) -> float:
        self._require_fitted()
        return float(table_entropy(self.probabilities).sum())

    def marginal_entropies(self) -> np.ndarray:
        """Entropy of each variable in nats."""
        self._require_fitted()
        return table_entropy(self.probabilities)

    def get_state(self) -> dict:
        self._require_fitted()
        return {
            "kind": "univariate",
            "prior": self.prior,
            "cardinality": self.cardinality.copy(),
            "probabilities": self.probabilities.copy(),
        }

    def set_state(self, state: dict) -> "Univariate":
        self.prior = float(state["prior"])
        self.cardinality = np.asarray(state["cardinality"], dtype=np.int64)
        self.probabilities = np.asarray(state["probabilities"], dtype=np.float64)
        return self

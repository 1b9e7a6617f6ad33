"""The interface shared by every probability model over discrete vectors."""

from __future__ import annotations

import abc
import numbers
from typing import Optional

import numpy as np

from optim.problem import as_cardinality
from optim.samples import checked_samples, checked_weights, inferred_cardinality

__all__ = ["Model"]


class Model(abc.ABC):
    """A probability distribution over vectors of discrete values.

    Parameters
    ----------
    cardinality : int, sequence of int or None
        Values per variable; inferred from the first data set when ``None``.
    prior : float
        Dirichlet pseudo-count added to every cell of every probability table,
        which keeps probabilities away from 0 and 1.
    """

    def __init__(self, cardinality=None, prior: float = 1.0):
        if not isinstance(prior, numbers.Real) or not np.isfinite(prior) or prior < 0:
            raise ValueError(
                f"The 'prior' parameter of {type(self).__name__} must be a non-negative number. Got {prior!r} instead."
            )
        self.prior = float(prior)
        self._given_cardinality = cardinality
        self.cardinality: Optional[np.ndarray] = None
        if cardinality is not None and np.ndim(cardinality) > 0:
            self.cardinality = as_cardinality(cardinality, len(cardinality))
        elif cardinality is not None:
            self._given_cardinality = int(cardinality)

    # -- helpers for subclasses -------------------------------------------------------------
    def _prepare(self, X, weights):
        """Validate data, settle the cardinality and return ``(X, weights)``."""
        owner = f"{type(self).__name__}.fit"
        X = checked_samples(X, owner)
        if self.cardinality is None:
            if self._given_cardinality is None:
                self.cardinality = inferred_cardinality(X)
            else:
                self.cardinality = as_cardinality(self._given_cardinality, X.shape[1])
        X = checked_samples(X, owner, self.cardinality)
        return X, checked_weights(weights, X.shape[0], owner, need_mass=self.prior == 0)

    def _require_fitted(self):
        if not self.fitted:
            raise RuntimeError(f"{type(self).__name__} must be fitted before it is used")

    @property
    def n(self) -> int:
        """Number of variables (known after the first fit)."""
        self._require_fitted()
        return int(self.cardinality.shape[0])

    # -- the interface ----------------------------------------------------------------------
    @property
    @abc.abstractmethod
    def fitted(self) -> bool:
        """``True`` once :meth:`fit` has been called."""

    @abc.abstractmethod
    def fit(self, X, weights=None) -> "Model":
        """Estimate the model from samples ``X`` (rows) with optional sample weights.

        Parameters
        ----------
        X : array_like of int, shape (count, n)
            The samples, values ``0 … cardinality - 1``.
        weights : array_like of float, shape (count,), or None
            Non-negative weight of each sample; all equal when ``None``.

        Returns
        -------
        Model
            The model itself, fitted.
        """

    @abc.abstractmethod
    def sample(self, count: int, rng: np.random.Generator) -> np.ndarray:
        """Draw ``count`` independent vectors as a ``uint8`` array of shape ``(count, n)``.

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

    @abc.abstractmethod
    def log_prob(self, X) -> np.ndarray:
        """Natural log-probability of each row of ``X``.

        Parameters
        ----------
        X : array_like of int, shape (count, n)
            The vectors to score.

        Returns
        -------
        numpy.ndarray
            ``float64`` of shape ``(count,)``; ``-inf`` for a vector the model cannot produce.
        """

    @abc.abstractmethod
    def entropy(self) -> float:
        """Exact entropy of the model distribution in nats.

        Returns
        -------
        float
            The entropy, >= 0.
        """

    @abc.abstractmethod
    def get_state(self) -> dict:
        """The fitted parameters as a dict of numpy arrays and plain numbers.

        Returns
        -------
        dict
            What :meth:`set_state` restores.
        """

    @abc.abstractmethod
    def set_state(self, state: dict) -> "Model":
        """Restore parameters produced by :meth:`get_state`.

        Parameters
        ----------
        state : dict
            What :meth:`get_state` returned.

        Returns
        -------
        Model
            The model itself, fitted.
        """

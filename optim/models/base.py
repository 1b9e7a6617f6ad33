"""The interface shared by every probability model over discrete vectors."""

from __future__ import annotations

import abc
import numbers
from typing import Optional

import numpy as np

from optim.problem import as_cardinality

__all__ = ["Model", "validate_samples", "validate_weights"]


def validate_samples(X, cardinality: Optional[np.ndarray], owner: str) -> np.ndarray:
    """Check that ``X`` is a non-empty 2-D array of values within ``cardinality``."""
    X = np.asarray(X)
    if X.ndim != 2:
        raise ValueError(f"The samples given to {owner} must be a 2-D array (count, n). Got shape {X.shape} instead.")
    if X.shape[0] == 0:
        raise ValueError(f"The samples given to {owner} must contain at least one row.")
    if not np.issubdtype(X.dtype, np.integer):
        if np.issubdtype(X.dtype, np.bool_):
            X = X.astype(np.uint8)
        elif np.all(np.isfinite(X)) and np.all(X == np.round(X)):
            X = X.astype(np.int64)
        else:
            raise ValueError(f"The samples given to {owner} must hold whole numbers.")
    if X.shape[1] == 0:
        raise ValueError(f"The samples given to {owner} must have at least one column.")
    if X.min() < 0:
        raise ValueError(f"The samples given to {owner} must be non-negative.")
    if X.max() > 255:
        raise ValueError(f"The samples given to {owner} must hold values below 256. Got {int(X.max())}.")
    if cardinality is not None:
        if X.shape[1] != cardinality.shape[0]:
            raise ValueError(
                f"The samples given to {owner} must have {cardinality.shape[0]} columns. Got {X.shape[1]} instead."
            )
        too_big = X.max(axis=0) >= cardinality
        if np.any(too_big):
            col = int(np.flatnonzero(too_big)[0])
            raise ValueError(
                f"Column {col} of the samples given to {owner} holds the value {int(X[:, col].max())}, "
                f"outside 0..{int(cardinality[col]) - 1}."
            )
    return X.astype(np.uint8, copy=False)


def validate_weights(weights, count: int, owner: str) -> Optional[np.ndarray]:
    """Check optional sample weights: ``count`` non-negative finite numbers, not all zero."""
    if weights is None:
        return None
    w = np.asarray(weights, dtype=np.float64).reshape(-1)
    if w.shape[0] != count:
        raise ValueError(
            f"The 'weights' parameter of {owner} must have one entry per sample ({count}). Got {w.shape[0]} instead."
        )
    if not np.all(np.isfinite(w)) or np.any(w < 0) or w.sum() <= 0:
        raise ValueError(f"The 'weights' parameter of {owner} must hold finite non-negative numbers, not all zero.")
    return w


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
        X = validate_samples(X, None, owner)
        if self.cardinality is None:
            if self._given_cardinality is None:
                self.cardinality = np.maximum(X.max(axis=0).astype(np.int64) + 1, 2)
            else:
                self.cardinality = as_cardinality(self._given_cardinality, X.shape[1])
        X = validate_samples(X, self.cardinality, owner)
        return X, validate_weights(weights, X.shape[0], owner)

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

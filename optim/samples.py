"""Checks of sample arrays and their weights, shared by the information functions and the models.

One set of rules and one message format (``The 'X' parameter of <caller> must … Got … instead.``) for
every function that takes a population of discrete vectors: a 2-D array with at least one row and one
column, holding whole numbers from 0 to 255 (booleans and whole-valued floats are accepted), within
each variable's cardinality when one is known.
"""

from __future__ import annotations

from typing import Optional

import numpy as np

__all__ = ["MAX_CARDINALITY", "shown", "checked_samples", "inferred_cardinality", "checked_weights"]

#: Values per variable at most (samples are stored as ``uint8``).
MAX_CARDINALITY = 256


def shown(value) -> str:
    """A value as a message shows it (strings quoted)."""
    return repr(value) if isinstance(value, str) else str(value)


def checked_samples(X, caller: str, cardinality: Optional[np.ndarray] = None) -> np.ndarray:
    """``X`` as a ``uint8`` array of shape ``(samples, variables)``, or a ``ValueError`` saying what is wrong.

    Parameters
    ----------
    X : array_like
        The samples, one row each.
    caller : str
        The function named in messages.
    cardinality : numpy.ndarray or None
        Values per variable, when known: the number of columns and every value are checked against it.

    Returns
    -------
    numpy.ndarray
        ``X`` as ``uint8`` (no copy when it already is).
    """
    arr = np.asarray(X)
    if arr.ndim != 2:
        raise ValueError(
            f"The 'X' parameter of {caller} must be a 2-D array of shape (samples, variables). "
            f"Got an array of shape {arr.shape} instead."
        )
    if arr.shape[0] == 0:
        raise ValueError(
            f"The 'X' parameter of {caller} must contain at least one sample (row). Got shape {arr.shape} instead."
        )
    if arr.shape[1] == 0:
        raise ValueError(
            f"The 'X' parameter of {caller} must contain at least one variable (column). Got shape {arr.shape} instead."
        )
    if arr.dtype == np.bool_:
        return arr.view(np.uint8)
    if not np.issubdtype(arr.dtype, np.integer):
        whole = np.issubdtype(arr.dtype, np.floating) and np.all(np.isfinite(arr)) and np.all(arr == np.round(arr))
        if not whole:
            raise ValueError(
                f"The 'X' parameter of {caller} must hold whole numbers (for example dtype uint8). "
                f"Got dtype {arr.dtype} with other values instead."
            )
    if arr.min() < 0:
        row, col = np.argwhere(arr < 0)[0]
        raise ValueError(
            f"The 'X' parameter of {caller} must hold non-negative values 0..cardinality-1. "
            f"Got {shown(arr[row, col].item())} at row {row}, column {col} instead."
        )
    if arr.max() >= MAX_CARDINALITY:
        col = int(np.argmax(arr.max(axis=0)))
        raise ValueError(
            f"The 'X' parameter of {caller} must hold values below {MAX_CARDINALITY}. "
            f"Got {shown(arr[:, col].max().item())} in column {col} instead."
        )
    if cardinality is not None:
        if arr.shape[1] != cardinality.shape[0]:
            raise ValueError(
                f"The 'X' parameter of {caller} must have {cardinality.shape[0]} columns, one per variable. "
                f"Got {arr.shape[1]} instead."
            )
        over = np.flatnonzero(arr.max(axis=0) >= cardinality)
        if over.size:
            col = int(over[0])
            raise ValueError(
                f"The 'X' parameter of {caller} must hold values 0..{int(cardinality[col]) - 1} in column {col} "
                f"(its cardinality is {int(cardinality[col])}). Got {shown(arr[:, col].max().item())} instead."
            )
    return arr.astype(np.uint8, copy=False)


def inferred_cardinality(X: np.ndarray) -> np.ndarray:
    """Values per variable read off checked samples: the largest value seen plus one, at least 2."""
    return np.maximum(X.max(axis=0).astype(np.int64) + 1, 2)


def checked_weights(weights, count: int, caller: str, need_mass: bool) -> Optional[np.ndarray]:
    """Optional sample weights: ``count`` finite non-negative numbers, or ``None``.

    Parameters
    ----------
    weights : array_like or None
        One weight per sample.
    count : int
        The number of samples.
    caller : str
        The function named in messages.
    need_mass : bool
        Refuse weights that are all zero (no distribution is defined from them without a prior).

    Returns
    -------
    numpy.ndarray or None
        The weights as ``float64``.
    """
    if weights is None:
        return None
    try:
        w = np.asarray(weights, dtype=np.float64)
    except (TypeError, ValueError):
        raise ValueError(
            f"The 'weights' parameter of {caller} must be an array of {count} non-negative numbers. "
            f"Got {shown(weights)} instead."
        ) from None
    if w.shape != (count,):
        raise ValueError(
            f"The 'weights' parameter of {caller} must have shape ({count},), one entry per sample ({count}). "
            f"Got shape {w.shape} instead."
        )
    if not np.all(np.isfinite(w)) or np.any(w < 0):
        bad = w[~(np.isfinite(w) & (w >= 0))][0]
        raise ValueError(
            f"The 'weights' parameter of {caller} must hold finite non-negative numbers. Got {bad} instead."
        )
    if need_mass and not np.any(w > 0):
        raise ValueError(
            f"The 'weights' parameter of {caller} must have a positive sum when 'prior' is 0, otherwise no "
            f"distribution is defined. Got weights that are all zero instead."
        )
    return w

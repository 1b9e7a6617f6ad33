"""Small vectorised helpers for probability tables (private)."""

from __future__ import annotations

import numpy as np

__all__ = ["draw_from_rows", "normalise_rows", "table_entropy", "valid_mask"]


def valid_mask(rows: np.ndarray, kmax: int) -> np.ndarray:
    """Boolean mask ``(len(rows), kmax)``: value ``v`` is valid for a variable with ``rows[i]`` values."""
    return np.arange(kmax)[None, :] < np.asarray(rows)[:, None]


def normalise_rows(counts: np.ndarray) -> np.ndarray:
    """Divide each row of the last axis by its sum (rows summing to 0 become uniform over nothing: 0)."""
    total = counts.sum(axis=-1, keepdims=True)
    with np.errstate(invalid="ignore", divide="ignore"):
        out = np.where(total > 0, counts / np.where(total > 0, total, 1.0), 0.0)
    return out


def table_entropy(probs: np.ndarray) -> np.ndarray:
    """Entropy in nats along the last axis, with 0 log 0 = 0."""
    with np.errstate(divide="ignore", invalid="ignore"):
        terms = np.where(probs > 0, -probs * np.log(np.where(probs > 0, probs, 1.0)), 0.0)
    return terms.sum(axis=-1)


def draw_from_rows(probs: np.ndarray, uniforms: np.ndarray, sizes) -> np.ndarray:
    """Inverse-CDF draw, one value per row of ``probs`` (shape ``(count, kmax)``).

    ``uniforms`` holds one U(0, 1) number per row; ``sizes`` the number of valid
    values of each row (a scalar or shape ``(count,)``), so rounding in the
    cumulative sum can never yield an invalid value.
    """
    cumulative = np.cumsum(probs, axis=-1)
    values = (uniforms[:, None] >= cumulative[:, :-1]).sum(axis=-1)
    return np.minimum(values, np.asarray(sizes) - 1).astype(np.uint8)

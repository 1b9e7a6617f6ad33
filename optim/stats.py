"""Small statistical helpers the core needs without depending on scipy."""

from __future__ import annotations

import math

import numpy as np

__all__ = ["chi2_sf", "g_test_p_value"]


def chi2_sf(x, df) -> np.ndarray:
    """Survival function P(χ²_df > x) for whole-number degrees of freedom.

    Uses the closed forms for one and two degrees of freedom and the
    recurrence Q(d + 2, x) = Q(d, x) + (x/2)^(d/2) e^(-x/2) / Γ(d/2 + 1),
    with the added terms computed in log space (Abramowitz & Stegun,
    *Handbook of Mathematical Functions*, 1964, 26.4.4 and 26.4.5).

    Parameters
    ----------
    x : array_like
        Non-negative statistics.
    df : array_like of int
        Degrees of freedom (>= 1), broadcast against ``x``.
    """
    x, df = np.broadcast_arrays(np.asarray(x, dtype=np.float64), np.asarray(df, dtype=np.int64))
    if np.any(df < 1):
        raise ValueError("degrees of freedom must be at least 1")
    x = np.maximum(x, 0.0)
    half = np.where(np.isposinf(x), 0.0, x / 2.0)
    odd = (df % 2) == 1
    erfc = np.vectorize(math.erfc, otypes=[np.float64])
    q = np.where(odd, erfc(np.sqrt(half)), np.exp(-half))
    d = np.where(odd, 1, 2)
    with np.errstate(divide="ignore"):
        log_half = np.log(half)
    lgamma = np.vectorize(math.lgamma, otypes=[np.float64])
    for _ in range(int((df.max() - 1) // 2) if df.size else 0):
        active = d < df
        if not np.any(active):
            break
        term = np.where(
            half > 0,
            np.exp((d / 2.0) * np.where(half > 0, log_half, 0.0) - half - lgamma(d / 2.0 + 1.0)),
            0.0,
        )
        q = np.where(active, q + term, q)
        d = np.where(active, d + 2, d)
    return np.where(np.isposinf(x), 0.0, np.clip(q, 0.0, 1.0))


def g_test_p_value(mutual_information_nats, total, df) -> np.ndarray:
    """P-value of the G-test of independence, G = 2·N·I (I in nats), against χ²_df.

    Parameters
    ----------
    mutual_information_nats : array_like
        The empirical mutual information of each tested pair; a negative value (a rounding
        error) counts as 0.
    total : array_like
        N, the sample size: one for all tests or one per test.
    df : array_like of int
        Degrees of freedom, ``(k_i − 1)(k_j − 1)``; all three arguments are broadcast together.

    References
    ----------
    R. R. Sokal and F. J. Rohlf, *Biometry*, 1981 (the G-test of independence).
    """
    information = np.maximum(np.asarray(mutual_information_nats, dtype=np.float64), 0.0)
    g = 2.0 * np.asarray(total, dtype=np.float64) * information
    return chi2_sf(g, df)

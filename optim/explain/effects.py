"""The statistics of ``optim explain``, on arrays only (no files).

*Best candidates* are the top :data:`BEST_FRACTION` of all successfully
evaluated candidates by score, at least :data:`BEST_MINIMUM` of them. For each
variable the *favoured value* is the value most common among them; its
frequency gets a Wilson score interval (Wilson, 1927).

*Main effect* of a variable: mean score of the candidates holding its
favoured value minus the mean score of the others. *Interaction contrast* of
a pair: ``mean(11) − mean(10) − mean(01) + mean(00)`` over the four settings
of the two variables, the 2×2 interaction of factorial designs (Box, Hunter &
Hunter, *Statistics for Experimenters*, 2005). Both are compared *within each
stratum* (in explain, each generation: candidates drawn from the same model)
and the per-stratum differences pooled with weights ``1 / Σ 1/count``. The
standard errors come from the cell variances and counts. Beside it, the
*adjusted effect* holds the other settings fixed: one least-squares fit of the
score on all settings, with an intercept per stratum. An effect or a pair is
called clear only beyond a Bonferroni threshold (:func:`family_threshold`)
for the number of settings or pairs looked at.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from statistics import NormalDist
from typing import NamedTuple, Optional, Tuple

import numpy as np

__all__ = [
    "BEST_FRACTION",
    "BEST_MINIMUM",
    "CONFIDENCE",
    "CONFIDENCE_Z",
    "wilson_interval",
    "best_candidates",
    "favoured_values",
    "MainEffects",
    "main_effects",
    "adjusted_effects",
    "Contrasts",
    "interaction_contrasts",
    "PairShape",
    "family_threshold",
    "classify_pair",
]

#: Fraction of the evaluated candidates (by score) that counts as "the best candidates".
BEST_FRACTION = 0.10
#: The best candidates are at least this many (or every candidate, if there are fewer).
BEST_MINIMUM = 20
#: Coverage of the intervals, and the family-wise level (1 − CONFIDENCE) of the clearness thresholds.
CONFIDENCE = 0.95
#: The two-sided normal quantile of :data:`CONFIDENCE` (1.96).
CONFIDENCE_Z = NormalDist().inv_cdf(0.5 + CONFIDENCE / 2)


def wilson_interval(successes, trials, confidence: float = CONFIDENCE) -> Tuple[np.ndarray, np.ndarray]:
    """Wilson score interval for a binomial proportion ``successes / trials``.

    Parameters
    ----------
    successes, trials : array_like
        Counts, broadcast together; ``0 <= successes <= trials`` and ``trials >= 1``.
    confidence : float
        Coverage of the two-sided interval, in (0, 1).

    Returns
    -------
    (lower, upper) : tuple of ndarray

    References
    ----------
    E. B. Wilson, "Probable inference, the law of succession, and statistical
    inference", Journal of the American Statistical Association 22, 1927.
    """
    k, n = np.broadcast_arrays(np.asarray(successes, dtype=np.float64), np.asarray(trials, dtype=np.float64))
    if not 0.0 < confidence < 1.0:
        raise ValueError(f"confidence must be in (0, 1); got {confidence!r}")
    if np.any(n < 1) or np.any(k < 0) or np.any(k > n):
        raise ValueError("wilson_interval needs 0 <= successes <= trials and trials >= 1")
    z = NormalDist().inv_cdf(0.5 + confidence / 2)
    z2 = z * z
    p = k / n
    denominator = 1.0 + z2 / n
    centre = (p + z2 / (2 * n)) / denominator
    half = z * np.sqrt(p * (1 - p) / n + z2 / (4 * n * n)) / denominator
    lower = np.where(k == 0, 0.0, np.clip(centre - half, 0.0, 1.0))
    upper = np.where(k == n, 1.0, np.clip(centre + half, 0.0, 1.0))
    return lower, upper


def best_candidates(
    scores: np.ndarray, goal: str, fraction: float = BEST_FRACTION, minimum: int = BEST_MINIMUM
) -> np.ndarray:
    """Indices of the best ``max(minimum, ceil(fraction · count))`` scores (all if fewer), best first.

    Ties keep evaluation order (a stable sort). ``scores`` must be finite.
    """
    scores = np.asarray(scores, dtype=np.float64)
    if goal not in ("maximize", "minimize"):
        raise ValueError(f"goal must be 'maximize' or 'minimize'; got {goal!r}")
    count = scores.shape[0]
    keep = min(count, max(int(minimum), int(math.ceil(fraction * count - 1e-9))))
    key = -scores if goal == "maximize" else scores
    return np.argsort(key, kind="stable")[:keep]


def favoured_values(X: np.ndarray, cardinality: np.ndarray) -> Tuple[np.ndarray, np.ndarray]:
    """Each column's most frequent value (the smallest one on a tie) and how many rows hold it."""
    X = np.asarray(X)
    kmax = int(np.max(cardinality))
    n = X.shape[1]
    codes = np.arange(n, dtype=np.int64)[None, :] * kmax + X.astype(np.int64)
    counts = np.bincount(codes.ravel(), minlength=n * kmax).reshape(n, kmax)
    favoured = np.argmax(counts, axis=1)
    return favoured.astype(np.int64), counts[np.arange(n), favoured]


def _stratum_slices(strata: Optional[np.ndarray], count: int):
    """Row indices of each stratum (all rows as one stratum when ``strata`` is None)."""
    if strata is None:
        yield np.arange(count)
        return
    order = np.argsort(np.asarray(strata), kind="stable")
    sorted_strata = np.asarray(strata)[order]
    cuts = np.flatnonzero(np.diff(sorted_strata)) + 1
    yield from np.split(order, cuts)


def _cell_statistics(count, total, squares):
    """Means and sample variances of cells given their counts, sums and sums of squares."""
    with np.errstate(divide="ignore", invalid="ignore"):
        mean = total / count
        variance = np.maximum(squares - total * mean, 0.0) / (count - 1)
    return mean, variance


@dataclass
class MainEffects:
    """Pooled within-stratum differences ``mean(with) − mean(without)``, one per variable.

    ``nan`` where no stratum had at least two candidates on each side. The
    counts are the candidates of the strata that contributed.
    """

    effect: np.ndarray
    se: np.ndarray
    with_count: np.ndarray
    without_count: np.ndarray


def main_effects(indicator: np.ndarray, scores: np.ndarray, strata: Optional[np.ndarray] = None) -> MainEffects:
    """Main effect of each column of a boolean ``indicator`` matrix on ``scores``.

    Within each stratum (e.g. generation) the difference of mean scores
    between rows with and without the indicator is taken, with variance
    ``v₁/n₁ + v₀/n₀``; the differences are pooled with weights ``1/(1/n₁ + 1/n₀)``.
    A stratum contributes to a column only if both sides have two rows or more.
    """
    indicator = np.asarray(indicator, dtype=bool)
    scores = np.asarray(scores, dtype=np.float64)
    n = indicator.shape[1]
    weight, estimate, variance = np.zeros(n), np.zeros(n), np.zeros(n)
    with_count, without_count = np.zeros(n), np.zeros(n)
    for rows in _stratum_slices(strata, scores.shape[0]):
        F = indicator[rows].astype(np.float64)
        s = scores[rows] - scores[rows].mean()  # centred: sums of squares stay accurate
        s2 = s * s
        c1 = F.sum(axis=0)
        c0 = rows.shape[0] - c1
        S1, Q1 = s @ F, s2 @ F
        m1, v1 = _cell_statistics(c1, S1, Q1)
        m0, v0 = _cell_statistics(c0, s.sum() - S1, s2.sum() - Q1)
        ok = (c1 >= 2) & (c0 >= 2)
        with np.errstate(divide="ignore", invalid="ignore"):
            w = np.where(ok, 1.0 / (1.0 / c1 + 1.0 / c0), 0.0)
            estimate += np.where(ok, w * (m1 - m0), 0.0)
            variance += np.where(ok, w * w * (v1 / c1 + v0 / c0), 0.0)
        weight += w
        with_count += np.where(ok, c1, 0.0)
        without_count += np.where(ok, c0, 0.0)
    with np.errstate(divide="ignore", invalid="ignore"):
        effect = np.where(weight > 0, estimate / weight, np.nan)
        se = np.where(weight > 0, np.sqrt(variance) / weight, np.nan)
    return MainEffects(effect, se, with_count.astype(np.int64), without_count.astype(np.int64))


def adjusted_effects(
    indicator: np.ndarray, scores: np.ndarray, strata: Optional[np.ndarray] = None
) -> Tuple[np.ndarray, np.ndarray]:
    """Effect of each indicator column *holding the other columns fixed*, with standard errors.

    The least-squares coefficients of the scores on all indicator columns at
    once, with a separate intercept per stratum (every stratum centred on its
    own means; by the Frisch-Waugh-Lovell theorem this equals the regression
    with one dummy variable per stratum). The normal equations are accumulated
    with one matrix product per stratum. Columns that never vary within a
    stratum, or that are exact combinations of others, get ``nan``.

    References
    ----------
    R. Frisch and F. V. Waugh, "Partial time regressions as compared with
    individual trends", Econometrica 1(4), 1933; M. C. Lovell, "Seasonal
    adjustment of economic time series and multiple regression analysis",
    JASA 58, 1963.
    """
    indicator = np.asarray(indicator, dtype=bool)
    scores = np.asarray(scores, dtype=np.float64)
    n = indicator.shape[1]
    gram, moment = np.zeros((n, n)), np.zeros(n)
    total, residual_df = 0.0, 0
    for rows in _stratum_slices(strata, scores.shape[0]):
        F = indicator[rows].astype(np.float64)
        F -= F.mean(axis=0)
        y = scores[rows] - scores[rows].mean()
        gram += F.T @ F
        moment += F.T @ y
        total += float(y @ y)
        residual_df += rows.shape[0] - 1
    effect, se = np.full(n, np.nan), np.full(n, np.nan)
    varying = np.flatnonzero(np.diag(gram) > 1e-9 * max(1.0, float(np.max(np.diag(gram), initial=0.0))))
    if not varying.size:
        return effect, se
    sub = gram[np.ix_(varying, varying)]
    values, vectors = np.linalg.eigh(sub)
    keep = values > 1e-9 * values.max()
    inverse = (vectors[:, keep] / values[keep]) @ vectors[:, keep].T
    beta = inverse @ moment[varying]
    rank = int(keep.sum())
    dof = residual_df - rank
    if dof < 1:
        return effect, se
    sigma2 = max(total - float(beta @ moment[varying]), 0.0) / dof
    identified = np.ones(varying.size, dtype=bool)
    if not keep.all():  # coefficients along a null direction are not identified
        null = vectors[:, ~keep]
        identified = np.abs(null).max(axis=1) < 1e-6
    effect[varying] = np.where(identified, beta, np.nan)
    se[varying] = np.where(identified, np.sqrt(np.maximum(np.diag(inverse), 0.0) * sigma2), np.nan)
    return effect, se


@dataclass
class Contrasts:
    """Pooled 2×2 interaction contrasts of every pair of indicator columns.

    All arrays are ``(n, n)``; entry ``[i, j]`` treats column ``i`` as the
    first factor ``a`` and ``j`` as the second ``b``. ``only_a``, ``only_b``
    and ``both`` are the pooled mean differences of the cells (1, 0), (0, 1)
    and (1, 1) from the cell (0, 0), so ``contrast = both − only_a − only_b``.
    ``cell_counts`` has shape ``(4, n, n)`` for the cells 00, 01, 10, 11 (the
    candidates of the strata that contributed). ``nan`` where no stratum had
    two candidates or more in every cell, and on the diagonal.
    """

    contrast: np.ndarray
    se: np.ndarray
    only_a: np.ndarray
    only_b: np.ndarray
    both: np.ndarray
    se_only_a: np.ndarray
    se_only_b: np.ndarray
    se_both: np.ndarray
    cell_counts: np.ndarray

    @property
    def min_cell(self) -> np.ndarray:
        return self.cell_counts.min(axis=0)


def interaction_contrasts(indicator: np.ndarray, scores: np.ndarray, strata: Optional[np.ndarray] = None) -> Contrasts:
    """2×2 interaction contrasts ``mean(11) − mean(10) − mean(01) + mean(00)`` for all pairs at once.

    The counting trick: with ``A`` the indicator matrix as floats and ``s``
    the scores, ``A.T @ A`` counts the (1, 1) cell of every pair,
    ``A.T @ (A * s)`` sums its scores and ``A.T @ (A * s²)`` its squares; the
    other three cells follow from the column totals. Within each stratum the
    contrast has variance ``Σ v_cell / n_cell``; strata are pooled with weights
    ``1 / Σ 1/n_cell`` (only strata with two or more rows in every cell).

    References
    ----------
    G. E. P. Box, J. S. Hunter and W. G. Hunter, *Statistics for
    Experimenters*, 2nd ed., 2005 (the 2×2 interaction contrast).
    """
    indicator = np.asarray(indicator, dtype=bool)
    scores = np.asarray(scores, dtype=np.float64)
    n = indicator.shape[1]
    zeros = lambda: np.zeros((n, n))  # noqa: E731
    weight, contrast, variance = zeros(), zeros(), zeros()
    sums = {"10": zeros(), "01": zeros(), "11": zeros()}
    variances = {"10": zeros(), "01": zeros(), "11": zeros()}
    counts = np.zeros((4, n, n))
    for rows in _stratum_slices(strata, scores.shape[0]):
        A = indicator[rows].astype(np.float64)
        s = scores[rows] - scores[rows].mean()
        s2 = s * s
        c11, S11, Q11 = A.T @ A, A.T @ (A * s[:, None]), A.T @ (A * s2[:, None])
        c, S, Q = np.diag(c11), np.diag(S11), np.diag(Q11)
        cells = {
            "11": (c11, S11, Q11),
            "10": (c[:, None] - c11, S[:, None] - S11, Q[:, None] - Q11),
            "01": (c[None, :] - c11, S[None, :] - S11, Q[None, :] - Q11),
            "00": (
                rows.shape[0] - c[:, None] - c[None, :] + c11,
                s.sum() - S[:, None] - S[None, :] + S11,
                s2.sum() - Q[:, None] - Q[None, :] + Q11,
            ),
        }
        stats = {key: _cell_statistics(*value) + (value[0],) for key, value in cells.items()}
        ok = np.logical_and.reduce([stats[key][2] >= 2 for key in stats])
        with np.errstate(divide="ignore", invalid="ignore"):
            inverse = {key: 1.0 / stats[key][2] for key in stats}
            w = np.where(ok, 1.0 / sum(inverse.values()), 0.0)
            m00, v00 = stats["00"][0], stats["00"][1]
            for key in ("10", "01", "11"):
                mean, var, _ = stats[key]
                sums[key] += np.where(ok, w * (mean - m00), 0.0)
                variances[key] += np.where(ok, w * w * (var * inverse[key] + v00 * inverse["00"]), 0.0)
            term = stats["11"][0] - stats["10"][0] - stats["01"][0] + m00
            contrast += np.where(ok, w * term, 0.0)
            variance += np.where(ok, w * w * sum(stats[key][1] * inverse[key] for key in stats), 0.0)
        weight += w
        for index, key in enumerate(("00", "01", "10", "11")):
            counts[index] += np.where(ok, stats[key][2], 0.0)
    valid = weight > 0
    np.fill_diagonal(valid, False)
    with np.errstate(divide="ignore", invalid="ignore"):
        pooled = lambda total: np.where(valid, total / weight, np.nan)  # noqa: E731
        spread = lambda total: np.where(valid, np.sqrt(total) / weight, np.nan)  # noqa: E731
        return Contrasts(
            contrast=pooled(contrast),
            se=spread(variance),
            only_a=pooled(sums["10"]),
            only_b=pooled(sums["01"]),
            both=pooled(sums["11"]),
            se_only_a=spread(variances["10"]),
            se_only_b=spread(variances["01"]),
            se_both=spread(variances["11"]),
            cell_counts=np.where(valid[None], counts, 0.0).astype(np.int64),
        )


class PairShape(NamedTuple):
    """How a pair acts, read from its four cells in the goal's direction."""

    kind: str  #: synergy, must-match, conflict, overlap, interact or unclear
    only_together: bool  #: synergy where neither alone helps clearly
    one_or_other: bool  #: conflict where each alone helps clearly and both together is worse than either
    best_cell: str  #: "00", "10", "01" or "11" (first variable's indicator, then the second's)
    helps_alone: Tuple[bool, bool] = (False, False)  #: each setting alone clearly beats neither


def family_threshold(tests: int, level: float = 1 - CONFIDENCE) -> float:
    """The |estimate| / SE a result must exceed to stand out among ``tests`` at family-wise ``level``.

    Bonferroni: the two-sided normal quantile at ``level / tests`` (at least the single-test 1.96).
    """
    return NormalDist().inv_cdf(1 - level / (2 * max(1, int(tests))))


def classify_pair(
    only_a: float,
    only_b: float,
    both: float,
    se_only_a: float,
    se_only_b: float,
    contrast: float,
    se: float,
    goal: str,
    threshold: float = CONFIDENCE_Z,
) -> PairShape:
    """Name the shape of a pair's interaction from its cells relative to (0, 0).

    The cells become *gains* in the goal's direction (negated for
    minimisation), the (0, 0) cell at 0; a single setting *helps alone* when
    its gain exceeds 1.96 standard errors. Unless ``|contrast| > threshold ·
    se`` the pair is ``unclear`` (pass :func:`family_threshold` of the number
    of pairs looked at to allow for many looks). Otherwise it is
    ``must-match`` when both matched cells beat both mismatched ones by more
    than the matched cells differ from each other. A positive interaction in
    the goal's direction (together better than the separate effects add up
    to) is a ``synergy`` when both-on is the best cell (``only_together``
    when neither helps alone), else ``interact``. A negative one is an
    ``overlap`` when both-on is still the best cell, else a ``conflict``
    (``one_or_other`` when each helps alone and both together is worse than
    either). Decision rules of our own.
    """
    sign = 1.0 if goal == "maximize" else -1.0
    gains = {"00": 0.0, "10": sign * only_a, "01": sign * only_b, "11": sign * both}
    best = max(gains, key=lambda key: (gains[key], key == "00"))
    g00, g10, g01, g11 = gains["00"], gains["10"], gains["01"], gains["11"]
    alone = (bool(g10 > CONFIDENCE_Z * se_only_a), bool(g01 > CONFIDENCE_Z * se_only_b))
    if not (np.isfinite(contrast) and np.isfinite(se)) or abs(contrast) <= threshold * se:
        return PairShape("unclear", False, False, best, alone)
    if min(g00, g11) - max(g10, g01) > abs(g11 - g00):
        return PairShape("must-match", False, False, best, alone)
    if sign * contrast > 0:
        if best == "11":
            return PairShape("synergy", not any(alone), False, best, alone)
        return PairShape("interact", False, False, best, alone)
    if best == "11":
        return PairShape("overlap", False, False, best, alone)
    return PairShape("conflict", False, bool(all(alone) and g11 < min(g10, g01)), best, alone)

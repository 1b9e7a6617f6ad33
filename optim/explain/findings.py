"""What a finished run learned: the settings the best candidates agree on and the pairs that act together.

Everything comes from the run folder; the objective is never called again.

*Best candidates* are the top :data:`BEST_FRACTION` of all successfully
evaluated candidates by score, at least :data:`BEST_MINIMUM` of them. For each
variable the *favoured value* is the value most common among them; its
frequency gets a Wilson score interval (Wilson, 1927).

*Main effect* of a variable: mean score of the candidates holding its
favoured value minus the mean score of the others. *Interaction contrast* of
a pair: ``mean(11) − mean(10) − mean(01) + mean(00)`` over the four settings
of the two variables, the 2×2 interaction of factorial designs (Box, Hunter &
Hunter, *Statistics for Experimenters*, 2005); binary variables use the
indicator of the value 1, variables with more values the indicator of their
favoured value. Both are compared *within each generation* (candidates drawn
from the same model) and the per-generation differences pooled with weights
``1 / Σ 1/count``: later generations score better overall, so comparing
across generations would credit every setting the search converged on with
the progress of the whole search. The standard errors come from the cell
variances and counts. Beside it, the *adjusted effect* holds the other
settings fixed: one least-squares fit of the score on all settings, with an
intercept per generation. An effect or a pair is called clear only beyond a
Bonferroni threshold for the number of settings or pairs looked at. These
are observational estimates from a search, not a designed experiment.

*Links* are the edges of the dependency trees fitted during the run
(``trees.jsonl``), each reported at the generation where its mutual
information peaked, with the p-value of the G-test G = 2·N·MI against χ² with
(k_i − 1)(k_j − 1) degrees of freedom, N the number of survivors the tree was
fitted on (Sokal & Rohlf, *Biometry*, 1981).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from pathlib import Path
from statistics import NormalDist
from typing import List, NamedTuple, Optional, Sequence, Tuple

import numpy as np

from optim.errors import RunFolderError
from optim.runs.folder import RunFolder
from optim.stats import g_test_p_value

__all__ = [
    "BEST_FRACTION",
    "BEST_MINIMUM",
    "FEW_CANDIDATES",
    "RunData",
    "load_run",
    "wilson_interval",
    "best_candidates",
    "favoured_values",
    "MainEffects",
    "main_effects",
    "adjusted_effects",
    "Contrasts",
    "interaction_contrasts",
    "PairShape",
    "classify_pair",
    "family_threshold",
    "VariableFinding",
    "PairFinding",
    "LinkFinding",
    "Explanation",
    "explain_run",
    "pair_sentence",
    "run_summary",
]

#: Fraction of the evaluated candidates (by score) that counts as "the best candidates".
BEST_FRACTION = 0.10
#: The best candidates are at least this many (or every candidate, if there are fewer).
BEST_MINIMUM = 20
#: Below this many candidates in a group or cell, estimates come with a caution.
FEW_CANDIDATES = 10
#: Methods that propose candidates by sampling a fitted probability model.
MODEL_METHODS = ("tree", "forest", "univariate")

_CONFIDENCE = 0.95
_Z = NormalDist().inv_cdf(0.5 + _CONFIDENCE / 2)


# -- statistics ---------------------------------------------------------------------------------
def wilson_interval(successes, trials, confidence: float = _CONFIDENCE) -> Tuple[np.ndarray, np.ndarray]:
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


def family_threshold(tests: int, level: float = 1 - _CONFIDENCE) -> float:
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
    threshold: float = _Z,
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
    alone = (bool(g10 > _Z * se_only_a), bool(g01 > _Z * se_only_b))
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


# -- reading a run folder -----------------------------------------------------------------------
@dataclass
class RunData:
    """What explain reads from a run folder."""

    path: Path
    problem: str
    goal: str
    method: str
    variable_names: List[str]
    cardinality: np.ndarray
    candidates: np.ndarray
    scores: np.ndarray
    generation: np.ndarray
    log: List[dict]
    trees: List[dict]
    search: dict
    result: Optional[dict]
    optimum: Optional[float] = None
    notes: List[str] = field(default_factory=list)

    @property
    def finished(self) -> bool:
        return self.result is not None

    @property
    def folder(self) -> RunFolder:
        return RunFolder(self.path)


def load_run(run_dir) -> RunData:
    """Read a finished (or stopped) run folder; a missing or incomplete folder raises RunFolderError."""
    folder = RunFolder(run_dir)
    path = folder.path
    if not path.is_dir():
        raise RunFolderError(f"{path}: no such run folder")
    config = folder.read_config()
    result = folder.read_result()
    info = folder.read_info(required=False) or {}
    described = info.get("problem") if isinstance(info.get("problem"), dict) else None
    described = described or config.get("problem_summary") or {}
    names = (result or {}).get("variable_names") or info.get("variable_names") or described.get("variable_names")
    n_hint = len(names) if names else described.get("n")
    evaluated = folder.read_evaluated(n_hint if isinstance(n_hint, int) else None)
    if evaluated is None:
        raise RunFolderError(
            f"{path}: incomplete run folder: no evaluated candidates ({RunFolder.EVALUATED}); "
            f"explain needs a run that finished or was stopped"
        )
    candidates, scores, generation = evaluated
    if (
        candidates.ndim != 2
        or not np.issubdtype(candidates.dtype, np.integer)
        or scores.shape != (candidates.shape[0],)
        or generation.shape != (candidates.shape[0],)
    ):
        raise RunFolderError(
            f"{folder.file(RunFolder.EVALUATED)}: expected candidates (count, n) of whole "
            f"numbers with one score and one generation each; found shapes "
            f"{candidates.shape}, {scores.shape}, {generation.shape}"
        )
    if candidates.shape[0] == 0:
        raise RunFolderError(f"{path}: the run evaluated no candidates; there is nothing to explain")
    n = candidates.shape[1]
    notes = []
    if not names:
        names = [f"x{i}" for i in range(n)]
        notes.append(f"The run folder does not name its variables; they are called x0 … x{n - 1}.")
    if len(names) != n:
        raise RunFolderError(f"{path}: result.json names {len(names)} variables but the candidates have {n}")
    goal = described.get("goal") or (config.get("problem") or {}).get("goal")
    if goal not in ("maximize", "minimize"):
        raise RunFolderError(
            f"{path}: cannot tell whether the run maximised or minimised (no problem goal in run.json or config.yaml)"
        )
    card = described.get("cardinality")
    if isinstance(card, int):
        cardinality = np.full(n, card, dtype=np.int64)
    elif isinstance(card, list) and len(card) == n:
        cardinality = np.asarray(card, dtype=np.int64)
    else:
        cardinality = np.maximum(candidates.max(axis=0).astype(np.int64) + 1, 2)
    if np.any(candidates.max(axis=0) >= cardinality) or candidates.min() < 0:
        raise RunFolderError(f"{folder.file(RunFolder.EVALUATED)}: candidate values exceed the variables' cardinality")
    search = config.get("search") if isinstance(config.get("search"), dict) else {}
    method = str(search.get("method") or (result or {}).get("method") or "unknown")
    return RunData(
        path=path,
        problem=str(described.get("name") or (result or {}).get("problem") or config.get("name") or "problem"),
        goal=goal,
        method=method,
        variable_names=[str(v) for v in names],
        cardinality=cardinality,
        candidates=candidates.astype(np.uint8),
        scores=scores.astype(np.float64),
        generation=generation.astype(np.int64),
        log=folder.read_log(),
        trees=folder.read_trees(n),
        search=search,
        result=result,
        optimum=float(described["optimum"]) if isinstance(described.get("optimum"), (int, float)) else None,
        notes=notes,
    )


# -- the findings -------------------------------------------------------------------------------
@dataclass
class VariableFinding:
    """One variable: what the best candidates favour and what it does to the score."""

    index: int
    name: str
    favoured: int
    best_value: int  #: its value in the best candidate found
    agree: int  #: best candidates holding the favoured value
    best_count: int
    interval: Tuple[float, float]  #: 95% Wilson interval of agree / best_count
    effect: float  #: mean score with the favoured value minus without, within generations (nan: not estimable)
    effect_se: float
    with_count: int
    without_count: int
    effect_across_generations: float  #: the same difference over all candidates at once (confounded)
    adjusted: float  #: the effect holding the other settings fixed (within-generation regression)
    adjusted_se: float
    helps: Optional[bool]  #: the effect points the goal's way (and stands out among the n settings); None: unclear

    @property
    def frequency(self) -> float:
        return self.agree / self.best_count

    @property
    def effect_interval(self) -> Tuple[float, float]:
        return self.effect - _Z * self.effect_se, self.effect + _Z * self.effect_se


@dataclass
class LinkFinding:
    """A pair linked by the model in some generation, at its strongest."""

    a: int
    b: int
    names: Tuple[str, str]
    peak_information: float  #: mutual information (nats) at its peak
    generation: int
    fitted_on: int
    g: float
    df: int
    p_value: float
    p_adjusted: float  #: Bonferroni over all pairs and tree generations
    generations_linked: int


@dataclass
class PairFinding:
    """A pair's interaction effect on the score, with the model's link if any."""

    a: int
    b: int
    names: Tuple[str, str]
    values: Tuple[int, int]  #: the value whose indicator is used for each variable
    contrast: float
    se: float
    only_a: float
    only_b: float
    both: float
    min_cell: int
    shape: PairShape
    link: Optional[LinkFinding]

    @property
    def interval(self) -> Tuple[float, float]:
        return self.contrast - _Z * self.se, self.contrast + _Z * self.se


@dataclass
class Explanation:
    """Everything ``optim explain`` reports about one run."""

    data: RunData
    best_count: int
    finite_count: int
    best_score: float
    variables: List[VariableFinding]  #: sorted by importance (size of the main effect)
    pairs: List[PairFinding]  #: the strongest interactions, strongest first
    links: List[LinkFinding]  #: every pair the model linked, strongest first
    pairs_available: bool
    pairs_reason: str
    links_reason: str
    entropy: List[dict]  #: generation, evaluations, entropy, best, mean from log.jsonl
    cautions: List[str]
    notes: List[str]
    contrasts: Optional[Contrasts]
    peak_information: Optional[np.ndarray]  #: (n, n) peak mutual information over the run (0: never linked)
    tree_order: List[int]  #: depth-first order of the tree of strongest links (peak MI, else |contrast|)
    multi_valued: bool
    top: int
    main_threshold: float = _Z  #: |effect| / SE above which a main effect is called clear (Bonferroni over n)
    pair_threshold: float = _Z  #: |contrast| / SE above which a pair is called clear (Bonferroni over pairs)
    pairs_tested: int = 0  #: pairs whose contrast could be estimated

    @property
    def clear_pairs(self) -> List["PairFinding"]:
        return [pair for pair in self.pairs if pair.shape.kind != "unclear"]

    @property
    def goal(self) -> str:
        return self.data.goal

    @property
    def names(self) -> List[str]:
        return self.data.variable_names


def _setting(name: str, value: int, binary: bool) -> str:
    return f"`{name}`" if binary and value == 1 else f"`{name}`={value}"


def pair_sentence(pair: PairFinding, binary: Tuple[bool, bool] = (True, True)) -> str:
    """The pair's interaction in words, e.g. "`a` and `b` help only together"."""
    a = _setting(pair.names[0], pair.values[0], binary[0])
    b = _setting(pair.names[1], pair.values[1], binary[1])
    kind = pair.shape.kind
    if kind == "synergy":
        return f"{a} and {b} help only together" if pair.shape.only_together else f"{a} and {b} work better together"
    if kind == "must-match":
        return f"{a} must match {b} (both or neither)"
    if kind == "conflict":
        if pair.shape.one_or_other:
            return f"{a} and {b} conflict (either one helps, not both)"
        if any(pair.shape.helps_alone):
            alone = a if pair.shape.helps_alone[0] else b
            return f"{a} and {b} conflict (best with {alone} alone)"
        return f"{a} and {b} conflict (worse together; do not combine them)"
    if kind == "overlap":
        return f"{a} and {b} overlap (together they gain less than the sum of each alone)"
    if kind == "interact":
        return f"{a} and {b} interact (together better than their separate effects add up to)"
    return f"{a} and {b}: no clear interaction"


def _links(data: RunData) -> Tuple[List[LinkFinding], Optional[np.ndarray]]:
    n = len(data.variable_names)
    if not data.trees or n < 2:
        return [], None
    rows = []
    for record in data.trees:
        size = record.get("fitted_on")  # the survivors the tree was fitted on, as the run recorded them
        if size is None:
            continue
        for parent, child, information in record["edges"]:
            rows.append((min(parent, child), max(parent, child), float(information), record["generation"], size))
    if not rows:
        return [], np.zeros((n, n))
    table = np.array(rows, dtype=np.float64)
    a, b, information, generation, size = (table[:, k] for k in range(5))
    a, b, generation, size = a.astype(np.int64), b.astype(np.int64), generation.astype(np.int64), size.astype(np.int64)
    code = a * n + b
    df = (data.cardinality[a] - 1) * (data.cardinality[b] - 1)
    g = 2.0 * size * np.maximum(information, 0.0)
    order = np.lexsort((generation, -information, code))  # per pair: strongest first, then earliest
    first = np.ones(order.shape[0], dtype=bool)
    first[1:] = code[order][1:] != code[order][:-1]
    peak = order[first]
    linked = np.bincount(code, minlength=n * n)
    p_values = g_test_p_value(information[peak], size[peak], df[peak])
    tests = n * (n - 1) // 2 * len({record["generation"] for record in data.trees})
    links = [
        LinkFinding(
            a=int(a[k]),
            b=int(b[k]),
            names=(data.variable_names[a[k]], data.variable_names[b[k]]),
            peak_information=float(information[k]),
            generation=int(generation[k]),
            fitted_on=int(size[k]),
            g=float(g[k]),
            df=int(df[k]),
            p_value=float(p),
            p_adjusted=float(min(1.0, p * tests)),
            generations_linked=int(linked[code[k]]),
        )
        for k, p in zip(peak, p_values, strict=True)
    ]
    links.sort(key=lambda link: (link.p_value, -link.g / link.df, -link.peak_information))
    matrix = np.zeros((n, n))
    np.maximum.at(matrix, (a, b), information)
    return links, np.maximum(matrix, matrix.T)


def _strongest_order(weights: Optional[np.ndarray], importance: List[int]) -> List[int]:
    """Variables in depth-first order of the maximum-weight spanning tree of ``weights``.

    The tree is rooted at the most important variable and the heavier branch is
    visited first, so strongly related variables end up next to each other.
    Without weights the order is that of ``importance``.
    """
    n = len(importance)
    if weights is None or n < 3:
        return list(importance)
    from optim.models.spanning import maximum_spanning_tree

    matrix = np.where(np.isfinite(weights), weights, 0.0)
    matrix = np.maximum(matrix, matrix.T)
    root = int(importance[0])
    parents, _ = maximum_spanning_tree(matrix, root=root)
    children: List[List[int]] = [[] for _ in range(n)]
    for child, parent in enumerate(np.asarray(parents).tolist()):
        if parent >= 0:
            children[parent].append(child)
    order: List[int] = []
    stack = [root]
    while stack:
        node = stack.pop()
        order.append(node)
        # the lightest child goes on the stack first, so the heaviest is visited next
        stack.extend(sorted(children[node], key=lambda c: matrix[node, c]))
    seen = set(order)
    order.extend(i for i in range(n) if i not in seen)
    return order


def _entropy_trace(log: List[dict]) -> List[dict]:
    trace = []
    for record in log:
        entropy = record.get("model_entropy")
        if isinstance(entropy, (int, float)) and math.isfinite(entropy):
            trace.append(
                {key: record.get(key) for key in ("generation", "evaluations", "best", "mean")}
                | {"entropy": float(entropy)}
            )
    return trace


def _listed(names: Sequence[str], limit: int = 8) -> str:
    shown = ", ".join(f"`{name}`" for name in names[:limit])
    return shown + (" …" if len(names) > limit else "")


def explain_run(
    run_dir, top: int = 10, best_fraction: float = BEST_FRACTION, best_minimum: int = BEST_MINIMUM
) -> Explanation:
    """Analyse a run folder (see the module docstring for the definitions)."""
    if int(top) != top or top < 1:
        raise ValueError(f"top must be a positive whole number; got {top!r}")
    data = load_run(run_dir)
    names, n, goal = data.variable_names, len(data.variable_names), data.goal
    finite = np.isfinite(data.scores)
    if not finite.any():
        raise RunFolderError(
            f"{data.path}: none of the {data.scores.shape[0]} evaluations succeeded; there is nothing to explain"
        )
    X, scores, generation = data.candidates[finite], data.scores[finite], data.generation[finite]
    sign = 1.0 if goal == "maximize" else -1.0
    cautions: List[str] = []
    notes = list(data.notes)
    failed = int((~finite).sum())
    if failed:
        notes.append(f"{failed} failed evaluations are left out.")
    if not data.finished:
        notes.append("The run has not finished (no result.json): this describes the generations done so far.")

    best = best_candidates(scores, goal, best_fraction, best_minimum)
    favoured, agree = favoured_values(X[best], data.cardinality)
    lower, upper = wilson_interval(agree, best.shape[0])
    if best.shape[0] < BEST_MINIMUM:
        cautions.append(
            f"Only {best.shape[0]} candidates were scored, so the best candidates are all of them and "
            f"the agreement intervals are wide."
        )
    holds = X == favoured[None, :]
    within = main_effects(holds, scores, generation)
    main_threshold = family_threshold(n)
    across = main_effects(holds, scores)
    adjusted, adjusted_se = adjusted_effects(holds, scores, generation)
    best_row = X[best[0]]
    variables = []
    for i in range(n):
        effect, se = float(within.effect[i]), float(within.se[i])
        clear = np.isfinite(effect) and abs(effect) > main_threshold * se
        variables.append(
            VariableFinding(
                index=i,
                name=names[i],
                favoured=int(favoured[i]),
                best_value=int(best_row[i]),
                agree=int(agree[i]),
                best_count=int(best.shape[0]),
                interval=(float(lower[i]), float(upper[i])),
                effect=effect,
                effect_se=se,
                with_count=int(within.with_count[i]),
                without_count=int(within.without_count[i]),
                effect_across_generations=float(across.effect[i]),
                adjusted=float(adjusted[i]),
                adjusted_se=float(adjusted_se[i]),
                helps=(bool(sign * effect > 0) if clear else None),
            )
        )
    variables.sort(
        key=lambda v: (
            not np.isfinite(v.effect),
            -abs(v.effect) if np.isfinite(v.effect) else 0.0,
            -v.frequency,
            v.index,
        )
    )
    importance = [v.index for v in variables]
    few = [v.name for v in variables if np.isfinite(v.effect) and min(v.with_count, v.without_count) < FEW_CANDIDATES]
    if few:
        cautions.append(
            f"{len(few)} main effects rest on fewer than {FEW_CANDIDATES} candidates on one side "
            f"(marked 'few'): {_listed(few)}."
        )
    unknown = [v.name for v in variables if not np.isfinite(v.effect)]
    if unknown:
        cautions.append(
            f"{len(unknown)} variables hardly varied within any generation, so their effect cannot be "
            f"estimated: {_listed(unknown)}."
        )
    opposed = [v.name for v in variables if v.helps is False]
    if opposed:
        notes.append(
            f"For {_listed(opposed)} the favoured value scores worse on average: the best candidates "
            f"keep it for the sake of a partner (see the interactions)."
        )

    binary = data.cardinality == 2
    multi_valued = bool(not binary.all())
    values = np.where(binary, 1, favoured)
    links, peak_information = _links(data)
    link_of = {(link.a, link.b): link for link in links}
    contrasts, pairs = None, []
    pairs_available, pairs_reason = n >= 2, ""
    pair_threshold, tested = _Z, 0
    if n < 2:
        pairs_reason = "The problem has a single variable, so there are no pairs."
    elif data.method == "hillclimb":
        pairs_available = False
        pairs_reason = (
            "The hill climber tries single-variable changes of a few current points, so the settings "
            "of two variables are never varied independently of each other; their interaction cannot "
            "be estimated from its candidates."
        )
    else:
        contrasts = interaction_contrasts(X == values[None, :], scores, generation)
        rows, cols = np.triu_indices(n, 1)
        estimable = np.flatnonzero(np.isfinite(contrasts.contrast[rows, cols] + contrasts.se[rows, cols]))
        tested = int(estimable.size)
        pair_threshold = family_threshold(tested)
        size = np.abs(contrasts.contrast[rows, cols]) - pair_threshold * contrasts.se[rows, cols]
        if not estimable.size:
            pairs_available = False
            pairs_reason = (
                "No pair of variables took all four combinations of values (at least two candidates "
                "each) within a generation, so no interaction can be estimated."
            )
        ranked = estimable[np.argsort(-size[estimable], kind="stable")][: int(top)]
        for k in ranked:
            i, j = int(rows[k]), int(cols[k])
            c = contrasts
            shape = classify_pair(
                c.only_a[i, j],
                c.only_b[i, j],
                c.both[i, j],
                c.se_only_a[i, j],
                c.se_only_b[i, j],
                c.contrast[i, j],
                c.se[i, j],
                goal,
                pair_threshold,
            )
            pairs.append(
                PairFinding(
                    a=i,
                    b=j,
                    names=(names[i], names[j]),
                    values=(int(values[i]), int(values[j])),
                    contrast=float(c.contrast[i, j]),
                    se=float(c.se[i, j]),
                    only_a=float(c.only_a[i, j]),
                    only_b=float(c.only_b[i, j]),
                    both=float(c.both[i, j]),
                    min_cell=int(c.min_cell[i, j]),
                    shape=shape,
                    link=link_of.get((i, j)),
                )
            )
        thin = [p for p in pairs if p.min_cell < FEW_CANDIDATES]
        if thin:
            cautions.append(
                f"{len(thin)} of the listed pairs have a combination of values seen in fewer than "
                f"{FEW_CANDIDATES} candidates (marked 'few'); their estimates are fragile."
            )
    if data.trees:
        links_reason = ""
    elif data.method in MODEL_METHODS and data.method != "univariate":
        links_reason = "The run folder has no trees.jsonl, so the links the model learned are unknown."
    else:
        what = {
            "univariate": "treats every variable as independent",
            "hillclimb": "does not fit a probability model",
            "random": "draws candidates uniformly at random",
        }.get(data.method, "learns no dependency tree")
        links_reason = (
            f"This run's method ({data.method}) {what}, so no dependency tree was learned and there "
            f"are no links to report."
        )
    if data.method == "hillclimb":
        cautions.append(
            "The hill climber's candidates are single-variable changes of a few points, so the main "
            "effects compare few distinct configurations; read them as rough indications."
        )
    entropy = _entropy_trace(data.log)
    generations = int(generation.max()) + 1
    if generations < 3:
        cautions.append(f"The run has only {generations} generation(s); the estimates rest on few comparisons.")
    best_score = float(scores[best[0]])
    return Explanation(
        data=data,
        best_count=int(best.shape[0]),
        finite_count=int(scores.shape[0]),
        best_score=best_score,
        variables=variables,
        pairs=pairs,
        links=links,
        pairs_available=pairs_available,
        pairs_reason=pairs_reason,
        links_reason=links_reason,
        entropy=entropy,
        cautions=cautions,
        notes=notes,
        contrasts=contrasts,
        peak_information=peak_information,
        multi_valued=multi_valued,
        tree_order=_strongest_order(
            peak_information
            if peak_information is not None
            else (np.abs(contrasts.contrast) if contrasts is not None else None),
            importance,
        ),
        top=int(top),
        main_threshold=main_threshold,
        pair_threshold=pair_threshold,
        pairs_tested=tested,
    )


def _number(value: float) -> str:
    return f"{value:+.3g}" if np.isfinite(value) else "n/a"


def run_summary(run_dir) -> List[str]:
    """Three lines on what the run learned (top variables, top pair, the model) and the command for the rest.

    Fast: no pictures, no files written. A folder that cannot be read raises
    :class:`~optim.errors.RunFolderError`.
    """
    import shlex

    explanation = explain_run(run_dir, top=1)
    binary = explanation.data.cardinality == 2
    shown = [v for v in explanation.variables if np.isfinite(v.effect)][:3] or explanation.variables[:3]
    settings = ", ".join(
        f"{v.name}={v.favoured} ({v.frequency:.0%} of the best, effect {_number(v.effect)})" for v in shown
    )
    lines = [f"settings that matter most: {settings}"]
    if explanation.clear_pairs:
        pair = explanation.clear_pairs[0]
        sentence = pair_sentence(pair, (bool(binary[pair.a]), bool(binary[pair.b]))).replace("`", "")
        lines.append(f"strongest interaction: {sentence} (interaction {_number(pair.contrast)} ± {_Z * pair.se:.2g})")
    elif explanation.pairs_reason:
        lines.append(f"interactions: none estimated ({explanation.data.method} run)")
    else:
        lines.append("interactions: none clear")
    if explanation.entropy:
        first, last = explanation.entropy[0], explanation.entropy[-1]
        linked = f"; {len(explanation.links)} pairs linked" if explanation.data.trees else ""
        lines.append(
            f"model: uncertainty (entropy) {first['entropy']:.3g} -> {last['entropy']:.3g} nats over "
            f"{last['generation'] + 1} generations{linked}"
        )
    else:
        lines.append(f"model: none ({explanation.data.method}); {explanation.finite_count:,} candidates scored")
    lines.append(f"see the rest: optim explain {shlex.quote(str(explanation.data.path))}")
    return lines

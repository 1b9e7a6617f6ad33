"""What a finished run learned: the settings the best candidates agree on and the pairs that act together.

Everything comes from the run folder (:mod:`optim.explain.loading`); the
objective is never called again. The statistics are those of
:mod:`optim.explain.effects`, applied to the successfully evaluated
candidates: main effects and interaction contrasts are compared *within each
generation* (candidates drawn from the same model), because later generations
score better overall, so comparing across generations would credit every
setting the search converged on with the progress of the whole search; binary
variables use the indicator of the value 1, variables with more values the
indicator of their favoured value. The links come from the trees the run
recorded (:mod:`optim.explain.links`). These are observational estimates from
a search, not a designed experiment.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import List, Optional, Sequence, Tuple

import numpy as np

from optim.errors import RunFolderError
from optim.explain.effects import (
    BEST_FRACTION,
    BEST_MINIMUM,
    CONFIDENCE_Z,
    Contrasts,
    PairShape,
    adjusted_effects,
    best_candidates,
    classify_pair,
    family_threshold,
    favoured_values,
    interaction_contrasts,
    main_effects,
    wilson_interval,
)
from optim.explain.links import LinkFinding, model_links
from optim.explain.loading import RunData, load_run
from optim.methods import learns_model

__all__ = [
    "FEW_CANDIDATES",
    "VariableFinding",
    "PairFinding",
    "Explanation",
    "explain_run",
    "pair_sentence",
]

#: Below this many candidates in a group or cell, estimates come with a caution.
FEW_CANDIDATES = 10
#: Why a run of these methods has no dependency tree, in words.
_WITHOUT_TREE = {
    "univariate": "treats every variable as independent",
    "hillclimb": "does not fit a probability model",
    "random": "draws candidates uniformly at random",
}


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
        return self.effect - CONFIDENCE_Z * self.effect_se, self.effect + CONFIDENCE_Z * self.effect_se


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
        return self.contrast - CONFIDENCE_Z * self.se, self.contrast + CONFIDENCE_Z * self.se


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
    main_threshold: float = CONFIDENCE_Z  #: |effect| / SE above which a main effect is called clear (Bonferroni over n)
    pair_threshold: float = CONFIDENCE_Z  #: |contrast| / SE above which a pair is called clear (Bonferroni over pairs)
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
    """Analyse a run folder (the definitions are in :mod:`optim.explain.effects` and this module's docstring)."""
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
    links, peak_information = model_links(data)
    link_of = {(link.a, link.b): link for link in links}
    contrasts, pairs = None, []
    pairs_available, pairs_reason = n >= 2, ""
    pair_threshold, tested = CONFIDENCE_Z, 0
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
    without_tree = _WITHOUT_TREE.get(data.method)
    if data.trees:
        links_reason = ""
    elif without_tree is None and learns_model(data.method):
        links_reason = "The run folder has no trees.jsonl, so the links the model learned are unknown."
    else:
        links_reason = (
            f"This run's method ({data.method}) {without_tree or 'learns no dependency tree'}, so no "
            f"dependency tree was learned and there are no links to report."
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

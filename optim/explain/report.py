"""Writing an :class:`~optim.explain.Explanation` as ``explain.md``, ``explain.json`` and a short text."""

from __future__ import annotations

import json
import math
from pathlib import Path
from typing import Dict, List, Mapping, Optional

import numpy as np

from optim.explain.effects import CONFIDENCE_Z
from optim.explain.findings import FEW_CANDIDATES, Explanation, PairFinding, VariableFinding, pair_sentence
from optim.explain.links import LinkFinding
from optim.files import atomic_write
from optim.methods import learns_model
from optim.text import markdown_table

__all__ = ["FORMAT", "MARKDOWN", "JSON", "render_markdown", "to_document", "short_lines", "write_reports"]

#: Identifies the layout of ``explain.json``.
FORMAT = "optim-explain-1"
MARKDOWN, JSON = "explain.md", "explain.json"


# -- numbers ------------------------------------------------------------------------------------
def _num(value, digits: int = 3, signed: bool = False) -> str:
    """``value`` to about ``digits`` significant digits, without exponents for everyday magnitudes."""
    if value is None or not np.isfinite(value):
        return "n/a"
    value = float(value)
    magnitude = abs(value)
    if magnitude == 0:
        text = "0"
    elif 1e-3 <= magnitude < 1e7:
        decimals = max(0, digits - 1 - int(math.floor(math.log10(magnitude))))
        text = f"{magnitude:,.{decimals}f}"
    else:
        text = f"{magnitude:.{digits - 1}e}"
    sign = "-" if value < 0 else ("+" if signed else "")
    return sign + text


def _p(value: float) -> str:
    if value < 1e-300:
        return "< 1e-300"
    return f"{value:.2g}" if value < 0.001 else f"{value:.3f}"


def _percent(value: float) -> str:
    text = f"{100 * value:.1f}"
    return (text[:-2] if text.endswith(".0") else text) + "%"


def _finite(value) -> Optional[float]:
    return float(value) if value is not None and np.isfinite(value) else None


# -- plain words --------------------------------------------------------------------------------
def _better(explanation: Explanation) -> str:
    return "lower" if explanation.goal == "minimize" else "higher"


def _binary_of(explanation: Explanation, pair: PairFinding):
    card = explanation.data.cardinality
    return bool(card[pair.a] == 2), bool(card[pair.b] == 2)


def _sentence(explanation: Explanation, pair: PairFinding, code: bool = True) -> str:
    text = pair_sentence(pair, _binary_of(explanation, pair))
    return text if code else text.replace("`", "")


def _verdict(variable: VariableFinding) -> str:
    if not np.isfinite(variable.effect):
        return "not estimable"
    if variable.helps is None:
        return "no clear effect"
    return "helps" if variable.helps else "worse on average (kept for a partner?)"


def _variable_note(variable: VariableFinding) -> str:
    notes = []
    if np.isfinite(variable.effect) and min(variable.with_count, variable.without_count) < FEW_CANDIDATES:
        notes.append(f"few ({min(variable.with_count, variable.without_count)} without)")
    if variable.best_value != variable.favoured:
        notes.append("best found differs")
    return "; ".join(notes)


def _cells_text(explanation: Explanation, pair: PairFinding) -> str:
    a, b = pair.names
    return (
        f"only {a}: {_num(pair.only_a, signed=True)}, only {b}: {_num(pair.only_b, signed=True)}, "
        f"both: {_num(pair.both, signed=True)}"
    )


def _link_text(link: Optional[LinkFinding]) -> str:
    if link is None:
        return "never linked"
    return f"MI {_num(link.peak_information)} at gen {link.generation}, p {_p(link.p_value)}"


def _headline(explanation: Explanation) -> List[str]:
    lines = []
    variables = explanation.variables
    decided = sum(v.interval[0] >= 0.9 for v in variables)
    lines.append(
        f"The best {explanation.best_count:,} candidates agree (at least 90% of them, with 95% "
        f"confidence) on {decided} of the {len(variables)} settings."
    )
    top = next((v for v in variables if v.helps), None)
    if top is not None:
        lines.append(
            f"The setting that matters most is {_plain_setting(explanation, top)}: with it, candidates "
            f"score {_num(abs(top.effect))} {_better(explanation)} (better) on average than without it."
        )
    clear = [p for p in explanation.pairs if p.shape.kind != "unclear"]
    if clear:
        lines.append(
            f"The strongest interaction: {_sentence(explanation, clear[0])} "
            f"(interaction {_num(clear[0].contrast, signed=True)} ± {_num(CONFIDENCE_Z * clear[0].se, 2)})."
        )
    elif explanation.pairs_available:
        lines.append("No pair of settings shows a clear interaction.")
    return lines


def _plain_setting(explanation: Explanation, variable: VariableFinding) -> str:
    binary = explanation.data.cardinality[variable.index] == 2
    if binary:
        return f"`{variable.name}` {'on (=1)' if variable.favoured == 1 else 'off (=0)'}"
    return f"`{variable.name}`={variable.favoured}"


# -- markdown -----------------------------------------------------------------------------------
def _glossary(explanation: Explanation) -> List[str]:
    better = _better(explanation)
    return [
        "## How to read this",
        "",
        f"- **Score**: what the run optimised; here {better} is better ({explanation.goal}).",
        f"- **Best candidates**: the top 10% of all candidates the run scored (at least 20), here the best "
        f"{explanation.best_count:,} of {explanation.finite_count:,}.",
        "- **Favoured value**: the value most of the best candidates give a setting. **Agreement** is the share "
        "of the best candidates with it; the bracket is its 95% confidence interval (Wilson score interval, "
        "Wilson 1927).",
        "- **Effect**: how much the score changes with the favoured value, on average: the mean score of "
        "candidates with it minus the mean score of those without. Candidates are compared only with others "
        "of the same generation (drawn from the same model) and the differences averaged, because later "
        "generations score better overall and would otherwise make every setting the search settled on look "
        "good. ± is the 95% interval (1.96 standard errors).",
        "- **Others held fixed**: the effect of the setting with every other setting held fixed, from one "
        "least-squares fit of the score on all settings at once (within generations). When it is much smaller "
        "than the effect, part of the effect belongs to settings that tend to come with this one in the "
        "candidates the search tried.",
        "- **Interaction** of two settings: how far their joint effect is from the sum of their separate "
        "effects, `mean(both) − mean(only first) − mean(only second) + mean(neither)` (the 2×2 interaction "
        "contrast of factorial designs; Box, Hunter & Hunter, *Statistics for Experimenters*, 2005). 0 means "
        "they act independently. The cells are shown relative to 'neither'.",
        f"- **Clear**: with many settings and pairs, some estimates look large by chance. An effect is called "
        f"clear ('helps') only beyond {explanation.main_threshold:.2f} standard errors and a pair only beyond "
        f"{explanation.pair_threshold:.2f}, thresholds that allow for the number of settings and pairs looked at "
        f"(Bonferroni, 5% overall).",
        "- **Linked**: the search's model (a dependency tree) joined the two settings because, among the "
        "candidates it kept, knowing one told it something about the other. **MI** (mutual information, in "
        "nats) measures how much: 0 is nothing, 0.69 (ln 2) means one on/off setting fully determines the "
        "other. The **p-value** is the chance of a link at least that strong if the two were unrelated "
        "(G-test); tiny means the link is real.",
        "- **Entropy**: how undecided the model still is, in nats; each on/off setting it has not decided "
        "adds up to 0.69, and 0 means it would propose a single candidate.",
        "",
        "These are **observational estimates from a search, not a designed experiment**: the search chose "
        "which candidates to try, so settings that tend to appear together can borrow each other's credit. "
        "Before relying on a conclusion, confirm it with a small designed test, e.g. score the four "
        "combinations of a pair a few times on the best configuration found.",
        "",
    ]


def _variables_section(explanation: Explanation) -> List[str]:
    better = _better(explanation)
    lines = [
        "## Settings the best candidates agree on",
        "",
        f"Sorted by the size of the effect. A negative effect means a lower score, a positive one a "
        f"higher score; {better} is better here.",
        "",
    ]
    rows = []
    for rank, v in enumerate(explanation.variables, 1):
        lo, hi = v.effect_interval
        rows.append(
            [
                rank,
                f"`{v.name}`",
                v.favoured,
                v.best_value,
                f"{_percent(v.frequency)} [{_percent(v.interval[0])}, {_percent(v.interval[1])}]",
                f"{_num(v.effect, signed=True)} [{_num(lo, signed=True)}, {_num(hi, signed=True)}]"
                if np.isfinite(v.effect)
                else "n/a",
                f"{_num(v.adjusted, signed=True)} ± {_num(CONFIDENCE_Z * v.adjusted_se, 2)}"
                if np.isfinite(v.adjusted)
                else "n/a",
                _verdict(v),
                _variable_note(v),
            ]
        )
    lines += markdown_table(
        [
            "#",
            "setting",
            "favoured",
            "in best found",
            "agreement [95%]",
            "effect [95%]",
            "others held fixed ± 95%",
            "verdict",
            "note",
        ],
        rows,
    )
    return lines + [""]


def _pairs_section(explanation: Explanation) -> List[str]:
    lines = ["## Settings that matter together", ""]
    if not explanation.pairs_available:
        return lines + [explanation.pairs_reason, ""]
    if explanation.multi_valued:
        lines += [
            "Some settings take more than two values; for them the interaction compares their favoured "
            "value against all other values together (shown as `name`=value).",
            "",
        ]
    better = "lower" if explanation.goal == "minimize" else "higher"
    sign_word = "negative" if explanation.goal == "minimize" else "positive"
    lines += [
        f"The {len(explanation.clear_pairs)} strongest interactions among the {explanation.pairs_tested:,} "
        f"pairs compared, ranked by how large they are at least. A pair is listed only if its interaction "
        f"is more than {explanation.pair_threshold:.2f} standard errors from zero, which allows for the "
        f"number of pairs looked at (Bonferroni), so chance alone rarely puts a pair here. Here a "
        f"{sign_word} interaction means the pair together "
        f"scores {better} (better) than their separate effects add up to. The cells give the mean score "
        f"difference from candidates with neither setting, for only the first, only the second, and both.",
        "",
    ]
    clear = explanation.clear_pairs
    if not clear:
        largest = explanation.pairs[0] if explanation.pairs else None
        text = (
            f"No pair stands out among the {explanation.pairs_tested:,} pairs compared: none has an interaction "
            f"beyond {explanation.pair_threshold:.2f} standard errors"
        )
        if largest is not None:
            text += (
                f" (the largest: `{largest.names[0]}` and `{largest.names[1]}`, "
                f"{_num(largest.contrast, signed=True)} ± {_num(CONFIDENCE_Z * largest.se, 2)})"
            )
        return lines + [text + ". The settings seem to act independently of each other.", ""]
    rows = []
    for rank, pair in enumerate(clear, 1):
        lo, hi = pair.interval
        note = f"few ({pair.min_cell} in a cell)" if pair.min_cell < FEW_CANDIDATES else ""
        rows.append(
            [
                rank,
                _sentence(explanation, pair),
                f"{_num(pair.contrast, signed=True)} [{_num(lo, signed=True)}, {_num(hi, signed=True)}]",
                _cells_text(explanation, pair),
                _link_text(pair.link),
                note,
            ]
        )
    lines += markdown_table(
        ["#", "in words", "interaction [95%]", "cells vs neither", "linked by the model", "note"], rows
    )
    return lines + [""]


def _links_section(explanation: Explanation) -> List[str]:
    lines = ["## What the model linked", ""]
    if not explanation.links:
        return lines + [explanation.links_reason or "The model never linked two settings.", ""]
    generations = len({record["generation"] for record in explanation.data.trees})
    shown = explanation.links[: explanation.top]
    lines += [
        f"The dependency tree was refitted {generations} times. At the end of a search the kept candidates "
        f"are nearly identical, so their links say little; each pair is therefore reported at the generation "
        f"where its link was strongest. {len(explanation.links)} pairs were linked at some point; the "
        f"{len(shown)} strongest are listed. The adjusted p-value multiplies by the number of pairs and "
        f"generations looked at (Bonferroni), so below 0.05 it is convincing despite the many looks. The "
        f"mutual information comes from the model's smoothed tables, which makes the test slightly cautious. "
        f"A link shows that the search kept two settings together; settings that make no difference can also "
        f"drift together by chance, so check the interactions above to see whether a pair matters for the score.",
        "",
    ]
    rows = [
        [
            rank,
            f"`{link.names[0]}` – `{link.names[1]}`",
            _num(link.peak_information),
            link.generation,
            link.fitted_on,
            _num(link.g),
            link.df,
            _p(link.p_value),
            _p(link.p_adjusted),
            link.generations_linked,
        ]
        for rank, link in enumerate(shown, 1)
    ]
    lines += markdown_table(
        [
            "#",
            "pair",
            "peak MI (nats)",
            "at generation",
            "kept candidates N",
            "G = 2·N·MI",
            "df",
            "p-value",
            "adjusted p",
            "generations linked",
        ],
        rows,
    )
    return lines + [""]


def _entropy_section(explanation: Explanation) -> List[str]:
    lines = ["## How the model sharpened", ""]
    trace = explanation.entropy
    if not trace or not learns_model(explanation.data.method):
        return lines + [
            f"This run's method ({explanation.data.method}) fits no probability model, so there is "
            f"no model entropy to follow.",
            "",
        ]
    first, last = trace[0]["entropy"], trace[-1]["entropy"]
    half = next((r for r in trace if r["entropy"] <= first / 2), None)
    text = f"The model's entropy fell from {_num(first)} to {_num(last)} nats over {len(trace)} generations"
    if half is not None:
        text += f"; half of it was gone by generation {half['generation']} ({half['evaluations']:,} evaluations)"
    text += "."
    if np.all(explanation.data.cardinality == 2) and last > 0:
        text += (
            f" What is left corresponds to about {last / math.log(2):.1f} on/off settings the model has "
            f"not decided, typically settings that make little difference."
        )
    lines += [text, ""]
    picks = sorted(set(np.linspace(0, len(trace) - 1, num=min(len(trace), 8)).round().astype(int).tolist()))
    rows = [
        [
            trace[k]["generation"],
            f"{trace[k]['evaluations']:,}",
            _num(trace[k].get("best")),
            _num(trace[k].get("mean")),
            _num(trace[k]["entropy"]),
        ]
        for k in picks
    ]
    lines += markdown_table(["generation", "evaluations", "best so far", "generation mean", "entropy (nats)"], rows)
    return lines + [""]


def _pictures_section(pictures: Mapping[str, Path], pictures_note: Optional[str]) -> List[str]:
    lines = ["## Pictures", ""]
    captions = {
        "tree.png": "the strongest links over the run (left) and the last learned tree (right); thicker "
        "links carry more mutual information, node colour is the favoured value",
        "interactions.png": "interaction of every pair (left) and the strongest link over the run (right), "
        "related settings next to each other",
        "convergence.png": "best and mean score and the model's entropy against evaluations",
    }
    for name, path in pictures.items():
        lines.append(f"- [{name}]({Path(path).name}): {captions.get(name, '')}")
    if pictures_note:
        lines.append(f"- {pictures_note}")
    return lines + [""]


def render_markdown(
    explanation: Explanation, pictures: Optional[Mapping[str, Path]] = None, pictures_note: Optional[str] = None
) -> str:
    """The full report as Markdown."""
    data = explanation.data
    stop = (data.result or {}).get("stop_reason", "not finished")
    lines = [
        f"# What the search learned: {data.problem}",
        "",
        f"Run folder `{data.path.name}`: {explanation.goal} with the `{data.method}` method, "
        f"{data.scores.shape[0]:,} evaluations in {int(data.generation.max()) + 1} generations "
        f"(stop: {stop}); best score {_num(explanation.best_score, 6)}.",
        "",
    ]
    lines += [f"- {line}" for line in _headline(explanation)] + [""]
    lines += _glossary(explanation)
    lines += _variables_section(explanation)
    lines += _pairs_section(explanation)
    lines += _links_section(explanation)
    lines += _entropy_section(explanation)
    cautions = explanation.cautions + explanation.notes
    lines += ["## Cautions", ""] + ([f"- {c}" for c in cautions] or ["- None beyond the general one above."]) + [""]
    if pictures is not None or pictures_note:
        lines += _pictures_section(pictures or {}, pictures_note)
    return "\n".join(lines)


# -- JSON ---------------------------------------------------------------------------------------
def _variable_record(v: VariableFinding) -> dict:
    return {
        "name": v.name,
        "index": v.index,
        "favoured": v.favoured,
        "best_found": v.best_value,
        "agree": v.agree,
        "best_candidates": v.best_count,
        "frequency": v.frequency,
        "frequency_interval": list(v.interval),
        "effect": _finite(v.effect),
        "effect_se": _finite(v.effect_se),
        "effect_interval": [_finite(x) for x in v.effect_interval] if np.isfinite(v.effect) else None,
        "with_count": v.with_count,
        "without_count": v.without_count,
        "effect_across_generations": _finite(v.effect_across_generations),
        "adjusted_effect": _finite(v.adjusted),
        "adjusted_se": _finite(v.adjusted_se),
        "helps": v.helps,
    }


def _link_record(link: LinkFinding) -> dict:
    return {
        "a": link.names[0],
        "b": link.names[1],
        "a_index": link.a,
        "b_index": link.b,
        "peak_mutual_information": link.peak_information,
        "generation": link.generation,
        "fitted_on": link.fitted_on,
        "g": link.g,
        "df": link.df,
        "p_value": link.p_value,
        "p_adjusted": link.p_adjusted,
        "generations_linked": link.generations_linked,
    }


def _pair_record(explanation: Explanation, pair: PairFinding) -> dict:
    return {
        "a": pair.names[0],
        "b": pair.names[1],
        "a_index": pair.a,
        "b_index": pair.b,
        "a_value": pair.values[0],
        "b_value": pair.values[1],
        "contrast": pair.contrast,
        "se": pair.se,
        "interval": list(pair.interval),
        "cells_vs_neither": {"only_a": pair.only_a, "only_b": pair.only_b, "both": pair.both},
        "min_cell": pair.min_cell,
        "kind": pair.shape.kind,
        "only_together": pair.shape.only_together,
        "one_or_other": pair.shape.one_or_other,
        "helps_alone": list(pair.shape.helps_alone),
        "best_cell": pair.shape.best_cell,
        "sentence": _sentence(explanation, pair, code=False),
        "link": _link_record(pair.link) if pair.link is not None else None,
    }


def to_document(
    explanation: Explanation, pictures: Optional[Mapping[str, Path]] = None, pictures_note: Optional[str] = None
) -> dict:
    """The report as a JSON-friendly dict (no NaN: missing numbers are ``null``)."""
    data = explanation.data
    return {
        "format": FORMAT,
        "run": {
            "folder": str(data.path),
            "problem": data.problem,
            "goal": data.goal,
            "method": data.method,
            "evaluations": int(data.scores.shape[0]),
            "scored": explanation.finite_count,
            "generations": int(data.generation.max()) + 1,
            "finished": data.finished,
            "stop_reason": (data.result or {}).get("stop_reason"),
            "best_score": explanation.best_score,
        },
        "definitions": {
            "best_candidates": "top 10% of the successfully scored candidates by score, at least 20",
            "frequency_interval": "95% Wilson score interval",
            "effect": "mean score with the favoured value minus without, within generations, pooled with "
            "weights 1/(1/n1 + 1/n0)",
            "adjusted_effect": "least-squares coefficient of the favoured-value indicator with all settings "
            "fitted at once and one intercept per generation",
            "contrast": "mean(11) - mean(10) - mean(01) + mean(00) within generations, pooled with weights "
            "1/sum(1/n_cell); binary variables use the indicator of 1, others of their favoured value",
            "p_value": "G-test, G = 2 N MI, chi-squared with (k_i - 1)(k_j - 1) degrees of freedom; p_adjusted "
            "is Bonferroni over all pairs and tree generations",
        },
        "best_candidates": explanation.best_count,
        "variables": [_variable_record(v) for v in explanation.variables],
        "interactions": [_pair_record(explanation, p) for p in explanation.pairs],
        "interactions_note": explanation.pairs_reason or None,
        "links": [_link_record(link) for link in explanation.links],
        "links_note": explanation.links_reason or None,
        "entropy": explanation.entropy,
        "cautions": explanation.cautions,
        "notes": explanation.notes,
        "pictures": {name: Path(path).name for name, path in (pictures or {}).items()},
        "pictures_note": pictures_note,
    }


# -- the short text form ------------------------------------------------------------------------
def short_lines(explanation: Explanation) -> List[str]:
    """The printed summary: top settings, top pairs, the model, cautions (plain text)."""
    data = explanation.data
    top = explanation.top
    lines = [
        f"{data.problem} ({explanation.goal}, {_better(explanation)} is better), method {data.method}: "
        f"{data.scores.shape[0]:,} evaluations in {int(data.generation.max()) + 1} generations, "
        f"best {_num(explanation.best_score, 6)}",
        f"best candidates: the top {explanation.best_count:,} of {explanation.finite_count:,}",
        "settings by importance (favoured value, share of the best candidates [95%], effect on the score ± 95%):",
    ]
    width = max((len(v.name) for v in explanation.variables[:top]), default=0)
    for rank, v in enumerate(explanation.variables[:top], 1):
        effect = (
            f"{_num(v.effect, signed=True)} ± {_num(CONFIDENCE_Z * v.effect_se, 2)}" if np.isfinite(v.effect) else "n/a"
        )
        lines.append(
            f"  {rank:>3}. {v.name:<{width}} = {v.favoured}  {_percent(v.frequency):>6} "
            f"[{_percent(v.interval[0])}, {_percent(v.interval[1])}]  {effect}  {_verdict(v)}"
        )
    if explanation.pairs_available and explanation.clear_pairs:
        lines.append("strongest interactions (interaction ± 95%):")
        for rank, pair in enumerate(explanation.clear_pairs[:top], 1):
            lines.append(
                f"  {rank:>3}. {_sentence(explanation, pair, code=False)}  "
                f"{_num(pair.contrast, signed=True)} ± {_num(CONFIDENCE_Z * pair.se, 2)}"
            )
    elif explanation.pairs_available:
        lines.append(f"interactions: no pair stands out among the {explanation.pairs_tested:,} compared")
    else:
        lines.append(f"interactions: {explanation.pairs_reason}")
    if explanation.entropy and learns_model(data.method):
        first, last = explanation.entropy[0], explanation.entropy[-1]
        linked = f"; {len(explanation.links)} pairs linked at some generation" if data.trees else ""
        lines.append(f"model entropy: {_num(first['entropy'])} -> {_num(last['entropy'])} nats{linked}")
        if explanation.links_reason:
            lines.append(f"dependencies: {explanation.links_reason}")
    elif explanation.links_reason:
        lines.append(f"dependencies: {explanation.links_reason}")
    if explanation.cautions:
        lines.append(f"cautions: {len(explanation.cautions)} (see {MARKDOWN})")
    return lines


def write_reports(
    explanation: Explanation,
    pictures: Optional[Mapping[str, Path]] = None,
    pictures_note: Optional[str] = None,
    folder=None,
) -> Dict[str, Path]:
    """Write ``explain.md`` and ``explain.json`` into ``folder`` (the run folder by default), atomically."""
    folder = Path(folder) if folder is not None else explanation.data.path
    written = {}
    text = render_markdown(explanation, pictures, pictures_note) + "\n"
    atomic_write(folder / MARKDOWN, text.encode("utf-8"))
    written[MARKDOWN] = folder / MARKDOWN
    document = to_document(explanation, pictures, pictures_note)
    atomic_write(folder / JSON, (json.dumps(document, indent=2, allow_nan=False) + "\n").encode("utf-8"))
    written[JSON] = folder / JSON
    return written

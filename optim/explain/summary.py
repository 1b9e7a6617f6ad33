"""The closing summary of ``optim run``: three lines on what the run learned and the command for the rest."""

from __future__ import annotations

import shlex
from typing import List

import numpy as np

from optim.explain.effects import CONFIDENCE_Z
from optim.explain.findings import explain_run, pair_sentence

__all__ = ["run_summary"]


def _number(value: float) -> str:
    return f"{value:+.3g}" if np.isfinite(value) else "n/a"


def run_summary(run_dir) -> List[str]:
    """Three lines on what the run learned (top variables, top pair, the model) and the command for the rest.

    Fast: no pictures, no files written. A folder that cannot be read raises
    :class:`~optim.errors.RunFolderError`.
    """
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
        lines.append(
            f"strongest interaction: {sentence} (interaction {_number(pair.contrast)} ± {CONFIDENCE_Z * pair.se:.2g})"
        )
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

"""The links the model learned: each pair its dependency trees joined, at its strongest.

The pairs are the edges of the trees fitted during the run (``trees.jsonl``),
each reported at the generation where its mutual information peaked, with the
p-value of the G-test G = 2·N·MI against χ² with (k_i − 1)(k_j − 1) degrees of
freedom, N the number of survivors the tree was fitted on as the run recorded
it (Sokal & Rohlf, *Biometry*, 1981).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import List, Optional, Tuple

import numpy as np

from optim.explain.loading import RunData
from optim.stats import g_test_p_value

__all__ = ["LinkFinding", "model_links"]


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


def model_links(data: RunData) -> Tuple[List[LinkFinding], Optional[np.ndarray]]:
    """Every pair the run's trees linked, strongest first, and the ``(n, n)`` peak mutual information.

    Tree records without a recorded fit size are left out. ``([], None)`` when the run recorded no
    trees or the problem has a single variable.
    """
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

"""Pictures for ``optim explain``: the learned tree, the pairwise interactions, convergence.

matplotlib is optional (``pip install matplotlib``); without it
:func:`write_pictures` writes nothing and says why. It is set up by
:mod:`optim.plotting` (Agg backend, no display needed). Up to
:data:`MAX_LABELLED` variables every one is labelled; above that the pictures
show a summary: the strongest links of the tree, and the most important
variables in the heat maps.
"""

from __future__ import annotations

import math
from pathlib import Path
from typing import Dict, List, Optional, Tuple

import numpy as np

from optim.errors import RunFolderError
from optim.explain.findings import Explanation
from optim.methods import learns_model
from optim.plotting import plots_available, pyplot, save_png

__all__ = ["MAX_LABELLED", "PICTURES", "pictures_unavailable", "write_pictures"]

#: Most variables drawn with labels; larger problems are summarised.
MAX_LABELLED = 50
#: The pictures, in the order they are written.
PICTURES = ("tree.png", "interactions.png", "convergence.png")


def pictures_unavailable() -> Optional[str]:
    """Why no pictures can be drawn (matplotlib missing), or ``None`` when they can."""
    if not plots_available():
        return "Pictures skipped: matplotlib is not installed (pip install matplotlib, or the 'plot' extra)."
    return None


# -- the tree -----------------------------------------------------------------------------------
def _read_tree(explanation: Explanation):
    """The last learned tree as a networkx graph (tree.graphml, else the last trees.jsonl record)."""
    import networkx as nx

    data = explanation.data
    try:
        graph = data.folder.read_tree()
    except RunFolderError:  # a damaged file falls back on trees.jsonl
        graph = None
    if graph is not None:
        return graph
    if not data.trees:
        return None
    graph = nx.Graph()
    graph.add_nodes_from(range(len(data.variable_names)))
    for parent, child, information in data.trees[-1]["edges"]:
        graph.add_edge(parent, child, weight=float(information))
    return graph


def _strongest_links(explanation: Explanation):
    """The maximum-weight spanning forest of the links that stay significant after adjustment (peak MI)."""
    import networkx as nx

    graph = nx.Graph()
    graph.add_nodes_from(range(len(explanation.names)))
    for link in explanation.links:
        if link.p_adjusted < 0.05:
            graph.add_edge(link.a, link.b, weight=link.peak_information)
    forest = nx.maximum_spanning_tree(graph)
    forest.remove_nodes_from([v for v in list(forest) if forest.degree(v) == 0])
    return forest


def _summarised(graph, limit: int):
    """The heaviest edges of ``graph`` covering at most ``limit`` nodes (the whole graph if it is small)."""
    import networkx as nx

    if graph.number_of_nodes() <= limit:
        return graph, None
    kept, nodes = [], set()
    for u, v, w in sorted(graph.edges(data="weight", default=0.0), key=lambda e: -e[2]):
        if len(nodes | {u, v}) > limit:
            break
        kept.append((u, v, w))
        nodes |= {u, v}
    small = nx.Graph()
    small.add_weighted_edges_from(kept)
    return small, f"the {len(kept)} strongest of {graph.number_of_edges()} links"


def _radial_layout(graph) -> Tuple[Dict[int, Tuple[float, float]], Dict[int, int], set]:
    """Each component as a radial tree around its centre node; components packed in rows, largest first.

    Depth from the centre sets the radius; the leaves share the circle in
    depth-first order and every inner node sits at the middle angle of its
    leaves. A component's circle grows with the square root of its size.
    Returns the positions, each node's component centre and the set of leaves.
    """
    import networkx as nx

    components = sorted(nx.connected_components(graph), key=lambda c: (-len(c), min(c)))
    radii = [0.5 + 0.4 * math.sqrt(len(c)) for c in components]
    row_width = max(2 * radii[0] + 2.0, math.sqrt(sum((2 * r + 2.0) ** 2 for r in radii)) * 1.2) if radii else 1
    positions: Dict[int, Tuple[float, float]] = {}
    roots: Dict[int, int] = {}
    all_leaves: set = set()
    x = y = row_height = 0.0
    for component, radius in zip(components, radii, strict=True):
        cell = 2 * radius + 2.0  # room for the labels around the circle
        if x > 0 and x + cell > row_width:
            x, y, row_height = 0.0, y - row_height, 0.0
        cx, cy = x + cell / 2, y - cell / 2
        x, row_height = x + cell, max(row_height, cell)
        sub = graph.subgraph(component)
        root = min(nx.center(sub))
        tree = nx.bfs_tree(sub, root)
        depth = nx.shortest_path_length(tree, root)
        leaves: List[int] = []
        span: Dict[int, Tuple[int, int]] = {}
        for node in nx.dfs_postorder_nodes(tree, root):
            children = list(tree.successors(node))
            if not children:
                leaves.append(node)
                span[node] = (len(leaves) - 1, len(leaves) - 1)
            else:
                span[node] = (min(span[c][0] for c in children), max(span[c][1] for c in children))
        count, height = len(leaves), max(depth.values()) or 1
        for node in component:
            lo, hi = span[node]
            angle = 2 * math.pi * ((lo + hi) / 2) / count
            r = radius * depth[node] / height
            positions[node] = (cx + r * math.cos(angle), cy + r * math.sin(angle))
            roots[node] = root
        all_leaves.update(node for node in leaves if node != root)
    return positions, roots, all_leaves


def _draw_one_tree(plt, axes, graph, explanation: Explanation, title: str) -> None:
    import networkx as nx

    names = explanation.names
    favoured = {v.index: v.favoured for v in explanation.variables}
    agreement = {v.index: v.frequency for v in explanation.variables}
    positions, roots, leaves = _radial_layout(graph)
    weights = np.array([w for _, _, w in graph.edges(data="weight", default=0.0)], dtype=float)
    top = max(float(weights.max()) if weights.size else 0.0, 0.05)  # negligible information stays thin
    if graph.number_of_edges():
        nx.draw_networkx_edges(
            graph, positions, ax=axes, width=0.4 + 6.0 * weights / top, edge_color="#555555", alpha=0.8
        )
    nodes = list(graph.nodes())
    colours = plt.get_cmap("tab10")
    for value in sorted({favoured.get(v, 0) for v in nodes}):
        members = [v for v in nodes if favoured.get(v, 0) == value]
        nx.draw_networkx_nodes(
            graph,
            positions,
            nodelist=members,
            ax=axes,
            node_size=110,
            node_color=[colours(value % 10)],
            alpha=[0.3 + 0.7 * agreement.get(v, 1.0) for v in members],
            label=f"favoured value {value}",
        )
    font = 8 if len(nodes) <= 30 else 6.5
    for node in nodes:
        x, y = positions[node]
        label = names[node] if 0 <= node < len(names) else str(node)
        if node not in leaves:  # centres and inner nodes: a slanted label, clear of a chain's neighbours
            axes.annotate(
                label,
                (x, y),
                xytext=(3, 3),
                textcoords="offset points",
                fontsize=font,
                rotation=40,
                rotation_mode="anchor",
                ha="left",
                va="bottom",
            )
            continue
        rx, ry = positions[roots[node]]
        angle = math.degrees(math.atan2(y - ry, x - rx))
        left = 90 < angle % 360 < 270
        offset = 5 * np.array([math.cos(math.radians(angle)), math.sin(math.radians(angle))])
        axes.annotate(
            label,
            (x, y),
            xytext=offset,
            textcoords="offset points",
            fontsize=font,
            rotation=angle + 180 if left else angle,
            rotation_mode="anchor",
            ha="right" if left else "left",
            va="center",
        )
    axes.set_title(title, fontsize=10)
    axes.legend(loc="lower left", fontsize=8, frameon=False)
    axes.set_axis_off()
    axes.margins(0.25)


def _draw_tree(plt, explanation: Explanation, path: Path) -> Optional[Path]:
    last = _read_tree(explanation)
    if last is None:
        return None
    panels = []
    if explanation.links:
        strongest, cut = _summarised(_strongest_links(explanation), MAX_LABELLED)
        if strongest.number_of_nodes():
            title = "Strongest links over the run\n(significant after adjustment; width: peak mutual information)"
            unlinked = len(explanation.names) - strongest.number_of_nodes()
            notes = [cut] if cut else []
            if unlinked and not cut:
                notes.append(f"{unlinked} settings without such a link are left out")
            panels.append((strongest, title + "".join(f"\n{note}" for note in notes)))
    final, cut = _summarised(last, MAX_LABELLED)
    panels.append(
        (
            final,
            "Last learned tree (tree.graphml)\n(width: mutual information among the last "
            "survivors)" + (f"\n{cut}" if cut else ""),
        )
    )
    size = max(7.0, 0.2 * max(g.number_of_nodes() for g, _ in panels) + 4)
    figure, axes = plt.subplots(1, len(panels), figsize=(size * len(panels), size), squeeze=False)
    for ax, (graph, title) in zip(axes[0], panels, strict=True):
        _draw_one_tree(plt, ax, graph, explanation, title)
    figure.suptitle("Node colour: the favoured value (faint: the best candidates disagree)", fontsize=9)
    return save_png(figure, path, dpi=110, bbox_inches="tight")


# -- the heat maps ------------------------------------------------------------------------------
def _shown_variables(explanation: Explanation) -> List[int]:
    """Every variable in tree order, or the most important ones (in tree order) above MAX_LABELLED."""
    order = explanation.tree_order
    if len(order) <= MAX_LABELLED:
        return list(order)
    chosen: List[int] = []
    for pair in explanation.pairs:
        for index in (pair.a, pair.b):
            if index not in chosen and len(chosen) < MAX_LABELLED:
                chosen.append(index)
    for v in explanation.variables:
        if len(chosen) >= MAX_LABELLED:
            break
        if v.index not in chosen:
            chosen.append(v.index)
    keep = set(chosen)
    return [i for i in order if i in keep]


def _heat(plt, figure, axes, matrix, labels, title, colour_label, diverging):
    masked = np.ma.masked_invalid(matrix)
    cmap = plt.get_cmap("RdBu" if diverging else "viridis").with_extremes(bad="#dddddd")
    if diverging:
        limit = float(np.nanmax(np.abs(matrix))) if np.isfinite(matrix).any() else 1.0
        limit = limit or 1.0
        image = axes.imshow(masked, cmap=cmap, vmin=-limit, vmax=limit, interpolation="nearest")
    else:
        image = axes.imshow(masked, cmap=cmap, vmin=0.0, interpolation="nearest")
    count = len(labels)
    font = 8 if count <= 25 else (6 if count <= 40 else 5)
    axes.set_xticks(range(count))
    axes.set_yticks(range(count))
    axes.set_xticklabels(labels, rotation=90, fontsize=font)
    axes.set_yticklabels(labels, fontsize=font)
    axes.set_title(title, fontsize=10)
    bar = figure.colorbar(image, ax=axes, fraction=0.046, pad=0.04)
    bar.set_label(colour_label, fontsize=8)


def _draw_interactions(plt, explanation: Explanation, path: Path) -> Optional[Path]:
    shown = _shown_variables(explanation)
    if len(shown) < 2 or (explanation.contrasts is None and explanation.peak_information is None):
        return None
    labels = [explanation.names[i] for i in shown]
    index = np.ix_(shown, shown)
    panels = []
    sign = 1.0 if explanation.goal == "maximize" else -1.0
    if explanation.contrasts is not None:
        contrast, se = explanation.contrasts.contrast[index], explanation.contrasts.se[index]
        with np.errstate(invalid="ignore"):
            clear = np.where(np.abs(contrast) > explanation.pair_threshold * se, sign * contrast, 0.0)
        panels.append(
            (
                np.where(np.isfinite(contrast), clear, np.nan),
                "Interaction of each pair (score units; white: does not stand out)",
                "blue: together better than apart; red: worse",
                True,
            )
        )
    if explanation.peak_information is not None:
        information = explanation.peak_information[index].copy()
        np.fill_diagonal(information, np.nan)
        panels.append((information, "Strongest link over the run (mutual information)", "nats", False))
    side = max(5.5, 0.16 * len(shown) + 3)
    figure, axes = plt.subplots(1, len(panels), figsize=(side * len(panels) + 1, side), squeeze=False)
    for ax, (matrix, title, colour_label, diverging) in zip(axes[0], panels, strict=True):
        _heat(plt, figure, ax, matrix, labels, title, colour_label, diverging)
    subtitle = (
        "settings in depth-first order of the tree of strongest links"
        if explanation.data.trees
        else "settings in depth-first order of the tree of strongest interactions"
    )
    if len(shown) < len(explanation.names):
        subtitle += f"; the {len(shown)} most important of {len(explanation.names)}"
    figure.suptitle(subtitle, fontsize=9)
    figure.tight_layout()
    return save_png(figure, path, dpi=110, bbox_inches="tight")


# -- convergence --------------------------------------------------------------------------------
def _draw_convergence(plt, explanation: Explanation, path: Path) -> Optional[Path]:
    log = [r for r in explanation.data.log if isinstance(r.get("evaluations"), (int, float))]
    if not log:
        return None
    evaluations = np.array([r["evaluations"] for r in log], dtype=float)
    best = np.array([np.nan if r.get("best") is None else r["best"] for r in log], dtype=float)
    mean = np.array([np.nan if r.get("mean") is None else r["mean"] for r in log], dtype=float)
    entropy = np.array([np.nan if r.get("model_entropy") is None else r["model_entropy"] for r in log], dtype=float)
    with_model = learns_model(explanation.data.method) and np.isfinite(entropy).any()
    figure, axes = plt.subplots(
        2 if with_model else 1, 1, figsize=(8, 6.5 if with_model else 4), sharex=True, squeeze=False
    )
    top = axes[0][0]
    top.plot(evaluations, best, label="best so far", color="#1f77b4")
    top.plot(evaluations, mean, label="generation mean", color="#ff7f0e", alpha=0.8)
    if explanation.data.optimum is not None:
        top.axhline(explanation.data.optimum, color="#777777", linestyle="--", linewidth=1, label="known optimum")
    top.set_ylabel(f"score ({explanation.goal})")
    top.legend(fontsize=8)
    top.grid(alpha=0.3)
    top.set_title(f"{explanation.data.problem}: convergence", fontsize=10)
    if with_model:
        bottom = axes[1][0]
        bottom.plot(evaluations, entropy, color="#2ca02c")
        bottom.set_ylabel("model entropy (nats)")
        bottom.grid(alpha=0.3)
    axes[-1][0].set_xlabel("evaluations")
    figure.tight_layout()
    return save_png(figure, path, dpi=110, bbox_inches="tight")


def write_pictures(explanation: Explanation, folder=None) -> Tuple[Dict[str, Path], Optional[str]]:
    """Draw ``tree.png``, ``interactions.png`` and ``convergence.png`` into ``folder`` (the run folder).

    Returns the pictures written and a note on what was skipped and why (``None`` if nothing was).
    """
    reason = pictures_unavailable()
    if reason is not None:
        return {}, reason
    folder = Path(folder) if folder is not None else explanation.data.path
    plt = pyplot()
    written: Dict[str, Path] = {}
    skipped = []
    drawers = {
        "tree.png": (_draw_tree, "no tree was learned"),
        "interactions.png": (_draw_interactions, "no pairwise estimates"),
        "convergence.png": (_draw_convergence, "log.jsonl has no generations"),
    }
    for name in PICTURES:
        draw, why = drawers[name]
        result = draw(plt, explanation, folder / name)
        if result is None:
            skipped.append(f"{name} ({why})")
        else:
            written[name] = result
    note = f"Not drawn: {', '.join(skipped)}." if skipped else None
    return written, note

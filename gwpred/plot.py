"""Drawings of labeled graphs with matplotlib (no global state; ``ax`` in, ``ax`` out)."""

from __future__ import annotations

from collections.abc import Hashable, Sequence
from typing import Any

import networkx as nx

__all__ = ["PALETTE", "draw_graph", "comparison_grid"]

#: Okabe-Ito colours, distinguishable with the common colour-vision deficiencies.
PALETTE = ["#E69F00", "#56B4E9", "#009E73", "#F0E442", "#0072B2", "#D55E00", "#CC79A7", "#999999"]
_EDGE_STYLES = {1: ("solid", 1.5), 2: ("solid", 3.5), 3: ("solid", 5.5)}


def _label_colours(labels: Sequence[Hashable]) -> dict[Hashable, str]:
    ordered = sorted(set(labels), key=lambda v: (type(v).__name__, str(v)))
    return {lab: PALETTE[i % len(PALETTE)] for i, lab in enumerate(ordered)}


def draw_graph(
    graph: nx.Graph,
    ax: Any = None,
    *,
    node_label: str = "label",
    edge_label: str = "label",
    colours: dict[Hashable, str] | None = None,
    title: str | None = None,
    seed: int = 0,
) -> Any:
    """Draw a labeled graph: node colour and text by label, edge width by edge label.

    Parameters
    ----------
    graph : networkx.Graph
    ax : matplotlib Axes, default=None
        Axes to draw into; a new figure is made when None.
    node_label, edge_label : str, default="label"
    colours : dict, default=None
        Node label -> colour; by default the colour-blind-safe :data:`PALETTE`.
    title : str, default=None
    seed : int, default=0
        Seed of the layout, for reproducible drawings.

    Returns
    -------
    matplotlib Axes

    Examples
    --------
    >>> import matplotlib; matplotlib.use("Agg")
    >>> g = nx.path_graph(3); nx.set_node_attributes(g, "C", "label")
    >>> ax = draw_graph(g)
    """
    import matplotlib.pyplot as plt

    if ax is None:
        _, ax = plt.subplots(figsize=(3, 3))
    labels = {v: d.get(node_label, "?") for v, d in graph.nodes(data=True)}
    colours = colours or _label_colours(list(labels.values()))
    if graph.number_of_nodes():
        pos = nx.kamada_kawai_layout(graph) if nx.is_connected(graph) and len(graph) > 2 else nx.spring_layout(graph, seed=seed)
        for u, v, d in graph.edges(data=True):
            style, width = _EDGE_STYLES.get(d.get(edge_label, 1), ("dashed", 1.5))
            ax.plot(*zip(pos[u], pos[v]), color="#444444", linestyle=style, linewidth=width, zorder=1,
                    solid_capstyle="round")
        for v, (x, y) in pos.items():
            ax.scatter([x], [y], s=320, color=colours.get(labels[v], "#999999"), edgecolors="black",
                       linewidths=0.8, zorder=2)
            ax.text(x, y, str(labels[v]), ha="center", va="center", fontsize=8, zorder=3)
    ax.set_aspect("equal")
    ax.margins(0.2)
    ax.set_axis_off()
    if title:
        ax.set_title(title, fontsize=9)
    return ax


def comparison_grid(
    predicted: Sequence[nx.Graph],
    true: Sequence[nx.Graph],
    path: str,
    *,
    titles: Sequence[str] | None = None,
    caption: str | None = None,
    node_label: str = "label",
    edge_label: str = "label",
) -> None:
    """Write a PNG grid of predicted graphs, each beside its true graph (two pairs a row).

    Parameters
    ----------
    predicted, true : sequence of networkx.Graph
    path : str
        Output PNG path.
    titles : sequence of str, default=None
        One line per row (for example the GED), shown over the predicted graph.
    caption : str, default=None
        Text under the figure (for example a caution line).
    node_label, edge_label : str, default="label"
    """
    import matplotlib

    matplotlib.use("Agg", force=False)
    import matplotlib.pyplot as plt

    per_row = 2 if len(predicted) > 1 else 1  # two (predicted, true) pairs side by side
    rows = -(-len(predicted) // per_row)
    labels = [d.get(node_label) for g in list(predicted) + list(true) for _, d in g.nodes(data=True)]
    colours = _label_colours(labels)
    height = 2.4 * rows + 0.6
    fig, axes = plt.subplots(rows, 2 * per_row, figsize=(5.2 * per_row, height), squeeze=False)
    for ax in axes.ravel():
        ax.set_axis_off()
    for k, (p, t) in enumerate(zip(predicted, true)):
        r, c = divmod(k, per_row)
        head = f"predicted ({titles[k]})" if titles else "predicted"
        draw_graph(p, axes[r, 2 * c], node_label=node_label, edge_label=edge_label, colours=colours, title=head)
        draw_graph(t, axes[r, 2 * c + 1], node_label=node_label, edge_label=edge_label, colours=colours, title="true")
    handles = [plt.Line2D([], [], marker="o", linestyle="", markersize=9, markerfacecolor=c,
                          markeredgecolor="black", label=str(lab)) for lab, c in colours.items()]
    fig.legend(handles=handles, loc="upper center", ncol=len(handles), frameon=False, fontsize=8,
               title="node label (edge width = edge label 1/2/3)", title_fontsize=8)
    if caption:
        fig.text(0.5, 0.005, caption, ha="center", va="bottom", fontsize=6.5, wrap=True)
    fig.tight_layout(rect=(0, 0.5 / height if caption else 0, 1, 1 - 0.5 / height))
    fig.savefig(path, dpi=110)
    plt.close(fig)

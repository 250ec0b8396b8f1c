"""Drawings of labeled graphs and soft barycenters with matplotlib.

Every drawing function takes an optional ``ax`` (a new figure is made when it is
None) and returns the Axes it drew into; nothing here changes matplotlib's global
settings. Colours come from the Okabe-Ito palette (:data:`PALETTE`), which stays
distinguishable with the common colour-vision deficiencies; every colour is paired
with a second cue (the label text in a node, the number of strokes or the dash
pattern of an edge, the shape of an edit mark).

The drawn elements carry ``gid`` tags so that they can be found again (tests, SVG
post-processing): ``"gwpred-nodes"`` (one scatter per drawn graph, one point per
node), ``"gwpred-edges"`` (line collections, one segment per edge) and
``"gwpred-edit-<node|edge>-<kind>"`` for the edit marks of :func:`draw_alignment`.
"""

from __future__ import annotations

import math
from collections.abc import Hashable, Mapping, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import matplotlib.pyplot as plt
import networkx as nx
import numpy as np
from matplotlib import patheffects as pe
from matplotlib.collections import LineCollection
from matplotlib.figure import Figure
from matplotlib.lines import Line2D
from matplotlib.patches import Rectangle
from numpy.typing import ArrayLike, NDArray

from ._utils import atomic_open
from .ged import edit_distance

__all__ = [
    "EDIT_COLOURS",
    "PALETTE",
    "AlignmentEdits",
    "alignment_edits",
    "comparison_grid",
    "draw_alignment",
    "draw_graph",
    "draw_neighbors",
    "draw_node_scores",
    "draw_structure",
    "edge_styles",
    "graph_layout",
    "label_colours",
]

#: Okabe-Ito colours, distinguishable with the common colour-vision deficiencies.
PALETTE = [
    "#E69F00",
    "#56B4E9",
    "#009E73",
    "#F0E442",
    "#0072B2",
    "#D55E00",
    "#CC79A7",
    "#999999",
]

#: Colours of the edit marks of :func:`draw_alignment` (Okabe-Ito vermillion, blue and
#: reddish purple); node labels get the other palette colours first.
EDIT_COLOURS = {"deleted": "#D55E00", "inserted": "#0072B2", "substituted": "#CC79A7"}

# Shapes of the edit marks: a second cue next to the colour.
_EDIT_MARKERS = {"substituted": "o", "deleted": "s", "inserted": "D"}
_EDIT_KINDS = ("substituted", "deleted", "inserted")
# Node label colours, in the order they are handed out: the palette minus the edit colours.
_LABEL_ORDER = [
    "#999999",
    "#56B4E9",
    "#E69F00",
    "#009E73",
    "#F0E442",
    "#0072B2",
    "#CC79A7",
    "#D55E00",
]
# Element symbols get fixed colours close to the usual ones (carbon grey, nitrogen blue,
# oxygen orange instead of red, which marks deletions here).
_ELEMENT_COLOURS = {
    "C": "#999999",
    "N": "#56B4E9",
    "O": "#E69F00",
    "F": "#009E73",
    "S": "#F0E442",
}
_EDGE_COLOUR = "#404040"
_MATCHED_EDGE = "#404040"
# Edge looks handed to labels that are not bond orders 1, 2 or 3: (strokes, line style).
_STYLE_CYCLE = [
    (1, "solid"),
    (1, "dashed"),
    (1, "dotted"),
    (1, "dashdot"),
    (2, "dashed"),
    (2, "dotted"),
    (3, "dashed"),
]
_BASE_WIDTH = 1.3  # width in points of one stroke of an edge


def _sort_key(value: Any) -> tuple[str, str]:
    return (type(value).__name__, str(value))


def _is_bond_order(value: Any) -> bool:
    return (
        isinstance(value, (int, np.integer))
        and not isinstance(value, bool)
        and 1 <= value <= 3
    )


def _edge_value(data: Mapping, edge_label: Hashable | None) -> Any:
    return None if edge_label is None else data.get(edge_label)


# --------------------------------------------------------------------------- colours, styles


def label_colours(labels: Sequence[Hashable]) -> dict[Hashable, str]:
    """Colour per node label: element symbols get fixed colours, other labels the palette.

    Parameters
    ----------
    labels : sequence of hashable
        Node labels (repeats allowed).

    Returns
    -------
    dict
        Label -> hex colour. ``C``, ``N``, ``O``, ``F`` and ``S`` get grey, sky blue,
        orange, bluish green and yellow; other labels, in sorted order, the first
        palette colours not yet used (the edit-mark colours of :data:`EDIT_COLOURS`
        come last). Colours repeat beyond eight labels; the label is written in each
        node, so the drawing stays unambiguous.

    Examples
    --------
    >>> label_colours(["C", "O", "C", "Cl"])
    {'C': '#999999', 'Cl': '#56B4E9', 'O': '#E69F00'}
    """
    ordered = sorted(set(labels), key=_sort_key)
    out: dict[Hashable, str] = {}
    for lab in ordered:
        if (
            isinstance(lab, str)
            and lab in _ELEMENT_COLOURS
            and _ELEMENT_COLOURS[lab] not in out.values()
        ):
            out[lab] = _ELEMENT_COLOURS[lab]
    free = [c for c in _LABEL_ORDER if c not in out.values()] or _LABEL_ORDER
    rest = [lab for lab in ordered if lab not in out]
    for k, lab in enumerate(rest):
        out[lab] = free[k % len(free)]
    return {lab: out[lab] for lab in ordered}


def edge_styles(labels: Sequence[Any]) -> dict[Any, tuple[int, str]]:
    """Look of each edge label: number of parallel strokes and dash pattern.

    Parameters
    ----------
    labels : sequence
        Edge labels (repeats allowed; ``None`` for edges without a label).

    Returns
    -------
    dict
        Label -> ``(strokes, linestyle)``. Bond orders 1, 2 and 3 (ints) are drawn with
        1, 2 and 3 solid strokes, as in chemical drawings (common practice); other labels,
        in sorted order, get the remaining looks of a fixed cycle.

    Examples
    --------
    >>> edge_styles([1, 2, 1])
    {1: (1, 'solid'), 2: (2, 'solid')}
    >>> edge_styles(["a", "b"])
    {'a': (1, 'solid'), 'b': (1, 'dashed')}
    """
    ordered = sorted(set(labels), key=_sort_key)
    out: dict[Any, tuple[int, str]] = {}
    for lab in ordered:
        if _is_bond_order(lab):
            out[lab] = (int(lab), "solid")
    free = [s for s in _STYLE_CYCLE if s not in out.values()]
    rest = [lab for lab in ordered if lab not in out]
    for k, lab in enumerate(rest):
        out[lab] = free[k % len(free)]
    return {lab: out[lab] for lab in ordered}


def _stroke_effects(strokes: int, width: float, background: Any) -> list:
    """Path effects that draw one line as 1, 2 or 3 parallel strokes of ``width``."""

    if strokes <= 1:
        return []
    if strokes == 2:
        return [
            pe.Stroke(linewidth=3 * width),
            pe.Stroke(linewidth=width, foreground=background),
        ]
    return [
        pe.Stroke(linewidth=5 * width),
        pe.Stroke(linewidth=3 * width, foreground=background),
        pe.Stroke(linewidth=width),
    ]


# --------------------------------------------------------------------------- layout


def _stress_layout(
    graph: nx.Graph, max_iter: int = 300, tol: float = 1e-5
) -> NDArray[np.float64]:
    """Positions whose distances follow the graph's shortest-path distances (one component).

    Stress majorization (Gansner, Koren and North, "Graph drawing by stress
    majorization", Graph Drawing 2004): minimise sum_ij d_ij^-2 (|x_i - x_j| - d_ij)^2 by
    repeated Guttman transforms, starting from classical multidimensional scaling of the
    distances plus a small fixed jitter; then the principal axis is turned horizontal.
    Deterministic.
    """
    n = graph.number_of_nodes()
    D = np.asarray(nx.floyd_warshall_numpy(graph, weight=None), dtype=float)
    # classical scaling: top two eigenvectors of the double-centred squared distances
    J = np.eye(n) - 1.0 / n
    vals, vecs = np.linalg.eigh(-0.5 * J @ (D**2) @ J)
    X = vecs[:, -2:][:, ::-1] * np.sqrt(np.maximum(vals[-2:][::-1], 0.0))
    # Nodes with equal distances to all others (two leaves on one node) start at one
    # point and would never part: a small fixed jitter separates them.
    X = X + np.random.default_rng(0).normal(scale=0.05, size=X.shape)
    W = np.zeros_like(D)
    off = ~np.eye(n, dtype=bool)
    W[off] = D[off] ** -2.0
    L_pinv = np.linalg.pinv(np.diag(W.sum(1)) - W)

    def stress(Y: NDArray[np.float64]) -> float:
        dist = np.sqrt(((Y[:, None] - Y[None]) ** 2).sum(-1))
        return float((W * (dist - D) ** 2).sum())

    old = stress(X)
    for _ in range(max_iter):
        dist = np.sqrt(((X[:, None] - X[None]) ** 2).sum(-1))
        with np.errstate(divide="ignore", invalid="ignore"):
            B = np.where(dist > 1e-12, -W * D / dist, 0.0)
        np.fill_diagonal(B, 0.0)
        np.fill_diagonal(B, -B.sum(1))
        X = L_pinv @ B @ X
        new = stress(X)
        if old - new <= tol * max(old, 1e-12):
            break
        old = new
    X = X - X.mean(0)
    _, _, vt = np.linalg.svd(X, full_matrices=False)
    X = X @ vt.T
    for k in range(
        2
    ):  # a fixed orientation: the farthest point on each axis is positive
        if X[np.argmax(np.abs(X[:, k])), k] < 0:
            X[:, k] = -X[:, k]
    return X


def _component_layout(
    graph: nx.Graph, seed: int
) -> dict[Hashable, NDArray[np.float64]]:
    del seed  # the layout is deterministic; kept for a uniform signature
    nodes = list(graph.nodes)
    if len(nodes) == 1:
        return {nodes[0]: np.zeros(2)}
    if len(nodes) == 2:
        return {nodes[0]: np.array([0.0, 0.0]), nodes[1]: np.array([1.0, 0.0])}
    X = _stress_layout(graph)
    return {v: X[i] for i, v in enumerate(nodes)}


def _normalised(
    pos: Mapping[Hashable, ArrayLike], size: float = 1.0
) -> dict[Hashable, NDArray[np.float64]]:
    """Scale positions uniformly into a box of side ``size``, centred."""
    if not pos:
        return {}
    xy = np.array([np.asarray(p, dtype=float) for p in pos.values()]).reshape(-1, 2)
    lo, hi = xy.min(0), xy.max(0)
    span = float((hi - lo).max())
    scale = size / span if span > 0 else 1.0
    centre = (lo + hi) / 2
    return {
        v: (np.asarray(p, dtype=float) - centre) * scale + size / 2
        for v, p in pos.items()
    }


def graph_layout(
    graph: nx.Graph, *, seed: int = 0
) -> dict[Hashable, NDArray[np.float64]]:
    """2-D positions for drawing a graph, scaled into the unit square.

    Each connected component is laid out by stress majorization, so that drawn distances
    follow graph distances (few crossings and even spacing for the small, sparse graphs
    of up to about 30 nodes shown here); components are placed side by side, largest
    first, each scaled by the square root of its size.

    Parameters
    ----------
    graph : networkx.Graph
    seed : int, default=0
        Kept for reproducible drawings; the layout itself is deterministic.

    Returns
    -------
    dict
        Node -> array of shape (2,), inside ``[0, 1] x [0, 1]``.

    Examples
    --------
    >>> pos = graph_layout(nx.path_graph(4))
    >>> sorted(pos) == [0, 1, 2, 3] and all(0 <= c <= 1 for p in pos.values() for c in p)
    True
    """
    comps = sorted(
        nx.connected_components(graph),
        key=lambda c: (-len(c), _sort_key(min(c, key=_sort_key))),
    )
    out: dict[Hashable, NDArray[np.float64]] = {}
    x = 0.0
    for comp in comps:
        side = math.sqrt(len(comp))
        pos = _normalised(_component_layout(graph.subgraph(comp), seed), size=side)
        if len(comp) == 1:
            pos = {v: np.array([side / 2, side / 2]) for v in comp}
        xs = np.array([p[0] for p in pos.values()])
        shift = x - xs.min()
        for v, p in pos.items():
            out[v] = p + np.array([shift, 0.0])
        x = float(max(p[0] for p in out.values())) + 1.0
    return _normalised(out)


# --------------------------------------------------------------------------- low-level drawing


def _new_axes(ax: Any, figsize: tuple[float, float]) -> Any:
    if ax is not None:
        return ax

    _, ax = plt.subplots(figsize=figsize)
    return ax


def _points_per_unit(
    ax: Any, xlim: tuple[float, float], ylim: tuple[float, float]
) -> float:
    """Points per data unit of an equal-aspect axes showing ``xlim`` x ``ylim``."""
    fig = ax.figure
    box = ax.get_position()
    w_pt = box.width * fig.get_figwidth() * 72
    h_pt = box.height * fig.get_figheight() * 72
    return min(w_pt / max(xlim[1] - xlim[0], 1e-9), h_pt / max(ylim[1] - ylim[0], 1e-9))


def _nearest_distances(pos: Mapping[Hashable, NDArray[np.float64]]) -> list[float]:
    xy = np.array(list(pos.values()), dtype=float).reshape(-1, 2)
    if len(xy) < 2:
        return []
    d = np.sqrt(((xy[:, None, :] - xy[None, :, :]) ** 2).sum(-1))
    np.fill_diagonal(d, np.inf)
    return [float(v) for v in d.min(1)]


def _marker_sizes(
    ax: Any, layouts: Sequence[Mapping], xlim: tuple, ylim: tuple
) -> tuple[float, float]:
    """Node diameter (points) and label font size that keep nodes apart."""
    dists = [d for pos in layouts for d in _nearest_distances(pos)]
    unit = _points_per_unit(ax, xlim, ylim)
    typical = float(np.median(dists)) * unit if dists else 40.0
    diameter = min(max(0.6 * typical, 7.0), 22.0)
    return diameter, min(max(0.5 * diameter, 5.0), 9.0)


@dataclass
class _Style:
    colours: dict[Hashable, str]
    styles: dict[Any, tuple[int, str]]
    node_label: Hashable
    edge_label: Hashable | None
    diameter: float = 16.0
    fontsize: float = 8.0
    radius: float = 0.0  # node radius in data units (0: edges are never bent)


def _make_style(
    ax: Any,
    colours: dict[Hashable, str],
    styles: dict[Any, tuple[int, str]],
    node_label: Hashable,
    edge_label: Hashable | None,
    layouts: Sequence[Mapping],
    xlim: tuple,
    ylim: tuple,
) -> _Style:
    diameter, fontsize = _marker_sizes(ax, layouts, xlim, ylim)
    radius = 0.5 * diameter / _points_per_unit(ax, xlim, ylim)
    return _Style(colours, styles, node_label, edge_label, diameter, fontsize, radius)


def _edge_path(
    a: NDArray[np.float64],
    b: NDArray[np.float64],
    others: NDArray[np.float64],
    radius: float,
) -> NDArray[np.float64]:
    """Points of an edge from a to b: straight, or bent round nodes it would cross.

    ``others`` holds the positions of the nodes other than the two ends. The edge is a
    quadratic curve through a control point off the middle, the first of a few bends
    (alternating sides, growing) that keeps clear of every other node's disc.
    """
    t = np.linspace(0.0, 1.0, 17)[:, None]
    straight = a + t * (b - a)
    if radius <= 0 or len(others) == 0:
        return np.array([a, b])

    def clear(points: NDArray[np.float64]) -> bool:
        d = np.sqrt(((points[:, None, :] - others[None, :, :]) ** 2).sum(-1))
        return bool(d.min() > 1.2 * radius)

    if clear(straight):
        return np.array([a, b])
    normal = np.array([-(b - a)[1], (b - a)[0]])
    for h in (0.25, -0.25, 0.45, -0.45, 0.7, -0.7):
        ctrl = (a + b) / 2 + h * normal
        curve = (1 - t) ** 2 * a + 2 * (1 - t) * t * ctrl + t**2 * b
        if clear(curve):
            return curve
    return np.array([a, b])


def _edge_paths(
    graph: nx.Graph, pos: Mapping, radius: float
) -> dict[tuple, NDArray[np.float64]]:
    """Drawn points of every edge, keyed both ways round."""
    nodes = list(graph.nodes)
    xy = np.array([pos[v] for v in nodes], dtype=float).reshape(-1, 2)
    index = {v: i for i, v in enumerate(nodes)}
    out = {}
    for u, v in graph.edges:
        keep = np.ones(len(nodes), dtype=bool)
        keep[[index[u], index[v]]] = False
        path = _edge_path(xy[index[u]], xy[index[v]], xy[keep], radius)
        out[(u, v)] = path
        out[(v, u)] = path[::-1]
    return out


def _draw_edges(
    ax: Any,
    graph: nx.Graph,
    pos: Mapping,
    st: _Style,
    colour_of: Mapping[tuple, str] | None = None,
) -> dict[tuple, NDArray[np.float64]]:
    """One LineCollection per (look, colour); every edge is one (maybe bent) line.

    Returns the drawn points of every edge, keyed both ways round.
    """

    paths = _edge_paths(graph, pos, st.radius)
    groups: dict[tuple, list] = {}
    for u, v, d in graph.edges(data=True):
        look = st.styles.get(_edge_value(d, st.edge_label), (1, "solid"))
        colour = (colour_of or {}).get((u, v), _EDGE_COLOUR)
        groups.setdefault((look, colour), []).append(paths[(u, v)])
    background = ax.get_facecolor()
    for ((strokes, linestyle), colour), segs in groups.items():
        coll = LineCollection(
            segs,
            colors=colour,
            linewidths=_BASE_WIDTH,
            linestyles=linestyle,
            capstyle="butt",
            zorder=1,
        )
        coll.set_path_effects(_stroke_effects(strokes, _BASE_WIDTH, background))
        coll.set_gid("gwpred-edges")
        ax.add_collection(coll)
    return paths


def _draw_nodes(ax: Any, graph: nx.Graph, pos: Mapping, st: _Style) -> None:
    """One scatter for all nodes, the label written inside each."""
    nodes = list(graph.nodes)
    if not nodes:
        return
    xy = np.array([pos[v] for v in nodes], dtype=float).reshape(-1, 2)
    labels = [graph.nodes[v].get(st.node_label, "?") for v in nodes]
    faces = [st.colours.get(lab, "#FFFFFF") for lab in labels]
    coll = ax.scatter(
        xy[:, 0],
        xy[:, 1],
        s=st.diameter**2,
        c=faces,
        edgecolors="black",
        linewidths=0.7,
        zorder=3,
    )
    coll.set_gid("gwpred-nodes")
    for (x, y), lab in zip(xy, labels):
        ax.text(
            x, y, str(lab), ha="center", va="center", fontsize=st.fontsize, zorder=5
        )


def _limits(
    points: Sequence[NDArray[np.float64]], pad: float = 0.12
) -> tuple[tuple, tuple]:
    if not points:
        return (-0.5, 1.5), (-0.5, 1.5)
    xy = np.array(points, dtype=float).reshape(-1, 2)
    lo, hi = xy.min(0) - pad, xy.max(0) + pad
    return (float(lo[0]), float(hi[0])), (float(lo[1]), float(hi[1]))


def _frame(ax: Any, xlim: tuple, ylim: tuple) -> None:
    ax.set_xlim(*xlim)
    ax.set_ylim(*ylim)
    ax.set_aspect("equal")
    ax.set_axis_off()


def _legend_handles(
    colours: Mapping[Hashable, str],
    styles: Mapping[Any, tuple[int, str]],
    edge_name: str,
    background: Any = "white",
) -> list:

    handles = [
        Line2D(
            [],
            [],
            marker="o",
            linestyle="",
            markersize=8,
            markerfacecolor=c,
            markeredgecolor="black",
            label=str(lab),
        )
        for lab, c in colours.items()
    ]
    for lab, (strokes, linestyle) in styles.items():
        line = Line2D(
            [],
            [],
            color=_EDGE_COLOUR,
            linewidth=_BASE_WIDTH,
            linestyle=linestyle,
            label=f"{edge_name} {lab}"
            if lab is not None
            else f"{edge_name} (no label)",
        )
        line.set_path_effects(_stroke_effects(strokes, _BASE_WIDTH, background))
        handles.append(line)
    return handles


def _place_legend(ax: Any, handles: list, ncol: int | None = None) -> None:
    if not handles:
        return
    ax.legend(
        handles=handles,
        loc="upper center",
        bbox_to_anchor=(0.5, 0.0),
        ncol=ncol or min(len(handles), 5),
        frameon=False,
        fontsize=7,
        handlelength=2.6,
        columnspacing=1.2,
    )


def _labels_of(graphs: Sequence[nx.Graph], node_label: Hashable) -> list:
    return [d.get(node_label, "?") for g in graphs for _, d in g.nodes(data=True)]


def _edge_labels_of(graphs: Sequence[nx.Graph], edge_label: Hashable | None) -> list:
    return [
        _edge_value(d, edge_label) for g in graphs for _, _, d in g.edges(data=True)
    ]


def _check_graph(graph: Any, name: str) -> nx.Graph:
    if not isinstance(graph, nx.Graph):
        raise TypeError(
            f"{name} must be a networkx.Graph, got {type(graph).__name__}; build one with networkx.Graph()"
        )
    if graph.is_directed() or graph.is_multigraph():
        raise TypeError(
            f"{name} is a {type(graph).__name__}; only simple undirected graphs are drawn, convert it with networkx.Graph({name})"
        )
    return graph


# --------------------------------------------------------------------------- one graph


def draw_graph(
    graph: nx.Graph,
    ax: Any = None,
    *,
    node_label: Hashable = "label",
    edge_label: Hashable | None = "label",
    colours: dict[Hashable, str] | None = None,
    title: str | None = None,
    seed: int = 0,
    pos: Mapping[Hashable, ArrayLike] | None = None,
    legend: bool = True,
    edge_name: str = "edge",
) -> Any:
    """Draw a labeled graph: node colour and text by label, edge strokes by edge label.

    Parameters
    ----------
    graph : networkx.Graph
    ax : matplotlib Axes, default=None
        Axes to draw into; a new figure is made when None.
    node_label : hashable, default="label"
        Node attribute holding the label (nodes without it show ``?``).
    edge_label : hashable or None, default="label"
        Edge attribute holding the label; None draws every edge alike.
    colours : dict, default=None
        Node label -> colour; by default :func:`label_colours`.
    title : str, default=None
    seed : int, default=0
        Passed to :func:`graph_layout`.
    pos : dict, default=None
        Node -> (x, y) positions; by default :func:`graph_layout`.
    legend : bool, default=True
        Add a legend (node labels, then edge labels) under the drawing.
    edge_name : str, default="edge"
        Word before each edge label in the legend (for example ``"bond order"``).

    Returns
    -------
    matplotlib Axes

    Raises
    ------
    TypeError
        If ``graph`` is not a simple undirected networkx graph.
    ValueError
        If ``pos`` lacks a node of the graph.

    Examples
    --------
    >>> import matplotlib; matplotlib.use("Agg")
    >>> g = nx.path_graph(3); nx.set_node_attributes(g, "C", "label")
    >>> ax = draw_graph(g)
    >>> [t.get_text() for t in ax.get_legend().get_texts()]
    ['C', 'edge (no label)']
    """
    _check_graph(graph, "graph")
    ax = _new_axes(ax, (3.2, 3.4))
    if pos is None:
        layout = graph_layout(graph, seed=seed)
    else:
        missing = [v for v in graph.nodes if v not in pos]
        if missing:
            raise ValueError(
                f"pos has no position for node(s) {missing[:5]!r}; give one (x, y) per node or pass pos=None"
            )
        layout = {v: np.asarray(pos[v], dtype=float) for v in graph.nodes}
    colours = colours or label_colours(_labels_of([graph], node_label))
    styles = edge_styles(_edge_labels_of([graph], edge_label))
    xlim, ylim = _limits(list(layout.values()))
    _frame(ax, xlim, ylim)
    st = _make_style(ax, colours, styles, node_label, edge_label, [layout], xlim, ylim)
    _draw_edges(ax, graph, layout, st)
    _draw_nodes(ax, graph, layout, st)
    if title:
        ax.set_title(title, fontsize=9)
    if legend:
        present = set(_labels_of([graph], node_label))
        used = {lab: c for lab, c in colours.items() if lab in present}
        _place_legend(ax, _legend_handles(used, styles, edge_name, ax.get_facecolor()))
    return ax


# --------------------------------------------------------------------------- alignment


@dataclass(frozen=True)
class AlignmentEdits:
    """The edit operations of a node map from a predicted graph to a true graph.

    Node pairs are ``(predicted node, true node)``; edges are given as node pairs of
    their own graph (predicted edges for ``*_deleted``, true edges for ``*_inserted``,
    ``(predicted edge, true edge)`` pairs for matched and substituted edges).
    """

    nodes_matched: list = field(default_factory=list)
    nodes_substituted: list = field(default_factory=list)
    nodes_deleted: list = field(default_factory=list)
    nodes_inserted: list = field(default_factory=list)
    edges_matched: list = field(default_factory=list)
    edges_substituted: list = field(default_factory=list)
    edges_deleted: list = field(default_factory=list)
    edges_inserted: list = field(default_factory=list)

    @property
    def cost(self) -> int:
        """Number of edit operations: the edit path's cost under unit costs."""
        return sum(
            len(getattr(self, f"{part}_{kind}"))
            for part in ("nodes", "edges")
            for kind in _EDIT_KINDS
        )

    def counts(self) -> dict[str, int]:
        """Number of each edit, keyed ``"node substituted"``, ..., ``"edge inserted"``."""
        return {
            f"{part[:-1]} {kind}": len(getattr(self, f"{part}_{kind}"))
            for part in ("nodes", "edges")
            for kind in _EDIT_KINDS
        }

    def describe(self) -> str:
        """One line such as ``"cost 3: 1 node substituted, 2 edges deleted"``."""
        parts = []
        for key, k in self.counts().items():
            if k:
                part, kind = key.split(" ")
                parts.append(f"{k} {part}{'s' if k > 1 else ''} {kind}")
        return f"cost {self.cost}: " + (
            ", ".join(parts) if parts else "no edits (same graph)"
        )


def _check_mapping(predicted: nx.Graph, true: nx.Graph, mapping: Any) -> dict:
    if not isinstance(mapping, Mapping):
        raise TypeError(
            f"mapping must be a dict (predicted node -> true node or None), got {type(mapping).__name__}; "
            "use EditDistance.mapping from gwpred.metrics.edit_distance"
        )
    missing = [v for v in predicted.nodes if v not in mapping]
    if missing:
        raise ValueError(
            f"mapping has no entry for predicted node(s) {missing[:5]!r}; map every predicted node to a true "
            "node or to None (deleted)"
        )
    extra = [u for u in mapping if u not in predicted]
    if extra:
        raise ValueError(
            f"mapping has key(s) {extra[:5]!r} that are not nodes of the predicted graph"
        )
    images = [v for v in mapping.values() if v is not None]
    unknown = [v for v in images if v not in true]
    if unknown:
        raise ValueError(
            f"mapping sends nodes to {unknown[:5]!r}, which are not nodes of the true graph"
        )
    if len(set(images)) != len(images):
        seen: set = set()
        dup = next(v for v in images if v in seen or seen.add(v))  # type: ignore[func-returns-value]
        raise ValueError(
            f"mapping sends two predicted nodes to true node {dup!r}; a node map must be one-to-one"
        )
    return dict(mapping)


def alignment_edits(
    predicted: nx.Graph,
    true: nx.Graph,
    mapping: Mapping[Hashable, Hashable | None],
    *,
    node_label: Hashable = "label",
    edge_label: Hashable | None = "label",
) -> AlignmentEdits:
    """Sort the nodes and edges of two graphs into matched, substituted, deleted, inserted.

    Parameters
    ----------
    predicted, true : networkx.Graph
    mapping : dict
        Every node of ``predicted`` -> a node of ``true`` or None (deleted), one-to-one,
        as in :attr:`gwpred.metrics.EditDistance.mapping`. True nodes that are no image
        are inserted. An edge whose two end nodes map onto an edge is matched (same label)
        or substituted; every other predicted edge is deleted, every other true edge inserted.
    node_label : hashable, default="label"
    edge_label : hashable or None, default="label"
        None compares edges without labels.

    Returns
    -------
    AlignmentEdits
        Its ``cost`` is the edit path's cost under unit costs, the ``value`` that
        :func:`gwpred.metrics.edit_distance` reports for this mapping.

    Raises
    ------
    TypeError
        If ``mapping`` is not a dict, or a graph is not a simple undirected networkx graph.
    ValueError
        If ``mapping`` misses a predicted node, has a key that is no predicted node, sends a
        node outside ``true``, or sends two nodes to the same true node.

    Examples
    --------
    >>> p = nx.Graph([(0, 1)]); nx.set_node_attributes(p, {0: "C", 1: "O"}, "label")
    >>> t = nx.Graph([("a", "b"), ("b", "c")]); nx.set_node_attributes(t, "C", "label")
    >>> alignment_edits(p, t, {0: "a", 1: "b"}, edge_label=None).describe()
    'cost 3: 1 node substituted, 1 node inserted, 1 edge inserted'
    """
    _check_graph(predicted, "predicted")
    _check_graph(true, "true")
    mapping = _check_mapping(predicted, true, mapping)
    out = AlignmentEdits()
    for u, v in mapping.items():
        if v is None:
            out.nodes_deleted.append(u)
        elif predicted.nodes[u].get(node_label) == true.nodes[v].get(node_label):
            out.nodes_matched.append((u, v))
        else:
            out.nodes_substituted.append((u, v))
    images = {v for v in mapping.values() if v is not None}
    out.nodes_inserted.extend(v for v in true.nodes if v not in images)
    covered = set()
    for a, b, d in predicted.edges(data=True):
        x, y = mapping[a], mapping[b]
        if x is not None and y is not None and true.has_edge(x, y):
            covered.add(frozenset((x, y)))
            same = _edge_value(d, edge_label) == _edge_value(
                true.edges[x, y], edge_label
            )
            (out.edges_matched if same else out.edges_substituted).append(
                ((a, b), (x, y))
            )
        else:
            out.edges_deleted.append((a, b))
    out.edges_inserted.extend(
        (x, y) for x, y in true.edges if frozenset((x, y)) not in covered
    )
    return out


def _place_loose(
    graph: nx.Graph, fixed: dict, loose: list, unit: float, seed: int, steps: int = 60
) -> dict[Hashable, NDArray[np.float64]]:
    """Positions for the nodes of ``graph`` not in ``fixed``, which stay where they are.

    A loose node starts next to its placed neighbours (breadth first from the fixed
    nodes), pushed away from the drawing's centre; then stress majorization moves only
    the loose nodes (each to the weighted mean of where its distances to the others
    want it), with graph distances times ``unit`` as targets. Loose nodes cut off from
    every fixed node are laid out on their own to the right.
    """
    pos = {u: np.asarray(p, dtype=float).copy() for u, p in fixed.items()}
    rng = np.random.default_rng(seed)
    centre = np.mean(list(pos.values()), axis=0)
    frontier = [u for u in loose if any(w in pos for w in graph.neighbors(u))]
    todo = set(loose)
    while frontier:
        nxt = []
        for u in frontier:
            if u in pos:
                continue
            near = np.mean([pos[w] for w in graph.neighbors(u) if w in pos], axis=0)
            out = near - centre
            norm = float(np.linalg.norm(out))
            direction = out / norm if norm > 1e-9 else np.array([1.0, 0.0])
            pos[u] = near + unit * direction + rng.normal(scale=0.1 * unit, size=2)
            todo.discard(u)
            nxt.extend(w for w in graph.neighbors(u) if w not in pos)
        frontier = nxt
    placed = [u for u in loose if u in pos]
    if placed:
        nodes = list(pos)
        index = {u: i for i, u in enumerate(nodes)}
        dist = dict(nx.all_pairs_shortest_path_length(graph.subgraph(nodes)))
        D = np.full((len(nodes), len(nodes)), np.inf)
        for u, row in dist.items():
            for w, d in row.items():
                D[index[u], index[w]] = d * unit
        with np.errstate(divide="ignore"):
            W = np.where(np.isfinite(D) & (D > 0), D**-2.0, 0.0)
        X = np.array([pos[u] for u in nodes])
        movable = [index[u] for u in placed]
        for _ in range(steps):
            for i in movable:
                diff = X[i] - X
                norm = np.sqrt((diff**2).sum(1))
                norm[norm < 1e-9] = 1e-9
                target = (
                    X
                    + np.where(np.isfinite(D[i]), D[i], 0.0)[:, None]
                    * diff
                    / norm[:, None]
                )
                X[i] = (W[i][:, None] * target).sum(0) / W[i].sum()
        pos = {u: X[index[u]] for u in nodes}
    if todo:  # components without a mapped node: drawn beside the rest
        rest = graph.subgraph(todo)
        sub = graph_layout(rest, seed=seed)
        xy = np.array(list(pos.values()))
        scale = unit * max(math.sqrt(len(todo)), 1.0)
        x0 = xy[:, 0].max() + unit
        y0 = xy[:, 1].mean() - scale / 2
        for u, p in sub.items():
            pos[u] = np.array([x0, y0]) + scale * p
    return pos


def _aligned_layouts(
    predicted: nx.Graph, true: nx.Graph, mapping: Mapping, seed: int
) -> tuple[dict, dict]:
    """Positions of both graphs in one frame; a mapped predicted node sits where its image does."""
    pos_t = graph_layout(true, seed=seed)
    mapped = [u for u, v in mapping.items() if v is not None]
    pos_p: dict[Hashable, NDArray[np.float64]] = {
        u: pos_t[mapping[u]].copy() for u in mapped
    }
    loose = [u for u in predicted.nodes if u not in pos_p]
    if loose and not mapped:
        pos_p = graph_layout(predicted, seed=seed)
    elif loose:
        lengths = [np.linalg.norm(pos_t[x] - pos_t[y]) for x, y in true.edges]
        unit = float(np.median(lengths)) if lengths else 1.0 / math.sqrt(len(pos_t))
        pos_p = _place_loose(predicted, pos_p, loose, unit, seed)
    # one scale for both sides, so that mapped nodes keep their places
    joint = _normalised(
        {("p", u): p for u, p in pos_p.items()}
        | {("t", v): p for v, p in pos_t.items()}
    )
    return (
        {u: joint[("p", u)] for u in pos_p},
        {v: joint[("t", v)] for v in pos_t},
    )


def _edit_marks(
    ax: Any, points: list, kind: str, part: str, size: float, suffix: str = ""
) -> None:
    if not points:
        return
    xy = np.array(points, dtype=float).reshape(-1, 2)
    colour = EDIT_COLOURS[kind]
    if part == "node":
        coll = ax.scatter(
            xy[:, 0],
            xy[:, 1],
            s=size**2,
            marker=_EDIT_MARKERS[kind],
            facecolors="none",
            edgecolors=colour,
            linewidths=2.2,
            zorder=4,
        )
    else:
        coll = ax.scatter(
            xy[:, 0],
            xy[:, 1],
            s=size**2,
            marker=_EDIT_MARKERS[kind],
            facecolors=colour,
            edgecolors="white",
            linewidths=0.6,
            zorder=2,
        )
    coll.set_gid(f"gwpred-edit-{part}-{kind}{suffix}")


def draw_alignment(
    predicted: nx.Graph,
    true: nx.Graph,
    ax: Any = None,
    *,
    mapping: Mapping[Hashable, Hashable | None] | None = None,
    node_label: Hashable = "label",
    edge_label: Hashable | None = "label",
    colours: dict[Hashable, str] | None = None,
    titles: tuple[str, str] = ("predicted", "true"),
    title: str | None = None,
    legend: bool = True,
    edge_name: str = "edge",
    seed: int = 0,
    time_limit: float | None = None,
) -> Any:
    """Draw a predicted graph beside the true one with the edit path between them marked.

    Both graphs share one layout: a predicted node mapped onto a true node is drawn at
    the same place in its panel, so the two drawings look alike where they agree. Edits
    are marked with colour and shape (see :data:`EDIT_COLOURS`): a substituted node gets
    a circle on both sides, a deleted (predicted only) node a square, an inserted (true
    only) node a diamond; edited edges are drawn in the edit colour with a mark of the
    same shape at their middle, deleted edges in the predicted panel and inserted edges
    in the true panel. Matched nodes and edges are drawn plainly.

    Parameters
    ----------
    predicted, true : networkx.Graph
    ax : matplotlib Axes, default=None
        Axes to draw into; a new figure is made when None.
    mapping : dict, default=None
        Predicted node -> true node or None, as :attr:`gwpred.metrics.EditDistance.mapping`;
        by default computed with :func:`gwpred.metrics.edit_distance` (unit costs).
    node_label : hashable, default="label"
    edge_label : hashable or None, default="label"
    colours : dict, default=None
        Node label -> colour; by default :func:`label_colours` of both graphs.
    titles : (str, str), default=("predicted", "true")
        Headings of the two panels.
    title : str, default=None
        Axes title; by default the edit counts (:meth:`AlignmentEdits.describe`).
    legend : bool, default=True
        Legend under the drawing: node labels, edge labels, then the edits present.
    edge_name : str, default="edge"
        Word before each edge label in the legend (for example ``"bond order"``).
    seed : int, default=0
    time_limit : float, default=None
        Seconds for :func:`gwpred.metrics.edit_distance` when ``mapping`` is None.

    Returns
    -------
    matplotlib Axes

    Raises
    ------
    TypeError, ValueError
        See :func:`alignment_edits` (and :func:`gwpred.metrics.edit_distance` when it runs).

    Notes
    -----
    Marks carry gids ``"gwpred-edit-node-<kind>"`` and ``"gwpred-edit-edge-<kind>"`` with
    one point per edit; the second circle of a substituted node (true panel) has the gid
    ``"gwpred-edit-node-substituted-partner"``. Under unit costs the number of points in
    the first six equals the edit path's cost.

    Examples
    --------
    >>> import matplotlib; matplotlib.use("Agg")
    >>> p = nx.path_graph(3); nx.set_node_attributes(p, "C", "label")
    >>> t = nx.cycle_graph(3); nx.set_node_attributes(t, "C", "label")
    >>> draw_alignment(p, t, mapping={0: 0, 1: 1, 2: 2}).get_title()
    'cost 1: 1 edge inserted'
    """
    _check_graph(predicted, "predicted")
    _check_graph(true, "true")
    if mapping is None:

        mapping = edit_distance(
            predicted,
            true,
            node_label=node_label,
            edge_label=edge_label,
            time_limit=time_limit,
        ).mapping
    edits = alignment_edits(
        predicted, true, mapping, node_label=node_label, edge_label=edge_label
    )
    mapping = dict(mapping)
    ax = _new_axes(ax, (6.4, 3.6))
    pos_p, pos_t = _aligned_layouts(predicted, true, mapping, seed)
    gap = 0.35
    pos_t = {v: p + np.array([1.0 + gap, 0.0]) for v, p in pos_t.items()}
    colours = colours or label_colours(_labels_of([predicted, true], node_label))
    styles = edge_styles(_edge_labels_of([predicted, true], edge_label))
    xlim, ylim = _limits(
        list(pos_p.values())
        + list(pos_t.values())
        + [np.zeros(2), np.array([2 + gap, 1.0])]
    )
    ylim = (ylim[0], ylim[1] + 0.08)
    _frame(ax, xlim, ylim)
    st = _make_style(
        ax, colours, styles, node_label, edge_label, [pos_p, pos_t], xlim, ylim
    )
    diameter = st.diameter

    # predicted panel: deletions and substitutions
    edge_colour_p = {e: EDIT_COLOURS["deleted"] for e in edits.edges_deleted}
    edge_colour_p |= {
        e: EDIT_COLOURS["substituted"] for e, _ in edits.edges_substituted
    }
    paths_p = _draw_edges(ax, predicted, pos_p, st, _both_ways(edge_colour_p))
    _draw_nodes(ax, predicted, pos_p, st)
    edge_colour_t = {e: EDIT_COLOURS["inserted"] for e in edits.edges_inserted}
    edge_colour_t |= {
        f: EDIT_COLOURS["substituted"] for _, f in edits.edges_substituted
    }
    paths_t = _draw_edges(ax, true, pos_t, st, _both_ways(edge_colour_t))
    _draw_nodes(ax, true, pos_t, st)

    ring = diameter * 1.45
    mid = max(diameter * 0.45, 4.0)
    radius = 0.5 * ring / _points_per_unit(ax, xlim, ylim)
    _edit_marks(
        ax, [pos_p[u] for u, _ in edits.nodes_substituted], "substituted", "node", ring
    )
    _edit_marks(
        ax,
        [pos_t[v] for _, v in edits.nodes_substituted],
        "substituted",
        "node",
        ring,
        "-partner",
    )
    _edit_marks(ax, [pos_p[u] for u in edits.nodes_deleted], "deleted", "node", ring)
    _edit_marks(ax, [pos_t[v] for v in edits.nodes_inserted], "inserted", "node", ring)
    for kind, edges, pos, paths in (
        ("substituted", [e for e, _ in edits.edges_substituted], pos_p, paths_p),
        ("deleted", edits.edges_deleted, pos_p, paths_p),
        ("inserted", edits.edges_inserted, pos_t, paths_t),
    ):
        points = [_free_point(paths[(a, b)], pos, radius) for a, b in edges]
        _edit_marks(ax, points, kind, "edge", mid)

    top = ylim[1] - 0.04
    for x, text in ((0.5, titles[0]), (1.5 + gap, titles[1])):
        ax.text(x, top, text, ha="center", va="top", fontsize=9, fontweight="bold")
    ax.set_title(edits.describe() if title is None else title, fontsize=9)
    if legend:
        handles = _legend_handles(colours, styles, edge_name, ax.get_facecolor())
        handles += _edit_handles(edits)
        _place_legend(ax, handles, ncol=min(len(handles), 5))
    return ax


def _free_point(
    path: NDArray[np.float64], pos: Mapping, radius: float
) -> NDArray[np.float64]:
    """A point of a drawn edge, near its middle, outside every node's disc if possible."""
    nodes = np.array(list(pos.values()), dtype=float).reshape(-1, 2)
    if len(path) == 2:
        path = path[0] + np.linspace(0.0, 1.0, 17)[:, None] * (path[1] - path[0])
    mid = (len(path) - 1) / 2
    for k in sorted(range(len(path)), key=lambda k: abs(k - mid)):
        if np.sqrt(((nodes - path[k]) ** 2).sum(1)).min() > radius:
            return path[k]
    return path[int(mid)]


def _both_ways(colour_of: Mapping[tuple, str]) -> dict[tuple, str]:
    out = dict(colour_of)
    out.update({(b, a): c for (a, b), c in colour_of.items()})
    return out


def _edit_handles(edits: AlignmentEdits) -> list:

    handles = []
    for key, k in edits.counts().items():
        if not k:
            continue
        part, kind = key.split(" ")
        colour = EDIT_COLOURS[kind]
        if part == "node":
            h = Line2D(
                [],
                [],
                marker=_EDIT_MARKERS[kind],
                linestyle="",
                markersize=10,
                markerfacecolor="none",
                markeredgecolor=colour,
                markeredgewidth=2,
                label=f"{key} ({k})",
            )
        else:
            h = Line2D(
                [],
                [],
                color=colour,
                linewidth=_BASE_WIDTH,
                marker=_EDIT_MARKERS[kind],
                markersize=5,
                markerfacecolor=colour,
                markeredgecolor="white",
                label=f"{key} ({k})",
            )
        handles.append(h)
    return handles


# --------------------------------------------------------------------------- heat maps


def _check_matrix(values: Any, name: str, square: bool) -> NDArray[np.float64]:
    try:
        arr = np.asarray(values, dtype=float)
    except (TypeError, ValueError):
        raise TypeError(
            f"{name} must be a numeric 2-D array, got {type(values).__name__}"
        ) from None
    if arr.ndim != 2 or arr.size == 0:
        raise ValueError(f"{name} must be a non-empty 2-D array, got shape {arr.shape}")
    if square and arr.shape[0] != arr.shape[1]:
        raise ValueError(
            f"{name} must be square (n, n), got shape {arr.shape}; pass SoftGraph.structure"
        )
    if not np.isfinite(arr).all():
        raise ValueError(f"{name} holds NaN or infinite values; draw a finite matrix")
    return arr


def _cell_text(ax: Any, values: NDArray[np.float64], vmax: float) -> None:
    for (i, j), v in np.ndenumerate(values):
        colour = (
            "black" if v > 0.55 * vmax else "white"
        )  # cividis is light at the top end
        ax.text(
            j,
            i,
            f"{v:.2f}",
            ha="center",
            va="center",
            fontsize=6,
            color=colour,
        )


def draw_structure(
    structure: ArrayLike,
    ax: Any = None,
    *,
    labels: Sequence[Any] | None = None,
    title: str | None = "soft structure",
    colorbar: bool = True,
    annotate: bool = False,
    cmap: str = "cividis",
) -> Any:
    """Heat map of a barycenter's soft structure (adjacency) matrix.

    Parameters
    ----------
    structure : array-like of shape (n, n)
        For example :attr:`gwpred.SoftGraph.structure`.
    ax : matplotlib Axes, default=None
    labels : sequence of length n, default=None
        Tick text per node (for example its most likely label).
    title : str, default="soft structure"
    colorbar : bool, default=True
    cmap : str, default="cividis"
        A colour map readable with colour-vision deficiencies (cividis, viridis).
    annotate : bool, default=False
        Write each value in its cell.

    Returns
    -------
    matplotlib Axes

    Raises
    ------
    ValueError
        If ``structure`` is not a finite square matrix or ``labels`` has the wrong length.
    """
    C = _check_matrix(structure, "structure", square=True)
    n = C.shape[0]
    if labels is not None and len(labels) != n:
        raise ValueError(
            f"labels has {len(labels)} entries for a {n} x {n} structure; give one per node"
        )
    ax = _new_axes(ax, (3.6, 3.2))
    vmax = max(1.0, float(C.max()))
    im = ax.imshow(C, cmap=cmap, vmin=0.0, vmax=vmax, interpolation="nearest")
    ticks = [str(i) if labels is None else f"{i} {labels[i]}" for i in range(n)]
    ax.set_xticks(range(n), ticks, rotation=90, fontsize=6)
    ax.set_yticks(range(n), ticks, fontsize=6)
    if annotate:
        _cell_text(ax, C, vmax)
    if colorbar:
        ax.figure.colorbar(im, ax=ax, fraction=0.046, pad=0.04).ax.tick_params(
            labelsize=6
        )
    if title:
        ax.set_title(title, fontsize=9)
    return ax


def draw_node_scores(
    node_scores: ArrayLike,
    label_names: Sequence[Any],
    ax: Any = None,
    *,
    title: str | None = "node label scores",
    colorbar: bool = True,
    annotate: bool = True,
    cmap: str = "cividis",
) -> Any:
    """Heat map of a barycenter's node-label scores, one row per node, one column per label.

    Parameters
    ----------
    node_scores : array-like of shape (n, n_labels)
        For example :attr:`gwpred.SoftGraph.node_scores`.
    label_names : sequence of length n_labels
        The label of each column (the model's ``labels_.node_labels_``).
    ax : matplotlib Axes, default=None
    title : str, default="node label scores"
    colorbar : bool, default=True
    cmap : str, default="cividis"
    annotate : bool, default=True
        Write each value in its cell (up to 400 cells).

    Returns
    -------
    matplotlib Axes

    Raises
    ------
    ValueError
        If ``node_scores`` is not a finite 2-D array or ``label_names`` does not have one
        name per column.
    """
    F = _check_matrix(node_scores, "node_scores", square=False)
    if len(label_names) != F.shape[1]:
        raise ValueError(
            f"label_names has {len(label_names)} names but node_scores has {F.shape[1]} columns; "
            "pass one name per column (model.labels_.node_labels_)"
        )
    ax = _new_axes(ax, (2.4, 3.2))
    vmax = max(1.0, float(F.max()))
    im = ax.imshow(
        F, cmap=cmap, vmin=0.0, vmax=vmax, interpolation="nearest", aspect="auto"
    )
    ax.set_xticks(range(F.shape[1]), [str(v) for v in label_names], fontsize=7)
    best = [str(label_names[k]) for k in F.argmax(1)]
    ax.set_yticks(
        range(F.shape[0]), [f"{i} {b}" for i, b in enumerate(best)], fontsize=6
    )
    if annotate and F.size <= 400:
        _cell_text(ax, F, vmax)
    if colorbar:
        ax.figure.colorbar(im, ax=ax, fraction=0.08, pad=0.04).ax.tick_params(
            labelsize=6
        )
    if title:
        ax.set_title(title, fontsize=9)
    return ax


# --------------------------------------------------------------------------- neighbours


def draw_neighbors(
    graphs: Sequence[nx.Graph],
    weights: ArrayLike,
    ax: Any = None,
    *,
    names: Sequence[str] | None = None,
    max_graphs: int = 6,
    node_label: Hashable = "label",
    edge_label: Hashable | None = "label",
    colours: dict[Hashable, str] | None = None,
    title: str | None = "training graphs with the largest weights",
    legend: bool = False,
    edge_name: str = "edge",
) -> Any:
    """Draw the graphs with the largest weights in a row, each above a bar of its weight.

    Parameters
    ----------
    graphs : sequence of networkx.Graph
        For a prediction: the training graphs ``SoftGraph.neighbors`` points to.
    weights : array-like of shape (len(graphs),)
        Their weights (for example ``SoftGraph.weights``); non-negative.
    ax : matplotlib Axes, default=None
    names : sequence of str, default=None
        A caption per graph (for example ``"train #12"``).
    max_graphs : int, default=6
        How many graphs to draw, largest weights first (ties in the given order).
    node_label : hashable, default="label"
    edge_label : hashable or None, default="label"
    colours : dict, default=None
    title : str, default="training graphs with the largest weights"
    legend : bool, default=False
    edge_name : str, default="edge"
        Word before each edge label in the legend.

    Returns
    -------
    matplotlib Axes
        Each drawn graph has its ``"gwpred-nodes"`` scatter; the weight bars are
        rectangles with gid ``"gwpred-weight-bar"``.

    Raises
    ------
    ValueError
        If ``weights`` is not 1-D with one finite, non-negative value per graph, there are no
        graphs, or ``max_graphs`` < 1.
    TypeError
        If an item of ``graphs`` is not a simple undirected networkx graph.
    """

    graphs = list(graphs)
    w = np.asarray(weights, dtype=float)
    if not graphs:
        raise ValueError("graphs is empty; pass at least one graph with its weight")
    if w.ndim != 1 or len(w) != len(graphs):
        raise ValueError(
            f"weights must be 1-D with one value per graph ({len(graphs)}), got shape {w.shape}"
        )
    if not np.isfinite(w).all() or (w < 0).any():
        raise ValueError("weights must be finite and >= 0 (barycentric weights)")
    if names is not None and len(names) != len(graphs):
        raise ValueError(
            f"names has {len(names)} entries for {len(graphs)} graphs; give one per graph"
        )
    if (
        isinstance(max_graphs, bool)
        or not isinstance(max_graphs, (int, np.integer))
        or max_graphs < 1
    ):
        raise ValueError(f"max_graphs must be an int >= 1, got {max_graphs!r}")
    for k, g in enumerate(graphs):
        _check_graph(g, f"graphs[{k}]")
    order = sorted(range(len(graphs)), key=lambda k: -w[k])[: int(max_graphs)]
    shown = [graphs[k] for k in order]
    ax = _new_axes(ax, (1.6 * len(order) + 0.4, 2.6))
    colours = colours or label_colours(_labels_of(shown, node_label))
    styles = edge_styles(_edge_labels_of(shown, edge_label))
    step = 1.3
    layouts = []
    for slot, g in enumerate(shown):
        pos = graph_layout(g)
        layouts.append(
            {v: 0.1 + 0.8 * p + np.array([slot * step, 0.0]) for v, p in pos.items()}
        )
    xlim = (-0.1, (len(order) - 1) * step + 1.1)
    ylim = (-0.42, 1.05)
    _frame(ax, xlim, ylim)
    st = _make_style(ax, colours, styles, node_label, edge_label, layouts, xlim, ylim)
    wmax = float(w[order].max()) or 1.0
    for slot, (k, g, pos) in enumerate(zip(order, shown, layouts)):
        _draw_edges(ax, g, pos, st)
        _draw_nodes(ax, g, pos, st)
        x0 = slot * step
        bar = Rectangle(
            (x0 + 0.1, -0.2), 0.8 * w[k] / wmax, 0.07, color="#555555", zorder=1
        )
        bar.set_gid("gwpred-weight-bar")
        ax.add_patch(bar)
        ax.add_patch(
            Rectangle(
                (x0 + 0.1, -0.2),
                0.8,
                0.07,
                fill=False,
                edgecolor="#BBBBBB",
                linewidth=0.5,
            )
        )
        caption = f"w = {w[k]:.2f}" + (f"\n{names[k]}" if names is not None else "")
        ax.text(x0 + 0.5, -0.24, caption, ha="center", va="top", fontsize=7)
    if title:
        ax.set_title(title, fontsize=9)
    if legend:
        _place_legend(
            ax, _legend_handles(colours, styles, edge_name, ax.get_facecolor())
        )
    return ax


# --------------------------------------------------------------------------- PNG grid


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

    per_row = 2 if len(predicted) > 1 else 1  # two (predicted, true) pairs side by side
    rows = -(-len(predicted) // per_row)
    colours = label_colours(_labels_of(list(predicted) + list(true), node_label))
    styles = edge_styles(_edge_labels_of(list(predicted) + list(true), edge_label))
    height = 2.4 * rows + 0.6
    fig = Figure(figsize=(5.2 * per_row, height))
    axes = fig.subplots(rows, 2 * per_row, squeeze=False)
    for ax in axes.ravel():
        ax.set_axis_off()
    for k, (p, t) in enumerate(zip(predicted, true)):
        r, c = divmod(k, per_row)
        head = f"predicted ({titles[k]})" if titles else "predicted"
        kw = {
            "node_label": node_label,
            "edge_label": edge_label,
            "colours": colours,
            "legend": False,
        }
        draw_graph(p, axes[r, 2 * c], title=head, **kw)
        draw_graph(t, axes[r, 2 * c + 1], title="true", **kw)
    handles = _legend_handles(colours, styles, "edge")
    fig.legend(
        handles=[h for h in handles if isinstance(h, Line2D)],
        loc="upper center",
        ncol=len(handles),
        frameon=False,
        fontsize=8,
        handlelength=2.6,
    )
    if caption:
        fig.text(0.5, 0.005, caption, ha="center", va="bottom", fontsize=6.5, wrap=True)
    fig.tight_layout(rect=(0, 0.5 / height if caption else 0, 1, 1 - 0.5 / height))
    target = Path(path)
    with atomic_open(target, binary=True) as fh:  # a killed run never leaves half a PNG
        fig.savefig(fh, dpi=110, format=target.suffix.lstrip(".").lower() or "png")

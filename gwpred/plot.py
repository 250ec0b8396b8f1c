"""Drawings of labeled graphs and soft barycenters with matplotlib.

Every drawing function takes an optional ``ax`` (a new figure is made when it is
None) and returns the Axes it drew into; nothing here changes matplotlib's global
settings. Element symbols get the colours of RDKit's default depictions
(:data:`ATOM_PALETTE`, read from RDKit when it is installed), so that a drawing and an
RDKit depiction beside it agree; other labels get the Okabe-Ito palette
(:data:`PALETTE`), which stays distinguishable with the common colour-vision
deficiencies. Every colour is paired with a second cue (the label text in a node, the
number of strokes or the dash pattern of an edge, the shape of an edit mark).

The drawn elements carry ``gid`` tags so that they can be found again (tests, SVG
post-processing): ``"gwpred-nodes"`` (one scatter per drawn graph, one point per
node), ``"gwpred-node-number"`` (the node numbers, one text each), ``"gwpred-edges"``
(line collections, one segment per edge), ``"gwpred-edit-<node|edge>-<kind>"`` for the
edit marks of :func:`draw_alignment`, and ``"gwpred-input"``,
``"gwpred-neighbour-input"`` and ``"gwpred-bit-strip"`` in :func:`draw_inputs`.
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
import scipy.sparse as sp
from matplotlib import patheffects as pe
from matplotlib.collections import LineCollection
from matplotlib.colors import ListedColormap, to_rgb
from matplotlib.figure import Figure
from matplotlib.lines import Line2D
from matplotlib.patches import Patch, Rectangle
from numpy.typing import ArrayLike, NDArray

from ._utils import atomic_open, has_extra, require_extra
from .formula import atomic_number, element_of, is_atom_label
from .ged import edit_distance

__all__ = [
    "ATOM_PALETTE",
    "DELETED_EDGE_STYLE",
    "EDIT_COLOURS",
    "PALETTE",
    "AlignmentEdits",
    "alignment_edits",
    "comparison_grid",
    "draw_alignment",
    "draw_graph",
    "draw_inputs",
    "draw_neighbors",
    "draw_node_scores",
    "draw_structure",
    "draw_templates",
    "edge_styles",
    "graph_layout",
    "graph_thumbnail_svg",
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

# Shapes of the edit marks: a second cue next to the colour. A deleted edge gets a cross
# (and its own dash pattern, DELETED_EDGE_STYLE), never parallel strokes.
_EDIT_MARKERS = {"substituted": "o", "deleted": "s", "inserted": "D"}
_EDGE_EDIT_MARKERS = {"substituted": "o", "deleted": "X", "inserted": "D"}
_EDIT_KINDS = ("substituted", "deleted", "inserted")
# Colours of labels that are not element symbols, in the order they are handed out: the
# Okabe-Ito palette with the edit-mark colours last.
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

#: RDKit's default atom palette, as its depictions write it (atomic number -> hex colour;
#: ``-1`` is the colour of every element not listed). A copy of
#: ``rdkit.Chem.Draw.rdMolDraw2D.MolDrawOptions().getAtomPalette()``, each channel
#: ``c`` written as ``int(255 * c)`` like RDKit's SVG output; :func:`label_colours`
#: reads the palette from RDKit itself when RDKit is installed and uses this copy otherwise.
ATOM_PALETTE: dict[int, str] = {
    -1: "#000000",
    1: "#000000",
    6: "#000000",
    7: "#0000FF",
    8: "#FF0000",
    9: "#33CCCC",
    15: "#FF7F00",
    16: "#CCCC00",
    17: "#00CC00",
    35: "#7F4C19",
    53: "#A01EEF",
}
# RDKit writes carbon (and every element it does not list) in black letters on white. A
# black disc would hide its black outline and crossing bonds, so node discs of those
# elements are a dark grey with white text instead (contrast 7.5:1, WCAG AAA).
_DARK_DISC = "#555555"

#: Look of a deleted edge in :func:`draw_alignment`: one stroke with short even dashes
#: (a dash pattern :func:`edge_styles` never hands out), drawn in the ``"deleted"`` edit
#: colour with a cross at its middle, so that it cannot pass for a bond of any order.
DELETED_EDGE_STYLE: tuple[int, tuple[float, tuple[float, float]]] = (1, (0.0, (2.0, 2.0)))

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


def _is_element(label: Any) -> bool:
    """An element symbol, optionally charged (``"N+"``: an atom label of gwpred.chem)."""
    return is_atom_label(label)


# --------------------------------------------------------------------------- colours, styles


def _rgb_hex(rgb: Sequence[float]) -> str:
    """``#RRGGBB`` of an RGB(A) triple in [0, 1], each channel as ``int(255 * c)`` (RDKit's way)."""
    return "#" + "".join(f"{min(max(int(255 * float(c)), 0), 255):02X}" for c in rgb[:3])


def _atom_palette() -> dict[int, str]:
    """RDKit's default atom palette (hex), read from RDKit when installed, else the copy."""
    if has_extra("rdkit"):
        try:
            draw = require_extra("rdkit.Chem.Draw.rdMolDraw2D", "label_colours")
            raw = draw.MolDrawOptions().getAtomPalette()
            return {int(z): _rgb_hex(c) for z, c in raw.items()}
        except (ImportError, AttributeError):  # an RDKit without it: the copy is the same
            pass
    return dict(ATOM_PALETTE)


def _element_colour(symbol: str, palette: Mapping[int, str]) -> str:
    """The palette colour of an atom label's element (``"N+"``: nitrogen's)."""
    return palette.get(atomic_number(element_of(symbol)), palette.get(-1, "#000000"))


def _text_colour(face: str) -> str:
    """Black or white, whichever contrasts more with ``face`` (WCAG 2 relative luminance)."""
    lin = [c / 12.92 if c <= 0.04045 else ((c + 0.055) / 1.055) ** 2.4 for c in to_rgb(face)]
    lum = 0.2126 * lin[0] + 0.7152 * lin[1] + 0.0722 * lin[2]
    return "white" if 1.05 / (lum + 0.05) > (lum + 0.05) / 0.05 else "black"


def label_colours(labels: Sequence[Hashable]) -> dict[Hashable, str]:
    """Colour per node label: element symbols as RDKit depicts them, other labels Okabe-Ito.

    Parameters
    ----------
    labels : sequence of hashable
        Node labels (repeats allowed).

    Returns
    -------
    dict
        Label -> hex colour of the node disc, in sorted label order. Element symbols
        (``"C"``, ``"Cl"``, ...) get the colour of RDKit's default atom palette (read from
        RDKit when it is installed, else :data:`ATOM_PALETTE`): N blue, O red, F cyan,
        S yellow, Cl green, and so on. RDKit draws carbon, hydrogen and unlisted elements
        in black; their discs get dark grey (``#555555``) so that white text, the disc
        outline and the bonds stay visible. Other labels get, in sorted order, the
        Okabe-Ito colours (:data:`PALETTE`, the edit-mark colours of
        :data:`EDIT_COLOURS` last); they repeat beyond eight labels. The label is written
        in each node, so the drawing stays unambiguous when colours repeat.

    Examples
    --------
    >>> label_colours(["C", "O", "C", "Cl"])
    {'C': '#555555', 'Cl': '#00CC00', 'O': '#FF0000'}
    >>> label_colours(["a", "b"])
    {'a': '#999999', 'b': '#56B4E9'}
    """
    ordered = sorted(set(labels), key=_sort_key)
    elements = [lab for lab in ordered if _is_element(lab)]
    out: dict[Hashable, str] = {}
    if elements:
        palette = _atom_palette()
        for lab in elements:
            colour = _element_colour(str(lab), palette)
            out[lab] = _DARK_DISC if colour == "#000000" else colour
    rest = [lab for lab in ordered if lab not in out]
    for k, lab in enumerate(rest):
        out[lab] = _LABEL_ORDER[k % len(_LABEL_ORDER)]
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


def _clearance(path: NDArray[np.float64], others: NDArray[np.float64]) -> float:
    """Smallest distance from the points ``others`` to the polyline ``path`` (exact)."""
    if len(others) == 0:
        return math.inf
    p, q = path[:-1], path[1:]
    seg = q - p  # (s, 2)
    rel = others[:, None, :] - p[None, :, :]  # (k, s, 2)
    length2 = np.maximum((seg**2).sum(-1), 1e-300)
    t = np.clip((rel * seg[None]).sum(-1) / length2[None], 0.0, 1.0)
    d = rel - t[..., None] * seg[None]
    return float(np.sqrt((d**2).sum(-1)).min())


# Bends tried for an edge that would cross a node: the control point of a quadratic curve
# sits this many chord lengths off the middle (the curve's bulge is half of it).
_BENDS = (0.15, 0.25, 0.35, 0.5, 0.65, 0.8, 1.0)


def _edge_path(
    a: NDArray[np.float64],
    b: NDArray[np.float64],
    others: NDArray[np.float64],
    radius: float,
) -> tuple[NDArray[np.float64], bool]:
    """Points of an edge from a to b: straight, or bent round the nodes it would cross.

    ``others`` holds the positions of the nodes other than the two ends, ``radius`` the
    node disc radius (data units). A path is clear when every point of the drawn
    polyline stays more than 1.5 radii from every other node (half a radius between
    the disc and the middle of the line: room for a triple bond's band). A straight edge
    that is not clear becomes a quadratic curve (33 points) through a control point off
    its middle: the least bend of ``_BENDS`` that is clear, trying first the side with fewer
    nodes near the edge.

    Returns
    -------
    points : ndarray of shape (2, 2) or (33, 2)
        The two ends (straight) or the sampled curve.
    clear : bool
        False when no tried path was clear: the edge is then drawn straight.
    """
    a = np.asarray(a, dtype=float)
    b = np.asarray(b, dtype=float)
    others = np.asarray(others, dtype=float).reshape(-1, 2)
    straight = np.array([a, b])
    gap = 1.5 * radius
    if radius <= 0 or _clearance(straight, others) > gap:
        return straight, True
    chord = b - a
    if float(np.hypot(*chord)) < 1e-12:
        return straight, False
    normal = np.array([-chord[1], chord[0]])
    # the side of the edge with fewer nodes near it first (ties: the left side)
    near = others[np.sqrt(((others - (a + b) / 2) ** 2).sum(1)) < np.hypot(*chord)]
    side = -1.0 if ((near - a) @ normal > 0).sum() > ((near - a) @ normal < 0).sum() else 1.0
    t = np.linspace(0.0, 1.0, 33)[:, None]
    for h in _BENDS:
        for sign in (side, -side):
            ctrl = (a + b) / 2 + sign * h * normal
            curve = (1 - t) ** 2 * a + 2 * (1 - t) * t * ctrl + t**2 * b
            if _clearance(curve, others) > gap:
                return curve, True
    return straight, False


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
        path, _ = _edge_path(xy[index[u]], xy[index[v]], xy[keep], radius)
        out[(u, v)] = path
        out[(v, u)] = path[::-1]
    return out


def _draw_edges(
    ax: Any,
    graph: nx.Graph,
    pos: Mapping,
    st: _Style,
    colour_of: Mapping[tuple, str] | None = None,
    look_of: Mapping[tuple, tuple[int, Any]] | None = None,
) -> dict[tuple, NDArray[np.float64]]:
    """One LineCollection per (look, colour); every edge is one (maybe bent) line.

    ``colour_of`` and ``look_of`` override the colour and the ``(strokes, linestyle)`` of
    some edges (keyed both ways round). Returns the drawn points of every edge, keyed both
    ways round.
    """

    paths = _edge_paths(graph, pos, st.radius)
    groups: dict[tuple, list] = {}
    for u, v, d in graph.edges(data=True):
        look = (look_of or {}).get((u, v)) or st.styles.get(
            _edge_value(d, st.edge_label), (1, "solid")
        )
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


def _number_direction(
    i: int, xy: NDArray[np.float64], neighbours: Sequence[int]
) -> NDArray[np.float64]:
    """Unit vector from node ``i`` into the widest angle left free by its edges."""
    angles = sorted(
        math.atan2(*(xy[j] - xy[i])[::-1])
        for j in neighbours
        if j != i and np.hypot(*(xy[j] - xy[i])) > 1e-12
    )
    if not angles:
        return np.array([math.sqrt(0.5), math.sqrt(0.5)])  # up and to the right
    gaps = [
        (angles[(k + 1) % len(angles)] - angles[k]) % (2 * math.pi) or 2 * math.pi
        for k in range(len(angles))
    ]
    k = int(np.argmax(gaps))
    mid = angles[k] + gaps[k] / 2
    return np.array([math.cos(mid), math.sin(mid)])


def _draw_nodes(
    ax: Any, graph: nx.Graph, pos: Mapping, st: _Style, numbers: bool = False
) -> None:
    """One scatter for all nodes, the label written inside each, the number beside it.

    A node's number is its position in ``graph.nodes`` (0-based), written small just
    outside its disc, in the widest gap between its edges, on a white halo.
    """
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
    for (x, y), lab, face in zip(xy, labels, faces):
        ax.text(
            x,
            y,
            str(lab),
            ha="center",
            va="center",
            fontsize=st.fontsize,
            color=_text_colour(face),
            zorder=5,
        )
    if not numbers:
        return
    index = {v: i for i, v in enumerate(nodes)}
    size = max(0.8 * st.fontsize, 5.0)
    for i, v in enumerate(nodes):
        direction = _number_direction(i, xy, [index[w] for w in graph.neighbors(v)])
        # text centre: half a disc plus about half the number's width from the centre
        offset = direction * (0.5 * st.diameter + 0.45 * size * len(str(i)) + 1.5)
        text = ax.annotate(
            str(i),
            xy=xy[i],
            xytext=(float(offset[0]), float(offset[1])),
            textcoords="offset points",
            ha="center",
            va="center",
            fontsize=size,
            color="#202020",
            zorder=6,
        )  # no stroke halo: a path effect would turn the text into outlines (large SVG)
        text.set_gid("gwpred-node-number")


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
    numbers: bool = False,
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
    numbers : bool, default=False
        Write each node's number, its position in ``graph.nodes`` (0-based), small beside
        its disc (texts with gid ``"gwpred-node-number"``). For a graph predicted by
        gwpred, node ``i`` is row ``i`` of the barycenter's heat maps
        (:func:`draw_structure`, :func:`draw_node_scores`).

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
    _draw_nodes(ax, graph, layout, st, numbers=numbers)
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
        scale = 1.3 if kind == "deleted" else 1.0  # the cross is thin: a little larger
        coll = ax.scatter(
            xy[:, 0],
            xy[:, 1],
            s=(scale * size) ** 2,
            marker=_EDGE_EDIT_MARKERS[kind],
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
    numbers: bool = False,
) -> Any:
    """Draw a predicted graph beside the true one with the edit path between them marked.

    Both graphs share one layout: a predicted node mapped onto a true node is drawn at
    the same place in its panel, so the two drawings look alike where they agree. Edits
    are marked with colour and shape (see :data:`EDIT_COLOURS`): a substituted node gets
    a circle on both sides, a deleted (predicted only) node a square, an inserted (true
    only) node a diamond. A deleted edge (predicted panel) is one dashed stroke in the
    deletion colour with a cross at its middle (:data:`DELETED_EDGE_STYLE`, whatever its
    bond order, so that it never passes for a double bond); substituted and inserted
    edges keep the look of their label in their edit colour, with a circle or a diamond
    at their middle, inserted edges in the true panel. Matched nodes and edges are drawn
    plainly.

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
    numbers : bool, default=False
        Number the predicted nodes as :func:`draw_graph` does (position in
        ``predicted.nodes``: the barycenter row for a gwpred prediction). The true panel is
        not numbered: a mapped true node is drawn where its predicted node is.

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
    look_p = {e: DELETED_EDGE_STYLE for e in edits.edges_deleted}
    paths_p = _draw_edges(
        ax, predicted, pos_p, st, _both_ways(edge_colour_p), _both_ways(look_p)
    )
    _draw_nodes(ax, predicted, pos_p, st, numbers=numbers)
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


def _both_ways(colour_of: Mapping[tuple, Any]) -> dict[tuple, Any]:
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
            # a deleted edge's sample shows its dashes and cross, the others a solid line
            h = Line2D(
                [],
                [],
                color=colour,
                linewidth=_BASE_WIDTH,
                linestyle=DELETED_EDGE_STYLE[1] if kind == "deleted" else "solid",
                marker=_EDGE_EDIT_MARKERS[kind],
                markersize=6.5 if kind == "deleted" else 5,
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


def draw_templates(model: Any, x: ArrayLike | None = None, *, top: int = 4, fig: Figure | None = None) -> Figure:
    """The learned templates of a fitted :class:`~gwpred.TemplateGraphPredictor`, and the weights an input puts on them.

    One row per template: its structure heat map (:func:`draw_structure`) and its
    node-label scores (:func:`draw_node_scores`), its real nodes only.  With ``x``,
    the ``top`` templates of largest weight for that input are drawn, by
    decreasing weight, under a bar chart of the weights of all templates;
    without it, the first ``top`` templates.

    Parameters
    ----------
    model : TemplateGraphPredictor
        A fitted model (``templates_``, ``labels_``, ``template_weights``).
    x : array-like of shape (n_features,), optional
        One input.
    top : int, default=4
        Templates drawn.
    fig : matplotlib Figure, default=None
        Drawn into (cleared first); a new one when None.

    Returns
    -------
    matplotlib Figure

    Raises
    ------
    ValueError
        If ``model`` has no fitted templates or ``top`` < 1.
    """
    templates = getattr(model, "templates_", None)
    if templates is None:
        raise ValueError("draw_templates needs a fitted TemplateGraphPredictor; call fit first")
    if isinstance(top, bool) or not isinstance(top, (int, np.integer)) or top < 1:
        raise ValueError(f"top must be a positive integer; got {top!r}")
    names = list(model.labels_.node_labels_)
    weights = None if x is None else model.template_weights(np.asarray(x, dtype=np.float64).reshape(1, -1))[0]
    order = np.arange(len(templates)) if weights is None else np.argsort(-weights, kind="stable")
    shown = order[: min(int(top), len(templates))].tolist()
    rows = len(shown) + (weights is not None)
    if fig is None:
        fig = plt.figure(figsize=(6.4, 2.8 * rows))
    fig.clear()
    axes = fig.subplots(rows, 2, squeeze=False)
    first = 0
    if weights is not None:
        gs = axes[0, 0].get_gridspec()
        for ax in axes[0]:
            ax.remove()
        bar = fig.add_subplot(gs[0, :])
        bar.bar(np.arange(len(weights)), weights, color=PALETTE[4])
        bar.set_xlabel("template", fontsize=8)
        bar.set_ylabel("weight", fontsize=8)
        bar.set_title("weights of this input on the templates", fontsize=9)
        bar.tick_params(labelsize=6)
        first = 1
    for r, t in enumerate(shown):
        k = int(templates.sizes[t])
        best = [str(names[j]) for j in templates.features[t, :k].argmax(1)]
        note = "" if weights is None else f", weight {weights[t]:.2f}"
        draw_structure(templates.structures[t, :k, :k], axes[first + r, 0], labels=best,
                       title=f"template {t}: structure{note}")
        draw_node_scores(templates.features[t, :k], names, axes[first + r, 1], title=f"template {t}: node labels")
    fig.tight_layout()
    return fig


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


# --------------------------------------------------------------------------- inputs


def _dense(values: Any, name: str) -> NDArray[np.float64]:
    """A float array of a dense array-like, a scipy sparse matrix or a list of sparse rows."""
    if sp.issparse(values):
        values = values.toarray()
    elif (
        isinstance(values, (list, tuple))
        and values
        and any(sp.issparse(r) for r in values)
    ):
        try:
            values = sp.vstack([sp.csr_matrix(r) for r in values]).toarray()
        except ValueError as err:
            raise ValueError(
                f"{name} holds sparse rows that cannot be stacked ({err}); give rows of one length"
            ) from None
    try:
        arr = np.asarray(values, dtype=float)
    except (TypeError, ValueError):
        raise TypeError(
            f"{name} must be numeric (a NumPy array, a list of numbers or a scipy sparse "
            f"matrix), got {type(values).__name__}"
        ) from None
    bad = np.flatnonzero(~np.isfinite(arr.ravel()))
    if len(bad):
        where = np.unravel_index(bad[0], arr.shape) if arr.ndim > 1 else (int(bad[0]),)
        raise ValueError(
            f"{name} holds {len(bad)} NaN or infinite value(s), the first at index "
            f"{tuple(int(i) for i in where)}; drop or impute them before drawing"
        )
    return arr


def _check_inputs(
    x: Any, neighbour_inputs: Any, weights: Any, grid: Any, labels: Any
) -> tuple[NDArray, NDArray, NDArray, NDArray | None, list[str]]:
    vec = _dense(x, "x")
    if vec.ndim == 2 and vec.shape[0] == 1:
        vec = vec[0]  # one row of a matrix, as X[i] of a scipy sparse matrix gives it
    if vec.ndim != 1 or vec.size == 0:
        raise ValueError(
            f"x must be one input vector of shape (d,), got shape {vec.shape}; pass X[i]"
        )
    rows = _dense(neighbour_inputs, "neighbour_inputs")
    d = vec.size
    if rows.ndim == 1 and rows.size == 0:  # no neighbours at all
        rows = rows.reshape(0, d)
    if rows.ndim != 2:
        raise ValueError(
            f"neighbour_inputs must be a 2-D array (m, d), got shape {rows.shape}; for one "
            "neighbour pass X[[j]] or row.reshape(1, -1)"
        )
    m = rows.shape[0]
    if rows.shape[1] != d:
        raise ValueError(
            f"neighbour_inputs has {rows.shape[1]} columns but x has {d} values; give the "
            "neighbours' inputs in the same columns as x"
        )
    w = _dense(weights, "weights")
    if w.ndim != 1 or w.size != m:
        raise ValueError(
            f"weights must be 1-D with one value per neighbour ({m}), got shape {w.shape}"
        )
    g = None
    if grid is not None:
        g = _dense(grid, "grid")
        if g.ndim != 1 or g.size != d:
            raise ValueError(
                f"grid must be 1-D with one x value per column of x ({d}), got shape "
                f"{g.shape}; pass grid=None to use column indices"
            )
    if labels is None:
        names = [f"neighbour {k}" for k in range(m)]
    else:
        if isinstance(labels, str) or len(labels) != m:
            got = "a str" if isinstance(labels, str) else f"{len(labels)} entries"
            raise ValueError(
                f"labels has {got} for {m} neighbours; give one name per row of neighbour_inputs"
            )
        names = [str(lab) for lab in labels]
    return vec, rows, w, g, names


def _is_binary(*arrays: NDArray) -> bool:
    return all(bool(np.isin(a, (0.0, 1.0)).all()) for a in arrays)


def draw_inputs(
    x: ArrayLike,
    neighbour_inputs: ArrayLike,
    weights: ArrayLike,
    grid: ArrayLike | None = None,
    labels: Sequence[str] | None = None,
    ax: Any = None,
    *,
    kind: str = "auto",
    title: str | None = None,
) -> Any:
    """Draw an input vector against the inputs of the training neighbours it leaned on.

    Continuous data (spectra) are drawn as lines: the neighbours thin, one Okabe-Ito
    colour each, more opaque the larger their weight's magnitude, and the input bold
    black on top. 0/1 data (fingerprint bits) are drawn as a compact bit strip: one row
    per vector (the input first, then the neighbours by decreasing weight), only the
    columns set in some row, each cell coloured by how it agrees with the input.

    Parameters
    ----------
    x : array-like of shape (d,)
        The input vector (a dense array, a list, or a 1 x d scipy sparse row; bool,
        integer (for example uint8) or float).
    neighbour_inputs : array-like of shape (m, d)
        The neighbours' inputs, one row each: a dense array, a scipy sparse matrix, or a
        list of 1 x d sparse rows. With ``m = 0`` (and empty ``weights``) only the input
        is drawn.
    weights : array-like of shape (m,)
        The neighbours' weights (for example ``SoftGraph.weights``), shown in the legend
        (line drawing) or in the row names (bit strip). Finite; negative values are
        allowed and shaded by their magnitude.
    grid : array-like of shape (d,), default=None
        x value of each column (for example wavenumbers in cm^-1); None uses the column
        index. In a bit strip it names the shown columns.
    labels : sequence of str of length m, default=None
        Names of the neighbours (for example ``"training #12"``); by default
        ``"neighbour k"``.
    ax : matplotlib Axes, default=None
    kind : {"auto", "lines", "bits"}, default="auto"
        ``"auto"`` draws a bit strip when every value of ``x`` and ``neighbour_inputs``
        is 0 or 1, lines otherwise.
    title : str, default=None

    Returns
    -------
    matplotlib Axes
        Lines have gids ``"gwpred-input"`` and ``"gwpred-neighbour-input"``; the bit strip
        is an image with gid ``"gwpred-bit-strip"`` whose cells hold 0 (unset), 1 (set in
        the input), 2 (set here and in the input), 3 (set here only) or 4 (set in the input
        only).

    Raises
    ------
    ValueError
        If a shape or length does not match (``neighbour_inputs`` columns, ``weights``,
        ``grid``, ``labels``), a value is NaN or infinite, ``kind`` is unknown, or
        ``kind="bits"`` is asked for data that are not 0/1.
    TypeError
        If an input is not numeric.

    Examples
    --------
    >>> import matplotlib; matplotlib.use("Agg")
    >>> ax = draw_inputs([0.1, 0.5, 0.2], [[0.1, 0.4, 0.3], [0.0, 0.6, 0.1]], [0.7, 0.3])
    >>> [t.get_text() for t in ax.get_legend().get_texts()]
    ['input', 'neighbour 0 (w = 0.70)', 'neighbour 1 (w = 0.30)']
    """
    if kind not in ("auto", "lines", "bits"):
        raise ValueError(f"kind must be 'auto', 'lines' or 'bits', got {kind!r}")
    vec, rows, w, grid_arr, names = _check_inputs(
        x, neighbour_inputs, weights, grid, labels
    )
    binary = _is_binary(vec, rows)
    if kind == "bits" and not binary:
        raise ValueError(
            "kind='bits' draws 0/1 data, but x or neighbour_inputs holds other values; "
            "use kind='lines' (or 'auto')"
        )
    order = sorted(range(len(w)), key=lambda k: -abs(w[k]))  # largest weights first
    if kind == "bits" or (kind == "auto" and binary):
        ax = _bit_strip(vec, rows, w, grid_arr, names, order, ax)
    else:
        ax = _input_lines(vec, rows, w, grid_arr, names, order, ax)
    if title:
        ax.set_title(title, fontsize=9)
    return ax


# Okabe-Ito colours for neighbour lines, the ones that read best as thin lines on white
# first (yellow and grey last).
_LINE_ORDER = [
    "#0072B2",
    "#D55E00",
    "#009E73",
    "#CC79A7",
    "#E69F00",
    "#56B4E9",
    "#999999",
    "#F0E442",
]


def _input_lines(
    vec: NDArray,
    rows: NDArray,
    w: NDArray,
    grid: NDArray | None,
    names: list[str],
    order: list[int],
    ax: Any,
) -> Any:
    ax = _new_axes(ax, (6.0, 3.0))
    xs = np.arange(vec.size) if grid is None else grid
    wmax = (float(np.abs(w).max()) if len(w) else 0.0) or 1.0
    handles = []
    rank_of = {k: r for r, k in enumerate(order)}
    for k in order[::-1]:  # the heaviest neighbour is drawn last, on top
        rank = rank_of[k]
        (line,) = ax.plot(
            xs,
            rows[k],
            color=_LINE_ORDER[rank % len(_LINE_ORDER)],
            linewidth=1.0,
            alpha=0.35 + 0.65 * abs(float(w[k])) / wmax,
            zorder=2,
            label=f"{names[k]} (w = {w[k]:.2f})",
        )
        line.set_gid("gwpred-neighbour-input")
        handles.append(line)
    (main,) = ax.plot(xs, vec, color="black", linewidth=2.0, zorder=3, label="input")
    main.set_gid("gwpred-input")
    ax.legend(handles=[main] + handles[::-1], fontsize=7, frameon=False)
    ax.set_xlabel("column" if grid is None else "")
    ax.tick_params(labelsize=7)
    return ax


# Bit strip cell codes and colours: unset, set in the input (black), set here and in the
# input (Okabe-Ito blue), set here only (Okabe-Ito orange), set in the input but not here
# (light grey).
_BIT_COLOURS = ["#FFFFFF", "#000000", "#0072B2", "#E69F00", "#D0D0D0"]
_BIT_NAMES = [
    "",
    "set in the input",
    "set here and in the input",
    "set here, not in the input",
    "set in the input, not here",
]


def _tanimoto(a: NDArray, b: NDArray) -> float:
    """|a and b| / |a or b| of two 0/1 vectors (Tanimoto / Jaccard; nan when both are 0)."""
    union = int(np.logical_or(a, b).sum())
    return float(np.logical_and(a, b).sum()) / union if union else math.nan


def _bit_strip(
    vec: NDArray,
    rows: NDArray,
    w: NDArray,
    grid: NDArray | None,
    names: list[str],
    order: list[int],
    ax: Any,
) -> Any:
    cols = np.flatnonzero((vec != 0) | (rows != 0).any(0))
    ax = _new_axes(ax, (max(3.0, 1.6 + 0.09 * len(cols)), 0.9 + 0.28 * (len(order) + 1)))
    a = vec[cols] != 0
    strip = np.zeros((len(order) + 1, len(cols)), dtype=float)
    strip[0] = np.where(a, 1, 0)
    for r, k in enumerate(order, start=1):
        b = rows[k, cols] != 0
        strip[r] = np.select([b & a, b & ~a, ~b & a], [2, 3, 4], 0)
    ticks = ["input"] + [
        f"{names[k]} (w = {w[k]:.2f}, Tanimoto {_tanimoto(vec != 0, rows[k] != 0):.2f})"
        for k in order
    ]
    if not len(cols):
        ax.set_axis_off()
        ax.text(0.5, 0.5, "no bit is set in any vector", ha="center", va="center")
        return ax
    image = ax.imshow(
        strip,
        cmap=ListedColormap(_BIT_COLOURS),
        vmin=-0.5,
        vmax=4.5,
        aspect="auto",
        interpolation="nearest",
    )
    image.set_gid("gwpred-bit-strip")
    ax.set_yticks(range(len(ticks)), ticks, fontsize=7)
    step = max(1, -(-len(cols) // 40))  # at most about 40 column names
    shown = list(range(0, len(cols), step))
    names_x = cols if grid is None else grid[cols]
    ax.set_xticks(shown, [f"{names_x[j]:g}" for j in shown], rotation=90, fontsize=6)
    ax.set_xlabel(
        f"{len(cols)} of {vec.size} columns ({'bit' if grid is None else 'grid value'})",
        fontsize=7,
    )
    # thin white lines between the cells
    ax.set_xticks(np.arange(-0.5, len(cols)), minor=True)
    ax.set_yticks(np.arange(-0.5, len(ticks)), minor=True)
    ax.grid(which="minor", color="white", linewidth=0.6)
    ax.tick_params(which="minor", length=0)
    present = sorted({int(v) for v in np.unique(strip)} - {0})
    ax.legend(
        handles=[
            Patch(facecolor=_BIT_COLOURS[c], edgecolor="#808080", label=_BIT_NAMES[c])
            for c in present
        ],
        loc="center left",
        bbox_to_anchor=(1.01, 0.5),
        fontsize=7,
        frameon=False,
    )
    return ax


# --------------------------------------------------------------------------- thumbnails

# SVG dash patterns of the edge looks (in viewBox units, two per pixel).
_SVG_DASHES = {"solid": None, "dashed": "6 3", "dotted": "2 3", "dashdot": "6 3 2 3"}


def _short_hex(colour: str) -> str:
    """``#RGB`` for a colour ``#RRGGBB`` whose channels are doubled digits, else as is."""
    c = colour.upper()
    if len(c) == 7 and c[1] == c[2] and c[3] == c[4] and c[5] == c[6]:
        return "#" + c[1] + c[3] + c[5]
    return c


def graph_thumbnail_svg(
    G: nx.Graph,
    node_label: Hashable = "label",
    edge_label: Hashable | None = "label",
    size: int = 56,
) -> str:
    """A tiny self-contained SVG drawing of a graph, for thumbnails in tables.

    Molecules (every node label an element symbol) are drawn as skeletal formulas, as
    RDKit depicts them: carbon atoms are the unlabeled corners (a carbon without bonds is
    written ``C``), other atoms are their symbol in RDKit's default atom colour
    (:data:`ATOM_PALETTE`), bonds stop short of the symbols, and double and triple bonds
    are two and three parallel lines. No hydrogens are written (the heavy-atom
    skeleton). Other graphs get a small disc per node in its :func:`label_colours`
    colour. The layout is :func:`graph_layout` (the same drawing with or without RDKit,
    and for molecules RDKit would not accept), y pointing up as in the other drawings.

    Parameters
    ----------
    G : networkx.Graph
    node_label : hashable, default="label"
    edge_label : hashable or None, default="label"
        Bond orders 1, 2, 3 give 1, 2, 3 lines; other labels the strokes and dashes of
        :func:`edge_styles`; None draws single lines.
    size : int, default=56
        Width and height in pixels (16 to 1024).

    Returns
    -------
    str
        One ``<svg>`` element: no XML prolog, no ids, no external references, integer
        coordinates in a viewBox of ``2 * size`` units (half pixels); a few hundred bytes
        for a 9-atom molecule.

    Raises
    ------
    TypeError
        If ``G`` is not a simple undirected networkx graph or ``size`` not an int.
    ValueError
        If ``size`` is outside 16..1024.

    Examples
    --------
    >>> g = nx.Graph([(0, 1), (1, 2)]); nx.set_node_attributes(g, {0: "C", 1: "C", 2: "O"}, "label")
    >>> g.edges[1, 2]["label"] = 2; g.edges[0, 1]["label"] = 1
    >>> svg = graph_thumbnail_svg(g)
    >>> svg.startswith('<svg xmlns="http://www.w3.org/2000/svg" width="56"'), "#F00" in svg
    (True, True)
    """
    _check_graph(G, "G")
    if isinstance(size, bool) or not isinstance(size, (int, np.integer)):
        raise TypeError(f"size must be an int (pixels), got {type(size).__name__}")
    if not 16 <= size <= 1024:
        raise ValueError(f"size must be between 16 and 1024 pixels, got {size}")
    box = 2 * int(size)  # viewBox units: half pixels, so that integers are precise enough
    head = (
        f'<svg xmlns="http://www.w3.org/2000/svg" width="{size}" height="{size}" '
        f'viewBox="0 0 {box} {box}">'
    )
    nodes = list(G.nodes)
    if not nodes:
        return head + "</svg>"
    labels = [G.nodes[v].get(node_label, "?") for v in nodes]
    molecule = all(_is_element(lab) for lab in labels)
    font = round(0.18 * box)
    margin = 0.75 * font if molecule else 0.09 * box
    layout = graph_layout(G)
    # fill the box, but keep bonds at most 0.3 of its side (small molecules stay small)
    lengths = [float(np.hypot(*(layout[u] - layout[v]))) for u, v in G.edges if u != v]
    scale = box - 2 * margin
    if lengths and np.median(lengths) > 0:
        scale = min(scale, 0.3 * box / float(np.median(lengths)))
    xy = {
        v: np.array([box / 2 + (p[0] - 0.5) * scale, box / 2 - (p[1] - 0.5) * scale])
        for v, p in layout.items()
    }
    lettered = {
        v
        for v, lab in zip(nodes, labels)
        if molecule and (lab != "C" or G.degree(v) == 0)
    }
    styles = edge_styles(_edge_labels_of([G], edge_label))
    spacing = max(2.0, round(0.035 * box))  # between the lines of a double bond
    paths: dict[str | None, list[str]] = {}
    for u, v, d in G.edges(data=True):
        if u == v:
            continue
        a, b = xy[u], xy[v]
        length = float(np.hypot(*(b - a)))
        if length < 1e-9:
            continue
        unit = (b - a) / length
        cut = 0.45 * font
        a = a + unit * (cut if u in lettered else 0.0)
        b = b - unit * (cut if v in lettered else 0.0)
        strokes, linestyle = styles.get(_edge_value(d, edge_label), (1, "solid"))
        dash = _SVG_DASHES.get(linestyle) if isinstance(linestyle, str) else "6 3"
        normal = np.array([-unit[1], unit[0]])
        for k in range(strokes):
            off = (k - (strokes - 1) / 2) * spacing * normal
            p, q = np.rint(a + off).astype(int), np.rint(b + off).astype(int)
            paths.setdefault(dash, []).append(f"M{p[0]} {p[1]} {q[0]} {q[1]}")
    parts = [head]
    for dash, segments in paths.items():
        extra = f' stroke-dasharray="{dash}"' if dash else ""
        parts.append(
            f'<path fill="none" stroke="#000" stroke-width="2"{extra} d="{"".join(segments)}"/>'
        )
    if molecule:
        palette = _atom_palette()
        texts = []
        for v, lab in zip(nodes, labels):
            if v in lettered:
                x, y = np.rint(xy[v] + np.array([0.0, 0.35 * font])).astype(int)
                colour = _short_hex(_element_colour(lab, palette))
                texts.append(f'<text x="{x}" y="{y}" fill="{colour}">{lab}</text>')
        if texts:
            parts.append(
                f'<g font-family="sans-serif" font-size="{font}" text-anchor="middle">'
                + "".join(texts)
                + "</g>"
            )
    else:
        colours = label_colours(labels)
        r = max(2, round(0.05 * box))
        for v, lab in zip(nodes, labels):
            x, y = np.rint(xy[v]).astype(int)
            parts.append(
                f'<circle cx="{x}" cy="{y}" r="{r}" fill="{_short_hex(colours[lab])}"/>'
            )
    return "".join(parts) + "</svg>"

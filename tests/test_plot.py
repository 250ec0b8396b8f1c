"""Tests for the drawings of gwpred.plot.

Outside references used here:

- networkx: node and edge counts of the drawn graphs, and ``graph_edit_distance``
  (exact, uniform costs with ``node_match``/``edge_match`` on the labels) for the edit
  marks of ``draw_alignment`` on small graphs.
- Python's ``xml.etree.ElementTree`` parses the SVG files matplotlib writes; the SVG
  element names (``use``, ``path``, ``text``) are from the SVG 1.1 specification (from
  memory).
- The Okabe-Ito palette (M. Okabe and K. Ito, "Color Universal Design", 2008; hex codes
  from memory) for the colour-blind-safe colours.
- QM9 heavy-atom graphs from ``gwpred.datasets.load_demo`` (built from the QM9 data of the
  PyPI package qm9pack).
"""

from __future__ import annotations

import io
import xml.etree.ElementTree as ET

import matplotlib

matplotlib.use("Agg")

import networkx as nx
import numpy as np
import pytest
from matplotlib.figure import Figure

from gwpred import plot
from gwpred.datasets import load_demo
from gwpred.metrics import edit_distance

SVG = "{http://www.w3.org/2000/svg}"
# Okabe & Ito (2008), from memory: orange, sky blue, bluish green, yellow, blue,
# vermillion, reddish purple, and grey for the eighth colour.
OKABE_ITO = {
    "#E69F00",
    "#56B4E9",
    "#009E73",
    "#F0E442",
    "#0072B2",
    "#D55E00",
    "#CC79A7",
    "#999999",
}
EDIT_GIDS = [
    f"gwpred-edit-{part}-{kind}"
    for part in ("node", "edge")
    for kind in ("substituted", "deleted", "inserted")
]


@pytest.fixture(scope="module")
def qm9():
    _, graphs = load_demo()
    return graphs


def labeled(edges, labels, edge_labels=None):
    g = nx.Graph()
    g.add_nodes_from((v, {"label": lab}) for v, lab in labels.items())
    for k, (u, v) in enumerate(edges):
        g.add_edge(u, v, label=(edge_labels[k] if edge_labels else 1))
    return g


def axes(width=4.0, height=3.5):
    return Figure(figsize=(width, height)).subplots()


def collections(ax, gid):
    return [c for c in ax.collections if c.get_gid() == gid]


def n_points(ax, gid):
    return sum(len(c.get_offsets()) for c in collections(ax, gid))


def n_segments(ax, gid="gwpred-edges"):
    return sum(len(c.get_segments()) for c in collections(ax, gid))


def legend_texts(ax):
    return [t.get_text() for t in ax.get_legend().get_texts()]


def svg_root(ax):
    buf = io.StringIO()
    with matplotlib.rc_context({"svg.fonttype": "none"}):
        ax.figure.savefig(buf, format="svg")
    return ET.fromstring(buf.getvalue())


def groups(root, gid):
    return [el for el in root.iter() if el.get("id") == gid]


# --------------------------------------------------------------------------- draw_graph


def test_draw_graph_counts_and_legend_on_qm9(qm9):
    # the node and edge counts come from networkx; the legend lists every label once
    for g in qm9[:40:7]:
        ax = plot.draw_graph(g, axes())
        assert n_points(ax, "gwpred-nodes") == g.number_of_nodes()
        assert n_segments(ax) == g.number_of_edges()
        node_labels = sorted({lab for _, lab in g.nodes(data="label")})
        edge_labels = sorted({lab for _, _, lab in g.edges(data="label")})
        assert legend_texts(ax) == node_labels + [f"edge {b}" for b in edge_labels]
        assert [t.get_text() for t in ax.texts] == [
            str(lab) for _, lab in g.nodes(data="label")
        ]


def test_draw_graph_file_has_one_marker_per_node_and_one_stroke_per_bond_order(
    tmp_path, qm9
):
    # SVG written by matplotlib, parsed with ElementTree: a scatter becomes one <use> per
    # point; a bond of order k is drawn as k strokes (k <path> elements).
    g = next(g for g in qm9 if {2, 3} <= {lab for _, _, lab in g.edges(data="label")})
    ax = plot.draw_graph(g, axes())
    path = tmp_path / "graph.svg"
    with matplotlib.rc_context({"svg.fonttype": "none"}):
        ax.figure.savefig(path)
    root = ET.parse(path).getroot()
    (nodes,) = groups(root, "gwpred-nodes")
    assert len(list(nodes.iter(f"{SVG}use"))) == g.number_of_nodes()
    strokes = sum(
        len(list(el.iter(f"{SVG}path"))) for el in groups(root, "gwpred-edges")
    )
    assert strokes == sum(order for _, _, order in g.edges(data="label"))
    texts = [t.text for t in root.iter(f"{SVG}text")]
    for lab in {lab for _, lab in g.nodes(data="label")}:
        assert lab in texts  # in the nodes and in the legend


def test_draw_graph_colours_are_okabe_ito(qm9):
    g = qm9[3]
    ax = plot.draw_graph(g, axes())
    (nodes,) = collections(ax, "gwpred-nodes")
    faces = {matplotlib.colors.to_hex(c).upper() for c in nodes.get_facecolors()}
    assert faces <= OKABE_ITO
    assert set(plot.PALETTE) == OKABE_ITO
    # the edit-mark colours are kept for the marks while there are few labels
    colours = plot.label_colours(["a", "b", "c", "d", "e"])
    assert not set(colours.values()) & set(plot.EDIT_COLOURS.values())


@pytest.mark.parametrize(
    "graph",
    [
        nx.path_graph(30),
        nx.cycle_graph(30),
        nx.balanced_tree(2, 4).subgraph(range(30)).copy(),
        nx.random_labeled_tree(30, seed=3),
        nx.ladder_graph(15),
    ],
    ids=["path", "cycle", "binary-tree", "random-tree", "ladder"],
)
def test_layout_keeps_30_nodes_apart(graph):
    # readable: no two node discs overlap on the page (networkx graphs of 30 nodes)
    nx.set_node_attributes(graph, "C", "label")
    ax = plot.draw_graph(graph, axes(4.5, 4.5))
    (nodes,) = collections(ax, "gwpred-nodes")
    ax.figure.canvas.draw()
    xy = ax.transData.transform(nodes.get_offsets())  # pixels
    diameter_px = np.sqrt(nodes.get_sizes()[0]) * ax.figure.dpi / 72
    d = np.sqrt(((xy[:, None] - xy[None]) ** 2).sum(-1))
    np.fill_diagonal(d, np.inf)
    assert d.min() >= 0.95 * diameter_px
    assert n_points(ax, "gwpred-nodes") == 30


def test_graph_layout_components_do_not_overlap():
    g = nx.disjoint_union(nx.cycle_graph(5), nx.path_graph(4))
    pos = plot.graph_layout(g)
    assert set(pos) == set(g.nodes)
    first = np.array([pos[v] for v in range(5)])
    second = np.array([pos[v] for v in range(5, 9)])
    assert first[:, 0].max() < second[:, 0].min()  # side by side, largest first
    assert all(0 <= c <= 1 for p in pos.values() for c in p)


def test_edge_styles_bond_orders_and_other_labels():
    # bond orders as 1, 2, 3 strokes (common practice in chemical drawings)
    assert plot.edge_styles([3, 1, 2]) == {
        1: (1, "solid"),
        2: (2, "solid"),
        3: (3, "solid"),
    }
    styles = plot.edge_styles(["x", "y", None, 1])
    assert len(set(styles.values())) == 4  # every label looks different


def test_draw_graph_errors():
    with pytest.raises(TypeError, match="only simple undirected graphs are drawn"):
        plot.draw_graph(nx.DiGraph([(0, 1)]), axes())
    with pytest.raises(TypeError, match="must be a networkx.Graph"):
        plot.draw_graph([(0, 1)], axes())
    with pytest.raises(ValueError, match=r"pos has no position for node\(s\) \[1\]"):
        plot.draw_graph(nx.path_graph(2), axes(), pos={0: (0, 0)})


# --------------------------------------------------------------------------- alignment


def random_labeled_graph(rng, n):
    g = nx.gnp_random_graph(n, 0.5, seed=int(rng.integers(1 << 30)))
    nx.set_node_attributes(g, {v: "CNO"[int(rng.integers(3))] for v in g}, "label")
    nx.set_edge_attributes(g, {e: int(rng.integers(1, 3)) for e in g.edges}, "label")
    return g


def nx_ged(g1, g2):
    # networkx's exact search; unit costs, substitution free between equal labels
    return nx.graph_edit_distance(
        g1,
        g2,
        node_match=lambda a, b: a["label"] == b["label"],
        edge_match=lambda a, b: a["label"] == b["label"],
    )


def test_alignment_marks_count_the_edit_distance():
    # number of marked edits == exact GED from networkx, on small random labeled graphs
    rng = np.random.default_rng(7)
    checked = 0
    for _ in range(12):
        g1 = random_labeled_graph(rng, int(rng.integers(2, 6)))
        g2 = random_labeled_graph(rng, int(rng.integers(2, 6)))
        ref = nx_ged(g1, g2)
        ax = plot.draw_alignment(g1, g2, axes(6, 3.5))
        marks = sum(n_points(ax, gid) for gid in EDIT_GIDS)
        assert marks == ref
        # every node and edge of both graphs is drawn
        assert n_points(ax, "gwpred-nodes") == len(g1) + len(g2)
        assert n_segments(ax) == g1.number_of_edges() + g2.number_of_edges()
        # a substituted node is circled on both sides
        assert n_points(ax, "gwpred-edit-node-substituted-partner") == n_points(
            ax, "gwpred-edit-node-substituted"
        )
        checked += ref > 0
    assert checked >= 8


def test_alignment_legend_and_title_give_the_counts():
    p = labeled([(0, 1), (1, 2)], {0: "C", 1: "C", 2: "O"})
    t = labeled([(0, 1), (1, 2), (2, 0)], {0: "C", 1: "C", 2: "N"})
    # by hand: O -> N substituted, edge (2, 0) inserted; networkx agrees
    assert nx_ged(p, t) == 2
    ax = plot.draw_alignment(p, t, axes(6, 3.5), mapping={0: 0, 1: 1, 2: 2})
    assert ax.get_title() == "cost 2: 1 node substituted, 1 edge inserted"
    texts = legend_texts(ax)
    assert texts[:4] == ["C", "N", "O", "edge 1"]
    assert "node substituted (1)" in texts and "edge inserted (1)" in texts
    assert "node deleted (1)" not in texts
    assert n_points(ax, "gwpred-edit-edge-inserted") == 1


def test_alignment_puts_mapped_nodes_at_the_same_place(qm9):
    p, t = qm9[10], qm9[11]
    r = edit_distance(p, t)
    ax = plot.draw_alignment(p, t, axes(6, 3.5), mapping=r.mapping)
    pred_nodes, true_nodes = collections(ax, "gwpred-nodes")
    xy_p = dict(zip(p.nodes, pred_nodes.get_offsets()))
    xy_t = dict(zip(t.nodes, true_nodes.get_offsets()))
    shifts = np.array(
        [xy_t[v] - xy_p[u] for u, v in r.mapping.items() if v is not None]
    )
    assert np.allclose(shifts, shifts[0])  # one shift: the second panel
    assert sum(n_points(ax, gid) for gid in EDIT_GIDS) == r.value == nx_ged(p, t)


def test_alignment_edits_against_networkx_paths():
    # the counts of alignment_edits reproduce the cost of networkx's optimal edit path
    g1 = labeled([(0, 1), (1, 2), (2, 3)], {0: "C", 1: "C", 2: "N", 3: "O"}, [1, 2, 1])
    g2 = labeled([("a", "b"), ("b", "c")], {"a": "C", "b": "C", "c": "O"}, [1, 1])
    # optimize_edit_paths yields ever cheaper paths; every one is checked
    paths = list(
        nx.optimize_edit_paths(
            g1,
            g2,
            node_match=lambda a, b: a["label"] == b["label"],
            edge_match=lambda a, b: a["label"] == b["label"],
        )
    )
    for node_path, _, cost in paths:
        mapping = {u: v for u, v in node_path if u is not None}
        assert plot.alignment_edits(g1, g2, mapping).cost == cost
    # by hand: delete N and its two edges, insert the edge b-c (4 edits)
    assert paths[-1][2] == nx_ged(g1, g2) == 4


def test_alignment_edits_errors():
    g1 = labeled([(0, 1)], {0: "C", 1: "C"})
    g2 = labeled([("a", "b")], {"a": "C", "b": "C"})
    with pytest.raises(TypeError, match="mapping must be a dict"):
        plot.alignment_edits(g1, g2, [(0, "a")])
    with pytest.raises(ValueError, match=r"no entry for predicted node\(s\) \[1\]"):
        plot.alignment_edits(g1, g2, {0: "a"})
    with pytest.raises(ValueError, match="not nodes of the predicted graph"):
        plot.alignment_edits(g1, g2, {0: "a", 1: "b", 7: None})
    with pytest.raises(ValueError, match="not nodes of the true graph"):
        plot.alignment_edits(g1, g2, {0: "a", 1: "z"})
    with pytest.raises(ValueError, match="two predicted nodes to true node 'a'"):
        plot.alignment_edits(g1, g2, {0: "a", 1: "a"})


# --------------------------------------------------------------------------- heat maps


def test_structure_heat_map_shows_the_matrix():
    rng = np.random.default_rng(0)
    C = rng.random((6, 6))
    C = (C + C.T) / 2
    ax = plot.draw_structure(C, axes(), labels=list("CCNOCC"))
    (img,) = ax.images
    assert np.array_equal(np.asarray(img.get_array()), C)
    assert img.get_clim() == (0.0, 1.0)
    assert [t.get_text() for t in ax.get_yticklabels()] == [
        "0 C",
        "1 C",
        "2 N",
        "3 O",
        "4 C",
        "5 C",
    ]
    assert len(ax.figure.axes) == 2  # the colour bar


def test_node_score_heat_map_labels_and_values():
    F = np.array([[0.9, 0.1, 0.0], [0.2, 0.2, 0.6]])
    ax = plot.draw_node_scores(F, ["C", "N", "O"], axes())
    (img,) = ax.images
    assert np.array_equal(np.asarray(img.get_array()), F)
    assert [t.get_text() for t in ax.get_xticklabels()] == ["C", "N", "O"]
    assert [t.get_text() for t in ax.get_yticklabels()] == [
        "0 C",
        "1 O",
    ]  # most likely label per node
    assert sorted(t.get_text() for t in ax.texts) == sorted(
        ["0.90", "0.10", "0.00", "0.20", "0.20", "0.60"]
    )


def test_heat_map_errors():
    with pytest.raises(
        ValueError, match=r"must be square \(n, n\), got shape \(2, 3\)"
    ):
        plot.draw_structure(np.zeros((2, 3)), axes())
    with pytest.raises(ValueError, match="NaN or infinite"):
        plot.draw_structure(np.full((2, 2), np.nan), axes())
    with pytest.raises(ValueError, match="labels has 1 entries for a 2 x 2 structure"):
        plot.draw_structure(np.zeros((2, 2)), axes(), labels=["C"])
    with pytest.raises(
        ValueError, match="label_names has 2 names but node_scores has 3 columns"
    ):
        plot.draw_node_scores(np.zeros((2, 3)), ["C", "N"], axes())
    with pytest.raises(ValueError, match="non-empty 2-D array"):
        plot.draw_node_scores(np.zeros(3), ["C", "N", "O"], axes())


# --------------------------------------------------------------------------- neighbours


def test_neighbors_largest_weights_first(qm9):
    graphs = qm9[20:28]
    w = np.array([0.05, 0.3, 0.0, 0.2, 0.1, 0.15, 0.12, 0.08])
    ax = plot.draw_neighbors(
        graphs, w, axes(9, 2.6), names=[f"#{k}" for k in range(8)], max_graphs=4
    )
    order = [1, 3, 5, 6]  # by decreasing weight
    nodes = collections(ax, "gwpred-nodes")
    assert [len(c.get_offsets()) for c in nodes] == [
        graphs[k].number_of_nodes() for k in order
    ]
    assert n_segments(ax) == sum(graphs[k].number_of_edges() for k in order)
    bars = [p for p in ax.patches if p.get_gid() == "gwpred-weight-bar"]
    widths = np.array([b.get_width() for b in bars])
    assert np.allclose(widths / widths[0], w[order] / w[order][0])
    captions = [t.get_text() for t in ax.texts if t.get_text().startswith("w = ")]
    assert captions == [f"w = {w[k]:.2f}\n#{k}" for k in order]


def test_neighbors_errors(qm9):
    with pytest.raises(ValueError, match="one value per graph"):
        plot.draw_neighbors(qm9[:3], [0.5, 0.5], axes())
    with pytest.raises(ValueError, match="finite and >= 0"):
        plot.draw_neighbors(qm9[:2], [0.5, -0.5], axes())
    with pytest.raises(ValueError, match="graphs is empty"):
        plot.draw_neighbors([], [], axes())
    with pytest.raises(ValueError, match="max_graphs must be an int >= 1"):
        plot.draw_neighbors(qm9[:2], [0.5, 0.5], axes(), max_graphs=0)
    with pytest.raises(ValueError, match="names has 1 entries for 2 graphs"):
        plot.draw_neighbors(qm9[:2], [0.5, 0.5], axes(), names=["a"])


def test_functions_make_their_own_figure_when_ax_is_none(qm9):
    import matplotlib.pyplot as plt

    for ax in (
        plot.draw_graph(qm9[0]),
        plot.draw_alignment(qm9[0], qm9[1]),
        plot.draw_structure(np.eye(3)),
        plot.draw_node_scores(np.eye(3), ["C", "N", "O"]),
        plot.draw_neighbors(qm9[:2], [0.6, 0.4]),
    ):
        assert ax.figure is not None
        plt.close(ax.figure)


def test_comparison_grid_png(tmp_path, qm9):
    path = tmp_path / "grid.png"
    plot.comparison_grid(
        qm9[:3], qm9[3:6], str(path), titles=["a", "b", "c"], caption="note"
    )
    img = matplotlib.image.imread(path)
    assert img.ndim == 3 and img.std() > 0
    assert (
        path.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    )  # PNG signature (RFC 2083, from memory)

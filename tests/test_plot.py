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
  PyPI package qm9pack), and its spectra on the wavenumber grid.
- RDKit: its default atom palette (``rdkit.Chem.Draw.rdMolDraw2D.MolDrawOptions``), the
  letter colours of its own SVG depictions, its Morgan fingerprints (``GetOnBits``) and
  Tanimoto similarity (``rdkit.DataStructs``).
- The WCAG 2 contrast ratio (W3C; formula from memory) for readable text on node discs.
- Elementary geometry (distance from a point to a segment) for the edge paths, and the
  CSS rule that a 3-digit hex colour doubles each digit (from memory).
"""

from __future__ import annotations

import io
import re
import xml.etree.ElementTree as ET

import matplotlib

matplotlib.use("Agg")

import networkx as nx
import numpy as np
import pytest
from matplotlib.figure import Figure
from scipy import sparse

from gwpred import BarycenterGraphPredictor, plot
from gwpred.datasets import load_demo, wavenumber_grid
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


def test_non_element_labels_get_okabe_ito_colours():
    # labels that are not element symbols keep the Okabe-Ito palette
    g = nx.cycle_graph(6)
    nx.set_node_attributes(g, {v: "abc"[v % 3] for v in g}, "label")
    ax = plot.draw_graph(g, axes())
    (nodes,) = collections(ax, "gwpred-nodes")
    faces = {matplotlib.colors.to_hex(c).upper() for c in nodes.get_facecolors()}
    assert faces <= OKABE_ITO and len(faces) == 3
    assert set(plot.PALETTE) == OKABE_ITO
    # the edit-mark colours are kept for the marks while there are few labels
    colours = plot.label_colours(["a", "b", "c", "d", "e"])
    assert set(colours.values()) <= OKABE_ITO
    assert not set(colours.values()) & set(plot.EDIT_COLOURS.values())


# --------------------------------------------------------------------------- element colours

# Elements that RDKit's default palette colours, in SMILES that hold them all.
PALETTE_SMILES = "NC(=O)C(F)(Cl)C(Br)(I)SP"


def rdkit_hex(rgb):
    # RDKit writes a colour channel c as int(255 * c) in its SVG (seen in its output below)
    return "#" + "".join(f"{int(255 * c):02X}" for c in rgb[:3])


def rdkit_atom_fills(smiles):
    """Atom symbol -> the fill RDKit's own SVG depiction gives the atom's letters."""
    Chem = pytest.importorskip("rdkit.Chem")
    rdMolDraw2D = pytest.importorskip("rdkit.Chem.Draw.rdMolDraw2D")
    mol = Chem.MolFromSmiles(smiles)
    drawer = rdMolDraw2D.MolDraw2DSVG(400, 300)
    drawer.DrawMolecule(mol)
    drawer.FinishDrawing()
    svg = drawer.GetDrawingText()
    fills = {}
    for atom in mol.GetAtoms():
        found = set(
            re.findall(rf"<path class='atom-{atom.GetIdx()}'[^>]*fill='(#[0-9A-F]{{6}})'", svg)
        )
        if found:  # carbons have no letters
            (fill,) = found
            fills[atom.GetSymbol()] = fill
    return fills


def test_atom_palette_copy_equals_rdkits():
    # the built-in copy is RDKit's default atom palette
    # (rdkit.Chem.Draw.rdMolDraw2D.MolDrawOptions().getAtomPalette()), for every element
    rdMolDraw2D = pytest.importorskip("rdkit.Chem.Draw.rdMolDraw2D")
    raw = rdMolDraw2D.MolDrawOptions().getAtomPalette()
    theirs = {z: rdkit_hex(raw.get(z, raw[-1])) for z in [-1, *range(1, 119)]}
    ours = {z: plot.ATOM_PALETTE.get(z, plot.ATOM_PALETTE[-1]) for z in theirs}
    assert ours == theirs


def test_element_colours_match_rdkit_depictions():
    # the disc colours are the colours of the element letters in RDKit's own SVG drawing
    fills = rdkit_atom_fills(PALETTE_SMILES)
    assert set(fills) == {"N", "O", "F", "Cl", "Br", "I", "S", "P"}
    colours = plot.label_colours(list(fills))
    assert colours == fills
    # RDKit's example values, as documented: O red, N blue (common practice, CPK colours)
    assert fills["O"] == "#FF0000" and fills["N"] == "#0000FF"
    # RDKit writes carbon (and unlisted elements) black; on a disc they are dark grey
    assert plot.label_colours(["C", "H", "Si"]) == dict.fromkeys(["C", "H", "Si"], "#555555")


def test_element_colours_without_rdkit(monkeypatch):
    # without RDKit the built-in copy gives the same colours
    labels = ["C", "N", "O", "F", "Cl", "Br", "I", "S", "P", "Si", "x"]
    with_rdkit = plot.label_colours(labels)
    monkeypatch.setattr(plot, "has_extra", lambda name: False)
    assert plot.label_colours(labels) == with_rdkit


def contrast(a, b):
    # WCAG 2 contrast ratio from relative luminance (W3C, from memory)
    def lum(c):
        rgb = matplotlib.colors.to_rgb(c)
        lin = [v / 12.92 if v <= 0.04045 else ((v + 0.055) / 1.055) ** 2.4 for v in rgb]
        return 0.2126 * lin[0] + 0.7152 * lin[1] + 0.0722 * lin[2]

    hi, lo = sorted((lum(a), lum(b)), reverse=True)
    return (hi + 0.05) / (lo + 0.05)


def test_node_text_is_readable_on_every_disc():
    # every label is written with WCAG AA contrast (>= 4.5) on its disc, carbon included
    labels = ["C", "N", "O", "F", "Cl", "Br", "I", "S", "P", "Si", *"abcdefgh"]
    g = nx.path_graph(len(labels))
    nx.set_node_attributes(g, dict(enumerate(labels)), "label")
    ax = plot.draw_graph(g, axes(8, 3))
    (nodes,) = collections(ax, "gwpred-nodes")
    faces = [matplotlib.colors.to_hex(c) for c in nodes.get_facecolors()]
    texts = [t for t in ax.texts if t.get_gid() != "gwpred-node-number"]
    assert [t.get_text() for t in texts] == labels
    ratios = [contrast(face, t.get_color()) for face, t in zip(faces, texts)]
    assert min(ratios) >= 4.5
    carbon = texts[0]
    assert matplotlib.colors.to_hex(carbon.get_color()) == "#ffffff"


# --------------------------------------------------------------------------- node numbers


def number_texts(ax):
    return [t for t in ax.texts if t.get_gid() == "gwpred-node-number"]


def test_draw_graph_numbers_every_node_beside_its_disc(qm9):
    for g in qm9[:60:6]:
        plain = plot.draw_graph(g, axes())
        assert not number_texts(plain)  # off by default
        ax = plot.draw_graph(g, axes(), numbers=True)
        (nodes,) = collections(ax, "gwpred-nodes")
        numbers = number_texts(ax)
        # node i (networkx's node order) carries the number i, anchored at its disc
        assert [t.get_text() for t in numbers] == [str(i) for i in range(len(g))]
        assert np.allclose([t.xy for t in numbers], nodes.get_offsets())
        # drawn outside the disc: the text box does not reach into it
        radius = np.sqrt(nodes.get_sizes()[0]) / 2 * ax.figure.dpi / 72
        centres = ax.transData.transform(nodes.get_offsets())
        for t, c in zip(numbers, centres):
            box = t.get_window_extent()
            nearest = np.clip(c, [box.x0, box.y0], [box.x1, box.y1])
            assert np.hypot(*(nearest - c)) >= 0.9 * radius
            assert t.get_fontsize() >= 5  # readable size


def test_numbers_follow_the_barycenter_rows():
    # a gwpred prediction: node i of the predicted graph is row i of the heat maps
    X, graphs = load_demo()
    train = list(range(0, 3000, 50))
    model = BarycenterGraphPredictor(n_neighbors=3, alpha=0.5, random_state=0).fit(
        X[train], [graphs[i] for i in train]
    )
    (pred,) = model.predict(X[[25]])
    (soft,) = model.predict_barycenters(X[[25]])
    n = np.asarray(soft.structure).shape[0]
    assert list(pred.nodes) == list(range(n))
    heat = plot.draw_structure(soft.structure, axes())
    rows = [t.get_text() for t in heat.get_yticklabels()]
    ax = plot.draw_graph(pred, axes(), numbers=True)
    assert [t.get_text() for t in number_texts(ax)] == [r.split()[0] for r in rows]


def test_alignment_numbers_the_predicted_panel(qm9):
    p, t = qm9[10], qm9[11]
    ax = plot.draw_alignment(p, t, axes(6, 3.5), numbers=True)
    pred_nodes, _ = collections(ax, "gwpred-nodes")
    numbers = number_texts(ax)
    assert [x.get_text() for x in numbers] == [str(i) for i in range(len(p))]
    assert np.allclose([x.xy for x in numbers], pred_nodes.get_offsets())


# --------------------------------------------------------------------------- edge paths


def distance_to_polyline(points, path):
    # elementary geometry: distance from each point to the nearest segment of a polyline
    out = np.full(len(points), np.inf)
    for p, q in zip(path[:-1], path[1:]):
        seg = q - p
        t = np.clip(((points - p) @ seg) / max(seg @ seg, 1e-300), 0.0, 1.0)
        d = np.hypot(*(points - (p + t[:, None] * seg)).T)
        out = np.minimum(out, d)
    return out


def spread_points(rng, n, gap):
    # uniform random points in the unit square, at least `gap` apart (rejection sampling)
    pts = []
    while len(pts) < n:
        p = rng.random(2)
        if all(np.hypot(*(p - q)) >= gap for q in pts):
            pts.append(p)
    return np.array(pts)


@pytest.mark.parametrize("spread", [False, True], ids=["uniform", "discs-apart"])
def test_edge_paths_keep_a_disc_radius_from_other_nodes(spread):
    # random layouts: a path the routine calls clear stays at least a disc radius from
    # every node but its two ends (its sampled points, and the lines between them);
    # otherwise it is drawn straight
    rng = np.random.default_rng(11)
    crossing = rerouted = 0
    for _ in range(80):
        n = int(rng.integers(4, 16))
        radius = float(rng.uniform(0.015, 0.045))
        xy = spread_points(rng, n, 3.2 * radius) if spread else rng.random((n, 2))
        for _ in range(6):
            i, j = rng.choice(n, size=2, replace=False)
            others = np.delete(xy, [i, j], axis=0)
            path, clear = plot._edge_path(xy[i], xy[j], others, radius)
            assert np.allclose(path[0], xy[i]) and np.allclose(path[-1], xy[j])
            if clear:
                d = np.hypot(*(path[:, None, :] - others[None]).transpose(2, 0, 1))
                assert d.min() >= radius
                assert distance_to_polyline(others, path).min() >= radius
            else:
                assert np.array_equal(path, np.array([xy[i], xy[j]]))
            if distance_to_polyline(others, np.array([xy[i], xy[j]])).min() < radius:
                crossing += 1
                rerouted += clear
    assert crossing >= 40
    if spread:  # with the discs apart, as drawings keep them, nearly every edge gets round
        assert rerouted >= 0.9 * crossing


def test_drawn_edges_do_not_cross_nodes(qm9):
    # drawings of QM9 graphs (networkx node positions in pixels): no edge passes through a
    # node that is not one of its ends
    for g in qm9[:300:10]:
        ax = plot.draw_graph(g, axes())
        ax.figure.canvas.draw()
        (nodes,) = collections(ax, "gwpred-nodes")
        centres = ax.transData.transform(nodes.get_offsets())
        radius = np.sqrt(nodes.get_sizes()[0]) / 2 * ax.figure.dpi / 72
        for coll in collections(ax, "gwpred-edges"):
            for seg in coll.get_segments():
                px = ax.transData.transform(seg)
                ends = {int(np.argmin(np.hypot(*(centres - px[k]).T))) for k in (0, -1)}
                others = np.delete(centres, sorted(ends), axis=0)
                if len(others):
                    assert distance_to_polyline(others, px).min() >= radius


# --------------------------------------------------------------------------- deleted edges


def dash_pattern(linestyle):
    # the dash pattern matplotlib draws for a line style, at the edges' line width
    from matplotlib.collections import LineCollection

    return drawn_pattern(LineCollection([], linewidths=1.3, linestyles=linestyle))


def drawn_pattern(coll):
    offset, dashes = coll.get_linestyle()[0]
    return None if dashes is None else tuple(np.round(dashes, 6))


def test_deleted_edge_style_differs_from_every_edge_style():
    styles = plot.edge_styles([1, 2, 3, None, *"abcdefghij"])
    strokes, linestyle = plot.DELETED_EDGE_STYLE
    assert strokes == 1  # never parallel strokes: it cannot pass for a double bond
    assert plot.DELETED_EDGE_STYLE not in styles.values()
    assert dash_pattern(linestyle) is not None  # dashed, unlike the bond orders
    assert dash_pattern(linestyle) not in {dash_pattern(ls) for _, ls in styles.values()}


def test_alignment_draws_a_deleted_double_bond_dashed_with_a_cross():
    # predicted C=C-O, true C-O: the C=C bond and a C are deleted (networkx agrees: GED 2)
    p = labeled([(0, 1), (1, 2)], {0: "C", 1: "C", 2: "O"}, [2, 1])
    t = labeled([("a", "b")], {"a": "C", "b": "O"}, [1])
    assert nx_ged(p, t) == 2
    ax = plot.draw_alignment(p, t, axes(6, 3.5), mapping={0: None, 1: "a", 2: "b"})
    deleted = dash_pattern(plot.DELETED_EDGE_STYLE[1])
    edge_colls = collections(ax, "gwpred-edges")
    (dashed,) = [c for c in edge_colls if drawn_pattern(c) == deleted]
    assert len(dashed.get_segments()) == 1  # no other edge has the deletion's look
    assert matplotlib.colors.to_hex(dashed.get_colors()[0]).upper() == plot.EDIT_COLOURS["deleted"]
    assert dashed.get_path_effects() == []  # one stroke, whatever the bond order
    # a cross at its middle, and the legend shows the same dashes and cross
    (mark,) = collections(ax, "gwpred-edit-edge-deleted")
    cross = matplotlib.markers.MarkerStyle("X").get_path()
    assert np.allclose(mark.get_paths()[0].vertices, cross.vertices)
    legend = ax.get_legend()
    (handle,) = [
        h
        for h, txt in zip(legend.legend_handles, legend.get_texts())
        if txt.get_text() == "edge deleted (1)"
    ]
    assert handle.get_marker() == "X" and handle.get_linestyle() == "--"
    assert matplotlib.colors.to_hex(handle.get_color()).upper() == plot.EDIT_COLOURS["deleted"]


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


# --------------------------------------------------------------------------- inputs


@pytest.fixture(scope="module")
def spectra():
    X, graphs = load_demo()
    return X, graphs


def test_draw_inputs_spectra_as_lines(spectra):
    # QM9 spectra of the demo set on its wavenumber grid (cm^-1)
    X, _ = spectra
    grid = wavenumber_grid()
    w = np.array([0.1, 0.5, 0.25, 0.15])
    ax = plot.draw_inputs(X[0], X[1:5], w, grid=grid, labels=["a", "b", "c", "d"], ax=axes(6, 3))
    (main,) = [line for line in ax.lines if line.get_gid() == "gwpred-input"]
    others = [line for line in ax.lines if line.get_gid() == "gwpred-neighbour-input"]
    assert np.array_equal(main.get_xdata(), grid) and np.array_equal(main.get_ydata(), X[0])
    assert matplotlib.colors.to_hex(main.get_color()) == "#000000"
    assert all(main.get_linewidth() > o.get_linewidth() for o in others)
    assert all(main.get_zorder() > o.get_zorder() for o in others)  # the input on top
    by_label = {o.get_label(): o for o in others}
    for k, name in enumerate("abcd"):
        line = by_label[f"{name} (w = {w[k]:.2f})"]
        assert np.array_equal(line.get_ydata(), X[1 + k])
    alphas = [by_label[f"{n} (w = {w[k]:.2f})"].get_alpha() for k, n in enumerate("abcd")]
    assert np.argsort(alphas).tolist() == np.argsort(w).tolist()  # more weight, more ink
    assert legend_texts(ax) == [
        "input",
        "b (w = 0.50)",
        "c (w = 0.25)",
        "d (w = 0.15)",
        "a (w = 0.10)",
    ]
    # no grid: column indices
    ax = plot.draw_inputs(X[0], X[1:3], [0.5, 0.5], ax=axes())
    (main,) = [line for line in ax.lines if line.get_gid() == "gwpred-input"]
    assert np.array_equal(main.get_xdata(), np.arange(X.shape[1]))


def rdkit_bits(graphs, n_bits):
    # RDKit's Morgan bit vectors (radius 2), read with GetOnBits, and its Tanimoto similarity
    DataStructs = pytest.importorskip("rdkit.DataStructs")
    generators = pytest.importorskip("rdkit.Chem.rdFingerprintGenerator")
    from gwpred.chem import graph_to_mol

    gen = generators.GetMorganGenerator(radius=2, fpSize=n_bits)
    fps = [gen.GetFingerprint(graph_to_mol(g)) for g in graphs]
    dense = np.zeros((len(fps), n_bits), dtype=np.uint8)
    for i, fp in enumerate(fps):
        dense[i, list(fp.GetOnBits())] = 1
    tanimoto = [DataStructs.TanimotoSimilarity(fps[0], fp) for fp in fps[1:]]
    return dense, fps, tanimoto


def test_draw_inputs_fingerprints_as_a_bit_strip(spectra):
    _, graphs = spectra
    chosen = [graphs[i] for i in (100, 101, 102, 103)]
    bits, fps, tanimoto = rdkit_bits(chosen, 512)
    w = [0.2, 0.7, 0.1]
    ax = plot.draw_inputs(bits[0], bits[1:], w, labels=["p", "q", "r"], ax=axes(8, 2.5))
    (img,) = [im for im in ax.images if im.get_gid() == "gwpred-bit-strip"]
    strip = np.asarray(img.get_array())
    # only the columns set in some row: the union of RDKit's on-bits
    union = sorted(set().union(*(fp.GetOnBits() for fp in fps)))
    assert strip.shape == (4, len(union))
    ticks = ax.get_xticks()
    assert [t.get_text() for t in ax.get_xticklabels()] == [str(union[int(c)]) for c in ticks]
    a = bits[0, union] == 1
    assert np.array_equal(strip[0], np.where(a, 1, 0))
    order = [1, 0, 2]  # by decreasing weight
    for row, k in zip(strip[1:], order):
        b = bits[1 + k, union] == 1
        assert np.array_equal(row == 2, a & b)  # set here and in the input
        assert np.array_equal(row == 3, b & ~a)  # set here only
        assert np.array_equal(row == 4, a & ~b)  # missing here
    names = [t.get_text() for t in ax.get_yticklabels()]
    assert names == ["input"] + [
        f"{'pqr'[k]} (w = {w[k]:.2f}, Tanimoto {tanimoto[k]:.2f})" for k in order
    ]
    # uint8, bool, scipy sparse matrices and lists of sparse rows draw the same strip
    for x, rows in (
        (bits[0].astype(bool), bits[1:].astype(bool)),
        (sparse.csr_matrix(bits[:1]), sparse.csr_matrix(bits[1:])),
        (sparse.csr_matrix(bits[:1]), [sparse.csr_matrix(bits[i : i + 1]) for i in (1, 2, 3)]),
    ):
        other = plot.draw_inputs(x, rows, w, ax=axes(8, 2.5))
        assert np.array_equal(np.asarray(other.images[0].get_array()), strip)


def test_draw_inputs_without_neighbours():
    # nothing leaned on (m = 0): the input alone, as lines or as one row of bits
    ax = plot.draw_inputs([0.1, 0.3, 0.2], np.zeros((0, 3)), [], ax=axes())
    assert [line.get_gid() for line in ax.lines] == ["gwpred-input"]
    assert legend_texts(ax) == ["input"]
    ax = plot.draw_inputs([0, 1, 1, 0], [], [], ax=axes())
    assert np.array_equal(np.asarray(ax.images[0].get_array()), [[1, 1]])


def test_draw_inputs_errors():
    x, rows, w = np.zeros(4), np.zeros((2, 4)), [0.5, 0.5]
    with pytest.raises(ValueError, match="neighbour_inputs has 3 columns but x has 4 values"):
        plot.draw_inputs(x, np.zeros((2, 3)), w, ax=axes())
    with pytest.raises(ValueError, match=r"weights must be 1-D with one value per neighbour \(2\)"):
        plot.draw_inputs(x, rows, [1.0], ax=axes())
    with pytest.raises(ValueError, match=r"grid must be 1-D with one x value per column"):
        plot.draw_inputs(x, rows, w, grid=np.arange(3), ax=axes())
    with pytest.raises(ValueError, match="labels has 1 entries for 2 neighbours"):
        plot.draw_inputs(x, rows, w, labels=["a"], ax=axes())
    with pytest.raises(ValueError, match=r"x holds 1 NaN or infinite .* at index \(2,\)"):
        plot.draw_inputs([0, 0, np.nan, 0], rows, w, ax=axes())
    with pytest.raises(ValueError, match=r"neighbour_inputs holds 1 NaN .* at index \(1, 3\)"):
        plot.draw_inputs(x, [[0, 0, 0, 0], [0, 0, 0, np.inf]], w, ax=axes())
    with pytest.raises(ValueError, match="weights holds 1 NaN"):
        plot.draw_inputs(x, rows, [0.5, np.nan], ax=axes())
    with pytest.raises(ValueError, match=r"x must be one input vector .* got shape \(2, 4\)"):
        plot.draw_inputs(rows, rows, w, ax=axes())
    with pytest.raises(ValueError, match=r"neighbour_inputs must be a 2-D array \(m, d\)"):
        plot.draw_inputs(x, x, w, ax=axes())
    with pytest.raises(ValueError, match="neighbour_inputs has 3 columns but x has 4 values"):
        plot.draw_inputs(x, [np.zeros(3)], [1.0], ax=axes())
    with pytest.raises(ValueError, match="kind must be 'auto', 'lines' or 'bits'"):
        plot.draw_inputs(x, rows, w, kind="bars", ax=axes())
    with pytest.raises(ValueError, match="kind='bits' draws 0/1 data"):
        plot.draw_inputs(x + 0.5, rows, w, kind="bits", ax=axes())
    with pytest.raises(TypeError, match="x must be numeric"):
        plot.draw_inputs(["a", "b", "c", "d"], rows, w, ax=axes())


# --------------------------------------------------------------------------- thumbnails

SVG_INT = re.compile(r"^-?\d+$")


def test_thumbnails_of_qm9_are_small_self_contained_svg(qm9):
    # the bundled QM9 molecules (up to 9 heavy atoms); every 5th of the 3000
    sizes = []
    for g in qm9[::5]:
        svg = plot.graph_thumbnail_svg(g)
        sizes.append(len(svg.encode("utf-8")))
        root = ET.fromstring(svg)  # well-formed XML, one <svg> element in the SVG namespace
        assert root.tag == f"{SVG}svg"
        assert root.get("width") == root.get("height") == "56"
        assert not svg.startswith("<?xml")
        for bad in ("href", "url(", "<image", "<script", "<style", " id="):
            assert bad not in svg
        for el in root.iter():
            for key in ("x", "y", "cx", "cy"):
                if el.get(key) is not None:
                    assert SVG_INT.match(el.get(key))
            if el.tag == f"{SVG}path":
                assert all(SVG_INT.match(v) for v in re.findall(r"-?[\d.]+", el.get("d")))
    assert np.mean(sizes) < 800
    assert len(sizes) == 600


def test_thumbnail_draws_bonds_and_heteroatoms_as_rdkit_does(qm9):
    fills = {}
    for g in qm9[:200:7]:
        root = ET.fromstring(plot.graph_thumbnail_svg(g))
        # one line per bond order unit (double bond: two lines), counted from networkx
        segments = sum(len(re.findall("M", p.get("d"))) for p in root.iter(f"{SVG}path"))
        assert segments == sum(order for _, _, order in g.edges(data="label"))
        # heteroatoms written as their symbol, carbons as plain corners
        texts = sorted(t.text for t in root.iter(f"{SVG}text"))
        assert texts == sorted(lab for _, lab in g.nodes(data="label") if lab != "C")
        for t in root.iter(f"{SVG}text"):
            fills.setdefault(t.text, set()).add(t.get("fill"))
    # in RDKit's own colours (short hex codes expand by doubling each digit, CSS rule)
    rdkit = rdkit_atom_fills(PALETTE_SMILES)
    for symbol, seen in fills.items():
        (short,) = seen
        assert "#" + "".join(c * 2 for c in short[1:]) == rdkit[symbol]


def test_thumbnail_of_other_graphs_and_errors():
    g = nx.cycle_graph(5)
    nx.set_node_attributes(g, {v: "xy"[v % 2] for v in g}, "label")
    root = ET.fromstring(plot.graph_thumbnail_svg(g, size=40))
    circles = list(root.iter(f"{SVG}circle"))
    assert len(circles) == 5 and root.get("viewBox") == "0 0 80 80"
    colours = plot.label_colours(["x", "y"])
    assert {c.get("fill") for c in circles} == {"#999", colours["y"]}
    assert colours["x"] == "#999999"
    assert ET.fromstring(plot.graph_thumbnail_svg(nx.Graph())).tag == f"{SVG}svg"
    with pytest.raises(ValueError, match="size must be between 16 and 1024 pixels, got 8"):
        plot.graph_thumbnail_svg(g, size=8)
    with pytest.raises(TypeError, match="size must be an int"):
        plot.graph_thumbnail_svg(g, size=56.0)
    with pytest.raises(TypeError, match="G must be a networkx.Graph"):
        plot.graph_thumbnail_svg([(0, 1)])


def test_functions_make_their_own_figure_when_ax_is_none(qm9):
    import matplotlib.pyplot as plt

    for ax in (
        plot.draw_graph(qm9[0]),
        plot.draw_alignment(qm9[0], qm9[1]),
        plot.draw_structure(np.eye(3)),
        plot.draw_node_scores(np.eye(3), ["C", "N", "O"]),
        plot.draw_neighbors(qm9[:2], [0.6, 0.4]),
        plot.draw_inputs([0.1, 0.2], [[0.2, 0.1]], [1.0]),
        plot.draw_inputs([0, 1], [[1, 1]], [1.0]),
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

"""Tests for gwpred.codec: label spaces, graph -> arrays -> graph.

Outside references used here:
- networkx: ``is_isomorphic`` with node/edge label matching is the reference
  for "the decoded graph is the graph we started from".
- QM9 heavy-atom graphs from ``gwpred.datasets.load_demo`` (built from the
  QM9 data of the PyPI package qm9pack): all 3000 are round-tripped.
- scikit-learn ``StandardScaler``: reference for the standardisation of
  numeric node attributes (population deviation, unit scale for constant
  columns).
"""

from __future__ import annotations

import networkx as nx
import numpy as np
import pytest
from sklearn.preprocessing import StandardScaler

from gwpred.codec import EncodedGraph, LabelSpace, check_graph
from gwpred.datasets import load_demo


# --------------------------------------------------------------------------
# helpers
# --------------------------------------------------------------------------
def labeled(nodes: dict, edges: dict | list = ()) -> nx.Graph:
    """Graph from {node: label} and {(u, v): label} (or a list of unlabeled pairs)."""
    g = nx.Graph()
    for v, lab in nodes.items():
        g.add_node(v, label=lab)
    if isinstance(edges, dict):
        for (u, v), lab in edges.items():
            g.add_edge(u, v, label=lab)
    else:
        g.add_edges_from(edges)
    return g


def round_trip(space: LabelSpace, g: nx.Graph) -> nx.Graph:
    """graph -> arrays -> graph, using only argmax choices and the structure."""
    enc = space.encode(g)
    iu, ju = np.nonzero(np.triu(enc.structure, 1))
    node_classes = enc.features[:, : space.n_node_labels].argmax(axis=1)
    edge_classes = enc.edge_channels[iu, ju].argmax(axis=1)
    numeric = enc.features[:, space.n_node_labels :] if space.node_numeric else None
    return space.build_graph(node_classes, list(zip(iu, ju)), edge_classes, numeric)


def same_labeled_graph(g: nx.Graph, h: nx.Graph, key: str = "label") -> bool:
    # reference: networkx VF2 isomorphism with label matching
    return nx.is_isomorphic(
        g,
        h,
        node_match=lambda a, b: a.get(key) == b.get(key),
        edge_match=lambda a, b: a.get(key) == b.get(key),
    )


def check_invariants(enc: EncodedGraph, n_labels: int) -> None:
    # plain asserts (not np.testing) keep the 3000-graph loop fast
    n = len(enc.nodes)
    C, E, F, p = enc.structure, enc.edge_channels, enc.features, enc.masses
    assert C.shape == (n, n) and E.shape[:2] == (n, n) and F.shape[0] == n and p.shape == (n,)
    assert np.array_equal(C, C.T)
    assert np.array_equal(E, E.transpose(1, 0, 2))
    assert not np.any(np.diag(C))
    assert np.all((C == 0) | (C == 1))
    assert np.array_equal(E.sum(axis=2), C)  # channels sum to structure
    assert np.all(F[:, :n_labels].sum(axis=1) == 1.0)  # one-hot rows
    assert abs(p.sum() - 1.0) < 1e-12
    assert np.allclose(p, 1.0 / n)


@pytest.fixture(scope="module")
def qm9_graphs() -> list[nx.Graph]:
    # a 3-point grid keeps the spectra cheap; only the graphs are used
    _, graphs = load_demo(start=400.0, stop=4000.0, step=1800.0)
    return graphs


# --------------------------------------------------------------------------
# fit / categories
# --------------------------------------------------------------------------
def test_fit_collects_sorted_categories() -> None:
    g = labeled({0: "O", 1: "C", 2: "N"}, {(0, 1): 2, (1, 2): 1})
    space = LabelSpace().fit([g])
    assert space.node_labels_ == ["C", "N", "O"]
    assert space.edge_labels_ == [1, 2]
    assert (space.n_node_labels, space.n_edge_labels, space.n_features) == (3, 2, 3)
    assert space.fit([g]) is space


def test_fit_on_qm9_finds_elements_and_bond_orders(qm9_graphs) -> None:
    # QM9 heavy atoms are C, N, O, F; RDKit Kekulé bond orders are 1, 2, 3
    # (dataset definition, Ramakrishnan et al. 2014)
    space = LabelSpace().fit(qm9_graphs)
    assert space.node_labels_ == ["C", "F", "N", "O"]
    assert space.edge_labels_ == [1, 2, 3]


def test_encode_known_example() -> None:
    # hand-checked: formaldehyde-like C=O plus a C-N single bond
    g = labeled({"a": "C", "b": "O", "c": "N"}, {("a", "b"): 2, ("a", "c"): 1})
    space = LabelSpace().fit([g])
    enc = space.encode(g)
    assert enc.nodes == ["a", "b", "c"]
    np.testing.assert_array_equal(enc.features, [[1, 0, 0], [0, 0, 1], [0, 1, 0]])  # C, N, O columns
    np.testing.assert_array_equal(enc.structure, [[0, 1, 1], [1, 0, 0], [1, 0, 0]])
    np.testing.assert_array_equal(enc.edge_channels[0, 1], [0, 1])
    np.testing.assert_array_equal(enc.edge_channels[0, 2], [1, 0])
    np.testing.assert_array_equal(enc.edge_channels[1, 2], [0, 0])
    check_invariants(enc, space.n_node_labels)


def test_from_categories_matches_fit() -> None:
    g = labeled({0: "C", 1: "O"}, {(0, 1): 2})
    fitted = LabelSpace().fit([g])
    rebuilt = LabelSpace.from_categories(fitted.node_labels_, fitted.edge_labels_)
    a, b = fitted.encode(g), rebuilt.encode(g)
    np.testing.assert_array_equal(a.features, b.features)
    np.testing.assert_array_equal(a.edge_channels, b.edge_channels)
    assert LabelSpace.from_categories(["C"], []).edge_labels_ == [None]


# --------------------------------------------------------------------------
# round trip on all QM9 graphs (reference: networkx is_isomorphic)
# --------------------------------------------------------------------------
def test_round_trip_all_qm9_graphs(qm9_graphs) -> None:
    assert len(qm9_graphs) == 3000
    space = LabelSpace().fit(qm9_graphs)
    failures = []
    for k, g in enumerate(qm9_graphs):
        enc = space.encode(g, where=f"graphs[{k}]")
        check_invariants(enc, space.n_node_labels)
        h = round_trip(space, g)
        if not same_labeled_graph(g, h):
            failures.append(k)
    assert failures == []


def test_round_trip_keeps_node_order(qm9_graphs) -> None:
    # demo graphs have nodes 0..n-1, and encode keeps list(graph.nodes) order,
    # so the round trip is the identity, not only an isomorphism
    space = LabelSpace().fit(qm9_graphs)
    for g in qm9_graphs[:200]:
        h = round_trip(space, g)
        assert dict(g.nodes(data="label")) == dict(h.nodes(data="label"))
        assert {frozenset(e[:2]): e[2] for e in g.edges(data="label")} == {
            frozenset(e[:2]): e[2] for e in h.edges(data="label")
        }


def test_round_trip_detects_a_change(qm9_graphs) -> None:
    # guard that the reference check is not vacuous: flip one bond order
    space = LabelSpace().fit(qm9_graphs)
    g = next(g for g in qm9_graphs if g.number_of_edges() >= 2)
    h = round_trip(space, g)
    u, v, lab = next(iter(h.edges(data="label")))
    h.edges[u, v]["label"] = 3 if lab != 3 else 1
    assert not same_labeled_graph(g, h)


# --------------------------------------------------------------------------
# edge cases
# --------------------------------------------------------------------------
def test_single_node_graph() -> None:
    g = labeled({"x": "C"})
    space = LabelSpace().fit([g])
    enc = space.encode(g)
    assert enc.structure.shape == (1, 1) and enc.edge_channels.shape == (1, 1, 1)
    np.testing.assert_array_equal(enc.masses, [1.0])
    assert space.edge_labels_ == [None]
    assert same_labeled_graph(g, round_trip(space, g))


def test_edgeless_graph() -> None:
    g = labeled({0: "C", 1: "O", 2: "C"})
    space = LabelSpace().fit([g])
    enc = space.encode(g)
    np.testing.assert_array_equal(enc.structure, np.zeros((3, 3)))
    np.testing.assert_array_equal(enc.edge_channels, np.zeros((3, 3, 1)))
    check_invariants(enc, space.n_node_labels)
    h = round_trip(space, g)
    assert h.number_of_edges() == 0 and same_labeled_graph(g, h)


def test_edges_without_labels_are_one_type() -> None:
    g = labeled({0: "C", 1: "C", 2: "O"}, [(0, 1), (1, 2)])
    space = LabelSpace().fit([g])
    assert space.edge_labels_ == [None]
    enc = space.encode(g)
    check_invariants(enc, space.n_node_labels)
    h = round_trip(space, g)
    assert all("label" not in d for _, _, d in h.edges(data=True))
    assert same_labeled_graph(g, h)


def test_some_edges_without_labels_get_none_category() -> None:
    g = labeled({0: "C", 1: "C", 2: "O"}, {(0, 1): 2})
    g.add_edge(1, 2)  # no label attribute
    space = LabelSpace().fit([g])
    assert space.edge_labels_ == [None, 2]  # NoneType sorts before int
    enc = space.encode(g)
    check_invariants(enc, space.n_node_labels)
    h = round_trip(space, g)
    assert "label" not in h.edges[1, 2] and h.edges[0, 1]["label"] == 2
    assert same_labeled_graph(g, h)


def test_edge_label_none_ignores_edge_attributes() -> None:
    g = labeled({0: "C", 1: "C", 2: "O"}, {(0, 1): 2, (1, 2): 1})
    space = LabelSpace(edge_label=None).fit([g])
    assert space.edge_labels_ == [None]
    enc = space.encode(g)
    assert enc.edge_channels.shape == (3, 3, 1)
    check_invariants(enc, space.n_node_labels)
    h = round_trip(space, g)
    assert all(d == {} for _, _, d in h.edges(data=True))
    assert nx.is_isomorphic(g, h, node_match=lambda a, b: a["label"] == b["label"])


def test_mixed_str_and_int_labels() -> None:
    g = labeled({0: "C", 1: 7, 2: "O", 3: 1}, {(0, 1): "aromatic", (1, 2): 2, (2, 3): 1})
    space = LabelSpace().fit([g])
    # categories sort by type name, then by text: ints before strs
    assert space.node_labels_ == [1, 7, "C", "O"]
    assert space.edge_labels_ == [1, 2, "aromatic"]
    enc = space.encode(g)
    check_invariants(enc, space.n_node_labels)
    h = round_trip(space, g)
    assert same_labeled_graph(g, h)
    assert h.nodes[1]["label"] == 7 and isinstance(h.nodes[1]["label"], int)


def test_custom_attribute_names() -> None:
    g = nx.Graph()
    g.add_node(0, element="C")
    g.add_node(1, element="N")
    g.add_edge(0, 1, order=3)
    space = LabelSpace(node_label="element", edge_label="order").fit([g])
    h = round_trip(space, g)
    assert h.nodes[1] == {"element": "N"} and h.edges[0, 1] == {"order": 3}


def test_numeric_node_attributes_standardised_and_restored() -> None:
    rng = np.random.default_rng(0)
    graphs = []
    for n in (3, 4, 5):
        g = nx.path_graph(n)
        for v in g:
            g.nodes[v].update(label="C" if v % 2 else "O", charge=float(rng.normal(2, 3)), mass=12.0)
        for u, v in g.edges:
            g.edges[u, v]["label"] = 1
        graphs.append(g)
    space = LabelSpace(node_numeric=("charge", "mass")).fit(graphs)
    raw = np.array([[d["charge"], d["mass"]] for g in graphs for _, d in g.nodes(data=True)])
    # reference: scikit-learn StandardScaler (population std, scale 1 when constant)
    scaler = StandardScaler().fit(raw)
    np.testing.assert_allclose(space.numeric_mean_, scaler.mean_)
    np.testing.assert_allclose(space.numeric_scale_, scaler.scale_)
    assert space.n_features == 2 + 2
    encoded = np.vstack([space.encode(g).features[:, 2:] for g in graphs])
    np.testing.assert_allclose(encoded, scaler.transform(raw), atol=1e-12)
    np.testing.assert_allclose(encoded[:, 0].mean(), 0.0, atol=1e-12)
    np.testing.assert_allclose(encoded[:, 0].std(), 1.0)
    np.testing.assert_array_equal(encoded[:, 1], 0.0)  # constant column
    for g in graphs:  # back to original units
        h = round_trip(space, g)
        for v in g:
            assert h.nodes[v]["charge"] == pytest.approx(g.nodes[v]["charge"], rel=1e-12, abs=1e-12)
            assert h.nodes[v]["mass"] == pytest.approx(12.0)
            assert h.nodes[v]["label"] == g.nodes[v]["label"]


def test_build_graph_defaults_and_doc_example() -> None:
    space = LabelSpace.from_categories(["C", "O"], [1, 2])
    g = space.build_graph([0, 1], [(0, 1)], [1])
    assert g.nodes[1]["label"] == "O" and g.edges[0, 1]["label"] == 2
    g = space.build_graph([0, 0, 1], [(0, 1), (1, 2)])  # edge_classes=None -> first category
    assert [d["label"] for _, _, d in g.edges(data=True)] == [1, 1]
    assert list(g.nodes) == [0, 1, 2]


def test_check_graph_accepts_and_returns_graph() -> None:
    g = nx.path_graph(2)
    assert check_graph(g) is g
    assert check_graph(nx.Graph(), allow_empty=True).number_of_nodes() == 0


# --------------------------------------------------------------------------
# unknown labels
# --------------------------------------------------------------------------
def test_unknown_node_label_error_names_label_and_known() -> None:
    space = LabelSpace().fit([labeled({0: "C", 1: "O"}, {(0, 1): 1})])
    with pytest.raises(
        ValueError,
        match=r"node label 'S' in graph was not seen in training; known node labels: \['C', 'O'\]",
    ):
        space.encode(labeled({0: "C", 1: "S"}, {(0, 1): 1}))


def test_unknown_edge_label_error_names_label_and_known() -> None:
    space = LabelSpace().fit([labeled({0: "C", 1: "O"}, {(0, 1): 1})])
    with pytest.raises(
        ValueError,
        match=r"edge label 3 in mol\[2\] was not seen in training; known edge labels: \[1\].*handle_unknown='ignore'",
    ):
        space.encode(labeled({0: "C", 1: "O"}, {(0, 1): 3}), where="mol[2]")


def test_unlabeled_edge_unknown_when_training_edges_labeled() -> None:
    space = LabelSpace().fit([labeled({0: "C", 1: "O"}, {(0, 1): 1})])
    with pytest.raises(ValueError, match=r"edge label None in graph was not seen in training"):
        space.encode(labeled({0: "C", 1: "O"}, [(0, 1)]))


def test_unknown_labels_ignored_give_zero_rows() -> None:
    space = LabelSpace(handle_unknown="ignore").fit([labeled({0: "C", 1: "O"}, {(0, 1): 1})])
    g = labeled({0: "C", 1: "S", 2: "O"}, {(0, 1): 1, (1, 2): 3})
    enc = space.encode(g)
    np.testing.assert_array_equal(enc.features, [[1, 0], [0, 0], [0, 1]])
    np.testing.assert_array_equal(enc.structure[1, 2], 1.0)  # the edge stays
    np.testing.assert_array_equal(enc.edge_channels[1, 2], [0.0])  # with no category
    np.testing.assert_array_equal(enc.edge_channels[0, 1], [1.0])


# --------------------------------------------------------------------------
# errors
# --------------------------------------------------------------------------
def test_empty_graph_rejected() -> None:
    with pytest.raises(ValueError, match=r"graphs\[0\] has no nodes; every graph needs at least one node"):
        LabelSpace().fit([nx.Graph()])
    space = LabelSpace().fit([labeled({0: "C"})])
    with pytest.raises(ValueError, match=r"graph has no nodes"):
        space.encode(nx.Graph())


def test_self_loop_rejected() -> None:
    g = labeled({0: "C", 1: "O"}, {(0, 1): 1, (0, 0): 1})
    with pytest.raises(ValueError, match=r"graphs\[1\] has 1 self-loop\(s\); gwpred does not model them"):
        LabelSpace().fit([labeled({0: "C"}), g])
    with pytest.raises(ValueError, match=r"self-loop"):
        LabelSpace().fit([labeled({0: "C", 1: "O"}, {(0, 1): 1})]).encode(g)


def test_directed_graph_rejected() -> None:
    g = nx.DiGraph()
    g.add_node(0, label="C")
    with pytest.raises(TypeError, match=r"graphs\[0\] is directed; .*graph.to_undirected\(\)"):
        LabelSpace().fit([g])


def test_multigraph_rejected() -> None:
    g = nx.MultiGraph()
    g.add_node(0, label="C")
    g.add_node(1, label="C")
    g.add_edge(0, 1)
    g.add_edge(0, 1)
    with pytest.raises(TypeError, match=r"graphs\[0\] is a multigraph; gwpred needs simple graphs"):
        LabelSpace().fit([g])


def test_non_graph_rejected() -> None:
    with pytest.raises(TypeError, match=r"graphs\[0\] must be a networkx.Graph; got list"):
        LabelSpace().fit([[(0, 1)]])


def test_missing_node_label_attribute() -> None:
    g = nx.path_graph(2)
    g.nodes[0]["label"] = "C"
    with pytest.raises(ValueError, match=r"node 1 of graphs\[0\] has no 'label' attribute.*node_label="):
        LabelSpace().fit([g])
    space = LabelSpace().fit([labeled({0: "C"})])
    with pytest.raises(ValueError, match=r"node 1 of graph has no 'label' attribute"):
        space.encode(g)


def test_bad_handle_unknown() -> None:
    with pytest.raises(ValueError, match=r"handle_unknown must be 'error' or 'ignore'; got 'skip'"):
        LabelSpace(handle_unknown="skip").fit([labeled({0: "C"})])


def test_empty_training_list() -> None:
    with pytest.raises(ValueError, match=r"graphs is empty; fit needs at least one training graph"):
        LabelSpace().fit([])


@pytest.mark.parametrize("bad", [float("nan"), float("inf"), -float("inf")])
def test_non_finite_numeric_attribute(bad: float) -> None:
    g = labeled({0: "C", 1: "O"}, {(0, 1): 1})
    g.nodes[0]["charge"] = 0.0
    g.nodes[1]["charge"] = bad
    with pytest.raises(ValueError, match=r"node 1 of graphs\[0\] has a non-finite 'charge' .*impute it first"):
        LabelSpace(node_numeric=["charge"]).fit([g])


def test_non_finite_numeric_attribute_at_encode() -> None:
    g = labeled({0: "C"})
    g.nodes[0]["charge"] = 1.0
    space = LabelSpace(node_numeric=["charge"]).fit([g])
    g.nodes[0]["charge"] = float("nan")
    with pytest.raises(ValueError, match=r"node 0 of graph has a non-finite 'charge'"):
        space.encode(g)


@pytest.mark.parametrize("value", [None, "heavy"])
def test_missing_or_non_numeric_attribute(value) -> None:
    g = labeled({0: "C"})
    if value is not None:
        g.nodes[0]["charge"] = value
    with pytest.raises(
        ValueError,
        match=rf"node 0 of graphs\[0\] needs a numeric 'charge' attribute \(listed in node_numeric\); got {value!r}",
    ):
        LabelSpace(node_numeric=["charge"]).fit([g])


# --------------------------------------------------------------------------
# problems found in review, fixed
# --------------------------------------------------------------------------
def test_encode_before_fit_is_clear_error() -> None:
    with pytest.raises(ValueError, match=r"fit"):
        LabelSpace().encode(labeled({0: "C"}))


def test_build_graph_edge_classes_length_mismatch() -> None:
    space = LabelSpace.from_categories(["C", "O"], [1, 2])
    with pytest.raises(ValueError, match=r"edge_classes"):
        space.build_graph([0, 1, 0], [(0, 1), (1, 2)], [1])


def test_build_graph_edge_outside_nodes() -> None:
    space = LabelSpace.from_categories(["C", "O"], [1, 2])
    with pytest.raises(ValueError, match=r"edges"):
        space.build_graph([0, 1], [(0, 5)], [0])

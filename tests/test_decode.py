"""Tests for gwpred.decode: weighted median, edge budget, barycenter decoding.

Outside references used here:
- Weighted median: smallest value whose cumulative weight reaches half of
  the total (common practice), computed directly; numpy ``median`` for
  uniform weights and an odd count.
- networkx: ``cycle_basis`` (cycle rank m - n + 1 of a connected graph),
  ``is_connected``, ``is_tree`` and ``is_isomorphic`` with label matching.
- QM9 heavy-atom graphs from ``gwpred.datasets.load_demo`` (QM9 data of the
  PyPI package qm9pack): every graph is decoded back from its own 0/1
  structure.
"""

from __future__ import annotations

import re

import networkx as nx
import numpy as np
import pytest

from gwpred.codec import LabelSpace
from gwpred.datasets import load_demo
from gwpred.decode import DecodedGraph, decode_anchored, decode_barycenter, edge_budget, weighted_median


# --------------------------------------------------------------------------
# helpers
# --------------------------------------------------------------------------
def direct_weighted_median(values, weights) -> float:
    # smallest v with sum(w[values <= v]) >= total / 2 (common practice)
    v, w = np.asarray(values, float), np.asarray(weights, float)
    total = w.sum()
    return float(min(x for x in v if w[v <= x].sum() >= total / 2))


def edge_set(out: DecodedGraph) -> set[tuple[int, int]]:
    return {(int(a), int(b)) for a, b in out.edges}


def as_nx(n: int, out: DecodedGraph) -> nx.Graph:
    g = nx.empty_graph(n)
    g.add_edges_from(edge_set(out))
    return g


def adjacency(n: int, edges) -> np.ndarray:
    C = np.zeros((n, n))
    for i, j in edges:
        C[i, j] = C[j, i] = 1.0
    return C


@pytest.fixture(scope="module")
def qm9_graphs() -> list[nx.Graph]:
    # a 3-point grid keeps the spectra cheap; only the graphs are used
    _, graphs = load_demo(start=400.0, stop=4000.0, step=1800.0)
    return graphs


# --------------------------------------------------------------------------
# weighted_median
# --------------------------------------------------------------------------
def test_weighted_median_doc_example() -> None:
    assert weighted_median([5, 7, 9], [0.2, 0.5, 0.3]) == 7.0


def test_weighted_median_matches_direct_definition() -> None:
    rng = np.random.default_rng(0)
    for _ in range(300):
        k = int(rng.integers(1, 12))
        values = rng.integers(0, 6, size=k)  # repeated values on purpose
        weights = rng.integers(0, 5, size=k).astype(float)  # integers: exact sums, exact halves
        if weights.sum() == 0:
            weights[0] = 1.0
        assert weighted_median(values, weights) == direct_weighted_median(values, weights)
    for _ in range(300):
        k = int(rng.integers(1, 12))
        values, weights = rng.normal(size=k), rng.random(k)
        assert weighted_median(values, weights) == direct_weighted_median(values, weights)


def test_weighted_median_exact_half_takes_lower() -> None:
    assert weighted_median([1, 2], [1, 1]) == 1.0  # cum weight of 1 is exactly half
    assert weighted_median([2, 1, 4, 3], [1, 1, 1, 1]) == 2.0  # lower median


@pytest.mark.parametrize("k", [1, 3, 5, 11, 101])
def test_weighted_median_uniform_odd_is_numpy_median(k: int) -> None:
    values = np.random.default_rng(k).normal(size=k)
    # reference: numpy.median (odd count, so no averaging)
    assert weighted_median(values, np.full(k, 0.3)) == np.median(values)


def test_weighted_median_ignores_zero_weights() -> None:
    assert weighted_median([1, 2, 3, 100], [0, 0, 1, 0]) == 3.0


# --------------------------------------------------------------------------
# edge_budget
# --------------------------------------------------------------------------
def cycle_rank(g: nx.Graph) -> int:
    # reference: size of a networkx cycle basis (= m - n + 1 when connected)
    return len(nx.cycle_basis(g))


def test_edge_budget_doc_example() -> None:
    assert edge_budget(6, [5, 6], [5, 6], [0.5, 0.5]) == 6


@pytest.mark.parametrize(
    "ring_weight, extra", [(1.0, 1), (0.7, 1), (0.5, 1), (0.4, 0), (0.0, 0)]
)
def test_edge_budget_ring_vs_chain_vote(ring_weight: float, extra: int) -> None:
    ring, chain = nx.cycle_graph(6), nx.path_graph(7)
    assert (cycle_rank(ring), cycle_rank(chain)) == (1, 0)
    sizes = [ring.number_of_nodes(), chain.number_of_nodes()]
    edges = [ring.number_of_edges(), chain.number_of_edges()]
    # weighted mean cycle rank = ring_weight, rounded half up
    for n in (4, 8, 9):
        assert edge_budget(n, sizes, edges, [ring_weight, 1 - ring_weight]) == n - 1 + extra


def test_edge_budget_two_rings() -> None:
    naph = nx.Graph(nx.cycle_graph(6))
    naph.add_edges_from([(0, 6), (6, 7), (7, 8), (8, 9), (9, 1)])  # fused bicycle, rank 2
    assert cycle_rank(naph) == 2
    assert edge_budget(10, [10], [naph.number_of_edges()], [3.0]) == 11


def test_edge_budget_weights_need_not_sum_to_one() -> None:
    assert edge_budget(5, [6, 6], [6, 5], [2.0, 2.0]) == edge_budget(5, [6, 6], [6, 5], [0.5, 0.5])


def test_edge_budget_clipped_to_simple_graph() -> None:
    k5 = nx.complete_graph(5)
    assert cycle_rank(k5) == 6
    assert edge_budget(3, [5], [10], [1.0]) == 3  # 2 + 6 clipped to 3 * 2 / 2
    assert edge_budget(1, [5], [10], [1.0]) == 0
    assert edge_budget(3, [6], [0], [1.0]) == 0  # edgeless voters: negative rank, clipped at 0


def test_edge_budget_single_qm9_voter_gives_its_edge_count(qm9_graphs) -> None:
    for g in qm9_graphs[:500]:
        n, m = g.number_of_nodes(), g.number_of_edges()
        assert m - n + 1 == cycle_rank(g)
        assert edge_budget(n, [n], [m], [1.0]) == m


# --------------------------------------------------------------------------
# decode_barycenter: exact recovery
# --------------------------------------------------------------------------
def test_doc_example() -> None:
    C = np.array([[0, 0.4, 0.3], [0.4, 0, 0.1], [0.3, 0.1, 0]])
    out = decode_barycenter(C, np.eye(3), n_edges=2)
    assert out.edges.tolist() == [[0, 1], [0, 2]]
    assert out.node_classes.tolist() == [0, 1, 2]
    assert out.edge_classes.tolist() == [0, 0]
    assert out.edges.dtype == out.node_classes.dtype == out.edge_classes.dtype == np.int64


def test_hard_structure_of_every_qm9_graph_decodes_to_itself(qm9_graphs) -> None:
    space = LabelSpace().fit(qm9_graphs)
    # largest degree seen per element in these graphs (C 4, N 3, O 2, F 1 as measured;
    # F is monovalent: common practice)
    max_degree = np.zeros(space.n_node_labels, dtype=int)
    for g in qm9_graphs:
        for v, lab in g.nodes(data="label"):
            j = space.node_labels_.index(lab)
            max_degree[j] = max(max_degree[j], g.degree(v))
    assert max_degree[space.node_labels_.index("F")] == 1
    failures = []
    for k, g in enumerate(qm9_graphs):
        enc = space.encode(g)
        m = g.number_of_edges()
        out = decode_barycenter(
            enc.structure, enc.features, enc.edge_channels, n_edges=m, max_degree=max_degree
        )
        expected = {(min(u, v), max(u, v)) for u, v in g.edges}
        if edge_set(out) != expected:
            failures.append(k)
            continue
        h = space.build_graph(out.node_classes, out.edges.tolist(), out.edge_classes)
        # reference: networkx isomorphism with element and bond-order matching
        if not nx.is_isomorphic(
            g, h, node_match=lambda a, b: a["label"] == b["label"], edge_match=lambda a, b: a["label"] == b["label"]
        ):
            failures.append(k)
    assert failures == []


def test_hard_structure_disconnected_graph_exact_when_not_connected() -> None:
    edges = [(0, 1), (1, 2), (0, 2), (3, 4), (4, 5), (3, 5)]  # two triangles
    C = adjacency(6, edges)
    out = decode_barycenter(C, np.ones((6, 1)), n_edges=6, connected=False)
    assert edge_set(out) == set(edges)


def test_connected_overrides_a_disconnected_structure() -> None:
    # with connected=True a zero-score bridge is added first; the budget of 6
    # then leaves room for only one more triangle edge (documented behaviour)
    edges = [(0, 1), (1, 2), (0, 2), (3, 4), (4, 5), (3, 5)]
    out = decode_barycenter(adjacency(6, edges), np.ones((6, 1)), n_edges=6)
    g = as_nx(6, out)
    assert nx.is_connected(g) and g.number_of_edges() == 6
    assert len(edge_set(out) - set(edges)) == 1  # exactly one bridge


# --------------------------------------------------------------------------
# connectivity and budgets
# --------------------------------------------------------------------------
@pytest.mark.parametrize("n_edges", [0, 1, 3])
def test_budget_below_tree_still_builds_spanning_tree(n_edges: int) -> None:
    # documented behaviour: connected=True builds the spanning tree first, so
    # the result has n - 1 edges even when n_edges < n - 1
    C = np.random.default_rng(1).random((7, 7)) * 0.2
    C = C + C.T
    np.fill_diagonal(C, 0.0)
    out = decode_barycenter(C, np.ones((7, 1)), n_edges=n_edges)
    g = as_nx(7, out)
    assert nx.is_tree(g)  # connected, 6 edges
    assert len(out.edges) == 6 > n_edges
    # without connected=True the budget is obeyed
    assert len(decode_barycenter(C, np.ones((7, 1)), n_edges=n_edges, connected=False).edges) == n_edges


def test_spanning_tree_is_maximum_weight() -> None:
    rng = np.random.default_rng(2)
    C = rng.random((8, 8))
    C = (C + C.T) / 2
    np.fill_diagonal(C, 0.0)
    out = decode_barycenter(C, np.ones((8, 1)), n_edges=7)
    # reference: networkx maximum spanning tree (Kruskal)
    ref = nx.maximum_spanning_tree(nx.from_numpy_array(C))
    assert edge_set(out) == {(min(u, v), max(u, v)) for u, v in ref.edges}


@pytest.mark.parametrize("seed", range(5))
def test_connected_result_is_connected(seed: int) -> None:
    rng = np.random.default_rng(seed)
    n = 9
    C = rng.random((n, n)) ** 4  # mostly weak pairs
    C = (C + C.T) / 2
    np.fill_diagonal(C, 0.0)
    for n_edges in (None, 2, 8, 12):
        out = decode_barycenter(C, rng.random((n, 3)), n_edges=n_edges)
        assert nx.is_connected(as_nx(n, out))
        if n_edges is not None:
            assert len(out.edges) == max(n_edges, n - 1)


def test_single_node() -> None:
    out = decode_barycenter([[0.0]], [[0.2, 0.8]], np.zeros((1, 1, 2)), n_edges=3)
    assert out.edges.shape == (0, 2) and out.edge_classes.shape == (0,)
    assert out.node_classes.tolist() == [1]


def test_n_edges_more_than_pairs() -> None:
    out = decode_barycenter(np.ones((3, 3)), np.ones((3, 1)), n_edges=10, connected=False)
    assert edge_set(out) == {(0, 1), (0, 2), (1, 2)}


# --------------------------------------------------------------------------
# degree caps
# --------------------------------------------------------------------------
def test_degree_caps_respected_when_feasible() -> None:
    n = 6
    C = np.full((n, n), 0.5)
    C[0, :] = C[:, 0] = 0.9  # node 0 would be a hub
    np.fill_diagonal(C, 0.0)
    F = np.zeros((n, 2))
    F[0, 0] = 1.0  # node 0: label 0 (cap 2)
    F[1:, 1] = 1.0  # others: label 1 (cap 3)
    caps = np.array([2, 3])
    free = decode_barycenter(C, F, n_edges=8)
    assert as_nx(n, free).degree(0) == 5  # uncapped: the hub
    out = decode_barycenter(C, F, n_edges=8, max_degree=caps)
    g = as_nx(n, out)
    assert nx.is_connected(g) and g.number_of_edges() == 8
    assert all(g.degree(v) <= caps[out.node_classes[v]] for v in g)
    assert g.degree(0) == 2


def test_degree_caps_limit_added_edges() -> None:
    # all pairs equally strong, every node capped at 2: greedy picks stop early
    out = decode_barycenter(np.ones((4, 4)), np.ones((4, 1)), n_edges=6, connected=False, max_degree=[2])
    assert edge_set(out) == {(0, 1), (0, 2), (1, 2)}  # node 3 left alone
    out = decode_barycenter(np.ones((4, 4)), np.ones((4, 1)), n_edges=6, max_degree=[2])
    g = as_nx(4, out)
    assert nx.is_connected(g) and max(d for _, d in g.degree) == 2 and g.number_of_edges() == 4


def test_degree_caps_relaxed_for_spanning_tree() -> None:
    # documented: the spanning tree relaxes the caps if it cannot finish
    C = adjacency(3, [(0, 1), (0, 2)])
    out = decode_barycenter(C, np.ones((3, 1)), n_edges=2, max_degree=[1])
    assert edge_set(out) == {(0, 1), (0, 2)}
    assert nx.is_tree(as_nx(3, out))


# --------------------------------------------------------------------------
# threshold mode
# --------------------------------------------------------------------------
@pytest.mark.parametrize("threshold", [0.3, 0.5, 0.8])
def test_threshold_mode_keeps_pairs_at_or_above(threshold: float) -> None:
    rng = np.random.default_rng(3)
    C = rng.random((8, 8))
    C = (C + C.T) / 2
    C[0, 1] = C[1, 0] = threshold  # exactly at the threshold: kept
    np.fill_diagonal(C, 0.0)
    out = decode_barycenter(C, np.ones((8, 1)), threshold=threshold, connected=False)
    iu, ju = np.triu_indices(8, 1)
    keep = C[iu, ju] >= threshold
    assert edge_set(out) == set(zip(iu[keep].tolist(), ju[keep].tolist()))
    assert (0, 1) in edge_set(out)


def test_threshold_mode_connected_is_connected() -> None:
    C = adjacency(5, [(0, 1), (2, 3)]) * 0.9
    C[1, 2] = C[2, 1] = 0.2
    C[3, 4] = C[4, 3] = 0.1
    out = decode_barycenter(C, np.ones((5, 1)))  # threshold 0.5
    assert edge_set(out) == {(0, 1), (1, 2), (2, 3), (3, 4)}
    assert decode_barycenter(C, np.ones((5, 1)), connected=False).edges.tolist() == [[0, 1], [2, 3]]


# --------------------------------------------------------------------------
# labels and ties
# --------------------------------------------------------------------------
def test_edge_labels_by_argmax() -> None:
    rng = np.random.default_rng(4)
    n, L = 6, 3
    C = rng.random((n, n))
    C = (C + C.T) / 2
    E = rng.random((n, n, L))
    E = E + E.transpose(1, 0, 2)
    F = rng.random((n, 4))
    out = decode_barycenter(C, F, E, n_edges=8)
    np.testing.assert_array_equal(out.node_classes, F.argmax(axis=1))
    np.testing.assert_array_equal(out.edge_classes, [E[i, j].argmax() for i, j in out.edges])
    assert np.all(out.edges[:, 0] < out.edges[:, 1])
    none = decode_barycenter(C, F, None, n_edges=8)
    np.testing.assert_array_equal(none.edges, out.edges)
    np.testing.assert_array_equal(none.edge_classes, 0)


def test_edge_labels_read_from_upper_triangle() -> None:
    # documented by the code: for i < j the label is argmax of edge_scores[i, j]
    E = np.zeros((2, 2, 2))
    E[0, 1] = [0.9, 0.1]
    E[1, 0] = [0.0, 1.0]
    out = decode_barycenter(np.ones((2, 2)), np.ones((2, 1)), E, n_edges=1)
    assert out.edge_classes.tolist() == [0]


def test_asymmetric_structure_is_averaged() -> None:
    C = np.zeros((3, 3))
    C[0, 1] = 1.0  # pair score (1 + 0) / 2 = 0.5
    C[1, 2] = C[2, 1] = 0.45
    out = decode_barycenter(C, np.ones((3, 1)), connected=False)
    assert edge_set(out) == {(0, 1)}


def test_deterministic_ties() -> None:
    # equal scores: pairs in row-major upper-triangle order, labels by lowest index
    out = decode_barycenter(np.full((4, 4), 0.7), np.ones((4, 2)), np.ones((4, 4, 3)), n_edges=2, connected=False)
    assert out.edges.tolist() == [[0, 1], [0, 2]]
    assert out.node_classes.tolist() == [0, 0, 0, 0] and out.edge_classes.tolist() == [0, 0]
    tree = decode_barycenter(np.full((4, 4), 0.7), np.ones((4, 2)), n_edges=3)
    assert tree.edges.tolist() == [[0, 1], [0, 2], [0, 3]]
    again = decode_barycenter(np.full((4, 4), 0.7), np.ones((4, 2)), n_edges=3)
    np.testing.assert_array_equal(tree.edges, again.edges)


# --------------------------------------------------------------------------
# errors
# --------------------------------------------------------------------------
@pytest.mark.parametrize(
    "C_shape, F_shape",
    [((3, 4), (3, 2)), ((3, 3), (4, 2)), ((3, 3), (3,)), ((3,), (3, 2)), ((3, 3, 1), (3, 2))],
)
def test_shape_errors(C_shape, F_shape) -> None:
    with pytest.raises(
        ValueError,
        match=r"structure must be \(n, n\) and node_scores \(n, k\); got " + re.escape(f"{C_shape} and {F_shape}"),
    ):
        decode_barycenter(np.zeros(C_shape), np.zeros(F_shape))


def test_edge_scores_shape_error() -> None:
    with pytest.raises(ValueError, match=r"edge_scores must be \(n, n, L\) with n=3; got \(4, 4, 2\)"):
        decode_barycenter(np.ones((3, 3)), np.ones((3, 1)), np.ones((4, 4, 2)), n_edges=2)


@pytest.mark.parametrize("where", ["structure", "node_scores"])
@pytest.mark.parametrize("bad", [np.nan, np.inf])
def test_non_finite_scores(where: str, bad: float) -> None:
    C, F = np.ones((3, 3)), np.ones((3, 2))
    (C if where == "structure" else F)[1, 0] = bad
    with pytest.raises(ValueError, match=r"the barycenter contains NaN or infinite scores; check the weights"):
        decode_barycenter(C, F)


# --------------------------------------------------------------------------
# problems found in review, fixed
# --------------------------------------------------------------------------
def test_threshold_mode_connected_keeps_all_strong_pairs() -> None:
    C = adjacency(4, [(0, 1), (0, 2), (1, 2)]) * 0.9  # strong triangle
    C[2, 3] = C[3, 2] = 0.1  # weak link to node 3
    out = decode_barycenter(C, np.ones((4, 1)))  # threshold 0.5, connected
    # expected: the three strong pairs plus the bridge to node 3
    assert edge_set(out) == {(0, 1), (0, 2), (1, 2), (2, 3)}


def test_edge_scores_nan() -> None:
    E = np.full((2, 2, 2), np.nan)
    with pytest.raises(ValueError, match=r"NaN"):
        decode_barycenter(np.ones((2, 2)), np.ones((2, 1)), E, n_edges=1)


def test_edge_scores_two_dimensional() -> None:
    with pytest.raises(ValueError, match=r"edge_scores"):
        decode_barycenter(np.ones((2, 2)), np.ones((2, 1)), np.ones((2, 2)), n_edges=1)


def test_max_degree_too_short() -> None:
    with pytest.raises(ValueError, match=r"max_degree"):
        decode_barycenter(np.ones((2, 2)), np.eye(2), max_degree=[1])


def test_weighted_median_scale_invariant() -> None:
    assert weighted_median([1, 2, 3], [1e-13, 1e-13, 1e-13]) == 2.0


def test_weighted_median_length_mismatch() -> None:
    with pytest.raises(ValueError, match=r"weights"):
        weighted_median([1, 2], [1, 1, 5])


@pytest.mark.filterwarnings("ignore:invalid value encountered:RuntimeWarning")
def test_edge_budget_zero_weights() -> None:
    with pytest.raises(ValueError, match=r"weights"):
        edge_budget(3, [2], [1], [0.0])


# --------------------------------------------------------------------------
# anchored decoding: edits of the start graph
# --------------------------------------------------------------------------
def test_anchored_returns_each_qm9_graph_from_its_own_structure(qm9_graphs):
    """Known answer: a barycenter equal to its anchor decodes to the anchor.

    Reference: the QM9 heavy-atom graphs (networkx isomorphism on labels).
    """
    for g in qm9_graphs[:300]:
        n = g.number_of_nodes()
        A = nx.to_numpy_array(g, nodelist=range(n), weight=None)
        E = np.zeros((n, n), dtype=int)
        for u, v, d in g.edges(data=True):
            E[u, v] = E[v, u] = d["label"] - 1
        scores = np.eye(4)[[["C", "N", "O", "F"].index(g.nodes[v]["label"]) for v in range(n)]]
        out = decode_anchored(A, scores, np.zeros((n, n, 3)), A, E)
        assert edge_set(out) == {(min(u, v), max(u, v)) for u, v in g.edges}
        assert [int(c) for c in out.edge_classes] == [E[a, b] for a, b in out.edges]


def test_anchored_edits_only_where_the_weighted_graphs_agree():
    A = adjacency(4, [(0, 1), (1, 2), (2, 3)])  # a path
    C = A.copy()
    C[1, 2] = C[2, 1] = 0.1  # the weighted graphs disagree with the anchor's middle edge
    C[0, 3] = C[3, 0] = 0.9  # and agree on closing a ring
    C[0, 2] = C[2, 0] = 0.7  # not enough agreement at consensus 0.8
    E = np.zeros((4, 4, 2))
    E[0, 3, 1] = E[3, 0, 1] = 0.9  # the added edge takes its best-scoring label
    out = decode_anchored(C, np.eye(4), E, A, np.zeros((4, 4)), consensus=0.8)
    assert edge_set(out) == {(0, 1), (2, 3), (0, 3)}
    assert dict(zip(map(tuple, out.edges.tolist()), out.edge_classes.tolist()))[(0, 3)] == 1
    # consensus 1 keeps the anchor's edges as they are
    assert edge_set(decode_anchored(C, np.eye(4), E, A, np.zeros((4, 4)), consensus=1.0)) == edge_set(
        decode_anchored(A, np.eye(4), E, A, np.zeros((4, 4)))
    )


def test_anchored_keeps_the_graph_connected_and_respects_degree_caps():
    A = adjacency(3, [(0, 1), (1, 2)])
    C = np.zeros((3, 3))  # every anchor edge is contested
    out = decode_anchored(C, np.eye(3), np.zeros((3, 3, 1)), A, np.zeros((3, 3)))
    assert nx.is_connected(as_nx(3, out))
    C = np.ones((3, 3)) - np.eye(3)
    out = decode_anchored(C, np.eye(3), np.zeros((3, 3, 1)), A, np.zeros((3, 3)), max_degree=[1, 2, 1])
    assert edge_set(out) == {(0, 1), (1, 2)}  # (0, 2) would exceed the caps of nodes 0 and 2


def test_anchored_errors():
    A = adjacency(3, [(0, 1)])
    with pytest.raises(ValueError, match=r"consensus must lie in \[0.5, 1\]; got 0.3"):
        decode_anchored(A, np.eye(3), np.zeros((3, 3, 1)), A, np.zeros((3, 3)), consensus=0.3)
    with pytest.raises(ValueError, match=r"anchor_structure and anchor_edge_classes must be \(3, 3\)"):
        decode_anchored(A, np.eye(3), np.zeros((3, 3, 1)), A[:2, :2], np.zeros((3, 3)))

"""Property-based tests (hypothesis): codec round trip, FGW, graph edit distance, file readers.

Every property runs at least 200 generated examples.  Expected values come from outside
gwpred:

* networkx: ``is_isomorphic`` with categorical node/edge matchers (label isomorphism),
  ``graph_edit_distance`` with the cost callables of tests/test_metrics.py, and
  ``node_link_data`` to compare graphs read back from files;
* POT (``import ot``): ``ot.gromov.init_matrix`` / ``ot.gromov.gwloss`` for the FGW
  objective at a given plan, ``ot.emd`` / ``ot.emd2`` for exact optimal transport;
* numpy: ``allclose`` for marginals, ``np.load`` for what a ``.npy`` file holds;
* the JSON standard (RFC 8259, through Python's ``json``), XML 1.0 (through Python's
  ``xml.etree``), Python's UTF-8 codec, ``csv`` module and ``float`` for what a text
  file holds;
* the definition of the graph edit distance for its metric properties.

The readers are fed random bytes, random text, truncated and re-encoded valid files and
valid files with one byte changed; they must return a correct parse or raise ValueError,
never another exception.  Files live in ``tempfile.TemporaryDirectory()`` (hypothesis
does not mix with function-scoped fixtures such as ``tmp_path``).
"""

from __future__ import annotations

import csv
import io
import itertools
import json
import tempfile
from collections.abc import Callable
from pathlib import Path
from typing import Any

import networkx as nx
import numpy as np
import ot
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from hypothesis.extra import numpy as hnp
from networkx.algorithms import isomorphism as iso

from gwpred.codec import LabelSpace, TrainingSet
from gwpred.fgw import feature_costs, fgw_distance
from gwpred.io import read_features, read_graphs, write_features, write_graphs
from gwpred.metrics import edit_distance

PROPERTY = settings(max_examples=200, deadline=None, suppress_health_check=[HealthCheck.too_slow])

NODE_LABELS = ("C", "N", "O", "Cl")
EDGE_LABELS = (1, 2, 3)
#: node labels of graphs written to files: Latin-1 encodable, two of them not ASCII, so
#: that a Latin-1 file differs from the UTF-8 one and a cut can split a character
FILE_NODE_LABELS = ("C", "N", "é", "ü")
#: characters that matter to the formats, mixed into random text
FORMAT_CHARACTERS = list('{}[]":,.-+e0123456789 \t\r\n<>/=?!abcdilnstx\x00\ufeffé')
UTF16 = ("utf-16", "utf-16-le", "utf-16-be")


# --------------------------------------------------------------------------- strategies


@st.composite
def labeled_graphs(
    draw: st.DrawFn,
    min_nodes: int = 1,
    max_nodes: int = 7,
    node_labels: tuple[str, ...] = NODE_LABELS,
    any_node_ids: bool = False,
    unlabeled_edges: bool = False,
) -> nx.Graph:
    """Simple undirected graph: node attribute ``label`` from ``node_labels``, edge
    attribute ``label`` from {1, 2, 3} (absent on some edges if ``unlabeled_edges``)."""
    n = draw(st.integers(min_nodes, max_nodes))
    if any_node_ids:
        ids = draw(st.lists(st.integers(-20, 20) | st.text("abcxyz", max_size=3), min_size=n, max_size=n,
                            unique=True))
    else:
        ids = list(range(n))
    g = nx.Graph()
    for v in ids:
        g.add_node(v, label=draw(st.sampled_from(node_labels)))
    edge_labels: tuple[int | None, ...] = (*EDGE_LABELS, None) if unlabeled_edges else EDGE_LABELS
    for u, v in itertools.combinations(ids, 2):
        if draw(st.booleans()):
            lab = draw(st.sampled_from(edge_labels))
            g.add_edge(u, v, **({} if lab is None else {"label": lab}))
    return g


@st.composite
def relatives(draw: st.DrawFn, g: nx.Graph, max_nodes: int = 5) -> nx.Graph:
    """An unrelated graph, or ``g`` with its nodes renamed and shuffled and at most one edit."""
    kind = draw(st.sampled_from(["unrelated", "copy", "edited copy"]))
    if kind == "unrelated":
        return draw(labeled_graphs(0, max_nodes))
    nodes = list(g)
    perm = draw(st.permutations(nodes))
    h = nx.relabel_nodes(g, dict(zip(nodes, perm)))  # new node order: that of perm
    if kind == "edited copy" and len(h):
        v = draw(st.sampled_from(sorted(h)))
        op = draw(st.sampled_from(["node label", "edge"]))
        if op == "node label" or len(h) < 2:
            h.nodes[v]["label"] = draw(st.sampled_from(NODE_LABELS))
        else:
            u = draw(st.sampled_from(sorted(set(h) - {v})))
            if h.has_edge(u, v) and draw(st.booleans()):
                h.remove_edge(u, v)
            else:
                h.add_edge(u, v, label=draw(st.sampled_from(EDGE_LABELS)))
    return h


def masses(n: int) -> st.SearchStrategy[np.ndarray]:
    """Uniform masses, or random positive masses summing to one."""
    uniform = st.just(np.full(n, 1.0 / n))
    positive = hnp.arrays(np.float64, n, elements=st.floats(0.1, 1.0)).map(lambda w: w / w.sum())
    return uniform | positive


@st.composite
def structures(draw: st.DrawFn, n: int, weighted: bool) -> np.ndarray:
    """Symmetric structure matrix with zero diagonal: 0/1 adjacency or weights in [0, 1]."""
    if weighted:
        A = draw(hnp.arrays(np.float64, (n, n), elements=st.floats(0.0, 1.0, allow_subnormal=False)))
        A = (A + A.T) / 2.0
    else:
        A = np.triu(draw(hnp.arrays(np.bool_, (n, n))).astype(np.float64), 1)
        A = A + A.T
    np.fill_diagonal(A, 0.0)
    return A


@st.composite
def node_features(draw: st.DrawFn, n: int, d: int, one_hot: bool) -> np.ndarray:
    if one_hot:
        return np.eye(d)[draw(hnp.arrays(np.int64, n, elements=st.integers(0, d - 1)))]
    return draw(hnp.arrays(np.float64, (n, d), elements=st.floats(-2.0, 2.0, allow_subnormal=False)))


@st.composite
def fgw_problems(draw: st.DrawFn) -> dict[str, Any]:
    """Two graphs of 1-6 nodes (binary or weighted structure, one-hot or continuous
    features, uniform or random masses), alpha in [0, 1] and a feasible start plan."""
    n, m = draw(st.integers(1, 6)), draw(st.integers(1, 6))
    weighted, one_hot = draw(st.booleans()), draw(st.booleans())
    d = draw(st.integers(1, 3))
    C1, C2 = draw(structures(n, weighted)), draw(structures(m, weighted))
    M = feature_costs(draw(node_features(n, d, one_hot)), draw(node_features(m, d, one_hot)))
    p, q = draw(masses(n)), draw(masses(m))
    start = np.outer(p, q)
    if draw(st.booleans()):  # a mix of p q^T and a vertex of the coupling polytope (ot.emd)
        vertex = ot.emd(p, q, draw(hnp.arrays(np.float64, (n, m), elements=st.floats(0.0, 1.0))))
        t = draw(st.floats(0.2, 1.0))
        start = t * vertex + (1.0 - t) * start
    alpha = draw(st.floats(0.0, 1.0))
    return dict(M=M, C1=C1, C2=C2, p=p, q=q, alpha=alpha, start=start)


def feature_matrices() -> st.SearchStrategy[np.ndarray]:
    shapes = st.tuples(st.integers(1, 4), st.integers(1, 3))
    return shapes.flatmap(
        lambda s: hnp.arrays(np.float64, s, elements=st.floats(allow_nan=False, allow_infinity=False))
    )


#: sample ids of feature files: Latin-1 encodable, with delimiters, quotes and line breaks;
#: never blank (write_features refuses an id that would read back empty)
sample_ids = st.text(alphabet="ab é,\t\"\n;", max_size=4).filter(lambda s: s.strip() != "")
# st.text() leaves out surrogates, so every text encodes as UTF-8
random_text = st.lists(st.text(max_size=3) | st.sampled_from(FORMAT_CHARACTERS), max_size=60).map("".join)
random_bytes = st.binary(max_size=200) | st.binary(max_size=120).map(lambda b: b"\x93NUMPY\x01\x00" + b)

json_scalars = st.none() | st.booleans() | st.integers(-3, 3) | st.floats() | st.text("ab1", max_size=2)
json_values = st.recursive(
    json_scalars,
    lambda inner: st.lists(inner, max_size=3) | st.dictionaries(st.text("ab", max_size=2), inner, max_size=3),
    max_leaves=6,
)
node_ids = st.integers(0, 3) | st.sampled_from(["a", "b", 1.0, True]) | json_values
json_records = st.fixed_dictionaries(
    {},
    optional={
        "nodes": st.lists(st.fixed_dictionaries({}, optional={"id": node_ids, "label": json_values}), max_size=4)
        | json_values,
        "edges": st.lists(st.fixed_dictionaries({}, optional={"source": node_ids, "target": node_ids,
                                                              "label": json_values, "key": json_values}),
                          max_size=4)
        | json_values,
        "links": st.lists(st.fixed_dictionaries({"source": node_ids, "target": node_ids}), max_size=2),
        "graph": st.dictionaries(st.text("ab", max_size=2), json_values, max_size=2) | json_values,
        "directed": json_values,
        "multigraph": json_values,
        "a": json_values,
    },
)


# --------------------------------------------------------------------------- helpers


def label_isomorphic(g1: nx.Graph, g2: nx.Graph) -> bool:
    """Reference: networkx.is_isomorphic with categorical matchers on ``label``
    (a missing edge label counts as the label None)."""
    return nx.is_isomorphic(
        g1,
        g2,
        node_match=iso.categorical_node_match("label", None),
        edge_match=iso.categorical_edge_match("label", None),
    )


def networkx_ged(g1: nx.Graph, g2: nx.Graph) -> float:
    """Reference: networkx.graph_edit_distance with unit costs, as in tests/test_metrics.py."""
    return nx.graph_edit_distance(
        g1,
        g2,
        node_subst_cost=lambda a, b: 0.0 if a["label"] == b["label"] else 1.0,
        node_del_cost=lambda a: 1.0,
        node_ins_cost=lambda a: 1.0,
        edge_subst_cost=lambda a, b: 0.0 if a.get("label") == b.get("label") else 1.0,
        edge_del_cost=lambda a: 1.0,
        edge_ins_cost=lambda a: 1.0,
    )


def pot_objective(
    M: np.ndarray, C1: np.ndarray, C2: np.ndarray, p: np.ndarray, q: np.ndarray, alpha: float, T: np.ndarray
) -> float:
    """FGW objective at a fixed plan, with POT's square-loss helpers."""
    constC, hC1, hC2 = ot.gromov.init_matrix(C1, C2, p, q, "square_loss")
    return float((1 - alpha) * np.sum(M * T) + alpha * ot.gromov.gwloss(constC, hC1, hC2, T))


def node_link(g: nx.Graph) -> dict[str, Any]:
    """networkx's node-link form, edges in a canonical order (an undirected edge has no
    orientation)."""
    data = nx.node_link_data(g, edges="edges")
    edges = []
    for e in data["edges"]:
        a, b = sorted((e["source"], e["target"]), key=repr)
        edges.append(json.dumps({**e, "source": a, "target": b}, sort_keys=True))
    data["edges"] = sorted(edges)
    return data


def same_graphs(read: list[nx.Graph], expected: list[nx.Graph]) -> bool:
    return [node_link(g) for g in read] == [node_link(g) for g in expected]


def outcome(read: Callable[[Path], Any], path: Path) -> tuple[bool, Any]:
    """``(True, result)`` or ``(False, the ValueError)``; any other exception escapes."""
    try:
        return True, read(path)
    except ValueError as err:
        return False, err


def read_bytes_with(read: Callable[[Path], Any], suffix: str, raw: bytes) -> tuple[bool, Any]:
    with tempfile.TemporaryDirectory() as d:
        path = Path(d) / f"input{suffix}"
        path.write_bytes(raw)
        return outcome(read, path)


def written_graphs(suffix: str, graphs: list[nx.Graph]) -> bytes:
    with tempfile.TemporaryDirectory() as d:
        path = Path(d) / f"valid{suffix}"
        write_graphs(path, graphs)
        return path.read_bytes()


def written_features(suffix: str, X: np.ndarray, ids: list[str] | None) -> bytes:
    with tempfile.TemporaryDirectory() as d:
        path = Path(d) / f"valid{suffix}"
        write_features(path, X, ids=ids)
        return path.read_bytes()


def check_jsonl_parse(raw: bytes, graphs: list[nx.Graph]) -> None:
    """A successful JSON Lines read: one graph per non-blank line, with the nodes and the
    number of edges of that line's record (JSON standard, via Python's json)."""
    lines = [line for line in raw.split(b"\n") if line.decode("utf-8").strip()]
    assert len(graphs) == len(lines)
    for line, g in zip(lines, graphs):
        record = json.loads(line)
        assert list(g.nodes) == [node["id"] for node in record["nodes"]]
        edges = record["edges"] if "edges" in record else record["links"]
        assert g.number_of_edges() == len(edges)


def reference_table(raw: bytes, delimiter: str) -> tuple[np.ndarray, list[str] | None] | None:
    """What read_features must give for these bytes by its documented rules; None: refuse.

    Text: Python's UTF-8 codec; rows: Python's csv module; numbers: Python's float.
    Rules (read_features docstring): blank lines skipped, cells stripped, the first row is
    a header when a cell of it is not a number, a header starting with ``id`` marks an id
    column, every row as wide as the first, at least one data row and one feature column,
    no NaN or infinity, no empty id, and no one-column file whose header holds another
    separator (``;``, ``|``, tab or comma).
    """
    try:
        text = raw.decode("utf-8")
        rows = list(csv.reader(io.StringIO(text, newline=""), delimiter=delimiter))
    except (UnicodeDecodeError, csv.Error):
        return None
    rows = [[cell.strip() for cell in row] for row in rows if len(row) > 1 or (row and row[0].strip())]
    if not rows:
        return None

    def number(cell: str) -> float | None:
        try:
            return float(cell)
        except ValueError:
            return None

    header = any(number(cell) is None for cell in rows[0])
    other = {",", "\t", ";", "|"} - {delimiter}
    if header and len(rows[0]) == 1 and any(d in rows[0][0] for d in other):
        return None  # one column whose header holds another separator: refused with a separator hint
    has_ids = header and rows[0][0].lower() == "id"
    data = rows[1:] if header else rows
    width = len(rows[0])
    if width - has_ids == 0 or not data or any(len(row) != width for row in data):
        return None
    if has_ids and any(row[0] == "" for row in data):
        return None  # an empty id identifies nothing: refused, naming the line
    values = [[number(cell) for cell in row[has_ids:]] for row in data]
    if any(v is None for row in values for v in row):
        return None
    X = np.array(values, dtype=np.float64).reshape(len(data), width - has_ids)
    if not np.isfinite(X).all():
        return None
    return X, ([row[0] for row in data] if has_ids else None)


def check_features_against_reference(suffix: str, raw: bytes) -> None:
    """read_features on these bytes agrees with the reference (csv/tsv) or numpy (npy)."""
    with tempfile.TemporaryDirectory() as d:
        path = Path(d) / f"input{suffix}"
        path.write_bytes(raw)
        ok, result = outcome(lambda p: read_features(p, return_ids=True), path)
        if suffix == ".npy":
            if ok:  # reference: numpy's own reader of the same file
                X, ids = result
                expected = np.load(path, allow_pickle=False)
                assert ids is None
                assert X.dtype == np.float64 and X.ndim == 2 and np.isfinite(X).all()
                np.testing.assert_array_equal(X, expected.astype(np.float64))
            return
    expected_table = reference_table(raw, "," if suffix == ".csv" else "\t")
    if expected_table is None:
        assert not ok, f"read_features accepted a file the csv/float reference refuses: {result}"
        return
    assert ok, f"read_features refused a file the csv/float reference reads: {result}"
    X, ids = result
    np.testing.assert_array_equal(X, expected_table[0])
    assert ids == expected_table[1]


# --------------------------------------------------------------------------- 1. codec


@PROPERTY
@given(st.lists(labeled_graphs(1, 7, any_node_ids=True, unlabeled_edges=True), min_size=1, max_size=4))
def test_codec_round_trip_is_label_isomorphic(graphs: list[nx.Graph]) -> None:
    training = TrainingSet.encode(graphs, LabelSpace().fit(graphs))
    assert len(training) == len(graphs)
    for i, g in enumerate(graphs):
        rebuilt = training.graph(i)
        # reference: networkx.is_isomorphic with categorical node and edge label matchers
        assert label_isomorphic(rebuilt, g)


# --------------------------------------------------------------------------- 2. FGW


@PROPERTY
@given(fgw_problems())
def test_fgw_plan_is_a_coupling_and_value_is_the_objective(problem: dict[str, Any]) -> None:
    M, C1, C2, p, q, alpha, start = (problem[k] for k in ("M", "C1", "C2", "p", "q", "alpha", "start"))
    res = fgw_distance(M, C1, C2, p, q, alpha=alpha, init_plan=start)
    # numpy allclose: the plan's marginals are p and q (as POT's own tests check couplings)
    assert np.allclose(res.plan.sum(axis=1), p, atol=1e-8)
    assert np.allclose(res.plan.sum(axis=0), q, atol=1e-8)
    assert res.plan.min() >= -1e-12
    at_plan = pot_objective(M, C1, C2, p, q, alpha, res.plan)
    # POT init_matrix/gwloss: the reported value is the FGW objective at the returned plan
    assert res.value == pytest.approx(at_plan, rel=1e-9, abs=1e-9)
    # POT gwloss is a sum of squares times non-negative weights: the value is >= 0
    assert res.value >= -1e-12
    # POT objective at the start plan: conditional gradient with exact line search descends
    assert res.value <= pot_objective(M, C1, C2, p, q, alpha, start) + 1e-9


@PROPERTY
@given(st.data())
def test_fgw_graph_with_itself_from_identity_plan_is_zero(data: st.DataObject) -> None:
    n = data.draw(st.integers(1, 6))
    C = data.draw(structures(n, data.draw(st.booleans())))
    F = data.draw(node_features(n, data.draw(st.integers(1, 3)), data.draw(st.booleans())))
    p = data.draw(masses(n))
    alpha = data.draw(st.floats(0.0, 1.0))
    identity = np.diag(p)
    # POT init_matrix/gwloss: the identity plan has objective 0 (known answer)
    assert pot_objective(feature_costs(F, F), C, C, p, p, alpha, identity) == pytest.approx(0.0, abs=1e-12)
    res = fgw_distance(feature_costs(F, F), C, C, p, p, alpha=alpha, init_plan=identity)
    assert res.value == pytest.approx(0.0, abs=1e-12)
    assert np.allclose(res.plan.sum(axis=1), p, atol=1e-8)  # numpy allclose: marginals
    assert np.allclose(res.plan.sum(axis=0), p, atol=1e-8)


@PROPERTY
@given(fgw_problems())
def test_fgw_alpha_zero_is_exact_transport(problem: dict[str, Any]) -> None:
    M, C1, C2, p, q = (problem[k] for k in ("M", "C1", "C2", "p", "q"))
    res = fgw_distance(M, C1, C2, p, q, alpha=0.0, init_plan=problem["start"])
    # POT ot.emd2: FGW with alpha = 0 is the (convex) exact transport problem
    assert res.value == pytest.approx(float(ot.emd2(p, q, M)), rel=1e-9, abs=1e-9)


# --------------------------------------------------------------------------- 3. GED


@st.composite
def graph_pairs(draw: st.DrawFn) -> tuple[nx.Graph, nx.Graph]:
    g1 = draw(labeled_graphs(0, 5))
    return g1, draw(relatives(g1))


@st.composite
def graph_triples(draw: st.DrawFn) -> tuple[nx.Graph, nx.Graph, nx.Graph]:
    g1 = draw(labeled_graphs(0, 5))
    g2 = draw(relatives(g1))
    return g1, g2, draw(relatives(g2))


@PROPERTY
@given(graph_pairs())
def test_ged_equals_networkx(pair: tuple[nx.Graph, nx.Graph]) -> None:
    g1, g2 = pair
    r = edit_distance(g1, g2)
    # networkx.graph_edit_distance with the same unit costs (tests/test_metrics.py)
    assert r.value == pytest.approx(networkx_ged(g1, g2), abs=1e-9)


@PROPERTY
@given(graph_pairs())
def test_ged_is_symmetric_and_zero_iff_label_isomorphic(pair: tuple[nx.Graph, nx.Graph]) -> None:
    g1, g2 = pair
    forward, backward = edit_distance(g1, g2).value, edit_distance(g2, g1).value
    # definition of GED: with unit costs every edit has an inverse edit of the same cost
    assert forward == pytest.approx(backward, abs=1e-9)
    # networkx.is_isomorphic with categorical label matchers: distance 0 iff label-isomorphic
    assert (forward == 0.0) is label_isomorphic(g1, g2)


@PROPERTY
@given(graph_triples())
def test_ged_triangle_inequality(triple: tuple[nx.Graph, nx.Graph, nx.Graph]) -> None:
    g1, g2, g3 = triple
    d12, d23, d13 = (edit_distance(a, b).value for a, b in ((g1, g2), (g2, g3), (g1, g3)))
    # definition of GED: an edit path g1 -> g2 followed by one g2 -> g3 is an edit path g1 -> g3
    assert d13 <= d12 + d23 + 1e-9


# --------------------------------------------------------------------------- 4. file readers

io_graph_lists = st.lists(labeled_graphs(0, 5, node_labels=FILE_NODE_LABELS), min_size=1, max_size=4)
GRAPH_SUFFIXES = [".jsonl", ".graphml"]
TEXT_FEATURE_SUFFIXES = [".csv", ".tsv"]
FEATURE_SUFFIXES = [".csv", ".tsv", ".npy"]




def read_graph_bytes(suffix: str, raw: bytes) -> tuple[bool, Any]:
    """read_graphs on a file holding ``raw``."""
    return read_bytes_with(read_graphs, suffix, raw)


def check_graph_result(suffix: str, raw: bytes, ok: bool, result: Any) -> None:
    """A successful read of arbitrary bytes: a list of graphs, matching the JSON lines."""
    if not ok:
        return
    assert isinstance(result, list) and all(isinstance(g, nx.Graph) for g in result)
    if suffix == ".jsonl":
        check_jsonl_parse(raw, result)


@pytest.mark.parametrize("suffix", GRAPH_SUFFIXES)
@PROPERTY
@given(raw=random_bytes)
def test_graph_reader_random_bytes(suffix: str, raw: bytes) -> None:
    ok, result = read_graph_bytes(suffix, raw)
    check_graph_result(suffix, raw, ok, result)


@pytest.mark.parametrize("suffix", GRAPH_SUFFIXES)
@PROPERTY
@given(text=random_text)
def test_graph_reader_random_text(suffix: str, text: str) -> None:
    raw = text.encode("utf-8")
    ok, result = read_graph_bytes(suffix, raw)
    check_graph_result(suffix, raw, ok, result)


@PROPERTY
@given(st.lists(json_records | json_values, min_size=1, max_size=3))
def test_jsonl_reader_random_json_records(records: list[Any]) -> None:
    raw = "\n".join(json.dumps(r) for r in records).encode("utf-8")
    ok, result = read_graph_bytes(".jsonl", raw)
    check_graph_result(".jsonl", raw, ok, result)


@pytest.mark.parametrize("suffix", GRAPH_SUFFIXES)
@PROPERTY
@given(graphs=io_graph_lists, data=st.data())
def test_graph_reader_truncated_file(suffix: str, graphs: list[nx.Graph], data: st.DataObject) -> None:
    full = written_graphs(suffix, graphs)
    cut = data.draw(st.integers(0, len(full)), label="cut")
    ok, result = read_graph_bytes(suffix, full[:cut])
    if suffix == ".jsonl":
        ends = [k for k, byte in enumerate(full) if byte == ord("\n")]  # one line per graph
        complete = sum(end <= cut for end in ends)
        # JSON standard: a proper prefix of a JSON object is not JSON text, so a cut line
        # must be refused; lines cut off whole leave the graphs of the complete lines
        must_parse = cut == 0 or cut in ends or cut - 1 in ends
        assert ok is must_parse, result
        if ok:  # networkx node_link_data of what was written
            assert same_graphs(result, graphs[:complete])
    else:
        root_end = full.rindex(b"</graphml>") + len(b"</graphml>")
        # XML 1.0: a document whose root element is not closed is not well-formed
        assert ok is (cut >= root_end), result
        if ok:
            assert same_graphs(result, graphs)


@pytest.mark.parametrize("suffix", GRAPH_SUFFIXES)
@PROPERTY
@given(graphs=io_graph_lists, encoding=st.sampled_from([*UTF16, "latin-1"]))
def test_graph_reader_wrong_encoding(suffix: str, graphs: list[nx.Graph], encoding: str) -> None:
    full = written_graphs(suffix, graphs)
    raw = full.decode("utf-8").encode(encoding)
    ok, result = read_graph_bytes(suffix, raw)
    if raw == full:  # Latin-1 of ASCII text is the same bytes (Python's codecs)
        assert ok and same_graphs(result, graphs)
    elif suffix == ".jsonl":
        # Python's UTF-8 codec and JSON standard: other bytes are not UTF-8 JSON text
        assert not ok
    elif ok:
        # XML 1.0 Appendix F: a parser that detects the encoding reads the same document
        assert same_graphs(result, graphs)


@pytest.mark.parametrize("suffix", GRAPH_SUFFIXES)
@pytest.mark.filterwarnings("ignore:No key type for id")  # networkx reads a key without a type as text
@PROPERTY
@given(graphs=io_graph_lists, data=st.data())
def test_graph_reader_one_byte_changed(suffix: str, graphs: list[nx.Graph], data: st.DataObject) -> None:
    full = written_graphs(suffix, graphs)
    k = data.draw(st.integers(0, len(full) - 1), label="position")
    raw = full[:k] + bytes([data.draw(st.integers(0, 255), label="byte")]) + full[k + 1:]
    ok, result = read_graph_bytes(suffix, raw)
    check_graph_result(suffix, raw, ok, result)


@pytest.mark.parametrize("suffix", FEATURE_SUFFIXES)
@PROPERTY
@given(raw=random_bytes)
def test_feature_reader_random_bytes(suffix: str, raw: bytes) -> None:
    check_features_against_reference(suffix, raw)


@pytest.mark.parametrize("suffix", FEATURE_SUFFIXES)
@PROPERTY
@given(text=random_text)
def test_feature_reader_random_text(suffix: str, text: str) -> None:
    check_features_against_reference(suffix, text.encode("utf-8"))


@pytest.mark.parametrize("suffix", FEATURE_SUFFIXES)
@PROPERTY
@given(X=feature_matrices(), data=st.data())
def test_feature_reader_truncated_file(suffix: str, X: np.ndarray, data: st.DataObject) -> None:
    ids = None if suffix == ".npy" else data.draw(st.none() | st.lists(sample_ids, min_size=len(X),
                                                                          max_size=len(X)), label="ids")
    full = written_features(suffix, X, ids)
    cut = data.draw(st.integers(0, len(full)), label="cut")
    check_features_against_reference(suffix, full[:cut])
    if suffix == ".npy":
        ok, result = read_bytes_with(read_features, suffix, full[:cut])
        # numpy's .npy format: the data section holds every element, so any cut loses one
        assert ok is (cut == len(full)), result
        if ok:
            np.testing.assert_array_equal(result, X)


@pytest.mark.parametrize("suffix", TEXT_FEATURE_SUFFIXES)
@PROPERTY
@given(X=feature_matrices(), data=st.data(), encoding=st.sampled_from([*UTF16, "latin-1"]))
def test_feature_reader_wrong_encoding(suffix: str, X: np.ndarray, data: st.DataObject, encoding: str) -> None:
    ids = data.draw(st.none() | st.lists(sample_ids, min_size=len(X), max_size=len(X)), label="ids")
    raw = written_features(suffix, X, ids).decode("utf-8").encode(encoding)
    check_features_against_reference(suffix, raw)


@pytest.mark.parametrize("suffix", FEATURE_SUFFIXES)
@PROPERTY
@given(X=feature_matrices(), data=st.data())
def test_feature_reader_one_byte_changed(suffix: str, X: np.ndarray, data: st.DataObject) -> None:
    ids = None if suffix == ".npy" else data.draw(st.none() | st.lists(sample_ids, min_size=len(X),
                                                                          max_size=len(X)), label="ids")
    full = written_features(suffix, X, ids)
    k = data.draw(st.integers(0, len(full) - 1), label="position")
    raw = full[:k] + bytes([data.draw(st.integers(0, 255), label="byte")]) + full[k + 1:]
    check_features_against_reference(suffix, raw)


# --------------------------------------------------------------------------- bugs these properties found (fixed)


# Found by test_feature_reader_one_byte_changed: numpy's fallback header parser raised
# tokenize.TokenError through read_features.
def test_npy_header_with_unclosed_bracket_is_a_value_error() -> None:
    full = written_features(".npy", np.zeros((1, 1)), None)
    raw = full[:25] + b"{" + full[26:]
    ok, _ = read_bytes_with(read_features, ".npy", raw)
    assert not ok  # read_features docstring: a .npy that cannot be read is a ValueError


# Found by hand while probing the .npy reader: numpy allocated the claimed size (MemoryError)
# before reading; the claim is now checked against the file size first.
def test_npy_header_claiming_more_data_than_the_file_holds_is_a_value_error() -> None:
    buffer = io.BytesIO()
    # numpy's own .npy header writer (numpy.lib.format), then two float64 values of data
    np.lib.format.write_array_header_1_0(buffer, {"descr": "<f8", "fortran_order": False, "shape": (10**15, 2)})
    raw = buffer.getvalue() + np.zeros(2).tobytes()
    ok, _ = read_bytes_with(read_features, ".npy", raw)
    assert not ok  # numpy .npy format: the data section is shorter than the header says


# Found by the one-byte-changed GraphML property: an unknown declared encoding raised LookupError.
def test_graphml_unknown_declared_encoding_is_a_value_error() -> None:
    raw = b"<?xml version='1.0' encoding='u-f-8'?><graphml/>"
    ok, _ = read_bytes_with(read_graphs, ".graphml", raw)
    assert not ok  # read_graphs docstring: an invalid GraphML document is a ValueError

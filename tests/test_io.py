"""Tests for gwpred.io: graph files, feature files and model archives.

Reference implementations used as the outside check:

* networkx (``is_isomorphic`` with node/edge matchers, ``read_graphml``) for
  graphs; GraphML is an open standard and networkx reads it independently of
  the gwpred reader.
* RDKit builds the molecular test graphs from SMILES, so the labels and bond
  orders are not made up by hand.
* numpy (``np.loadtxt``, ``np.load``) reads the feature files and archives
  written by gwpred; the ``.npz`` layout (zip of ``.npy`` members) is numpy's
  documented format.
"""

from __future__ import annotations

import csv
import io
import json
import os
import zipfile
from pathlib import Path
from types import SimpleNamespace

import networkx as nx
import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from gwpred.io import (
    ARCHIVE_FORMAT,
    ARCHIVE_VERSION,
    load_archive,
    read_features,
    read_graphs,
    read_ids,
    save_archive,
    write_features,
    write_graphs,
    write_hypotheses,
)

Chem = pytest.importorskip("rdkit.Chem")

GRAPH_EXTS = [".jsonl", ".graphml"]

# SMILES of ethanol, acetic acid, phenol and acetonitrile, written from memory
# (standard textbook structures).
SMILES = ["CCO", "CC(=O)O", "c1ccccc1O", "CC#N"]


def mol_graph(smiles: str, gid: int) -> nx.Graph:
    """Heavy-atom graph of an RDKit molecule: node label = element, edge order = bond order."""
    mol = Chem.MolFromSmiles(smiles)
    Chem.Kekulize(mol, clearAromaticFlags=True)
    G = nx.Graph(id=gid, smiles=smiles)
    for atom in mol.GetAtoms():
        G.add_node(atom.GetIdx(), label=atom.GetSymbol())
    for bond in mol.GetBonds():
        G.add_edge(bond.GetBeginAtomIdx(), bond.GetEndAtomIdx(), order=int(bond.GetBondTypeAsDouble()))
    return G


def special_graphs() -> list[nx.Graph]:
    empty = nx.Graph(id="empty")
    single = nx.Graph(id=101)
    single.add_node(0, label="N")
    edgeless = nx.Graph(id=102, note="no bonds")
    edgeless.add_nodes_from([(0, {"label": "C"}), (1, {"label": "O"}), (2, {"label": "S"})])
    return [empty, single, edgeless]


def all_test_graphs() -> list[nx.Graph]:
    return [mol_graph(s, i) for i, s in enumerate(SMILES)] + special_graphs()


def label_isomorphic(G: nx.Graph, H: nx.Graph) -> bool:
    # Reference check: networkx.is_isomorphic with node/edge attribute matching.
    return nx.is_isomorphic(
        G,
        H,
        node_match=lambda a, b: a == b,
        edge_match=lambda a, b: a == b,
    )


# ----------------------------------------------------------------------- graphs


@pytest.mark.parametrize("ext", GRAPH_EXTS)
def test_graph_round_trip_is_label_isomorphic(tmp_path: Path, ext: str) -> None:
    graphs = all_test_graphs()
    path = tmp_path / f"g{ext}"
    write_graphs(path, graphs)
    back = read_graphs(path)
    assert len(back) == len(graphs)
    for G, H in zip(graphs, back):
        assert type(H) is nx.Graph
        assert label_isomorphic(G, H)
        # Node ids, attributes and graph attributes (including "id") come back exactly.
        assert dict(H.nodes(data=True)) == dict(G.nodes(data=True))
        assert {frozenset((u, v)): d for u, v, d in H.edges(data=True)} == {
            frozenset((u, v)): d for u, v, d in G.edges(data=True)
        }
        assert H.graph == G.graph


@pytest.mark.parametrize("ext", GRAPH_EXTS)
def test_graph_round_trip_keeps_attribute_types(tmp_path: Path, ext: str) -> None:
    G = mol_graph("CCO", 0)
    G.nodes[0]["charge"] = 0.25
    G.nodes[1]["aromatic"] = False
    path = tmp_path / f"g{ext}"
    write_graphs(path, [G])
    (H,) = read_graphs(path)
    assert H.nodes[0]["label"] == "C" and type(H.nodes[0]["label"]) is str
    assert H.edges[0, 1]["order"] == 1 and type(H.edges[0, 1]["order"]) is int
    assert type(H.nodes[0]["charge"]) is float and H.nodes[0]["charge"] == 0.25
    assert H.nodes[1]["aromatic"] is False
    assert type(H.graph["id"]) is int


def test_write_graphs_does_not_modify_input(tmp_path: Path) -> None:
    G = mol_graph("CCO", 5)
    before = dict(G.graph)
    write_graphs(tmp_path / "g.graphml", [G])  # networkx's writer pops "id" from what it gets
    assert G.graph == before


def test_graphml_readable_by_networkx(tmp_path: Path) -> None:
    # Reference: networkx.read_graphml (returns the first graph of the document).
    graphs = all_test_graphs()
    path = tmp_path / "g.graphml"
    write_graphs(path, graphs)
    first = nx.read_graphml(path, node_type=int)
    assert label_isomorphic(first, graphs[0])
    assert first.graph["smiles"] == SMILES[0]
    assert first.edges[0, 1]["order"] == 1 and type(first.edges[0, 1]["order"]) is int


def test_graphml_no_duplicate_data_elements(tmp_path: Path) -> None:
    # networkx's GraphMLWriter re-appends <data> of earlier graphs when several are added;
    # each node of the first graph must carry its label exactly once.
    path = tmp_path / "g.graphml"
    write_graphs(path, [mol_graph("CCO", 0), mol_graph("CC#N", 1)])
    text = path.read_text()
    assert text.count("<data ") == 3 + 2 + 1 + 3 + 2 + 1  # labels + orders + smiles, per graph


@pytest.mark.parametrize("ext", GRAPH_EXTS)
def test_directed_and_multigraphs_are_not_converted(tmp_path: Path, ext: str) -> None:
    D = nx.DiGraph()
    D.add_edge("a", "b", order=1)
    M = nx.MultiGraph()
    M.add_edge(0, 1, order=1)
    M.add_edge(0, 1, order=2)
    path = tmp_path / f"g{ext}"
    write_graphs(path, [D, M])
    D2, M2 = read_graphs(path)
    assert D2.is_directed() and not D2.is_multigraph()
    assert list(D2.edges(data=True)) == [("a", "b", {"order": 1})]
    assert M2.is_multigraph() and M2.number_of_edges(0, 1) == 2
    assert nx.is_isomorphic(D, D2) and nx.is_isomorphic(M, M2)


@pytest.mark.parametrize("ext", GRAPH_EXTS)
def test_write_empty_collection(tmp_path: Path, ext: str) -> None:
    path = tmp_path / f"g{ext}"
    write_graphs(path, [])
    assert read_graphs(path) == []


def test_graphml_string_node_ids_stay_strings(tmp_path: Path) -> None:
    G = nx.Graph(id="mol-a")
    G.add_edge("01", "x", order=1)  # "01" is not a canonical integer literal
    path = tmp_path / "g.graphml"
    write_graphs(path, [G])
    (H,) = read_graphs(path)
    assert set(H.nodes) == {"01", "x"} and H.graph["id"] == "mol-a"


def test_jsonl_blank_lines_links_key_and_top_level_keys(tmp_path: Path) -> None:
    path = tmp_path / "g.jsonl"
    lines = [
        "",
        '{"nodes": [{"id": 0, "label": "C"}, {"id": 1, "label": "O"}], '
        '"links": [{"source": 0, "target": 1, "order": 1}], "id": 9, "graph": {"name": "CO"}}',
        "   ",
        '{"directed": false, "multigraph": false, "graph": {}, "nodes": [], "edges": []}',
    ]
    path.write_text("\n".join(lines) + "\n")
    G, E = read_graphs(path)
    assert type(G) is nx.Graph  # no flags -> simple undirected graph
    assert G.graph == {"name": "CO", "id": 9}
    assert G.edges[0, 1] == {"order": 1}
    assert E.number_of_nodes() == 0


def test_jsonl_numpy_scalars_are_written_as_numbers(tmp_path: Path) -> None:
    G = nx.Graph()
    G.add_edge(0, 1, order=np.int64(2))
    path = tmp_path / "g.jsonl"
    write_graphs(path, [G])
    (H,) = read_graphs(path)
    assert H.edges[0, 1]["order"] == 2 and type(H.edges[0, 1]["order"]) is int


_labels = st.sampled_from(["C", "N", "O", "S"])


@st.composite
def labeled_graphs(draw: st.DrawFn) -> nx.Graph:
    n = draw(st.integers(min_value=0, max_value=7))
    G = nx.Graph(id=draw(st.integers(min_value=0, max_value=10**6)))
    for i in range(n):
        G.add_node(i, label=draw(_labels))
    pairs = [(i, j) for i in range(n) for j in range(i + 1, n)]
    for u, v in draw(st.lists(st.sampled_from(pairs), unique=True) if pairs else st.just([])):
        G.add_edge(u, v, order=draw(st.integers(min_value=1, max_value=3)))
    return G


@settings(max_examples=30, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(graphs=st.lists(labeled_graphs(), max_size=4))
def test_round_trip_property(tmp_path: Path, graphs: list[nx.Graph]) -> None:
    for ext in GRAPH_EXTS:
        path = tmp_path / f"p{ext}"
        write_graphs(path, graphs)
        back = read_graphs(path)
        assert len(back) == len(graphs)
        assert all(label_isomorphic(G, H) and H.graph == G.graph for G, H in zip(graphs, back))


# ---- graph error paths


@pytest.mark.parametrize("func", ["read", "write"])
def test_unknown_graph_extension(tmp_path: Path, func: str) -> None:
    path = tmp_path / "g.gml"
    path.write_text("")
    with pytest.raises(ValueError, match=r"unsupported graph file extension '\.gml'.*\.jsonl, \.graphml"):
        read_graphs(path) if func == "read" else write_graphs(path, [])


@pytest.mark.parametrize("ext", GRAPH_EXTS)
def test_missing_graph_file(tmp_path: Path, ext: str) -> None:
    with pytest.raises(FileNotFoundError, match=r"graph file not found: .*nope"):
        read_graphs(tmp_path / f"nope{ext}")


def test_write_into_missing_directory(tmp_path: Path) -> None:
    with pytest.raises(FileNotFoundError, match=r"directory .*missing.* does not exist"):
        write_graphs(tmp_path / "missing" / "g.jsonl", [nx.Graph()])


def test_write_graphs_rejects_non_graph(tmp_path: Path) -> None:
    with pytest.raises(ValueError, match=r"graphs\[1\] is a dict, not a networkx graph"):
        write_graphs(tmp_path / "g.jsonl", [nx.Graph(), {}])


@pytest.mark.parametrize(
    "line, message",
    [
        ('{"nodes": [}', r"line 2: malformed JSON"),
        ("[1, 2]", r"line 2: expected a JSON object .* got list"),
        ('{"edges": []}', r"line 2: node-link record has no 'nodes' list"),
        ('{"nodes": []}', r"line 2: node-link record has no 'edges' list"),
        ('{"nodes": [], "edges": [], "graph": 3}', r"line 2: 'graph' must be a JSON object"),
        ('{"nodes": [], "edges": [], "graph": {"id": 1}, "id": 2}', r"line 2: top-level key 'id'=2 conflicts"),
        ('{"nodes": [{"id": 0}], "edges": [{"target": 0}]}',
         r"line 2: edges\[0\] must be a JSON object with 'source' and 'target'"),
        # what networkx's node_link_graph would silently rewrite (it keeps the last copy of a node
        # or edge and invents missing endpoints) is refused with the place
        ('{"nodes": [{"id": 0, "label": "C"}, {"id": 0, "label": "O"}], "edges": []}',
         r"line 2: node id 0 appears twice \(nodes\[1\]\); node ids must be unique"),
        ('{"nodes": [{"id": 0}, {"id": 1}], "edges": [{"source": 0, "target": 1, "label": 1}, '
         '{"source": 1, "target": 0, "label": 2}]}',
         r"line 2: the edge between 1 and 0 appears twice \(edges\[1\]\); a graph holds each pair once"),
        ('{"nodes": [{"id": 0}], "edges": [{"source": 0, "target": "0"}]}',
         r"line 2: edges\[0\] refers to node '0', which is not in 'nodes'"),
        ('{"nodes": [{"id": 0, "label": NaN}], "edges": []}', r"line 2: node 0 has a NaN or infinite 'label'"),
        ('{"nodes": [{"id": [1]}], "edges": []}', r"line 2: nodes\[0\] has id \[1\]; ids must be numbers or strings"),
        ('{"nodes": [{"label": "C"}], "edges": []}', r"line 2: nodes\[0\] must be a JSON object with an 'id'"),
        ('{"nodes": ' + "[" * 100_000 + "]" * 100_000 + ', "edges": []}', r"line 2: JSON nested too deeply"),
    ],
)
def test_bad_jsonl_lines(tmp_path: Path, line: str, message: str) -> None:
    path = tmp_path / "g.jsonl"
    path.write_text('{"nodes": [], "edges": []}\n' + line + "\n")
    with pytest.raises(ValueError, match=message) as info:
        read_graphs(path)
    assert "g.jsonl" in str(info.value)


def test_text_files_must_be_utf8(tmp_path: Path) -> None:
    path = tmp_path / "g.jsonl"
    path.write_bytes(b'{"nodes": [], "edges": []}\n{"nodes": ["\xff"], "edges": []}\n')
    with pytest.raises(ValueError, match=r"line 2 is not UTF-8 text"):
        read_graphs(path)
    path = tmp_path / "x.csv"
    path.write_bytes(b"a,b\n1,\xff\n")
    with pytest.raises(ValueError, match=r"x\.csv' is not UTF-8 text .*save the file as UTF-8"):
        read_features(path)


def test_csv_module_error_is_reported(tmp_path: Path) -> None:
    path = tmp_path / "x.csv"
    path.write_text("1,2\n3," + "4" * 200_000 + "\n")  # beyond the csv module's field size limit
    # the limit is process-wide state that other code (the QM9 readers) raises; pin it here
    old = csv.field_size_limit(131072)
    try:
        with pytest.raises(ValueError, match=r"x\.csv' line 2: field larger than field limit"):
            read_features(path)
    finally:
        csv.field_size_limit(old)


def test_jsonl_attribute_name_clashes(tmp_path: Path) -> None:
    G = nx.Graph()
    G.add_node(0, id="x")
    with pytest.raises(ValueError, match=r"graphs\[0\]: node 0 has an attribute named 'id'"):
        write_graphs(tmp_path / "g.jsonl", [G])
    H = nx.Graph()
    H.add_edge(0, 1, source="x")
    with pytest.raises(ValueError, match=r"graphs\[0\]: edge \(0, 1\) has an attribute named 'source'"):
        write_graphs(tmp_path / "g.jsonl", [H])


def test_jsonl_unstorable_values(tmp_path: Path) -> None:
    G = nx.Graph()
    G.add_node(0, label={"C", "N"})
    with pytest.raises(TypeError, match=r"graphs\[0\] cannot be written as JSON: .*type set"):
        write_graphs(tmp_path / "g.jsonl", [G])
    H = nx.Graph()
    H.add_node(0, charge=float("nan"))
    with pytest.raises(ValueError, match=r"graphs\[0\] holds a NaN or infinite float attribute"):
        write_graphs(tmp_path / "g.jsonl", [H])
    assert not list(tmp_path.iterdir())  # nothing written, no temporary file left


def test_graphml_unstorable_ids_and_values(tmp_path: Path) -> None:
    path = tmp_path / "g.graphml"
    T = nx.Graph()
    T.add_node((0, 1))
    with pytest.raises(TypeError, match=r"graphs\[0\] has node id \(0, 1\) of type tuple"):
        write_graphs(path, [T])
    mixed = nx.Graph()
    mixed.add_nodes_from([0, "a"])
    with pytest.raises(TypeError, match=r"graphs\[0\] mixes int and str node ids"):
        write_graphs(path, [mixed])
    with pytest.raises(TypeError, match=r"graphs\[1\] has graph attribute id=1.5 of type float"):
        write_graphs(path, [nx.Graph(), nx.Graph(id=1.5)])
    with pytest.raises(TypeError, match=r"graphs\[0\] has graph attribute id='7', a str that would read back"):
        write_graphs(path, [nx.Graph(id="7")])
    digits = nx.Graph()
    digits.add_edge("1", "2")
    with pytest.raises(TypeError, match=r"graphs\[0\] has str node ids that are all integer literals"):
        write_graphs(path, [digits])
    N = nx.Graph()
    N.add_node(0, label=None)
    with pytest.raises(TypeError, match=r"graphs\[0\] cannot be written as GraphML: .*NoneType"):
        write_graphs(path, [N])
    assert not list(tmp_path.iterdir())


def test_bad_graphml_files(tmp_path: Path) -> None:
    path = tmp_path / "g.graphml"
    path.write_text("<graphml><graph>")
    with pytest.raises(ValueError, match=r"is not well-formed XML"):
        read_graphs(path)
    path.write_text("<graphml><graph edgedefault='undirected'/></graphml>")
    with pytest.raises(ValueError, match=r"root element is <graphml>, expected <graphml> in the GraphML namespace"):
        read_graphs(path)
    path.write_text(
        '<graphml xmlns="http://graphml.graphdrawing.org/xmlns">'
        '<graph edgedefault="undirected"/>'
        '<graph edgedefault="undirected"><node id="0"><data key="d9">C</data></node></graph>'
        "</graphml>"
    )
    with pytest.raises(ValueError, match=r"invalid GraphML in graph #2: .*no key d9"):
        read_graphs(path)


# --------------------------------------------------------------------- features


def test_csv_without_header_matches_numpy(tmp_path: Path) -> None:
    path = tmp_path / "x.csv"
    path.write_text("1,2.5,-3\n4e-3, 5 ,6\n\n")
    X, ids = read_features(path, return_ids=True)
    # Reference parser: numpy.loadtxt.
    np.testing.assert_array_equal(X, np.loadtxt(path, delimiter=",", ndmin=2))
    assert X.dtype == np.float64 and ids is None


def test_csv_with_header_and_ids(tmp_path: Path) -> None:
    path = tmp_path / "x.csv"
    path.write_text("id,a,b\nmol1,1,2\nmol2,3,4\n")
    X, ids = read_features(path, return_ids=True)
    np.testing.assert_array_equal(X, np.loadtxt(path, delimiter=",", skiprows=1, usecols=(1, 2), ndmin=2))
    assert ids == ["mol1", "mol2"]
    assert read_features(path).shape == (2, 2)


def test_id_column_by_name_or_number(tmp_path: Path) -> None:
    # Reference: numpy.loadtxt reads the feature columns the same way
    path = tmp_path / "x.csv"
    path.write_text("a,sample,b\n1,mol1,2\n3,mol2,4\n")
    X, ids = read_features(path, return_ids=True, id_column="Sample")
    np.testing.assert_array_equal(X, np.loadtxt(path, delimiter=",", skiprows=1, usecols=(0, 2), ndmin=2))
    assert ids == ["mol1", "mol2"]
    bare = tmp_path / "bare.tsv"
    bare.write_text("101\t0.5\t1\n102\t0.25\t2\n")  # numeric ids, no header
    X, ids = read_features(bare, return_ids=True, id_column="1")
    np.testing.assert_array_equal(X, [[0.5, 1.0], [0.25, 2.0]])
    assert ids == ["101", "102"]
    with pytest.raises(ValueError, match=r"has no column headed 'name' for the ids \(header: 'a, sample, b'\)"):
        read_features(path, id_column="name")
    with pytest.raises(ValueError, match=r"has no header row, so the id column cannot be found by the name 'name'"):
        read_features(bare, id_column="name")
    with pytest.raises(ValueError, match=r"has 3 columns; id column 7 does not exist"):
        read_features(path, id_column="7")
    empty = tmp_path / "empty.csv"
    empty.write_text("id,a\nm1,1\n,2\n")
    with pytest.raises(ValueError, match=r"line 3: the id cell \(column 1\) is empty; give every row an id"):
        read_features(empty)
    npy = tmp_path / "x.npy"
    np.save(npy, np.eye(2))
    with pytest.raises(ValueError, match=r"has no columns of text; give the ids in a file of their own"):
        read_features(npy, id_column="id")


def test_a_first_column_counting_up_without_header_is_flagged(tmp_path: Path) -> None:
    path = tmp_path / "x.csv"
    path.write_text("1,0.5,0.1\n2,0.4,0.2\n3,0.3,0.3\n")
    with pytest.warns(UserWarning, match=r"first column counts up \(1, 2, 3, \.\.\.\) like row ids.*--id-column 1"):
        X = read_features(path)
    assert X.shape == (3, 3)  # still read as a feature: a warning, not a guess


def test_read_ids(tmp_path: Path) -> None:
    txt = tmp_path / "ids.txt"
    txt.write_text("a\nb c\n\n")
    assert read_ids(txt) == ["a", "b c"]
    csv_path = tmp_path / "ids.csv"
    csv_path.write_text("x,ID\n1,m1\n2,m2\n")
    assert read_ids(csv_path) == ["m1", "m2"]
    txt.write_text("a\n\nc\n")
    with pytest.raises(ValueError, match=r"line 2: empty id; give every input row an id"):
        read_ids(txt)
    with pytest.raises(ValueError, match=r"has no 'name' column"):
        read_ids(csv_path, column="name")


def test_csv_header_without_id_keeps_all_columns(tmp_path: Path) -> None:
    path = tmp_path / "x.tsv"
    path.write_text("a\tb\n1\t2\n")
    X, ids = read_features(path, return_ids=True)
    np.testing.assert_array_equal(X, [[1.0, 2.0]])
    assert ids is None


def test_npy_features(tmp_path: Path) -> None:
    path = tmp_path / "x.npy"
    np.save(path, np.arange(6, dtype=np.int32).reshape(3, 2))
    X, ids = read_features(path, return_ids=True)
    assert X.dtype == np.float64 and X.shape == (3, 2) and ids is None
    np.testing.assert_array_equal(X, np.load(path))


@pytest.mark.parametrize("ext", [".csv", ".tsv", ".npy"])
def test_write_features_round_trip_is_exact(tmp_path: Path, ext: str) -> None:
    X = np.random.default_rng(0).normal(size=(5, 3)) * 1e-7
    path = tmp_path / f"x{ext}"
    write_features(path, X)
    np.testing.assert_array_equal(read_features(path), X)
    if ext == ".npy":
        np.testing.assert_array_equal(np.load(path, allow_pickle=False), X)  # reference reader
    else:
        delim = "," if ext == ".csv" else "\t"
        np.testing.assert_array_equal(np.loadtxt(path, delimiter=delim, skiprows=1, ndmin=2), X)


def test_write_features_with_ids(tmp_path: Path) -> None:
    path = tmp_path / "x.csv"
    write_features(path, np.eye(2), ids=["a,1", "b"])
    X, ids = read_features(path, return_ids=True)
    np.testing.assert_array_equal(X, np.eye(2))
    assert ids == ["a,1", "b"]


# ---- feature error paths


@pytest.mark.parametrize("func", ["read", "write"])
def test_unknown_feature_extension(tmp_path: Path, func: str) -> None:
    path = tmp_path / "x.txt"
    path.write_text("1\n")
    with pytest.raises(ValueError, match=r"unsupported feature file extension '\.txt'.*\.npy, \.csv, \.tsv"):
        read_features(path) if func == "read" else write_features(path, np.ones((1, 1)))


def test_missing_feature_file(tmp_path: Path) -> None:
    with pytest.raises(FileNotFoundError, match=r"feature file not found: .*nope\.csv"):
        read_features(tmp_path / "nope.csv")


@pytest.mark.parametrize(
    "text, message",
    [
        ("a,b\n1,2\n3\n", r"line 3 has 1 columns, expected 2 \(as on line 1\)"),
        ("1,2\n3,x\n", r"line 2, column 2: cell 'x' is not a number"),
        ("id,a\nm1,1\nm2,?\n", r"line 3, column 2: cell '\?' is not a number"),
        ("id,a\nm1,1\nm2,nan\nm3,inf\n", r"2 non-finite value\(s\).*first is nan at line 3, column 2; impute or drop"),
        ("\n\n", r"is empty; it needs at least one data row"),
        ("id\nm1\n", r"has no feature columns"),
        ("a,b\n", r"has a header row but no data rows"),
        # a first column of sample names under another heading than 'id'
        ("sample,a,b\nmol1,1,2\n", r"line 2, column 1: cell 'mol1' is not a number; if the first column "
                                    r"\(headed 'sample'\) holds sample ids, head it 'id'"),
        # a semicolon-separated file: the separator is named from the header line, no row is dumped
        ("a;b\n" + ";".join(["0.5"] * 400) + "\n", r"has one column on line 1; the file seems separated by "
                                                    r"semicolons, not commas: save it as comma-separated"),
        ("0.5;0.5\n0.1;0.2\n", r"has one column on line 1; the file seems separated by semicolons"),
    ],
)
def test_bad_csv(tmp_path: Path, text: str, message: str) -> None:
    path = tmp_path / "x.csv"
    path.write_text(text)
    with pytest.raises(ValueError, match=message):
        read_features(path)


@pytest.mark.parametrize(
    "array, message",
    [
        (np.array([[1.0, np.inf], [np.nan, 0.0]]), r"2 non-finite value\(s\).*first is inf at row 0, column 1"),
        (np.arange(3.0), r"1-D array of shape \(3,\), which is ambiguous.*reshape\(-1, 1\)"),
        (np.zeros((2, 2, 2)), r"3-D array of shape \(2, 2, 2\)"),
        (np.zeros((0, 3)), r"empty array of shape \(0, 3\)"),
        (np.array([["a", "b"]]), r"dtype <U1; features must be integers or floats"),
        (np.array([[True]]), r"dtype bool; features must be integers or floats"),
    ],
)
def test_bad_npy(tmp_path: Path, array: np.ndarray, message: str) -> None:
    path = tmp_path / "x.npy"
    np.save(path, array)
    with pytest.raises(ValueError, match=message):
        read_features(path)


def test_npy_pickled_garbage_and_npz(tmp_path: Path) -> None:
    path = tmp_path / "x.npy"
    np.save(path, np.array([[1, None]], dtype=object), allow_pickle=True)
    with pytest.raises(ValueError, match=r"holds Python objects \(pickled data\), which gwpred never loads"):
        read_features(path)
    path.write_bytes(b"\x93NUMPY garbage")
    with pytest.raises(ValueError, match=r"could not be read as a \.npy array"):
        read_features(path)
    with open(path, "wb") as fh:
        np.savez(fh, a=np.ones((2, 2)))
    with pytest.raises(ValueError, match=r"is an \.npz archive, not a single \.npy array"):
        read_features(path)


def test_write_features_errors(tmp_path: Path) -> None:
    with pytest.raises(ValueError, match=r"X must hold integers or floats, got dtype <U1"):
        write_features(tmp_path / "x.csv", np.array([["a"]]))
    with pytest.raises(ValueError, match=r"X must be a non-empty 2-D array .* got shape \(3,\)"):
        write_features(tmp_path / "x.csv", np.ones(3))
    with pytest.raises(ValueError, match=r"X contains 1 non-finite value\(s\).*X\[1, 0\]"):
        write_features(tmp_path / "x.csv", np.array([[1.0], [np.nan]]))
    with pytest.raises(ValueError, match=r"ids cannot be stored in a \.npy file"):
        write_features(tmp_path / "x.npy", np.ones((1, 1)), ids=["a"])
    with pytest.raises(ValueError, match=r"ids has 1 entries but X has 2 rows"):
        write_features(tmp_path / "x.csv", np.ones((2, 1)), ids=["a"])
    assert not list(tmp_path.iterdir())


# ------------------------------------------------------------------- archives


def sample_arrays() -> dict[str, np.ndarray]:
    rng = np.random.default_rng(1)
    return {
        "weights": rng.normal(size=(40, 30)),
        "labels": np.array(["C", "N", "O"]),
        "counts": np.arange(12, dtype=np.int16).reshape(3, 4),
        "fortran": np.asfortranarray(rng.normal(size=(3, 5))),
    }


def write_npz(path: Path, members: dict[str, np.ndarray], manifest: object | None) -> None:
    """Write an .npz with numpy itself, optionally with a hand-made manifest."""
    if manifest is not None:
        raw = json.dumps(manifest).encode()
        members = {"__manifest__": np.frombuffer(raw, dtype=np.uint8), **members}
    with open(path, "wb") as fh:
        np.savez(fh, **members)


def test_archive_round_trip(tmp_path: Path) -> None:
    arrays = sample_arrays()
    manifest = {"alpha": 0.5, "labels": ["C", "N"], "nested": {"k": 3}}
    path = tmp_path / "model.npz"
    save_archive(path, arrays, manifest)
    back, man = load_archive(path)
    assert set(back) == set(arrays)
    for name, arr in arrays.items():
        np.testing.assert_array_equal(back[name], arr)
        assert back[name].dtype == arr.dtype
    assert man["alpha"] == 0.5 and man["nested"] == {"k": 3}
    assert man["format"] == ARCHIVE_FORMAT == "gwpred-model"
    assert man["format_version"] == ARCHIVE_VERSION == 1
    assert isinstance(man["gwpred_version"], str)
    assert set(man["checksums"]) == set(arrays)
    assert "format" not in manifest  # the caller's dict is not modified
    # Reference reader: numpy.load of the standard .npz layout, without pickle.
    with np.load(path, allow_pickle=False) as npz:
        np.testing.assert_array_equal(npz["weights"], arrays["weights"])
        assert json.loads(npz["__manifest__"].tobytes())["format"] == "gwpred-model"
    # A loaded manifest can be saved again; equal inputs give identical bytes.
    save_archive(tmp_path / "again.npz", back, man)
    assert (tmp_path / "again.npz").read_bytes() == path.read_bytes()


def test_archive_replaces_file_atomically(tmp_path: Path) -> None:
    path = tmp_path / "model.npz"
    save_archive(path, {"a": np.ones(2)}, {})
    with pytest.raises(TypeError):
        save_archive(path, {"a": np.ones(2), "b": np.array([None])}, {})
    np.testing.assert_array_equal(load_archive(path)[0]["a"], np.ones(2))  # old file intact
    assert [p.name for p in tmp_path.iterdir()] == ["model.npz"]


def test_archive_save_errors(tmp_path: Path) -> None:
    path = tmp_path / "m.npz"
    with pytest.raises(TypeError, match=r"arrays\['obj'\] has dtype object, which holds Python objects"):
        save_archive(path, {"ok": np.ones(1), "obj": np.array([1, "a"], dtype=object)}, {})
    with pytest.raises(TypeError, match=r"arrays\['w'\] is a list, not a numpy.ndarray"):
        save_archive(path, {"w": [1.0, 2.0]}, {})  # type: ignore[dict-item]
    with pytest.raises(ValueError, match=r"'__manifest__' is reserved for the manifest"):
        save_archive(path, {"__manifest__": np.ones(1)}, {})
    with pytest.raises(ValueError, match=r"array names must be non-empty strings, got ''"):
        save_archive(path, {"": np.ones(1)}, {})
    with pytest.raises(TypeError, match=r"arrays must be a dict of name -> numpy.ndarray, got list"):
        save_archive(path, [np.ones(1)], {})  # type: ignore[arg-type]
    with pytest.raises(TypeError, match=r"manifest must be a dict, got str"):
        save_archive(path, {}, "x")  # type: ignore[arg-type]
    with pytest.raises(TypeError, match=r"manifest is not JSON-serialisable"):
        save_archive(path, {}, {"f": object()})
    with pytest.raises(ValueError, match=r"manifest holds NaN or infinity"):
        save_archive(path, {}, {"f": float("nan")})
    assert not list(tmp_path.iterdir())


def test_archive_missing_file(tmp_path: Path) -> None:
    with pytest.raises(FileNotFoundError, match=r"model archive file not found: .*nope\.npz"):
        load_archive(tmp_path / "nope.npz")


def test_archive_truncated(tmp_path: Path) -> None:
    path = tmp_path / "m.npz"
    save_archive(path, sample_arrays(), {})
    data = path.read_bytes()
    path.write_bytes(data[: len(data) // 2])
    with pytest.raises(ValueError, match=r"not a valid \.npz \(zip\) file; the file may be truncated or corrupted"):
        load_archive(path)


def test_archive_flipped_byte_inside_array(tmp_path: Path) -> None:
    path = tmp_path / "m.npz"
    save_archive(path, sample_arrays(), {})
    data = bytearray(path.read_bytes())
    with zipfile.ZipFile(path) as zf:
        info = zf.getinfo("weights.npy")
    # Middle of the member's compressed data (local header is 30 bytes + name + extra).
    with open(path, "rb") as fh:
        fh.seek(info.header_offset + 26)
        name_len, extra_len = np.frombuffer(fh.read(4), dtype="<u2")
    start = info.header_offset + 30 + int(name_len) + int(extra_len)
    data[start + info.compress_size // 2] ^= 0xFF
    path.write_bytes(bytes(data))
    # Either the zip CRC / deflate stream or the sha256 checksum catches it.
    with pytest.raises(ValueError, match=r"'weights'.*corrupted"):
        load_archive(path)


def test_archive_checksum_mismatch(tmp_path: Path) -> None:
    path = tmp_path / "m.npz"
    save_archive(path, sample_arrays(), {})
    arrays, manifest = load_archive(path)
    arrays["counts"] = arrays["counts"].copy()
    arrays["counts"][0, 0] += 1
    write_npz(path, arrays, manifest)  # valid zip, stale checksum
    with pytest.raises(ValueError, match=r"array 'counts' does not match its checksum; the file is corrupted"):
        load_archive(path)


def _manifest(**changes: object) -> dict:
    base: dict = {"format": "gwpred-model", "format_version": 1, "gwpred_version": "0", "checksums": {}}
    base.update(changes)
    return base


@pytest.mark.parametrize(
    "manifest, members, message",
    [
        (None, {"a": np.ones(1)}, r"has no '__manifest__' entry; it is not a gwpred model archive"),
        (_manifest(format="other-model"), {}, r"manifest format 'other-model', expected 'gwpred-model'"),
        (_manifest(format_version=2), {}, r"format_version 2, but this gwpred reads versions up to 1; upgrade gwpred"),
        (_manifest(format_version="1"), {}, r"invalid format_version '1'"),
        (_manifest(checksums=[]), {}, r"'checksums' must map array names to sha256 hex strings"),
        (_manifest(checksums={"W": "00"}), {}, r"lacks array\(s\) \['W'\] listed in its manifest"),
        (_manifest(), {"extra": np.ones(1)}, r"holds array\(s\) \['extra'\] not listed in its manifest"),
        ([1, 2], {}, r"invalid manifest \(manifest is a JSON list"),
    ],
)
def test_archive_bad_manifest(tmp_path: Path, manifest: object, members: dict, message: str) -> None:
    path = tmp_path / "m.npz"
    write_npz(path, members, manifest)
    with pytest.raises(ValueError, match=message):
        load_archive(path)


def test_archive_manifest_not_bytes_of_json(tmp_path: Path) -> None:
    path = tmp_path / "m.npz"
    write_npz(path, {"__manifest__": np.frombuffer(b"\xff{", dtype=np.uint8)}, None)
    with pytest.raises(ValueError, match=r"invalid manifest .*corrupted or not a gwpred model"):
        load_archive(path)
    write_npz(path, {"__manifest__": np.zeros(3)}, None)
    with pytest.raises(ValueError, match=r"invalid manifest \(manifest entry has dtype float64"):
        load_archive(path)


def test_archive_not_an_npz(tmp_path: Path) -> None:
    path = tmp_path / "m.npz"
    save_archive(path, {"a": np.ones(2)}, {})
    good = path.read_bytes()
    # Zip end record still found, but the file no longer starts like a zip.
    path.write_bytes(b"junk" + good)
    with pytest.raises(ValueError, match=r"could not be opened as \.npz .*truncated or corrupted"):
        load_archive(path)
    # A plain .npy with a zip glued after it: numpy loads the .npy part.
    buf = io.BytesIO()
    np.save(buf, np.ones(2))
    path.write_bytes(buf.getvalue() + good)
    with pytest.raises(ValueError, match=r"is not a gwpred model archive \(not an \.npz file\)"):
        load_archive(path)


def test_archive_object_member_refused_at_load(tmp_path: Path) -> None:
    path = tmp_path / "m.npz"
    with open(path, "wb") as fh:
        np.savez(
            fh,
            __manifest__=np.frombuffer(json.dumps(_manifest(checksums={"o": "00"})).encode(), dtype=np.uint8),
            o=np.array([None], dtype=object),
        )
    with pytest.raises(ValueError, match=r"member 'o' holds Python objects \(pickled data\), which gwpred never loads"):
        load_archive(path)


def test_gwpred_version_falls_back(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    from gwpred import _version  # where the version string lives since the layered re-lay

    monkeypatch.setattr(_version, "__version__", "9.9.9", raising=False)
    save_archive(tmp_path / "m.npz", {}, {})
    assert load_archive(tmp_path / "m.npz")[1]["gwpred_version"] == "9.9.9"
    monkeypatch.delattr(_version, "__version__")
    save_archive(tmp_path / "m.npz", {}, {})
    assert load_archive(tmp_path / "m.npz")[1]["gwpred_version"] == "unknown"
    assert os.listdir(tmp_path) == ["m.npz"]


# ------------------------------------------------------------ formula files
def test_read_formulas_csv_tsv_txt(tmp_path):
    from gwpred.io import read_formulas

    # files written with Python's csv module (reference writer)
    p = tmp_path / "f.csv"
    with open(p, "w", newline="", encoding="utf-8") as fh:
        csv.writer(fh).writerows([["id", "FORMULA", "x"], ["a", "C2H6O", "1"], ["b", "", "2"], ["c", "-", "3"]])
    assert read_formulas(p) == ["C2H6O", None, None]
    t = tmp_path / "f.tsv"
    with open(t, "w", newline="", encoding="utf-8") as fh:
        csv.writer(fh, delimiter="\t").writerows([["mf"], ["CH4"], ["C6H6"]])
    assert read_formulas(t, column="mf") == ["CH4", "C6H6"]
    x = tmp_path / "f.txt"
    x.write_text("C4H6O2\n\nCO2\n", encoding="utf-8")
    assert read_formulas(x) == ["C4H6O2", None, "CO2"]


def test_read_formulas_errors(tmp_path):
    from gwpred.io import read_formulas

    p = tmp_path / "f.csv"
    p.write_text("id,mf\na,CH4\n", encoding="utf-8")
    with pytest.raises(ValueError, match="has no 'formula' column"):
        read_formulas(p)
    p.write_text("id,formula\na,CH4,extra\n", encoding="utf-8")
    with pytest.raises(ValueError, match="line 2 has 3 columns, expected 2"):
        read_formulas(p)
    p.write_text("", encoding="utf-8")
    with pytest.raises(ValueError, match="is empty"):
        read_formulas(p)
    with pytest.raises(ValueError, match="unsupported formula file extension"):
        read_formulas(tmp_path / "f.json")
    b = tmp_path / "b.txt"
    b.write_bytes(b"\xff\xfe\x00C")
    with pytest.raises(ValueError, match="not UTF-8"):
        read_formulas(b)


def test_archive_manifest_edits_are_refused(tmp_path: Path) -> None:
    # reordering labels (or any other hand edit of the JSON manifest) would silently change what a
    # model predicts; the manifest's own sha256 (hashlib, over its canonical JSON) catches it
    path = tmp_path / "m.npz"
    save_archive(path, sample_arrays(), {"labels": ["C", "N", "O"]})
    arrays, manifest = load_archive(path)
    assert len(manifest["manifest_sha256"]) == 64
    manifest["labels"] = ["N", "C", "O"]
    write_npz(path, arrays, manifest)
    with pytest.raises(ValueError, match=r"the manifest does not match its checksum; the file was edited or "
                                         r"corrupted after it was saved"):
        load_archive(path)
    # files written before the seal existed (no manifest_sha256) still load
    del manifest["manifest_sha256"]
    write_npz(path, arrays, manifest)
    assert load_archive(path)[1]["labels"] == ["N", "C", "O"]


def test_write_hypotheses_layouts_and_errors(tmp_path):
    # Reference: the standard json module and networkx's GraphML reader read the files back.
    g = nx.path_graph(3)
    nx.set_node_attributes(g, "C", "label")
    nx.set_edge_attributes(g, 1, "label")
    h = SimpleNamespace(graph=g, score=0.5, confidence=0.25, confidence_near=0.5, source="edit")
    lists = [[h, h], []]
    write_hypotheses(tmp_path / "h.jsonl", lists, ids=["a", "b"], formulas=["C3H8", None])
    rows = [json.loads(line) for line in (tmp_path / "h.jsonl").read_text(encoding="utf-8").splitlines()]
    assert [r["id"] for r in rows] == ["a", "b"] and rows[0]["formula_given"] == "C3H8"
    assert [x["rank"] for x in rows[0]["ranked"]] == [1, 2] and rows[1]["ranked"] == []
    write_hypotheses(tmp_path / "h.graphml", lists)
    back = read_graphs(tmp_path / "h.graphml")
    assert [b.graph["id"] for b in back] == ["0#1", "0#2"] and back[1].graph["rank"] == 2
    with pytest.raises(ValueError, match="ids has 1 entries but there are 2 hypothesis lists"):
        write_hypotheses(tmp_path / "x.jsonl", lists, ids=["a"])
    with pytest.raises(ValueError, match="unsupported graph file extension|extension"):
        write_hypotheses(tmp_path / "x.txt", lists)
    assert not (tmp_path / "x.jsonl").exists()


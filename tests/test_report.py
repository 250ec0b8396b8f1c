"""Tests for the HTML report (gwpred.report) and the ``gwpred report`` command.

Outside references used here:

- A real headless browser: Debian's ``chromium`` driven through ``chromium-driver`` with
  the Python package ``selenium`` (table rows, sorting by clicks, screenshot, the
  Resource Timing API for network requests). Skipped, with the reason, when they are
  absent on a developer machine; a failure on CI (``CI`` set), where ``.ci/run``
  installs them.
- Python's ``html.parser`` reads the page without a browser (ids, links, scripts).
- RDKit (``Chem.MolFromSmiles``) parses the SMILES shown in the table; RDKit's
  ``CalcMolFormula`` gives the formulas; RDKit's SDF reader reads the SDF download.
- Python's ``csv`` module reads the CSV download.
- networkx's ``weisfeiler_lehman_subgraph_hashes`` gives the Weisfeiler-Lehman features
  behind the confidence column; SciPy's ``spearmanr`` relates confidence and GED.
- matplotlib's ``imread`` decodes the browser's PNG screenshot.
- QM9 heavy-atom graphs and SMILES from ``gwpred.datasets.load_demo`` (built from the QM9
  data of the PyPI package qm9pack). The predictions here are other QM9 graphs (and for
  one item a copy of the truth), so exact matches and ranks are known by construction;
  the 300-item page holds a model's predictions for the last 300 demo molecules.
"""

from __future__ import annotations

import csv
import html
import io
import json
import os
import re
import shutil
import tempfile
from collections import Counter
from html.parser import HTMLParser
from pathlib import Path
from types import SimpleNamespace

import networkx as nx
import numpy as np
import pytest

from gwpred import BarycenterGraphPredictor
from gwpred._utils import CAUTION
from gwpred.cli import main
from gwpred.datasets import load_demo, wavenumber_grid
from gwpred.io import write_graphs
from gwpred.metrics import summarize
from gwpred.report import (
    RankedCandidate,
    build_report,
    is_molecular,
    read_ranked,
    write_report,
)

CHROMIUM = "/usr/bin/chromium"
CHROMEDRIVER = "/usr/bin/chromedriver"
N = 8  # items in the small reports
EXACT = 3  # the item whose prediction is a copy of its truth


# --------------------------------------------------------------------------- data


@pytest.fixture(scope="module")
def qm9():
    X, graphs, smiles = load_demo(return_smiles=True)
    return X, graphs, smiles


@pytest.fixture(scope="module")
def pairs(qm9):
    """(predicted, truth): truth = QM9 graphs 0..N-1 with their SMILES; predictions = others."""
    _, graphs, smiles = qm9
    truth = []
    for i in range(N):
        g = graphs[i].copy()
        g.graph["smiles"] = smiles[i]
        truth.append(g)
    pred = [graphs[100 + i].copy() for i in range(N)]
    pred[EXACT] = nx.relabel_nodes(
        truth[EXACT], {v: f"n{v}" for v in truth[EXACT]}
    )  # same graph, new names
    pred[EXACT].graph.clear()
    return pred, truth


@pytest.fixture(scope="module")
def ranked(qm9, pairs):
    """Candidate lists for the even items only: the truth is second."""
    _, graphs, _ = qm9
    _, truth = pairs
    return {
        i: [
            RankedCandidate(graphs[200 + i], 17, 0.9),
            RankedCandidate(truth[i].copy(), 4, 0.7),
            RankedCandidate(graphs[300 + i], 8, 0.1),
        ]
        for i in range(0, N, 2)
    }


@pytest.fixture(scope="module")
def summary(pairs):
    pred, truth = pairs
    return summarize(pred, truth)


TRAIN = slice(1000, 1040)  # the small pages' "training" graphs: 40 other QM9 molecules


def leaned(i: int) -> tuple[np.ndarray, np.ndarray]:
    """Item i leaned on training graphs i, i + 10, i + 20 (of TRAIN) with weights 0.6, 0.3, 0.1."""
    return np.array([i, i + 10, i + 20]), np.array([0.6, 0.3, 0.1])


@pytest.fixture(scope="module")
def training(qm9):
    X, graphs, smiles = qm9
    train = [g.copy() for g in graphs[TRAIN]]
    for g, s in zip(train[::2], smiles[TRAIN][::2]):  # half of them with their SMILES
        g.graph["smiles"] = s
    return X[TRAIN], train


@pytest.fixture(scope="module")
def report_file(tmp_path_factory, qm9, pairs, ranked, summary, training):
    X, _, _ = qm9
    pred, truth = pairs
    X_train, train = training
    path = tmp_path_factory.mktemp("report") / "report.html"
    write_report(
        path,
        pred,
        truth,
        ranked=ranked,
        summary=summary,
        training_graphs=train,
        leaned_on=[leaned(i) for i in range(N)],
        inputs=X[:N],
        training_inputs=X_train,
        input_grid=wavenumber_grid(),
        input_name="IR spectrum",
        drawings=4,
        top_k=3,
        title="test report",
    )
    return path


class Page(HTMLParser):
    """Tags, attributes and text of a page (Python's html.parser)."""

    def __init__(self, text: str) -> None:
        super().__init__()
        self.tags: list[tuple[str, dict]] = []
        self.text: list[str] = []
        self.headings: list[str] = []  # of the items table
        self.rows: list[list] = []  # value of each cell of each item row (data-v, else its text)
        self._in_th = False
        self._cell: list | None = None  # [data-v or None, text] of the open cell
        self.feed(text)

    def handle_starttag(self, tag, attrs):
        attrs = dict(attrs)
        self.tags.append((tag, attrs))
        if tag == "th":
            self._in_th = True
            self.headings.append("")
        elif tag == "tr" and "data-index" in attrs:
            self.rows.append([])
        elif tag == "td" and self.rows:
            self._cell = [attrs.get("data-v"), ""]

    def handle_endtag(self, tag):
        if tag == "th":
            self._in_th = False
        elif tag == "td" and self._cell is not None:
            value, text = self._cell
            self.rows[-1].append(text.strip() if value is None else value)
            self._cell = None

    def handle_data(self, data):
        self.text.append(data)
        if self._in_th:
            self.headings[-1] += data.strip()
        if self._cell is not None:
            self._cell[1] += data

    def column(self, name: str) -> list:
        k = self.headings.index(name)
        return [row[k] for row in self.rows]

    def count(self, tag: str, **attrs) -> int:
        return sum(
            1
            for t, a in self.tags
            if t == tag and all(a.get(k) == v for k, v in attrs.items())
        )


# --------------------------------------------------------------------------- the page itself


def test_page_is_self_contained(report_file):
    page = Page(report_file.read_text(encoding="utf-8"))
    for tag, attrs in page.tags:
        assert tag not in ("link", "iframe", "img", "object", "embed"), tag
        if tag == "script":
            assert "src" not in attrs
        if tag == "a" and "href" in attrs:
            assert attrs["href"].startswith("#"), attrs["href"]
        for key in ("src", "xlink:href"):
            assert not attrs.get(key, "#").startswith(("http", "//")), attrs
    ids = Counter(a["id"] for _, a in page.tags if "id" in a)
    assert [k for k, c in ids.items() if c > 1] == []  # SVGs of one page share no ids
    assert (
        page.count("svg") >= 4 * 3
    )  # alignment + two RDKit depictions + candidates per drawn item


def test_page_table_and_caution(report_file, pairs, summary):
    _, truth = pairs
    text = report_file.read_text(encoding="utf-8")
    page = Page(text)
    rows = [a for t, a in page.tags if t == "tr" and "data-index" in a]
    assert [int(a["data-index"]) for a in rows] == list(range(N))
    assert CAUTION in "".join(page.text)  # node labels are element symbols
    # only the drawn items get a panel (the others are table rows: a small page)
    assert page.count("section", **{"class": "item"}) == 4
    assert [a["id"] for t, a in page.tags if t == "section"] == [f"item-{i}" for i in range(4)]
    assert text.count("No drawings: only the first 4 items are drawn") == 1  # said once
    links = [a["href"] for t, a in page.tags if t == "a" and a.get("href", "").startswith("#item-")]
    assert links == [f"#item-{i}" for i in range(4)]  # no link to a panel that does not exist
    # the GED column holds the summary's values
    assert [float(v) for v in page.column("GED")] == [
        it["ged"] for it in summary["items"]
    ]
    assert page.column("exact match") == ["yes" if i == EXACT else "no" for i in range(N)]
    assert [int(v) for v in page.column("true nodes")] == [
        g.number_of_nodes() for g in truth
    ]


def test_page_smiles_are_the_molecules(report_file, pairs):
    # RDKit parses the SMILES shown for each true graph and finds its heavy atoms
    Chem = pytest.importorskip("rdkit.Chem")
    _, truth = pairs
    text = report_file.read_text(encoding="utf-8")
    for g in truth:
        assert g.graph["smiles"] in text
        mol = Chem.MolFromSmiles(g.graph["smiles"])
        assert Counter(a.GetSymbol() for a in mol.GetAtoms()) == Counter(
            lab for _, lab in g.nodes(data="label")
        )
    # RDKit's SVG depictions are inlined (its writer marks the end of its header)
    assert text.count("<!-- END OF HEADER -->") >= 2 * 4


def test_page_ranks_are_known(report_file):
    text = report_file.read_text(encoding="utf-8")
    page = Page(text)
    assert page.column("truth at rank") == [
        "2" if i % 2 == 0 else "inf" for i in range(N)
    ]
    assert "truth in top 1 (4 lists)" in text and "truth in top 5 (4 lists)" in text
    assert "= truth" in text  # the second candidate of a drawn item is marked


def test_report_without_truth_and_without_molecules():
    g1 = nx.Graph([("a", "b", {"kind": "x"}), ("b", "c", {"kind": "y"})])
    nx.set_node_attributes(g1, {"a": "P1", "b": "P2", "c": "P1"}, "part")
    g2 = nx.path_graph(4)
    nx.set_node_attributes(g2, "P3", "part")
    text = build_report([g1, g2], node_label="part", edge_label="kind", title="parts")
    page = Page(text)
    assert CAUTION not in text  # not element symbols
    assert len([a for t, a in page.tags if t == "tr" and "data-index" in a]) == 2
    heads = [d.strip() for d in page.text]
    assert "GED" not in heads and "predicted nodes" in heads
    assert (
        "P1" in heads and "edge x" in heads
    )  # matplotlib text kept as text in the SVG
    assert not is_molecular([g1], "part")
    assert not is_molecular([nx.path_graph(2)], "missing")


def test_molecules_without_rdkit_or_without_bond_orders(pairs, monkeypatch):
    from gwpred import report

    pred, truth = pairs
    text = build_report(pred[:2], truth[:2], edge_label=None, drawings=1)
    assert CAUTION in text and "bond orders are unknown" in text
    assert (
        "END OF HEADER" not in text and "valid molecule" not in text
    )  # no RDKit output
    # heavy-atom formulas only (Hill order: C first, then alphabetical; for C, F, N, O that
    # is alphabetical), and no SDF (no bond orders)
    counts = [sorted(Counter(lab for _, lab in g.nodes(data="label")).items()) for g in truth[:2]]
    hill = ["".join(s + (str(n) if n > 1 else "") for s, n in c) for c in counts]
    assert Page(text).column("true formula") == hill
    assert 'id="download-sdf"' not in text and 'id="download-csv"' in text
    monkeypatch.setattr(report, "has_extra", lambda name: False)
    text = build_report(pred[:2], truth[:2], drawings=1)
    assert (
        CAUTION in text
        and "install RDKit (pip install 'gwpred[chem]')" in html.unescape(text)
    )
    assert (
        "END OF HEADER" not in text and Page(text).count("svg") >= 2
    )  # matplotlib drawings
    # formulas with hydrogens need no RDKit (RDKit's own formula of the SMILES agrees);
    # the SDF download is there, its atoms at 0, 0 (no 2D layout without RDKit)
    rdMolDescriptors = pytest.importorskip("rdkit.Chem.rdMolDescriptors")
    Chem = pytest.importorskip("rdkit.Chem")
    page = Page(text)
    assert "true SMILES" not in page.headings
    assert page.column("true formula") == [
        rdMolDescriptors.CalcMolFormula(Chem.MolFromSmiles(g.graph["smiles"])) for g in truth[:2]
    ]
    data = json.loads(text.split('id="gwpred-data">')[1].split("</script>")[0])
    assert [m[0] for m in data["mols"]] == [0, 1] and all(m[3] == "" for m in data["mols"])
    assert 'id="download-sdf"' in text


def test_report_with_barycenters(qm9):
    X, graphs, _ = qm9
    train = list(range(0, 3000, 50))
    model = BarycenterGraphPredictor(n_neighbors=3, alpha=0.5, random_state=0).fit(
        X[train], [graphs[i] for i in train]
    )
    test = [25, 625]
    pred = model.predict(X[test])
    soft = model.predict_barycenters(X[test])
    text = build_report(
        pred,
        [graphs[i] for i in test],
        barycenters=soft,
        training_graphs=[graphs[i] for i in train],
        label_names=list(model.labels_.node_labels_),
    )
    assert text.count("Soft barycenter before decoding") == 2
    assert text.count("The training graphs this prediction leaned on") == 2
    for s in soft:  # the captions name the training graphs with the largest weights
        j = int(s.neighbors[np.argmax(s.weights)])
        assert f"training #{j}" in text


def wl_features(g: nx.Graph) -> Counter:
    """Weisfeiler-Lehman subtree features (round, colour) with counts, from networkx's hashes:
    node labels and the multiset of (edge label, neighbour colour), 3 rounds."""
    per_node = nx.weisfeiler_lehman_subgraph_hashes(
        g, edge_attr="label", node_attr="label", iterations=3, include_initial_labels=True
    )
    return Counter((t, h) for hashes in per_node.values() for t, h in enumerate(hashes))


def wl_cosine(a: Counter, b: Counter) -> float:
    dot = sum(a[f] * b[f] for f in a.keys() & b.keys())
    return dot / np.sqrt(sum(v * v for v in a.values()) * sum(v * v for v in b.values()))


def test_page_ids_formulas_and_confidence(report_file, pairs, training):
    Chem = pytest.importorskip("rdkit.Chem")
    rdMolDescriptors = pytest.importorskip("rdkit.Chem.rdMolDescriptors")
    pred, truth = pairs
    _, train = training
    page = Page(report_file.read_text(encoding="utf-8"))
    # the id of each item: its predicted graph's, else its true graph's (load_demo names them)
    assert page.column("id") == [p.graph.get("id") or t.graph["id"] for p, t in zip(pred, truth)]
    # formulas with implicit hydrogens: RDKit's for the SMILES shown
    for name, smiles in (("true formula", "true SMILES"), ("predicted formula", "predicted SMILES")):
        assert page.column(name) == [
            rdMolDescriptors.CalcMolFormula(Chem.MolFromSmiles(s)) for s in page.column(smiles)
        ]
    # confidence: sum_j w_j k(prediction, training graph j), k the cosine of the WL feature
    # counts (networkx's WL hashes)
    shown = [float(v) for v in page.column("confidence")]
    for i, value in enumerate(shown):
        idx, w = leaned(i)
        ref = float(np.dot(w, [wl_cosine(wl_features(pred[i]), wl_features(train[j])) for j in idx]))
        assert value == pytest.approx(ref, abs=5e-4)
        assert 0 <= value <= 1
    text = report_file.read_text(encoding="utf-8")
    assert "not a calibrated probability" in text  # the key says what the column is


def test_confidence_of_a_prediction_all_neighbours_share(pairs, training):
    pred, truth = pairs
    _, train = training
    # every neighbour is the predicted molecule (renumbered): full agreement
    same = [nx.relabel_nodes(pred[0], {v: 10 + k for k, v in enumerate(pred[0])}) for _ in range(3)]
    # model.neighbors(X) as returned (2-D arrays, zero weights where fewer were kept) works too
    idx, w = np.array([[0, 1, 2, 0]]), np.array([[0.5, 0.25, 0.25, 0.0]])
    page = Page(build_report(pred[:1], truth[:1], training_graphs=same, leaned_on=(idx, w), drawings=0))
    assert page.column("confidence") == ["1.000"]
    # without leaned_on, the barycenters' neighbours and weights are used: same column
    soft = SimpleNamespace(structure=np.eye(2), node_scores=np.eye(2), neighbors=idx[0, :3], weights=w[0, :3])
    page = Page(build_report(pred[:1], truth[:1], training_graphs=same, barycenters=[soft], drawings=0))
    assert page.column("confidence") == ["1.000"]
    # and no confidence column without the training graphs
    page = Page(build_report(pred[:1], truth[:1], leaned_on=(idx, w), drawings=0))
    assert "confidence" not in page.headings


def test_panels_show_inputs_and_named_neighbours(report_file, training):
    _, train = training
    text = report_file.read_text(encoding="utf-8")
    page = Page(text)
    # a spectrum overlay per drawn item, naming the 3 training items with the largest weights
    assert text.count("The IR spectrum of item") == 4
    for i in range(4):
        idx, _ = leaned(i)
        for j in idx:
            assert f"training #{j} · {train[j].graph['id']}" in text
    # neighbours: id and SMILES under each drawing (given or from RDKit), with the index
    assert text.count("The training graphs this prediction leaned on") == 4
    names = [d for d in page.text if d.startswith("training #")]
    assert "training #0" in names and train[0].graph["smiles"] in page.text
    assert train[0].graph["id"] in page.text


def test_overlay_of_sparse_bits(qm9, pairs, training):
    # fingerprint-like inputs: uint8 0/1 rows, the training inputs a scipy sparse matrix
    sparse = pytest.importorskip("scipy.sparse")
    X, _, _ = qm9
    pred, truth = pairs
    _, train = training
    bits = (X[:40] > 0.05).astype(np.uint8)
    text = build_report(
        pred[:1], truth[:1], training_graphs=train, leaned_on=[leaned(0)], inputs=bits[:1],
        training_inputs=sparse.csr_matrix(bits), input_name="fingerprint", drawings=1,
    )
    assert "The fingerprint of item 0 over those of the 3 training items" in text


def test_candidate_names(pairs, ranked):
    # names of ranked candidates: graph["id"] (as SDF titles are read), else graph["name"]
    pred, truth = pairs
    named = {}
    for row, cands in ranked.items():
        first = cands[0].graph.copy()
        first.graph.clear()
        first.graph["id" if row % 4 == 0 else "name"] = f"cand-{row}"
        named[row] = [RankedCandidate(first, 17, 0.9), *cands[1:]]
    text = build_report(pred, truth, ranked=named, drawings=N, top_k=1)
    page = Page(text)
    assert page.column("top candidate") == [f"cand-{i}" if i % 2 == 0 else "" for i in range(N)]
    for row in named:
        assert f"candidate #1 cand-{row}, score 0.9" in text


# --------------------------------------------------------------------------- the demo page


@pytest.fixture(scope="module")
def demo_page(qm9):
    """The demo's page for a model fitted on the first 2700 demo molecules, predicting the last 300.

    Built as ``gwpred demo`` builds it: 8 items drawn in full with their barycenters, every
    item with the training graphs it leaned on and its spectrum.
    """
    X, graphs, smiles = qm9
    train, test = slice(0, 2700), slice(2700, 3000)
    model = BarycenterGraphPredictor(random_state=0).fit(X[train], graphs[train])
    pred = model.predict(X[test])
    truth = [g.copy() for g in graphs[test]]
    for g, s in zip(truth, smiles[test]):
        g.graph["smiles"] = s
    summary = summarize(pred, truth)
    idx, w = model.neighbors(X[test])
    page = build_report(
        pred,
        truth,
        summary=summary,
        barycenters=model.predict_barycenters(X[test][:8]),
        training_graphs=graphs[train],
        label_names=list(model.labels_.node_labels_),
        leaned_on=list(zip(idx, w)),
        inputs=X[test],
        training_inputs=X[train],
        input_grid=wavenumber_grid(),
        input_name="IR spectrum (computed)",
        drawings=8,
    )
    return page, summary


def test_demo_page_size(demo_page):
    page, _ = demo_page
    parsed = Page(page)
    assert len(parsed.rows) == 300
    assert page.count("Soft barycenter before decoding") == 8
    assert page.count("The IR spectrum (computed) of item") == 8
    # 300 items, 8 of them drawn in full: well under the 1.4 MB of full panels for all
    assert len(page.encode("utf-8")) < 600_000


def test_confidence_follows_ged_on_demo(demo_page):
    # on the bundled QM9 subset (real data), items whose neighbours agree with the
    # prediction are predicted better: confidence and GED are negatively rank-correlated
    spearmanr = pytest.importorskip("scipy.stats").spearmanr
    page, summary = demo_page
    parsed = Page(page)
    confidence = [float(v) for v in parsed.column("confidence")]
    geds = [it["ged"] for it in summary["items"]]
    assert [float(v) for v in parsed.column("GED")] == geds
    assert spearmanr(confidence, geds).statistic < 0


# --------------------------------------------------------------------------- errors


def test_build_report_errors(pairs, summary):
    pred, truth = pairs
    g = pred[0]
    with pytest.raises(
        ValueError, match="there are 2 predicted graphs but 1 true graphs"
    ):
        build_report([g, g], [g])
    with pytest.raises(ValueError, match="there are no predicted graphs"):
        build_report([], [])
    with pytest.raises(TypeError, match="predicted must be a list of networkx.Graph"):
        build_report(g)
    with pytest.raises(TypeError, match=r"true\[1\] must be a networkx.Graph"):
        build_report([g, g], [g, "C"])
    with pytest.raises(ValueError, match="limit must be an int >= 1, got 0"):
        build_report([g], limit=0)
    with pytest.raises(ValueError, match="drawings must be an int >= 0, got -1"):
        build_report([g], drawings=-1)
    with pytest.raises(ValueError, match="top_k must be an int >= 0"):
        build_report([g], top_k=-2)
    with pytest.raises(
        ValueError, match="ranked has a list for row 5, but there are 2 predictions"
    ):
        build_report([g, g], ranked={5: [g]})
    with pytest.raises(ValueError, match="ranked holds 1 lists for 2 predictions"):
        build_report([g, g], ranked=[[g]])
    with pytest.raises(TypeError, match="ranked must be a dict row -> list"):
        build_report([g], ranked="cands.jsonl")
    with pytest.raises(
        TypeError, match=r"ranked\[0\]\[0\] must be a networkx.Graph or RankedCandidate"
    ):
        build_report([g], ranked={0: ["C"]})
    with pytest.raises(
        ValueError,
        match="summary must be gwpred.metrics.summarize's result for these 2 items",
    ):
        build_report(pred[:2], truth[:2], summary=summary)
    with pytest.raises(ValueError, match="barycenters has 2 entries for 1 predictions"):
        build_report([g], barycenters=[None, None])
    with pytest.raises(TypeError, match=r"barycenters\[0\] must be a SoftGraph"):
        build_report([g], barycenters=[np.eye(2)])


@pytest.mark.parametrize(
    "kwargs, error, message",
    [
        ({"leaned_on": "neighbours.npy"}, TypeError, "leaned_on must be a list of (indices, weights) pairs"),
        ({"leaned_on": np.zeros((1, 2))}, TypeError, "leaned_on must be a list of (indices, weights) pairs"),
        ({"leaned_on": [None, None]}, ValueError, "leaned_on has 2 entries for 1 predictions"),
        ({"leaned_on": [([0],)]}, ValueError, "leaned_on[0] must be a pair (indices, weights) of 1-D arrays, got"),
        ({"leaned_on": [([0, 1], [1.0])]}, ValueError, "of the same length, got shapes (2,) and (1,)"),
        ({"leaned_on": [([0.0], [1.0])]}, ValueError, "leaned_on[0] holds indices of dtype float64"),
        ({"leaned_on": [([0], [np.nan])]}, ValueError, "weights that are not finite non-negative numbers"),
        ({"leaned_on": [([0], [-1.0])]}, ValueError, "weights that are not finite non-negative numbers"),
        ({"leaned_on": [([5], [1.0])]}, ValueError, "leaned_on[0] points to training graph 5, but training_graphs has 2"),
        ({"input_name": 3}, TypeError, "input_name must be a str"),
        ({"inputs": np.zeros(3)}, ValueError, "inputs must be a 2-D array of shape (n_items, n_features), got shape (3,)"),
        ({"inputs": np.zeros((3, 2))}, ValueError, "inputs has 3 rows for 1 predictions"),
        ({"inputs": np.zeros((1, 2)), "training_inputs": 7}, TypeError, "training_inputs must be indexable"),
        ({"inputs": np.zeros((1, 2)), "input_grid": [1.0]}, ValueError, "input_grid must hold 2 finite numbers"),
        ({"inputs": np.zeros((1, 2)), "input_grid": ["a", "b"]}, ValueError, "input_grid must hold 2 finite numbers"),
        ({"inputs": [["a", "b"]]}, ValueError, "inputs[0] is not a vector of numbers"),
        ({"inputs": [[np.inf, 0]]}, ValueError, "inputs[0] must hold 2 finite numbers"),
        ({"inputs": np.zeros((1, 2)), "training_inputs": np.zeros((1, 2))}, ValueError, "training_inputs has no row 1"),
        ({"inputs": np.zeros((1, 2)), "training_inputs": np.zeros((2, 3))}, ValueError,
         "training_inputs[1] must hold 2 finite numbers (as many as the inputs have columns), got 3 values"),
    ],
)
def test_leaned_on_and_inputs_errors(pairs, kwargs, error, message):
    pred, _ = pairs
    kwargs = {"training_graphs": pred[:2], **kwargs}
    if "inputs" in kwargs and "leaned_on" not in kwargs:
        kwargs["leaned_on"] = [([1, 0], [0.7, 0.3])]
    with pytest.raises(error, match=re.escape(message)):
        build_report(pred[:1], drawings=1, **kwargs)


def test_barycenter_pointing_outside_the_training_graphs(qm9):
    X, graphs, _ = qm9
    model = BarycenterGraphPredictor(n_neighbors=2, random_state=0).fit(X[:20], graphs[:20])
    soft = model.predict_barycenters(X[30:31])
    with pytest.raises(
        ValueError, match="points to training graph .* but training_graphs has 1"
    ):
        build_report([graphs[30]], barycenters=soft, training_graphs=graphs[:1])


def test_write_report_errors(tmp_path, pairs):
    pred, truth = pairs
    with pytest.raises(ValueError, match=r"name it with \.html"):
        write_report(tmp_path / "r.txt", pred[:1], truth[:1])
    with pytest.raises(FileNotFoundError, match="does not exist; create it first"):
        write_report(tmp_path / "no" / "r.html", pred[:1], truth[:1])
    out = write_report(tmp_path / "r.html", pred[:1], truth[:1])
    assert out.read_text(encoding="utf-8").startswith("<!DOCTYPE html>")
    assert [p.name for p in tmp_path.iterdir()] == ["r.html"]  # no temporary file left


def write_lines(path: Path, lines: list) -> Path:
    path.write_text(
        "\n".join(x if isinstance(x, str) else json.dumps(x) for x in lines) + "\n",
        encoding="utf-8",
    )
    return path


def node_link(g: nx.Graph) -> dict:
    return nx.node_link_data(g, edges="edges")  # networkx's node-link format


def test_read_ranked(tmp_path, pairs):
    pred, _ = pairs
    path = write_lines(
        tmp_path / "r.jsonl",
        [
            {
                "row": 1,
                "ranked": [
                    {"candidate": 3, "score": 0.5, "graph": node_link(pred[0])},
                    {"graph": node_link(pred[1])},
                ],
            },
            "",
            {"row": 0, "ranked": []},
        ],
    )
    got = read_ranked(path)
    assert sorted(got) == [0, 1] and got[0] == []
    first, second = got[1]
    assert (first.candidate, first.score, second.candidate, second.score) == (
        3,
        0.5,
        None,
        None,
    )
    assert nx.utils.graphs_equal(first.graph, pred[0])


@pytest.mark.parametrize(
    "line, message",
    [
        ("{not json", "malformed JSON"),
        ({"ranked": []}, 'expected an object {"row": i, "ranked"'),
        ({"row": -1, "ranked": []}, "row must be an int >= 0"),
        ({"row": "0", "ranked": []}, "row must be an int >= 0"),
        ({"row": 0, "ranked": {}}, "ranked must be a list of candidates"),
        ({"row": 0, "ranked": [{"score": 1}]}, 'expected an object with a "graph"'),
        (
            {
                "row": 0,
                "ranked": [{"score": "high", "graph": {"nodes": [], "edges": []}}],
            },
            "score must be a number",
        ),
        (
            {
                "row": 0,
                "ranked": [{"candidate": 1.5, "graph": {"nodes": [], "edges": []}}],
            },
            "candidate must be an int",
        ),
        (
            {"row": 0, "ranked": [{"graph": {"edges": []}}]},
            "node-link record has no 'nodes' list",
        ),
    ],
)
def test_read_ranked_errors(tmp_path, line, message):
    with pytest.raises(
        ValueError, match=message.replace("(", r"\(").replace("{", r"\{")
    ):
        read_ranked(write_lines(tmp_path / "bad.jsonl", [line]))


def test_reads_what_gwpred_rank_writes(tmp_path, qm9):
    # the file format of gwpred.io.write_ranked (the ``gwpred rank`` command)
    gio = pytest.importorskip("gwpred.io")
    _, graphs, _ = qm9
    path = tmp_path / "ranked.jsonl"
    gio.write_ranked(path, [[(1, 0.5), (0, 0.25)], [(2, 0.75)]], graphs[:3])
    got = read_ranked(path)
    assert [(c.candidate, c.score) for c in got[0]] == [(1, 0.5), (0, 0.25)]
    assert nx.utils.graphs_equal(got[1][0].graph, graphs[2])


def test_read_ranked_duplicate_and_missing(tmp_path):
    with pytest.raises(ValueError, match="row 0 appears twice"):
        read_ranked(
            write_lines(
                tmp_path / "d.jsonl",
                [{"row": 0, "ranked": []}, {"row": 0, "ranked": []}],
            )
        )
    with pytest.raises(FileNotFoundError, match="does not exist"):
        read_ranked(tmp_path / "none.jsonl")


# --------------------------------------------------------------------------- command line


def run(capsys, *argv):
    code = main([str(a) for a in argv])
    out, err = capsys.readouterr()
    return code, out, err


@pytest.fixture(scope="module")
def files(tmp_path_factory, pairs, ranked):
    pred, truth = pairs
    d = tmp_path_factory.mktemp("cli")
    write_graphs(d / "pred.jsonl", pred)
    write_graphs(d / "truth.jsonl", truth)
    lines = [
        {
            "row": i,
            "ranked": [
                {
                    "candidate": c.candidate,
                    "score": c.score,
                    "graph": node_link(c.graph),
                }
                for c in cands
            ],
        }
        for i, cands in ranked.items()
    ]
    write_lines(d / "ranked.jsonl", lines)
    return d


def test_cli_report(capsys, files):
    out_file = files / "page.html"
    code, out, err = run(
        capsys,
        "report",
        files / "pred.jsonl",
        "--truth",
        files / "truth.jsonl",
        "--ranked",
        files / "ranked.jsonl",
        "--out",
        out_file,
        "--drawings",
        "2",
        "--top-k",
        "2",
        "--title",
        "CLI page",
        "-q",
    )
    assert code == 0, err
    assert f"report on {N} items written to {out_file}" in out
    assert err.strip().splitlines()[-1] == CAUTION  # on stderr: stdout stays clean
    text = out_file.read_text(encoding="utf-8")
    assert (
        "<title>CLI page</title>" in text
        and "ranked candidate lists for 4 items" in text
    )
    # the entry point other code relies on: predictions and --out only
    code, out, err = run(
        capsys,
        "report",
        files / "pred.jsonl",
        "--out",
        files / "bare.html",
        "--limit",
        "3",
        "-q",
    )
    assert code == 0, err
    assert "report on 3 items" in out and (files / "bare.html").exists()


def test_cli_report_help(capsys):
    with pytest.raises(SystemExit) as exc:
        main(["report", "--help"])
    assert exc.value.code == 0
    out = capsys.readouterr().out
    for opt in (
        "predictions",
        "--truth",
        "--out",
        "--ranked",
        "--title",
        "--time-limit",
        "--limit",
        "--drawings",
        "--top-k",
        "--node-label",
        "--quiet",
    ):
        assert opt in out, opt


@pytest.mark.parametrize(
    "extra, message",
    [
        (["--out", "page.txt"], "--out must name an HTML file ending in .html"),
        (
            ["--out", "pred.jsonl"],
            "--out must name an HTML file",
        ),  # never overwrites an input
        (["--out", "p.html", "--limit", "0"], "--limit must be at least 1; got 0"),
        (
            ["--out", "p.html", "--drawings", "-1"],
            "--drawings must be at least 0; got -1",
        ),
        (["--out", "p.html", "--truth", "short.jsonl"], "holds 8 graphs but"),
        (["--out", "p.html", "--ranked", "far.jsonl"], "ranked has a list for row 40"),
        (["--out", "missing/p.html"], "does not exist; create it first"),
    ],
)
def test_cli_report_errors(capsys, files, extra, message, pairs, monkeypatch):
    monkeypatch.chdir(files)
    write_graphs(files / "short.jsonl", pairs[1][:2])
    write_lines(files / "far.jsonl", [{"row": 40, "ranked": []}])
    code, _, err = run(capsys, "report", "pred.jsonl", *extra, "-q")
    assert code == 2
    assert message in err


# --------------------------------------------------------------------------- in a browser


@pytest.fixture(scope="module")
def browser():
    missing = [p for p in (CHROMIUM, CHROMEDRIVER) if not os.path.exists(p)]
    try:
        from selenium import webdriver
        from selenium.webdriver.chrome.service import Service
    except ImportError:
        missing.append("the Python package selenium (pip install -e '.[test]')")
    if missing:
        reason = (
            f"headless browser tests need {', '.join(missing)}: install the Debian packages chromium and "
            "chromium-driver (.ci/run does)"
        )
        if os.environ.get("CI"):
            pytest.fail(reason)
        pytest.skip(reason)
    profile = tempfile.mkdtemp(prefix="gwpred-chromium-")
    options = webdriver.ChromeOptions()
    options.binary_location = CHROMIUM
    for flag in (
        "--headless",
        "--no-sandbox",
        "--disable-gpu",
        "--disable-quic",
        "--no-first-run",
        "--disable-background-networking",
        "--disable-component-update",
        "--disable-sync",
        f"--user-data-dir={profile}",
        "--window-size=1280,1600",
        "--hide-scrollbars",
    ):
        options.add_argument(flag)
    driver = webdriver.Chrome(service=Service(CHROMEDRIVER), options=options)
    driver.set_page_load_timeout(60)
    try:
        yield driver
    finally:
        driver.quit()
        shutil.rmtree(profile, ignore_errors=True)


def column(driver, name: str) -> list[float]:
    """The column's numbers in the order shown: data-v, else the text (yes 1, no 0)."""
    return driver.execute_script(
        """
        var heads = Array.from(document.querySelectorAll('#items thead th'));
        var col = heads.map(function (h) { return h.textContent.trim(); }).indexOf(arguments[0]);
        return Array.from(document.querySelectorAll('#items tbody tr')).map(function (r) {
            var c = r.cells[col], v = c.getAttribute('data-v');
            if (v === null) v = c.textContent.trim();
            return v === 'yes' ? 1 : v === 'no' ? 0 : parseFloat(v); });
        """,
        name,
    )


def click_heading(driver, name: str) -> None:
    from selenium.webdriver.common.by import By

    driver.find_element(
        By.XPATH, f"//table[@id='items']//th/button[normalize-space()='{name}']"
    ).click()


def screenshot_is_drawn(png: bytes) -> tuple[int, float]:
    import matplotlib.image

    img = matplotlib.image.imread(io.BytesIO(png))[..., :3]
    colours = len(np.unique((img * 255).astype(np.uint8).reshape(-1, 3), axis=0))
    non_white = float((img.min(-1) < 0.95).mean())
    return colours, non_white


def test_report_in_browser(browser, report_file, summary):
    from selenium.webdriver.common.by import By

    browser.get(report_file.as_uri())
    rows = browser.find_elements(By.CSS_SELECTOR, "#items tbody tr")
    assert len(rows) == N
    # nothing was fetched: the Resource Timing API lists no requests besides the page
    assert (
        browser.execute_script("return performance.getEntriesByType('resource').length")
        == 0
    )
    # every inline drawing has a size on the page
    sizes = browser.execute_script(
        "return Array.from(document.querySelectorAll('svg')).map(function (s) {"
        " var r = s.getBoundingClientRect(); return r.width * r.height; });"
    )
    assert len(sizes) >= 12 and min(sizes) > 100

    geds = [it["ged"] for it in summary["items"]]
    assert column(browser, "GED") == geds  # file order first
    click_heading(browser, "GED")
    assert column(browser, "GED") == sorted(geds)
    click_heading(browser, "GED")
    assert column(browser, "GED") == sorted(geds, reverse=True)
    click_heading(browser, "true nodes")
    sizes = column(browser, "true nodes")
    assert sizes == sorted(sizes) and len(sizes) == N
    click_heading(browser, "exact match")
    click_heading(browser, "exact match")  # descending: the exact match first
    assert column(browser, "#")[0] == EXACT
    assert column(browser, "exact match") == [1.0] + [0.0] * (N - 1)

    # a row's number jumps to its panel
    browser.find_element(By.CSS_SELECTOR, f"#items a[href='#item-{EXACT}']").click()
    assert browser.execute_script("return location.hash") == f"#item-{EXACT}"

    browser.execute_script("window.scrollTo(0, 0)")
    colours, non_white = screenshot_is_drawn(browser.get_screenshot_as_png())
    assert colours > 50 and non_white > 0.05


def shown_rows(driver) -> list[int]:
    """Item numbers of the rows the table shows, in their order."""
    return driver.execute_script(
        "return Array.from(document.querySelectorAll('#items tbody tr'))"
        ".filter(function (r) { return r.getClientRects().length > 0; })"
        ".map(function (r) { return parseInt(r.dataset.index, 10); });"
    )


def download(driver, button: str) -> str:
    """Click a download button; the text of the file it makes (the Blob handed to the link)."""
    from selenium.webdriver.common.by import By

    driver.execute_cdp_cmd("Browser.setDownloadBehavior", {"behavior": "deny"})  # no file on disk
    driver.execute_script(
        "window.gwBlobs = []; if (!window.gwMake) { window.gwMake = URL.createObjectURL; }"
        "URL.createObjectURL = function (b) { window.gwBlobs.push(b); return window.gwMake.call(URL, b); };"
    )
    driver.find_element(By.ID, button).click()
    return driver.execute_async_script(
        "var done = arguments[arguments.length - 1];"
        "if (window.gwBlobs.length !== 1) { done(null); } else { window.gwBlobs[0].text().then(done); }"
    )


@pytest.fixture(scope="module")
def filter_page(tmp_path_factory, pairs, training):
    """The small page, with an odd id (comma, quotes) and one invalid prediction; its summary."""
    pred, truth = pairs
    _, train = training
    pred = [g.copy() for g in pred]
    pred[1].graph["id"] = 'sample "1", batch 2'
    star = nx.star_graph(5)  # a carbon with five carbon neighbours: not a molecule
    nx.set_node_attributes(star, "C", "label")
    nx.set_edge_attributes(star, 1, "label")
    pred[5] = star
    path = tmp_path_factory.mktemp("filter") / "filter.html"
    summary = summarize(pred, truth)
    write_report(
        path, pred, truth, summary=summary, training_graphs=train, leaned_on=[leaned(i) for i in range(N)],
        drawings=0,
    )
    return path, pred, summary


def test_filter_in_browser(browser, filter_page):
    from selenium.webdriver.common.by import By

    path, _, summary = filter_page
    page = Page(path.read_text(encoding="utf-8"))
    browser.get(path.as_uri())
    count = browser.find_element(By.ID, "filter-count")
    assert shown_rows(browser) == list(range(N)) and count.text == f"{N} of {N} items shown"
    # words: every one must occur in the item number, id, formula or SMILES
    box = browser.find_element(By.ID, "filter-text")
    searched = [
        " ".join(page.column(c)[i] for c in ("#", "id", "predicted formula", "true formula",
                                             "predicted SMILES", "true SMILES")).lower()
        for i in range(N)
    ]
    smiles = page.column("true SMILES")[2]
    box.send_keys(smiles)
    expected = [i for i in range(N) if smiles.lower() in searched[i]]
    assert 2 in expected and shown_rows(browser) == expected
    assert count.text == f"{len(expected)} of {N} items shown"
    box.clear()
    box.send_keys("batch 2")  # the id of item 1
    assert shown_rows(browser) == [1]
    box.clear()
    box.send_keys(" ")
    assert shown_rows(browser) == list(range(N))
    # largest GED
    geds = [it["ged"] for it in summary["items"]]
    limit = sorted(geds)[N // 2]
    browser.find_element(By.ID, "filter-ged").send_keys(str(int(limit)))
    assert shown_rows(browser) == [i for i in range(N) if geds[i] <= limit]
    browser.find_element(By.ID, "filter-ged").clear()
    # invalid molecules only: the five-valent carbon
    browser.find_element(By.ID, "filter-invalid").click()
    assert shown_rows(browser) == [5] and page.column("valid molecule")[5] == "no"
    browser.find_element(By.ID, "filter-invalid").click()
    assert shown_rows(browser) == list(range(N))


def test_csv_download_in_browser(browser, filter_page):
    from selenium.webdriver.common.by import By

    path, pred, summary = filter_page
    page = Page(path.read_text(encoding="utf-8"))
    browser.get(path.as_uri())
    text = download(browser, "download-csv")
    rows = list(csv.reader(io.StringIO(text)))  # Python's csv module reads what the page wrote
    head, body = rows[0], rows[1:]
    assert head == ["index", "id", "confidence", "ged", "exact_match", "valid", "formula", "true_formula",
                    "smiles", "true_smiles", "n_pred", "n_true", "node_label_accuracy", "edge_f1"]
    col = {k: [r[head.index(k)] for r in body] for k in head}
    assert col["index"] == [str(i) for i in range(N)]
    assert col["id"][1] == 'sample "1", batch 2'  # quoted, comma and quotes kept
    assert [float(v) for v in col["ged"]] == [it["ged"] for it in summary["items"]]
    assert col["exact_match"] == [str(int(i == EXACT)) for i in range(N)]
    assert col["valid"] == ["0" if i == 5 else "1" for i in range(N)]
    for key, name in (("smiles", "predicted SMILES"), ("true_smiles", "true SMILES"),
                      ("formula", "predicted formula"), ("confidence", "confidence")):
        assert col[key] == page.column(name)
    # the rows shown, in the order shown: sorted by GED (largest first), GED <= 10 only
    click_heading(browser, "GED")
    click_heading(browser, "GED")
    browser.find_element(By.ID, "filter-ged").send_keys("10")
    order = shown_rows(browser)
    text = download(browser, "download-csv")
    body = list(csv.reader(io.StringIO(text)))[1:]
    assert [int(r[0]) for r in body] == order
    assert order == sorted((i for i in range(N) if summary["items"][i]["ged"] <= 10),
                           key=lambda i: (-summary["items"][i]["ged"], i))


def test_sdf_download_in_browser(browser, filter_page):
    Chem = pytest.importorskip("rdkit.Chem")
    path, pred, summary = filter_page
    page = Page(path.read_text(encoding="utf-8"))
    browser.get(path.as_uri())
    text = download(browser, "download-sdf")
    assert text.count("$$$$") == N
    # RDKit's SDF reader: one record per row, the id as title, the table's values as properties
    supplier = Chem.ForwardSDMolSupplier(io.BytesIO(text.encode()), sanitize=False)
    mols = list(supplier)
    assert len(mols) == N
    ids, smiles = page.column("id"), page.column("predicted SMILES")
    for i, (mol, g) in enumerate(zip(mols, pred)):
        assert mol.GetProp("_Name") == ids[i] and mol.GetProp("id") == ids[i]
        assert int(mol.GetProp("index")) == i
        assert float(mol.GetProp("ged")) == summary["items"][i]["ged"]
        assert mol.GetProp("confidence") == page.column("confidence")[i]
        assert Counter(a.GetSymbol() for a in mol.GetAtoms()) == Counter(lab for _, lab in g.nodes(data="label"))
        assert mol.GetNumBonds() == g.number_of_edges()
        assert mol.GetConformer().GetPositions().any()  # RDKit's 2D layout, not all at 0, 0
        if i == 5:
            continue  # the five-valent carbon: RDKit rejects it, as the table says
        clean = Chem.Mol(mol)
        Chem.SanitizeMol(clean)
        assert Chem.MolToSmiles(clean) == Chem.MolToSmiles(Chem.MolFromSmiles(smiles[i]))
        assert mol.GetProp("smiles") == smiles[i]


@pytest.mark.parametrize("width", [1400, 800])
def test_demo_page_fits_the_window(browser, demo_page, tmp_path, width):
    page, _ = demo_page
    path = tmp_path / "demo.html"
    path.write_text(page, encoding="utf-8")
    browser.set_window_size(width, 1000)
    try:
        browser.get(path.as_uri())
        sizes = browser.execute_script(
            """
            var heads = Array.from(document.querySelectorAll('#items thead th'));
            var row = document.querySelector('#items tbody tr'), wrap = document.querySelector('.tablewrap');
            var cells = {};
            heads.forEach(function (h, k) { cells[h.textContent.trim()] = row.cells[k].getBoundingClientRect().width; });
            var right = Math.max.apply(null, Array.from(document.querySelectorAll('figure, .cards, .tools, p'))
                .map(function (e) { return e.getBoundingClientRect().right; }));
            return {page: document.documentElement.scrollWidth, window: window.innerWidth, cells: cells,
                    wrap: wrap.getBoundingClientRect().right, right: right,
                    scrolls: wrap.scrollWidth > wrap.clientWidth};
            """
        )
        # the page never scrolls sideways: wide content scrolls inside the table's box
        assert sizes["page"] <= sizes["window"] == width
        assert sizes["wrap"] <= width and sizes["right"] <= width
        if width < 1000:
            assert sizes["scrolls"]  # the table's own box scrolls sideways instead
        for name in ("id", "predicted SMILES", "true SMILES", "predicted formula"):
            assert sizes["cells"][name] >= 80, (name, sizes["cells"][name])
        assert sizes["cells"]["predicted"] >= 56 and sizes["cells"]["true"] >= 56  # depictions
    finally:
        browser.set_window_size(1280, 1600)


def test_demo_report_in_browser(browser, capsys, tmp_path):
    out_dir = tmp_path / "demo"
    code, out, err = run(
        capsys,
        "demo",
        "--n-test",
        "6",
        "--drawings",
        "6",
        "--n-neighbors",
        "3",
        "--out",
        out_dir,
        "-q",
    )
    assert code == 0, err
    report = out_dir / "report.html"
    assert f"report: {report}" in out
    text = report.read_text(encoding="utf-8")
    assert text.count("Soft barycenter before decoding") == 6 and CAUTION in text
    browser.get(report.as_uri())
    from selenium.webdriver.common.by import By

    assert len(browser.find_elements(By.CSS_SELECTOR, "#items tbody tr")) == 6
    png = browser.get_screenshot_as_png()
    (tmp_path / "demo-report.png").write_bytes(png)
    colours, non_white = screenshot_is_drawn(png)
    assert colours > 50 and non_white > 0.05

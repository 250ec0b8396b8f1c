"""Sample ids travel with every result: fit -> predict -> evaluate -> report -> rank.

Inputs: features as CSV (an ``id`` column), TSV (ids in a column named by ``--id-column``)
and ``.npy`` with a separate id file (``--ids``). Outputs: JSON Lines, GraphML, SMILES and
SDF. Data: molecules of the bundled demo set (a QM9 subset; see data/README.md), given ids
of our own so that they differ from QM9's names. References for reading the files back:
Python's csv, json and XML modules (GraphML's graph id attribute), RDKit's SMILES and SDF readers.
"""

from __future__ import annotations

import csv
import json
from pathlib import Path
from xml.etree import ElementTree

import numpy as np
import pytest

from gwpred import load_model
from gwpred.cli import main
from gwpred.datasets import load_demo
from gwpred.io import write_graphs

Chem = pytest.importorskip("rdkit.Chem")

TRAIN = list(range(0, 3000, 60))  # 50 molecules spread over the demo file
TEST = [7, 1507, 2999]
TRAIN_IDS = [f"train-{i:03d}" for i in range(len(TRAIN))]
TEST_IDS = ["sample A", "sample-b", "sample_c"]  # a space is allowed in ids (not at either end)
OUTPUTS = [".jsonl", ".graphml", ".smi", ".sdf"]


def write_table(path: Path, X: np.ndarray, ids: list[str], header_id: str, delimiter: str) -> None:
    with open(path, "w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh, delimiter=delimiter)
        w.writerow([f"f{j}" for j in range(X.shape[1] // 2)] + [header_id]
                   + [f"g{j}" for j in range(X.shape[1] // 2, X.shape[1])])
        for x, i in zip(X, ids):
            half = X.shape[1] // 2
            w.writerow([repr(float(v)) for v in x[:half]] + [i] + [repr(float(v)) for v in x[half:]])


@pytest.fixture(scope="module")
def demo():
    X, graphs = load_demo()
    train = [graphs[i].copy() for i in TRAIN]
    for g in train:
        del g.graph["id"]  # the graphs file names no sample: the features file does
    return X[TRAIN], train, X[TEST], [graphs[i] for i in TEST]


def inputs(kind: str, d: Path, X: np.ndarray, ids: list[str], stem: str) -> list[str]:
    """Write features (and ids) in one of the three layouts; return the CLI options that read them."""
    if kind == "csv":  # an id column headed 'id', in the middle of the file
        write_table(d / f"{stem}.csv", X, ids, "id", ",")
        return ["--features", str(d / f"{stem}.csv"), "--id-column", "id"]
    if kind == "tsv":  # a column headed 'sample', named with --id-column
        write_table(d / f"{stem}.tsv", X, ids, "sample", "\t")
        return ["--features", str(d / f"{stem}.tsv"), "--id-column", "sample"]
    np.save(d / f"{stem}.npy", X)  # no room for text: ids in a file of their own
    (d / f"{stem}_ids.txt").write_text("\n".join(ids) + "\n", encoding="utf-8")
    return ["--features", str(d / f"{stem}.npy"), "--ids", str(d / f"{stem}_ids.txt")]


def read_ids_back(path: Path) -> list[str]:
    """The ids in a written graph file, read with outside readers only."""
    ext = path.suffix
    if ext == ".jsonl":
        return [json.loads(line)["graph"]["id"] for line in path.read_text(encoding="utf-8").splitlines()]
    if ext == ".graphml":  # the standard's <graph id="..."> attribute, read with Python's XML parser
        ns = "{http://graphml.graphdrawing.org/xmlns}"
        return [g.get("id") for g in ElementTree.parse(path).getroot().iter(f"{ns}graph")]
    if ext == ".smi":  # "SMILES name" per line (common practice)
        return [line.split(maxsplit=1)[1] for line in path.read_text(encoding="utf-8").splitlines()]
    return [m.GetProp("_Name") for m in Chem.SDMolSupplier(str(path))]  # the SDF record titles


@pytest.mark.parametrize("kind", ["csv", "tsv", "npy"])
def test_ids_round_trip_through_every_command(tmp_path, capsys, demo, kind):
    Xtr, Gtr, Xte, Gte = demo
    d = tmp_path
    write_graphs(d / "train.jsonl", Gtr)
    truth = [g.copy() for g in Gte]
    for g, i in zip(truth, TEST_IDS):
        g.graph["id"] = i
    write_graphs(d / "truth.sdf", truth)
    model = d / "model.npz"
    assert main(["fit", *inputs(kind, d, Xtr, TRAIN_IDS, "train"), "--graphs", str(d / "train.jsonl"),
                 "--model", str(model), "--n-neighbors", "3", "-q"]) == 0
    assert load_model(model).training_ids_ == TRAIN_IDS  # kept in the model file
    test_opts = inputs(kind, d, Xte, TEST_IDS, "test")

    for ext in OUTPUTS:
        pred = d / f"pred{ext}"
        assert main(["predict", "--model", str(model), *test_opts, "--out", str(pred), "-q"]) == 0
        assert read_ids_back(pred) == TEST_IDS, ext

        items = d / f"items{ext}.csv"
        assert main(["evaluate", str(pred), "--truth", str(d / "truth.sdf"), "--items", str(items), "-q"]) == 0
        with open(items, newline="", encoding="utf-8") as fh:
            rows = list(csv.DictReader(fh))
        assert [r["id"] for r in rows] == TEST_IDS, ext
        assert all(Chem.MolFromSmiles(r["smiles_predicted"]) is not None for r in rows)

    report = d / "report.html"
    assert main(["report", str(d / "pred.sdf"), "--truth", str(d / "truth.sdf"), "--model", str(model),
                 *test_opts, "--drawings", "1", "--out", str(report), "-q"]) == 0
    html = report.read_text(encoding="utf-8")
    for i in TEST_IDS:
        assert i in html
    assert any(t in html for t in TRAIN_IDS)  # the training graphs a prediction leaned on, by id

    # candidates named by their SDF titles; each row's list carries the row's id
    cands = [g.copy() for g in Gtr[:6]]
    for k, g in enumerate(cands):
        g.graph["id"] = f"candidate {k}"
    write_graphs(d / "cands.sdf", cands)
    ranked = d / "ranked.jsonl"
    assert main(["rank", "--model", str(model), *test_opts, "--candidates", str(d / "cands.sdf"),
                 "--out", str(ranked), "--top-k", "3", "-q"]) == 0
    records = [json.loads(line) for line in ranked.read_text(encoding="utf-8").splitlines()]
    assert [r["id"] for r in records] == TEST_IDS
    for r in records:
        assert [c["id"] for c in r["ranked"]] == [f"candidate {c['candidate']}" for c in r["ranked"]]
    capsys.readouterr()


def test_rows_out_of_order_are_refused(tmp_path, capsys, demo):
    # ids that name the same samples in another order mean the files do not line up
    _, _, _, Gte = demo
    pred, truth = [g.copy() for g in Gte], [g.copy() for g in Gte]
    for g, i in zip(pred, TEST_IDS):
        g.graph["id"] = i
    for g, i in zip(truth, TEST_IDS[::-1]):
        g.graph["id"] = i
    write_graphs(tmp_path / "p.jsonl", pred)
    write_graphs(tmp_path / "t.jsonl", truth)
    assert main(["evaluate", str(tmp_path / "p.jsonl"), "--truth", str(tmp_path / "t.jsonl"), "-q"]) == 2
    err = capsys.readouterr().err
    assert "row 0: id 'sample A'" in err and "same samples in the same order" in err

"""End to end: spectra -> heavy-atom skeletons on QM9, against 1-NN retrieval.

Data: the bundled subset of QM9 (Ramakrishnan et al., Scientific Data 1, 140022, 2014; read
from the PyPI package qm9pack, see data/README.md). Baseline: returning the training molecule
of the most similar input (1-nearest-neighbour retrieval), the usual reference of structured
prediction (common practice). Scores: exact graph edit distance with uniform costs.
"""

from __future__ import annotations

import numpy as np
import pytest

from gwpred import BarycenterGraphPredictor
from gwpred.datasets import load_demo
from gwpred.metrics import summarize
from gwpred.weights import kernel_matrix


@pytest.mark.slow
def test_barycenter_predictor_beats_nearest_neighbour_retrieval():
    X, graphs = load_demo()
    perm = np.random.default_rng(0).permutation(len(graphs))  # the demo's split
    test, train = perm[:150], perm[300:]
    model = BarycenterGraphPredictor(random_state=0).fit(X[train], [graphs[i] for i in train])
    truth = [graphs[i] for i in test]
    ours = summarize(model.predict(X[test]), truth)
    nearest = kernel_matrix(X[test], X[train], "rbf", model.weights_.gamma_).argmax(1)
    base = summarize([graphs[train[j]] for j in nearest], truth)
    assert ours["exact_share"] == 1.0 and base["exact_share"] == 1.0
    assert ours["mean_ged"] < base["mean_ged"] - 0.1, (ours["mean_ged"], base["mean_ged"])
    assert ours["right_size_rate"] >= base["right_size_rate"]
    assert ours["connected_rate"] == 1.0


@pytest.mark.slow
def test_demo_command_prints_the_readme_table_and_only_valid_molecules(tmp_path, capsys):
    # The README's first set-up command, run as a user would (default settings): the table it
    # prints is the README's, and every prediction is a valid molecule (reference: RDKit's
    # sanitisation through MolFromSmiles of the written SMILES).
    import re
    from pathlib import Path

    from gwpred.cli import main
    from gwpred.io import read_graphs

    Chem = pytest.importorskip("rdkit.Chem")
    from gwpred.chem import graph_to_smiles

    assert main(["demo", "--out", str(tmp_path / "demo"), "-q"]) == 0
    out = capsys.readouterr().out
    readme = (Path(__file__).resolve().parents[1] / "README.md").read_text(encoding="utf-8")
    for prefix in ("gwpred (FGW barycenter)", "1-NN retrieval  "):
        line = next(ln for ln in out.splitlines() if ln.startswith(prefix))
        assert line in readme, line
    assert re.search(r"GED solved exactly for 100\.0% of pairs", out)
    predicted = read_graphs(tmp_path / "demo" / "predicted.jsonl")
    assert len(predicted) == 300
    assert all(Chem.MolFromSmiles(graph_to_smiles(g)) is not None for g in predicted)

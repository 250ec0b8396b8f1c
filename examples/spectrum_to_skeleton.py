"""Propose heavy-atom skeletons from computed vibrational spectra (bundled QM9 subset).

Run:  python examples/spectrum_to_skeleton.py

Predicted molecules are hypotheses: confirm any structure by analytical methods before acting on
it, and handle chemicals only under local lab-safety rules and their safety data sheets.
"""

import numpy as np

from gwpred import BarycenterGraphPredictor
from gwpred.datasets import load_demo
from gwpred.metrics import edit_distance, exact_match

X, graphs, smiles = load_demo(return_smiles=True)
order = np.random.default_rng(1).permutation(len(graphs))
train, test = order[:2900], order[2900:2910]

model = BarycenterGraphPredictor(n_neighbors=10, alpha=0.9, random_state=0)
model.fit(X[train], [graphs[i] for i in train])

for i, soft, pred in zip(test, model.predict_barycenters(X[test]), model.predict(X[test])):
    ged = edit_distance(pred, graphs[i])
    labels = "".join(sorted(d["label"] for _, d in pred.nodes(data=True)))
    print(f"true {smiles[i]:<18} predicted atoms {labels:<10} GED {ged.value:g}"
          f"{'  (exact match)' if exact_match(pred, graphs[i]) else ''}"
          f"  leaned on training items {soft.neighbors[:3].tolist()} "
          f"with weights {np.round(soft.weights[:3], 2).tolist()}")

"""Write what gwpred predicts, measures and ranks on fixed inputs, for before/after comparisons.

A re-layout of the package must not change any result. Run this script before and after a
change, into two folders, and compare the files byte for byte (``cmp`` or the printed
SHA-256 digests)::

    python benchmarks/behaviour_snapshot.py --out before
    # ... change the code ...
    python benchmarks/behaviour_snapshot.py --out after
    diff <(cd before && sha256sum *) <(cd after && sha256sum *)

It uses only the public API (``gwpred.BarycenterGraphPredictor``, ``gwpred.datasets``,
``gwpred.io``, ``gwpred.metrics``, ``gwpred.ranking``), so it runs on either layout. Files:

- ``predicted_default.jsonl``, ``predicted_valence.jsonl``, ``predicted_formula.jsonl``: the
  demo split of ``gwpred demo`` (seed 0, 300 held-out molecules), default settings, with
  ``valence=True``, and with each test molecule's heavy-atom formula;
- ``ged.jsonl``: ``edit_distance`` on 300 pairs of bundled QM9 graphs (150 predictions
  against their truth, 150 random pairs): value, bounds, proven flag and node map;
- ``ranked_kernel.jsonl``, ``ranked_fgw.jsonl``: ``rank`` of the held-out graphs as the
  candidate library for the first 40 test inputs (``kernel`` and ``fgw`` scorers, k = 10);
- ``summary.json``: ``summarize`` of the default predictions.
"""

from __future__ import annotations

import argparse
import hashlib
import json
from pathlib import Path

import numpy as np

from gwpred import BarycenterGraphPredictor
from gwpred.datasets import load_demo
from gwpred.formula import graph_formula
from gwpred.io import write_graphs
from gwpred.metrics import edit_distance, summarize


def _dump(path: Path, rows: list) -> None:
    path.write_text("".join(json.dumps(r, sort_keys=True, default=str) + "\n" for r in rows))


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--out", required=True, help="folder to write the files into")
    ap.add_argument("--test-size", type=int, default=300)
    ap.add_argument("--ged-pairs", type=int, default=300)
    ap.add_argument("--rank-rows", type=int, default=40)
    args = ap.parse_args()
    out = Path(args.out)
    out.mkdir(parents=True, exist_ok=True)

    X, graphs = load_demo()
    perm = np.random.default_rng(0).permutation(len(graphs))  # the split of `gwpred demo --seed 0`
    test, train = perm[: args.test_size], perm[args.test_size :]
    truth = [graphs[i] for i in test]
    params = dict(kernel="rbf", n_neighbors=10, alpha=0.9, random_state=0)

    model = BarycenterGraphPredictor(**params).fit(X[train], [graphs[i] for i in train])
    pred = model.predict(X[test])
    write_graphs(out / "predicted_default.jsonl", pred)
    model_v = BarycenterGraphPredictor(valence=True, **params).fit(X[train], [graphs[i] for i in train])
    write_graphs(out / "predicted_valence.jsonl", model_v.predict(X[test]))
    formulas = [graph_formula(g) for g in truth]
    write_graphs(out / "predicted_formula.jsonl", model.predict(X[test], formulas=formulas))

    summary = summarize(pred, truth, time_limit=None)
    _dump(out / "summary.json", [summary])

    rng = np.random.default_rng(1)
    half = args.ged_pairs // 2
    pairs = [(pred[i], truth[i]) for i in range(min(half, len(pred)))]
    for a, b in rng.integers(0, len(graphs), size=(args.ged_pairs - len(pairs), 2)):
        pairs.append((graphs[a], graphs[b]))
    rows = []
    for g1, g2 in pairs:
        r = edit_distance(g1, g2)
        rows.append({"value": r.value, "lower": r.lower, "upper": r.upper, "exact": r.exact,
                     "mapping": sorted((str(k), str(v)) for k, v in r.mapping.items())})
    _dump(out / "ged.jsonl", rows)

    q = X[test[: args.rank_rows]]
    for scorer in ("kernel", "fgw"):
        ranked = model.rank(q, truth, top_k=10, scorer=scorer)
        _dump(out / f"ranked_{scorer}.jsonl", [[[int(j), round(float(s), 10)] for j, s in row] for row in ranked])

    for f in sorted(out.iterdir()):
        print(hashlib.sha256(f.read_bytes()).hexdigest()[:16], f.name)


if __name__ == "__main__":
    main()

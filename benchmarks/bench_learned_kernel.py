"""Fixed input kernels against a learned embedding (``kernel="learned"``) on QM9, side by side.

For each input kind (broadened spectra, fixed kernel RBF; Morgan fingerprints,
fixed kernel Tanimoto) and one deterministic split of QM9 (``--n-train``
training, ``--n-test`` test molecules never in training), on the same inputs:

* ``1-NN, fixed`` / ``1-NN, learned``: the training molecule with the most
  similar input (fixed kernel), or the nearest embedding (learned);
* ``gwpred, fixed`` / ``gwpred, learned``: ``BarycenterGraphPredictor`` with
  the fixed kernel, or ``kernel="learned"`` (the embedding trained on the
  training molecules only, against the output kernel ``--output-kernel``);
* for both gwpred models, kernel ranking (fingerprint output kernel) of every
  QM9 molecule of the test molecule's formula, truth in the list: top-1 and
  top-10 rates.

Columns: mean GED to the truth (uniform costs, exact within ``--time-limit``
s per pair, else the best upper bound), exact match, isomer-ranking top-1 /
top-10, training seconds (the embedding included), prediction graphs per
second (one process).

    pip install -e ".[all]" && pip install torch==2.13.0
    python benchmarks/bench_learned_kernel.py --n-train 2000 --n-test 100     # a quick look
    python benchmarks/bench_learned_kernel.py                                 # 10,000 / 1,000
"""

from __future__ import annotations

import argparse
import json
import time

import networkx as nx
import numpy as np

from gwpred import BarycenterGraphPredictor
from gwpred.datasets import load_qm9, split_indices
from gwpred.metrics import summarize
from gwpred.ranking import CandidateLibrary, rank_candidates

KERNEL = {"fingerprint": "tanimoto", "spectrum": "rbf"}
#: Embedding options per input kind (a 1-D convolution for spectra, on their grid).
EMBEDDING = {
    "spectrum": {"dim": 64, "hidden": [256], "conv": [16, 9, 4], "epochs": 200, "patience": 10},
    "fingerprint": {"dim": 64, "hidden": [256], "epochs": 200, "patience": 10},
}


def same(a: nx.Graph, b: nx.Graph) -> bool:
    nm = nx.isomorphism.categorical_node_match("label", None)
    em = nx.isomorphism.categorical_edge_match("label", None)
    return nx.is_isomorphic(a, b, node_match=nm, edge_match=em)


def isomer_ranks(model, X, formulas, library, by_formula, truth_index) -> np.ndarray:
    """1-based rank of the truth among all QM9 molecules of its formula (kernel scorer), 0 if absent."""
    filt = [np.array(by_formula[f], dtype=np.int64) for f in formulas]
    ranked = rank_candidates(model, X, library, top_k=10, filter=filt, output_kernel="fingerprint")
    return np.array([next((r + 1 for r, (j, _) in enumerate(row) if j == t), 0)
                     for row, t in zip(ranked, truth_index)])


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--n-train", type=int, default=10_000)
    ap.add_argument("--n-test", type=int, default=1_000)
    ap.add_argument("--seed", type=int, default=0)
    ap.add_argument("--inputs", nargs="+", default=["spectrum", "fingerprint"], choices=sorted(KERNEL))
    ap.add_argument("--output-kernel", default="fingerprint", choices=["wl", "fingerprint"])
    ap.add_argument("--embedding", default=None, help="JSON of embedding options replacing the defaults")
    ap.add_argument("--time-limit", type=float, default=2.0, help="seconds per GED pair")
    args = ap.parse_args()
    for kind in args.inputs:
        data = load_qm9(features=kind, progress=False)
        train, test = split_indices(len(data), n_train=args.n_train, n_test=args.n_test, random_state=args.seed)
        Xf, gf = data.X[train], [data.graphs[i] for i in train]
        Xt, gt = data.X[test], [data.graphs[i] for i in test]
        ft = [data.formulas[i] for i in test]
        library = CandidateLibrary(data.graphs)
        by_formula: dict[str, list[int]] = {}
        for i, f in enumerate(data.formulas):
            by_formula.setdefault(f, []).append(i)
        options = dict(json.loads(args.embedding) if args.embedding else EMBEDDING[kind])
        options["output_kernel"] = args.output_kernel
        print(f"\n== {kind}: {len(train)} training / {len(test)} test molecules, seed {args.seed}; "
              f"embedding {json.dumps(options)}")
        rows = []
        models = {}
        for name, params in (("fixed", {"kernel": KERNEL[kind]}),
                             ("learned", {"kernel": "learned", "embedding": options})):
            t0 = time.perf_counter()
            model = BarycenterGraphPredictor(random_state=args.seed, **params).fit(Xf, gf)
            fit_s = time.perf_counter() - t0
            models[name] = model
            if name == "learned":
                h = model.embedding_.history
                print(f"embedding: {len(h['train_loss'])} epochs (best {h['best_epoch']}), {h['seconds']:.0f} s, "
                      f"validation loss {h['initial_validation_loss']:.4f} -> {min(h['validation_loss']):.4f}")
            nn = model.input_kernel(Xt, Xf).argmax(1)  # the model's own kernel, learned or fixed
            nearest = [gf[j] for j in nn]
            s = summarize(nearest, gt, time_limit=args.time_limit)
            rows.append((f"1-NN, {name}", s["mean_ged"], np.mean([same(a, b) for a, b in zip(nearest, gt)]),
                         np.nan, np.nan, np.nan, np.nan))
            t0 = time.perf_counter()
            pred = model.predict(Xt)
            rate = len(Xt) / (time.perf_counter() - t0)
            s = summarize(pred, gt, time_limit=args.time_limit)
            r = isomer_ranks(model, Xt, ft, library, by_formula, test)
            rows.append((f"gwpred, {name}", s["mean_ged"], np.mean([same(a, b) for a, b in zip(pred, gt)]),
                         np.mean(r == 1), np.mean((r >= 1) & (r <= 10)), fit_s, rate))
        print("| method | mean GED | exact | isomers top-1 | isomers top-10 | training s | graphs/s |")
        print("|---|---|---|---|---|---|---|")
        for name, ged, exact, t1, t10, fit_s, rate in rows:
            cells = [f"{ged:.3f}", f"{100 * exact:.1f}%",
                     "-" if np.isnan(t1) else f"{100 * t1:.1f}%", "-" if np.isnan(t10) else f"{100 * t10:.1f}%",
                     "-" if np.isnan(fit_s) else f"{fit_s:.0f}", "-" if np.isnan(rate) else f"{rate:.0f}"]
            print(f"| {name} | " + " | ".join(cells) + " |")
        ged = {r[0]: r[1] for r in rows}
        print(f"learned vs fixed gwpred: {100 * (ged['gwpred, learned'] / ged['gwpred, fixed'] - 1):+.1f}% mean GED; "
              f"learned gwpred vs fixed 1-NN: {100 * (ged['gwpred, learned'] / ged['1-NN, fixed'] - 1):+.1f}%")


if __name__ == "__main__":
    main()

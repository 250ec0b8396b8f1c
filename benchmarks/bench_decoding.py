"""Which decoding of the barycenter gets closest to the truth?  Side by side on one split.

Compares, on the bundled demo data (QM9 spectra -> heavy-atom graphs) and the
same split as ``gwpred demo``:

* 1-NN retrieval: the training graph of the most similar input;
* the anchor alone: the start graph of the barycenter (the highest-weight
  kept training graph of the voted size), returned unchanged;
* ``decoding="free"``: the barycenter decoded on its own (edge budget +
  spanning tree);
* ``decoding="anchored"``: the barycenter decoded as edits of its anchor, for
  several ``consensus`` levels.

Run::

    python benchmarks/bench_decoding.py --n-test 200 --seed 0

Every line is scored by exact graph edit distance (uniform costs).
"""

from __future__ import annotations

import argparse
import time

import numpy as np

from gwpred import BarycenterGraphPredictor
from gwpred.datasets import load_demo
from gwpred.metrics import summarize
from gwpred.weights import kernel_matrix


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--n-test", type=int, default=200)
    ap.add_argument("--seed", type=int, default=0)
    ap.add_argument("--alpha", type=float, default=0.9)
    ap.add_argument("--n-neighbors", type=int, default=10)
    ap.add_argument("--consensus", type=float, nargs="+", default=[0.6, 0.8, 1.0])
    ap.add_argument("--time-limit", type=float, default=None, help="seconds per GED (default: exact)")
    args = ap.parse_args()

    X, graphs = load_demo()
    perm = np.random.default_rng(args.seed).permutation(len(graphs))
    test, train = perm[: args.n_test], perm[args.n_test :]
    truth = [graphs[i] for i in test]
    params = dict(alpha=args.alpha, n_neighbors=args.n_neighbors, random_state=args.seed)
    model = BarycenterGraphPredictor(**params).fit(X[train], [graphs[i] for i in train])
    t0 = time.perf_counter()
    soft = model.predict_barycenters(X[test])
    t_bary = time.perf_counter() - t0

    rows: list[tuple[str, list]] = []
    nearest = kernel_matrix(X[test], X[train], "rbf", model.weights_.gamma_).argmax(1)
    rows.append(("1-NN retrieval", [graphs[train[j]] for j in nearest]))
    rows.append(("anchor alone", [graphs[train[s.anchor]] for s in soft]))
    model.set_params(decoding="free")
    rows.append(("free decoding", [model._decode(s) for s in soft]))
    model.set_params(decoding="anchored")
    for c in args.consensus:
        model.set_params(consensus=c)
        rows.append((f"anchored, consensus {c:g}", [model._decode(s) for s in soft]))

    print(f"# python benchmarks/bench_decoding.py --n-test {args.n_test} --seed {args.seed} "
          f"--alpha {args.alpha} --n-neighbors {args.n_neighbors}")
    print(f"# {len(train)} training / {len(test)} test molecules; barycenters: "
          f"{1000 * t_bary / len(test):.1f} ms per input")
    print(f"{'prediction':<28}{'mean GED':>9}{'exact match':>13}{'right size':>12}{'connected':>11}"
          f"{'edges - true':>14}{'|edges - true|':>16}")
    m_true = np.array([g.number_of_edges() for g in truth])
    for name, pred in rows:
        s = summarize(pred, truth, time_limit=args.time_limit)
        dm = np.array([g.number_of_edges() for g in pred]) - m_true
        print(f"{name:<28}{s['mean_ged']:>9.3f}{100 * s['exact_match_rate']:>12.1f}%"
              f"{100 * s['right_size_rate']:>11.1f}%{100 * s['connected_rate']:>10.1f}%"
              f"{dm.mean():>+14.2f}{np.abs(dm).mean():>16.2f}", flush=True)


if __name__ == "__main__":
    main()

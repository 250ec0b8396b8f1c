"""How should kernel ridge weights become barycentric weights?  Side by side on one split.

Kernel ridge coefficients (K + n*lambda*I)^-1 k(x) can be negative and need not sum to one, but
an FGW barycenter needs weights on the simplex.  This script reports how much negative mass the
kept coefficients carry and compares, on the bundled demo data (same split as ``gwpred demo``),
the predictions made with:

* ridge coefficients, top-k, negatives clipped to 0, renormalised (gwpred's default);
* ridge coefficients, top-k, shifted by the row minimum, renormalised;
* kernel values of the k nearest inputs (k-NN weights), renormalised;

for several k.  Run::

    python benchmarks/bench_weights.py --test-size 200 --seed 0
"""

from __future__ import annotations

import argparse

import numpy as np

from gwpred import BarycenterGraphPredictor
from gwpred.datasets import load_demo
from gwpred.metrics import summarize
from gwpred.model.steps import neighbourhood, predict_query
from gwpred.weights import sparsify


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--test-size", type=int, default=200)
    ap.add_argument("--seed", type=int, default=0)
    ap.add_argument("--top-k", type=int, nargs="+", default=[5, 10, 30])
    args = ap.parse_args()

    X, graphs = load_demo()
    perm = np.random.default_rng(args.seed).permutation(len(graphs))
    test, train = perm[: args.test_size], perm[args.test_size :]
    truth = [graphs[i] for i in test]
    model = BarycenterGraphPredictor(random_state=args.seed).fit(X[train], [graphs[i] for i in train])
    ridge = model.weights_.raw_weights(X[test])
    model.weights_.method = "knn"
    knn = model.weights_.raw_weights(X[test])
    model.weights_.method = "ridge"

    print(f"# python benchmarks/bench_weights.py --test-size {args.test_size} --seed {args.seed}")
    print(f"# {len(train)} training / {len(test)} test molecules")
    order = np.argsort(-ridge, axis=1)
    for k in args.top_k:
        top = np.take_along_axis(ridge, order[:, :k], axis=1)
        neg = np.where(top < 0, -top, 0).sum(1) / np.abs(top).sum(1)
        print(f"# top-{k} ridge coefficients: {100 * (top < 0).mean():.1f}% negative, "
              f"{100 * neg.mean():.1f}% of their absolute mass; full rows sum to "
              f"{ridge.sum(1).mean():.2f} on average")
    print(f"{'weights':<34}{'mean GED':>9}{'right size':>12}")
    for k in args.top_k:
        for name, W, policy in (("ridge, clip", ridge, "clip"), ("ridge, shift", ridge, "shift"),
                                ("k-NN kernel values", knn, "clip")):
            idx, w = sparsify(W, k, negative=policy)
            settings = model._settings(need_valences=False)  # the model's own decoding settings
            pred = [predict_query(neighbourhood(model.training_, i, ww), settings) for i, ww in zip(idx, w)]
            s = summarize(pred, truth)
            print(f"{name + f', top-{k}':<34}{s['mean_ged']:>9.3f}{100 * s['right_size_rate']:>11.1f}%",
                  flush=True)


if __name__ == "__main__":
    main()

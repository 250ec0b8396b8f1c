"""Dense vs local kernel ridge weights on full QM9, side by side.

For each input kind (Morgan fingerprints with the Tanimoto kernel; broadened
harmonic spectra with the RBF kernel) and one deterministic split of QM9
(``--n-train`` training and ``--n-test`` test molecules), this fits
``BarycenterGraphPredictor(valence=True)`` with

* ``weight_model="dense"``: one kernel ridge solve over all training inputs;
* ``weight_model="local"``: per query, a ridge solve on its ``local_size``
  most similar training inputs (one line per ``--local-sizes`` value);

and, for reference, 1-NN retrieval (the training molecule with the most
similar input).  Columns: mean graph edit distance to the truth (uniform
costs, exact within ``--time-limit`` seconds per pair, else the best upper
bound), exact-match rate, the mean GED difference to the dense line with a
95% paired bootstrap interval, how many of the kept training graphs (top 10)
the line shares with the dense line, seconds to fit the estimator, seconds
for the weight step of all test queries (``neighbors``) and for the whole
``predict``, and the peak memory the weight step allocates (``tracemalloc``,
fit and queries measured apart on a second copy of the fitted weight model).

A second table times the weight step (estimator ``fit`` + ``neighbors`` of
the test queries, no barycenters) for growing training sets, which is how the ``weight_model="auto"``
threshold was chosen.

Needs the extras ``chem`` and ``data`` (RDKit, qm9pack)::

    python benchmarks/bench_weight_models.py                          # 10,000 train / 500 test
    python benchmarks/bench_weight_models.py --inputs fingerprint --n-test 100   # a quicker look

The first run parses QM9 once (about a minute) and caches it.
"""

from __future__ import annotations

import argparse
import copy
import resource
import sys
import time
import tracemalloc

import numpy as np

from gwpred import BarycenterGraphPredictor
from gwpred.datasets import load_qm9, split_indices
from gwpred.metrics import summarize
from gwpred.weights import kernel_matrix

KERNEL = {"fingerprint": "tanimoto", "spectrum": "rbf"}


def paired_gap(a: np.ndarray, b: np.ndarray, seed: int, n_boot: int = 2000) -> tuple[float, float, float]:
    """Mean of a - b with a 95% bootstrap interval over the test molecules (paired)."""
    d = a - b
    rng = np.random.default_rng(seed)
    boot = d[rng.integers(0, len(d), size=(n_boot, len(d)))].mean(1)
    return float(d.mean()), float(np.quantile(boot, 0.025)), float(np.quantile(boot, 0.975))


def weight_peak(weights, Xtr: np.ndarray, Xte: np.ndarray, top_k: int) -> tuple[float, float]:
    """Peak MiB allocated by fitting a copy of a weight model, and by its top-k weights of the queries."""
    w = copy.copy(weights)
    tracemalloc.start()
    w.fit(Xtr)
    fit_peak = tracemalloc.get_traced_memory()[1]
    tracemalloc.reset_peak()
    base = tracemalloc.get_traced_memory()[0]
    w.top_weights(Xte, top_k)
    query_peak = tracemalloc.get_traced_memory()[1] - base
    tracemalloc.stop()
    return fit_peak / 2**20, query_peak / 2**20


def scores(pred, truth, args) -> tuple[float, float, np.ndarray]:
    s = summarize(pred, truth, time_limit=args.time_limit, n_jobs=args.n_jobs)
    return s["mean_ged"], s["exact_match_rate"], np.array([it["ged"] for it in s["items"]], dtype=float)


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--n-train", type=int, default=10_000)
    ap.add_argument("--n-test", type=int, default=500)
    ap.add_argument("--seed", type=int, default=0)
    ap.add_argument("--inputs", nargs="+", default=["fingerprint", "spectrum"], choices=sorted(KERNEL))
    ap.add_argument("--local-sizes", nargs="+", type=int, default=[500, 1000], help="M values (default: 500 1000)")
    ap.add_argument("--sweep", nargs="*", type=int, default=[1000, 2500, 5000, 10_000],
                    help="training sizes of the weight-step timing table (none: skip it)")
    ap.add_argument("--time-limit", type=float, default=2.0, help="seconds per GED pair (default: 2)")
    ap.add_argument("--n-jobs", type=int, default=2, help="processes for predict and GED scoring (default: 2)")
    args = ap.parse_args()

    print("command: python " + " ".join(sys.argv))
    print(f"QM9: {args.n_train} training / {args.n_test} test molecules, seed {args.seed}, valence=True, top_k=10")
    for kind in args.inputs:
        data = load_qm9(features=kind, progress=False)
        train, test = split_indices(len(data), n_train=args.n_train, n_test=args.n_test, random_state=args.seed)
        Xtr, Xte = data.X[train], data.X[test]
        gtr = [data.graphs[i] for i in train]
        truth = [data.graphs[i] for i in test]
        print(f"\n== {kind} ({data.X.shape[1]} features, kernel {KERNEL[kind]})")
        lines = [("dense", {"weight_model": "dense"})]
        lines += [(f"local M={m}", {"weight_model": "local", "local_size": m}) for m in args.local_sizes]
        rows = []
        dense_idx = dense_ged = None
        for name, params in lines:
            model = BarycenterGraphPredictor(
                kernel=KERNEL[kind], valence=True, random_state=args.seed, n_jobs=args.n_jobs, **params
            )
            t0 = time.perf_counter()
            model.fit(Xtr, gtr)
            fit_s = time.perf_counter() - t0
            t0 = time.perf_counter()
            idx, _ = model.neighbors(Xte)
            weight_s = time.perf_counter() - t0
            if dense_idx is None:
                model.predict(Xte[:4])  # starts the worker processes once, outside the timings
            t0 = time.perf_counter()
            pred = model.predict(Xte)
            predict_s = time.perf_counter() - t0
            fit_mib, query_mib = weight_peak(model.weights_, Xtr, Xte, model.n_neighbors)
            ged, exact, per = scores(pred, truth, args)
            if dense_idx is None:
                dense_idx, dense_ged = idx, per
                gamma = model.weights_.gamma_
            shared = np.mean([len(set(a) & set(b)) for a, b in zip(idx, dense_idx)])
            rows.append((name, ged, exact, paired_gap(per, dense_ged, args.seed), shared, fit_s, weight_s,
                         predict_s, fit_mib, query_mib))
            print(f"  done: {name}", flush=True)
        t0 = time.perf_counter()
        nearest = [gtr[j] for j in kernel_matrix(Xte, Xtr, KERNEL[kind], gamma).argmax(1)]
        nn_s = time.perf_counter() - t0
        ged, exact, per = scores(nearest, truth, args)
        rows.append(("1-NN retrieval", ged, exact, paired_gap(per, dense_ged, args.seed), float("nan"),
                     float("nan"), nn_s, nn_s, float("nan"), float("nan")))
        head = ("| weights        | mean GED | exact | GED - dense (95% CI)    | shared top-10 | fit s | "
                "weights s | predict s | fit MiB | query MiB |")
        print(head)
        print("|" + "|".join("-" * len(c) for c in head.split("|")[1:-1]) + "|")
        for name, ged, exact, (gap, lo, hi), shared, fit_s, weight_s, predict_s, fit_mib, query_mib in rows:
            gap_txt = "" if name == "dense" else f"{gap:+.3f} ({lo:+.2f} .. {hi:+.2f})"
            print(f"| {name:<14} | {ged:8.3f} | {100 * exact:4.1f}% | {gap_txt:<23} | {shared:13.2f} | "
                  f"{fit_s:5.1f} | {weight_s:9.1f} | {predict_s:9.1f} | {fit_mib:7.0f} | {query_mib:9.0f} |")

        if args.sweep:
            print(f"\nweight step ({kind}): estimator fit + neighbors of the {args.n_test} test queries, seconds")
            print("| n_train | dense s | " + " | ".join(f"local M={m} s" for m in args.local_sizes) + " |")
            print("|---------|---------|" + "|".join("-" * (len(f"local M={m} s") + 2) for m in args.local_sizes) + "|")
            pool = np.setdiff1d(np.arange(len(data)), test)
            for n in args.sweep:
                sub = pool[np.random.default_rng(args.seed).permutation(len(pool))[:n]]
                Xs, gs = data.X[sub], [data.graphs[i] for i in sub]
                cells = []
                for params in [{"weight_model": "dense"}] + [
                    {"weight_model": "local", "local_size": m} for m in args.local_sizes
                ]:
                    model = BarycenterGraphPredictor(kernel=KERNEL[kind], random_state=args.seed, **params)
                    t0 = time.perf_counter()
                    model.fit(Xs, gs)  # graph encoding included, the same on every line
                    model.neighbors(Xte)
                    cells.append(time.perf_counter() - t0)
                print(f"| {n:7d} | " + " | ".join(f"{c:{max(7, len(h))}.1f}" for c, h in zip(
                    cells, ["dense s"] + [f"local M={m} s" for m in args.local_sizes])) + " |")
    print(f"\npeak resident memory of the whole run: {resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 2**10:.0f} MiB")


if __name__ == "__main__":
    main()

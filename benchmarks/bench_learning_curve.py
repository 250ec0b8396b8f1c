"""How training size changes everything: a learning curve on the full QM9 set.

For each input kind (Morgan fingerprints with the Tanimoto kernel; broadened harmonic spectra
with the RBF kernel), one fixed test set of ``--n-test`` QM9 molecules that never enter
training, and nested training sets of growing size (``--sizes``; 0 means every other
molecule, about 130,000), this prints side by side:

* ``1-NN``: the training molecule with the most similar input;
* ``gwpred/<weights>``: ``BarycenterGraphPredictor(valence=True, weight_model=<weights>)``
  for each weight model in ``--weight-models`` (a dense kernel ridge is skipped above
  ``--dense-max`` training molecules: its kernel would not fit in memory).

Columns: mean graph edit distance to the truth (uniform costs, exact within ``--time-limit``
seconds per pair, else the best upper bound), exact match, fit seconds, predicted graphs per
second, and the peak resident memory of the run (each configuration runs in a fresh process,
so the peak is its own: ``resource.getrusage(...).ru_maxrss``).  ``--plot`` writes the curve
(mean GED against training size, one panel per input kind) as a PNG.

Needs the extras ``chem`` and ``data`` (RDKit, qm9pack)::

    pip install -e ".[all]"
    python benchmarks/bench_learning_curve.py --plot learning_curve.png
    python benchmarks/bench_learning_curve.py --inputs fingerprint --sizes 2000 10000 --n-test 200

The first run parses QM9 once (about a minute) and caches it.
"""

from __future__ import annotations

import argparse
import multiprocessing as mp
import resource
import time
from concurrent.futures import ProcessPoolExecutor

import numpy as np

KERNEL = {"fingerprint": "tanimoto", "spectrum": "rbf"}


def _split(kind: str, size: int, n_test: int, seed: int) -> tuple:
    from gwpred.datasets import load_qm9, split_indices

    data = load_qm9(features=kind, progress=False)
    n = len(data.graphs)
    n_train = n - n_test if size == 0 else size
    train, test = split_indices(n, n_train=n_train, n_test=n_test, random_state=seed)
    return data, train, test


def _nearest(X_test: np.ndarray, X_train: np.ndarray, kernel: str, gamma: float) -> np.ndarray:
    """Most similar training input of each test input (ties: smaller index), by exact search in blocks."""
    from gwpred.weights import LocalRidgeWeights

    search = LocalRidgeWeights(kernel, gamma, method="knn", local_size=1).fit(X_train)
    return search.top_weights(X_test, 1)[0][:, 0]


def run_one(kind: str, size: int, method: str, args: argparse.Namespace) -> dict:
    """One configuration, in its own process (its peak memory is its own)."""
    from gwpred import BarycenterGraphPredictor
    from gwpred.metrics import summarize
    from gwpred.weights import median_gamma

    data, train, test = _split(kind, size, args.n_test, args.seed)
    X_train, X_test = data.X[train], data.X[test]
    truth = [data.graphs[i] for i in test]
    t0 = time.perf_counter()
    if method == "1-NN":
        gamma = median_gamma(X_train, KERNEL[kind]) if KERNEL[kind] == "rbf" else 1.0
        fit_s = time.perf_counter() - t0
        t0 = time.perf_counter()
        pred = [data.graphs[train[j]] for j in _nearest(X_test, X_train, KERNEL[kind], gamma)]
    else:
        model = BarycenterGraphPredictor(kernel=KERNEL[kind], valence=True, weight_model=method.split("/")[1],
                                         random_state=args.seed)
        model.fit(X_train, [data.graphs[i] for i in train])
        fit_s = time.perf_counter() - t0
        t0 = time.perf_counter()
        pred = model.predict(X_test)
    pred_s = time.perf_counter() - t0
    s = summarize(pred, truth, time_limit=args.time_limit, n_jobs=1)
    return {
        "input": kind,
        "train": len(train),
        "method": method,
        "mean_ged": s["mean_ged"],
        "exact": s["exact_match_rate"],
        "solved": s["exact_share"],
        "fit_s": fit_s,
        "graphs_per_s": len(test) / pred_s,
        "peak_gb": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 2**20,  # KiB on Linux
    }


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--inputs", nargs="+", default=["fingerprint", "spectrum"], choices=list(KERNEL))
    ap.add_argument("--sizes", nargs="+", type=int, default=[2000, 10000, 30000, 0])
    ap.add_argument("--n-test", type=int, default=1000)
    ap.add_argument("--weight-models", nargs="*", default=["dense", "local"])
    ap.add_argument("--dense-max", type=int, default=10000)
    ap.add_argument("--time-limit", type=float, default=2.0)
    ap.add_argument("--seed", type=int, default=0)
    ap.add_argument("--plot", help="write the learning curve here (PNG)")
    args = ap.parse_args()

    print("# python benchmarks/bench_learning_curve.py " + " ".join(
        f"--{k.replace('_', '-')} {' '.join(map(str, v)) if isinstance(v, list) else v}"
        for k, v in vars(args).items() if v is not None))
    head = f"{'input':<12}{'train':>8}  {'method':<16}{'mean GED':>9}{'exact':>8}{'fit s':>8}{'graphs/s':>10}{'peak GB':>9}"
    print(head)
    print("-" * len(head))
    rows = []
    spawn = mp.get_context("spawn")
    for kind in args.inputs:
        for size in args.sizes:
            methods = ["1-NN"] + [f"gwpred/{w}" for w in args.weight_models
                                  if not (w == "dense" and (size == 0 or size > args.dense_max))]
            for method in methods:
                with ProcessPoolExecutor(max_workers=1, mp_context=spawn) as pool:
                    r = pool.submit(run_one, kind, size, method, args).result()
                rows.append(r)
                print(f"{r['input']:<12}{r['train']:>8}  {r['method']:<16}{r['mean_ged']:>9.3f}"
                      f"{100 * r['exact']:>7.1f}%{r['fit_s']:>8.1f}{r['graphs_per_s']:>10.1f}{r['peak_gb']:>9.2f}",
                      flush=True)
    if args.plot:
        import matplotlib

        matplotlib.use("Agg")
        import matplotlib.pyplot as plt

        fig, axes = plt.subplots(1, len(args.inputs), figsize=(5.5 * len(args.inputs), 4), squeeze=False)
        for ax, kind in zip(axes[0], args.inputs):
            for method in sorted({r["method"] for r in rows if r["input"] == kind}):
                pts = sorted((r["train"], r["mean_ged"]) for r in rows if r["input"] == kind and r["method"] == method)
                ax.plot(*zip(*pts), marker="o", label=method)
            ax.set_xscale("log")
            ax.set_xlabel("training molecules")
            ax.set_ylabel(f"mean GED on {args.n_test} test molecules")
            ax.set_title(f"QM9, {kind} -> heavy-atom graph")
            ax.grid(alpha=0.3)
            ax.legend(fontsize=8)
        fig.tight_layout()
        fig.savefig(args.plot, dpi=110)
        print(f"# plot: {args.plot}")


if __name__ == "__main__":
    main()

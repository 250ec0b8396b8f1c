"""Seconds per input of ``predict_hypotheses`` (k=10), with and without formulas, on one process.

Uses the split of ``bench_hypotheses.py`` (same seed, the same validation
molecules held out of fit) and the first ``--n-inputs`` test molecules.  For
"one core", pin the process and its numeric libraries to one core::

    OMP_NUM_THREADS=1 OPENBLAS_NUM_THREADS=1 MKL_NUM_THREADS=1 taskset -c 0 \\
        python benchmarks/time_hypotheses.py fingerprint --n-train 129495 --n-val 1000
    OMP_NUM_THREADS=1 OPENBLAS_NUM_THREADS=1 MKL_NUM_THREADS=1 taskset -c 1 \\
        python benchmarks/time_hypotheses.py spectrum --n-train 11000 --n-val 1000
"""

from __future__ import annotations

import argparse
import time
import warnings

import numpy as np

from gwpred import BarycenterGraphPredictor
from gwpred.datasets import load_qm9, split_indices

KERNEL = {"fingerprint": "tanimoto", "spectrum": "rbf"}


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("inputs", choices=sorted(KERNEL))
    ap.add_argument("--n-train", type=int, default=11_000, help="training molecules, validation included")
    ap.add_argument("--n-val", type=int, default=1_000, help="of those, held out of fit (as in bench_hypotheses)")
    ap.add_argument("--n-test", type=int, default=1_000, help="test split size (as in bench_hypotheses)")
    ap.add_argument("--n-inputs", type=int, default=200, help="test molecules timed")
    ap.add_argument("--k", type=int, default=10)
    ap.add_argument("--seed", type=int, default=0)
    args = ap.parse_args()
    data = load_qm9(features=args.inputs, progress=False)
    train, test = split_indices(len(data), n_train=args.n_train, n_test=args.n_test, random_state=args.seed)
    held = np.random.default_rng(args.seed).permutation(len(train))
    fit_idx = np.sort(train[held[args.n_val :]])
    model = BarycenterGraphPredictor(kernel=KERNEL[args.inputs], random_state=args.seed)
    model.fit(data.X[fit_idx], [data.graphs[i] for i in fit_idx])
    X = data.X[test[: args.n_inputs]]
    formulas = [data.formulas[i] for i in test[: args.n_inputs]]
    warnings.simplefilter("ignore", UserWarning)
    model.predict_hypotheses(X[:2], top_k=2)  # build the training encodings before timing
    for mode, forms in (("formula", formulas), ("no formula", None)):
        t0 = time.perf_counter()
        model.predict_hypotheses(X, top_k=args.k, formulas=forms, output_kernel="fingerprint")
        sec = (time.perf_counter() - t0) / len(X)
        print(f"{args.inputs}, {len(fit_idx)} training molecules, {mode}: {sec:.3f} s per input "
              f"({len(X)} inputs, k={args.k})")


if __name__ == "__main__":
    main()

"""Learned templates vs kernel ridge barycenters vs 1-NN retrieval, side by side.

Tasks:

* ``qm9-fingerprint`` / ``qm9-spectrum``: QM9 through ``gwpred.datasets.load_qm9``
  (Morgan fingerprints, broadened harmonic spectra), ``--n-train`` training and
  ``--n-test`` test molecules never in training (``split_indices``, seed ``--seed``);
* ``grid``: a generic (non-molecular) task: the input is a noisy 12-number code of a
  labeled grid-like graph (``rows x cols`` grid, nodes labeled by row parity, some
  diagonal edges), invented here; the answer is known by construction.

Methods, each fitted on the same training pairs and scored on the same test pairs:

* ``1-NN``: the training graph of the most similar input (the input kernel of
  ``BarycenterGraphPredictor``: Tanimoto for fingerprints, RBF otherwise);
* ``kernel ridge``: ``BarycenterGraphPredictor`` with its defaults;
* ``templates``: ``TemplateGraphPredictor`` (``--n-templates``, ``--epochs``), and the
  same fitted model with ``decoding="free"``.

Columns: mean graph edit distance (uniform costs, exact within ``--time-limit``
seconds per pair, else the best upper bound), exact-match rate, training seconds,
prediction graphs per second (``--n-jobs`` workers, started before the clock), model file size.

    python benchmarks/bench_templates.py --tasks grid qm9-fingerprint --n-train 2000 --n-test 200
    python benchmarks/bench_templates.py                      # 10,000 train / 1,000 test
"""

from __future__ import annotations

import argparse
import os
import tempfile
import time

import networkx as nx
import numpy as np

from gwpred import BarycenterGraphPredictor, TemplateGraphPredictor, save_model
from gwpred.metrics import summarize

KERNEL = {"qm9-fingerprint": "tanimoto", "qm9-spectrum": "rbf", "grid": "rbf"}


def grid_task(n: int, seed: int) -> tuple[np.ndarray, list[nx.Graph]]:
    """Synthetic labeled graphs with a known answer: a rows x cols grid (2..4 x 2..5), nodes labeled
    "a"/"b" by row parity, plus diagonals in the cells whose flag is set; the input is the code
    (one-hot rows, one-hot cols, 3 diagonal flags) plus Gaussian noise of 0.3."""
    rng = np.random.default_rng(seed)
    X, graphs = [], []
    for _ in range(n):
        r, c = int(rng.integers(2, 5)), int(rng.integers(2, 6))
        flags = rng.integers(0, 2, 3)
        g = nx.grid_2d_graph(r, c)
        for k, f in enumerate(flags.tolist()):
            if f and k < min(r, c) - 1:
                g.add_edge((k, k), (k + 1, k + 1))
        g = nx.convert_node_labels_to_integers(g, label_attribute="rc")
        for v, d in g.nodes(data=True):
            d["label"] = "a" if d["rc"][0] % 2 == 0 else "b"
            del d["rc"]
        code = np.concatenate([np.eye(3)[r - 2], np.eye(4)[c - 2], flags, [0, 0]]).astype(float)
        X.append(code + 0.3 * rng.standard_normal(code.shape))
        graphs.append(g)
    return np.array(X), graphs


def load(task: str, n_train: int, n_test: int, seed: int) -> tuple:
    if task == "grid":
        X, graphs = grid_task(n_train + n_test, seed)
        return X[:n_train], graphs[:n_train], X[n_train:], graphs[n_train:]
    from gwpred.datasets import load_qm9, split_indices

    data = load_qm9(features=task.split("-")[1], progress=False)
    train, test = split_indices(len(data.graphs), n_train=n_train, n_test=n_test, random_state=seed)
    return data.X[train], [data.graphs[i] for i in train], data.X[test], [data.graphs[i] for i in test]


def file_size(model: object) -> int:
    with tempfile.TemporaryDirectory() as tmp:
        path = os.path.join(tmp, "model.npz")
        save_model(model, path)
        return os.path.getsize(path)


def run(task: str, args: argparse.Namespace) -> None:
    Xtr, ytr, Xte, yte = load(task, args.n_train, args.n_test, args.seed)
    rows = []
    ridge = BarycenterGraphPredictor(kernel=KERNEL[task])
    t0 = time.perf_counter()
    ridge.fit(Xtr, ytr)
    fit_ridge = time.perf_counter() - t0
    # 1-NN: the largest input-kernel value among the training inputs
    t0 = time.perf_counter()
    nearest = np.concatenate([ridge.input_kernel(Xte[s : s + 256], Xtr).argmax(1) for s in range(0, len(Xte), 256)])
    pred = [ytr[i] for i in nearest]
    rows.append(("1-NN", pred, 0.0, time.perf_counter() - t0, file_size(ridge)))
    ridge.set_params(n_jobs=args.n_jobs)
    ridge.predict(Xte[:8])  # start the worker processes before the clock, for every timed model
    t0 = time.perf_counter()
    pred = ridge.predict(Xte)
    rows.append(("kernel ridge", pred, fit_ridge, time.perf_counter() - t0, file_size(ridge)))
    tmpl = TemplateGraphPredictor(n_templates=args.n_templates, epochs=args.epochs, random_state=args.seed,
                                  cluster_on=args.cluster_on, n_threads=args.n_threads, progress=args.progress)
    t0 = time.perf_counter()
    tmpl.fit(Xtr, ytr)
    fit_tmpl = time.perf_counter() - t0
    tmpl.set_params(n_jobs=args.n_jobs)
    tmpl.predict(Xte[:8])
    t0 = time.perf_counter()
    pred = tmpl.predict(Xte)
    rows.append(("templates", pred, fit_tmpl, time.perf_counter() - t0, file_size(tmpl)))
    tmpl.set_params(decoding="free")  # the same fitted model, decoded without its anchor template
    t0 = time.perf_counter()
    pred = tmpl.predict(Xte)
    rows.append(("templates, free", pred, fit_tmpl, time.perf_counter() - t0, file_size(tmpl)))
    print(f"\n{task}: {len(Xtr)} training, {len(Xte)} test pairs; templates: {args.n_templates} "
          f"(clusters of the {args.cluster_on}), "
          f"epochs run {len(tmpl.history_['train_loss'])} (best {tmpl.history_['best_epoch'] + 1}; "
          f"0: the warm start, before any FGW epoch), "
          f"prediction on {args.n_jobs} worker(s)")
    print(f"{'method':<16}{'mean GED':>10}{'exact':>8}{'train s':>10}{'graphs/s':>10}{'file KB':>10}")
    for name, pred, fit_s, pred_s, size in rows:
        s = summarize(pred, yte, time_limit=args.time_limit)
        print(f"{name:<16}{s['mean_ged']:>10.3f}{s['exact_match_rate']:>8.3f}{fit_s:>10.1f}"
              f"{len(Xte) / max(pred_s, 1e-9):>10.0f}{size / 1024:>10.0f}")


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--tasks", nargs="+", default=["qm9-fingerprint", "qm9-spectrum", "grid"], choices=list(KERNEL))
    ap.add_argument("--n-train", type=int, default=10_000)
    ap.add_argument("--n-test", type=int, default=1_000)
    ap.add_argument("--n-templates", type=int, default=32)
    ap.add_argument("--epochs", type=int, default=50)
    ap.add_argument("--cluster-on", default="inputs", choices=["inputs", "graphs"])
    ap.add_argument("--n-jobs", type=int, default=1)
    ap.add_argument("--n-threads", type=int, default=1)
    ap.add_argument("--seed", type=int, default=0)
    ap.add_argument("--time-limit", type=float, default=2.0)
    ap.add_argument("--progress", action="store_true")
    args = ap.parse_args()
    for task in args.tasks:
        run(task, args)


if __name__ == "__main__":
    main()

"""Molecules from fingerprints and from spectra on the full QM9 set, side by side.

For each input kind (Morgan fingerprints with the Tanimoto kernel; broadened
harmonic spectra with the RBF kernel) and one deterministic split of QM9
(``--n-train`` training and ``--n-test`` test molecules, none of the test
molecules in training), this compares on the same inputs:

* ``1-NN retrieval``: the training molecule with the most similar input;
* ``POT barycenter``: POT's ``ot.gromov.fgw_barycenters`` of the top-10 kernel
  ridge neighbours (alpha 0.5, bond-order structure matrices, POT's default
  start), decoded by argmax element and bond order = round(C);
* ``gwpred no valence``: ``BarycenterGraphPredictor`` with ``valence=False``;
* ``gwpred``: the same with its defaults (``valence="auto"``, on for molecules);
* ``gwpred + formula``: the same given each test molecule's formula (heavy
  atoms and hydrogens), ``predict(X, formulas=...)``;
* with ``--fingerprint-search``, for fingerprints only: ``gwpred + fp search`` and
  ``gwpred + formula + fp search``, the two lines above with
  ``fingerprint_search=True`` (each prediction edited until its own Morgan
  fingerprint matches the input as closely as a beam search finds).

Below each table: the mean GED difference of each method to 1-NN retrieval
on the same test molecules, with a 95% bootstrap interval (paired).

Columns: mean graph edit distance to the truth (uniform costs, exact within
``--time-limit`` seconds per pair, else the best upper bound), exact-match
rate, validity (RDKit sanitises the molecule), formula match (heavy atoms and
implicit hydrogens equal the truth's formula), connected rate, and prediction
time per input.

Needs the extras ``chem`` and ``data`` (RDKit, qm9pack)::

    pip install -e ".[all]"
    python benchmarks/bench_qm9.py                       # 10,000 train / 500 test
    python benchmarks/bench_qm9.py --n-train 2000 --n-test 100   # a quick look
    python benchmarks/bench_qm9.py --inputs fingerprint --skip-pot --fingerprint-search

The first run parses QM9 once (about a minute) and caches it.
"""

from __future__ import annotations

import argparse
import time
from collections.abc import Callable
from typing import Any

import networkx as nx
import numpy as np

from gwpred import BarycenterGraphPredictor
from gwpred.chem import check_molecule
from gwpred.datasets import load_qm9, split_indices
from gwpred.formula import formula_matches
from gwpred.metrics import summarize
from gwpred.weights import kernel_matrix, sparsify

KERNEL = {"fingerprint": "tanimoto", "spectrum": "rbf"}


def pot_barycenter(
    model: BarycenterGraphPredictor, graphs: list[nx.Graph], X: np.ndarray, seed: int
) -> list[nx.Graph]:
    """POT fgw_barycenters of the top-10 kernel ridge neighbours, decoded by rounding (POT's random start, seeded)."""
    import ot

    labels = model.labels_.node_labels_
    idx, w = sparsify(model.weights_.raw_weights(X), 10)
    out = []
    for row_i, row_w in zip(idx, w):
        keep = row_w > 0
        row_i, row_w = row_i[keep], row_w[keep] / row_w[keep].sum()
        Cs, Ys, ps = [], [], []
        for i in row_i:
            g = graphs[i]
            nodes = list(g.nodes)
            pos = {v: k for k, v in enumerate(nodes)}
            C = np.zeros((len(nodes), len(nodes)))
            for u, v, d in g.edges(data=True):
                C[pos[u], pos[v]] = C[pos[v], pos[u]] = d["label"]
            Y = np.zeros((len(nodes), len(labels)))
            Y[np.arange(len(nodes)), [labels.index(g.nodes[v]["label"]) for v in nodes]] = 1.0
            Cs.append(C)
            Ys.append(Y)
            ps.append(np.full(len(nodes), 1.0 / len(nodes)))
        sizes = np.array([len(c) for c in Cs])
        order = np.argsort(sizes, kind="stable")
        cum = np.cumsum(row_w[order])
        n = int(sizes[order][np.searchsorted(cum, 0.5 - 1e-12)])  # weighted median size
        Yb, Cb = ot.gromov.fgw_barycenters(
            n, Ys, Cs, ps, list(row_w), alpha=0.5, p=np.full(n, 1.0 / n), loss_fun="square_loss",
            random_state=seed,
        )
        g = nx.Graph()
        g.add_nodes_from((k, {"label": labels[int(a)]}) for k, a in enumerate(np.argmax(Yb, axis=1)))
        bond = np.clip(np.rint(0.5 * (Cb + Cb.T)), 0, 3).astype(int)
        iu, ju = np.nonzero(np.triu(bond, 1))
        g.add_edges_from((int(a), int(b), {"label": int(bond[a, b])}) for a, b in zip(iu, ju))
        out.append(g)
    return out


def row(name: str, pred: list[nx.Graph], truth: list[nx.Graph], formulas: list[str], seconds: float,
        args: argparse.Namespace) -> dict:
    s = summarize(pred, truth, time_limit=args.time_limit, n_jobs=args.n_jobs, progress=False)
    valid = [check_molecule(g).valid for g in pred]
    return {
        "method": name,
        "mean GED": s["mean_ged"],
        "exact": s["exact_match_rate"],
        "valid": float(np.mean(valid)),
        "formula": float(np.mean([v and formula_matches(g, f) for g, f, v in zip(pred, formulas, valid)])),
        "connected": s["connected_rate"],
        "ms/input": 1000 * seconds / len(pred),
        "solved": s["exact_share"],
        "ged": np.array([item["ged"] for item in s["items"]], dtype=float),
    }


def paired_gap(a: np.ndarray, b: np.ndarray, seed: int, n_boot: int = 2000) -> tuple[float, float, float]:
    """Mean of a - b with a 95% bootstrap interval over the test molecules (paired)."""
    d = a - b
    rng = np.random.default_rng(seed)
    boot = d[rng.integers(0, len(d), size=(n_boot, len(d)))].mean(1)
    return float(d.mean()), float(np.quantile(boot, 0.025)), float(np.quantile(boot, 0.975))


def timed(fn: Callable[..., list[nx.Graph]], *args: Any, **kwargs: Any) -> tuple[list[nx.Graph], float]:
    t0 = time.perf_counter()
    out = fn(*args, **kwargs)
    return out, time.perf_counter() - t0


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--n-train", type=int, default=10_000)
    ap.add_argument("--n-test", type=int, default=500)
    ap.add_argument("--seed", type=int, default=0)
    ap.add_argument("--inputs", nargs="+", default=["fingerprint", "spectrum"], choices=sorted(KERNEL))
    ap.add_argument("--time-limit", type=float, default=2.0, help="seconds per GED pair (default: 2)")
    ap.add_argument("--n-jobs", type=int, default=2, help="processes for GED scoring (default: 2)")
    ap.add_argument("--weight-model", default="dense", choices=["auto", "dense", "local"],
                    help="kernel ridge solve (default: dense, as in the README's table)")
    ap.add_argument("--skip-pot", action="store_true", help="leave out the POT barycenter line")
    ap.add_argument("--fingerprint-search", action="store_true",
                    help="fingerprints: also the two gwpred lines with fingerprint_search=True")
    args = ap.parse_args()

    print(f"QM9: {args.n_train} training / {args.n_test} test molecules, seed {args.seed}")
    for kind in args.inputs:
        t0 = time.perf_counter()
        data = load_qm9(features=kind)
        train, test = split_indices(len(data), n_train=args.n_train, n_test=args.n_test, random_state=args.seed)
        Xtr, Xte = data.X[train], data.X[test]
        gtr = [data.graphs[i] for i in train]
        truth = [data.graphs[i] for i in test]
        formulas = [data.formulas[i] for i in test]
        model = BarycenterGraphPredictor(kernel=KERNEL[kind], random_state=args.seed,
                                         weight_model=args.weight_model).fit(Xtr, gtr)
        print(f"\n== {kind} ({data.X.shape[1]} features, kernel {KERNEL[kind]}): "
              f"loaded and fitted in {time.perf_counter() - t0:.0f} s")
        rows = []
        t0 = time.perf_counter()
        nearest = [gtr[j] for j in kernel_matrix(Xte, Xtr, model.kernel, model.weights_.gamma_).argmax(1)]
        sec = time.perf_counter() - t0
        rows.append(row("1-NN retrieval", nearest, truth, formulas, sec, args))
        if not args.skip_pot:
            pred, sec = timed(pot_barycenter, model, gtr, Xte, args.seed)
            rows.append(row("POT barycenter", pred, truth, formulas, sec, args))
        model.set_params(valence=False)
        pred, sec = timed(model.predict, Xte)
        rows.append(row("gwpred no valence", pred, truth, formulas, sec, args))
        model.set_params(valence="auto")
        pred, sec = timed(model.predict, Xte)
        rows.append(row("gwpred", pred, truth, formulas, sec, args))
        pred, sec = timed(model.predict, Xte, formulas=formulas)
        rows.append(row("gwpred + formula", pred, truth, formulas, sec, args))
        if args.fingerprint_search and kind == "fingerprint":
            model.set_params(fingerprint_search=True).fit(Xtr, gtr)
            pred, sec = timed(model.predict, Xte)
            rows.append(row("gwpred + fp search", pred, truth, formulas, sec, args))
            pred, sec = timed(model.predict, Xte, formulas=formulas)
            rows.append(row("gwpred + formula + fp search", pred, truth, formulas, sec, args))
        head = (f"| {'method':<28} | mean GED | exact | valid | formula | connected | ms/input |")
        print(head)
        print("|" + "|".join("-" * (len(c)) for c in head.split("|")[1:-1]) + "|")
        for r in rows:
            print(f"| {r['method']:<28} | {r['mean GED']:8.2f} | {100 * r['exact']:4.1f}% | {100 * r['valid']:4.1f}% "
                  f"| {100 * r['formula']:6.1f}% | {100 * r['connected']:8.1f}% | {r['ms/input']:8.1f} |")
        base = rows[0]["ged"]
        for r in rows[1:]:
            mean, lo, hi = paired_gap(r["ged"], base, args.seed)
            print(f"{r['method']} - 1-NN: mean GED difference {mean:+.2f} (95% bootstrap interval {lo:+.2f} .. {hi:+.2f})")
        print(f"GED exact for at least {100 * min(r['solved'] for r in rows):.1f}% of pairs per line "
              f"(else best upper bound within {args.time_limit:g} s)")


if __name__ == "__main__":
    main()

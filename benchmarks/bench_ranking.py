"""Candidate ranking: scores per second for each scorer, and the FGW solver settings it uses.

Part 1 fits a model (``--n-train`` molecules) and ranks, for ``--n-queries``
test molecules, every molecule of the data set with the test molecule's
heavy-atom formula (as ``gwpred compare`` does), with each scorer.  It
reports candidate scores per second with the candidate encodings already
cached (the usual case: a library is encoded once), the encoding rate
itself, and the ratio to the WL kernel scorer.  The FGW scorers run on
``--fgw-queries`` of the queries only (thousands of FGW problems per input).

Part 2 checks the FGW settings of :func:`gwpred.ranking.fgw_candidate_values`
on one query's candidate set: FGW from the barycenter of the query to each
candidate, from the product plan, from the label-matching plan, and the
better of the two, each with 20 and with 1000 conditional-gradient steps:
mean value (lower is better: all are upper bounds of the same minimum),
the share of candidates where each start wins, the change of values from 20
to 1000 steps, and time.

Accuracy (top-k, GED against generation) is measured by ``gwpred compare``
(see the README).  Run::

    python benchmarks/bench_ranking.py                          # QM9 spectra, 10,000 training molecules
    python benchmarks/bench_ranking.py --data demo --n-train 2700   # bundled data, no extras needed

QM9 needs the extras ``data`` and ``chem`` (``pip install -e ".[all]"``).
"""

from __future__ import annotations

import argparse
import os
import time

import numpy as np

from gwpred import BarycenterGraphPredictor
from gwpred.compare import load_comparison_data
from gwpred.datasets import split_indices
from gwpred.fgw import _cg_batch, _initial_plans, feature_costs, pad_graphs
from gwpred.ranking import CandidateLibrary, candidate_fgw_arrays, prepare_candidates, rank_candidates
from gwpred.wl import LabelIds


def rates(model, X, library, rows, fgw_queries: int) -> None:
    """Part 1: scores per second, encodings cached beforehand."""
    runs = [("kernel", "wl"), ("kernel", "fingerprint"), ("fgw", "wl"), ("objective", "wl")]
    print(
        f"{'scorer':<24}{'inputs':>7}{'candidates':>12}{'encode /s':>11}{'scores /s':>12}{'vs kernel (wl)':>16}"
    )
    base = None
    for scorer, kernel in runs:
        n = len(rows) if scorer == "kernel" else min(fgw_queries, len(rows))
        sub = rows[:n]
        union = np.unique(np.concatenate(sub))
        lib = CandidateLibrary(library.graphs)  # fresh: time the encoding
        t0 = time.perf_counter()
        prepare_candidates(model, lib, union, scorer=scorer, output_kernel=kernel)
        enc = len(union) / (time.perf_counter() - t0)
        total = sum(len(r) for r in sub)
        t0 = time.perf_counter()
        rank_candidates(
            model, X[:n], lib, top_k=10, scorer=scorer, filter=sub, output_kernel=kernel, progress=False
        )
        rate = total / (time.perf_counter() - t0)
        base = base or rate
        name = f"{scorer} ({kernel})" if scorer == "kernel" else scorer
        print(f"{name:<24}{n:>7}{total:>12,}{enc:>11,.0f}{rate:>12,.0f}{rate / base:>15.3f}x")


def solver_settings(model, x, library, row) -> None:
    """Part 2: starts and step limits of the FGW scorer, on one candidate set."""
    soft = model.predict_barycenters(x[None])[0]
    k = model.labels_.n_node_labels
    F = np.concatenate([soft.node_scores[:, :k], np.zeros((len(soft.node_scores), 1))], 1)
    cands = candidate_fgw_arrays(library, LabelIds.of(model.labels_), row)
    Cs, Fs, q, sizes = pad_graphs([c.structure for c in cands], [c.features for c in cands])
    n = len(F)
    h = np.full(n, 1.0 / n)
    M = feature_costs(F, Fs)
    values, times = {}, {}
    for start in ("product", "features"):
        for steps in (20, 1000):
            t0 = time.perf_counter()
            T0 = _initial_plans(start, h, q, M, sizes)
            values[start, steps] = _cg_batch(
                M, soft.structure, Cs, h, q, T0, model.alpha, steps, 1e-7, 0.0, sizes
            )[1]
            times[start, steps] = time.perf_counter() - t0
    print(f"\n{len(row):,} candidates, FGW from the barycenter (adjacency and labels, alpha {model.alpha})")
    print(
        f"{'start':<22}{'steps':>6}{'mean value':>12}{'wins':>8}{'mean |change| to 1000 steps':>29}{'s':>8}"
    )
    for steps in (20, 1000):
        p, f = values["product", steps], values["features", steps]
        both = np.minimum(p, f)
        for name, v, wins, secs in (
            ("product", p, np.mean(p < f - 1e-9), times["product", steps]),
            ("label matching", f, np.mean(f < p - 1e-9), times["features", steps]),
            ("better of the two", both, float("nan"), times["product", steps] + times["features", steps]),
        ):
            ref = (
                np.minimum(values["product", 1000], values["features", 1000])
                if name.startswith("better")
                else (values["product" if name == "product" else "features", 1000])
            )
            won = "-" if np.isnan(wins) else f"{100 * wins:.1f}%"
            print(f"{name:<22}{steps:>6}{v.mean():>12.5f}{won:>8}{np.abs(v - ref).mean():>29.6f}{secs:>8.2f}")


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--data", default="qm9-spectrum", choices=["demo", "qm9-spectrum", "qm9-fingerprint"])
    ap.add_argument("--n-train", type=int, default=10_000)
    ap.add_argument("--n-queries", type=int, default=50)
    ap.add_argument("--fgw-queries", type=int, default=3)
    ap.add_argument("--seed", type=int, default=0)
    args = ap.parse_args()

    X, graphs, kernel = load_comparison_data(args.data, progress=False)
    train, test = split_indices(
        len(graphs), n_train=args.n_train, n_test=args.n_queries, random_state=args.seed
    )
    t0 = time.perf_counter()
    # the dense kernel ridge solve, as in the README's measurements (weight_model="auto" picks local above 5,000)
    model = BarycenterGraphPredictor(kernel=kernel, random_state=args.seed, weight_model="dense").fit(
        X[train], [graphs[i] for i in train]
    )
    fit_s = time.perf_counter() - t0
    library = CandidateLibrary(graphs)
    comps = library.compositions("label")
    groups: dict[tuple, list[int]] = {}
    for i, c in enumerate(comps):
        groups.setdefault(c, []).append(i)
    rows = [np.asarray(groups[comps[i]], dtype=np.int64) for i in test]
    print(
        f"# python benchmarks/bench_ranking.py --data {args.data} --n-train {args.n_train} "
        f"--n-queries {args.n_queries} --fgw-queries {args.fgw_queries} --seed {args.seed}"
    )
    print(
        f"# {len(train):,} training molecules (fit {fit_s:.0f} s), {len(test)} queries, candidates = all molecules "
        f"with the query's heavy-atom formula (mean {np.mean([len(r) for r in rows]):,.0f}); "
        f"{os.cpu_count()} CPUs seen; one process"
    )
    rates(model, X[test], library, rows, args.fgw_queries)
    solver_settings(model, X[test[0]], library, rows[0][:3000])


if __name__ == "__main__":
    main()

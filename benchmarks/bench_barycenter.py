"""gwpred's FGW barycenter against POT's ``ot.gromov.fgw_barycenters``, side by side.

Task: QM9 heavy-atom graphs from ``gwpred.datasets.load_demo`` (spectra as
inputs). For each query spectrum, kernel ridge weights over the training
molecules (``KernelRidgeWeights(kernel="rbf")``) keep their ``k`` largest
entries (``sparsify``); the barycenter size is the weighted median size of
those neighbours and the start graph is the highest-weight neighbour of that
size (adjacency and one-hot element features from ``LabelSpace``).

Both solvers get exactly the same graphs, weights, size, start structure and
start features; gwpred runs with its defaults apart from ``alpha``, POT with
its defaults apart from ``alpha``, ``init_C`` and ``init_X``. Each barycenter
is then judged by one common evaluator: the weighted sum over neighbours of
the best of POT's ``fused_gromov_wasserstein2`` started from the product
plan, from gwpred's final plans and from POT's final plans.

Run from the repository root::

    python benchmarks/bench_barycenter.py --queries 40 --seed 0 --alpha 0.5 0.9
"""

from __future__ import annotations

import argparse
import cProfile
import inspect
import io
import os
import platform
import pstats
import sys
import time
import warnings
from dataclasses import dataclass

import networkx as nx
import numpy as np
import ot
import scipy

import gwpred
from gwpred.codec import LabelSpace
from gwpred.datasets import load_demo
from gwpred.decode import weighted_median
from gwpred.fgw import feature_costs, fgw_barycenter
from gwpred.weights import KernelRidgeWeights, sparsify


@dataclass
class Problem:
    """One query: neighbour graphs, their weights, the size and start graph."""

    structures: list[np.ndarray]
    features: list[np.ndarray]
    weights: np.ndarray
    size: int
    start: int


def build_problems(n_queries: int, top_k: int, seed: int) -> tuple[list[Problem], dict]:
    X, graphs = load_demo()
    rng = np.random.default_rng(seed)
    order = rng.permutation(len(graphs))
    queries, train = order[:n_queries], order[n_queries:]
    space = LabelSpace().fit([graphs[i] for i in train])
    encoded = [space.encode(graphs[i]) for i in train]
    model = KernelRidgeWeights(kernel="rbf").fit(X[train])
    idx, W = sparsify(model.raw_weights(X[queries]), top_k=top_k)
    problems = []
    n_used = []
    for row, w in zip(idx, W):
        keep = w > 0  # clipped negative weights carry nothing: drop them for both solvers
        row, w = row[keep], w[keep] / w[keep].sum()
        sizes = np.array([encoded[i].structure.shape[0] for i in row])
        n = int(weighted_median(sizes, w))
        start = int(np.flatnonzero(sizes == n)[np.argmax(w[sizes == n])])
        problems.append(
            Problem(
                [encoded[i].structure for i in row],
                [encoded[i].features for i in row],
                w,
                n,
                start,
            )
        )
        n_used.append(len(row))
    info = {"n_train": len(train), "mean_neighbours": float(np.mean(n_used))}
    return problems, info


def run_gwpred(pb: Problem, alpha: float):
    t0 = time.perf_counter()
    res = fgw_barycenter(
        pb.structures, pb.features, pb.weights,
        pb.structures[pb.start], pb.features[pb.start], alpha=alpha,
    )
    elapsed = time.perf_counter() - t0
    plans = [res.plans[s][:, : len(c)] for s, c in enumerate(pb.structures)]
    return res.structure, res.features, plans, elapsed


def run_pot(pb: Problem, alpha: float):
    t0 = time.perf_counter()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        X, C, log = ot.gromov.fgw_barycenters(
            pb.size, pb.features, pb.structures, None, list(pb.weights), alpha=alpha,
            init_C=pb.structures[pb.start].copy(), init_X=pb.features[pb.start].copy(), log=True,
        )
    elapsed = time.perf_counter() - t0
    return C, X, [np.asarray(T) for T in log["T"]], elapsed


def common_objective(C, F, pb: Problem, alpha: float, plan_sets) -> float:
    """sum_s w_s FGW, each term the best of POT solves from several starts."""
    n = C.shape[0]
    h = np.full(n, 1.0 / n)
    total = 0.0
    for s, (Cs, Fs) in enumerate(zip(pb.structures, pb.features)):
        q = np.full(len(Cs), 1.0 / len(Cs))
        M = feature_costs(F, Fs)
        best = np.inf
        for G0 in [None] + [plans[s] for plans in plan_sets]:
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                v = ot.gromov.fused_gromov_wasserstein2(M, C, Cs, h, q, alpha=alpha, G0=G0)
            best = min(best, float(v))
        total += pb.weights[s] * best
    return total


def profile(problems: list[Problem], alpha: float, runner, top: int = 12) -> str:
    prof = cProfile.Profile()
    prof.enable()
    for pb in problems:
        runner(pb, alpha)
    prof.disable()
    out = io.StringIO()
    pstats.Stats(prof, stream=out).sort_stats("tottime").print_stats(top)
    return out.getvalue()


def main(argv: list[str] | None = None) -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--queries", type=int, default=40, help="number of test spectra")
    parser.add_argument("--seed", type=int, default=0, help="seed of the query/train split")
    parser.add_argument("--alpha", type=float, nargs="+", default=[0.5, 0.9], help="FGW trade-offs")
    parser.add_argument("--top-k", type=int, nargs="+", default=[10, 30], help="non-zero weights kept")
    parser.add_argument("--profile", action="store_true", help="cProfile both solvers on the last setting")
    args = parser.parse_args(argv)

    print("command: python " + " ".join([os.path.relpath(sys.argv[0])] + sys.argv[1:]))
    print(
        f"python {platform.python_version()}, numpy {np.__version__}, scipy {scipy.__version__}, "
        f"POT {ot.__version__}, networkx {nx.__version__}, gwpred {gwpred.__version__}"
    )
    print(f"machine: {platform.machine()}, {os.cpu_count()} cores, {platform.platform()}")
    default_alpha = inspect.signature(fgw_barycenter).parameters["alpha"].default
    print(
        f"gwpred fgw_barycenter: package defaults except alpha (its default alpha is {default_alpha}); "
        "POT fgw_barycenters: defaults except alpha, init_C, init_X"
    )
    print()

    rows = []
    last = None
    for k in args.top_k:
        t0 = time.perf_counter()
        problems, info = build_problems(args.queries, k, args.seed)
        print(
            f"k={k}: {len(problems)} queries, {info['n_train']} training molecules, "
            f"{info['mean_neighbours']:.1f} graphs with non-zero weight on average "
            f"(setup {time.perf_counter() - t0:.1f} s)",
            file=sys.stderr,
        )
        for alpha in args.alpha:
            t_ours, t_pot, ratio = [], [], []
            for pb in problems:
                C1, F1, P1, e1 = run_gwpred(pb, alpha)
                C2, F2, P2, e2 = run_pot(pb, alpha)
                o1 = common_objective(C1, F1, pb, alpha, [P1, P2])
                o2 = common_objective(C2, F2, pb, alpha, [P1, P2])
                t_ours.append(e1)
                t_pot.append(e2)
                ratio.append(o1 / o2 if o2 > 0 else (1.0 if o1 <= 0 else np.inf))
            ratio = np.array(ratio)
            rows.append(
                (k, info["mean_neighbours"], alpha, np.median(t_ours), np.median(t_pot),
                 np.median(t_pot) / np.median(t_ours), np.sum(t_pot) / np.sum(t_ours),
                 ratio.mean(), ratio.max(), ratio.min(), np.mean(ratio <= 1.01), np.mean(ratio < 1.0))
            )
            print(f"  done k={k} alpha={alpha}", file=sys.stderr)
            last = (problems, alpha)

    header = (
        "| k | graphs | alpha | median time gwpred (s) | median time POT (s) | time ratio POT/gwpred "
        "(medians) | (totals) | objective ratio gwpred/POT mean | worst | best | share <= POT x 1.01 "
        "| share < POT |"
    )
    print(header)
    print("|" + "---|" * (header.count("|") - 1))
    for r in rows:
        print(
            f"| {r[0]} | {r[1]:.1f} | {r[2]} | {r[3]:.4f} | {r[4]:.4f} | {r[5]:.1f} | {r[6]:.1f} "
            f"| {r[7]:.4f} | {r[8]:.4f} | {r[9]:.4f} | {r[10]:.0%} | {r[11]:.0%} |"
        )
    speed_ok = all(r[5] >= 5.0 for r in rows)
    quality_ok = all(r[10] == 1.0 for r in rows)
    print()
    print(
        f"target (gwpred >= 5x faster, objective never > 1% worse): speed {'met' if speed_ok else 'NOT met'}, "
        f"objective {'met' if quality_ok else 'NOT met'}"
    )
    if args.profile and last is not None:
        problems, alpha = last
        print(f"\ncProfile, gwpred fgw_barycenter, alpha={alpha}, {len(problems)} queries (top by own time):")
        print(profile(problems, alpha, run_gwpred))
        print(f"cProfile, POT fgw_barycenters, alpha={alpha}, {len(problems)} queries (top by own time):")
        print(profile(problems, alpha, run_pot))


if __name__ == "__main__":
    main()

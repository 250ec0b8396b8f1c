"""Prediction throughput: batched barycenters against one query at a time and against POT, side by side.

Task: QM9 through ``gwpred.datasets.load_qm9`` (Morgan fingerprints with the Tanimoto
kernel, or broadened spectra with the RBF kernel), ``--n-train`` training molecules and
``--n-test`` test molecules never in training (``split_indices``, seed ``--seed``).  One
``BarycenterGraphPredictor`` with default settings (top_k 10, anchored decoding) is fitted,
and its kernel ridge weights for the test inputs (``model.neighbors``, in one process and with
``n_jobs=2``, checked equal) are computed and timed on their own.  On exactly those neighbourhoods (``model.predict_weighted``), in one run:

* ``one at a time``: ``batch_size=1``, one process;
* ``batched``: ``batch_size=256`` (the default), one process;
* ``batched, n_jobs=2``: the same batches on two worker processes (started before the clock);
  both batched rows are timed ``--repeats`` times (median in the table, range after it);
* ``POT fgw_barycenters``: POT's barycenter of the same weighted graphs, same size, same start
  structure and features (``init_C``/``init_X``), same alpha, its other settings default;
  decoded by gwpred's ``free`` decoder (POT's barycenter nodes are not tied to the start
  graph's, which anchored decoding needs); on the first ``--pot-queries`` test inputs.

Columns: milliseconds and graphs per second for the barycenter and decoding step (the
weights excluded; they are printed apart, and end to end), mean graph edit distance to the
truth (uniform costs, exact within ``--time-limit`` seconds per pair, else the best upper
bound), exact match, and how many predictions equal the one-at-a-time path's.

Needs the extras ``chem`` and ``data``::

    python benchmarks/bench_batch.py --inputs fingerprint spectrum
"""

from __future__ import annotations

import argparse
import os
import time
import warnings

import networkx as nx
import numpy as np
import ot

from gwpred import BarycenterGraphPredictor
from gwpred.datasets import load_qm9, split_indices
from gwpred.fgw import transport_average
from gwpred.metrics import summarize
from gwpred.model.steps import DECODERS, SoftGraph, choose_size, choose_start, neighbourhood, padded_graphs
from gwpred.parallel import parallel_map

KERNEL = {"fingerprint": "tanimoto", "spectrum": "rbf"}


def _same(a: nx.Graph, b: nx.Graph) -> bool:
    return nx.node_link_data(a, edges="edges") == nx.node_link_data(b, edges="edges")


def _timed(model, idx, w, batch: int, n_jobs: int) -> tuple[list[nx.Graph], float]:
    """``predict_weighted`` on the same neighbourhoods with one batch size and number of workers."""
    model.set_params(batch_size=batch, n_jobs=n_jobs)
    t0 = time.perf_counter()
    pred = model.predict_weighted(idx, w)
    return pred, time.perf_counter() - t0


def _pot(hood, settings) -> nx.Graph:
    """POT's barycenter of one neighbourhood, from the same start, decoded freely."""
    n = choose_size(hood, settings.n_nodes)
    pos = choose_start(hood, n)
    C0, F0 = hood.structures[pos], hood.features[pos]
    if C0.shape[0] != n:  # as gwpred does: repeat the closest graph's nodes
        reps = np.resize(np.arange(C0.shape[0]), n)
        C0, F0 = C0[np.ix_(reps, reps)], F0[reps]
        np.fill_diagonal(C0, 0.0)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        X, C, log = ot.gromov.fgw_barycenters(
            n, hood.features, hood.structures, None, list(hood.weights), alpha=settings.alpha,
            init_C=C0.copy(), init_X=F0.copy(), log=True,
        )
    m = int(hood.sizes.max())
    plans = np.zeros((len(hood.indices), n, m))
    chans = np.zeros((len(hood.indices), m, m, settings.labels.n_edge_labels))
    for s, (T, E) in enumerate(zip(log["T"], hood.channels)):
        k = E.shape[0]
        plans[s, :, :k] = np.asarray(T)
        chans[s, :k, :k] = E
    E = transport_average(plans, chans, hood.weights, np.full(n, 1.0 / n))
    soft = SoftGraph(np.asarray(C), np.asarray(X), E, hood.indices, hood.weights, 0.0, int(hood.indices[pos]),
                     C0, np.zeros((n, n), dtype=np.int64))
    out = DECODERS["free"](soft, hood, settings)
    return settings.labels.build_graph(out.node_classes, out.edges, out.edge_classes)


def _nothing(i: int, padded: object) -> int:
    return i


def _send_cost(padded: object) -> float:
    """Seconds of one two-worker ``parallel_map`` call whose tasks do nothing but receive ``padded``."""
    best = np.inf
    for _ in range(3):
        t0 = time.perf_counter()
        parallel_map(_nothing, [(i,) for i in range(4)], n_jobs=2, shared={"padded": padded})
        best = min(best, time.perf_counter() - t0)
    return best


def reference_loop() -> float:
    """Seconds for a fixed pure-Python loop: the machine's speed at that moment (shared machines vary)."""
    t0 = time.perf_counter()
    x = 0
    for i in range(10_000_000):
        x += i
    return time.perf_counter() - t0


def run(kind: str, args: argparse.Namespace) -> None:
    start_loop = reference_loop()
    data = load_qm9(features=kind, progress=False)
    train, test = split_indices(len(data.graphs), n_train=args.n_train, n_test=args.n_test, random_state=args.seed)
    truth = [data.graphs[i] for i in test]
    model = BarycenterGraphPredictor(kernel=KERNEL[kind], weight_model=args.weight_model)
    model.fit(data.X[train], [data.graphs[i] for i in train])
    t0 = time.perf_counter()
    idx, w = model.neighbors(data.X[test])
    weights_1 = time.perf_counter() - t0
    model.set_params(n_jobs=2)
    model.neighbors(data.X[test[:600]])  # start the two worker processes before the clock
    t0 = time.perf_counter()
    idx2, w2 = model.neighbors(data.X[test])
    weights_s = time.perf_counter() - t0
    model.set_params(n_jobs=1)
    assert np.array_equal(idx, idx2) and np.array_equal(w, w2), "weights on two workers differ"
    settings = model._settings(False)
    n = len(idx)
    rows = []
    ref, t = _timed(model, idx, w, 1, 1)
    rows.append(("one at a time", ref, t, n))
    _timed(model, idx[:8], w[:8], 4, 2)  # start the two worker processes before the clock
    spread = {}
    for name, jobs in [("batched (256)", 1), ("batched (256), n_jobs=2", 2)]:
        # --repeats timed runs: the table shows the median, the range is printed after it
        times = []
        for _ in range(args.repeats):
            pred, t = _timed(model, idx, w, 256, jobs)
            times.append(t)
        rows.append((name, pred, float(np.median(times)), n))
        spread[name] = (n / max(times), n / min(times))
    hoods = [neighbourhood(model.training_, i, ww) for i, ww in zip(idx, w)]
    k = min(args.pot_queries, n)
    t0 = time.perf_counter()
    pot = [_pot(h, settings) for h in hoods[:k]]
    rows.append(("POT fgw_barycenters", pot, time.perf_counter() - t0, k))

    print(f"\n## {kind}: {len(train)} training, {n} test molecules (QM9, seed {args.seed}); "
          f"weight model {model.weight_model_}, {os.cpu_count()} CPUs; reference loop {start_loop:.2f} s "
          f"before, {reference_loop():.2f} s after (lower is a faster machine)")
    print(f"weights (model.neighbors): {1e3 * weights_1 / n:.2f} ms per graph in one process, "
          f"{1e3 * weights_s / n:.2f} with n_jobs=2 (the same weights); end to end with two workers: "
          f"{n / (weights_s + rows[2][2]):.0f} graphs/s\n")
    print(f"per call, sending the padded training graphs to two workers (an empty task each, best of 3): "
          f"in memory {1e3 * _send_cost(padded_graphs(model.training_)):.0f} ms, "
          f"file-backed (what predict uses) {1e3 * _send_cost(padded_graphs(model.training_, files=True)):.0f} ms\n")
    print("| barycenter + decoding | ms/graph | graphs/s | speed-up | mean GED | exact | same as one at a time |")
    print("|---|---|---|---|---|---|---|")
    base = rows[0][2] / rows[0][3]
    for name, pred, t, m in rows:
        s = summarize(pred, truth[:m], time_limit=args.time_limit, n_jobs=1)
        same = sum(_same(a, b) for a, b in zip(pred, ref[:m]))
        print(f"| {name} | {1e3 * t / m:.2f} | {m / t:.0f} | {base / (t / m):.1f}x | {s['mean_ged']:.3f} "
              f"| {100 * s['exact_match_rate']:.1f}% | {same}/{m} |", flush=True)
    for name, (low, high) in spread.items():
        print(f"{name}: {low:.0f}-{high:.0f} graphs/s over {args.repeats} runs (the table: the median)")


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--inputs", nargs="+", default=["fingerprint", "spectrum"], choices=list(KERNEL))
    ap.add_argument("--n-train", type=int, default=10000)
    ap.add_argument("--n-test", type=int, default=1000)
    ap.add_argument("--pot-queries", type=int, default=100)
    ap.add_argument("--weight-model", default="auto", choices=["auto", "dense", "local"])
    ap.add_argument("--time-limit", type=float, default=2.0)
    ap.add_argument("--seed", type=int, default=0)
    ap.add_argument("--repeats", type=int, default=3, help="timed runs of each batched row (median reported)")
    args = ap.parse_args()
    print("# python benchmarks/bench_batch.py " + " ".join(
        f"--{k.replace('_', '-')} {' '.join(map(str, v)) if isinstance(v, list) else v}" for k, v in vars(args).items()))
    for kind in args.inputs:
        run(kind, args)


if __name__ == "__main__":
    main()

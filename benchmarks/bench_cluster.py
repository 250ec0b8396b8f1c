"""One prediction job in one process, on loky workers, and on a Dask cluster, side by side.

A ``gwpred.BarycenterGraphPredictor`` (default settings, ``random_state=0``) is trained on
the first ``--train`` molecules of ``gwpred.datasets.load_demo()`` (QM9 spectra ->
heavy-atom graphs) and predicts the next ``--test`` molecules:

- in one process (``n_jobs=1``);
- on joblib's loky worker processes (``n_jobs=2``);
- inside ``gwpred.parallel.cluster(n_workers=k)`` with ``n_jobs=-1``: a Dask distributed
  ``LocalCluster`` on 127.0.0.1 with k = 1 and k = 2 worker processes (one thread each).

Each configuration first predicts two inputs (so worker processes are started and have
imported gwpred), then times the whole job ``--repeat`` times and keeps the fastest run.
The table gives seconds, the ratio to one process, and whether every predicted graph
equals the one-process graph (networkx node-link data).  The cluster's start-up time is
printed apart.  Needs the optional extra ``distributed``.

Usage::

    python benchmarks/bench_cluster.py --train 2700 --test 300
"""

from __future__ import annotations

import argparse
import os
import sys
import time
from collections.abc import Callable
from pathlib import Path

import networkx as nx

try:
    from gwpred import BarycenterGraphPredictor
except ImportError:  # run from a checkout without installing
    sys.path.insert(0, str(Path(__file__).resolve().parents[1]))
    from gwpred import BarycenterGraphPredictor
from gwpred.datasets import load_demo
from gwpred.parallel import cluster


def node_link(graphs: list[nx.Graph]) -> list[dict]:
    return [nx.node_link_data(g, edges="edges") for g in graphs]


def best_of(repeat: int, job: Callable[[], list[nx.Graph]]) -> tuple[float, list[nx.Graph]]:
    times, out = [], []
    for _ in range(repeat):
        t = time.perf_counter()
        out = job()
        times.append(time.perf_counter() - t)
    return min(times), out


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--train", type=int, default=2700, help="training molecules (2700)")
    parser.add_argument("--test", type=int, default=300, help="predicted molecules (300)")
    parser.add_argument("--repeat", type=int, default=2, help="timed runs per configuration, fastest kept (2)")
    args = parser.parse_args(argv)

    X, graphs = load_demo()
    if args.train + args.test > len(graphs):
        raise SystemExit(f"the demo has {len(graphs)} molecules; lower --train or --test")
    model = BarycenterGraphPredictor(random_state=0).fit(X[: args.train], graphs[: args.train])
    X_test = X[args.train : args.train + args.test]

    def predict(n_jobs: int) -> Callable[[], list[nx.Graph]]:
        def job() -> list[nx.Graph]:
            model.set_params(n_jobs=n_jobs)
            return model.predict(X_test)

        return job

    rows: list[tuple[str, float]] = []
    outputs: list[list[nx.Graph]] = []
    starts: dict[int, float] = {}

    secs, out = best_of(args.repeat, predict(1))
    rows.append(("one process (n_jobs=1)", secs))
    outputs.append(out)

    model.set_params(n_jobs=2)
    model.predict(X_test[:2])  # start the loky workers
    secs, out = best_of(args.repeat, predict(2))
    rows.append(("loky, n_jobs=2", secs))
    outputs.append(out)

    for k in (1, 2):
        t = time.perf_counter()
        with cluster(n_workers=k, timeout=60):
            starts[k] = time.perf_counter() - t
            model.set_params(n_jobs=-1)
            model.predict(X_test[:2])  # workers import gwpred
            secs, out = best_of(args.repeat, predict(-1))
        rows.append((f"Dask LocalCluster, {k} worker{'s' if k > 1 else ''}", secs))
        outputs.append(out)

    reference = node_link(outputs[0])
    same = [node_link(o) == reference for o in outputs]
    load = os.getloadavg()[0] if hasattr(os, "getloadavg") else float("nan")
    print(f"predict {args.test} QM9 demo molecules (trained on {args.train}, default settings); "
          f"{os.cpu_count()} processors, load average {load:.1f} at the end; fastest of {args.repeat} runs")
    head = f"{'configuration':<32}{'seconds':>9}{'ratio':>8}  identical to one process"
    print(head)
    print("-" * len(head))
    for (name, secs), ok in zip(rows, same):
        print(f"{name:<32}{secs:>9.2f}{secs / rows[0][1]:>8.2f}  {'yes' if ok else 'NO'}")
    print(f"cluster start-up (not in the times above): 1 worker {starts[1]:.1f} s, 2 workers {starts[2]:.1f} s")
    return 0 if all(same) else 1


if __name__ == "__main__":
    raise SystemExit(main())

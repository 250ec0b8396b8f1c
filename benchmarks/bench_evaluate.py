"""Time gwpred.metrics.summarize on predictions of QM9 heavy-atom graphs.

A ``gwpred.BarycenterGraphPredictor`` (default settings, ``random_state=0``) is trained
on the first ``--train`` molecules of ``gwpred.datasets.load_demo()`` (QM9 spectra ->
heavy-atom graphs) and predicts the next ``--test`` molecules; ``summarize`` then scores
the predictions against the true graphs (unit-cost edit distance, node and edge scores)
with ``n_jobs=1`` and with ``n_jobs=2``, and both wall times are printed side by side.

Usage::

    python benchmarks/bench_evaluate.py --train 2000 --test 1000
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

try:
    from gwpred import BarycenterGraphPredictor
except ImportError:  # run from a checkout without installing
    sys.path.insert(0, str(Path(__file__).resolve().parents[1]))
    from gwpred import BarycenterGraphPredictor
from gwpred.datasets import load_demo
from gwpred.metrics import summarize


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--train", type=int, default=2000, help="training molecules (2000)")
    parser.add_argument("--test", type=int, default=1000, help="scored molecules (1000)")
    parser.add_argument(
        "--time-limit", type=float, default=None, help="seconds per edit distance (none)"
    )
    args = parser.parse_args(argv)

    x, graphs = load_demo()
    if args.train + args.test > len(graphs):
        raise SystemExit(f"the demo has {len(graphs)} molecules; lower --train or --test")
    t = time.perf_counter()
    est = BarycenterGraphPredictor(random_state=0).fit(x[: args.train], graphs[: args.train])
    predicted = est.predict(x[args.train : args.train + args.test])
    true = graphs[args.train : args.train + args.test]
    print(
        f"trained on {args.train}, predicted {args.test} QM9 demo molecules in "
        f"{time.perf_counter() - t:.1f} s"
    )

    times, summaries = {}, {}
    for n_jobs in (1, 2):
        t = time.perf_counter()
        summaries[n_jobs] = summarize(predicted, true, n_jobs=n_jobs, time_limit=args.time_limit)
        times[n_jobs] = time.perf_counter() - t
    same = all(
        a["ged"] == b["ged"] for a, b in zip(summaries[1]["items"], summaries[2]["items"])
    )
    s = summaries[1]
    print(f"summarize on {args.test} pairs   n_jobs=1   n_jobs=2")
    print(f"{'wall time (s)':<25}{times[1]:>9.1f}{times[2]:>11.1f}")
    print(
        f"mean GED {s['mean_ged']:.3f}, median GED {s['median_ged']:.1f}, exact share "
        f"{s['exact_share']:.3f}, exact match rate {s['exact_match_rate']:.3f}, edge F1 "
        f"{s['edge_f1']:.3f}; same edit distances with 1 and 2 jobs: {same}"
    )
    return 0


if __name__ == "__main__":
    raise SystemExit(main())

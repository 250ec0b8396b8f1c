"""Fingerprint search on drug-like molecules: beam width against accuracy and time per molecule.

Data and split as in ``bench_druglike.py`` (``gwpred.datasets.load_druglike``: the NCI
sample shipped in RDKit's wheel; Morgan fingerprints, radius 2, 2048 bits; seed 0,
300 test molecules of which the first ``--n-test`` are used here; 3,655 training).

One model (``kernel="tanimoto"``, ``fingerprint_search=True``) predicts each test molecule
on its own, once per ``search_width`` (and once with the search off), so that each
molecule's time is measured: the whole ``predict`` call, weights, barycenter and decoding
included, in one process.  Columns: mean GED to the truth (uniform costs, 2 s per pair,
the certified upper bound where not proven), exact match, the share whose fingerprint
equals the input's, how many of those are the exact molecule, and the median, 90th
percentile and largest time per molecule.

Needs the extra ``chem``::

    python benchmarks/bench_fingerprint_search.py              # about 15 minutes
    python benchmarks/bench_fingerprint_search.py --widths 1 5 --n-test 30
"""

from __future__ import annotations

import argparse
import time
import warnings

import numpy as np

from gwpred import BarycenterGraphPredictor
from gwpred.chem import check_molecule, morgan_fingerprints
from gwpred.datasets import load_druglike, split_indices
from gwpred.ged import edit_distance


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--n-test", type=int, default=100)
    ap.add_argument("--widths", type=int, nargs="+", default=[1, 2, 5, 10])
    ap.add_argument("--seed", type=int, default=0)
    args = ap.parse_args()

    data = load_druglike()
    X = morgan_fingerprints(data.smiles)
    G = data.graphs
    train, test = split_indices(len(G), n_train=len(G) - 300, n_test=300, random_state=args.seed)
    rng = np.random.default_rng(args.seed)  # the 40 large molecules bench_druglike.py leaves out
    large = [i for i in train if 35 <= G[i].number_of_nodes() <= 45]
    large = sorted(rng.choice(large, size=min(40, len(large)), replace=False).tolist())
    train = np.setdiff1d(train, large)
    test = test[: args.n_test]
    model = BarycenterGraphPredictor(kernel="tanimoto", fingerprint_search=True).fit(X[train], [G[i] for i in train])
    print(f"{len(train)} training, {len(test)} test molecules; inputs are {model.fingerprint_spec_}")
    print("\n| search_width | mean GED | exact | fingerprint = input | exact among those | valid | "
          "s/molecule median | p90 | max |")
    print("|---|---|---|---|---|---|---|---|---|")
    for width in [0, *args.widths]:
        model.set_params(fingerprint_search=width > 0, search_width=max(width, 1))
        if width == 0:
            model.fit(X[train], [G[i] for i in train])  # the search off: fingerprint_spec_ is None
        elif model.fingerprint_spec_ is None:
            model.fit(X[train], [G[i] for i in train])
        pred, secs = [], []
        for i in test:
            t0 = time.perf_counter()
            with warnings.catch_warnings():
                warnings.simplefilter("ignore", RuntimeWarning)  # decoding notes
                pred.append(model.predict(X[i : i + 1])[0])
            secs.append(time.perf_counter() - t0)
        ged = np.array([edit_distance(p, G[i], time_limit=2.0).value for p, i in zip(pred, test)])
        equal = np.array([p.graph.get("fingerprint_similarity", 0.0) == 1.0 for p in pred])
        exact_equal = f"{np.mean(ged[equal] == 0):.1%}" if equal.any() else "-"
        valid = np.mean([check_molecule(p).valid for p in pred])
        secs_a = np.array(secs)
        name = "off (default)" if width == 0 else str(width)
        print(f"| {name} | {ged.mean():.2f} | {np.mean(ged == 0):.1%} | {equal.mean():.1%} | {exact_equal} | "
              f"{valid:.0%} | {np.median(secs_a):.2f} | {np.quantile(secs_a, 0.9):.2f} | {secs_a.max():.2f} |",
              flush=True)


if __name__ == "__main__":
    main()

"""Drug-like molecules (10-50 heavy atoms, charged groups): fingerprint -> molecule.

Task: predict a molecule's heavy-atom graph from its Morgan fingerprint (radius 2,
2048 bits, ``gwpred.chem.morgan_fingerprints``; Tanimoto kernel).

Data: ``gwpred.datasets.load_druglike``: the NCI open-database sample
``Data/NCI/first_5K.smi`` shipped in the PyPI wheel of ``rdkit`` (BSD-3-Clause licence;
the structures are public data of the US National Cancer Institute), largest fragment,
10-50 heavy atoms of B, C, N, O, P, S, F, Cl, Br, I, Si, Se, no radicals, duplicates
dropped: 3,995 molecules. Atom labels keep formal charges (``"N+"``, ``"O-"``), bonds
are kekulé orders. ``--n-test`` molecules (seeded split, ``split_indices``) are the test
set, all others but the ``--n-large`` ones train (3,655 with the defaults).

Rows, on the same split:

* ``1-NN``: the training graph of the most similar fingerprint;
* ``gwpred, no rules``: ``BarycenterGraphPredictor(kernel="tanimoto", valence=False)``;
* ``gwpred default``: the same with ``valence="auto"`` (valence rules on: every label is
  an atom with RDKit valences);
* ``gwpred + formula``: the default given each test molecule's formula (RDKit's
  ``CalcMolFormula``: elements, hydrogens, net charge);
* ``gwpred + fingerprint search``: the default with ``fingerprint_search=True``: each
  prediction edited by a beam search until its own Morgan fingerprint matches the input
  as closely as found (no formula);
* ``gwpred + formula + fingerprint search``: the same given the formulas (the search keeps
  each formula).

Columns: mean graph edit distance to the truth (uniform costs, ``gwpred.ged``, time limit
``--ged-limit`` s per pair; ``lower``/``upper`` the means of the certified bounds, and the
share of pairs proven exact or bounded within 1 by a call that returned within 1.1 times
the limit), exact match, validity (RDKit
sanitisation, ``gwpred.chem.check_molecule``), formula match (``gwpred.formula.
formula_matches`` against the true formula, with hydrogens and charge), ms per molecule
(prediction, weights included, one process). For the valence rows, the decoding step's time
per molecule (median and max) and the predictions that carry a ``decoding_note`` are
printed after the table, also for ``--n-large`` more test molecules of 35-45 heavy atoms
(drawn from the rest and left out of training; timed only). The decoding runs in the
predicting process: one core.

Needs the extra ``chem``::

    python benchmarks/bench_druglike.py            # about 35 minutes on 2 cores
    python benchmarks/bench_druglike.py --n-test 100
"""

from __future__ import annotations

import argparse
import time
import warnings

import numpy as np

from gwpred import BarycenterGraphPredictor
from gwpred.chem import check_molecule, morgan_fingerprints
from gwpred.datasets import load_druglike, split_indices
from gwpred.formula import formula_matches, graph_formula
from gwpred.ged import edit_distance
from gwpred.model import steps


def _ged(pred, truth, limit: float) -> tuple[list, np.ndarray]:
    """Edit distances with their certified bounds, and each call's wall time."""
    res, secs = [], []
    for p, t in zip(pred, truth):
        t0 = time.perf_counter()
        res.append(edit_distance(p, t, time_limit=limit))
        secs.append(time.perf_counter() - t0)
    return res, np.array(secs)


def _timed_decoding() -> list[tuple[int, float, str]]:
    """Wrap the decoding step so that each call's size, time and note are recorded."""
    record: list[tuple[int, float, str]] = []
    original = steps.decode_query

    def timed(soft, hood, settings, formula=None):
        t0 = time.perf_counter()
        g = original(soft, hood, settings, formula)
        record.append((g.number_of_nodes(), time.perf_counter() - t0, g.graph.get("decoding_note", "")))
        return g

    steps.decode_query = timed
    return record


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--n-test", type=int, default=300)
    ap.add_argument("--seed", type=int, default=0)
    ap.add_argument("--ged-limit", type=float, default=2.0)
    ap.add_argument("--n-large", type=int, default=40,
                    help="extra test molecules of 35-45 heavy atoms, for decoding times only")
    args = ap.parse_args()

    data = load_druglike()
    X = morgan_fingerprints(data.smiles)
    train, test = split_indices(len(data.graphs), n_train=len(data.graphs) - args.n_test, n_test=args.n_test,
                                random_state=args.seed)
    G = data.graphs
    rng = np.random.default_rng(args.seed)
    large = [i for i in train if 35 <= G[i].number_of_nodes() <= 45]
    large = sorted(rng.choice(large, size=min(args.n_large, len(large)), replace=False).tolist())
    train = np.setdiff1d(train, large)
    Gtr, Gte = [G[i] for i in train], [G[i] for i in test]
    formulas = [graph_formula(g) for g in Gte]
    print(f"{len(G)} molecules ({data.rejected}); {len(train)} training, {len(test)} test; "
          f"test sizes {min(g.number_of_nodes() for g in Gte)}-{max(g.number_of_nodes() for g in Gte)} heavy atoms")

    record = _timed_decoding()
    rows = []
    one = BarycenterGraphPredictor(kernel="tanimoto", n_neighbors=1).fit(X[train], Gtr)
    idx, _ = one.neighbors(X[test])
    t0 = time.perf_counter()
    idx, _ = one.neighbors(X[test])
    nn = [Gtr[int(i[0])] for i in idx]
    rows.append(("1-NN", nn, time.perf_counter() - t0, None))
    runs = [("gwpred, no rules", False, None, False), ("gwpred default", "auto", None, False),
            ("gwpred + formula", "auto", formulas, False), ("gwpred + fingerprint search", "auto", None, True),
            ("gwpred + formula + fingerprint search", "auto", formulas, True)]
    decode_stats = {}
    large_quality: dict[str, str] = {}
    for name, valence, fs, search in runs:
        model = BarycenterGraphPredictor(kernel="tanimoto", valence=valence, fingerprint_search=search).fit(X[train], Gtr)
        del record[:]
        t0 = time.perf_counter()
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)  # notes are counted from the graphs
            pred = model.predict(X[test], formulas=fs)
        rows.append((name, pred, time.perf_counter() - t0, fs))
        decode_stats[name] = list(record)
        if search:
            sims = np.array([g.graph["fingerprint_similarity"] for g in pred])
            print(f"{name}: fingerprint equal to the input for {np.mean(sims == 1):.1%} of the test molecules")
        if valence and large and not search:  # decoding times on molecules of 35-45 heavy atoms
            del record[:]
            large_fs = None if fs is None else [graph_formula(G[i]) for i in large]
            with warnings.catch_warnings():
                warnings.simplefilter("ignore", RuntimeWarning)
                got = model.predict(X[large], formulas=large_fs)
            decode_stats[name + ", 35-45 atoms"] = list(record)
            valid = np.mean([check_molecule(g).valid for g in got])
            match = "" if large_fs is None else f", formula match {np.mean([formula_matches(g, f) for g, f in zip(got, large_fs)]):.1%}"
            large_quality[name] = f"valid {valid:.1%}{match}"

    print(f"\n| model | mean GED | lower / upper | GED gap <= 1 in {args.ged_limit:g} s | exact | valid | "
          "formula match | ms/molecule |")
    print("|---|---|---|---|---|---|---|---|")
    for name, pred, secs, _ in rows:
        res, ged_secs = _ged(pred, Gte, args.ged_limit)
        lower = np.array([r.lower for r in res])
        upper = np.array([r.upper for r in res])
        # proven exact or certified within 1, and the call back within the limit (10% slack for
        # the return after HiGHS's own time limit)
        tight = np.mean((upper - lower <= 1) & (ged_secs <= 1.1 * args.ged_limit))
        exact = np.mean([r.exact and r.value == 0 for r in res])
        valid = np.mean([check_molecule(g).valid for g in pred])
        fmatch = np.mean([formula_matches(g, f) for g, f in zip(pred, formulas)])
        print(f"| {name} | {np.mean([r.value for r in res]):.2f} | {lower.mean():.2f} / {upper.mean():.2f} | "
              f"{tight:.1%} | {exact:.1%} | {valid:.1%} | {fmatch:.1%} | {1000 * secs / len(pred):.0f} |", flush=True)
    print()
    for name, rec in decode_stats.items():
        if not rec or name == "gwpred, no rules":
            continue
        sizes = np.array([r[0] for r in rec])
        times = np.array([r[1] for r in rec])
        notes = [r[2] for r in rec if r[2]]
        quality = large_quality.get(name.replace(", 35-45 atoms", ""), "") if "35-45" in name else ""
        print(f"{name}: {len(rec)} decodings of {np.median(sizes):.0f} atoms (median): "
              f"{np.median(times) * 1000:.0f} ms median, max {times.max():.2f} s "
              f"(budget {steps.DECODE_BUDGET:g} s); {len(notes)} with a note" + (f"; {quality}" if quality else ""))
        for note in notes[:5]:
            print("   ", note)


if __name__ == "__main__":
    main()

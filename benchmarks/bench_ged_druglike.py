"""Bounds and times of gwpred.ged.edit_distance on drug-like molecule pairs (10-50 atoms).

Task: the graph edit distance (unit costs) between a predicted molecule and the true
one should be proven exact, or bracketed by certified bounds at most 1 apart, within
``--time-limit`` seconds (2 by default) for at least 90% of the pairs. This script
measures how often that holds on molecules larger than QM9's.

Data: ``gwpred.datasets.load_druglike``, the NCI open-database sample
``Data/NCI/first_5K.smi`` that ships inside the PyPI wheel of the package ``rdkit``
(BSD-3-Clause licence; the sample itself is public data of the US National Cancer
Institute): largest fragment, 10-50 heavy atoms, all of C, N, O, S, P, F, Cl, Br, I, B,
Si, Se, no radical, duplicates by canonical SMILES dropped. Graphs: node label = element,
with the charge for charged atoms ("N+", "O-"); edge label = bond order 1/2/3 of the
kekulé form.

Pairs (all seeded by ``--seed`` through ``numpy.random.default_rng``):

* ``1-NN``: ``--n-test`` test molecules are split off; each is paired with its nearest
  other molecule by Tanimoto similarity of Morgan fingerprints (radius 2, 2048 bits),
  which is the prediction of a 1-nearest-neighbour model.
  ``--train-size`` draws a smaller training pool (less similar, harder pairs).
* ``close``: each test molecule against a copy changed by 1-4 random unit-cost edits
  (relabel a node, delete an edge, insert a single bond), mimicking good predictions;
  the number of edits k is an upper bound on the distance.

Each pair gets one ``edit_distance(prediction, truth, time_limit=...)`` call. Columns of
the summary table, per pair set:

* ``pairs``, ``nodes``: number of pairs and mean n1 + n2;
* ``proven``: % with lower == upper; ``gap<=1``: % with upper - lower <= 1;
* ``<=limit``: % whose wall time is at most the time limit; ``met``: % with gap <= 1
  and wall time <= limit (the acceptance criterion);
* ``p50``/``p90``/``max``: wall time in seconds; ``lower``/``upper``: their means;
* ``>k``: close pairs whose upper bound exceeds the number of edits made.

Then networkx's ``graph_edit_distance`` (matching labels, ``--nx-timeout`` seconds)
checks the smallest ``--nx-pairs`` pairs of each set: its value is the cost of an edit
path, so gwpred's lower bound must not exceed it; when networkx finishes before its
timeout the value is optimal and must lie within gwpred's bounds (equal to an exact
result). Any contradiction is printed as "CONTRADICTION" and makes the exit status 1.

Usage::

    python benchmarks/bench_ged_druglike.py --n-test 200 --time-limit 2 --seed 0
    python benchmarks/bench_ged_druglike.py --n-test 50 --nx-pairs 0 --csv /tmp/pairs.csv
"""

from __future__ import annotations

import argparse
import csv
import os
import sys
import time
from pathlib import Path

import networkx as nx
import numpy as np

try:
    import gwpred  # noqa: F401
except ImportError:  # run from a checkout without installing
    sys.path.insert(0, str(Path(__file__).resolve().parents[1]))
from gwpred.datasets import load_druglike
from gwpred.ged import edit_distance

#: Labels a node may be relabelled to in the close pairs.
RELABEL = ["C", "N", "O", "S", "F", "Cl"]


def _rdkit():
    try:
        from rdkit import Chem, DataStructs, RDConfig, RDLogger
        from rdkit.Chem import rdFingerprintGenerator
    except ImportError:
        raise SystemExit("this benchmark needs RDKit: pip install rdkit") from None
    RDLogger.DisableLog("rdApp.*")
    return Chem, DataStructs, RDConfig, rdFingerprintGenerator


def nearest_pairs(
    mols: list, n_test: int, rng: np.random.Generator, train_size: int | None = None
) -> tuple[list, list]:
    """Test indices and, for each, the index of its most similar training molecule.

    The training molecules are all the others, or the first ``train_size`` of them in
    the seeded order (a smaller pool gives less similar, harder pairs).
    """
    _, DataStructs, _, gen_mod = _rdkit()
    gen = gen_mod.GetMorganGenerator(radius=2, fpSize=2048)
    fps = [gen.GetFingerprint(m) for m in mols]
    order = rng.permutation(len(mols))
    test, train = order[:n_test], order[n_test:]
    if train_size is not None:
        train = train[:train_size]
    train_fps = [fps[j] for j in train]
    nearest = []
    for i in test:
        sims = DataStructs.BulkTanimotoSimilarity(fps[i], train_fps)
        nearest.append(int(train[int(np.argmax(sims))]))
    return [int(i) for i in test], nearest


def perturb(g: nx.Graph, rng: np.random.Generator) -> tuple[nx.Graph, int]:
    """A copy of ``g`` with 1-4 unit-cost edits, each on a node or node pair not yet touched."""
    h = g.copy()
    k = int(rng.integers(1, 5))
    nodes = list(h.nodes)
    touched_nodes: set = set()
    touched_pairs: set = set()
    done = 0
    while done < k:
        kind = int(rng.integers(3))
        if kind == 0:  # relabel a node
            free = [v for v in nodes if v not in touched_nodes]
            if not free:
                continue
            v = free[int(rng.integers(len(free)))]
            choices = [x for x in RELABEL if x != h.nodes[v]["label"]]
            h.nodes[v]["label"] = choices[int(rng.integers(len(choices)))]
            touched_nodes.add(v)
        elif kind == 1:  # delete an edge
            edges = [e for e in h.edges if frozenset(e) not in touched_pairs]
            if not edges:
                continue
            u, v = edges[int(rng.integers(len(edges)))]
            h.remove_edge(u, v)
            touched_pairs.add(frozenset((u, v)))
        else:  # insert a single bond
            u, v = (nodes[int(x)] for x in rng.choice(len(nodes), 2, replace=False))
            if h.has_edge(u, v) or frozenset((u, v)) in touched_pairs:
                continue
            h.add_edge(u, v, label=1)
            touched_pairs.add(frozenset((u, v)))
        done += 1
    return h, k


def run_pairs(pairs: list[tuple[nx.Graph, nx.Graph]], time_limit: float) -> list[dict]:
    rows = []
    for pred, true in pairs:
        t = time.perf_counter()
        r = edit_distance(pred, true, time_limit=time_limit)
        wall = time.perf_counter() - t
        rows.append(
            dict(
                n1=pred.number_of_nodes(),
                n2=true.number_of_nodes(),
                m1=pred.number_of_edges(),
                m2=true.number_of_edges(),
                wall=wall,
                lower=r.lower,
                upper=r.upper,
                exact=bool(r.exact),
                gap=r.upper - r.lower,
            )
        )
    return rows


def summary(name: str, rows: list[dict], time_limit: float, edits: list[int] | None) -> str:
    wall = np.array([r["wall"] for r in rows])
    gap = np.array([r["gap"] for r in rows])
    ok_time = wall <= time_limit
    cells = [
        f"{name:<6}",
        f"{len(rows):>5}",
        f"{np.mean([r['n1'] + r['n2'] for r in rows]):>6.1f}",
        f"{100 * np.mean(gap == 0):>6.1f}",
        f"{100 * np.mean(gap <= 1):>6.1f}",
        f"{100 * np.mean(ok_time):>7.1f}",
        f"{100 * np.mean((gap <= 1) & ok_time):>5.1f}",
        f"{np.percentile(wall, 50):>5.2f}",
        f"{np.percentile(wall, 90):>5.2f}",
        f"{wall.max():>5.2f}",
        f"{np.mean([r['lower'] for r in rows]):>6.2f}",
        f"{np.mean([r['upper'] for r in rows]):>6.2f}",
        f"{np.mean(gap):>5.2f}",
    ]
    if edits is not None:
        cells.append(f"{sum(r['upper'] > k for r, k in zip(rows, edits)):>3}")
    else:
        cells.append(f"{'-':>3}")
    return " ".join(cells)


HEADER = (
    "set    pairs  nodes proven gap<=1 <=limit   met   p50   p90   max  lower  upper"
    "   gap  >k"
)


def check_networkx(
    name: str, pairs: list, rows: list[dict], count: int, timeout: float
) -> int:
    """Compare with networkx on the ``count`` smallest pairs; the number of contradictions."""
    def node_match(x, y):
        return x["label"] == y["label"]

    def edge_match(x, y):
        return x.get("label") == y.get("label")

    order = sorted(range(len(pairs)), key=lambda i: rows[i]["n1"] + rows[i]["n2"])[:count]
    bad = finished = agree = 0
    for i in order:
        pred, true = pairs[i]
        r = rows[i]
        t = time.perf_counter()
        value = nx.graph_edit_distance(
            pred, true, node_match=node_match, edge_match=edge_match, timeout=timeout
        )
        seconds = time.perf_counter() - t
        optimal = seconds < 0.95 * timeout
        finished += optimal
        problems = []
        if value is None:
            print(f"  {name} pair {i}: networkx found no path in {seconds:.1f} s")
            continue
        if r["lower"] > value + 1e-9:
            problems.append(f"lower {r['lower']} > networkx path cost {value}")
        if optimal:
            if not r["lower"] - 1e-9 <= value <= r["upper"] + 1e-9:
                problems.append(f"optimum {value} outside [{r['lower']}, {r['upper']}]")
            if r["exact"] and abs(value - r["upper"]) > 1e-9:
                problems.append(f"exact {r['upper']} != optimum {value}")
            agree += r["exact"] and abs(value - r["upper"]) <= 1e-9
        status = "optimal" if optimal else "timeout"
        print(
            f"  {name} pair {i:>3}: n={r['n1']}+{r['n2']} networkx {value:g} ({status}, "
            f"{seconds:.1f} s), gwpred [{r['lower']:g}, {r['upper']:g}] in {r['wall']:.2f} s"
            + ("  better path than gwpred" if value < r["upper"] - 1e-9 else "")
        )
        for p in problems:
            print(f"  CONTRADICTION {name} pair {i}: {p}")
        bad += bool(problems)
    print(
        f"  {name}: {len(order)} pairs checked, networkx finished {finished}, "
        f"equal to gwpred's exact value on {agree}, contradictions {bad}"
    )
    return bad


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--n-test", type=int, default=200, help="test molecules (200)")
    parser.add_argument(
        "--time-limit", type=float, default=2.0, help="seconds per edit_distance call (2.0)"
    )
    parser.add_argument("--seed", type=int, default=0, help="seed of split and edits (0)")
    parser.add_argument(
        "--nx-pairs", type=int, default=15, help="smallest pairs per set checked by networkx (15)"
    )
    parser.add_argument(
        "--nx-timeout", type=float, default=10.0, help="networkx seconds per pair (10)"
    )
    parser.add_argument(
        "--train-size", type=int, help="training pool of the 1-NN pairs (all other molecules)"
    )
    parser.add_argument("--csv", type=Path, help="write one row per pair to this file")
    args = parser.parse_args(argv)

    t_start = time.perf_counter()
    Chem = _rdkit()[0]
    data = load_druglike()
    mols = [Chem.MolFromSmiles(s) for s in data.smiles]
    rng = np.random.default_rng(args.seed)
    test, nearest = nearest_pairs(mols, args.n_test, rng, args.train_size)
    graphs = {i: data.graphs[i] for i in set(test) | set(nearest)}
    nn_pairs = [(graphs[j], graphs[i]) for i, j in zip(test, nearest)]
    close, edits = [], []
    for i in test:
        h, k = perturb(graphs[i], rng)
        close.append((h, graphs[i]))
        edits.append(k)
    pool = len(mols) - len(test) if args.train_size is None else args.train_size
    print(
        f"{len(mols)} molecules of 10-50 heavy atoms from the NCI sample; "
        f"{len(test)} test molecules, 1-NN among {pool}; time limit {args.time_limit:g} s; "
        f"prepared in {time.perf_counter() - t_start:.1f} s"
    )

    results = {}
    for name, pairs in (("1-NN", nn_pairs), ("close", close)):
        t = time.perf_counter()
        results[name] = run_pairs(pairs, args.time_limit)
        print(f"{name}: {len(pairs)} calls in {time.perf_counter() - t:.1f} s")
    print()
    print(HEADER)
    print(summary("1-NN", results["1-NN"], args.time_limit, None))
    print(summary("close", results["close"], args.time_limit, edits))
    print()

    if args.csv is not None:
        with args.csv.open("w", newline="") as fh:
            fields = ["set", "pair", "n1", "n2", "m1", "m2", "wall", "lower", "upper",
                      "exact", "gap", "edits"]
            writer = csv.DictWriter(fh, fieldnames=fields)
            writer.writeheader()
            for name, rows in results.items():
                for i, r in enumerate(rows):
                    writer.writerow(dict(set=name, pair=i, edits=edits[i] if name == "close"
                                         else "", **r))

    bad = 0
    if args.nx_pairs > 0:
        print(f"networkx check ({args.nx_pairs} smallest pairs per set, "
              f"timeout {args.nx_timeout:g} s):")
        bad += check_networkx("1-NN", nn_pairs, results["1-NN"], args.nx_pairs,
                              args.nx_timeout)
        bad += check_networkx("close", close, results["close"], args.nx_pairs,
                              args.nx_timeout)
    print(f"total {time.perf_counter() - t_start:.0f} s")
    return 1 if bad else 0


if __name__ == "__main__":
    raise SystemExit(main())

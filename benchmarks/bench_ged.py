"""Time gwpred.metrics.edit_distance against networkx.graph_edit_distance on QM9 pairs.

Pairs of unrelated molecules are drawn at random (seeded) from the heavy-atom graphs of
qm9_part1.csv in the PyPI package qm9pack (node label = element, edge label = bond order
of RDKit's kekulé form), and both libraries compute the edit distance with unit costs.
networkx gets a time budget per pair (``--timeout``); a pair where it uses the budget is
counted as a time-out and its value is not proven.

Usage::

    python benchmarks/bench_ged.py --pairs 100
"""

from __future__ import annotations

import argparse
import csv
import importlib.util
import random
import sys
import time
from pathlib import Path

import networkx as nx
import numpy as np

try:
    from gwpred.metrics import edit_distance
except ImportError:  # run from a checkout without installing
    sys.path.insert(0, str(Path(__file__).resolve().parents[1]))
    from gwpred.metrics import edit_distance


def qm9_graphs(limit: int | None = None) -> list[nx.Graph]:
    """Heavy-atom graphs of the molecules in qm9pack's qm9_part1.csv."""
    from rdkit import Chem, RDLogger

    RDLogger.DisableLog("rdApp.*")
    spec = importlib.util.find_spec("qm9pack")
    if spec is None or spec.origin is None:
        raise SystemExit("qm9pack is not installed: pip install qm9pack")
    path = Path(spec.origin).parent / "data" / "qm9_part1.csv"
    graphs = []
    with path.open(newline="") as fh:
        for i, row in enumerate(csv.DictReader(fh)):
            if limit is not None and i >= limit:
                break
            mol = Chem.MolFromSmiles(row["SMILES"])
            if mol is None:
                continue
            Chem.Kekulize(mol, clearAromaticFlags=True)
            g = nx.Graph()
            for atom in mol.GetAtoms():
                g.add_node(atom.GetIdx(), label=atom.GetSymbol())
            for bond in mol.GetBonds():
                g.add_edge(
                    bond.GetBeginAtomIdx(),
                    bond.GetEndAtomIdx(),
                    label=int(bond.GetBondTypeAsDouble()),
                )
            graphs.append(g)
    return graphs


def networkx_ged(g1: nx.Graph, g2: nx.Graph, timeout: float) -> float:
    return nx.graph_edit_distance(
        g1,
        g2,
        node_subst_cost=lambda a, b: 0.0 if a["label"] == b["label"] else 1.0,
        node_del_cost=lambda a: 1.0,
        node_ins_cost=lambda a: 1.0,
        edge_subst_cost=lambda a, b: 0.0 if a.get("label") == b.get("label") else 1.0,
        edge_del_cost=lambda a: 1.0,
        edge_ins_cost=lambda a: 1.0,
        timeout=timeout,
    )


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--pairs", type=int, default=100, help="number of pairs (100)")
    parser.add_argument(
        "--timeout", type=float, default=5.0, help="networkx seconds per pair (5)"
    )
    parser.add_argument("--seed", type=int, default=0, help="seed of the pair draw (0)")
    args = parser.parse_args(argv)

    graphs = qm9_graphs()
    rng = random.Random(args.seed)
    pairs = [rng.sample(range(len(graphs)), 2) for _ in range(args.pairs)]
    edit_distance(graphs[0], graphs[1])  # warm up imports

    ours, theirs, timed_out, agree, nx_higher, exact = [], [], 0, 0, 0, 0
    for i, j in pairs:
        g1, g2 = graphs[i], graphs[j]
        t = time.perf_counter()
        r = edit_distance(g1, g2)
        ours.append(time.perf_counter() - t)
        exact += r.exact
        t = time.perf_counter()
        ref = networkx_ged(g1, g2, args.timeout)
        theirs.append(time.perf_counter() - t)
        if theirs[-1] >= args.timeout:
            timed_out += 1
            nx_higher += ref > r.value
        else:
            agree += ref == r.value

    ours_a, theirs_a = np.array(ours), np.array(theirs)
    sizes = np.array([[len(graphs[i]), len(graphs[j])] for i, j in pairs])
    print(
        f"{args.pairs} random pairs of QM9 molecules (qm9_part1.csv, seed {args.seed}), "
        f"{sizes.min()}-{sizes.max()} heavy atoms, unit costs"
    )
    print(f"{'seconds':<10}{'gwpred':>12}{'networkx':>12}{'networkx/gwpred':>18}")
    for name, fn in (
        ("median", np.median),
        ("mean", np.mean),
        ("p90", lambda x: np.percentile(x, 90)),
        ("p99", lambda x: np.percentile(x, 99)),
        ("max", np.max),
    ):
        a, b = float(fn(ours_a)), float(fn(theirs_a))
        print(f"{name:<10}{a:>12.4f}{b:>12.4f}{b / a:>18.1f}")
    print(f"gwpred proved exact: {exact}/{args.pairs}")
    print(
        f"networkx timed out ({args.timeout:g} s, time then counted as {args.timeout:g} s): "
        f"{timed_out}/{args.pairs}; among those its value was above gwpred's on {nx_higher}"
    )
    print(f"equal values where networkx finished: {agree}/{args.pairs - timed_out}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())

"""Time gwpred.metrics.edit_distance against networkx.graph_edit_distance on QM9 graphs.

Graph sets (node label = element, edge label = bond order of RDKit's kekulé form, unit
costs; molecules from qm9_part1.csv of the PyPI package qm9pack unless said otherwise):

* ``near``: prediction vs truth. A ``gwpred.BarycenterGraphPredictor`` (default
  settings, ``random_state=0``) is trained on the first 2000 molecules of
  ``gwpred.datasets.load_demo()`` (QM9 spectra -> heavy-atom graphs) and predicts the
  next ``--pairs`` molecules; each prediction is paired with its true graph.
* ``unrelated``: two molecules of qm9_part1.csv drawn at random (seeded).
* ``all``: the near and unrelated pairs together (times of the two rows above).
* ``13 atoms``: GDB-13-like size built from QM9 (which stops at 9 heavy atoms): each
  graph joins two random QM9 graphs whose sizes sum to 13 by one single bond between
  random atoms (valence is not checked: these are molecule-like graphs, not molecules).
* ``25-35``: each graph joins QM9 graphs in a chain (one single bond between random
  atoms of consecutive parts) until it has 25 to 35 nodes.

gwpred runs with ``time_limit`` (``--time-limit`` seconds, none on the QM9 sets by
default) and reports how many results are proven exact and the bound gap of the others.
On the large sets it also prints the slowest call against ``--time-limit`` and whether every
result brackets the distance (lower <= upper, exact only when they meet).
networkx gets ``--nx-timeout`` seconds per pair; a pair where it uses them is counted as a
time-out (its value is then not proven) and its time as the budget.

Usage::

    python benchmarks/bench_ged.py --pairs 300
"""

from __future__ import annotations

import argparse
import csv
import importlib.util
import itertools
import random
import sys
import time
from pathlib import Path

import networkx as nx
import numpy as np

try:
    import gwpred  # noqa: F401
except ImportError:  # run from a checkout without installing
    sys.path.insert(0, str(Path(__file__).resolve().parents[1]))
from gwpred import BarycenterGraphPredictor
from gwpred.chem import rdkit_modules
from gwpred.datasets import load_demo
from gwpred.metrics import edit_distance


def qm9_graphs(limit: int | None = None) -> list[nx.Graph]:
    """Heavy-atom graphs of the molecules in qm9pack's qm9_part1.csv."""
    Chem, rdBase = rdkit_modules("benchmarks/bench_ged.py")
    rdBase.DisableLog("rdApp.*")
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


def near_pairs(count: int) -> list[tuple[nx.Graph, nx.Graph]]:
    """(prediction, truth) for demo molecules 2000.. of a predictor trained on 0..1999."""
    x, graphs = load_demo()
    est = BarycenterGraphPredictor(random_state=0).fit(x[:2000], graphs[:2000])
    predicted = est.predict(x[2000 : 2000 + count])
    return list(zip(predicted, graphs[2000 : 2000 + count]))


def join(parts: list[nx.Graph], rng: random.Random) -> nx.Graph:
    """Disjoint union of ``parts``, part t linked to part t+1 by one single bond."""
    g = nx.disjoint_union_all(parts)
    offset = 0
    for left, right in itertools.pairwise(parts):
        u = offset + rng.randrange(len(left))
        offset += len(left)
        v = offset + rng.randrange(len(right))
        g.add_edge(u, v, label=1)
    return g


def joined_graph(by_size: dict[int, list[nx.Graph]], rng: random.Random, lo: int, hi: int):
    """A chain of QM9 graphs with ``lo`` to ``hi`` nodes in total."""
    while True:
        parts, total = [], 0
        while total < lo:
            size = rng.choice([s for s in by_size if total + s <= hi] or [0])
            if size == 0:
                break
            parts.append(rng.choice(by_size[size]))
            total += size
        if lo <= total <= hi:
            return join(parts, rng)


def thirteen_atom_graph(by_size: dict[int, list[nx.Graph]], rng: random.Random) -> nx.Graph:
    a = rng.choice([s for s in by_size if 13 - s in by_size and s >= 4])
    return join([rng.choice(by_size[a]), rng.choice(by_size[13 - a])], rng)


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


def run_gwpred(pairs, time_limit):
    times, results = [], []
    for g1, g2 in pairs:
        t = time.perf_counter()
        results.append(edit_distance(g1, g2, time_limit=time_limit))
        times.append(time.perf_counter() - t)
    return np.array(times), results


def run_networkx(pairs, timeout):
    times, values = [], []
    for g1, g2 in pairs:
        t = time.perf_counter()
        values.append(networkx_ged(g1, g2, timeout))
        times.append(min(time.perf_counter() - t, timeout))
    return np.array(times), values


def stats(x: np.ndarray) -> str:
    return (
        f"{np.median(x) * 1e3:>9.2f}{np.percentile(x, 90) * 1e3:>9.2f}"
        f"{np.percentile(x, 99) * 1e3:>9.1f}{np.max(x) * 1e3:>9.1f}"
    )


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--pairs", type=int, default=300, help="pairs per QM9 set (300)")
    parser.add_argument("--big-pairs", type=int, default=30, help="pairs per large set (30)")
    parser.add_argument(
        "--nx-timeout", type=float, default=2.0, help="networkx seconds per pair (2)"
    )
    parser.add_argument(
        "--time-limit", type=float, default=1.0, help="gwpred seconds per large pair (1)"
    )
    parser.add_argument("--seed", type=int, default=0, help="seed of the pair draws (0)")
    parser.add_argument("--no-networkx", action="store_true", help="time gwpred only")
    args = parser.parse_args(argv)

    graphs = qm9_graphs()
    rng = random.Random(args.seed)
    by_size: dict[int, list[nx.Graph]] = {}
    for g in graphs:
        by_size.setdefault(len(g), []).append(g)
    sets = {
        "near": near_pairs(args.pairs),
        "unrelated": [
            tuple(graphs[k] for k in rng.sample(range(len(graphs)), 2)) for _ in range(args.pairs)
        ],
        "13 atoms": [
            (thirteen_atom_graph(by_size, rng), thirteen_atom_graph(by_size, rng))
            for _ in range(args.big_pairs)
        ],
        "25-35": [
            (joined_graph(by_size, rng, 25, 35), joined_graph(by_size, rng, 25, 35))
            for _ in range(args.big_pairs)
        ],
    }
    limits = {
        "near": None,
        "unrelated": None,
        "13 atoms": args.time_limit,
        "25-35": args.time_limit,
    }
    edit_distance(graphs[0], graphs[1])  # warm up imports

    ours = {name: run_gwpred(pairs, limits[name]) for name, pairs in sets.items()}
    # "all": the near and unrelated QM9 pairs together (the acceptance set, 2 x --pairs).
    sets["all"] = sets["near"] + sets["unrelated"]
    ours["all"] = (
        np.concatenate([ours["near"][0], ours["unrelated"][0]]),
        ours["near"][1] + ours["unrelated"][1],
    )
    print(
        f"gwpred.metrics.edit_distance, unit costs, seed {args.seed}; times in ms "
        f"(time_limit: none on QM9 sets, {args.time_limit:g} s on the large sets)"
    )
    print(
        f"{'set':<11}{'pairs':>6}{'nodes':>8}{'median':>9}{'p90':>9}{'p99':>9}{'max':>9}"
        f"{'exact':>7}{'mean gap':>9}{'max gap':>8}"
    )
    for name in ("near", "unrelated", "all", "13 atoms", "25-35"):
        times, results = ours[name]
        sizes = [len(g) for pair in sets[name] for g in pair]
        gaps = np.array([r.upper - r.lower for r in results])
        exact = sum(r.exact for r in results)
        print(
            f"{name:<11}{len(times):>6}{f'{min(sizes)}-{max(sizes)}':>8}{stats(times)}"
            f"{exact:>7}{gaps.mean():>9.2f}{gaps.max():>8.0f}"
        )
    for name in ("13 atoms", "25-35"):
        times, results = ours[name]
        brackets = all(r.lower <= r.upper and r.exact == (r.lower == r.upper) for r in results)
        print(
            f"time_limit {args.time_limit:g} s on {name}: slowest call "
            f"{times.max():.3f} s ({times.max() / args.time_limit:.2f} x the limit), "
            f"lower <= upper and exact flags consistent: {brackets}"
        )
    if args.no_networkx:
        return 0

    print(
        f"\nnetworkx.graph_edit_distance, timeout {args.nx_timeout:g} s per pair (a time-out "
        "counts as the budget); ratio = networkx / gwpred"
    )
    print(
        f"{'set':<11}{'median':>9}{'p90':>9}{'p99':>9}{'max':>9}{'ratio med':>10}"
        f"{'timeouts':>9}{'equal':>9}{'nx above':>9}"
    )
    theirs = {name: run_networkx(sets[name], args.nx_timeout) for name in ("near", "unrelated")}
    theirs["all"] = (
        np.concatenate([theirs["near"][0], theirs["unrelated"][0]]),
        theirs["near"][1] + theirs["unrelated"][1],
    )
    theirs["13 atoms"] = run_networkx(sets["13 atoms"], args.nx_timeout)
    for name in ("near", "unrelated", "all", "13 atoms"):
        times, values = theirs[name]
        mine, results = ours[name]
        done = times < 0.99 * args.nx_timeout
        equal = sum(
            v == r.value for v, r, d in zip(values, results, done) if d and r.exact
        )
        above = sum(v > r.value for v, r, d in zip(values, results, done) if not d)
        print(
            f"{name:<11}{stats(times)}{np.median(times) / np.median(mine):>10.0f}"
            f"{int((~done).sum()):>9}{f'{equal}/{int(done.sum())}':>9}{above:>9}"
        )
    return 0


if __name__ == "__main__":
    raise SystemExit(main())

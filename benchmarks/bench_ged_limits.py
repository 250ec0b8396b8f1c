"""Time and peak memory of ``edit_distance(..., time_limit=T)`` on large random graphs.

Graphs: ``networkx.gnm_random_graph(n, 2 n)`` (mean degree 4) with node labels drawn from
C, N, O, F (weights 6:2:1:1) and edge labels from 1, 2, 3 (weights 8:3:1), seeded. Two pairs
per size n:

* ``similar``: two independent graphs of n and n + n // 20 nodes;
* ``perturbed``: the second graph is the first after k = 10 known unit-cost edits (3 node
  relabels, 3 edge deletions, 2 edge insertions, 1 edge relabel, 1 isolated node
  inserted), with its nodes renamed and listed in a random order, so GED <= 10;
* ``copy``: the second graph is the first, renamed and listed in a random order (GED 0,
  found by the label isomorphism test).

Each call runs in its own process (peak memory = the largest resident set during the call
minus the one before it, from ``resource.getrusage``), with its address space capped at
``--mem-cap`` GB so that a runaway call ends in MemoryError instead of taking the machine.
Every result is checked: lower <= upper, lower <= 10 on perturbed pairs, lower = 0 on
copies, and the lower bound at least the label-count bound (node and edge label
multisets, unit costs).

Pass ``--before DIR`` (a directory holding another ``gwpred`` package, e.g. made with
``git archive <commit> gwpred | tar -x -C DIR``) to print both side by side; ratios, not
absolute times, are what carries over to other machines.

Usage::

    python benchmarks/bench_ged_limits.py                      # this checkout
    python benchmarks/bench_ged_limits.py --before /tmp/before --sizes 200 500 1000 2000 5000
"""

from __future__ import annotations

import argparse
import json
import random
import resource
import subprocess
import sys
import time
from collections import Counter
from pathlib import Path

import networkx as nx

HERE = Path(__file__).resolve()
CHECKOUT = HERE.parents[1]
EDITS = 10


def labeled_gnm(n: int, seed: int) -> nx.Graph:
    """A gnm random graph (m = 2 n) with random node and edge labels."""
    rng = random.Random(seed)
    g = nx.gnm_random_graph(n, 2 * n, seed=seed)
    for u in g.nodes:
        g.nodes[u]["label"] = rng.choices("CNOF", weights=(6, 2, 1, 1))[0]
    for u, v in g.edges:
        g.edges[u, v]["label"] = rng.choices((1, 2, 3), weights=(8, 3, 1))[0]
    return g


def perturbed(g: nx.Graph, seed: int) -> nx.Graph:
    """``g`` after ``EDITS`` unit-cost edits, renamed and listed in a random order."""
    rng = random.Random(seed)
    h = g.copy()
    nodes = list(h.nodes)
    for u in rng.sample(nodes, 3):  # 3 node relabels
        h.nodes[u]["label"] = "S" if h.nodes[u]["label"] != "S" else "P"
    edges = list(h.edges)
    picked = rng.sample(edges, 4)
    h.remove_edges_from(picked[:3])  # 3 edge deletions
    u, v = picked[3]  # 1 edge relabel
    h.edges[u, v]["label"] = 4
    added = 0
    while added < 2:  # 2 edge insertions
        u, v = rng.sample(nodes, 2)
        if not h.has_edge(u, v) and not g.has_edge(u, v):
            h.add_edge(u, v, label=1)
            added += 1
    h.add_node("new", label="C")  # 1 node insertion
    return renamed(h, seed)


def renamed(g: nx.Graph, seed: int) -> nx.Graph:
    """A copy of ``g`` with new node names, listed in a random order."""
    order = list(g.nodes)
    random.Random(seed).shuffle(order)
    name = {u: f"v{i}" for i, u in enumerate(order)}
    out = nx.Graph()
    out.add_nodes_from((name[u], g.nodes[u]) for u in order)
    out.add_edges_from((name[u], name[v], d) for u, v, d in g.edges(data=True))
    return out


def pair(n: int, kind: str) -> tuple[nx.Graph, nx.Graph]:
    """The (first, second) graphs of one benchmark case."""
    g = labeled_gnm(n, seed=n)
    if kind == "similar":
        return g, labeled_gnm(n + n // 20, seed=n + 1)
    if kind == "copy":
        return g, renamed(g, seed=n + 3)
    return g, perturbed(g, seed=n + 2)


def label_count_bound(g: nx.Graph, h: nx.Graph) -> int:
    """Unit-cost lower bound: node and edge label multisets edited independently."""
    total = 0
    for a, b in (
        ([d["label"] for _, d in x.nodes(data=True)] for x in (g, h)),
        ([d["label"] for *_, d in x.edges(data=True)] for x in (g, h)),
    ):
        common = sum((Counter(a) & Counter(b)).values())
        total += max(len(a), len(b)) - common
    return total


def one(n: int, kind: str, tree: str, time_limit: float, mem_cap_gb: float) -> dict:
    """Run one case in this process (the child side) and return its measurements."""
    cap = int(mem_cap_gb * 2**30)
    resource.setrlimit(resource.RLIMIT_AS, (cap, cap))
    sys.path.insert(0, tree)
    from gwpred.metrics import edit_distance  # the tree under test

    g, h = pair(n, kind)
    floor = label_count_bound(g, h)
    before = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
    t = time.perf_counter()
    try:
        r = edit_distance(g, h, time_limit=time_limit)
    except MemoryError:
        return {"error": "MemoryError", "seconds": time.perf_counter() - t}
    except Exception as exc:  # noqa: BLE001 - reported, not hidden
        error = f"{type(exc).__name__}: {str(exc)[:80]}"
        return {"error": error, "seconds": time.perf_counter() - t}
    seconds = time.perf_counter() - t
    peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
    valid = r.lower <= r.upper + 1e-9 and r.lower >= floor - 1e-9
    if kind == "perturbed":
        valid = valid and r.lower <= EDITS + 1e-9
    if kind == "copy":
        valid = valid and r.lower == 0.0
    return {
        "seconds": seconds,
        "peak_mb": (peak - before) / 1024,
        "lower": r.lower,
        "upper": r.upper,
        "exact": r.exact,
        "valid": valid,
    }


def run(n: int, kind: str, tree: Path, args: argparse.Namespace) -> dict:
    """One case in a fresh process, with a wall-clock cap."""
    cmd = [
        sys.executable, str(HERE), "--one", str(n), kind, "--tree", str(tree),
        "--time-limit", str(args.time_limit), "--mem-cap", str(args.mem_cap),
    ]
    try:
        out = subprocess.run(cmd, capture_output=True, text=True, timeout=args.wall_cap)
    except subprocess.TimeoutExpired:
        return {"error": f"killed after {args.wall_cap:g} s"}
    lines = out.stdout.strip().splitlines()
    if out.returncode != 0 or not lines:
        tail = (out.stderr.strip().splitlines() or ["no output"])[-1]
        return {"error": f"exit {out.returncode}: {tail[:60]}"}
    return json.loads(lines[-1])


def cell(res: dict) -> str:
    if "error" in res:
        took = f" after {res['seconds']:.1f} s" if "seconds" in res else ""
        return f"{res['error']}{took}"
    flag = "exact" if res["exact"] else "bounds"
    ok = "" if res["valid"] else " INVALID"
    return (
        f"{res['seconds']:6.2f} s {res['peak_mb']:7.0f} MB  [{res['lower']:g}, {res['upper']:g}] "
        f"{flag}{ok}"
    )


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--sizes", type=int, nargs="+", default=[200, 500, 1000, 2000, 5000])
    parser.add_argument("--kinds", nargs="+", default=["similar", "perturbed", "copy"])
    parser.add_argument("--time-limit", type=float, default=1.0)
    parser.add_argument("--before", type=Path, help="directory holding the gwpred to compare")
    parser.add_argument("--mem-cap", type=float, default=8.0, help="address space cap, GB")
    parser.add_argument("--wall-cap", type=float, default=600.0, help="seconds per case")
    parser.add_argument("--one", nargs=2, metavar=("N", "KIND"), help=argparse.SUPPRESS)
    parser.add_argument("--tree", default=str(CHECKOUT), help=argparse.SUPPRESS)
    args = parser.parse_args()
    if args.one:
        n, kind = int(args.one[0]), args.one[1]
        print(json.dumps(one(n, kind, args.tree, args.time_limit, args.mem_cap)))
        return

    trees = [("after", CHECKOUT)]
    if args.before is not None:
        trees.insert(0, ("before", args.before.resolve()))
    print(
        f"edit_distance(time_limit={args.time_limit:g}) on gnm(n, 2n) labeled pairs; "
        f"address space cap {args.mem_cap:g} GB; columns: time, peak memory, [lower, upper]"
    )
    print(f"{'n':>5} {'pair':<10}" + "".join(f" {name:<46}" for name, _ in trees))
    for n in args.sizes:
        for kind in args.kinds:
            cells = [cell(run(n, kind, tree, args)) for _, tree in trees]
            print(f"{n:>5} {kind:<10}" + "".join(f" {c:<46}" for c in cells), flush=True)


if __name__ == "__main__":
    main()

"""Cheap bounds on the edit distance, and rounding of bounds to the cost unit.

- :func:`cheap_bounds`: the label multiset and branch lower bounds and the bipartite upper
  bound with its node map, from linear sum assignments (:func:`assign`);
- :func:`round_lower`, :func:`closed`, :func:`stop_at`: what a proven bound is worth once
  the costs have a unit.
"""

from __future__ import annotations

import math
from collections import Counter
from collections.abc import Sequence

import numpy as np
from numpy.typing import NDArray
from scipy.optimize import linear_sum_assignment

from ._costs import Costs, Labeled, node_sub_matrix
from ._search import PathCost

__all__ = ["assign", "cheap_bounds", "closed", "label_bound", "round_lower", "stop_at"]


# --------------------------------------------------------------------------- assignments


def _multiset_cost(a: Sequence, b: Sequence, sub: float, dele: float, ins: float) -> float:
    """Least cost of editing the label multiset ``a`` into ``b``.

    Pairs as many items as possible (``min(len(a), len(b))``), equal labels first; a pair
    of unequal labels costs ``min(sub, dele + ins)``, a left-over item of ``a`` costs
    ``dele`` and one of ``b`` costs ``ins``.
    """
    n1, n2 = len(a), len(b)
    if n1 == 0 or n2 == 0:
        return n1 * dele + n2 * ins
    common = sum((Counter(a) & Counter(b)).values())
    paired = min(n1, n2)
    return (paired - common) * min(sub, dele + ins) + (n1 - paired) * dele + (n2 - paired) * ins


def _star_matrix(a: Labeled, b: Labeled, costs: Costs) -> NDArray[np.float64]:
    """Least cost of editing the incident edge labels of node i into those of node k.

    With costs that do not depend on the labels, the same value as :func:`_multiset_cost`
    on every pair of stars, computed at once from per-node counts of each edge label;
    otherwise one small assignment problem per node pair.
    """
    if costs.scalar is None:
        out = np.zeros((len(a.nodes), len(b.nodes)))
        for i, inc_a in enumerate(a.incident):
            for k, inc_b in enumerate(b.incident):
                out[i, k] = _assignment_cost(
                    costs.edge_sub[np.ix_(inc_a, inc_b)],
                    costs.edge_del[inc_a],
                    costs.edge_ins[inc_b],
                )
        return out
    _, _, _, edge_del, edge_ins, sub = costs.scalar
    counts = []
    for lab, codes in ((a, costs.edge_a), (b, costs.edge_b)):
        m = np.zeros((len(lab.nodes), max(len(costs.edge_del_t), 1)))
        for (i, j), x in zip(lab.edges, codes):
            m[i, x] += 1
            m[j, x] += 1
        counts.append(m)
    ca, cb = counts
    common = np.minimum(ca[:, None, :], cb[None, :, :]).sum(axis=2)
    da = np.asarray(a.degree, dtype=float)[:, None]
    db = np.asarray(b.degree, dtype=float)[None, :]
    paired = np.minimum(da, db)
    left_a, left_b = da - paired, db - paired
    return (paired - common) * sub + left_a * edge_del + left_b * edge_ins


def _assignment_cost(
    sub: NDArray[np.float64], dele: NDArray[np.float64], ins: NDArray[np.float64]
) -> float:
    """Least cost of pairing two item sets (partial pairing; unpaired items deleted or inserted)."""
    if sub.size == 0:
        return float(dele.sum() + ins.sum())
    image = assign(sub, dele, ins)
    kept = image >= 0
    used = np.zeros(len(ins), dtype=bool)
    used[image[kept]] = True
    return float(sub[np.flatnonzero(kept), image[kept]].sum() + dele[~kept].sum() + ins[~used].sum())


def assign(
    sub: NDArray[np.float64], dele: NDArray[np.float64], ins: NDArray[np.float64]
) -> NDArray[np.intp]:
    """Solve the square (n1 + n2) assignment problem of Riesen & Bunke.

    Returns, for each node of the first graph, the index of its image or -1.
    """
    n1, n2 = sub.shape
    big = float(np.abs(sub).sum() + np.abs(dele).sum() + np.abs(ins).sum() + 1.0)
    c = np.zeros((n1 + n2, n1 + n2))
    c[:n1, :n2] = sub
    c[:n1, n2:] = big
    c[np.arange(n1), n2 + np.arange(n1)] = dele
    c[n1:, :n2] = big
    c[n1 + np.arange(n2), np.arange(n2)] = ins
    rows, cols = linear_sum_assignment(c)
    image = np.full(n1, -1, dtype=np.intp)
    keep = (rows < n1) & (cols < n2)
    image[rows[keep]] = cols[keep]
    return image


# --------------------------------------------------------------------------- bounds


def round_lower(lower: float, costs: Costs, from_solver: bool = True) -> float:
    """Round a proven lower bound up to the next possible edit distance value.

    With a cost unit q (see ``Costs.unit``) the bound goes up to a multiple of q; the
    1e-6 slack absorbs the solvers' floating-point tolerances. Without a unit a bound
    that comes from a solver is lowered by a relative 1e-9 so that solver round-off never
    makes it too high.
    """
    if not math.isfinite(lower):
        return lower
    q = costs.unit
    if q is not None:
        return math.ceil(lower / q - 1e-6) * q
    return lower - 1e-9 * max(1.0, abs(lower)) if from_solver else lower


def closed(lower: float, upper: float) -> bool:
    """Whether the bounds prove the upper bound optimal."""
    return upper - lower <= 1e-8 * max(1.0, abs(upper))


def stop_at(upper: float, costs: Costs) -> float | None:
    """Objective value at which a relaxation proves ``upper`` optimal, with a margin.

    With a cost unit q, a relaxation value of at least ``upper - q`` plus a little rounds
    up to ``upper``; the margin of 0.1 q stays far above the solvers' tolerances. None
    without a unit (the relaxation must then be solved to optimality).
    """
    q = costs.unit
    return None if q is None else upper - 0.9 * q


def label_bound(a: Labeled, b: Labeled, costs: Costs) -> float:
    """Label multiset bound: node and edge labels edited as two independent multisets."""
    if costs.scalar is None:
        return _assignment_cost(costs.node_sub, costs.node_del, costs.node_ins) + _assignment_cost(
            costs.edge_sub, costs.edge_del, costs.edge_ins
        )
    node_del, node_ins, node_sub, edge_del, edge_ins, edge_sub = costs.scalar
    return _multiset_cost(
        costs.node_a.tolist(), costs.node_b.tolist(), node_sub, node_del, node_ins
    ) + _multiset_cost(costs.edge_a.tolist(), costs.edge_b.tolist(), edge_sub, edge_del, edge_ins)


def _incident_sum(lab: Labeled, values: NDArray[np.float64]) -> NDArray[np.float64]:
    """Per node, the sum of ``values`` (one per edge) over its incident edges."""
    out = np.zeros(len(lab.nodes))
    if len(lab.edges):
        ends = np.asarray(lab.edges, dtype=np.intp)
        np.add.at(out, ends[:, 0], values)
        np.add.at(out, ends[:, 1], values)
    return out


def cheap_bounds(
    a: Labeled, b: Labeled, costs: Costs, path_cost: PathCost | None = None
) -> tuple[float, float, NDArray[np.intp]]:
    """Cheap lower bound, bipartite upper bound and the node map giving that upper bound."""
    n1, n2 = len(a.nodes), len(b.nodes)
    if n1 == 0 or n2 == 0:
        # Nothing to pair: delete everything of a, insert everything of b.
        cost = float(costs.node_del.sum() + costs.node_ins.sum())
        cost += float(costs.edge_del.sum() + costs.edge_ins.sum())
        return cost, cost, np.full(n1, -1, dtype=np.intp)

    lower = label_bound(a, b, costs)

    sub = node_sub_matrix(a, b, costs)
    star = _star_matrix(a, b, costs)
    del_a = _incident_sum(a, costs.edge_del)  # deleting every edge of node i
    ins_b = _incident_sum(b, costs.edge_ins)

    # Branch (degree and incident-label) bound: every edge cost is split in halves between
    # its two end nodes, so an assignment with half the local edge costs is a lower bound.
    sub_h = sub + 0.5 * star
    dele_h = costs.node_del + 0.5 * del_a
    ins_h = costs.node_ins + 0.5 * ins_b
    half = assign(sub_h, dele_h, ins_h)
    kept = half >= 0
    used = np.zeros(n2, dtype=bool)
    used[half[kept]] = True
    lower_branch = float(
        sub_h[np.flatnonzero(kept), half[kept]].sum() + dele_h[~kept].sum() + ins_h[~used].sum()
    )
    lower = max(lower, lower_branch)

    # Bipartite upper bound (Riesen & Bunke): full local edge costs; the node map's true
    # edit cost is an upper bound. The branch map is a second candidate.
    full = assign(sub + star, costs.node_del + del_a, costs.node_ins + ins_b)
    path_cost = path_cost or PathCost(a, b, costs)
    best_image, upper = full, path_cost(full)
    other = path_cost(half)
    if other < upper:
        best_image, upper = half, other
    lower = min(round_lower(lower, costs, from_solver=False), upper)
    return lower, upper, best_image

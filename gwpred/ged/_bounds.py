"""Cheap bounds on the edit distance, and rounding of bounds to the cost unit.

- :func:`cheap_bounds`: the label multiset and branch lower bounds and the bipartite upper
  bound with its node map, from linear sum assignments (:func:`assign`) of size
  (n1 + n2) x (n1 + n2);
- :func:`linear_bounds`: for large graphs, the label multiset bound and the edit path of an
  anchored node map (:mod:`._anchor`), in time and memory that grow with n + m only;
- :func:`round_lower`, :func:`closed`, :func:`stop_at`: what a proven bound is worth once
  the costs have a unit.
"""

from __future__ import annotations

import math
import time
from collections import Counter
from collections.abc import Sequence

import numpy as np
from numpy.typing import NDArray
from scipy.optimize import linear_sum_assignment, linprog
from scipy.sparse import coo_array

from ._anchor import anchored_map
from ._colors import refine
from ._costs import Costs, Labeled, node_sub_matrix
from ._search import MAX_SEARCH_NODES, PathCost

__all__ = [
    "anchored",
    "assign",
    "cheap_bounds",
    "closed",
    "degree_bound",
    "label_bound",
    "linear_bounds",
    "round_lower",
    "stop_at",
]

# Most items (n1 + n2 nodes, or m1 + m2 edges) whose labels, with label-dependent costs,
# are paired by one linear sum assignment of that size squared (0.05 s at 1000); above
# it, by label class (a transportation problem with one row per label, see _class_cost).
_ASSIGN_ITEMS = 1000
# Largest number of label-class pairs of that transportation problem; above it (nearly
# one label per node) a weaker bound, each item at its cheapest, is used.
_MAX_CLASS_PAIRS = 250_000
# Largest n1 * n2 for which the stars of label-dependent edge costs are paired node pair
# by node pair (as they always were); above it, once per pair of distinct stars.
_STAR_PAIRS = 2_500
# Most distinct node labels for which the anchored map may pair different labels (it
# reads an L x L table of which substitutions save cost).
_MAX_SWAP_LABELS = 1000
# Rounds of colour refinement behind the anchored node map: two or three rounds make
# most colours unique in sparse random graphs, and more rounds spread each edit further.
_ANCHOR_ROUNDS = 3


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


def _star_matrix(
    a: Labeled, b: Labeled, costs: Costs, deadline: float | None = None
) -> NDArray[np.float64] | None:
    """Least cost of editing the incident edge labels of node i into those of node k.

    With costs that do not depend on the labels, the same value as :func:`_multiset_cost`
    on every pair of stars, computed at once from per-node counts of each edge label;
    otherwise one small assignment problem per node pair (up to ``_STAR_PAIRS`` pairs) or
    per pair of distinct stars, which returns None if ``deadline`` passes meanwhile.
    """
    if costs.scalar is None and len(a.nodes) * len(b.nodes) <= _STAR_PAIRS:
        out = np.zeros((len(a.nodes), len(b.nodes)))
        for i, inc_a in enumerate(a.incident):
            for k, inc_b in enumerate(b.incident):
                out[i, k] = _assignment_cost(
                    costs.edge_sub[np.ix_(inc_a, inc_b)],
                    costs.edge_del[inc_a],
                    costs.edge_ins[inc_b],
                )
        return out
    if costs.scalar is None:
        # The value depends only on the two multisets of incident edge labels.
        stars_a, row = _distinct_stars(a, costs.edge_a)
        stars_b, col = _distinct_stars(b, costs.edge_b)
        table = np.zeros((len(stars_a), len(stars_b)))
        for i, sa in enumerate(stars_a):
            if deadline is not None and time.perf_counter() > deadline:
                return None
            for k, sb in enumerate(stars_b):
                table[i, k] = _assignment_cost(
                    costs.edge_sub_t[np.ix_(sa, sb)], costs.edge_del_t[sa], costs.edge_ins_t[sb]
                )
        return table[row[:, None], col[None, :]]
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


def _distinct_stars(
    lab: Labeled, codes: NDArray[np.intp]
) -> tuple[list[NDArray[np.intp]], NDArray[np.intp]]:
    """Distinct sorted multisets of incident edge label codes, and each node's one."""
    ids: dict[tuple[int, ...], int] = {}
    row = np.array(
        [ids.setdefault(tuple(sorted(codes[inc].tolist())), len(ids)) for inc in lab.incident],
        dtype=np.intp,
    )
    return [np.array(key, dtype=np.intp) for key in ids], row


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


def _class_cost(
    codes_a: NDArray[np.intp],
    codes_b: NDArray[np.intp],
    sub_t: NDArray[np.float64],
    del_t: NDArray[np.float64],
    ins_t: NDArray[np.float64],
) -> float:
    """A lower bound on the least cost of editing one label multiset into the other.

    Pairs label classes, not items: a transportation problem with one row per label of
    the first multiset plus one for insertions, one column per label of the second plus
    one for deletions, solved by HiGHS (``scipy.optimize.linprog``). Its optimum equals
    that of the item assignment (transportation problems with whole supplies have whole
    optimal flows). The bound is read from HiGHS's duals u, v, as
    ``s @ u + d @ v + sum(min(0, c - u - v) * min(s, d))``, valid for any u, v, so solver
    tolerances cannot make it too high. With more than ``_MAX_CLASS_PAIRS`` class pairs,
    each item at its cheapest (both sides, the larger sum) instead.
    """
    k = len(del_t)
    count_a = np.bincount(codes_a, minlength=k)
    count_b = np.bincount(codes_b, minlength=k)
    ra, rb = np.flatnonzero(count_a), np.flatnonzero(count_b)
    n1, n2 = len(codes_a), len(codes_b)
    if n1 == 0 or n2 == 0:
        return float(count_a @ del_t + count_b @ ins_t)
    if (len(ra) + 1) * (len(rb) + 1) > _MAX_CLASS_PAIRS:
        # the cheapest row or column of each item; label sets are scanned in chunks
        each_a = np.minimum(del_t[ra], _chunked_min(sub_t, ra, rb, axis=1))
        each_b = np.minimum(ins_t[rb], _chunked_min(sub_t, ra, rb, axis=0))
        return float(max(count_a[ra] @ each_a, count_b[rb] @ each_b))
    cost = np.zeros((len(ra) + 1, len(rb) + 1))
    cost[:-1, :-1] = sub_t[np.ix_(ra, rb)]
    cost[:-1, -1] = del_t[ra]
    cost[-1, :-1] = ins_t[rb]
    supply = np.concatenate([count_a[ra], [n2]]).astype(float)
    demand = np.concatenate([count_b[rb], [n1]]).astype(float)
    p, q = cost.shape
    cells = np.arange(p * q)
    rows = np.concatenate([cells // q, p + cells % q])
    matrix = coo_array((np.ones(2 * p * q), (rows, np.tile(cells, 2))), shape=(p + q, p * q))
    res = linprog(
        cost.ravel(),
        A_eq=matrix.tocsc(),
        b_eq=np.concatenate([supply, demand]),
        bounds=(0, None),
        method="highs",
    )
    if res.status != 0 or res.eqlin is None:  # pragma: no cover - always feasible
        return 0.0
    dual = np.asarray(res.eqlin.marginals, dtype=float)
    u, v = dual[:p], dual[p:]
    slack = np.minimum(0.0, cost - u[:, None] - v[None, :])
    cap = np.minimum(supply[:, None], demand[None, :])
    return max(0.0, float(supply @ u + demand @ v + (slack * cap).sum()))


def _chunked_min(
    table: NDArray[np.float64], rows: NDArray[np.intp], cols: NDArray[np.intp], axis: int
) -> NDArray[np.float64]:
    """Minimum of ``table[rows][:, cols]`` along ``axis``, in blocks of about 1M entries."""
    keep, over = (rows, cols) if axis == 1 else (cols, rows)
    out = np.empty(len(keep))
    step = max(1, 1_000_000 // max(len(over), 1))
    for s in range(0, len(keep), step):
        part = keep[s : s + step]
        block = table[np.ix_(part, over)] if axis == 1 else table[np.ix_(over, part)]
        out[s : s + step] = block.min(axis=axis)
    return out


def _label_parts(a: Labeled, b: Labeled, costs: Costs) -> tuple[float, float]:
    """The node part and the edge part of :func:`label_bound`."""
    if costs.scalar is None:
        n1, n2, m1, m2 = len(a.nodes), len(b.nodes), len(a.edges), len(b.edges)
        if n1 + n2 <= _ASSIGN_ITEMS:
            nodes = _assignment_cost(costs.node_sub, costs.node_del, costs.node_ins)
        else:
            nodes = _class_cost(
                costs.node_a, costs.node_b, costs.node_sub_t, costs.node_del_t, costs.node_ins_t
            )
        if m1 + m2 <= _ASSIGN_ITEMS:
            edges = _assignment_cost(costs.edge_sub, costs.edge_del, costs.edge_ins)
        else:
            edges = _class_cost(
                costs.edge_a, costs.edge_b, costs.edge_sub_t, costs.edge_del_t, costs.edge_ins_t
            )
        return nodes, edges
    node_del, node_ins, node_sub, edge_del, edge_ins, edge_sub = costs.scalar
    return _multiset_cost(
        costs.node_a.tolist(), costs.node_b.tolist(), node_sub, node_del, node_ins
    ), _multiset_cost(costs.edge_a.tolist(), costs.edge_b.tolist(), edge_sub, edge_del, edge_ins)


def label_bound(a: Labeled, b: Labeled, costs: Costs) -> float:
    """Label multiset bound: node and edge labels edited as two independent multisets.

    O(n + m) with costs that do not depend on the labels; otherwise an assignment of the
    items when there are at most ``_ASSIGN_ITEMS`` of them, else of label classes.
    """
    nodes, edges = _label_parts(a, b, costs)
    return nodes + edges


def degree_bound(a: Labeled, b: Labeled, costs: Costs) -> float:
    """Lower bound on the edge part of any edit path from the two degree sequences.

    For a node i sent to k, ``|deg(i) - deg(k)|`` is at most the edges deleted at i plus
    those inserted at k (a deleted or inserted node: all its edges), so the sum over all
    nodes is at most twice the number of edge deletions and insertions. The least such
    sum over all node maps pairs both degree sequences sorted, padded with zeros
    (matching on a line). Each deletion or insertion costs at least the cheapest one.
    O(n log n).
    """
    if not len(a.edges) or not len(b.edges):
        return 0.0  # the label bound counts these exactly
    cheapest = min(float(costs.edge_del.min()), float(costs.edge_ins.min()))
    size = len(a.nodes) + len(b.nodes)
    da = np.zeros(size)
    db = np.zeros(size)
    da[: len(a.nodes)] = np.sort(a.degree)
    db[: len(b.nodes)] = np.sort(b.degree)
    return cheapest * 0.5 * float(np.abs(np.sort(da) - np.sort(db)).sum())


def _incident_sum(lab: Labeled, values: NDArray[np.float64]) -> NDArray[np.float64]:
    """Per node, the sum of ``values`` (one per edge) over its incident edges."""
    out = np.zeros(len(lab.nodes))
    if len(lab.edges):
        ends = np.asarray(lab.edges, dtype=np.intp)
        np.add.at(out, ends[:, 0], values)
        np.add.at(out, ends[:, 1], values)
    return out


def cheap_bounds(
    a: Labeled,
    b: Labeled,
    costs: Costs,
    path_cost: PathCost | None = None,
    deadline: float | None = None,
    anchor: NDArray[np.intp] | None = None,
) -> tuple[float, float, NDArray[np.intp]]:
    """Cheap lower bound, bipartite upper bound and the node map giving that upper bound.

    Above ``MAX_SEARCH_NODES`` nodes in all, the anchored map (``anchor`` if given, else
    :func:`anchored`, cut short at ``deadline``) is a third candidate for the upper bound.
    """
    n1, n2 = len(a.nodes), len(b.nodes)
    if n1 == 0 or n2 == 0:
        # Nothing to pair: delete everything of a, insert everything of b.
        cost = float(costs.node_del.sum() + costs.node_ins.sum())
        cost += float(costs.edge_del.sum() + costs.edge_ins.sum())
        return cost, cost, np.full(n1, -1, dtype=np.intp)

    star = _star_matrix(a, b, costs, deadline)
    if star is None:  # out of time
        return linear_bounds(a, b, costs, path_cost, deadline)
    lower = label_bound(a, b, costs)
    sub = node_sub_matrix(a, b, costs)
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
    others = [half]
    if n1 + n2 > MAX_SEARCH_NODES:
        # No local search at this size: the anchored map is one more candidate, often
        # far better on graphs that differ by a few edits.
        others.append(anchored(a, b, costs, deadline) if anchor is None else anchor)
    for image in others:
        other = path_cost(image)
        if other < upper:
            best_image, upper = image, other
    lower = min(round_lower(lower, costs, from_solver=False), upper)
    return lower, upper, best_image


def anchored(
    a: Labeled, b: Labeled, costs: Costs, deadline: float | None = None
) -> NDArray[np.intp]:
    """Anchored node map (see :mod:`._anchor`), nodes left over paired where it pays.

    Colours come from ``_ANCHOR_ROUNDS`` rounds of refinement. While growing, the map
    may pair different labels whose substitution costs no more than a deletion plus an
    insertion; nodes left over are paired label class by label class, cheapest saving
    first, under the same condition (so that pairing never makes the edit path dearer:
    the edges of a paired node can only be substituted instead of deleted and inserted).
    """
    colours, _ = refine(
        a,
        b,
        (costs.node_a, costs.node_b),
        (costs.edge_a, costs.edge_b),
        rounds=_ANCHOR_ROUNDS,
        deadline=deadline,
    )
    # label pairs (as colours[0], the ranks of the label codes present) worth pairing
    present = np.unique(np.concatenate([costs.node_a, costs.node_b]))
    swap = None
    if len(present) <= _MAX_SWAP_LABELS:
        saving = (
            costs.node_sub_t[np.ix_(present, present)]
            - costs.node_del_t[present][:, None]
            - costs.node_ins_t[present][None, :]
        )
        swap = saving <= 0
    image = anchored_map(a, b, colours, deadline, swap)
    used = np.zeros(len(b.nodes), dtype=bool)
    used[image[image >= 0]] = True
    free_a, free_b = np.flatnonzero(image < 0), np.flatnonzero(~used)
    if not len(free_a) or not len(free_b):
        return image
    la, lb = costs.node_a[free_a], costs.node_b[free_b]
    ka, kb = np.unique(la), np.unique(lb)
    if len(ka) * len(kb) > _MAX_CLASS_PAIRS:
        return image
    saving = (
        costs.node_sub_t[np.ix_(ka, kb)]
        - costs.node_del_t[ka][:, None]
        - costs.node_ins_t[kb][None, :]
    )
    members_a = _by_code(free_a, la, ka)
    members_b = _by_code(free_b, lb, kb)
    for flat in np.argsort(saving, axis=None, kind="stable"):
        x, y = divmod(int(flat), len(kb))
        if saving[x, y] > 0:
            break
        left, right = members_a[int(ka[x])], members_b[int(kb[y])]
        while left and right:
            image[left.pop()] = right.pop()
    return image


def _by_code(
    nodes: NDArray[np.intp], codes: NDArray[np.intp], distinct: NDArray[np.intp]
) -> dict[int, list[int]]:
    """The nodes of each code (``distinct``: the sorted distinct codes)."""
    order = np.argsort(codes, kind="stable")
    cuts = np.searchsorted(codes[order], distinct[1:])
    return {int(c): part.tolist() for c, part in zip(distinct, np.split(nodes[order], cuts))}


def linear_bounds(
    a: Labeled,
    b: Labeled,
    costs: Costs,
    path_cost: PathCost | None = None,
    deadline: float | None = None,
) -> tuple[float, float, NDArray[np.intp]]:
    """Label multiset and degree lower bound and the edit path cost of the anchored node map.

    The bounds for graphs too large for :func:`cheap_bounds`: time and memory grow with
    n + m (times a logarithm), never with n1 * n2. ``deadline`` (a
    ``time.perf_counter()`` value) cuts the growth of the anchored map short.
    """
    if len(a.nodes) == 0 or len(b.nodes) == 0:
        cost = float(costs.node_del.sum() + costs.node_ins.sum())
        cost += float(costs.edge_del.sum() + costs.edge_ins.sum())
        return cost, cost, np.full(len(a.nodes), -1, dtype=np.intp)
    nodes, edges = _label_parts(a, b, costs)
    # node and edge costs are separate parts of every edit path: bound each on its own
    lower = nodes + max(edges, degree_bound(a, b, costs))
    image = anchored(a, b, costs, deadline)
    upper = (path_cost or PathCost(a, b, costs))(image)
    return min(round_lower(lower, costs, from_solver=False), upper), upper, image

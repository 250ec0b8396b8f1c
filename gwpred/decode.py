"""Soft barycenter -> discrete labeled graph.

A barycenter is a soft structure matrix ``C`` (pair scores in ``[0, 1]``),
soft node features ``F`` (label scores) and soft edge-label channels ``E``.
Decoding picks one label per node, a set of edges and one label per edge.
Rounding ``C`` at 0.5 loses bonds (an average of shifted edges is below 0.5
everywhere) and leaves graphs in pieces; the default here instead keeps
the number of edges the weighted training graphs vote for and, when every
training graph is connected, builds a spanning tree of the strongest pairs
first.  Node degrees stay within what each node label showed in training.

This module never solves transport problems.
"""

from __future__ import annotations

import time
from collections.abc import Sequence
from dataclasses import dataclass, replace
from types import SimpleNamespace
from typing import Any

import numpy as np
from numpy.typing import ArrayLike, NDArray
from scipy import sparse
from scipy.optimize import Bounds, LinearConstraint, milp
from scipy.sparse.csgraph import connected_components

__all__ = [
    "DecodedGraph",
    "decode_anchored",
    "decode_barycenter",
    "decode_valence",
    "edge_budget",
    "weighted_median",
]


@dataclass(frozen=True)
class DecodedGraph:
    """Discrete choices for one graph.

    Attributes
    ----------
    node_classes : ndarray of shape (n,)
        Node label index per node.
    edges : ndarray of shape (m, 2)
        Node pairs ``i < j``.
    edge_classes : ndarray of shape (m,)
        Edge label index per edge.
    note : str
        Empty, or what the decoder could not do (a time budget reached, a
        constraint given up); a decoding with a note may break the rules it
        was asked to keep and says which.
    """

    node_classes: NDArray[np.int64]
    edges: NDArray[np.int64]
    edge_classes: NDArray[np.int64]
    note: str = ""


def weighted_median(values: ArrayLike, weights: ArrayLike) -> float:
    """Smallest value whose cumulative weight reaches half of the total.

    Parameters
    ----------
    values : array-like of shape (k,)
    weights : array-like of shape (k,)
        Non-negative, not all zero.

    Returns
    -------
    float

    Examples
    --------
    >>> weighted_median([5, 7, 9], [0.2, 0.5, 0.3])
    7.0
    """
    v = np.asarray(values, dtype=np.float64).ravel()
    w = np.asarray(weights, dtype=np.float64).ravel()
    if v.shape != w.shape or v.size == 0:
        raise ValueError(
            f"values and weights must be non-empty and of equal length; got {v.size} and {w.size}."
        )
    if np.any(w < 0) or not np.isfinite(w).all() or w.sum() <= 0:
        raise ValueError("weights must be finite, non-negative and not all zero.")
    order = np.argsort(v, kind="stable")
    cum = np.cumsum(w[order] / w.sum())
    return float(v[order][np.searchsorted(cum, 0.5 - 1e-12)])


def edge_budget(n_nodes: int, sizes: ArrayLike, n_edges: ArrayLike, weights: ArrayLike) -> int:
    """Number of edges to decode for an ``n_nodes`` graph.

    The weighted training graphs vote on their cycle rank ``m - n + c``
    (here with ``c = 1``: extra edges beyond a spanning tree), which does not
    depend on size the way the edge count does; the budget is
    ``n_nodes - 1 + round(weighted mean cycle rank)``, clipped to what a
    simple graph allows.

    Parameters
    ----------
    n_nodes : int
    sizes, n_edges : array-like of shape (k,)
        Node and edge counts of the weighted training graphs.
    weights : array-like of shape (k,)

    Returns
    -------
    int

    Examples
    --------
    >>> edge_budget(6, [5, 6], [5, 6], [0.5, 0.5])  # two rings vote one extra edge
    6
    """
    w = np.asarray(weights, dtype=np.float64)
    if np.any(w < 0) or not np.isfinite(w).all() or w.sum() <= 0:
        raise ValueError("weights must be finite, non-negative and not all zero.")
    rank = np.asarray(n_edges, float) - np.asarray(sizes, float) + 1.0
    extra = int(np.floor(float(w @ rank) / w.sum() + 0.5))
    return int(np.clip(n_nodes - 1 + extra, 0, n_nodes * (n_nodes - 1) // 2))


def _prepare(
    structure: ArrayLike,
    node_scores: ArrayLike,
    edge_scores: ArrayLike | None,
    max_degree: ArrayLike | None,
) -> tuple[NDArray[np.float64], NDArray[np.float64] | None, NDArray[np.int64], NDArray[np.int64]]:
    """Validate a soft barycenter; return structure, edge scores, node classes, degree caps."""
    C = np.asarray(structure, dtype=np.float64)
    F = np.asarray(node_scores, dtype=np.float64)
    n = C.shape[0]
    if C.shape != (n, n) or F.ndim != 2 or F.shape[0] != n:
        raise ValueError(
            f"structure must be (n, n) and node_scores (n, k); got {C.shape} and {F.shape}."
        )
    if not (np.all(np.isfinite(C)) and np.all(np.isfinite(F))):
        raise ValueError("the barycenter contains NaN or infinite scores; check the weights.")
    E = None
    if edge_scores is not None:
        E = np.asarray(edge_scores, dtype=np.float64)
        if E.ndim != 3 or E.shape[:2] != (n, n):
            raise ValueError(f"edge_scores must be (n, n, L) with n={n}; got {E.shape}.")
        if not np.all(np.isfinite(E)):
            raise ValueError("edge_scores contain NaN or infinite values; check the barycenter.")
    node_classes = np.argmax(F, axis=1).astype(np.int64)
    if max_degree is None:
        caps = np.full(n, n, dtype=np.int64)
    else:
        md = np.asarray(max_degree, dtype=np.int64).ravel()
        if md.shape[0] != F.shape[1]:
            raise ValueError(
                f"max_degree needs one entry per node label ({F.shape[1]}); got {md.shape[0]}."
            )
        caps = md[node_classes]
    return C, E, node_classes, caps


def decode_barycenter(
    structure: ArrayLike,
    node_scores: ArrayLike,
    edge_scores: ArrayLike | None = None,
    *,
    n_edges: int | None = None,
    connected: bool = True,
    max_degree: ArrayLike | None = None,
    threshold: float = 0.5,
) -> DecodedGraph:
    """Decode a soft barycenter into node labels, edges and edge labels.

    Parameters
    ----------
    structure : array-like of shape (n, n)
        Soft adjacency (symmetric, values in ``[0, 1]``).
    node_scores : array-like of shape (n, n_node_labels)
        Node label scores; each node takes its highest-scoring label.
    edge_scores : array-like of shape (n, n, n_edge_labels), default=None
        Edge label scores; each kept edge takes its highest-scoring label.
        ``None`` gives every edge label 0.
    n_edges : int or None, default=None
        Number of edges to keep (see :func:`edge_budget`).  ``None`` keeps
        the pairs whose score reaches ``threshold``.
    connected : bool, default=True
        First join all nodes with a spanning tree of maximal total score
        (Kruskal's algorithm on the strongest pairs), then add the strongest
        remaining pairs.
    max_degree : array-like of shape (n_node_labels,), default=None
        Largest degree allowed for each node label; pairs that would exceed
        it are skipped (a spanning tree relaxes it if it cannot finish).
    threshold : float, default=0.5
        Score a pair needs when ``n_edges`` is None.

    Returns
    -------
    DecodedGraph

    Raises
    ------
    ValueError
        On inconsistent shapes or non-finite scores.

    Examples
    --------
    >>> import numpy as np
    >>> C = np.array([[0, .4, .3], [.4, 0, .1], [.3, .1, 0]])
    >>> out = decode_barycenter(C, np.eye(3), n_edges=2)
    >>> out.edges.tolist(), out.node_classes.tolist()
    ([[0, 1], [0, 2]], [0, 1, 2])
    """
    C, E, node_classes, caps = _prepare(structure, node_scores, edge_scores, max_degree)
    n = C.shape[0]
    iu, ju = np.triu_indices(n, 1)
    score = 0.5 * (C[iu, ju] + C[ju, iu])
    order = np.argsort(-score, kind="stable")  # strongest pairs first, ties by index
    budget = 0 if n_edges is None else int(n_edges)
    degree = np.zeros(n, dtype=np.int64)
    chosen = np.zeros(len(score), dtype=bool)

    def take(k: int) -> None:
        chosen[k] = True
        degree[iu[k]] += 1
        degree[ju[k]] += 1

    if connected and n > 1:
        parent = list(range(n))

        def root(a: int) -> int:
            while parent[a] != a:
                parent[a] = parent[parent[a]]
                a = parent[a]
            return a

        for relax in (False, True):  # respect degree caps, relax only if stuck
            for k in order:
                if chosen[k]:
                    continue
                a, b = root(iu[k]), root(ju[k])
                if a == b:
                    continue
                if not relax and (degree[iu[k]] >= caps[iu[k]] or degree[ju[k]] >= caps[ju[k]]):
                    continue
                parent[a] = b
                take(k)
            if chosen.sum() == n - 1:
                break
    for k in order:
        if n_edges is None:
            if score[k] < threshold:  # threshold mode: every strong pair, beyond the tree
                break
        elif chosen.sum() >= budget:
            break
        if chosen[k] or degree[iu[k]] >= caps[iu[k]] or degree[ju[k]] >= caps[ju[k]]:
            continue
        take(k)
    keep = np.flatnonzero(chosen)
    edges = np.stack([iu[keep], ju[keep]], axis=1).astype(np.int64)
    if E is None:
        edge_classes = np.zeros(len(keep), dtype=np.int64)
    else:
        edge_classes = np.argmax(E[iu[keep], ju[keep]], axis=1).astype(np.int64)
    return DecodedGraph(node_classes, edges.reshape(-1, 2), edge_classes)


def _reach(A: NDArray[np.bool_], start: int) -> NDArray[np.bool_]:
    """Nodes reachable from ``start`` in the graph of a boolean adjacency (BFS)."""
    seen = np.zeros(len(A), dtype=bool)
    seen[start] = True
    frontier = seen.copy()
    while frontier.any():
        frontier = A[frontier].any(0) & ~seen
        seen |= frontier
    return seen


def decode_anchored(
    structure: ArrayLike,
    node_scores: ArrayLike,
    edge_scores: ArrayLike,
    anchor_structure: ArrayLike,
    anchor_edge_classes: ArrayLike,
    *,
    consensus: float = 0.8,
    connected: bool = True,
    max_degree: ArrayLike | None = None,
) -> DecodedGraph:
    """Decode a barycenter that was started from a real graph (the anchor), as edits of it.

    The barycenter's nodes are the anchor's nodes, so its pair scores say,
    for each pair of anchor nodes, which share of the weighted training
    graphs has an edge there.  Nodes take their highest-scoring label; the
    anchor's edges stay unless their score is at most ``1 - consensus``; a
    missing pair is added when its score is at least ``consensus``.

    Parameters
    ----------
    structure : array-like of shape (n, n)
        Soft adjacency of the barycenter.
    node_scores : array-like of shape (n, n_node_labels)
    edge_scores : array-like of shape (n, n, n_edge_labels)
        Labels of added edges come from here.
    anchor_structure : array-like of shape (n, n)
        0/1 adjacency of the anchor graph (same node order).
    anchor_edge_classes : array-like of shape (n, n)
        Edge label index of each anchor edge (kept edges keep it).
    consensus : float, default=0.8
        Agreement needed to change the anchor, in ``[0.5, 1]``; 1 keeps the
        anchor's edges as they are.
    connected : bool, default=True
        Never remove an edge whose removal disconnects the graph.
    max_degree : array-like of shape (n_node_labels,), default=None
        Largest degree per node label; additions beyond it are skipped.

    Returns
    -------
    DecodedGraph

    Raises
    ------
    ValueError
        On inconsistent shapes, non-finite scores or ``consensus`` outside ``[0.5, 1]``.

    Examples
    --------
    >>> import numpy as np
    >>> A = np.array([[0, 1, 0], [1, 0, 1], [0, 1, 0]])
    >>> C = np.array([[0, .9, .9], [.9, 0, .1], [.9, .1, 0]])
    >>> out = decode_anchored(C, np.eye(3), np.ones((3, 3, 1)), A, np.zeros((3, 3)))
    >>> out.edges.tolist()
    [[0, 1], [0, 2]]
    """
    C, E, node_classes, caps = _prepare(structure, node_scores, edge_scores, max_degree)
    if E is None:
        raise ValueError("decode_anchored needs edge_scores (labels of added edges come from there).")
    A0 = np.asarray(anchor_structure, dtype=np.float64) > 0.5
    n = C.shape[0]
    if A0.shape != (n, n) or np.shape(anchor_edge_classes) != (n, n):
        raise ValueError(
            f"anchor_structure and anchor_edge_classes must be ({n}, {n}) like structure; "
            f"got {A0.shape} and {np.shape(anchor_edge_classes)}."
        )
    if not 0.5 <= consensus <= 1.0:
        raise ValueError(f"consensus must lie in [0.5, 1]; got {consensus}.")
    labels = np.asarray(anchor_edge_classes, dtype=np.int64).copy()
    iu, ju = np.triu_indices(n, 1)
    score = 0.5 * (C[iu, ju] + C[ju, iu])
    anchor_pair = A0[iu, ju]
    # 1. drop the anchor edges the weighted graphs disagree with
    keep = anchor_pair & (score > 1.0 - consensus)
    A = np.zeros((n, n), dtype=bool)
    A[iu[keep], ju[keep]] = A[ju[keep], iu[keep]] = True
    degree = A.sum(1)
    # 2. add the pairs they agree on, strongest first, within the degree caps
    for k in np.argsort(-score, kind="stable"):
        i, j = iu[k], ju[k]
        if score[k] < consensus:
            break
        if not A[i, j] and degree[i] < caps[i] and degree[j] < caps[j]:
            A[i, j] = A[j, i] = True
            degree[i] += 1
            degree[j] += 1
            if not anchor_pair[k]:
                labels[i, j] = int(np.argmax(E[i, j]))
    # 3. reconnect: dropped anchor edges first, then any pair, strongest first
    if connected and n > 1 and not _reach(A, 0).all():
        for k in np.lexsort((-score, ~anchor_pair)):
            i, j = iu[k], ju[k]
            if A[i, j]:
                continue
            if _reach(A, i)[j]:
                continue  # already joined: the edge would only close a cycle
            A[i, j] = A[j, i] = True
            if not anchor_pair[k]:
                labels[i, j] = int(np.argmax(E[i, j]))
            if _reach(A, 0).all():
                break
    keep = np.flatnonzero(A[iu, ju])
    edges = np.stack([iu[keep], ju[keep]], axis=1).astype(np.int64).reshape(-1, 2)
    return DecodedGraph(node_classes, edges, labels[iu[keep], ju[keep]])


def _int_vector(
    name: str, value: ArrayLike, size: int, lo: int = 0
) -> NDArray[np.int64]:
    arr = np.asarray(value)
    if (
        arr.shape != (size,)
        or (arr.size and not np.issubdtype(arr.dtype, np.integer))
        or np.any(arr < lo)
    ):
        raise ValueError(
            f"{name} must hold {size} integers >= {lo}; got {np.asarray(value).tolist()!r}."
        )
    return arr.astype(np.int64)


#: Rounds of connectivity cuts (``decode_valence(..., cuts=True)``) before the pieces of the
#: program's graph are joined by a repair instead; cuts go on only when the repair finds no
#: move. 0, joining at once, was the fastest and as good on 40 drug-like molecules of 35-45
#: atoms with formulas (median 0.27 s against 0.63 s with one round; benchmarks/bench_druglike.py).
CUT_ROUNDS = 0


@dataclass(frozen=True)
class _Rules:
    """Checked constraints of one :func:`decode_valence` call."""

    val: NDArray[np.int64]  # largest bond-order sum per label
    order: NDArray[np.int64]  # bond order per edge label
    sets: list[tuple[int, ...]] | None  # allowed valences per label (for hydrogens)
    groups: NDArray[np.int64] | None  # group per label and exact nodes per group
    group_counts: NDArray[np.int64] | None
    charges: NDArray[np.int64] | None  # formal charge per label and the exact net charge
    net_charge: int | None
    total: int | None  # exact sum of bond orders
    hydrogens: int | None  # exact implicit hydrogens
    connected: bool


def _implicit(allowed: tuple[int, ...], load: int) -> int:
    return next((v - load for v in allowed if v >= load), -1)


def _feasible(g: DecodedGraph, rules: _Rules) -> bool:
    """Whether a decoded graph meets every constraint of :func:`decode_valence`."""
    n = len(g.node_classes)
    cls = np.asarray(g.node_classes, dtype=np.int64)
    e = np.asarray(g.edges, dtype=np.int64).reshape(-1, 2)
    w = rules.order[np.asarray(g.edge_classes, dtype=np.int64)]
    load = np.bincount(e.ravel(), weights=np.repeat(w, 2), minlength=n).astype(np.int64)
    if np.any(load > rules.val[cls]):
        return False
    if rules.group_counts is not None and rules.groups is not None and not np.array_equal(
        np.bincount(rules.groups[cls], minlength=len(rules.group_counts)), rules.group_counts
    ):
        return False
    if rules.net_charge is not None and rules.charges is not None and int(rules.charges[cls].sum()) != rules.net_charge:
        return False
    if rules.total is not None and int(w.sum()) != rules.total:
        return False
    if rules.hydrogens is not None and rules.sets is not None:
        if sum(_implicit(rules.sets[c], int(k)) for c, k in zip(cls.tolist(), load.tolist())) != rules.hydrogens:
            return False
    if rules.connected and n > 1:
        A = np.zeros((n, n), dtype=bool)
        A[e[:, 0], e[:, 1]] = A[e[:, 1], e[:, 0]] = True
        return bool(_reach(A, 0).all())
    return True


def _pair_index(a: Any, b: Any, n: int) -> Any:
    """Position of the pair ``a < b`` in ``np.triu_indices(n, 1)`` order (ints or arrays)."""
    return a * n - a * (a + 1) // 2 + (b - a - 1)


def _edge_map(g: DecodedGraph) -> dict[tuple[int, int], int]:
    """A decoding's edges as ``{(a, b): edge label}``."""
    return {(int(a), int(b)): int(c) for (a, b), c in zip(np.asarray(g.edges).reshape(-1, 2), g.edge_classes)}


def _loads(edges: dict[tuple[int, int], int], order: NDArray[np.int64], n: int) -> NDArray[np.int64]:
    """Bond orders at each node of ``{(a, b): edge label}``."""
    out = np.zeros(n, dtype=np.int64)
    for (a, b), c in edges.items():
        out[a] += order[c]
        out[b] += order[c]
    return out


def _from_map(cls: NDArray[np.int64], pair: dict[tuple[int, int], int], note: str = "") -> DecodedGraph:
    edges = np.array(sorted(pair), dtype=np.int64).reshape(-1, 2)
    return DecodedGraph(cls, edges, np.array([pair[(int(a), int(b))] for a, b in edges], dtype=np.int64), note)


def _join(g: DecodedGraph, cy: NDArray[np.float64], rules: _Rules) -> DecodedGraph | None:
    """Join the pieces of a decoding that meets every constraint but connectivity, keeping them.

    Each step adds the cheapest single bond between two pieces and, where the hydrogens (or
    the bond total) must stay as they are, lowers the cheapest other bond by one order (a
    double becomes single; a single bond on a cycle goes), so that atoms, charges, valences
    and hydrogens are unchanged; where no atom has a free valence, two bonds of one order in
    different pieces trade ends instead (a-b, u-v -> a-u, b-v), which changes no atom's
    bonds.  None when no such step is left.
    """
    n = len(g.node_classes)
    cls = np.asarray(g.node_classes, dtype=np.int64)
    pair = _edge_map(g)
    of_order = {int(o): c for c, o in enumerate(rules.order.tolist())}
    if 1 not in of_order:
        return None
    single = of_order[1]
    keep_h = rules.hydrogens is not None or rules.total is not None
    cap = rules.val[cls]

    def pieces(edges: Any) -> tuple[int, NDArray[np.int64]]:
        e = np.array(list(edges), dtype=np.int64).reshape(-1, 2)
        graph = sparse.coo_matrix((np.ones(len(e)), (e[:, 0], e[:, 1])), shape=(n, n))
        return connected_components(graph, directed=False)

    def loads(edges: dict) -> NDArray[np.int64]:
        return _loads(edges, rules.order, n)

    def n_pairs_of(a: int, b: int) -> int:
        return _pair_index(a, b, n)

    def hydrogens(edges: dict) -> int:
        load = loads(edges)
        if rules.sets is None:
            return int((rules.val[cls] - load).sum())
        return sum(_implicit(rules.sets[c], int(k)) for c, k in zip(cls.tolist(), load.tolist()))

    target = hydrogens(pair)
    count, piece = pieces(pair)
    while count > 1:
        load = loads(pair)
        joins = sorted(
            (cy[n_pairs_of(a, b), single], a, b)
            for a in range(n) for b in range(a + 1, n)
            if piece[a] != piece[b] and load[a] < cap[a] and load[b] < cap[b]
        )
        lowers = sorted(
            ((cy[n_pairs_of(a, b), of_order[rules.order[c] - 1]] if rules.order[c] > 1 else 0.0)
             - cy[n_pairs_of(a, b), c], a, b)
            for (a, b), c in pair.items()
        ) if keep_h else [(0.0, -1, -1)]
        done = False
        for _, a, b in joins[:30]:
            for _, u, v in lowers:
                trial = dict(pair)
                trial[(a, b)] = single
                if u >= 0:
                    c = trial[(u, v)]
                    if rules.order[c] > 1:
                        trial[(u, v)] = of_order[rules.order[c] - 1]
                    else:
                        del trial[(u, v)]
                if np.any(loads(trial) > cap) or (keep_h and hydrogens(trial) != target):
                    continue
                after, labels = pieces(trial)
                if after < count:
                    pair, count, piece, done = trial, after, labels, True
                    break
            if done:
                break
        if not done:  # swap: two bonds of one order in different pieces trade ends (loads unchanged)
            swaps = []
            items = list(pair.items())
            for i, ((a, b), c) in enumerate(items):
                for (u, v), d in items[i + 1 :]:
                    if d != c or piece[a] == piece[u]:
                        continue
                    for x, y, z, w in ((a, u, b, v), (a, v, b, u)):
                        e1, e2 = (min(x, y), max(x, y)), (min(z, w), max(z, w))
                        if e1 in pair or e2 in pair:
                            continue
                        gain = (cy[n_pairs_of(*e1), c] + cy[n_pairs_of(*e2), c]
                                - cy[n_pairs_of(a, b), c] - cy[n_pairs_of(u, v), c])
                        swaps.append((gain, (a, b), (u, v), e1, e2, c))
            for _, old1, old2, e1, e2, c in sorted(swaps)[:200]:
                trial = dict(pair)
                del trial[old1], trial[old2]
                trial[e1] = trial[e2] = c
                after, labels = pieces(trial)
                if after < count:
                    pair, count, piece, done = trial, after, labels, True
                    break
        if not done:
            return None
    return _from_map(cls, pair)


def _repair(start: DecodedGraph, cy: NDArray[np.float64], rules: _Rules) -> DecodedGraph:
    """A quick valence repair: lower or drop the least supported bonds at over-full atoms, then
    join pieces by single bonds between atoms with free valence (cheapest first).

    Keeps valences always; connectivity when free valences allow; formula
    constraints are not attempted (the caller's note says so).
    """
    n = len(start.node_classes)
    cls = np.asarray(start.node_classes, dtype=np.int64)
    pair = _edge_map(start)
    by_order = np.argsort(rules.order, kind="stable")  # edge labels from the smallest bond order

    def load() -> NDArray[np.int64]:
        return _loads(pair, rules.order, n)

    cap = rules.val[cls]
    over = np.flatnonzero(load() > cap)
    while over.size:
        i = int(over[0])
        mine = [(a, b) for (a, b) in pair if i in (a, b)]
        worst = max(mine, key=lambda ab: cy[_pair_index(*ab, n), pair[ab]])  # the least supported bond
        lower = [c for c in by_order if rules.order[c] < rules.order[pair[worst]]]
        if lower:
            pair[worst] = int(lower[-1])  # one step down: double -> single
        else:
            del pair[worst]
        over = np.flatnonzero(load() > cap)
    if rules.connected and n > 1:
        single = int(by_order[0])
        while True:
            A = np.zeros((n, n), dtype=bool)
            for a, b in pair:
                A[a, b] = A[b, a] = True
            seen = _reach(A, 0)
            if seen.all():
                break
            free = cap - load() >= rules.order[single]
            options = [
                (cy[_pair_index(min(a, b), max(a, b), n), single], min(a, b), max(a, b))
                for a in np.flatnonzero(seen & free) for b in np.flatnonzero(~seen & free)
            ]
            if not options:
                break  # no free valence left to join the pieces: the note says so
            _, a, b = min(options)
            pair[(int(a), int(b))] = single
    return _from_map(cls, pair)


def decode_valence(
    structure: ArrayLike,
    node_scores: ArrayLike,
    edge_scores: ArrayLike,
    valences: ArrayLike,
    bond_orders: ArrayLike,
    *,
    reference: DecodedGraph | None = None,
    reference_weight: float = 1.0,
    connected: bool = True,
    label_counts: ArrayLike | None = None,
    total_bond_order: int | None = None,
    label_groups: ArrayLike | None = None,
    group_counts: ArrayLike | None = None,
    label_charges: ArrayLike | None = None,
    net_charge: int | None = None,
    valence_sets: Sequence[Sequence[int] | None] | None = None,
    hydrogens: int | None = None,
    time_limit: float = 10.0,
    min_support: float = 0.0,
    cuts: bool = False,
) -> DecodedGraph:
    """Decode a barycenter into a graph that obeys valences, by an integer program.

    Every node takes one label ``a`` and the bond orders of its edges sum to
    at most ``valences[a]`` (the rest is filled by implicit hydrogens).  Among
    such graphs (connected ones if asked, with exactly ``label_counts`` nodes
    of each label and edge orders summing to ``total_bond_order`` if given),
    the program picks the one of least expected edit cost under the
    barycenter's scores, plus ``reference_weight`` per edit away from a
    reference decoding: a valid reference comes back unchanged when the
    weight is at least 1, an invalid one is repaired with few edits.

    The expected cost of a choice counts the barycenter's scores as
    probabilities: label ``a`` at node ``i`` costs ``1 - F[i, a]``, an edge of
    label ``b`` at pair ``(i, j)`` costs ``1 - E[i, j, b]`` and no edge costs
    ``C[i, j]``.  Connectivity is a single-commodity flow from node 0.
    Solved with scipy's HiGHS ``milp``.

    Parameters
    ----------
    structure : array-like of shape (n, n)
        Soft adjacency ``C``.
    node_scores : array-like of shape (n, n_node_labels)
        Node label scores ``F``.
    edge_scores : array-like of shape (n, n, n_edge_labels)
        Edge label scores ``E``.
    valences : array-like of int, shape (n_node_labels,)
        Largest total bond order per node label.
    bond_orders : array-like of int, shape (n_edge_labels,)
        Bond order of each edge label (1 for unlabeled edges).
    reference : DecodedGraph, default=None
        A decoding to stay close to.
    reference_weight : float, default=1.0
        Cost of each node-label or edge edit away from ``reference``.
    connected : bool, default=True
        Require a connected graph.
    label_counts : array-like of int, shape (n_node_labels,), default=None
        Exact number of nodes per label (from a molecular formula); must sum
        to ``n``.
    total_bond_order : int, default=None
        Exact sum of the bond orders of all edges (fixed by a formula's
        hydrogen count: ``(sum of valences - hydrogens) / 2``).
    label_groups : array-like of int, shape (n_node_labels,), default=None
        Group of each label for ``group_counts`` (a formula's element:
        ``"N"`` and ``"N+"`` are both nitrogen).
    group_counts : array-like of int, default=None
        Exact number of nodes per group; must sum to ``n``.
    label_charges : array-like of int, shape (n_node_labels,), default=None
        Formal charge of each label, for ``net_charge``.
    net_charge : int, default=None
        Exact sum of the nodes' formal charges.
    valence_sets : sequence of (sequence of int or None), default=None
        Allowed valences per label (``"S"``: 2, 4, 6), for ``hydrogens``; each
        atom takes the smallest allowed valence at or above its bonds, as
        RDKit does. None: any valence up to ``valences[a]``, no hydrogens
        (RDKit's rule for metals). Without it, ``valences`` is the only valence.
    hydrogens : int, default=None
        Exact number of implicit hydrogens of the whole graph (a formula's).
    time_limit : float, default=10.0
        Seconds for the solver (the time budget).  When it runs out, the best
        graph found is returned with a ``note``; when none was found, a quick
        repair of the reference (or of the best labels and edges) that keeps
        the valences, with a ``note`` naming the constraints it gave up.
    min_support : float, default=0.0
        When positive, the program first runs over the node pairs whose
        structure or edge score reaches it (and the reference's edges), with
        half the time budget, which is much faster for large graphs; the
        result is then the best graph whose edges are all such pairs. Only if
        that finds no graph do all pairs come in.
    cuts : bool, default=False
        Keep graphs connected by cut constraints added as needed (solve, find
        the pieces, require an edge out of each, solve again) instead of a
        flow: the same optimum, far faster on large graphs.

    Returns
    -------
    DecodedGraph
        With an empty ``note`` when the program was solved to optimality.

    Raises
    ------
    ValueError
        On inconsistent shapes or values, or when no graph satisfies the
        constraints (for example a formula whose hydrogen count no connected
        graph of its atoms can have).

    Examples
    --------
    Three carbons and an oxygen, where the barycenter half-suggests a fourth
    bond at the oxygen; valence 2 rules the third bond at the oxygen out:

    >>> import numpy as np
    >>> C = np.zeros((4, 4)); C[0, 1] = C[1, 2] = C[0, 3] = C[2, 3] = C[1, 3] = 0.9
    >>> C = C + C.T; E = C[:, :, None]
    >>> F = np.array([[1, 0], [1, 0], [1, 0], [0, 1.0]])  # labels C, O
    >>> out = decode_valence(C, F, E, valences=[4, 2], bond_orders=[1])
    >>> int((out.edges == 3).sum())
    2
    """
    C, E, _, _ = _prepare(structure, node_scores, edge_scores, None)
    if E is None:
        raise ValueError("decode_valence needs edge_scores.")
    F = np.asarray(node_scores, dtype=np.float64)
    n, K = F.shape
    L = E.shape[2]
    val = _int_vector("valences", valences, K)
    order = _int_vector("bond_orders", bond_orders, L, lo=1)
    if not (np.isfinite(reference_weight) and reference_weight >= 0):
        raise ValueError(
            f"reference_weight must be a non-negative number; got {reference_weight!r}."
        )
    iu, ju = np.triu_indices(n, 1)
    P = len(iu)
    Cp = 0.5 * (C[iu, ju] + C[ju, iu])
    Ep = 0.5 * (E[iu, ju] + E[ju, iu])  # (P, L)
    # ---- costs: expected edit cost, plus edits away from the reference
    cx = 1.0 - F
    cy = 1.0 - Ep - Cp[:, None]
    ref_edge = np.full(P, -1, dtype=np.int64)  # edge label of the reference at each pair, or -1
    if reference is not None:
        ref_nodes = np.asarray(reference.node_classes, dtype=np.int64)
        if ref_nodes.shape != (n,):
            raise ValueError(
                f"reference has {ref_nodes.shape[0]} nodes; the barycenter has {n}."
            )
        cx = cx + reference_weight * (np.arange(K)[None, :] != ref_nodes[:, None])
        if len(reference.edges):
            e = np.sort(np.asarray(reference.edges, dtype=np.int64), axis=1)
            ref_edge[_pair_index(e[:, 0], e[:, 1], n)] = reference.edge_classes
        has = ref_edge >= 0
        # an edge of label b: +1 edit unless the reference has exactly it;
        # no edge: +1 edit where the reference has one (moved into cy as -1)
        cy = cy + reference_weight * (
            (np.arange(L)[None, :] != ref_edge[:, None]).astype(float) - has[:, None]
        )
    use_flow = connected and n > 1
    rules = _check_rules(
        n, K, val, order, label_counts, label_groups, group_counts, label_charges, net_charge,
        valence_sets, hydrogens, total_bond_order, use_flow,
    )
    if reference is not None and reference_weight >= 1.0 and _feasible(reference, rules):
        # every single edit away from the reference gains at most 1 in expected
        # cost and pays reference_weight >= 1: the reference is optimal
        return reference
    cy_all = cy

    def program(
        iu: NDArray[np.int64], ju: NDArray[np.int64], cy: NDArray[np.float64], limit: float,
        labels: NDArray[np.int64] | None = None,
    ) -> Any:
        """Build and solve the integer program over the candidate pairs ``(iu, ju)`` (with the
        node labels fixed, if given)."""
        P = len(iu)
        # atoms of labels with several allowed valences choose one (z), when hydrogens count
        multi = [] if rules.hydrogens is None else [a for a in range(K) if len(rules.sets[a]) > 1]
        options = {a: rules.sets[a] for a in multi}
        nz = n * sum(len(v) for v in options.values())
        nx_, ny = n * K, P * L
        nf = 2 * P if use_flow and not cuts else 0
        nv = nx_ + ny + nz + nf
        cost = np.concatenate([cx.ravel(), cy.ravel(), np.zeros(nz + nf)])
        # constraint matrix as COO triplets, one block of rows at a time
        r_i: list[NDArray[np.int64]] = []
        c_i: list[NDArray[np.int64]] = []
        v_i: list[NDArray[np.float64]] = []
        lo: list[NDArray[np.float64]] = []
        hi: list[NDArray[np.float64]] = []
        n_rows = 0

        def add(
            rr: ArrayLike,
            cc: ArrayLike,
            vv: ArrayLike,
            m: int,
            low: ArrayLike,
            high: ArrayLike,
        ) -> None:
            nonlocal n_rows
            rr, cc = np.asarray(rr, np.int64), np.asarray(cc, np.int64)
            r_i.append(rr + n_rows)
            c_i.append(cc)
            v_i.append(np.broadcast_to(np.asarray(vv, float), rr.shape))
            lo.append(np.broadcast_to(np.asarray(low, float), (m,)))
            hi.append(np.broadcast_to(np.asarray(high, float), (m,)))
            n_rows += m

        xi = np.arange(nx_).reshape(n, K)  # variable index of x[i, a]
        yi = nx_ + np.arange(ny).reshape(P, L)  # of y[p, b]
        add(np.repeat(np.arange(n), K), xi.ravel(), 1.0, n, 1, 1)  # one label per node
        add(np.repeat(np.arange(P), L), yi.ravel(), 1.0, P, 0, 1)  # one edge label at most
        # valence: bond orders at node i minus its label's largest valence <= 0
        ends = np.r_[iu, ju]
        load_rows = np.repeat(ends, L)  # bond orders at each node, as (row, column, value) triplets
        load_cols = np.tile(yi, (2, 1)).ravel()
        load_vals = np.tile(order, 2 * P).astype(float)
        add(
            np.r_[np.repeat(np.arange(n), K), load_rows],
            np.r_[xi.ravel(), load_cols],
            np.r_[-np.tile(val, n).astype(float), load_vals],
            n,
            -np.inf,
            0,
        )
        if rules.group_counts is not None:
            add(np.tile(rules.groups, n), xi.ravel(), 1.0, len(rules.group_counts), rules.group_counts,
                rules.group_counts)
        if rules.net_charge is not None:
            q = float(rules.net_charge)
            add(np.zeros(nx_, np.int64), xi.ravel(), np.tile(rules.charges, n).astype(float), 1, q, q)
        if rules.total is not None:
            t = float(rules.total)
            add(
                np.zeros(ny, np.int64), yi.ravel(), np.tile(order, P).astype(float), 1, t, t
            )
        if rules.hydrogens is not None:
            # hydrogens = sum over atoms of (chosen valence - bond orders); a single-valence label's
            # valence is its x, a multi-valence label's is one z per allowed value, chosen as the
            # smallest allowed value at or above the bonds (lower bound: previous value + 1)
            h_cols = [xi[:, a] for a in range(K) if a not in options]
            h_vals = [np.full(n, float(rules.sets[a][0])) for a in range(K) if a not in options]
            start = nx_ + ny
            for a, allowed in options.items():
                zi = start + np.arange(n * len(allowed)).reshape(n, len(allowed))
                start += zi.size
                v = np.asarray(allowed, dtype=float)
                floor = np.r_[0.0, v[:-1] + 1.0]
                add(np.r_[np.repeat(np.arange(n), len(v)), np.arange(n)], np.r_[zi.ravel(), xi[:, a]],
                    np.r_[np.ones(zi.size), -np.ones(n)], n, 0, 0)  # one value if label a
                big = float(val.max())  # bonds <= chosen value, when the label is a (the cap row bounds the rest)
                add(np.r_[np.repeat(np.arange(n), len(v)), load_rows, np.arange(n)],
                    np.r_[zi.ravel(), load_cols, xi[:, a]],
                    np.r_[-np.tile(v, n), load_vals, np.full(n, big)], n, -np.inf, big)
                add(np.r_[np.repeat(np.arange(n), len(v)), load_rows], np.r_[zi.ravel(), load_cols],
                    np.r_[-np.tile(floor, n), load_vals], n, 0, np.inf)  # bonds > previous value
                h_cols.append(zi.ravel())
                h_vals.append(np.tile(v, n))
            h = float(rules.hydrogens)
            cols = np.concatenate(h_cols + [yi.ravel()])
            add(np.zeros(len(cols), np.int64), cols,
                np.concatenate(h_vals + [-2.0 * np.tile(order, P).astype(float)]), 1, h, h)
        if use_flow and not cuts:
            # arcs a < P: iu -> ju, a >= P: ju -> iu; inflow - outflow = 1 at every
            # node but the root, which sends n - 1; capacity (n - 1) per edge
            fi = nx_ + ny + nz + np.arange(nf)
            tail, head = np.r_[iu, ju], np.r_[ju, iu]
            demand = np.ones(n)
            demand[0] = -(n - 1)
            add(
                np.r_[head, tail],
                np.r_[fi, fi],
                np.r_[np.ones(nf), -np.ones(nf)],
                n,
                demand,
                demand,
            )
            arc = np.arange(nf)
            add(
                np.r_[arc, np.repeat(arc, L)],
                np.r_[fi, np.tile(yi, (2, 1)).ravel()],
                np.r_[np.ones(nf), np.full(nf * L, -(n - 1.0))],
                nf,
                -np.inf,
                0,
            )
        integrality = np.r_[np.ones(nx_ + ny + nz), np.zeros(nf)]
        upper = np.r_[np.ones(nx_ + ny + nz), np.full(nf, n - 1.0)]
        if labels is not None:
            upper[:nx_] = (np.arange(K)[None, :] == labels[:, None]).ravel()
        start = time.perf_counter()
        rounds = 0
        while True:
            A = sparse.csr_matrix(
                (np.concatenate(v_i), (np.concatenate(r_i), np.concatenate(c_i))),
                shape=(n_rows, nv),
            )
            left = float(limit) - (time.perf_counter() - start)
            res = milp(
                cost,
                constraints=LinearConstraint(A, np.concatenate(lo), np.concatenate(hi)),
                integrality=integrality,
                bounds=Bounds(np.zeros(nv), upper),
                options={"time_limit": max(left, 0.01)},
            )
            if not (use_flow and cuts) or res.x is None:
                return res
            # connectivity by cuts, added as needed: each piece of a disconnected
            # solution needs an edge to the rest
            y = np.round(res.x[nx_ : nx_ + ny]).reshape(P, L).sum(1) > 0.5
            graph = sparse.coo_matrix((np.ones(int(y.sum())), (iu[y], ju[y])), shape=(n, n))
            pieces, piece = connected_components(graph, directed=False)
            if pieces == 1:
                return res
            rounds += 1
            if rounds > CUT_ROUNDS:  # join the pieces by a repair, or else cut on
                got = _solution(res.x, n, K, P, L, iu, ju)
                joined = _join(got, cy_all, rules)
                if joined is not None:
                    return SimpleNamespace(x=None, status=1, message="pieces joined", graph=joined)
            if time.perf_counter() - start >= float(limit):
                return SimpleNamespace(x=None, status=1, message="time budget reached", graph=None)
            for c in range(pieces):
                cross = np.flatnonzero((piece[iu] == c) != (piece[ju] == c))
                add(np.zeros(cross.size * L, np.int64), yi[cross].ravel(), 1.0, 1, 1, np.inf)

    # first over the pairs the barycenter supports (far fewer variables), then over all
    clock = time.perf_counter()
    used = np.arange(P)
    res = None
    if min_support > 0:
        keep = np.maximum(Cp, Ep.max(1)) >= min_support
        if reference is not None:
            keep |= ref_edge >= 0
        sel = np.flatnonzero(keep)
        if sel.size < P:
            res = program(iu[sel], ju[sel], cy[sel], 0.5 * float(time_limit))
            used = sel
            if res.x is None and getattr(res, "graph", None) is None:  # infeasible on these pairs, or
                res, used = None, np.arange(P)  # nothing found in time: all pairs
            if res is None and (rules.group_counts is not None or rules.net_charge is not None):
                # the labels alone first (counts, charge: an assignment), then the bonds over all
                # pairs: a much smaller program, often solved when the whole one is not in time
                fixed = _labels_only(cx, rules, 0.1 * float(time_limit))
                if fixed is not None:
                    res = program(iu, ju, cy, 0.25 * float(time_limit), labels=fixed)
                    if res.x is None and getattr(res, "graph", None) is None:
                        res = None
    if res is None:
        res = program(iu, ju, cy, max(float(time_limit) - (time.perf_counter() - clock), 0.05))
    if getattr(res, "graph", None) is not None:
        return replace(res.graph, note=(
            f"the valence integer program, with connectivity left to {CUT_ROUNDS} round(s) of cuts "
            f"(time budget {float(time_limit):g} s), gave a graph in pieces; they were joined by single "
            "bonds (each paid for by one bond order less elsewhere, or by two bonds trading ends), which "
            "keeps every constraint but is not proven the best."
        ))
    if res.x is None and res.status == 1:  # scipy's milp: time or iteration limit, no solution found
        if reference is None:
            best = np.argmin(cy, axis=1)
            keep = np.flatnonzero(cy[np.arange(P), best] < 0)
            reference = DecodedGraph(
                np.argmin(cx, axis=1).astype(np.int64),
                np.stack([iu[keep], ju[keep]], axis=1).astype(np.int64).reshape(-1, 2),
                best[keep].astype(np.int64),
            )
        fixed = _repair(reference, cy, rules)
        lost = _given_up(fixed, rules)
        return replace(fixed, note=(
            f"the valence integer program found no graph of {n} nodes within its time budget "
            f"({float(time_limit):g} s); a quick repair keeps the valences"
            + (f" but not {lost}" if lost else "") + "."
        ))
    if res.x is None:
        raise ValueError(
            "no graph satisfies the valence constraints"
            + (", the label counts" if rules.group_counts is not None else "")
            + (", the net charge" if rules.net_charge is not None else "")
            + (", the total bond order" if rules.total is not None else "")
            + (", the hydrogen count" if rules.hydrogens is not None else "")
            + (" and connectivity" if use_flow else "")
            + f" ({res.message.strip()}); check the formula or the valence table."
        )
    note = "" if res.status == 0 else (
        f"the valence integer program reached its time budget ({float(time_limit):g} s): the best "
        "graph found, which keeps every constraint, is not proven the best."
    )
    return replace(_solution(res.x, n, K, len(used), L, iu[used], ju[used]), note=note)


def _solution(
    x: NDArray[np.float64], n: int, K: int, P: int, L: int, iu: NDArray[np.int64], ju: NDArray[np.int64]
) -> DecodedGraph:
    """The graph of an integer program's solution vector (labels, then edge choices)."""
    nodes = np.round(x[: n * K]).reshape(n, K)
    y = np.round(x[n * K : n * K + P * L]).reshape(P, L)
    keep = np.flatnonzero(y.sum(1) > 0.5)
    edges = np.stack([iu[keep], ju[keep]], axis=1).astype(np.int64).reshape(-1, 2)
    return DecodedGraph(nodes.argmax(1).astype(np.int64), edges, y[keep].argmax(1).astype(np.int64))


def _labels_only(cx: NDArray[np.float64], rules: _Rules, limit: float) -> NDArray[np.int64] | None:
    """The cheapest node labels under the label counts and the net charge alone, or None."""
    n, K = cx.shape
    rows, lo, hi = [np.kron(np.eye(n), np.ones((1, K)))], [np.ones(n)], [np.ones(n)]
    if rules.group_counts is not None and rules.groups is not None:
        rows.append(np.tile((rules.groups[None, :] == np.arange(len(rules.group_counts))[:, None]).astype(float), n))
        lo.append(rules.group_counts.astype(float))
        hi.append(rules.group_counts.astype(float))
    if rules.net_charge is not None and rules.charges is not None:
        rows.append(np.tile(rules.charges.astype(float), n)[None, :])
        lo.append(np.array([float(rules.net_charge)]))
        hi.append(np.array([float(rules.net_charge)]))
    res = milp(cx.ravel(), constraints=LinearConstraint(np.vstack(rows), np.concatenate(lo), np.concatenate(hi)),
               integrality=np.ones(n * K), bounds=Bounds(0, 1), options={"time_limit": limit})
    return None if res.x is None else np.round(res.x).reshape(n, K).argmax(1).astype(np.int64)


def _given_up(g: DecodedGraph, rules: _Rules) -> str:
    """The constraints a repaired decoding breaks, in words ('' when none)."""
    lost = []
    for name, part in (
        ("the label counts", replace(rules, net_charge=None, total=None, hydrogens=None, connected=False)),
        ("the net charge", replace(rules, group_counts=None, total=None, hydrogens=None, connected=False)),
        ("the total bond order", replace(rules, group_counts=None, net_charge=None, hydrogens=None, connected=False)),
        ("the hydrogen count", replace(rules, group_counts=None, net_charge=None, total=None, connected=False)),
        ("connectivity", replace(rules, group_counts=None, net_charge=None, total=None, hydrogens=None)),
    ):
        if not _feasible(g, part):
            lost.append(name)
    return ", ".join(lost)


def _check_rules(
    n: int, K: int, val: NDArray[np.int64], order: NDArray[np.int64], label_counts: ArrayLike | None,
    label_groups: ArrayLike | None, group_counts: ArrayLike | None, label_charges: ArrayLike | None,
    net_charge: int | None, valence_sets: Sequence[Sequence[int] | None] | None, hydrogens: int | None,
    total: int | None, connected: bool,
) -> _Rules:
    """The constraints of :func:`decode_valence`, checked."""
    groups = counts = None
    if label_counts is not None:
        if label_groups is not None or group_counts is not None:
            raise ValueError("give label_counts or label_groups with group_counts, not both.")
        groups, counts = np.arange(K), _int_vector("label_counts", label_counts, K)
        if counts.sum() != n:
            raise ValueError(f"label_counts sum to {counts.sum()}, but the barycenter has {n} nodes.")
    elif (label_groups is None) != (group_counts is None):
        raise ValueError("label_groups and group_counts go together; give both or neither.")
    elif label_groups is not None:
        groups = _int_vector("label_groups", label_groups, K)
        counts = _int_vector("group_counts", group_counts, int(groups.max()) + 1 if K else 0)
        if counts.sum() != n:
            raise ValueError(f"group_counts sum to {counts.sum()}, but the barycenter has {n} nodes.")
    charges = None
    if net_charge is not None:
        if label_charges is None:
            raise ValueError("net_charge needs label_charges (the formal charge of each label).")
        arr = np.asarray(label_charges)
        if arr.shape != (K,) or (arr.size and not np.issubdtype(arr.dtype, np.integer)):
            raise ValueError(f"label_charges must hold {K} integers; got {arr.tolist()!r}.")
        charges = arr.astype(np.int64)
    sets: list[tuple[int, ...]] | None = None
    if hydrogens is not None:
        if isinstance(hydrogens, bool) or not isinstance(hydrogens, (int, np.integer)) or hydrogens < 0:
            raise ValueError(f"hydrogens must be a non-negative integer; got {hydrogens!r}.")
        given = [(int(v),) for v in val] if valence_sets is None else list(valence_sets)
        if len(given) != K:
            raise ValueError(f"valence_sets must give {K} entries (one per node label); got {len(given)}.")
        sets = []
        for a, allowed in enumerate(given):
            values = tuple(range(int(val[a]) + 1)) if allowed is None else tuple(sorted({int(v) for v in allowed}))
            if not values or values[0] < 0 or values[-1] != val[a]:
                raise ValueError(
                    f"valence_sets[{a}] = {allowed!r} must be non-negative and end at valences[{a}] = {val[a]}."
                )
            sets.append(values)
    return _Rules(val, order, sets, groups, counts, charges, net_charge, total,
                  None if hydrogens is None else int(hydrogens), connected)

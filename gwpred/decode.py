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

from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray
from scipy import sparse
from scipy.optimize import Bounds, LinearConstraint, milp

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
    """

    node_classes: NDArray[np.int64]
    edges: NDArray[np.int64]
    edge_classes: NDArray[np.int64]


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


def _feasible(
    g: DecodedGraph,
    valences: NDArray[np.int64],
    orders: NDArray[np.int64],
    counts: NDArray[np.int64] | None,
    total: int | None,
    connected: bool,
) -> bool:
    """Whether a decoded graph meets the constraints of :func:`decode_valence`."""
    n = len(g.node_classes)
    e = np.asarray(g.edges, dtype=np.int64).reshape(-1, 2)
    w = orders[np.asarray(g.edge_classes, dtype=np.int64)]
    load = np.bincount(e.ravel(), weights=np.repeat(w, 2), minlength=n)
    if np.any(load > valences[g.node_classes]):
        return False
    if counts is not None and not np.array_equal(
        np.bincount(g.node_classes, minlength=len(counts)), counts
    ):
        return False
    if total is not None and int(w.sum()) != total:
        return False
    if connected and n > 1:
        A = np.zeros((n, n), dtype=bool)
        A[e[:, 0], e[:, 1]] = A[e[:, 1], e[:, 0]] = True
        return bool(_reach(A, 0).all())
    return True


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
    time_limit: float = 10.0,
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
    time_limit : float, default=10.0
        Seconds for the solver; the best graph found by then is returned.

    Returns
    -------
    DecodedGraph

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
    if reference is not None:
        ref_nodes = np.asarray(reference.node_classes, dtype=np.int64)
        if ref_nodes.shape != (n,):
            raise ValueError(
                f"reference has {ref_nodes.shape[0]} nodes; the barycenter has {n}."
            )
        cx = cx + reference_weight * (np.arange(K)[None, :] != ref_nodes[:, None])
        ref_edge = np.full(P, -1, dtype=np.int64)
        if len(reference.edges):
            e = np.sort(np.asarray(reference.edges, dtype=np.int64), axis=1)
            pos = e[:, 0] * n - e[:, 0] * (e[:, 0] + 1) // 2 + (e[:, 1] - e[:, 0] - 1)
            ref_edge[pos] = reference.edge_classes
        has = ref_edge >= 0
        # an edge of label b: +1 edit unless the reference has exactly it;
        # no edge: +1 edit where the reference has one (moved into cy as -1)
        cy = cy + reference_weight * (
            (np.arange(L)[None, :] != ref_edge[:, None]).astype(float) - has[:, None]
        )
    use_flow = connected and n > 1
    if label_counts is not None:
        counts = _int_vector("label_counts", label_counts, K)
        if counts.sum() != n:
            raise ValueError(
                f"label_counts sum to {counts.sum()}, but the barycenter has {n} nodes."
            )
    if (
        reference is not None
        and reference_weight >= 1.0
        and _feasible(
            reference,
            val,
            order,
            counts if label_counts is not None else None,
            total_bond_order,
            use_flow,
        )
    ):
        # every single edit away from the reference gains at most 1 in expected
        # cost and pays reference_weight >= 1: the reference is optimal
        return reference
    nx_, ny = n * K, P * L
    nf = 2 * P if use_flow else 0
    nv = nx_ + ny + nf
    cost = np.concatenate([cx.ravel(), cy.ravel(), np.zeros(nf)])
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
    # valence: bond orders at node i minus its label's valence <= 0
    ends = np.r_[iu, ju]
    add(
        np.r_[np.repeat(np.arange(n), K), np.repeat(ends, L)],
        np.r_[xi.ravel(), np.tile(yi, (2, 1)).ravel()],
        np.r_[-np.tile(val, n).astype(float), np.tile(order, 2 * P).astype(float)],
        n,
        -np.inf,
        0,
    )
    if label_counts is not None:
        add(np.tile(np.arange(K), n), xi.ravel(), 1.0, K, counts, counts)
    if total_bond_order is not None:
        t = float(total_bond_order)
        add(
            np.zeros(ny, np.int64), yi.ravel(), np.tile(order, P).astype(float), 1, t, t
        )
    if use_flow:
        # arcs a < P: iu -> ju, a >= P: ju -> iu; inflow - outflow = 1 at every
        # node but the root, which sends n - 1; capacity (n - 1) per edge
        fi = nx_ + ny + np.arange(nf)
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
    A = sparse.csr_matrix(
        (np.concatenate(v_i), (np.concatenate(r_i), np.concatenate(c_i))),
        shape=(n_rows, nv),
    )
    integrality = np.r_[np.ones(nx_ + ny), np.zeros(nf)]
    upper = np.r_[np.ones(nx_ + ny), np.full(nf, n - 1.0)]
    res = milp(
        cost,
        constraints=LinearConstraint(A, np.concatenate(lo), np.concatenate(hi)),
        integrality=integrality,
        bounds=Bounds(np.zeros(nv), upper),
        options={"time_limit": float(time_limit)},
    )
    if res.x is None and res.status == 1:  # scipy's milp: time or iteration limit, no solution found
        raise ValueError(
            f"the valence integer program found no graph of {n} nodes within its time limit "
            f"({float(time_limit):g} s); the constraints may still be satisfiable. Allow more time "
            "(time_limit) or predict a smaller molecule."
        )
    if res.x is None:
        raise ValueError(
            "no graph satisfies the valence constraints"
            + (", the label counts" if label_counts is not None else "")
            + (", the total bond order" if total_bond_order is not None else "")
            + (" and connectivity" if use_flow else "")
            + f" ({res.message.strip()}); check the formula or the valence table."
        )
    x = np.round(res.x[:nx_]).reshape(n, K)
    y = np.round(res.x[nx_ : nx_ + ny]).reshape(P, L)
    node_classes = x.argmax(1).astype(np.int64)
    keep = np.flatnonzero(y.sum(1) > 0.5)
    edges = np.stack([iu[keep], ju[keep]], axis=1).astype(np.int64).reshape(-1, 2)
    return DecodedGraph(node_classes, edges, y[keep].argmax(1).astype(np.int64))

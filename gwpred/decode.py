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

__all__ = ["DecodedGraph", "weighted_median", "edge_budget", "decode_barycenter", "decode_anchored"]


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

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

__all__ = ["DecodedGraph", "weighted_median", "edge_budget", "decode_barycenter"]


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

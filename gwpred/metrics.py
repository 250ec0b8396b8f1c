r"""Scores for predicted labeled graphs: exact match, node and edge scores, summaries.

A labeled graph here is an undirected, simple :class:`networkx.Graph` whose nodes carry a
categorical label (any hashable value, e.g. an element symbol) and whose edges may carry a
categorical label (e.g. a bond order 1/2/3). An edge without the label attribute counts as
one more edge type, ``None``.

:func:`summarize` scores predictions pair by pair through the graph edit distance of
:mod:`gwpred.ged` (NP-hard; see there), whose :func:`edit_distance`,
:func:`edit_distance_bounds` and :class:`EditDistance` are re-exported here.
"""

from __future__ import annotations

from collections.abc import Hashable, Sequence
from typing import Any

import networkx as nx
import numpy as np

from .ged import EditDistance, edit_distance, edit_distance_bounds
from .ged._costs import labeled
from .ged._isomorphism import isomorphism
from .parallel import check_n_jobs, parallel_map

__all__ = [
    "TOP_K",
    "EditDistance",
    "edit_distance",
    "edit_distance_bounds",
    "exact_match",
    "expected_calibration_error",
    "hit_rank",
    "summarize",
]


def exact_match(
    g1: nx.Graph,
    g2: nx.Graph,
    *,
    node_label: Hashable = "label",
    edge_label: Hashable = "label",
) -> bool:
    """Whether two labeled graphs are isomorphic with equal node and edge labels.

    Parameters
    ----------
    g1, g2 : networkx.Graph
        Undirected simple graphs with a label on every node.
    node_label : hashable, default="label"
        Name of the node attribute holding the categorical node label.
    edge_label : hashable, default="label"
        Name of the edge attribute holding the categorical edge label; an edge without it
        has label ``None``.

    Returns
    -------
    bool
        True when a bijection of the nodes keeps every node label, every edge and every
        edge label.

    Raises
    ------
    TypeError
        If a graph is directed, a multigraph or not a ``networkx.Graph``, or a label is not
        hashable.
    ValueError
        If a node has no label or a graph has a self-loop.

    Notes
    -----
    Counts, degree sequences and label multisets are compared first, then the
    Weisfeiler-Lehman hashes of networkx [1]_ (computed on string tokens of the labels, so
    integer labels and missing edge labels work), and only then the VF2 isomorphism test;
    graphs of more than 50 nodes use colour refinement and individualisation instead
    (see :mod:`gwpred.ged`), which stays well under a second on random graphs of thousands
    of nodes where VF2 takes minutes.

    References
    ----------
    .. [1] N. Shervashidze, P. Schweitzer, E. J. van Leeuwen, K. Mehlhorn and
       K. M. Borgwardt, "Weisfeiler-Lehman graph kernels", Journal of Machine Learning
       Research 12, 2539-2561, 2011.

    Examples
    --------
    >>> import networkx as nx
    >>> g = nx.Graph([(0, 1, {"label": 2})])
    >>> nx.set_node_attributes(g, {0: "C", 1: "O"}, "label")
    >>> h = nx.Graph([("a", "b", {"label": 2})])
    >>> nx.set_node_attributes(h, {"a": "O", "b": "C"}, "label")
    >>> exact_match(g, h)
    True
    """
    a = labeled(g1, "g1", node_label, edge_label)
    b = labeled(g2, "g2", node_label, edge_label)
    return isomorphism(a, b) is not None


# --------------------------------------------------------------------------- summaries

#: Cut-offs k of the top-k accuracy that summarize reports when ranked candidates are given.
TOP_K = (1, 5, 10)


def _ratio(hits: int, total: int, other: int) -> float:
    """``hits / total``; when ``total`` is 0: 1.0 if ``other`` is 0 too, else 0.0."""
    if total == 0:
        return 1.0 if other == 0 else 0.0
    return hits / total


def _mapping_scores(
    gp: nx.Graph, gt: nx.Graph, mapping: dict, node_label: Hashable, edge_label: Hashable
) -> dict[str, float]:
    """Node label accuracy and edge precision, recall and F1 under a node map gp -> gt.

    See the Notes of :func:`summarize` for the definitions and the empty cases.
    """
    inverse = {v: u for u, v in mapping.items() if v is not None}
    right_nodes = sum(
        1
        for v, data in gt.nodes(data=True)
        if v in inverse and gp.nodes[inverse[v]].get(node_label) == data.get(node_label)
    )
    # The map is injective, so the right predicted edges land on distinct true edges:
    # one count serves both precision and recall.
    right_edges = 0
    for u, w, data in gp.edges(data=True):
        x, y = mapping.get(u), mapping.get(w)
        if (
            x is not None
            and y is not None
            and gt.has_edge(x, y)
            and gt.edges[x, y].get(edge_label) == data.get(edge_label)
        ):
            right_edges += 1
    e_pred, e_true = gp.number_of_edges(), gt.number_of_edges()
    precision = _ratio(right_edges, e_pred, e_true)
    recall = _ratio(right_edges, e_true, e_pred)
    # 2PR / (P + R) = 2 right / (predicted + true): the harmonic mean without round-off.
    f1 = 2 * right_edges / (e_pred + e_true) if e_pred + e_true else 1.0
    return {
        "node_label_accuracy": _ratio(right_nodes, gt.number_of_nodes(), gp.number_of_nodes()),
        "edge_precision": precision,
        "edge_recall": recall,
        "edge_f1": f1,
    }


def hit_rank(
    candidates: list[nx.Graph],
    gt: nx.Graph,
    index: int,
    node_label: Hashable,
    edge_label: Hashable,
) -> int | None:
    """1-based position of the first candidate label-isomorphic to ``gt``, or None.

    Parameters
    ----------
    candidates : list of networkx.Graph
        Candidate graphs, best first.
    gt : networkx.Graph
        The true graph.
    index : int
        Position of the pair, named in error messages (``true[index]``,
        ``ranked[index][j]``).
    node_label, edge_label : hashable
        Names of the node and edge attributes holding the categorical labels.

    Returns
    -------
    int or None
        ``j + 1`` for the first ``candidates[j]`` that :func:`exact_match` would accept.

    Raises
    ------
    TypeError, ValueError
        As :func:`exact_match`, for ``gt`` or a candidate that is not a valid labeled graph.
    """
    b = labeled(gt, f"true[{index}]", node_label, edge_label)
    for j, cand in enumerate(candidates):
        a = labeled(cand, f"ranked[{index}][{j}]", node_label, edge_label)
        if isomorphism(a, b) is not None:
            return j + 1
    return None


def _score_pair(
    index: int,
    gp: nx.Graph,
    gt: nx.Graph,
    candidates: list[nx.Graph] | None,
    node_label: Hashable,
    edge_label: Hashable,
    time_limit: float | None,
) -> dict:
    """All per-pair scores of :func:`summarize` (``index``: the pair's place, for messages)."""
    try:
        r = edit_distance(gp, gt, node_label=node_label, edge_label=edge_label, time_limit=time_limit)
    except (TypeError, ValueError) as err:  # say which pair: g1 is predicted[i], g2 is true[i]
        text = str(err).replace("of g1", f"of predicted[{index}]").replace("of g2", f"of true[{index}]")
        raise type(err)(f"pair {index}: {text}") from err
    n_pred = gp.number_of_nodes()
    item: dict[str, Any] = {
        "ged": r.value,
        "ged_proven": r.exact,  # the GED is proven optimal (else the best upper bound found)
        "exact_match": bool(r.exact and r.value == 0.0),
        "n_pred": n_pred,
        "n_true": gt.number_of_nodes(),
        "connected": bool(n_pred > 0 and nx.is_connected(gp)),
    }
    item.update(_mapping_scores(gp, gt, r.mapping, node_label, edge_label))
    if candidates is not None:
        item["hit_rank"] = hit_rank(candidates, gt, index, node_label, edge_label)
    return item


def _check_ranked(ranked: Any, n: int) -> list[list[nx.Graph]]:
    """Validate ``ranked`` and keep the first ``max(TOP_K)`` candidates of each list."""
    if isinstance(ranked, (nx.Graph, str, bytes)) or not isinstance(ranked, Sequence):
        raise TypeError(
            f"ranked must be a list with one list of candidate graphs per pair, got "
            f"{type(ranked).__name__}"
        )
    if len(ranked) != n:
        raise ValueError(
            f"ranked must hold one candidate list per pair, got len(ranked)={len(ranked)} and "
            f"len(predicted)={n}; pass ranked[i] = the candidates for true[i], best first"
        )
    out = []
    for i, candidates in enumerate(ranked):
        if isinstance(candidates, nx.Graph):
            raise TypeError(f"ranked[{i}] is a single graph; wrap it in a list")
        if isinstance(candidates, (str, bytes)) or not isinstance(candidates, Sequence):
            raise TypeError(
                f"ranked[{i}] must be a list of networkx.Graph (best first), got "
                f"{type(candidates).__name__}"
            )
        head = list(candidates[: max(TOP_K)])
        for j, cand in enumerate(head):
            if not isinstance(cand, nx.Graph):
                raise TypeError(
                    f"ranked[{i}][{j}] must be a networkx.Graph, got {type(cand).__name__}"
                )
        out.append(head)
    return out


def summarize(
    predicted: Sequence[nx.Graph],
    true: Sequence[nx.Graph],
    *,
    node_label: Hashable = "label",
    edge_label: Hashable = "label",
    time_limit: float | None = None,
    progress: bool = False,
    n_jobs: int = 1,
    ranked: Sequence[Sequence[nx.Graph]] | None = None,
) -> dict:
    r"""Score a list of predicted graphs against the true graphs, pair by pair.

    Parameters
    ----------
    predicted : sequence of networkx.Graph
        Predicted graphs.
    true : sequence of networkx.Graph
        True graphs, in the same order and of the same length.
    node_label : hashable, default="label"
        Name of the node attribute holding the categorical node label.
    edge_label : hashable, default="label"
        Name of the edge attribute holding the categorical edge label.
    time_limit : float or None, default=None
        Seconds per edit distance, for the whole call of :func:`edit_distance` (counted
        from its start; reading the graphs adds a small size-proportional overhead). Pairs
        of more than 1000 nodes in all get bounds only (``ged_proven`` is False unless they
        meet); see "Large graphs" in its Notes.
    progress : bool, default=False
        Show a progress bar on standard error, ticking as pairs are scored.
    n_jobs : int, default=1
        Worker processes (joblib) scoring pairs in parallel; 1 scores them in this process,
        -1 uses one worker per processor (joblib's convention for negative values). Inside
        ``with gwpred.parallel.cluster(...)``, any value but 1 scores them on the Dask cluster.
    ranked : sequence of sequences of networkx.Graph, optional
        One list of candidate graphs per pair, best first (e.g. the k best guesses of a
        predictor). When given, the summary reports the top-k accuracy.

    Returns
    -------
    dict
        ``n`` (number of pairs), ``mean_ged``, ``median_ged`` (of the best values found),
        ``exact_match_rate``, ``right_size_rate`` (same node count), ``connected_rate``
        (predicted graphs that are connected; an empty graph is not), ``exact_share`` (share
        of edit distances proven exact), the means over pairs ``node_label_accuracy``,
        ``edge_precision``, ``edge_recall`` and ``edge_f1``, and ``items``: one dict per
        pair with ``ged``, ``ged_proven`` (the value is proven optimal, not only the best
        bound found), ``exact_match`` (same labeled graph), ``n_pred``, ``n_true``, ``connected``,
        ``node_label_accuracy``, ``edge_precision``, ``edge_recall`` and ``edge_f1``.
        With ``ranked``, also ``top_k_accuracy``, a dict ``{1: ..., 5: ..., 10: ...}``, and
        per pair ``hit_rank``: the 1-based position of the first of the first 10 candidates
        that is label-isomorphic to the true graph, or None.

    Raises
    ------
    ValueError
        If the two sequences differ in length or are empty, ``n_jobs`` is 0, or ``ranked``
        does not hold one list per pair; see also :func:`edit_distance`.
    TypeError
        If ``predicted`` or ``true`` is a single graph, ``n_jobs`` is not an int, or
        ``ranked`` (or one of its lists) is not a sequence of graphs.

    See Also
    --------
    edit_distance : the distance and node map behind each item.
    exact_match : the label isomorphism test behind the items' ``exact_match`` and ``hit_rank``.

    Notes
    -----
    Unit costs are used. A pair is an exact match when its edit distance is proven 0, which
    with positive costs is the same as label isomorphism.

    The node and edge scores read the node map :math:`\varphi` (predicted -> true) of the
    edit path that :func:`edit_distance` returns: an optimal one when the distance is exact
    (when several edit paths are optimal, the scores are those of the one it returns), the
    best one found otherwise.

    * ``node_label_accuracy``: share of the nodes of the true graph that are the image of a
      predicted node with the same label. True nodes that no predicted node maps to (they
      are inserted by the edit path) count as wrong; deleted predicted nodes are not
      counted (they show in the edge precision and the edit distance).
    * A predicted edge :math:`(u, v)` is right when both ends are mapped and
      :math:`(\varphi(u), \varphi(v))` is an edge of the true graph with the same edge label.
      ``edge_precision`` = right edges / predicted edges, ``edge_recall`` = right edges /
      true edges (the map is injective, so right predicted edges hit distinct true edges),
      ``edge_f1`` = their harmonic mean :math:`2PR / (P + R)`, 0 when :math:`P + R = 0`.
    * Empty cases: a ratio over zero items is 1.0 when the other graph is empty too (no
      true and no predicted edges: precision = recall = F1 = 1; no nodes on either side:
      accuracy 1) and 0.0 otherwise (e.g. no predicted edges but some true ones: precision
      = recall = F1 = 0; an empty true graph against a non-empty prediction: accuracy 0).

    The summary values are plain means over pairs, so the mean ``edge_f1`` is in general
    not the harmonic mean of the mean precision and the mean recall.

    ``top_k_accuracy[k]`` is the share of pairs whose true graph is label-isomorphic
    (:func:`exact_match`) to one of the first k graphs of ``ranked[i]``; a list shorter
    than k counts with all its graphs. Only the first 10 candidates of each list are read.

    With ``n_jobs != 1`` the pairs go to joblib workers (loky processes, or a Dask cluster),
    so the graphs must be picklable, and the results are the same as with ``n_jobs=1`` because
    :func:`edit_distance` is deterministic. The exception is ``time_limit``: a search cut
    short by the clock can end elsewhere when workers share the processors.

    Examples
    --------
    >>> import networkx as nx
    >>> g = nx.path_graph(3)
    >>> nx.set_node_attributes(g, "C", "label")
    >>> h = nx.cycle_graph(3)
    >>> nx.set_node_attributes(h, "C", "label")
    >>> s = summarize([g, h], [g, g])
    >>> s["n"], s["mean_ged"], s["exact_match_rate"], s["items"][1]["ged"]
    (2, 0.5, 0.5, 1.0)
    >>> s["items"][1]["edge_precision"], s["items"][1]["edge_recall"]
    (0.6666666666666666, 1.0)
    >>> summarize([h], [g], ranked=[[h, g]])["top_k_accuracy"]
    {1: 0.0, 5: 1.0, 10: 1.0}
    """
    if isinstance(predicted, nx.Graph) or isinstance(true, nx.Graph):
        raise TypeError(
            "predicted and true must be sequences of networkx.Graph, got a single graph; "
            "wrap it in a list"
        )
    predicted = list(predicted)
    true = list(true)
    if len(predicted) != len(true):
        raise ValueError(
            f"predicted and true must have the same length, got len(predicted)="
            f"{len(predicted)} and len(true)={len(true)}"
        )
    if not predicted:
        raise ValueError("predicted and true are empty; pass at least one pair of graphs")
    n_jobs = check_n_jobs(n_jobs)
    candidates: list[list[nx.Graph]] | list[None]
    if ranked is None:
        candidates = [None] * len(predicted)
    else:
        candidates = _check_ranked(ranked, len(predicted))
    tasks = [
        (i, gp, gt, cands, node_label, edge_label, time_limit)
        for i, (gp, gt, cands) in enumerate(zip(predicted, true, candidates))
    ]
    items = parallel_map(
        _score_pair, tasks, n_jobs=n_jobs, progress=progress, desc="edit distance", unit="pair"
    )

    def mean(key: str) -> float:
        return float(np.mean([it[key] for it in items]))

    geds = np.array([it["ged"] for it in items], dtype=float)
    summary: dict[str, Any] = {
        "n": len(items),
        "mean_ged": float(np.mean(geds)),
        "median_ged": float(np.median(geds)),
        "exact_match_rate": mean("exact_match"),
        "right_size_rate": float(np.mean([it["n_pred"] == it["n_true"] for it in items])),
        "connected_rate": mean("connected"),
        "exact_share": mean("ged_proven"),
        "node_label_accuracy": mean("node_label_accuracy"),
        "edge_precision": mean("edge_precision"),
        "edge_recall": mean("edge_recall"),
        "edge_f1": mean("edge_f1"),
    }
    if ranked is not None:
        summary["top_k_accuracy"] = {
            k: float(np.mean([it["hit_rank"] is not None and it["hit_rank"] <= k for it in items]))
            for k in TOP_K
        }
    summary["items"] = items
    return summary


def expected_calibration_error(confidence: ArrayLike, hit: ArrayLike, n_bins: int = 10) -> float:
    """Expected calibration error: sum over equal-width confidence bins of |rate - mean confidence| x share.

    The usual reliability measure of probabilistic classifiers (Naeini et al.,
    AAAI 2015; Guo et al., ICML 2017), here for "this graph is the true one".

    Parameters
    ----------
    confidence : array-like of shape (m,)
        Values in ``[0, 1]``.
    hit : array-like of shape (m,)
        1 where the hypothesis was right.
    n_bins : int, default=10

    Returns
    -------
    float

    Examples
    --------
    >>> expected_calibration_error([0.9, 0.9, 0.1, 0.1], [1, 1, 0, 0])
    0.1
    """
    c = np.asarray(confidence, dtype=np.float64)
    y = np.asarray(hit, dtype=np.float64)
    if c.shape != y.shape or c.ndim != 1 or c.size == 0:
        raise ValueError(f"confidence and hit must be 1-d of equal, non-zero length; got {c.shape} and {y.shape}.")
    bins = np.minimum((c * n_bins).astype(np.int64), n_bins - 1)
    err = 0.0
    for b in np.unique(bins):
        m = bins == b
        err += m.mean() * abs(y[m].mean() - c[m].mean())
    return float(round(err, 12))


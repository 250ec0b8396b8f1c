"""Weisfeiler-Lehman features, canonical node order and the label ids they run on.

Graph-combinatorial encodings shared by the ranking code.  A labeled
graph is first written with integer label ids (:class:`LabelIds`,
:func:`graph_ids` for networkx graphs, :func:`array_ids` for training graphs
stored as arrays); then

- :func:`wl_feature_counts` gives its Weisfeiler-Lehman subtree patterns with
  their counts (the features of the WL subtree kernel);
- :func:`canonical_order` gives a node order that does not depend on how the
  nodes were numbered;
- :func:`wl_graph_hashes` gives one 64-bit hash per graph of a candidate
  library, cached with the library's WL encodings (:func:`wl_encodings`).

Labels the fitted label space has not seen get ids of their own (above the
known categories, from a process-independent hash of the value), so they
match nothing known.
"""

from __future__ import annotations

import hashlib
from collections import Counter
from collections.abc import Callable, Hashable, Sequence
from dataclasses import dataclass
from typing import Any, Protocol

import networkx as nx
import numpy as np
from numpy.typing import ArrayLike, NDArray

from .codec import LabelSpace, check_graph

__all__ = [
    "Adjacency",
    "EncodingCache",
    "IdGraph",
    "LabelIds",
    "array_ids",
    "canonical_order",
    "graph_ids",
    "remember_wl_encodings",
    "wl_encoder",
    "wl_encoding",
    "wl_encodings",
    "wl_feature_counts",
    "wl_graph_hashes",
    "wl_hash",
]

#: Per node, its (neighbour position, edge label id) pairs.
Adjacency = list[list[tuple[int, int]]]


# --------------------------------------------------------------------------- label ids
def _stable_id(value: Hashable) -> int:
    """Process-independent integer for a label value (48 bits)."""
    text = repr((type(value).__name__, str(value))).encode()
    return int.from_bytes(hashlib.blake2b(text, digest_size=6).digest(), "big")


@dataclass(frozen=True)
class LabelIds:
    """Label categories of a fitted model as integer ids.

    Known labels get their category index; an unseen label gets
    ``n_node + stable id`` (or ``n_edge + stable id``), an id of its own that
    no known label has.

    Attributes
    ----------
    node_label, edge_label : str or None
        Attributes holding the labels.
    node_index, edge_index : dict
        Label value -> category index.
    n_node, n_edge : int
        Numbers of known node and edge categories.
    key : tuple
        Identifies the label space (for caches).

    Examples
    --------
    >>> ids = LabelIds.of(LabelSpace.from_categories(["C", "O"], [1, 2]))
    >>> ids.node_id("O"), ids.edge_id(2), ids.node_id("S") >= ids.n_node
    (1, 1, True)
    """

    node_label: str
    edge_label: str | None
    node_index: dict
    edge_index: dict
    n_node: int
    n_edge: int
    key: tuple

    @classmethod
    def of(cls, labels: LabelSpace) -> LabelIds:
        """The ids of a fitted :class:`~gwpred.codec.LabelSpace`."""
        key = (
            labels.node_label,
            labels.edge_label,
            tuple(repr(v) for v in labels.node_labels_),
            tuple(repr(v) for v in labels.edge_labels_),
        )
        return cls(
            labels.node_label,
            labels.edge_label,
            {v: i for i, v in enumerate(labels.node_labels_)},
            {v: i for i, v in enumerate(labels.edge_labels_)},
            labels.n_node_labels,
            labels.n_edge_labels,
            key,
        )

    def node_id(self, value: Hashable) -> int:
        """Category index, or ``n_node + stable id`` for an unseen label."""
        try:
            j = self.node_index.get(value)
        except TypeError:  # unhashable label
            j = None
        return j if j is not None else self.n_node + _stable_id(value)

    def edge_id(self, value: Hashable) -> int:
        """Category index, or ``n_edge + stable id`` for an unseen label."""
        try:
            j = self.edge_index.get(value)
        except TypeError:
            j = None
        return j if j is not None else self.n_edge + _stable_id(value)


@dataclass(frozen=True)
class IdGraph:
    """A graph as label ids: node ids, and per node a list of (neighbour, edge id)."""

    nodes: list[int]
    adjacency: Adjacency


def graph_ids(graph: Any, space: LabelIds, where: str) -> IdGraph:
    """A networkx graph as label ids (nodes in ``graph.nodes`` order).

    Parameters
    ----------
    graph : networkx.Graph
        Undirected, simple, at least one node, a label on every node.
    space : LabelIds
    where : str
        Name of the graph in error messages (e.g. ``"candidates[3]"``).

    Returns
    -------
    IdGraph

    Raises
    ------
    ValueError
        For an empty graph, self-loops or a node without a label.
    TypeError
        For a graph that is not an undirected simple networkx graph.

    Examples
    --------
    >>> g = nx.path_graph(2); nx.set_node_attributes(g, "C", "label")
    >>> graph_ids(g, LabelIds.of(LabelSpace().fit([g])), "g").adjacency
    [[(1, 0)], [(0, 0)]]
    """
    check_graph(graph, where)
    order = list(graph.nodes)
    pos = {v: i for i, v in enumerate(order)}
    nodes = []
    for v, data in graph.nodes(data=True):
        if space.node_label not in data:
            raise ValueError(
                f"node {v!r} of {where} has no {space.node_label!r} attribute; every candidate "
                "node needs a label, like the training graphs."
            )
        nodes.append(space.node_id(data[space.node_label]))
    adjacency: Adjacency = [[] for _ in order]
    for u, v, data in graph.edges(data=True):
        e = space.edge_id(data.get(space.edge_label) if space.edge_label is not None else None)
        adjacency[pos[u]].append((pos[v], e))
        adjacency[pos[v]].append((pos[u], e))
    return IdGraph(nodes, adjacency)


def array_ids(structure: NDArray, features: NDArray, channels: NDArray, n_node: int) -> IdGraph:
    """The same for a training graph stored as arrays (adjacency, one-hot labels, edge channels).

    Examples
    --------
    >>> C = np.array([[0.0, 1.0], [1.0, 0.0]]); F = np.eye(2); E = C[:, :, None]
    >>> array_ids(C, F, E, 2)
    IdGraph(nodes=[0, 1], adjacency=[[(1, 0)], [(0, 0)]])
    """
    nodes = features[:, :n_node].argmax(1).tolist()
    adjacency: Adjacency = [[] for _ in nodes]
    iu, ju = np.nonzero(np.triu(structure, 1))
    for i, j, e in zip(iu.tolist(), ju.tolist(), channels[iu, ju].argmax(-1).tolist()):
        adjacency[i].append((j, e))
        adjacency[j].append((i, e))
    return IdGraph(nodes, adjacency)


# --------------------------------------------------------------------------- WL features
def wl_feature_counts(
    nodes: Sequence[int], adjacency: Adjacency, iterations: int = 3
) -> tuple[NDArray[np.int64], NDArray[np.float64]]:
    """Weisfeiler-Lehman subtree patterns of a labeled graph, with their counts.

    Round 0 colours each node by its label; round ``t`` by its colour and the
    sorted multiset of (edge label, neighbour colour) pairs of round
    ``t - 1`` (Shervashidze et al., JMLR 2011, with edge labels).  Every
    (round, colour) is one feature, identified by a 64-bit hash.

    Parameters
    ----------
    nodes : sequence of int
        Node label ids.
    adjacency : list of list of (int, int)
        Per node, its (neighbour, edge label id) pairs.
    iterations : int, default=3
        Refinement rounds after round 0.

    Returns
    -------
    features : ndarray of int64
        Sorted feature hashes.
    counts : ndarray of float64
        How many nodes carry each feature (over all rounds).

    Examples
    --------
    >>> f, c = wl_feature_counts([0, 0], [[(1, 0)], [(0, 0)]], iterations=1)
    >>> len(f), c.tolist()
    (2, [2.0, 2.0])
    """
    colours = [hash((0, x)) for x in nodes]
    every = list(colours)
    for t in range(1, iterations + 1):
        colours = [
            hash((t, colours[v], tuple(sorted((e, colours[u]) for u, e in nbrs))))
            for v, nbrs in enumerate(adjacency)
        ]
        every.extend(colours)
    feats, counts = np.unique(np.asarray(every, dtype=np.int64), return_counts=True)
    return feats, counts.astype(np.float64)


class EncodingCache(Protocol):
    """Graphs with a per-key memo of their encodings (:class:`gwpred.ranking.CandidateLibrary`)."""

    graphs: list[nx.Graph]

    def cached(self, key: tuple, indices: Sequence[int], compute: Callable[[int], Any]) -> list[Any]:
        """Values of ``compute(i)`` for ``indices``, computing each at most once per ``key``."""
        ...


def wl_encoder(
    graphs: Sequence[nx.Graph], space: LabelIds, iterations: int
) -> Callable[[int], tuple[NDArray[np.int64], NDArray[np.float64]]]:
    """``encode(i)``: WL features of ``graphs[i]`` and their counts scaled to unit norm.

    Graph ``i`` is named ``candidates[i]`` in error messages.
    """

    def encode(i: int) -> tuple[NDArray[np.int64], NDArray[np.float64]]:
        return wl_encoding(graph_ids(graphs[i], space, f"candidates[{i}]"), iterations)

    return encode


def wl_encoding(ids: IdGraph, iterations: int = 3) -> tuple[NDArray[np.int64], NDArray[np.float64]]:
    """WL features of one graph and their counts scaled to unit norm (what :func:`wl_encodings` caches)."""
    feats, counts = wl_feature_counts(ids.nodes, ids.adjacency, iterations)
    return feats, counts / np.linalg.norm(counts)


def wl_hash(encoding: tuple[NDArray[np.int64], NDArray[np.float64]]) -> int:
    """The 64-bit hash :func:`wl_graph_hashes` gives a graph of this :func:`wl_encoding`."""
    f, v = encoding
    return int(np.frombuffer(hashlib.blake2b(f.tobytes() + v.tobytes(), digest_size=8).digest(), dtype=np.int64)[0])


def remember_wl_encodings(
    library: EncodingCache, space: LabelIds, encodings: dict[int, tuple[NDArray[np.int64], NDArray[np.float64]]],
    iterations: int = 3,
) -> None:
    """Store encodings computed elsewhere (e.g. from arrays) as the library's cached ones.

    ``encodings`` maps a library index to its :func:`wl_encoding`; the caller
    guarantees that each is the encoding of ``library.graphs[index]``.
    """
    library.cached(("wl", space.key, iterations), list(encodings), encodings.__getitem__)


def wl_encodings(
    library: EncodingCache, space: LabelIds, indices: Sequence[int], iterations: int
) -> list[tuple[NDArray[np.int64], NDArray[np.float64]]]:
    """The unit-norm WL encodings of library graphs, computed once per label space and rounds."""
    return library.cached(("wl", space.key, iterations), indices, wl_encoder(library.graphs, space, iterations))


def wl_graph_hashes(
    library: EncodingCache, labels: LabelSpace, indices: ArrayLike | None = None, iterations: int = 3
) -> NDArray[np.int64]:
    """One 64-bit Weisfeiler-Lehman hash per candidate (cached with the WL encodings).

    Label-isomorphic graphs get equal hashes; unequal hashes prove two graphs
    different (equal ones do not prove them the same: check with
    :func:`gwpred.metrics.exact_match`).

    Parameters
    ----------
    library : CandidateLibrary
    labels : LabelSpace
        Fitted label space (``model.labels_``).
    indices : array-like of int, default=None
        Candidates to hash; None hashes all.
    iterations : int, default=3

    Returns
    -------
    ndarray of int64 of shape (len(indices),)
    """
    idx = np.arange(len(library.graphs)) if indices is None else np.asarray(indices, dtype=np.int64)
    space = LabelIds.of(labels)
    encoded = wl_encodings(library, space, idx, iterations)
    digests = b"".join(hashlib.blake2b(f.tobytes() + v.tobytes(), digest_size=8).digest() for f, v in encoded)
    return np.frombuffer(digests, dtype=np.int64).copy()


# --------------------------------------------------------------------------- canonical order
def _ranks(values: Sequence[Any]) -> list[int]:
    index = {v: i for i, v in enumerate(sorted(set(values)))}
    return [index[v] for v in values]


def _refine(colours: list[int], adjacency: Adjacency) -> list[int]:
    """Colour refinement to a stable partition; colours are canonical ranks."""
    n_classes = len(set(colours))
    while True:
        sig = [
            (colours[v], tuple(sorted((e, colours[u]) for u, e in nbrs))) for v, nbrs in enumerate(adjacency)
        ]
        new = _ranks(sig)
        k = max(new) + 1 if new else 0
        if k == n_classes:
            return new
        colours, n_classes = new, k


def _certificate(order: list[int], nodes: Sequence[int], adjacency: Adjacency) -> tuple:
    """The labeled graph written in ``order``: node ids, then sorted (i, j, edge id) triples."""
    where = {v: i for i, v in enumerate(order)}
    edges = sorted(
        (where[v], where[u], e) for v, nbrs in enumerate(adjacency) for u, e in nbrs if where[v] < where[u]
    )
    return (tuple(nodes[v] for v in order), tuple(edges))


def canonical_order(nodes: Sequence[int], adjacency: Adjacency, max_leaves: int = 4096) -> list[int]:
    """A node order that does not depend on the input numbering.

    Colour refinement (node labels, then the multisets of (edge label,
    neighbour colour)) with canonical colour names; while colours are tied,
    each node of the first tied class is individualised in turn and refined
    again, and of all the discrete orders reached the one whose labeled
    adjacency is lexicographically smallest is returned (the individualise
    and refine scheme of canonical labeling, McKay & Piperno 2014, without
    automorphism pruning).

    Parameters
    ----------
    nodes : sequence of int
        Node label ids.
    adjacency : list of list of (int, int)
        Per node, its (neighbour, edge label id) pairs.
    max_leaves : int, default=4096
        Search budget; beyond it (only very symmetric graphs get there) the
        best order found so far is returned, which may depend on numbering.

    Returns
    -------
    list of int
        Node positions in canonical order.

    Examples
    --------
    >>> canonical_order([1, 0, 1], [[(1, 0)], [(0, 0), (2, 0)], [(1, 0)]])[0]
    1
    """
    n = len(nodes)
    best: list[Any] = [None, None]
    leaves = 0

    def search(colours: list[int]) -> None:
        nonlocal leaves
        if len(set(colours)) == n:
            leaves += 1
            order = sorted(range(n), key=colours.__getitem__)
            cert = _certificate(order, nodes, adjacency)
            if best[0] is None or cert < best[0]:
                best[0], best[1] = cert, order
            return
        counts = Counter(colours)
        tied = min(c for c, k in counts.items() if k > 1)
        for v in [u for u in range(n) if colours[u] == tied]:
            if leaves >= max_leaves:
                return
            split = [2 * c + 1 for c in colours]
            split[v] -= 1
            search(_refine(split, adjacency))

    search(_refine(_ranks(list(nodes)), adjacency))
    return best[1]

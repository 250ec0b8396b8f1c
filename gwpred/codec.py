"""Labeled graphs <-> arrays: label spaces, structure and feature matrices.

A :class:`LabelSpace` is fitted on training graphs.  It turns a networkx graph
into an :class:`EncodedGraph` (adjacency structure ``C``, one-hot edge-label
channels ``E``, node features ``F`` and node masses ``p``) and turns discrete
choices (a label per node, a label per edge) back into a networkx graph.  It
knows nothing about kernels or solvers.
"""

from __future__ import annotations

from collections.abc import Hashable, Sequence
from dataclasses import dataclass, field
from typing import Any

import networkx as nx
import numpy as np
from numpy.typing import NDArray

__all__ = ["EncodedGraph", "LabelSpace", "TrainingSet", "check_graph"]


@dataclass(frozen=True)
class EncodedGraph:
    """Array form of one labeled graph.

    Attributes
    ----------
    structure : ndarray of shape (n, n)
        Symmetric 0/1 adjacency matrix.
    edge_channels : ndarray of shape (n, n, n_edge_labels)
        One-hot edge labels: ``edge_channels[i, j, l] = 1`` when ``i`` and
        ``j`` are joined by an edge of label ``l``; sums to ``structure``.
    features : ndarray of shape (n, n_features)
        One-hot node labels, then the numeric node attributes (if any).
    masses : ndarray of shape (n,)
        Uniform node masses ``1 / n``.
    nodes : list
        The graph's nodes in the row order of the arrays.
    """

    structure: NDArray[np.float64]
    edge_channels: NDArray[np.float64]
    features: NDArray[np.float64]
    masses: NDArray[np.float64]
    nodes: list[Hashable]


def check_graph(graph: Any, where: str = "graph", *, allow_empty: bool = False) -> nx.Graph:
    """Refuse graph kinds that gwpred does not model, with a message saying why.

    Parameters
    ----------
    graph : object
        Expected to be an undirected, simple :class:`networkx.Graph`.
    where : str, default="graph"
        How to name the graph in messages (for example ``"graphs[3]"``).
    allow_empty : bool, default=False
        Accept a graph with no nodes.

    Returns
    -------
    networkx.Graph
        The same graph.

    Raises
    ------
    TypeError
        For non-graphs, directed graphs and multigraphs.
    ValueError
        For self-loops, and for empty graphs unless ``allow_empty``.

    Examples
    --------
    >>> check_graph(nx.path_graph(2)).number_of_nodes()
    2
    """
    if not isinstance(graph, nx.Graph):
        raise TypeError(f"{where} must be a networkx.Graph; got {type(graph).__name__}.")
    if graph.is_directed():
        raise TypeError(
            f"{where} is directed; gwpred predicts undirected graphs. "
            "Convert it with graph.to_undirected() first."
        )
    if graph.is_multigraph():
        raise TypeError(
            f"{where} is a multigraph; gwpred needs simple graphs. Merge parallel "
            "edges into one edge whose label says what they were (for example a bond order)."
        )
    if not allow_empty and graph.number_of_nodes() == 0:
        raise ValueError(f"{where} has no nodes; every graph needs at least one node.")
    loops = nx.number_of_selfloops(graph)
    if loops:
        raise ValueError(
            f"{where} has {loops} self-loop(s); gwpred does not model them. Remove them with "
            "graph.remove_edges_from(list(nx.selfloop_edges(graph))) or encode them as a node label."
        )
    return graph


def _label_value(value: Any, where: str, name: str) -> Hashable:
    """A label as a category: hashable, and not a NaN (which equals nothing, not even itself)."""
    try:
        hash(value)
    except TypeError:
        raise ValueError(
            f"{where} has {name!r} = {value!r}, a {type(value).__name__}; labels must be single values "
            "(a string or a number), not lists or dicts."
        ) from None
    if isinstance(value, float) and value != value:
        raise ValueError(f"{where} has a NaN {name!r}; give every label a value.")
    return value


def _sort_key(value: Any) -> tuple[str, str]:
    return (type(value).__name__, str(value))


class LabelSpace:
    """Categories of node and edge labels seen in training graphs.

    Parameters
    ----------
    node_label : str, default="label"
        Node attribute holding the categorical node label.
    edge_label : str or None, default="label"
        Edge attribute holding the categorical edge label.  Edges without it
        get the label ``None``; if no training edge has it, all edges are of
        one type.  ``None`` ignores edge labels.
    node_numeric : sequence of str, default=()
        Numeric node attributes appended to the features (standardised with
        training means and deviations).
    handle_unknown : {"error", "ignore"}, default="error"
        What to do with a node or edge label not seen in training: raise, or
        give it an all-zero one-hot row (no category).

    Attributes
    ----------
    node_labels_ : list
        Node label categories, sorted.
    edge_labels_ : list
        Edge label categories, sorted (``[None]`` when edges carry no label).
    numeric_mean_, numeric_scale_ : ndarray of shape (len(node_numeric),)
        Standardisation of the numeric node attributes.

    Examples
    --------
    >>> g = nx.Graph(); g.add_node(0, label="C"); g.add_node(1, label="O")
    >>> g.add_edge(0, 1, label=2)
    >>> space = LabelSpace().fit([g])
    >>> enc = space.encode(g)
    >>> enc.features.tolist(), space.edge_labels_
    ([[1.0, 0.0], [0.0, 1.0]], [2])
    """

    def __init__(
        self,
        node_label: str = "label",
        edge_label: str | None = "label",
        node_numeric: Sequence[str] = (),
        handle_unknown: str = "error",
    ) -> None:
        self.node_label = node_label
        self.edge_label = edge_label
        self.node_numeric = tuple(node_numeric)
        self.handle_unknown = handle_unknown

    # ------------------------------------------------------------------ fit
    def fit(self, graphs: Sequence[nx.Graph]) -> LabelSpace:
        """Collect label categories (and numeric scales) from training graphs.

        Parameters
        ----------
        graphs : sequence of networkx.Graph

        Returns
        -------
        LabelSpace
            ``self``.

        Raises
        ------
        ValueError
            If no graphs are given, a graph is empty or has self-loops, or a
            node lacks the node label attribute.
        TypeError
            For directed graphs and multigraphs.
        """
        if self.handle_unknown not in ("error", "ignore"):
            raise ValueError(
                f"handle_unknown must be 'error' or 'ignore'; got {self.handle_unknown!r}."
            )
        if len(graphs) == 0:
            raise ValueError("graphs is empty; fit needs at least one training graph.")
        node_set: set[Hashable] = set()
        edge_set: set[Hashable] = set()
        numeric: list[list[float]] = []
        for k, g in enumerate(graphs):
            check_graph(g, f"graphs[{k}]")
            for v, data in g.nodes(data=True):
                node_set.add(self._node_value(data, v, f"graphs[{k}]"))
                numeric.append(self._numeric_values(data, v, f"graphs[{k}]"))
            if self.edge_label is not None:
                for u, v, d in g.edges(data=True):
                    edge_set.add(_label_value(d.get(self.edge_label), f"edge ({u!r}, {v!r}) of graphs[{k}]",
                                              self.edge_label))
        self.node_labels_ = sorted(node_set, key=_sort_key)
        self.edge_labels_ = sorted(edge_set, key=_sort_key) or [None]
        values = np.asarray(numeric, dtype=np.float64).reshape(len(numeric), len(self.node_numeric))
        self.numeric_mean_ = values.mean(axis=0) if len(values) else np.zeros(0)
        scale = values.std(axis=0) if len(values) else np.zeros(0)
        self.numeric_scale_ = np.where(scale > 0, scale, 1.0)
        self._node_index = {lab: i for i, lab in enumerate(self.node_labels_)}
        self._edge_index = {lab: i for i, lab in enumerate(self.edge_labels_)}
        return self

    @classmethod
    def from_categories(
        cls,
        node_labels: Sequence[Hashable],
        edge_labels: Sequence[Hashable],
        numeric_mean: Sequence[float] = (),
        numeric_scale: Sequence[float] = (),
        **params: Any,
    ) -> LabelSpace:
        """Rebuild a fitted label space from stored categories (model files).

        Examples
        --------
        >>> LabelSpace.from_categories(["C", "O"], [1, 2]).n_node_labels
        2
        """
        space = cls(**params)
        space.node_labels_ = list(node_labels)
        space.edge_labels_ = list(edge_labels) or [None]
        space.numeric_mean_ = np.asarray(numeric_mean, dtype=np.float64)
        space.numeric_scale_ = np.asarray(numeric_scale, dtype=np.float64)
        space._node_index = {lab: i for i, lab in enumerate(space.node_labels_)}
        space._edge_index = {lab: i for i, lab in enumerate(space.edge_labels_)}
        return space

    # ----------------------------------------------------------- properties
    @property
    def n_node_labels(self) -> int:
        """Number of node label categories."""
        return len(self.node_labels_)

    @property
    def n_edge_labels(self) -> int:
        """Number of edge label categories."""
        return len(self.edge_labels_)

    @property
    def n_features(self) -> int:
        """Width of the node feature rows."""
        return self.n_node_labels + len(self.node_numeric)

    # -------------------------------------------------------------- helpers
    def _check_fitted(self) -> None:
        if not hasattr(self, "node_labels_"):
            raise ValueError("this LabelSpace is not fitted yet; call fit(graphs) first.")

    def _node_value(self, data: dict, node: Hashable, where: str) -> Hashable:
        if self.node_label not in data:
            raise ValueError(
                f"node {node!r} of {where} has no {self.node_label!r} attribute; every node "
                f"needs one (set node_label= to the attribute that holds node labels)."
            )
        return _label_value(data[self.node_label], f"node {node!r} of {where}", self.node_label)

    def _numeric_values(self, data: dict, node: Hashable, where: str) -> list[float]:
        out = []
        for name in self.node_numeric:
            try:
                value = float(data[name])
            except (KeyError, TypeError, ValueError):
                raise ValueError(
                    f"node {node!r} of {where} needs a numeric {name!r} attribute "
                    f"(listed in node_numeric); got {data.get(name)!r}."
                ) from None
            if not np.isfinite(value):
                raise ValueError(
                    f"node {node!r} of {where} has a non-finite {name!r} ({value}); impute it first."
                )
            out.append(value)
        return out

    def _unknown(self, kind: str, value: Hashable, where: str, known: list) -> None:
        if self.handle_unknown == "error":
            raise ValueError(
                f"{kind} label {value!r} in {where} was not seen in training; known {kind} "
                f"labels: {known}. Add such graphs to the training set, or use "
                "handle_unknown='ignore' to encode it as no category."
            )

    # -------------------------------------------------------------- encode
    def encode(self, graph: nx.Graph, where: str = "graph") -> EncodedGraph:
        """Turn one graph into arrays (node order: ``list(graph.nodes)``).

        Parameters
        ----------
        graph : networkx.Graph
        where : str, default="graph"
            Name used in error messages.

        Returns
        -------
        EncodedGraph

        Raises
        ------
        ValueError
            For an unknown label (with ``handle_unknown="error"``), a missing
            label attribute, an empty graph or self-loops.
        """
        self._check_fitted()
        check_graph(graph, where)
        nodes = list(graph.nodes)
        index = {v: i for i, v in enumerate(nodes)}
        n = len(nodes)
        F = np.zeros((n, self.n_features))
        for i, (v, data) in enumerate(graph.nodes(data=True)):
            lab = self._node_value(data, v, where)
            j = self._node_index.get(lab)
            if j is None:
                self._unknown("node", lab, where, self.node_labels_)
            else:
                F[i, j] = 1.0
            if self.node_numeric:
                vals = np.asarray(self._numeric_values(data, v, where))
                F[i, self.n_node_labels :] = (vals - self.numeric_mean_) / self.numeric_scale_
        C = np.zeros((n, n))
        E = np.zeros((n, n, self.n_edge_labels))
        for u, v, data in graph.edges(data=True):
            i, k = index[u], index[v]
            C[i, k] = C[k, i] = 1.0
            lab = data.get(self.edge_label) if self.edge_label is not None else None
            j = self._edge_index.get(lab)
            if j is None:
                self._unknown("edge", lab, where, self.edge_labels_)
            else:
                E[i, k, j] = E[k, i, j] = 1.0
        return EncodedGraph(C, E, F, np.full(n, 1.0 / n), nodes)

    # -------------------------------------------------------------- decode
    def build_graph(
        self,
        node_classes: Sequence[int],
        edges: Sequence[tuple[int, int]],
        edge_classes: Sequence[int] | None = None,
        numeric: NDArray[np.float64] | None = None,
    ) -> nx.Graph:
        """Make a labeled networkx graph from discrete choices.

        Parameters
        ----------
        node_classes : sequence of int
            Index into ``node_labels_`` for each node ``0..n-1``.
        edges : sequence of (int, int)
            Node pairs to join.
        edge_classes : sequence of int, default=None
            Index into ``edge_labels_`` for each edge; ``None`` gives every
            edge the first category.
        numeric : ndarray of shape (n, len(node_numeric)), default=None
            Standardised numeric attributes, mapped back to original units.

        Returns
        -------
        networkx.Graph
            Nodes ``0..n-1`` with the node label attribute; edges with the
            edge label attribute unless edge labels are unused.

        Examples
        --------
        >>> space = LabelSpace.from_categories(["C", "O"], [1, 2])
        >>> g = space.build_graph([0, 1], [(0, 1)], [1])
        >>> g.nodes[1]["label"], g.edges[0, 1]["label"]
        ('O', 2)
        """
        self._check_fitted()
        n = len(node_classes)
        classes = [0] * len(edges) if edge_classes is None else list(edge_classes)
        if len(classes) != len(edges):
            raise ValueError(
                f"edge_classes has {len(classes)} entries but there are {len(edges)} edges; "
                "give one edge class per edge."
            )
        bad = [(u, v) for u, v in edges if not (0 <= int(u) < n and 0 <= int(v) < n)]
        if bad:
            raise ValueError(f"edges {bad[:3]} name nodes outside 0..{n - 1}; every edge must join two given nodes.")
        g = nx.Graph()
        names = self.node_labels_
        if numeric is None or not self.node_numeric:  # one call: the hypothesis search builds thousands
            g.add_nodes_from((i, {self.node_label: names[int(c)]}) for i, c in enumerate(node_classes))
        for i, c in enumerate(node_classes if numeric is not None and self.node_numeric else ()):
            attrs = {self.node_label: names[int(c)]}
            raw = numeric[i] * self.numeric_scale_ + self.numeric_mean_
            attrs.update({name: float(x) for name, x in zip(self.node_numeric, raw)})
            g.add_node(i, **attrs)
        for (u, v), c in zip(edges, classes):
            lab = self.edge_labels_[int(c)]
            if self.edge_label is None or lab is None:
                g.add_edge(int(u), int(v))
            else:
                g.add_edge(int(u), int(v), **{self.edge_label: lab})
        return g


@dataclass(frozen=True, eq=False)
class TrainingSet:
    """The encoded training graphs of a fitted model, and what predictions read of them.

    Built by :meth:`encode` in ``fit``; per-query steps, ranking, model files
    and drawings read it instead of the estimator's state.

    Attributes
    ----------
    labels : LabelSpace
        The fitted label categories.
    structures : list of ndarray of shape (n_i, n_i)
        0/1 adjacency of each training graph.
    features : list of ndarray of shape (n_i, n_features)
        One-hot node labels (then numeric attributes).
    channels : list of ndarray of shape (n_i, n_i, n_edge_labels)
        One-hot edge-label channels.
    sizes, n_edges : ndarray of shape (n_train,)
        Node and edge counts.
    max_degree : ndarray of shape (n_node_labels,)
        Largest degree seen per node label.
    connected : bool
        Whether every training graph is connected.
    derived : dict
        Encodings derived from the graphs on demand (Weisfeiler-Lehman
        features, fingerprints), kept by their users under their own keys;
        never part of a model file.

    Examples
    --------
    >>> g = nx.path_graph(3); nx.set_node_attributes(g, "C", "label")
    >>> ts = TrainingSet.encode([g], LabelSpace().fit([g]))
    >>> len(ts), ts.sizes.tolist(), ts.max_degree.tolist(), ts.connected
    (1, [3], [2], True)
    """

    labels: LabelSpace
    structures: list[NDArray[np.float64]]
    features: list[NDArray[np.float64]]
    channels: list[NDArray[np.float64]]
    sizes: NDArray[np.int64]
    n_edges: NDArray[np.int64]
    max_degree: NDArray[np.int64]
    connected: bool
    derived: dict = field(default_factory=dict, repr=False)

    @classmethod
    def encode(cls, graphs: Sequence[nx.Graph], labels: LabelSpace, where: str = "graphs") -> TrainingSet:
        """Encode graphs with a fitted label space (graph ``k`` is named ``where[k]`` in errors)."""
        encoded = [labels.encode(g, f"{where}[{k}]") for k, g in enumerate(graphs)]
        deg = np.zeros(labels.n_node_labels, dtype=np.int64)
        for e in encoded:
            cls_ = e.features[:, : labels.n_node_labels].argmax(1)
            np.maximum.at(deg, cls_, e.structure.sum(1).astype(np.int64))
        return cls(
            labels=labels,
            structures=[e.structure for e in encoded],
            features=[e.features for e in encoded],
            channels=[e.edge_channels for e in encoded],
            sizes=np.array([len(e.nodes) for e in encoded], dtype=np.int64),
            n_edges=np.array([g.number_of_edges() for g in graphs], dtype=np.int64),
            max_degree=deg,
            connected=all(nx.is_connected(g) for g in graphs),
        )

    def __len__(self) -> int:
        return len(self.structures)

    def node_classes(self, i: int) -> NDArray[np.intp]:
        """Node label index of each node of training graph ``i``."""
        return self.features[i][:, : self.labels.n_node_labels].argmax(1)

    def edge_list(self, i: int) -> tuple[NDArray[np.intp], NDArray[np.intp]]:
        """Edges ``(m, 2)`` of training graph ``i`` (``u < v``, row-major) and their label indices ``(m,)``."""
        iu, ju = np.nonzero(np.triu(self.structures[i], 1))
        return np.stack([iu, ju], 1), self.channels[i][iu, ju].argmax(-1)

    def graph(self, i: int) -> nx.Graph:
        """Training graph ``i`` rebuilt as a networkx graph (nodes ``0..n-1``)."""
        edges, classes = self.edge_list(i)
        return self.labels.build_graph(self.node_classes(i), edges, classes)

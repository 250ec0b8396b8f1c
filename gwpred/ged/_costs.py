"""Edit costs and labeled graphs in index form: the inputs of every solver step.

- :func:`check_costs` validates the six cost arguments (a number, a mapping from labels
  or a callable each) and :func:`pair_costs` turns them into the cost tables of one pair
  of graphs (:class:`Costs`, with its cost unit);
- :func:`labeled` validates a :class:`networkx.Graph` and returns its index form
  (:class:`Labeled`);
- a few costs derived from the tables that several steps read (:func:`node_sub_matrix`,
  :func:`delete_all`, :func:`node_saving`, :func:`edge_saving`).
"""

from __future__ import annotations

import math
from collections.abc import Callable, Hashable, Mapping
from dataclasses import dataclass
from fractions import Fraction
from functools import cached_property, lru_cache
from typing import Any

import networkx as nx
import numpy as np
from numpy.typing import NDArray

__all__ = [
    "CostSpec",
    "Costs",
    "Labeled",
    "check_costs",
    "delete_all",
    "edge_saving",
    "labeled",
    "node_saving",
    "node_sub_matrix",
    "pair_costs",
]


CostSpec = float | Mapping[Any, float] | Callable[..., float]


@dataclass(frozen=True)
class _CostSpec:
    """Validated cost arguments: a number, a table (mapping) or a callable each."""

    node_del: Any
    node_ins: Any
    node_sub: Any
    edge_del: Any
    edge_ins: Any
    edge_sub: Any

    @property
    def uniform(self) -> bool:
        """True when no cost depends on the labels (all six are numbers)."""
        return all(
            isinstance(v, float)
            for v in (self.node_del, self.node_ins, self.node_sub, self.edge_del, self.edge_ins, self.edge_sub)
        )


@dataclass(frozen=True)
class Costs:
    """Edit costs of one pair of graphs, as tables over the labels that occur in them.

    Node labels get codes 0..L-1 and edge labels 0..E-1 (labels equal by ``==`` share a
    code); ``node_a[i]`` is the code of node i of the first graph, and so on. Substituting
    a label by itself costs 0; an edge substitution costs at most a deletion plus an
    insertion (an edit path may do that instead).
    """

    node_sub_t: NDArray[np.float64]  # (L, L)
    node_del_t: NDArray[np.float64]  # (L,)
    node_ins_t: NDArray[np.float64]  # (L,)
    edge_sub_t: NDArray[np.float64]  # (E, E)
    edge_del_t: NDArray[np.float64]  # (E,)
    edge_ins_t: NDArray[np.float64]  # (E,)
    node_a: NDArray[np.intp]
    node_b: NDArray[np.intp]
    edge_a: NDArray[np.intp]
    edge_b: NDArray[np.intp]
    # (node_del, node_ins, node_sub, edge_del, edge_ins, edge_sub) when no cost depends on
    # the labels (closed forms apply), edge_sub at most edge_del + edge_ins; else None
    scalar: tuple[float, ...] | None
    # The same costs per node or edge, read from the tables through the codes; the
    # (n1, n2) and (m1, m2) matrices per pair are properties, built on first use only
    # (large graphs never build them: 800 MB for two graphs of 10,000 edges).
    node_del: NDArray[np.float64]  # (n1,)
    node_ins: NDArray[np.float64]  # (n2,)
    edge_del: NDArray[np.float64]  # (m1,)
    edge_ins: NDArray[np.float64]  # (m2,)

    @cached_property
    def node_sub(self) -> NDArray[np.float64]:
        """(n1, n2) node substitution costs (0 between equal labels)."""
        return self.node_sub_t[self.node_a[:, None], self.node_b[None, :]]

    @cached_property
    def edge_sub(self) -> NDArray[np.float64]:
        """(m1, m2) edge substitution costs (0 between equal labels)."""
        return self.edge_sub_t[self.edge_a[:, None], self.edge_b[None, :]]

    @cached_property
    def unit(self) -> float | None:
        """Largest q such that every cost is a whole multiple of q, or None.

        Every edit distance is then a multiple of q too, so proven lower bounds can be
        rounded up to the next multiple. None when no such q of a safe size exists
        (for example costs such as 0.1 that floats cannot represent exactly).
        """
        if self.scalar is not None:
            return _cost_unit(self.scalar)
        values = np.concatenate(
            [
                t.ravel()
                for t in (
                    self.node_sub_t,
                    self.node_del_t,
                    self.node_ins_t,
                    self.edge_sub_t,
                    self.edge_del_t,
                    self.edge_ins_t,
                )
            ]
        )
        return _cost_unit(tuple(sorted(set(values[values > 0].tolist()))))


@lru_cache(maxsize=64)
def _cost_unit(costs: tuple[float, ...]) -> float | None:
    """Largest q dividing every positive cost (see ``Costs.unit``), or None.

    Cached: the exact fractions cost about 50 microseconds, as much as the cheapest
    edit distances, and the same few cost settings come back call after call.
    """
    values = [Fraction(c) for c in costs if c > 0]
    if not values:
        return None
    q = values[0]
    for v in values[1:]:
        # gcd of two fractions: gcd of numerators over lcm of denominators
        q = Fraction(
            math.gcd(q.numerator * v.denominator, v.numerator * q.denominator),
            q.denominator * v.denominator,
        )
    if float(max(values) / q) > 1e6:
        return None
    return float(q)


@dataclass(frozen=True)
class Labeled:
    """A graph as index arrays: nodes 0..n-1, edges (i < j) and their labels."""

    nodes: list
    node_labels: list
    edges: list[tuple[int, int]]
    edge_labels: list
    degree: list[int]
    incident: list[list[int]]  # edge indices incident to each node


# --------------------------------------------------------------------------- validation


def check_costs(**costs: Any) -> _CostSpec:
    """Validate the six cost arguments: each a number, a mapping or a callable."""
    values: dict[str, Any] = {}
    for name, value in costs.items():
        if isinstance(value, Mapping) or (callable(value) and not isinstance(value, type)):
            values[name] = value
            continue
        values[name] = _cost_value(value, name)
    return _CostSpec(
        node_del=values["node_del_cost"],
        node_ins=values["node_ins_cost"],
        node_sub=values["node_sub_cost"],
        edge_del=values["edge_del_cost"],
        edge_ins=values["edge_ins_cost"],
        edge_sub=values["edge_sub_cost"],
    )


def _cost_value(value: Any, what: str) -> float:
    """A cost as a float, or a clear error."""
    if isinstance(value, bool) or not isinstance(value, (int, float, np.integer, np.floating)):
        raise TypeError(
            f"{what} must be a real number, got {value!r} of type "
            f"{type(value).__name__}; pass a non-negative float (or, for a cost argument, a "
            "mapping from labels to costs or a callable of the labels)"
        )
    v = float(value)
    if not math.isfinite(v) or v < 0:
        raise ValueError(f"{what} must be a finite number >= 0, got {value!r}")
    return v


def _unary_costs(spec: Any, labels: list, wanted: NDArray[np.bool_], name: str) -> NDArray[np.float64]:
    """Deletion or insertion cost of each label (0 where not ``wanted``)."""
    out = np.zeros(len(labels))
    if isinstance(spec, float):
        out[wanted] = spec
        return out
    for c in np.flatnonzero(wanted):
        label = labels[c]
        if isinstance(spec, Mapping):
            if label not in spec:
                raise ValueError(
                    f"{name} has no entry for label {label!r}; give every label of the "
                    "graphs a cost (or pass a number or a callable)"
                )
            value = spec[label]
        else:
            value = spec(label)
        out[c] = _cost_value(value, f"{name} of label {label!r}")
    return out


def _binary_costs(
    spec: Any, labels: list, rows: NDArray[np.bool_], cols: NDArray[np.bool_], name: str
) -> NDArray[np.float64]:
    """Substitution cost of each pair of labels (0 on the diagonal and where not needed)."""
    k = len(labels)
    out = np.zeros((k, k))
    if isinstance(spec, float):
        out[np.ix_(rows, cols)] = spec
        np.fill_diagonal(out, 0.0)
        return out
    for i in np.flatnonzero(rows):
        for j in np.flatnonzero(cols):
            if i == j:
                continue
            x, y = labels[i], labels[j]
            if isinstance(spec, Mapping):
                if (x, y) in spec:
                    value = spec[(x, y)]
                elif (y, x) in spec:
                    value = spec[(y, x)]
                else:
                    raise ValueError(
                        f"{name} has no entry for the label pair {(x, y)!r} (nor {(y, x)!r}); "
                        "give every pair of labels of the graphs a cost (or pass a number or "
                        "a callable)"
                    )
            else:
                value = spec(x, y)
            out[i, j] = _cost_value(value, f"{name} of labels {(x, y)!r}")
    return out


def _codes(first: list, second: list) -> tuple[list, NDArray[np.intp], NDArray[np.intp]]:
    """Codes of labels equal by ``==`` (as dict keys): distinct labels and both code arrays."""
    ids: dict[Hashable, int] = {}
    ca = np.array([ids.setdefault(x, len(ids)) for x in first], dtype=np.intp)
    cb = np.array([ids.setdefault(x, len(ids)) for x in second], dtype=np.intp)
    return list(ids), ca, cb


def pair_costs(spec: _CostSpec, a: Labeled, b: Labeled) -> Costs:
    """The cost tables of one pair of graphs."""
    uniform = spec.uniform
    tables = []
    for kind, first, second, dele, ins, sub in (
        ("node", a.node_labels, b.node_labels, spec.node_del, spec.node_ins, spec.node_sub),
        ("edge", a.edge_labels, b.edge_labels, spec.edge_del, spec.edge_ins, spec.edge_sub),
    ):
        labels, ca, cb = _codes(first, second)
        k = len(labels)
        if kind == "edge" and uniform:
            sub = min(sub, dele + ins)
        if uniform:
            # Every table entry is needed by no more than a few lookups; fill them all.
            del_t, ins_t = np.full(k, dele), np.full(k, ins)
            sub_t = np.full((k, k), sub)
            np.fill_diagonal(sub_t, 0.0)
        else:
            in_a = np.zeros(k, dtype=bool)
            in_a[ca] = True
            in_b = np.zeros(k, dtype=bool)
            in_b[cb] = True
            del_t = _unary_costs(dele, labels, in_a, f"{kind}_del_cost")
            ins_t = _unary_costs(ins, labels, in_b, f"{kind}_ins_cost")
            sub_t = _binary_costs(sub, labels, in_a, in_b, f"{kind}_sub_cost")
            if kind == "edge":
                # an edit path may delete and insert an edge instead of substituting it
                sub_t = np.minimum(sub_t, del_t[:, None] + ins_t[None, :])
                np.fill_diagonal(sub_t, 0.0)
        tables.append((sub_t, del_t, ins_t, ca, cb))
    (ns, nd, ni, na, nb), (es, ed, ei, ea, eb) = tables
    scalar = None
    if uniform:
        sub = min(spec.edge_sub, spec.edge_del + spec.edge_ins)
        scalar = (spec.node_del, spec.node_ins, spec.node_sub, spec.edge_del, spec.edge_ins, sub)
    return Costs(
        ns, nd, ni, es, ed, ei, na, nb, ea, eb,
        scalar=scalar,
        node_del=nd[na],
        node_ins=ni[nb],
        edge_del=ed[ea],
        edge_ins=ei[eb],
    )


def labeled(g: Any, name: str, node_label: Hashable, edge_label: Hashable) -> Labeled:
    """Validate ``g`` and return its index form."""
    if not isinstance(g, nx.Graph):
        raise TypeError(
            f"{name} must be a networkx.Graph, got {type(g).__name__}; build one with "
            f"networkx.Graph() and set the node attribute {node_label!r}"
        )
    if g.is_directed():
        raise TypeError(
            f"{name} is a directed graph ({type(g).__name__}); only undirected graphs are "
            f"supported, convert it with {name}.to_undirected()"
        )
    if g.is_multigraph():
        raise TypeError(
            f"{name} is a multigraph ({type(g).__name__}); only simple graphs are supported, "
            "convert it with networkx.Graph(...) after merging parallel edges"
        )
    nodes = list(g.nodes)
    index = {u: i for i, u in enumerate(nodes)}
    node_labels = []
    for u, data in g.nodes(data=True):
        label = data.get(node_label)
        if label is None:
            found = "it is None" if node_label in data else f"attributes: {sorted(map(str, data))}"
            raise ValueError(
                f"node {u!r} of {name} has no {node_label!r} attribute ({found}); set it on "
                "every node or pass node_label=<the attribute name>"
            )
        try:
            hash(label)
        except TypeError:
            _unhashable(label, f"label {node_label!r} of node {u!r} of {name}")
        node_labels.append(label)
    edges: list[tuple[int, int]] = []
    edge_labels = []
    incident: list[list[int]] = [[] for _ in nodes]
    for u, v, data in g.edges(data=True):
        if u == v:
            raise ValueError(
                f"{name} has a self-loop at node {u!r}; self-loops are not supported, remove "
                "them with g.remove_edges_from(networkx.selfloop_edges(g))"
            )
        label = data.get(edge_label)
        try:
            hash(label)
        except TypeError:
            _unhashable(label, f"label {edge_label!r} of edge {(u, v)!r} of {name}")
        i, j = sorted((index[u], index[v]))
        incident[i].append(len(edges))
        incident[j].append(len(edges))
        edges.append((i, j))
        edge_labels.append(label)
    return Labeled(
        nodes=nodes,
        node_labels=node_labels,
        edges=edges,
        edge_labels=edge_labels,
        degree=[len(e) for e in incident],
        incident=incident,
    )


def _unhashable(label: Any, what: str) -> None:
    """Raise the error for an unhashable label (the message is built only when needed)."""
    raise TypeError(
        f"{what} must be hashable (a categorical value such as a str or int), got "
        f"{label!r} of type {type(label).__name__}"
    ) from None


# --------------------------------------------------------------------------- derived costs


def node_sub_matrix(a: Labeled, b: Labeled, costs: Costs) -> NDArray[np.float64]:
    """(n1, n2) node substitution costs (0 between equal labels)."""
    return costs.node_sub


def delete_all(costs: Costs) -> float:
    """Cost of deleting everything of the first graph and inserting all of the second."""
    return float(
        costs.node_del.sum() + costs.node_ins.sum() + costs.edge_del.sum() + costs.edge_ins.sum()
    )


def node_saving(costs: Costs) -> NDArray[np.float64]:
    """(n1, n2) node substitution cost minus deletion and insertion."""
    return costs.node_sub - costs.node_del[:, None] - costs.node_ins[None, :]


def edge_saving(costs: Costs) -> NDArray[np.float64]:
    """(m1, m2) edge substitution cost minus deletion and insertion (never positive)."""
    return costs.edge_sub - costs.edge_del[:, None] - costs.edge_ins[None, :]

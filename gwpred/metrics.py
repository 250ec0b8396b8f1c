r"""Scores for predicted labeled graphs: graph edit distance, exact match, summaries.

A labeled graph here is an undirected, simple :class:`networkx.Graph` whose nodes carry a
categorical label (any hashable value, e.g. an element symbol) and whose edges may carry a
categorical label (e.g. a bond order 1/2/3). An edge without the label attribute counts as
one more edge type, ``None``.

The graph edit distance (GED) is NP-hard. :func:`edit_distance` first tries cheap answers
(label isomorphism, lower bound equal to upper bound) and only then solves a binary linear
program with HiGHS; pass ``time_limit`` to bound the cost of a call.
:func:`edit_distance_bounds` returns only the cheap bounds.
"""

from __future__ import annotations

import itertools
import math
import sys
import time
import warnings
from collections import Counter
from collections.abc import Callable, Hashable, Mapping, Sequence
from dataclasses import dataclass, field
from fractions import Fraction
from functools import cached_property, lru_cache
from typing import Any

import networkx as nx
import numpy as np
from numpy.typing import NDArray

__all__ = [
    "EditDistance",
    "edit_distance",
    "edit_distance_bounds",
    "exact_match",
    "summarize",
]


@dataclass(frozen=True)
class EditDistance:
    """Result of :func:`edit_distance`.

    Attributes
    ----------
    value : float
        The graph edit distance when ``exact`` is true, otherwise the best upper bound
        found (the cost of the edit path described by ``mapping``).
    lower : float
        A proven lower bound on the graph edit distance.
    upper : float
        The cost of the best edit path found; equal to ``value``.
    exact : bool
        True when ``value`` is proven optimal (``lower == upper``).
    mapping : dict
        Node of the first graph -> node of the second graph it is substituted by, or
        ``None`` when it is deleted. Nodes of the second graph that are not values of this
        dict are inserted. Edges follow the nodes: an edge whose two end nodes are mapped
        onto an edge is substituted, every other edge is deleted or inserted.
    """

    value: float
    lower: float
    upper: float
    exact: bool
    mapping: dict = field(default_factory=dict)


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
class _Costs:
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
    # The same costs per node, edge or pair of them, read from the tables through the codes.
    node_sub: NDArray[np.float64]  # (n1, n2)
    node_del: NDArray[np.float64]  # (n1,)
    node_ins: NDArray[np.float64]  # (n2,)
    edge_sub: NDArray[np.float64]  # (m1, m2)
    edge_del: NDArray[np.float64]  # (m1,)
    edge_ins: NDArray[np.float64]  # (m2,)

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
    """Largest q dividing every positive cost (see ``_Costs.unit``), or None.

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
class _Labeled:
    """A graph as index arrays: nodes 0..n-1, edges (i < j) and their labels."""

    nodes: list
    node_labels: list
    edges: list[tuple[int, int]]
    edge_labels: list
    degree: list[int]
    incident: list[list[int]]  # edge indices incident to each node


# --------------------------------------------------------------------------- validation


def _check_costs(**costs: Any) -> _CostSpec:
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


def _pair_costs(spec: _CostSpec, a: _Labeled, b: _Labeled) -> _Costs:
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
    return _Costs(
        ns, nd, ni, es, ed, ei, na, nb, ea, eb,
        scalar=scalar,
        node_sub=ns[na[:, None], nb[None, :]],
        node_del=nd[na],
        node_ins=ni[nb],
        edge_sub=es[ea[:, None], eb[None, :]],
        edge_del=ed[ea],
        edge_ins=ei[eb],
    )


def _check_time_limit(time_limit: float | None) -> float | None:
    if time_limit is None:
        return None
    if isinstance(time_limit, bool) or not isinstance(
        time_limit, (int, float, np.integer, np.floating)
    ):
        raise TypeError(
            f"time_limit must be a number of seconds or None, got {time_limit!r} of type "
            f"{type(time_limit).__name__}"
        )
    if not float(time_limit) > 0 or math.isnan(float(time_limit)):
        raise ValueError(
            f"time_limit must be > 0 seconds (or None for no limit), got {time_limit!r}"
        )
    return float(time_limit)


def _labeled(g: Any, name: str, node_label: Hashable, edge_label: Hashable) -> _Labeled:
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
    return _Labeled(
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


# --------------------------------------------------------------------------- label isomorphism


def _token_graphs(a: _Labeled, b: _Labeled) -> tuple[nx.Graph, nx.Graph]:
    """Copies of both graphs whose labels are strings, equal iff the labels are equal.

    The tokens come from one dict shared by both graphs, so labels that compare equal
    (``1 == 1.0``) get the same token, which ``str`` alone would not give.
    """
    ids: dict[Hashable, str] = {}

    def token(label: Hashable, kind: str) -> str:
        return ids.setdefault((kind, label), f"{kind}{len(ids)}.")

    out = []
    for lab in (a, b):
        h = nx.Graph()
        h.add_nodes_from((i, {"t": token(x, "n")}) for i, x in enumerate(lab.node_labels))
        h.add_edges_from(
            (i, j, {"t": token(x, "e")}) for (i, j), x in zip(lab.edges, lab.edge_labels)
        )
        out.append(h)
    return out[0], out[1]


def _isomorphism(a: _Labeled, b: _Labeled) -> dict[int, int] | None:
    """A label-preserving isomorphism (index -> index), or None when there is none."""
    if len(a.nodes) != len(b.nodes) or len(a.edges) != len(b.edges):
        return None
    if sorted(a.degree) != sorted(b.degree):
        return None
    if Counter(a.node_labels) != Counter(b.node_labels):
        return None
    if Counter(a.edge_labels) != Counter(b.edge_labels):
        return None
    h1, h2 = _token_graphs(a, b)
    # Weisfeiler-Lehman hashes differ -> not isomorphic; equal hashes prove nothing.
    if nx.weisfeiler_lehman_graph_hash(
        h1, node_attr="t", edge_attr="t"
    ) != nx.weisfeiler_lehman_graph_hash(h2, node_attr="t", edge_attr="t"):
        return None
    matcher = nx.algorithms.isomorphism.GraphMatcher(
        h1,
        h2,
        node_match=lambda x, y: x["t"] == y["t"],
        edge_match=lambda x, y: x["t"] == y["t"],
    )
    if matcher.is_isomorphic():
        return dict(matcher.mapping)
    return None


# --------------------------------------------------------------------------- costs


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


def _node_sub_matrix(a: _Labeled, b: _Labeled, costs: _Costs) -> NDArray[np.float64]:
    """(n1, n2) node substitution costs (0 between equal labels)."""
    return costs.node_sub


def _star_matrix(a: _Labeled, b: _Labeled, costs: _Costs) -> NDArray[np.float64]:
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
    image = _assign(sub, dele, ins)
    kept = image >= 0
    used = np.zeros(len(ins), dtype=bool)
    used[image[kept]] = True
    return float(sub[np.flatnonzero(kept), image[kept]].sum() + dele[~kept].sum() + ins[~used].sum())


def _assign(
    sub: NDArray[np.float64], dele: NDArray[np.float64], ins: NDArray[np.float64]
) -> NDArray[np.intp]:
    """Solve the square (n1 + n2) assignment problem of Riesen & Bunke.

    Returns, for each node of the first graph, the index of its image or -1.
    """
    from scipy.optimize import linear_sum_assignment

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


def _edge_table(costs: _Costs) -> NDArray[np.float64]:
    """(E + 1, E + 1) cost of an edge slot by edge label code + 1, code 0 meaning no edge.

    Entry [c, d]: an edge labeled c - 1 of the first graph lands on an edge labeled d - 1
    (substitution), on no edge (d = 0: deletion), or no edge lands on it (c = 0: insertion).
    """
    k = len(costs.edge_del_t) + 1
    table = np.zeros((k, k))
    table[1:, 1:] = costs.edge_sub_t
    table[1:, 0] = costs.edge_del_t
    table[0, 1:] = costs.edge_ins_t
    return table


def _edge_codes(lab: _Labeled, codes: NDArray[np.intp], size: int) -> NDArray[np.intp]:
    """(size, size) symmetric matrix of edge label codes + 1 (0: no edge)."""
    m = np.zeros((size, size), dtype=np.intp)
    if len(lab.edges):
        ends = np.asarray(lab.edges, dtype=np.intp)
        m[ends[:, 0], ends[:, 1]] = m[ends[:, 1], ends[:, 0]] = codes + 1
    return m


class _PathCost:
    """Cost of the edit path induced by a node map (image or -1 per node of the first graph).

    Vectorised: the tables hold costs relative to inserting every node and edge of the
    second graph, and index -1 reads their last row and column, which stand for
    "deleted". Built once per pair of graphs, then called for each map.
    """

    def __init__(self, a: _Labeled, b: _Labeled, costs: _Costs) -> None:
        n1, n2 = len(a.nodes), len(b.nodes)
        self.node = np.empty((n1, n2 + 1))
        self.node[:, :n2] = costs.node_sub - costs.node_ins[None, :]
        self.node[:, n2] = costs.node_del
        self.codes2 = _edge_codes(b, costs.edge_b, n2 + 1)
        ea = np.asarray(a.edges, dtype=np.intp).reshape(-1, 2)
        self.end0, self.end1 = ea[:, 0], ea[:, 1]
        self.codes1 = costs.edge_a + 1
        table = _edge_table(costs)
        self.edge = table - table[0][None, :]  # an edge that is hit is not inserted
        self.rows = np.arange(n1)
        self.base = float(costs.node_ins.sum() + costs.edge_ins.sum())

    def __call__(self, image: NDArray[np.intp]) -> float:
        hit = self.codes2[image[self.end0], image[self.end1]]
        return float(
            self.base + self.node[self.rows, image].sum() + self.edge[self.codes1, hit].sum()
        )


def _round_lower(lower: float, costs: _Costs, from_solver: bool = True) -> float:
    """Round a proven lower bound up to the next possible edit distance value.

    With a cost unit q (see ``_Costs.unit``) the bound goes up to a multiple of q; the
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


def _closed(lower: float, upper: float) -> bool:
    """Whether the bounds prove the upper bound optimal."""
    return upper - lower <= 1e-8 * max(1.0, abs(upper))


def _stop_at(upper: float, costs: _Costs) -> float | None:
    """Objective value at which a relaxation proves ``upper`` optimal, with a margin.

    With a cost unit q, a relaxation value of at least ``upper - q`` plus a little rounds
    up to ``upper``; the margin of 0.1 q stays far above the solvers' tolerances. None
    without a unit (the relaxation must then be solved to optimality).
    """
    q = costs.unit
    return None if q is None else upper - 0.9 * q


def _label_bound(a: _Labeled, b: _Labeled, costs: _Costs) -> float:
    """Label multiset bound: node and edge labels edited as two independent multisets."""
    if costs.scalar is None:
        return _assignment_cost(costs.node_sub, costs.node_del, costs.node_ins) + _assignment_cost(
            costs.edge_sub, costs.edge_del, costs.edge_ins
        )
    node_del, node_ins, node_sub, edge_del, edge_ins, edge_sub = costs.scalar
    return _multiset_cost(
        costs.node_a.tolist(), costs.node_b.tolist(), node_sub, node_del, node_ins
    ) + _multiset_cost(costs.edge_a.tolist(), costs.edge_b.tolist(), edge_sub, edge_del, edge_ins)


def _incident_sum(lab: _Labeled, values: NDArray[np.float64]) -> NDArray[np.float64]:
    """Per node, the sum of ``values`` (one per edge) over its incident edges."""
    out = np.zeros(len(lab.nodes))
    if len(lab.edges):
        ends = np.asarray(lab.edges, dtype=np.intp)
        np.add.at(out, ends[:, 0], values)
        np.add.at(out, ends[:, 1], values)
    return out


def _bounds(
    a: _Labeled, b: _Labeled, costs: _Costs, path_cost: _PathCost | None = None
) -> tuple[float, float, NDArray[np.intp]]:
    """Cheap lower bound, bipartite upper bound and the node map giving that upper bound."""
    n1, n2 = len(a.nodes), len(b.nodes)
    if n1 == 0 or n2 == 0:
        # Nothing to pair: delete everything of a, insert everything of b.
        cost = float(costs.node_del.sum() + costs.node_ins.sum())
        cost += float(costs.edge_del.sum() + costs.edge_ins.sum())
        return cost, cost, np.full(n1, -1, dtype=np.intp)

    lower = _label_bound(a, b, costs)

    sub = _node_sub_matrix(a, b, costs)
    star = _star_matrix(a, b, costs)
    del_a = _incident_sum(a, costs.edge_del)  # deleting every edge of node i
    ins_b = _incident_sum(b, costs.edge_ins)

    # Branch (degree and incident-label) bound: every edge cost is split in halves between
    # its two end nodes, so an assignment with half the local edge costs is a lower bound.
    sub_h = sub + 0.5 * star
    dele_h = costs.node_del + 0.5 * del_a
    ins_h = costs.node_ins + 0.5 * ins_b
    half = _assign(sub_h, dele_h, ins_h)
    kept = half >= 0
    used = np.zeros(n2, dtype=bool)
    used[half[kept]] = True
    lower_branch = float(
        sub_h[np.flatnonzero(kept), half[kept]].sum() + dele_h[~kept].sum() + ins_h[~used].sum()
    )
    lower = max(lower, lower_branch)

    # Bipartite upper bound (Riesen & Bunke): full local edge costs; the node map's true
    # edit cost is an upper bound. The branch map is a second candidate.
    full = _assign(sub + star, costs.node_del + del_a, costs.node_ins + ins_b)
    path_cost = path_cost or _PathCost(a, b, costs)
    best_image, upper = full, path_cost(full)
    other = path_cost(half)
    if other < upper:
        best_image, upper = half, other
    lower = min(_round_lower(lower, costs, from_solver=False), upper)
    return lower, upper, best_image


# --------------------------------------------------------------------------- local search


@dataclass(frozen=True)
class _Padded:
    """Both graphs padded to N = n1 + n2 nodes, for the swap local search.

    A node of the first graph sent to a padding node (index >= n2) is deleted; a padding
    node of the first graph (index >= n1) sent to a real node inserts that node.
    """

    node_cost: NDArray[np.float64]  # (N, N) cost of sending i to k
    codes1: NDArray[np.intp]  # (N, N) edge label codes of the first graph, 0 = no edge
    codes2: NDArray[np.intp]  # (N, N) the same for the second graph
    edge_cost: NDArray[np.float64]  # (K + 1, K + 1) cost between two codes
    n1: int
    n2: int


# Largest padded size for the local search: its work per step grows as N**3.
_MAX_SEARCH_NODES = 150
# Random starts of the local search tried before the linear relaxation, and after it
# (before the integer program). None before: on QM9 pairs they rarely close the gap
# that the relaxation closes, and cost more time than they save (measured).
_RESTARTS_FIRST = 0
_RESTARTS_SECOND = 16


def _padded(a: _Labeled, b: _Labeled, costs: _Costs) -> _Padded:
    n1, n2 = len(a.nodes), len(b.nodes)
    big_n = n1 + n2
    node_cost = np.zeros((big_n, big_n))
    node_cost[:n1, :n2] = _node_sub_matrix(a, b, costs)
    node_cost[:n1, n2:] = costs.node_del[:, None]
    node_cost[n1:, :n2] = costs.node_ins[None, :]
    return _Padded(
        node_cost,
        _edge_codes(a, costs.edge_a, big_n),
        _edge_codes(b, costs.edge_b, big_n),
        _edge_table(costs),
        n1,
        n2,
    )


def _to_perm(image: NDArray[np.intp], n2: int) -> NDArray[np.intp]:
    """Extend a node map (image or -1 per node of the first graph) to a permutation."""
    n1 = len(image)
    perm = np.empty(n1 + n2, dtype=np.intp)
    used = np.zeros(n1 + n2, dtype=bool)
    real = image >= 0
    perm[:n1][real] = image[real]
    used[image[real]] = True
    for i in np.flatnonzero(~real):
        k = _next_free(used, n2)  # a padding node: i is deleted
        perm[i] = k
        used[k] = True
    perm[n1:] = np.flatnonzero(~used)
    return perm


def _next_free(used: NDArray[np.bool_], start: int) -> int:
    return int(start + np.flatnonzero(~used[start:])[0])


@lru_cache(maxsize=32)
def _pairs(big_n: int) -> tuple[NDArray[np.intp], NDArray[np.intp]]:
    """Row and column indices of the upper triangle (i < j) of a big_n x big_n matrix.

    Cached (read-only arrays): the local search asks for the same few sizes again and
    again, and building them took as long as a search step on QM9 pairs (measured).
    """
    rows, cols = np.triu_indices(big_n, 1)
    rows.flags.writeable = False
    cols.flags.writeable = False
    return rows, cols


def _local_search(
    pad: _Padded,
    image: NDArray[np.intp],
    max_steps: int = 200,
    deadline: float | None = None,
) -> NDArray[np.intp]:
    """Improve a node map by best-improvement swaps of two images until none helps.

    The change of cost of every swap (a, b) is computed at once from
    ``q[i, x, c]``, the cost of the edge slot (i, x) when x is sent to c and i stays.
    With a ``deadline`` (a ``time.perf_counter()`` value) the search stops after the
    step during which it passes, keeping the best map found so far.
    """
    big_n = pad.n1 + pad.n2
    if big_n < 2 or big_n > _MAX_SEARCH_NODES:
        return image
    perm = _to_perm(image, pad.n2)
    rows, cols = _pairs(big_n)
    q = pad.edge_cost[pad.codes1[:, :, None], pad.codes2[perm][:, None, :]]
    s = q.sum(axis=0)  # s[x, c] = sum_i q[i, x, c]
    for _ in range(max_steps):
        if deadline is not None and time.perf_counter() > deadline:
            break
        pa, pb = perm[rows], perm[cols]
        # Edge cost of the slots (i, x), i outside the swapped pair, with x sent to c.
        # The slot between the swapped pair itself keeps its cost.
        slot_r_pb = s[rows, pb] - q[rows, rows, pb] - q[cols, rows, pb]
        slot_c_pa = s[cols, pa] - q[rows, cols, pa] - q[cols, cols, pa]
        slot_r_pa = s[rows, pa] - q[rows, rows, pa] - q[cols, rows, pa]
        slot_c_pb = s[cols, pb] - q[rows, cols, pb] - q[cols, cols, pb]
        delta = (
            slot_r_pb + slot_c_pa - slot_r_pa - slot_c_pb
            + pad.node_cost[rows, pb] + pad.node_cost[cols, pa]
            - pad.node_cost[rows, pa] - pad.node_cost[cols, pb]
        )
        best = int(np.argmin(delta))
        if not delta[best] < -1e-9:
            break
        r, c = rows[best], cols[best]
        perm[r], perm[c] = perm[c], perm[r]
        # Only the rows of q of the two swapped nodes change.
        for i in (r, c):
            new = pad.edge_cost[pad.codes1[i][:, None], pad.codes2[perm[i]][None, :]]
            s += new - q[i]
            q[i] = new
    out = perm[: pad.n1].copy()
    out[out >= pad.n2] = -1
    return out


# --------------------------------------------------------------------------- Lagrangian bound

# Largest degree for which the star subproblems are solved by listing permutations
# (5! = 120 per node pair); graphs with a larger degree skip the Lagrangian step.
_MAX_STAR_DEGREE = 5
# Largest number of array entries read per Lagrangian step (n1 * n2 * degree! * degree),
# which bounds its memory and time (about 16 MB); larger pairs skip the step.
_MAX_STAR_WORK = 2_000_000
# Subgradient steps of the Lagrangian bound. On the 600 QM9 pairs of
# benchmarks/bench_ged.py it closes 433 (72%), 90% of them within 43 steps (median 18);
# the rest go on to the linear relaxation.
_LAGRANGE_STEPS = 60
# First Polyak step factor, halved after this many steps without a better bound. Chosen
# on 600 other QM9 pairs (other predictions, other random pairs), not the benchmark's.
_LAGRANGE_STEP = 1.8
_LAGRANGE_STALL = 10
# Local search from an assignment whose edit path is within this many cost units of the
# best one.
_LAGRANGE_SEARCH_MARGIN = 2


@lru_cache(maxsize=8)
def _star_permutations(degree: int) -> tuple[NDArray[np.intp], NDArray[np.bool_]]:
    """All permutations of ``degree`` star slots, as flat indices into a degree**2 block.

    Returns ``flat`` (P, degree), where ``flat[p, r] = r * degree + perm_p(r)``, and
    ``member`` (P * degree**2,), true where slot ``s`` belongs to permutation ``p``
    (entry ``p * degree**2 + s``). Read-only, cached.
    """
    perms = np.array(list(itertools.permutations(range(degree))), dtype=np.intp)
    flat = np.arange(degree)[None, :] * degree + perms
    member = np.zeros((len(perms), degree * degree), dtype=bool)
    member[np.arange(len(perms))[:, None], flat] = True
    member = member.ravel()
    flat.flags.writeable = False
    member.flags.writeable = False
    return flat, member


@dataclass(frozen=True)
class _Stars:
    r"""The Lagrangian decomposition of the program F2 into node-pair star problems.

    Every edge variable :math:`y_{ef}^o` (edge e = (i, j) of the first graph onto edge
    f = (k, l) of the second, o = 0: i -> k and j -> l) has its cost :math:`d_{ef}` (edge
    substitution minus deletion and insertion, negative) split into two sides, one per
    end-node pair: :math:`\alpha` at (i, k) and :math:`d - \alpha` at (j, l) (for o = 0).
    Side ``t`` sits in the star problem of the node pair ``pair[t]`` (i * n2 + k), at
    slot ``slot[t]`` (position of e among the edges of i times ``degree`` plus position
    of f among the edges of k), that is at ``at[t]`` in a flat (n1 * n2 * degree**2)
    array. Sides ``0..Y-1`` are the first sides of the Y edge variables, ``Y..2Y-1`` the
    second sides, in the same order.
    """

    n1: int
    n2: int
    degree: int
    const: float  # cost of deleting everything of the first graph and inserting the second
    node: NDArray[np.float64]  # (n1, n2) node substitution minus deletion and insertion
    d: NDArray[np.float64]  # (Y,) edge variable costs
    at: NDArray[np.intp]  # (2Y,)
    pair: NDArray[np.intp]  # (2Y,)
    slot: NDArray[np.intp]  # (2Y,)
    src: NDArray[np.intp]  # (2Y,) node of the first graph of each side
    dst: NDArray[np.intp]  # (2Y,) node of the second graph of each side


def _edge_slots(lab: _Labeled) -> NDArray[np.intp]:
    """(m, 2): position of edge e among the edges of its first and second end node."""
    pos = np.zeros((len(lab.edges), 2), dtype=np.intp)
    for v, inc in enumerate(lab.incident):
        for p, e in enumerate(inc):
            pos[e, 0 if lab.edges[e][0] == v else 1] = p
    return pos


def _stars(a: _Labeled, b: _Labeled, costs: _Costs) -> _Stars | None:
    """Star decomposition of F2, or None when it does not apply.

    It does not apply without edges to substitute, with a node of more than
    ``_MAX_STAR_DEGREE`` edges, or when a step would read more than ``_MAX_STAR_WORK``
    entries.
    """
    n1, n2 = len(a.nodes), len(b.nodes)
    m1, m2 = len(a.edges), len(b.edges)
    degree = max(max(a.degree, default=0), max(b.degree, default=0))
    if m1 == 0 or m2 == 0 or degree > _MAX_STAR_DEGREE:
        return None
    if n1 * n2 * math.factorial(degree) * degree > _MAX_STAR_WORK:
        return None
    saving = _edge_saving(costs)
    e_idx, f_idx = np.nonzero(saving < 0)
    if len(e_idx) == 0:
        return None
    ea = np.asarray(a.edges, dtype=np.intp)[e_idx]
    eb = np.asarray(b.edges, dtype=np.intp)[f_idx]
    pa = _edge_slots(a)[e_idx]
    pb = _edge_slots(b)[f_idx]
    i, j, k, l = ea[:, 0], ea[:, 1], eb[:, 0], eb[:, 1]
    pi, pj, qk, ql = pa[:, 0], pa[:, 1], pb[:, 0], pb[:, 1]
    # Y = 2 * len(e_idx) variables: orientation 0 (i -> k, j -> l), then 1 (i -> l, j -> k).
    src = np.concatenate([i, i, j, j])
    dst = np.concatenate([k, l, l, k])
    slot = np.concatenate([pi, pi, pj, pj]) * degree + np.concatenate([qk, ql, ql, qk])
    pair = src * n2 + dst
    const = _delete_all(costs)
    node = _node_saving(costs)
    return _Stars(
        n1=n1,
        n2=n2,
        degree=degree,
        const=const,
        node=node,
        d=np.tile(saving[e_idx, f_idx], 2),
        at=pair * degree * degree + slot,
        pair=pair,
        slot=slot,
        src=src,
        dst=dst,
    )


def _lagrangian(
    stars: _Stars,
    pad: _Padded,
    path_cost: _PathCost,
    costs: _Costs,
    lower: float,
    upper: float,
    image: NDArray[np.intp] | None,
    deadline: float | None = None,
) -> tuple[float, float, NDArray[np.intp] | None, int]:
    r"""Lagrangian lower bound of F2 by subgradient ascent, with node maps as a by-product.

    For any split :math:`\alpha` of the edge-variable costs between their two end-node
    pairs (see :class:`_Stars`), an edit path that sends node i to node k pays for the
    edge substitutions it makes at (i, k) at least the cheapest matching of the edges of
    i with those of k under the side costs at (i, k), :math:`S_{ik}(\alpha) \le 0` (each
    edge has one image, so they form a matching). Hence

    .. math::
        \mathrm{GED} \ge C_0 + \min_{x} \sum_{ik} (c_{ik} + S_{ik}(\alpha)) x_{ik}

    over partial assignments x: one linear sum assignment, a valid lower bound for every
    :math:`\alpha` (Lagrangian decomposition, Guignard & Kim 1987). Its maximum over
    :math:`\alpha` equals the linear relaxation of F2, since both subproblems are
    integral. Stars have at most ``_MAX_STAR_DEGREE`` edges, so every :math:`S_{ik}` is
    found by listing the permutations of the slots (a negative side cost may be left
    unmatched at cost 0). :math:`\alpha` moves along the subgradient (edge variable
    used at its first side minus used at its second, for the current assignment) with
    Polyak's step towards ``upper - 0.9 q`` (Polyak 1969). Each assignment is also an
    edit path: its cost, after a local search when it is within 2 q of the best,
    improves ``upper``.

    Returns the new lower bound (rounded up to the cost unit), upper bound, best node
    map and the number of steps. Stops once the bounds meet, after ``_LAGRANGE_STEPS``
    steps, when the subgradient vanishes, or at ``deadline`` (after the first step).
    """
    from scipy.optimize import linear_sum_assignment

    n1, n2, deg = stars.n1, stars.n2, stars.degree
    q = costs.unit
    if q is None:  # pragma: no cover - the caller only uses it with a cost unit
        raise ValueError("the Lagrangian bound needs a cost unit")
    flat, member = _star_permutations(deg)
    block = deg * deg
    big_n = n1 + n2
    c = np.full((big_n, big_n), np.inf)  # padded assignment, as in _assign
    c[np.arange(n1), n2 + np.arange(n1)] = 0.0
    c[n1 + np.arange(n2), np.arange(n2)] = 0.0
    c[n1:, n2:] = 0.0
    top = c[:n1, :n2]
    side = np.zeros(n1 * n2 * block)
    side_rows = side.reshape(n1 * n2, block)
    rows = np.arange(n1 * n2)
    n_y = len(stars.d)
    # split[t]: cost of side t; split[t] + split[t + Y] = d[t] (alpha, then d - alpha)
    split = np.tile(0.5 * stars.d, 2)
    other = np.concatenate([np.arange(n_y, 2 * n_y), np.arange(n_y)])
    step = _LAGRANGE_STEP
    best_value, stall = -math.inf, 0
    seen: set[bytes] = set()
    steps = 0
    while steps < _LAGRANGE_STEPS:
        if steps and deadline is not None and time.perf_counter() > deadline:
            break
        steps += 1
        # Negative side costs only: a star may leave any edge unmatched at cost 0.
        w = np.minimum(split, 0.0)
        side[stars.at] = w
        vals = side_rows[:, flat].sum(axis=2)  # (n1 * n2, P)
        best = vals.argmin(axis=1)
        np.add(stars.node, vals[rows, best].reshape(n1, n2), out=top)
        r, col = linear_sum_assignment(c)
        value = stars.const + float(c[r, col].sum())
        lower = max(lower, _round_lower(value, costs))
        if math.isfinite(upper) and _closed(lower, upper):
            break
        head = col[:n1]
        assign = np.where(head < n2, head, -1).astype(np.intp)
        key = assign.tobytes()
        if key not in seen:
            seen.add(key)
            candidate, cost = assign, path_cost(assign)
            if cost <= upper + _LAGRANGE_SEARCH_MARGIN * q:
                candidate = _local_search(pad, assign, deadline=deadline)
                cost = path_cost(candidate)
            if cost < upper:
                upper, image = cost, candidate
                if _closed(lower, upper):
                    break
        # Subgradient: +1 where the first side of y is used (its star matches it and the
        # assignment takes its node pair), -1 where the second side is.
        used = member[best[stars.pair] * block + stars.slot]
        used &= assign[stars.src] == stars.dst
        used &= w < 0
        g = used.astype(float)
        g -= used[other]  # the split moves cost between the two sides of each y
        norm = 0.5 * float(g @ g)
        if norm == 0.0:
            break  # alpha is optimal: the bound equals the linear relaxation
        if value > best_value + 1e-9:
            best_value, stall = value, 0
        else:
            stall += 1
            if stall >= _LAGRANGE_STALL:
                step, stall = 0.5 * step, 0
        split += (step * (upper - 0.9 * q - value) / norm) * g
    return lower, upper, image, steps


# --------------------------------------------------------------------------- linear programs


@dataclass(frozen=True)
class _Program:
    r"""The binary linear program F2 of Lerouge et al. (2017), for undirected graphs.

    Variables: :math:`x_{ik} \in \{0,1\}` (node i of the first graph substituted by node k
    of the second) and :math:`y_{ef}^o \in [0,1]` (edge e = (i, j) substituted by edge
    f = (k, l) in orientation o: o = 0 sends i to k and j to l, o = 1 sends i to l and j to
    k). With :math:`C_0 = n_1 c_{nd} + n_2 c_{ni} + m_1 c_{ed} + m_2 c_{ei}` (delete and
    insert everything), minimise

    .. math::
        C_0 + \sum_{ik} (c_{ik} - c_{nd} - c_{ni}) x_{ik}
            + \sum_{efo} (c_{ef} - c_{ed} - c_{ei}) y_{ef}^o

    subject to :math:`\sum_k x_{ik} \le 1`, :math:`\sum_i x_{ik} \le 1`, and, for every end
    node u of an edge e of the first graph and every node v of the second graph,
    :math:`\sum_{(f, o) : u \to v} y_{ef}^o \le x_{uv}` (the edge moves with its end
    node), and the same for every end node v of an edge f of the second graph and every
    node u of the first graph: :math:`\sum_{(e, o) : u \to v} y_{ef}^o \le x_{uv}`. For
    integral x these rows allow :math:`y_{ef}^o = 1` only when both end nodes of e are sent
    onto those of f in orientation o, so y needs no integrality. Only pairs (e, f) whose
    substitution is cheaper than deletion plus insertion get y variables; the last variable
    is fixed to 1 and carries :math:`C_0`, so that the objective equals the edit cost.
    """

    c: NDArray[np.float64]
    matrix: Any  # scipy.sparse.csc_array of the rows above (HiGHS takes columns)
    ub: NDArray[np.float64]
    n_x: int
    n_vars: int


def _delete_all(costs: _Costs) -> float:
    """Cost of deleting everything of the first graph and inserting all of the second."""
    return float(
        costs.node_del.sum() + costs.node_ins.sum() + costs.edge_del.sum() + costs.edge_ins.sum()
    )


def _node_saving(costs: _Costs) -> NDArray[np.float64]:
    """(n1, n2) node substitution cost minus deletion and insertion."""
    return costs.node_sub - costs.node_del[:, None] - costs.node_ins[None, :]


def _edge_saving(costs: _Costs) -> NDArray[np.float64]:
    """(m1, m2) edge substitution cost minus deletion and insertion (never positive)."""
    return costs.edge_sub - costs.edge_del[:, None] - costs.edge_ins[None, :]


def _program(a: _Labeled, b: _Labeled, costs: _Costs) -> _Program:
    from scipy.sparse import csc_array

    n1, n2 = len(a.nodes), len(b.nodes)
    m1, m2 = len(a.edges), len(b.edges)
    const = _delete_all(costs)
    c_x = _node_saving(costs).ravel()
    n_x = n1 * n2
    # y variables: edge pairs (e, f) whose substitution saves cost, two orientations each.
    saving = _edge_saving(costs)
    e_idx, f_idx = np.nonzero(saving < 0)
    n_pairs = len(e_idx)
    ea = np.asarray(a.edges, dtype=np.intp).reshape(m1, 2)
    eb = np.asarray(b.edges, dtype=np.intp).reshape(m2, 2)
    i_e, j_e = ea[e_idx, 0], ea[e_idx, 1]
    k_f, l_f = eb[f_idx, 0], eb[f_idx, 1]
    var0 = n_x + 2 * np.arange(n_pairs)  # orientation 0: i -> k, j -> l
    var1 = var0 + 1  # orientation 1: i -> l, j -> k
    y_var = np.concatenate([var0, var0, var1, var1])
    y_u = np.concatenate([i_e, j_e, i_e, j_e])
    y_v = np.concatenate([k_f, l_f, l_f, k_f])
    y_e = np.tile(e_idx, 4)
    y_f = np.tile(f_idx, 4)
    c_y = np.repeat(saving[e_idx, f_idx], 2)
    n_vars = n_x + 2 * n_pairs + 1

    # Rows 0..n1-1: a node of the first graph has at most one image; rows n1..n1+n2-1: a
    # node of the second graph has at most one preimage.
    grid = np.arange(n_x)
    rows = [grid // n2, n1 + grid % n2]
    cols = [grid, grid]
    vals = [np.ones(n_x), np.ones(n_x)]
    n_rows = n1 + n2
    # Then one row per (edge of one graph, u, v): the y's that send u to v along that edge
    # are at most x_uv (an edge moves with its end nodes).
    for owner in (y_e, y_f):
        keys, inverse = np.unique(owner * n_x + y_u * n2 + y_v, return_inverse=True)
        rows += [n_rows + inverse.ravel(), n_rows + np.arange(len(keys))]
        cols += [y_var, keys % n_x]
        vals += [np.ones(len(y_var)), -np.ones(len(keys))]
        n_rows += len(keys)
    ub = np.zeros(n_rows)
    ub[: n1 + n2] = 1.0
    matrix = csc_array(
        (np.concatenate(vals), (np.concatenate(rows), np.concatenate(cols))),
        shape=(n_rows, n_vars),
    )
    c = np.concatenate([c_x, c_y, [const]])
    return _Program(c, matrix, ub, n_x, n_vars)


def _variable_bounds(prog: _Program) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    lo = np.zeros(prog.n_vars)
    lo[-1] = 1.0  # the constant C0
    return lo, np.ones(prog.n_vars)


def _round_x(x: NDArray[np.float64], n1: int, n2: int) -> NDArray[np.intp]:
    """Node map that keeps the most of a (fractional) solution's x mass."""
    x = np.clip(x.reshape(n1, n2), 0.0, 1.0)
    return _assign(-x, -(1.0 - x.sum(axis=1)), -(1.0 - x.sum(axis=0)))


def _relaxation(
    prog: _Program,
    n1: int,
    n2: int,
    time_limit: float | None,
    stop_at: float | None = None,
) -> tuple[float, NDArray[np.intp] | None]:
    """Lower bound from the linear relaxation and a node map rounded from its solution.

    With ``stop_at``, HiGHS's dual simplex may stop as soon as its objective (a proven
    lower bound on the relaxation's optimum) reaches ``stop_at``: the bound returned is
    then ``stop_at`` and there is no node map. Otherwise the bound is the optimum.
    """
    from scipy.optimize import Bounds, LinearConstraint, linprog, milp

    lo, hi = _variable_bounds(prog)
    # Presolve costs more than it saves on these small programs (measured on QM9 pairs).
    options: dict[str, Any] = {"presolve": False}
    if time_limit is not None:
        options["time_limit"] = time_limit
    if prog.n_vars <= 1000:
        if stop_at is not None and math.isfinite(stop_at):
            # HiGHS option: "objective bound for termination of the dual simplex".
            options["objective_bound"] = stop_at
        # Small programs: HiGHS's simplex through milp without integer variables, whose
        # input checks cost less than linprog's (about 0.5 ms against 1.3 ms per call,
        # measured), which matters when the whole edit distance takes a few ms.
        with warnings.catch_warnings():
            # scipy passes options it does not know (objective_bound) on to HiGHS
            # verbatim, with a RuntimeWarning saying so.
            warnings.filterwarnings("ignore", "Unrecognized options", RuntimeWarning)
            res = milp(
                prog.c,
                bounds=Bounds(lo, hi),
                constraints=[LinearConstraint(prog.matrix, -np.inf, prog.ub)],
                options=options,
            )
        if "objective_bound" in options and "Bound on objective reached" in str(res.message):
            return float(stop_at), None
    else:
        # interior point is faster than the simplex on larger programs
        res = linprog(
            prog.c,
            A_ub=prog.matrix,
            b_ub=prog.ub,
            bounds=np.column_stack([lo, hi]),
            method="highs-ipm",
            options=options,
        )
    if res.status != 0 or res.x is None:
        return -math.inf, None
    return float(res.fun), _round_x(np.asarray(res.x[: prog.n_x]), n1, n2)


@dataclass(frozen=True)
class _MilpOutcome:
    image: NDArray[np.intp] | None  # a node map cheaper than the cutoff, or None
    lower: float  # proven lower bound on the edit distance (may be -inf)
    optimal: float  # objective of a solution proven optimal (gap 0), else nan


def _solve_milp(
    prog: _Program,
    n1: int,
    n2: int,
    costs: _Costs,
    upper: float,
    time_limit: float | None,
) -> _MilpOutcome:
    """Search for an edit path cheaper than ``upper`` with HiGHS.

    With a cost unit q the objective is capped at ``upper - q`` (only strictly better
    paths are sought; infeasibility proves ``upper`` optimal) and the relative gap
    tolerance is set so that the absolute gap at stop is below q. Without a unit the cap
    is ``upper`` and the gap tolerance is 0.
    """
    from scipy.optimize import Bounds, LinearConstraint, milp

    q = costs.unit
    cutoff = upper - q if q is not None else upper
    cutoff += 1e-7 * max(1.0, abs(upper))
    gap = 0.999 * q / max(1.0, upper) if q is not None else 0.0
    # Presolve and primal heuristics cost more than they save on these small programs
    # whose good solutions the local search has already found (measured on QM9 pairs).
    options: dict[str, Any] = {
        "disp": False,
        "mip_rel_gap": gap,
        "presolve": False,
        "mip_heuristic_effort": 0.0,
    }
    if time_limit is not None:
        options["time_limit"] = time_limit
    integrality = np.zeros(prog.n_vars)
    integrality[: prog.n_x] = 1
    lo, hi = _variable_bounds(prog)
    with warnings.catch_warnings():
        # scipy passes options it does not know (mip_heuristic_effort) on to HiGHS
        # verbatim, with a RuntimeWarning saying so.
        warnings.filterwarnings("ignore", "Unrecognized options", RuntimeWarning)
        res = milp(
            prog.c,
            integrality=integrality,
            bounds=Bounds(lo, hi),
            constraints=[
                LinearConstraint(prog.matrix, -np.inf, prog.ub),
                LinearConstraint(prog.c.reshape(1, -1), -np.inf, cutoff),
            ],
            options=options,
        )
    if res.status == 2:
        # No path cheaper than the cap: with a unit, `upper` is optimal.
        return _MilpOutcome(None, upper if q is not None else -math.inf, math.nan)
    image = None
    if res.x is not None:
        image = _round_x(np.asarray(res.x[: prog.n_x]), n1, n2)
    dual = getattr(res, "mip_dual_bound", None)
    lower = float(dual) if dual is not None and math.isfinite(float(dual)) else -math.inf
    optimal = math.nan
    if res.status == 0 and res.x is not None and q is None:
        optimal = float(res.fun)  # optimal with zero gap tolerance
    # Bounds of the capped program hold for the edit distance only below the cap.
    return _MilpOutcome(image, min(lower, upper), optimal)


# --------------------------------------------------------------------------- public API


def _mapping_dict(a: _Labeled, b: _Labeled, image: NDArray[np.intp]) -> dict:
    return {
        u: (b.nodes[int(image[i])] if int(image[i]) >= 0 else None)
        for i, u in enumerate(a.nodes)
    }


def _prepare(
    g1: Any,
    g2: Any,
    node_label: Hashable,
    edge_label: Hashable,
    cost_kwargs: dict[str, float],
) -> tuple[_Labeled, _Labeled, _Costs]:
    spec = _check_costs(**cost_kwargs)
    a = _labeled(g1, "g1", node_label, edge_label)
    b = _labeled(g2, "g2", node_label, edge_label)
    return a, b, _pair_costs(spec, a, b)


def edit_distance_bounds(
    g1: nx.Graph,
    g2: nx.Graph,
    *,
    node_label: Hashable = "label",
    edge_label: Hashable = "label",
    node_del_cost: CostSpec = 1.0,
    node_ins_cost: CostSpec = 1.0,
    node_sub_cost: CostSpec = 1.0,
    edge_del_cost: CostSpec = 1.0,
    edge_ins_cost: CostSpec = 1.0,
    edge_sub_cost: CostSpec = 1.0,
) -> tuple[float, float]:
    r"""Cheap lower and upper bounds on the graph edit distance.

    Parameters
    ----------
    g1, g2 : networkx.Graph
        Undirected simple graphs with a label on every node.
    node_label : hashable, default="label"
        Name of the node attribute holding the categorical node label.
    edge_label : hashable, default="label"
        Name of the edge attribute holding the categorical edge label; an edge without it
        has label ``None``.
    node_del_cost, node_ins_cost : float, mapping or callable, default=1.0
        Cost of deleting a node of ``g1`` and of inserting a node of ``g2``: one number
        for every label, a mapping from label to cost, or a callable ``f(label)``.
    node_sub_cost : float, mapping or callable, default=1.0
        Cost of substituting a node by one with a different label (equal labels cost 0):
        one number, a mapping from label pairs ``(a, b)`` to costs (``(b, a)`` is looked
        up when ``(a, b)`` is missing), or a callable ``f(a, b)``.
    edge_del_cost, edge_ins_cost, edge_sub_cost : float, mapping or callable, default=1.0
        The same for edges; an edge without the label attribute has label ``None``.

    Returns
    -------
    lower : float
        The larger of the label-multiset bound and the branch bound (node labels plus half
        of the incident edge-label multiset cost, optimally assigned).
    upper : float
        Cost of the edit path induced by the bipartite node assignment of Riesen & Bunke [1]_
        (node cost plus the full incident edge-label cost).

    Raises
    ------
    TypeError
        If a graph is not an undirected simple ``networkx.Graph``, a label is not hashable or
        a cost is not a number, a mapping or a callable (or gives no number).
    ValueError
        If a node has no label, a graph has a self-loop, a cost is negative or not finite,
        or a cost mapping has no entry for a label (pair) of the graphs.

    See Also
    --------
    edit_distance : exact value, with these bounds as a first step.

    Notes
    -----
    Both bounds cost one or two linear sum assignments of size
    :math:`(n_1 + n_2) \times (n_1 + n_2)`. The branch bound is described in [2]_. When all
    costs are integers, the lower bound is rounded up to an integer.

    References
    ----------
    .. [1] K. Riesen and H. Bunke, "Approximate graph edit distance computation by means of
       bipartite graph matching", Image and Vision Computing 27(7), 950-959, 2009.
    .. [2] D. B. Blumenthal and J. Gamper, "Improved lower bounds for graph edit distance",
       IEEE Transactions on Knowledge and Data Engineering 30(3), 503-516, 2018.

    Examples
    --------
    >>> import networkx as nx
    >>> g = nx.path_graph(3)
    >>> nx.set_node_attributes(g, "C", "label")
    >>> edit_distance_bounds(g, nx.Graph())
    (5.0, 5.0)
    """
    a, b, costs = _prepare(
        g1,
        g2,
        node_label,
        edge_label,
        dict(
            node_del_cost=node_del_cost,
            node_ins_cost=node_ins_cost,
            node_sub_cost=node_sub_cost,
            edge_del_cost=edge_del_cost,
            edge_ins_cost=edge_ins_cost,
            edge_sub_cost=edge_sub_cost,
        ),
    )
    lower, upper, _ = _bounds(a, b, costs)
    return float(lower), float(upper)


def edit_distance(
    g1: nx.Graph,
    g2: nx.Graph,
    *,
    node_label: Hashable = "label",
    edge_label: Hashable = "label",
    node_del_cost: CostSpec = 1.0,
    node_ins_cost: CostSpec = 1.0,
    node_sub_cost: CostSpec = 1.0,
    edge_del_cost: CostSpec = 1.0,
    edge_ins_cost: CostSpec = 1.0,
    edge_sub_cost: CostSpec = 1.0,
    time_limit: float | None = None,
) -> EditDistance:
    r"""Exact graph edit distance between two labeled graphs.

    The edit distance is the least total cost of node and edge deletions, insertions and
    label substitutions that turn ``g1`` into a graph label-isomorphic to ``g2``:

    .. math::
        \mathrm{GED}(G_1, G_2) = \min_{\varphi} \sum_{i} c_n(i, \varphi(i))
            + \sum_{e} c_e(e, \varphi(e)) + \text{insertions}

    where :math:`\varphi` is a partial injective map from the nodes of :math:`G_1` to those of
    :math:`G_2` (unmapped nodes are deleted), edges follow their end nodes, and a
    substitution costs 0 between equal labels.

    Parameters
    ----------
    g1, g2 : networkx.Graph
        Undirected simple graphs with a label on every node.
    node_label : hashable, default="label"
        Name of the node attribute holding the categorical node label.
    edge_label : hashable, default="label"
        Name of the edge attribute holding the categorical edge label; an edge without it
        has label ``None``.
    node_del_cost, node_ins_cost : float, mapping or callable, default=1.0
        Cost of deleting a node of ``g1`` and of inserting a node of ``g2``: one number
        for every label, a mapping from label to cost, or a callable ``f(label)``.
    node_sub_cost : float, mapping or callable, default=1.0
        Cost of substituting a node by one with a different label (equal labels cost 0):
        one number, a mapping from label pairs ``(a, b)`` to costs (``(b, a)`` is looked
        up when ``(a, b)`` is missing), or a callable ``f(a, b)``.
    edge_del_cost, edge_ins_cost, edge_sub_cost : float, mapping or callable, default=1.0
        The same for edges; an edge without the label attribute has label ``None``.
    time_limit : float or None, default=None
        Seconds for the search steps (local searches, linear relaxation, integer
        program), counted from the start of the call; the cheap steps before them (label
        isomorphism test, bounds) always run, and each search step stops within about one
        step of its own once the time is up. When time runs out the result has
        ``exact=False`` and brackets the distance with ``lower`` and ``upper``. None means
        no limit; the integer program may then take long on large unrelated graphs.

    Returns
    -------
    EditDistance
        ``value``, ``lower``, ``upper``, ``exact`` and the node ``mapping`` of the best edit
        path found (``value == upper`` is that path's cost).

    Raises
    ------
    TypeError
        If a graph is directed, a multigraph or not a ``networkx.Graph``, a label is not
        hashable, a cost is not a number, a mapping or a callable (or gives no number), or
        ``time_limit`` is not a number.
    ValueError
        If a node has no label, a graph has a self-loop, a cost is negative or not finite,
        a cost mapping has no entry for a label (pair) of the graphs, or ``time_limit`` is
        not positive.

    See Also
    --------
    edit_distance_bounds : the cheap bounds only.
    exact_match : label isomorphism test.

    Notes
    -----
    Steps, cheapest first; each stops as soon as the lower bound meets the cost of the
    best edit path found:

    1. Label isomorphism (count, degree and label checks, Weisfeiler-Lehman hash [4]_, then
       VF2 from networkx): distance 0.
    2. A lower bound (label multisets; branch bound of [3]_) and the upper bound of the
       bipartite node assignment of Riesen & Bunke [2]_ (see :func:`edit_distance_bounds`).
    3. Local search on node maps (best swap of two images, from the bipartite map) for a
       cheaper edit path. When the costs have a unit q (below) and no node has more than
       five edges, steps 2 and 3 are replaced by a Lagrangian bound of the program of
       step 4 (Lagrangian decomposition [5]_): the cost of every edge substitution is
       split between its two end-node pairs, each node pair matches its edges at those
       costs, and one linear sum assignment over the node pairs gives a lower bound for
       any split. Its first step is a bound of the branch kind; up to 60 subgradient
       steps with Polyak's step size [6]_ improve the split, and every assignment is an
       edit path whose cost (after a local search when it is within 2 q of the best)
       improves the upper bound. Its best value is the linear relaxation of step 4, so
       on most molecule pairs it proves the distance without a linear program.
    4. The linear relaxation of the binary linear program F2 of Lerouge et al. [1]_
       (HiGHS's dual simplex through ``scipy.optimize.milp``, or its interior point method
       through ``scipy.optimize.linprog`` for large programs): a lower bound, and a node
       map rounded from its solution as a start for the local search; then local search
       from a few seeded random maps. With a cost unit q the dual simplex stops as soon as
       its objective (a proven bound) reaches the best path's cost minus 0.9 q, which
       proves that path optimal.
    5. The binary linear program itself with ``scipy.optimize.milp`` (HiGHS), restricted
       to edit paths cheaper than the best one found. Edge variables exist only for edge
       pairs whose substitution is cheaper than deletion plus insertion, and are
       continuous: integral node variables force them to 0 or 1.

    Label-dependent costs (mappings or callables) are evaluated once per call for the
    labels present. The cheap lower bound then pairs labels by assignment problems
    instead of counting them, and edge substitution costs at most deletion plus
    insertion, label by label.

    When every cost is a whole multiple of one unit q (e.g. unit costs, or 0.25 and 1.5),
    every edit distance is a multiple of q, so lower bounds are rounded up to a multiple of
    q, and the integer program only has to rule out paths cheaper by q or more. Other costs
    (e.g. 0.1, which floats do not hold exactly) rely on HiGHS's optimality, up to its
    tolerances (about 1e-6).

    An edge substitution costs ``min(edge_sub_cost, edge_del_cost + edge_ins_cost)``, since
    an edit path may delete and re-insert an edge instead (networkx does the same).

    References
    ----------
    .. [1] J. Lerouge, Z. Abu-Aisheh, R. Raveaux, P. Héroux and S. Adam, "New binary linear
       programming formulation to compute the graph edit distance", Pattern Recognition 72,
       254-265, 2017.
    .. [2] K. Riesen and H. Bunke, "Approximate graph edit distance computation by means of
       bipartite graph matching", Image and Vision Computing 27(7), 950-959, 2009.
    .. [3] D. B. Blumenthal and J. Gamper, "Improved lower bounds for graph edit distance",
       IEEE Transactions on Knowledge and Data Engineering 30(3), 503-516, 2018.
    .. [4] N. Shervashidze, P. Schweitzer, E. J. van Leeuwen, K. Mehlhorn and
       K. M. Borgwardt, "Weisfeiler-Lehman graph kernels", Journal of Machine Learning
       Research 12, 2539-2561, 2011.
    .. [5] M. Guignard and S. Kim, "Lagrangean decomposition: a model yielding stronger
       Lagrangean bounds", Mathematical Programming 39, 215-228, 1987.
    .. [6] B. T. Polyak, "Minimization of unsmooth functionals", USSR Computational
       Mathematics and Mathematical Physics 9(3), 14-29, 1969.

    Examples
    --------
    >>> import networkx as nx
    >>> p, c = nx.path_graph(4), nx.cycle_graph(4)
    >>> nx.set_node_attributes(p, "C", "label")
    >>> nx.set_node_attributes(c, "C", "label")
    >>> r = edit_distance(p, c)
    >>> r.value, r.exact
    (1.0, True)
    """
    a, b, costs = _prepare(
        g1,
        g2,
        node_label,
        edge_label,
        dict(
            node_del_cost=node_del_cost,
            node_ins_cost=node_ins_cost,
            node_sub_cost=node_sub_cost,
            edge_del_cost=edge_del_cost,
            edge_ins_cost=edge_ins_cost,
            edge_sub_cost=edge_sub_cost,
        ),
    )
    time_limit = _check_time_limit(time_limit)
    t0 = time.perf_counter()

    deadline = None if time_limit is None else t0 + time_limit

    def remaining() -> float | None:
        return None if deadline is None else deadline - time.perf_counter()

    iso = _isomorphism(a, b)
    if iso is not None:
        image = np.array([iso[i] for i in range(len(a.nodes))], dtype=np.intp)
        return EditDistance(0.0, 0.0, 0.0, True, _mapping_dict(a, b, image))

    n1, n2 = len(a.nodes), len(b.nodes)
    # With a cost unit and small stars, the Lagrangian step replaces the cheap bounds: its
    # first step is a bound of the same kind, and it goes on from there.
    stars = _stars(a, b, costs) if costs.unit is not None else None
    path_cost = _PathCost(a, b, costs)
    if stars is None:
        lower, upper, image = _bounds(a, b, costs, path_cost)
    else:
        lower, upper, image = _round_lower(_label_bound(a, b, costs), costs, False), math.inf, None
    if stars is not None or not _closed(lower, upper):
        pad = _padded(a, b, costs)

        def consider(candidate: NDArray[np.intp] | None) -> None:
            nonlocal upper, image
            if candidate is None:
                return
            candidate = _local_search(pad, candidate, deadline=deadline)
            cost = path_cost(candidate)
            if cost < upper:
                upper, image = cost, candidate

        # Random starts of the local search, seeded so that results are reproducible.
        rng = np.random.default_rng(0)

        def restarts(count: int) -> None:
            for _ in range(count):
                left = remaining()
                if _closed(lower, upper) or (left is not None and left <= 0):
                    return
                start = rng.permutation(n1 + n2)[:n1]
                consider(np.where(start < n2, start, -1).astype(np.intp))

        if stars is not None:
            lower, upper, image, _ = _lagrangian(
                stars, pad, path_cost, costs, lower, upper, image, deadline
            )
        else:
            consider(image)
        restarts(_RESTARTS_FIRST)
        if not _closed(lower, upper):
            prog = _program(a, b, costs)
            left = remaining()
            lp_seconds = 0.0
            if left is None or left > 0:
                started = time.perf_counter()
                bound, candidate = _relaxation(prog, n1, n2, left, _stop_at(upper, costs))
                lp_seconds = time.perf_counter() - started
                lower = max(lower, _round_lower(bound, costs))
                consider(candidate)
            restarts(_RESTARTS_SECOND)
            left = remaining()
            if left is not None:
                # HiGHS checks its clock between the steps of the integer program, and its
                # first step re-solves the relaxation: keep 1.5 times the time of one
                # relaxation in reserve (overruns of up to 1.15 times it were measured on
                # 25-35-node graphs).
                left -= 1.5 * lp_seconds
            if not _closed(lower, upper) and (left is None or left > 0):
                outcome = _solve_milp(prog, n1, n2, costs, upper, left)
                if outcome.image is not None:
                    cost = path_cost(outcome.image)
                    if cost < upper:
                        upper, image = cost, outcome.image
                    # Without a cost unit, trust HiGHS's zero-gap optimum up to its
                    # feasibility tolerances when its path costs what it reported.
                    if cost <= outcome.optimal + 1e-6 * max(1.0, abs(outcome.optimal)):
                        lower = upper
                lower = max(lower, _round_lower(outcome.lower, costs))
    exact = _closed(lower, upper)
    lower = upper if exact else min(lower, upper)
    return EditDistance(
        value=float(upper),
        lower=float(lower),
        upper=float(upper),
        exact=bool(exact),
        mapping=_mapping_dict(a, b, image),
    )


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
    integer labels and missing edge labels work), and only then the VF2 isomorphism test.

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
    a = _labeled(g1, "g1", node_label, edge_label)
    b = _labeled(g2, "g2", node_label, edge_label)
    return _isomorphism(a, b) is not None


# --------------------------------------------------------------------------- summaries

# Cut-offs k of the top-k accuracy that summarize reports when ranked candidates are given.
_TOP_K = (1, 5, 10)


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


def _hit_rank(
    candidates: list[nx.Graph],
    gt: nx.Graph,
    index: int,
    node_label: Hashable,
    edge_label: Hashable,
) -> int | None:
    """1-based position of the first candidate label-isomorphic to ``gt``, or None."""
    b = _labeled(gt, f"true[{index}]", node_label, edge_label)
    for j, cand in enumerate(candidates):
        a = _labeled(cand, f"ranked[{index}][{j}]", node_label, edge_label)
        if _isomorphism(a, b) is not None:
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
) -> tuple[int, dict]:
    """All per-pair scores of :func:`summarize`, with the pair's index (for reordering)."""
    r = edit_distance(gp, gt, node_label=node_label, edge_label=edge_label, time_limit=time_limit)
    n_pred = gp.number_of_nodes()
    item: dict[str, Any] = {
        "ged": r.value,
        "exact": r.exact,
        "match": bool(r.exact and r.value == 0.0),
        "n_pred": n_pred,
        "n_true": gt.number_of_nodes(),
        "connected": bool(n_pred > 0 and nx.is_connected(gp)),
    }
    item.update(_mapping_scores(gp, gt, r.mapping, node_label, edge_label))
    if candidates is not None:
        item["hit_rank"] = _hit_rank(candidates, gt, index, node_label, edge_label)
    return index, item


def _check_n_jobs(n_jobs: Any) -> int:
    if isinstance(n_jobs, bool) or not isinstance(n_jobs, (int, np.integer)):
        raise TypeError(
            f"n_jobs must be an int, got {n_jobs!r} of type {type(n_jobs).__name__}; pass 1 "
            "for no parallelism or -1 for one worker per processor"
        )
    if n_jobs == 0:
        raise ValueError(
            "n_jobs must be a non-zero int (1 = no parallelism, k > 1 = k workers, -1 = one "
            "worker per processor), got 0"
        )
    return int(n_jobs)


def _check_ranked(ranked: Any, n: int) -> list[list[nx.Graph]]:
    """Validate ``ranked`` and keep the first ``max(_TOP_K)`` candidates of each list."""
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
        head = list(candidates[: max(_TOP_K)])
        for j, cand in enumerate(head):
            if not isinstance(cand, nx.Graph):
                raise TypeError(
                    f"ranked[{i}][{j}] must be a networkx.Graph, got {type(cand).__name__}"
                )
        out.append(head)
    return out


def _generator_mode() -> str | None:
    """The best ``return_as`` generator mode of the installed joblib, or None (joblib < 1.3)."""
    from joblib import Parallel

    for mode in ("generator_unordered", "generator"):
        try:
            Parallel(n_jobs=1, return_as=mode)
        except (TypeError, ValueError):
            continue
        return mode
    return None


def _score_all(tasks: list[tuple], n_jobs: int, bar: Any) -> list[dict]:
    """Run :func:`_score_pair` on every task; items in task order, ``bar`` ticks per pair."""
    items: list[dict] = [{} for _ in tasks]
    if n_jobs == 1:
        for task in tasks:
            index, item = _score_pair(*task)
            items[index] = item
            bar.update(1)
        return items

    from joblib import Parallel, delayed, effective_n_jobs

    mode = _generator_mode()
    if mode is not None:
        # Results arrive as pairs finish (in order with "generator"): tick per result.
        results = Parallel(n_jobs=n_jobs, return_as=mode)(
            delayed(_score_pair)(*task) for task in tasks
        )
        for index, item in results:
            items[index] = item
            bar.update(1)
        return items
    # Older joblib: batches of a few pairs per worker, the bar ticks per batch.
    size = 4 * effective_n_jobs(n_jobs)
    with Parallel(n_jobs=n_jobs) as parallel:
        for start in range(0, len(tasks), size):
            for index, item in parallel(
                delayed(_score_pair)(*task) for task in tasks[start : start + size]
            ):
                items[index] = item
                bar.update(1)
    return items


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
        Seconds per edit distance given to the integer program solver; see
        :func:`edit_distance`.
    progress : bool, default=False
        Show a progress bar on standard error, ticking as pairs are scored.
    n_jobs : int, default=1
        Worker processes (joblib) scoring pairs in parallel; 1 scores them in this process,
        -1 uses one worker per processor (joblib's convention for negative values).
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
        pair with ``ged``, ``exact``, ``match``, ``n_pred``, ``n_true``, ``connected``,
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
    exact_match : the label isomorphism test behind ``match`` and ``hit_rank``.

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

    With ``n_jobs != 1`` the pairs go to joblib workers (loky processes), so the graphs
    must be picklable, and the results are the same as with ``n_jobs=1`` because
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
    from tqdm.auto import tqdm

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
    n_jobs = _check_n_jobs(n_jobs)
    candidates: list[list[nx.Graph]] | list[None]
    if ranked is None:
        candidates = [None] * len(predicted)
    else:
        candidates = _check_ranked(ranked, len(predicted))
    tasks = [
        (i, gp, gt, cands, node_label, edge_label, time_limit)
        for i, (gp, gt, cands) in enumerate(zip(predicted, true, candidates))
    ]
    with tqdm(
        total=len(tasks), disable=not progress, file=sys.stderr, desc="edit distance"
    ) as bar:
        items = _score_all(tasks, n_jobs, bar)

    def mean(key: str) -> float:
        return float(np.mean([it[key] for it in items]))

    geds = np.array([it["ged"] for it in items], dtype=float)
    summary: dict[str, Any] = {
        "n": len(items),
        "mean_ged": float(np.mean(geds)),
        "median_ged": float(np.median(geds)),
        "exact_match_rate": mean("match"),
        "right_size_rate": float(np.mean([it["n_pred"] == it["n_true"] for it in items])),
        "connected_rate": mean("connected"),
        "exact_share": mean("exact"),
        "node_label_accuracy": mean("node_label_accuracy"),
        "edge_precision": mean("edge_precision"),
        "edge_recall": mean("edge_recall"),
        "edge_f1": mean("edge_f1"),
    }
    if ranked is not None:
        summary["top_k_accuracy"] = {
            k: float(np.mean([it["hit_rank"] is not None and it["hit_rank"] <= k for it in items]))
            for k in _TOP_K
        }
    summary["items"] = items
    return summary

"""Label isomorphism: the first, cheapest answer of the edit distance (distance 0)."""

from __future__ import annotations

from collections import Counter
from collections.abc import Hashable

import networkx as nx

from ._costs import Labeled

__all__ = ["isomorphism"]


def _token_graphs(a: Labeled, b: Labeled) -> tuple[nx.Graph, nx.Graph]:
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


def isomorphism(a: Labeled, b: Labeled) -> dict[int, int] | None:
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

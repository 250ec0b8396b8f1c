"""Edit paths of node maps: their cost, and a local search for cheaper ones.

- :class:`PathCost` prices the edit path induced by a node map (vectorised);
- :func:`padded` pads both graphs to ``n1 + n2`` nodes (:class:`Padded`) and
  :func:`local_search` improves a node map there by best-improvement swaps.
"""

from __future__ import annotations

import time
from dataclasses import dataclass
from functools import lru_cache

import numpy as np
from numpy.typing import NDArray

from ._costs import Costs, Labeled, node_sub_matrix

__all__ = ["MAX_SEARCH_NODES", "Padded", "PathCost", "local_search", "padded"]


# --------------------------------------------------------------------------- edit path cost


def _edge_table(costs: Costs) -> NDArray[np.float64]:
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


def _edge_codes(lab: Labeled, codes: NDArray[np.intp], size: int) -> NDArray[np.intp]:
    """(size, size) symmetric matrix of edge label codes + 1 (0: no edge)."""
    m = np.zeros((size, size), dtype=np.intp)
    if len(lab.edges):
        ends = np.asarray(lab.edges, dtype=np.intp)
        m[ends[:, 0], ends[:, 1]] = m[ends[:, 1], ends[:, 0]] = codes + 1
    return m


# Largest second graph (nodes) whose edges PathCost looks up in a dense (n2 + 1)**2 table
# (8 MB at 1000 nodes); larger graphs use sorted edge keys, O(m2) memory.
_DENSE_LOOKUP_NODES = 1000


class PathCost:
    """Cost of the edit path induced by a node map (image or -1 per node of the first graph).

    Vectorised: the tables hold costs relative to inserting every node and edge of the
    second graph, and index -1 reads their last row and column, which stand for
    "deleted". Built once per pair of graphs, then called for each map. Second graphs of
    more than ``_DENSE_LOOKUP_NODES`` nodes are read through the label tables and a
    sorted array of edge keys instead (memory O(n + m), each call O(m1 log m2)).
    """

    def __init__(self, a: Labeled, b: Labeled, costs: Costs) -> None:
        n1, n2 = len(a.nodes), len(b.nodes)
        self.dense = n2 <= _DENSE_LOOKUP_NODES
        if self.dense:
            self.node = np.empty((n1, n2 + 1))
            self.node[:, :n2] = costs.node_sub - costs.node_ins[None, :]
            self.node[:, n2] = costs.node_del
            self.codes2 = _edge_codes(b, costs.edge_b, n2 + 1)
        else:
            self.costs = costs
            eb = np.asarray(b.edges, dtype=np.intp).reshape(-1, 2)
            keys = eb[:, 0].astype(np.int64) * n2 + eb[:, 1]
            order = np.argsort(keys)
            self.keys2, self.hit2 = keys[order], costs.edge_b[order] + 1
            self.n2 = n2
        ea = np.asarray(a.edges, dtype=np.intp).reshape(-1, 2)
        self.end0, self.end1 = ea[:, 0], ea[:, 1]
        self.codes1 = costs.edge_a + 1
        table = _edge_table(costs)
        self.edge = table - table[0][None, :]  # an edge that is hit is not inserted
        self.rows = np.arange(n1)
        self.base = float(costs.node_ins.sum() + costs.edge_ins.sum())

    def __call__(self, image: NDArray[np.intp]) -> float:
        if self.dense:
            hit = self.codes2[image[self.end0], image[self.end1]]
            node = self.node[self.rows, image]
        else:
            c = self.costs
            kept = image >= 0
            to = c.node_b[image]  # masked below where image is -1
            node = np.where(
                kept, c.node_sub_t[c.node_a, to] - c.node_ins[image], c.node_del
            )
            p, q = image[self.end0], image[self.end1]
            keys = np.minimum(p, q).astype(np.int64) * self.n2 + np.maximum(p, q)
            at = np.minimum(np.searchsorted(self.keys2, keys), max(len(self.keys2) - 1, 0))
            found = (p >= 0) & (q >= 0)
            if len(self.keys2):
                found &= self.keys2[at] == keys
                hit = np.where(found, self.hit2[at], 0)
            else:
                hit = np.zeros(len(keys), dtype=np.intp)
        return float(self.base + node.sum() + self.edge[self.codes1, hit].sum())


# --------------------------------------------------------------------------- local search


@dataclass(frozen=True)
class Padded:
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


#: Largest padded size for the local search: its work per step grows as N**3.
MAX_SEARCH_NODES = 150


def padded(a: Labeled, b: Labeled, costs: Costs) -> Padded:
    n1, n2 = len(a.nodes), len(b.nodes)
    big_n = n1 + n2
    node_cost = np.zeros((big_n, big_n))
    node_cost[:n1, :n2] = node_sub_matrix(a, b, costs)
    node_cost[:n1, n2:] = costs.node_del[:, None]
    node_cost[n1:, :n2] = costs.node_ins[None, :]
    return Padded(
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


def local_search(
    pad: Padded | None,
    image: NDArray[np.intp],
    max_steps: int = 200,
    deadline: float | None = None,
) -> NDArray[np.intp]:
    """Improve a node map by best-improvement swaps of two images until none helps.

    The change of cost of every swap (a, b) is computed at once from
    ``q[i, x, c]``, the cost of the edge slot (i, x) when x is sent to c and i stays.
    With a ``deadline`` (a ``time.perf_counter()`` value) the search stops after the
    step during which it passes, keeping the best map found so far. Without ``pad``
    (graphs too large for it, see ``MAX_SEARCH_NODES``) the map is returned unchanged.
    """
    if pad is None:
        return image
    big_n = pad.n1 + pad.n2
    if big_n < 2 or big_n > MAX_SEARCH_NODES:
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

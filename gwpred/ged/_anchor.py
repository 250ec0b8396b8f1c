"""A node map for large graphs, grown from anchors along edges (no n1 x n2 matrix).

:func:`anchored_map` pairs nodes of equal colour (see :mod:`._colors`): first the nodes
whose finest colour is unique in both graphs (anchors), then, best first, the unpaired
neighbours of paired nodes (a pair of neighbours gets one vote per paired pair of
neighbours it has in common, ties broken by the finest colour they share; pairs of
different labels may be allowed at a small handicap), and, when that runs dry, the next
pair of equal colour, finest colours first. Its time and memory grow with the number of
edges, not with n1 * n2; it is a heuristic whose edit path is an upper bound.
"""

from __future__ import annotations

import heapq
import time
from collections.abc import Iterator

import numpy as np
from numpy.typing import NDArray

from ._costs import Labeled

__all__ = ["anchored_map", "pair_within"]

# Neighbours of each side read when a pair is made: bounds the work per pair on dense
# graphs (a pair of nodes of degree d costs at most this squared).
_FANOUT = 48
# Heap steps and votes between two looks at the clock.
_CLOCK_EVERY = 2048


def _neighbours(lab: Labeled) -> tuple[list[int], list[int]]:
    """Neighbour lists in compressed form: those of node i are ``nbr[ptr[i]:ptr[i + 1]]``.

    Two flat lists rather than one list per node: on graphs of 10**5 nodes, allocating
    that many small lists triggers Python's cyclic garbage collector over every object
    alive (the networkx graphs included), which took longer than the search itself.
    """
    ends = np.asarray(lab.edges, dtype=np.intp).reshape(-1, 2)
    src = np.concatenate([ends[:, 0], ends[:, 1]])
    dst = np.concatenate([ends[:, 1], ends[:, 0]])
    order = np.argsort(src, kind="stable")
    ptr = np.zeros(len(lab.nodes) + 1, dtype=np.intp)
    np.cumsum(np.bincount(src, minlength=len(lab.nodes)), out=ptr[1:])
    return ptr.tolist(), dst[order].tolist()


def pair_within(
    image: NDArray[np.intp], colour_a: NDArray[np.intp], colour_b: NDArray[np.intp]
) -> NDArray[np.intp]:
    """Pair the unpaired nodes of equal colour, in index order (vectorised).

    ``image[i]`` is the partner of node i of the first graph or -1; a node of the second
    graph is paired when it is some ``image[i]``. Returns the completed image.
    """
    image = image.copy()
    n2 = len(colour_b)
    used = np.zeros(n2, dtype=bool)
    used[image[image >= 0]] = True
    free_a = np.flatnonzero(image < 0)
    free_b = np.flatnonzero(~used)
    if not len(free_a) or not len(free_b):
        return image
    ka, kb = colour_a[free_a], colour_b[free_b]
    free_a, ka = free_a[np.argsort(ka, kind="stable")], np.sort(ka, kind="stable")
    free_b, kb = free_b[np.argsort(kb, kind="stable")], np.sort(kb, kind="stable")
    # rank of each node inside its colour class
    rank_a = np.arange(len(ka)) - np.searchsorted(ka, ka, side="left")
    first_b = np.searchsorted(kb, ka, side="left")
    count_b = np.searchsorted(kb, ka, side="right") - first_b
    ok = rank_a < count_b
    image[free_a[ok]] = free_b[first_b[ok] + rank_a[ok]]
    return image


def anchored_map(
    a: Labeled,
    b: Labeled,
    colours: list[NDArray[np.intp]],
    deadline: float | None = None,
    swap: NDArray[np.bool_] | None = None,
) -> NDArray[np.intp]:
    """Node map pairing nodes of equal colour, grown from anchors along the edges.

    Parameters
    ----------
    a, b : Labeled
        The two graphs.
    colours : list of arrays of shape (n1 + n2,)
        Colours after each round of refinement (:func:`._colors.refine`), nodes of ``a``
        first; ``colours[0]`` are the labels (0..L-1).
    deadline : float or None
        A ``time.perf_counter()`` value; once it passes, the remaining nodes are paired
        within their ``colours[0]`` class in index order.
    swap : bool array of shape (L, L) or None
        ``swap[x, y]``: a node labeled x may be paired with one labeled y while growing
        the map, ranked half a vote below a pair of equal labels with as many votes (a
        substitution weighs against the edges it keeps). None: equal labels only.

    Returns
    -------
    image : array of shape (n1,)
        Partner of each node of ``a`` in ``b``, or -1 (left unpaired).
    """
    n1, n2 = len(a.nodes), len(b.nodes)
    levels = len(colours)
    col_a = [c[:n1].tolist() for c in colours]
    col_b = [c[n1:].tolist() for c in colours]
    lab_a, lab_b = col_a[0], col_b[0]
    ok = None if swap is None else swap.tolist()
    ptr_a, nbr_a = _neighbours(a)
    ptr_b, nbr_b = _neighbours(b)
    image = [-1] * n1
    pre = [-1] * n2
    votes: dict[int, int] = {}
    heap: list[tuple[int, int, int, int]] = []

    def shared(j: int, k: int) -> int:
        """Finest round at which j and k have the same colour."""
        t = levels - 1
        while t > 0 and col_a[t][j] != col_b[t][k]:
            t -= 1
        return t

    def pair(i: int, k: int) -> None:
        image[i], pre[k] = k, i
        spread(i, k)

    work = [0]  # votes cast, for the clock

    def spread(i: int, k: int) -> None:
        """Vote for the pairs of unpaired neighbours of i and k that may be paired."""
        start = ptr_b[k]
        free_b = [l for l in nbr_b[start : min(ptr_b[k + 1], start + _FANOUT)] if pre[l] < 0]
        if not free_b:
            return
        start = ptr_a[i]
        work[0] += len(free_b) * min(ptr_a[i + 1] - start, _FANOUT)
        for j in nbr_a[start : min(ptr_a[i + 1], start + _FANOUT)]:
            if image[j] >= 0:
                continue
            lj = lab_a[j]
            for l in free_b:
                lk = lab_b[l]
                if lk == lj:
                    penalty = 0
                elif ok is not None and ok[lj][lk]:
                    penalty = 1
                else:
                    continue
                key = j * n2 + l
                v = votes.get(key, 0) + 1
                votes[key] = v
                depth = 1 if penalty else -shared(j, l)
                heapq.heappush(heap, (penalty - 2 * v, depth, j, l))

    def seeds() -> Iterator[tuple[int, int]]:
        """Pairs of equal colour, finest round first, smallest classes first."""
        for t in reversed(range(levels)):
            ca, cb = colours[t][:n1], colours[t][n1:]
            k = int(colours[t].max(initial=-1)) + 1
            count_a, count_b = np.bincount(ca, minlength=k), np.bincount(cb, minlength=k)
            both = np.flatnonzero((count_a > 0) & (count_b > 0))
            if not len(both):
                continue
            both = both[np.argsort(np.maximum(count_a, count_b)[both], kind="stable")]
            order_a, order_b = np.argsort(ca, kind="stable"), np.argsort(cb, kind="stable")
            start_a = np.concatenate([[0], np.cumsum(count_a)])
            start_b = np.concatenate([[0], np.cumsum(count_b)])
            for c in both.tolist():
                members_b = order_b[start_b[c] : start_b[c + 1]].tolist()
                at = 0
                for i in order_a[start_a[c] : start_a[c + 1]].tolist():
                    if image[i] >= 0:
                        continue
                    while at < len(members_b) and pre[members_b[at]] >= 0:
                        at += 1
                    if at == len(members_b):
                        break
                    yield i, members_b[at]

    # Anchors: classes of one node in each graph at the finest round.
    top = colours[-1]
    k_top = int(top.max(initial=-1)) + 1
    count_a = np.bincount(top[:n1], minlength=k_top)
    count_b = np.bincount(top[n1:], minlength=k_top)
    unique = (count_a == 1) & (count_b == 1)
    at_b = np.full(k_top, -1, dtype=np.intp)
    at_b[top[n1:]] = np.arange(n2)
    anchors = np.flatnonzero(unique[top[:n1]])
    anchored = list(zip(anchors.tolist(), at_b[top[:n1][anchors]].tolist()))
    for i, k in anchored:
        image[i], pre[k] = k, i
    for i, k in anchored:
        spread(i, k)

    pending = seeds()
    timed_out = False
    next_look = 0
    while True:
        work[0] += 1
        if deadline is not None and work[0] >= next_look:
            next_look = work[0] + _CLOCK_EVERY
            if time.perf_counter() > deadline:
                timed_out = True
                break
        if heap:
            score, _, j, l = heapq.heappop(heap)
            if image[j] < 0 and pre[l] < 0:
                v = votes.get(j * n2 + l, 0)
                if score in (-2 * v, 1 - 2 * v):  # else a stale entry
                    pair(j, l)
            continue
        nxt = next(pending, None)  # the growth ran dry: the next pair of equal colour
        if nxt is None:
            break
        pair(*nxt)
    out = np.asarray(image, dtype=np.intp)
    if timed_out:
        out = pair_within(out, colours[0][:n1], colours[0][n1:])
    return out

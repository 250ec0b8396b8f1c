"""Joint colour refinement (one-dimensional Weisfeiler-Leman) of two labeled graphs.

:func:`refine` colours the nodes of both graphs in one code space, round by round: a
node's new colour stands for its old colour and the multiset of (edge label, colour) of
its neighbours. Colours are invariant under label isomorphism, so an isomorphism maps
every node onto one of the same colour (the large-graph isomorphism test and the anchored
node map of large graphs read them). Vectorised: one round costs a sort of the nodes and
a pass over the edges, O((n + m) log(n + m)).
"""

from __future__ import annotations

import time
from collections.abc import Sequence

import numpy as np
from numpy.typing import NDArray

from ._costs import Labeled

__all__ = ["edge_array", "refine"]

# splitmix64 constants (Steele, Lea and Flood, "Fast splittable pseudorandom number
# generators", OOPSLA 2014): a bijective 64-bit mixer for the multiset hash.
_M1 = np.uint64(0xBF58476D1CE4E5B9)
_M2 = np.uint64(0x94D049BB133111EB)


def _mix(x: NDArray[np.uint64]) -> NDArray[np.uint64]:
    """splitmix64 finaliser, elementwise (wraps modulo 2**64)."""
    x = x ^ (x >> np.uint64(30))
    x = x * _M1
    x = x ^ (x >> np.uint64(27))
    x = x * _M2
    return x ^ (x >> np.uint64(31))


def edge_array(lab: Labeled) -> NDArray[np.intp]:
    """(m, 2) end nodes of the edges of ``lab`` (i < j)."""
    return np.asarray(lab.edges, dtype=np.intp).reshape(-1, 2)


def refine(
    a: Labeled,
    b: Labeled,
    node_codes: Sequence[NDArray[np.intp]],
    edge_codes: Sequence[NDArray[np.intp]],
    rounds: int | None = None,
    deadline: float | None = None,
) -> tuple[list[NDArray[np.intp]], bool]:
    """Colours of the nodes of both graphs after each round of refinement.

    Parameters
    ----------
    a, b : Labeled
        The two graphs.
    node_codes : pair of arrays, shapes (n1,) and (n2,)
        Node label codes, one code space for both graphs.
    edge_codes : pair of arrays, shapes (m1,) and (m2,)
        Edge label codes, one code space for both graphs.
    rounds : int or None
        Most rounds to run; None runs until a round splits no colour class.
    deadline : float or None
        A ``time.perf_counter()`` value after which no new round starts.

    Returns
    -------
    colours : list of arrays, each of shape (n1 + n2,)
        ``colours[t]`` holds the colours after t rounds (``colours[0]``: the label codes
        made compact), nodes of ``a`` first, then those of ``b``; colours are 0..K-1.
    stable : bool
        True when the last round split no class (further rounds change nothing).

    Notes
    -----
    The neighbour multiset is hashed (sum of splitmix64 values, modulo 2**64). A hash
    collision can only merge classes that should have been split, the same way in both
    graphs, so colours stay isomorphism-invariant: graphs whose colour counts differ are
    never label-isomorphic.
    """
    n1, n2 = len(a.nodes), len(b.nodes)
    n = n1 + n2
    ends = np.concatenate([edge_array(a), edge_array(b) + n1])
    codes = np.concatenate([np.asarray(edge_codes[0]), np.asarray(edge_codes[1])])
    # directed edges, grouped by source node
    src = np.concatenate([ends[:, 0], ends[:, 1]])
    dst = np.concatenate([ends[:, 1], ends[:, 0]])
    code = np.concatenate([codes, codes]).astype(np.uint64) + np.uint64(1)
    order = np.argsort(src, kind="stable")
    src, dst, code = src[order], dst[order], code[order]
    degree = np.bincount(src, minlength=n)
    has = degree > 0
    starts = (np.cumsum(degree) - degree)[has]
    n_codes = np.uint64(int(code.max()) + 1 if len(code) else 1)

    labels = np.concatenate([np.asarray(node_codes[0]), np.asarray(node_codes[1])])
    colour = np.unique(labels, return_inverse=True)[1].astype(np.intp).ravel()
    out = [colour]
    stable = False
    k = int(colour.max()) + 1 if n else 0
    while rounds is None or len(out) <= rounds:
        if deadline is not None and time.perf_counter() > deadline:
            break
        sums = np.zeros(n, dtype=np.uint64)
        if len(src):
            keys = _mix(colour[dst].astype(np.uint64) * n_codes + code)
            sums[has] = np.add.reduceat(keys, starts)
        by = np.lexsort((sums, colour))
        new_class = np.ones(n, dtype=bool)
        new_class[1:] = (colour[by][1:] != colour[by][:-1]) | (sums[by][1:] != sums[by][:-1])
        nxt = np.empty(n, dtype=np.intp)
        nxt[by] = np.cumsum(new_class) - 1
        k_new = int(nxt.max()) + 1 if n else 0
        if k_new == k:
            stable = True
            break
        colour, k = nxt, k_new
        out.append(colour)
    return out, stable

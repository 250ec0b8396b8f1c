"""The Lagrangian lower bound of the binary program F2, by star problems per node pair.

:func:`star_decomposition` splits the program into node-pair star problems
(:class:`Stars`); :func:`lagrangian` improves the split by subgradient ascent and turns
every assignment it meets into an edit path.
"""

from __future__ import annotations

import itertools
import math
import time
from dataclasses import dataclass
from functools import lru_cache

import numpy as np
from numpy.typing import NDArray
from scipy.optimize import linear_sum_assignment

from ._bounds import closed, round_lower
from ._costs import Costs, Labeled, delete_all, edge_saving, node_saving
from ._search import Padded, PathCost, local_search

__all__ = ["Stars", "lagrangian", "star_decomposition"]


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
class Stars:
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


def _edge_slots(lab: Labeled) -> NDArray[np.intp]:
    """(m, 2): position of edge e among the edges of its first and second end node."""
    pos = np.zeros((len(lab.edges), 2), dtype=np.intp)
    for v, inc in enumerate(lab.incident):
        for p, e in enumerate(inc):
            pos[e, 0 if lab.edges[e][0] == v else 1] = p
    return pos


def star_decomposition(a: Labeled, b: Labeled, costs: Costs) -> Stars | None:
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
    saving = edge_saving(costs)
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
    const = delete_all(costs)
    node = node_saving(costs)
    return Stars(
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


def lagrangian(
    stars: Stars,
    pad: Padded,
    path_cost: PathCost,
    costs: Costs,
    lower: float,
    upper: float,
    image: NDArray[np.intp] | None,
    deadline: float | None = None,
) -> tuple[float, float, NDArray[np.intp] | None, int]:
    r"""Lagrangian lower bound of F2 by subgradient ascent, with node maps as a by-product.

    For any split :math:`\alpha` of the edge-variable costs between their two end-node
    pairs (see :class:`Stars`), an edit path that sends node i to node k pays for the
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
    n1, n2, deg = stars.n1, stars.n2, stars.degree
    q = costs.unit
    if q is None:  # pragma: no cover - the caller only uses it with a cost unit
        raise ValueError("the Lagrangian bound needs a cost unit")
    flat, member = _star_permutations(deg)
    block = deg * deg
    big_n = n1 + n2
    c = np.full((big_n, big_n), np.inf)  # padded assignment, as in _bounds.assign
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
        lower = max(lower, round_lower(value, costs))
        if math.isfinite(upper) and closed(lower, upper):
            break
        head = col[:n1]
        assign = np.where(head < n2, head, -1).astype(np.intp)
        key = assign.tobytes()
        if key not in seen:
            seen.add(key)
            candidate, cost = assign, path_cost(assign)
            if cost <= upper + _LAGRANGE_SEARCH_MARGIN * q:
                candidate = local_search(pad, assign, deadline=deadline)
                cost = path_cost(candidate)
            if cost < upper:
                upper, image = cost, candidate
                if closed(lower, upper):
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

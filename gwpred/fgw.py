r"""Fused Gromov-Wasserstein (FGW) distance and barycenters on plain arrays.

The FGW discrepancy between two attributed graphs :math:`(C_1, F_1, p)` and
:math:`(C_2, F_2, q)` with square loss is

.. math::

    \mathrm{FGW}_\alpha = \min_{T \in \Pi(p, q)}
        (1 - \alpha) \sum_{ij} M_{ij} T_{ij}
        + \alpha \sum_{ijkl} (C_{1,ik} - C_{2,jl})^2 T_{ij} T_{kl}

where :math:`M_{ij} = \lVert F_{1,i} - F_{2,j} \rVert^2` and :math:`\Pi(p, q)` is
the set of couplings with marginals ``p`` and ``q`` [1]_.  It is solved by a
conditional gradient (Frank-Wolfe) method with an exact line search; each
linearised step is an exact optimal-transport linear program.

A barycenter of ``S`` graphs with weights :math:`\lambda_s` minimises
:math:`\sum_s \lambda_s \mathrm{FGW}_\alpha(C, F; C_s, F_s)` over the structure
:math:`C` and features :math:`F` of a graph of fixed size and node masses; with
the square loss both updates have a closed form given the plans [2]_.

Everything here is pure numpy: no labels, no networkx.  Variable graph sizes
are handled by padding with zero-mass nodes, which carry no transport.

References
----------
.. [1] T. Vayer, L. Chapel, R. Flamary, R. Tavenard, N. Courty, "Optimal
   transport for structured data with application on graphs", ICML 2019.
.. [2] T. Vayer, L. Chapel, R. Flamary, R. Tavenard, N. Courty, "Fused
   Gromov-Wasserstein distance for structured objects", Algorithms 13(9), 2020.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import ot
from scipy.optimize import linear_sum_assignment
from numpy.typing import ArrayLike, NDArray

__all__ = [
    "FGWResult",
    "BarycenterResult",
    "BatchResult",
    "fgw_barycenter_batch",
    "fgw_distance",
    "fgw_barycenter",
    "fgw_to_many",
    "feature_costs",
    "pad_graphs",
    "transport_average",
]

Array = NDArray[np.float64]

#: Solvers of the barycenters' transport steps (see ``fgw_barycenter``).
TRANSPORTS = ("assignment", "simplex")

try:  # the C network simplex behind ``ot.emd``, without its per-call overhead
    from ot.lp.emd_wrap import emd_c as _emd_c

    _emd_c(np.ones(1), np.ones(1), np.zeros((1, 1)), 10, 1, None, None)
except Exception:  # pragma: no cover - depends on the POT version
    _emd_c = None


def _emd(a: Array, b: Array, M: Array, max_iter: int = 100_000) -> Array:
    """Exact optimal transport plan between histograms ``a`` and ``b``."""
    M = np.ascontiguousarray(M)
    b = b * a.sum() / b.sum()  # exact mass balance, rounded as ot.emd does
    if _emd_c is not None:
        return _emd_c(a, b, M, max_iter, 1, None, None)[0]
    return ot.emd(a, b, M, numItermax=max_iter)  # pragma: no cover


def _emd_plan(a: Array, b: Array, M: Array, max_iter: int, *_: object) -> tuple[Array]:  # pragma: no cover
    """``ot.emd`` shaped like ``emd_c``'s result (POT versions without ``emd_c``)."""
    return (_emd(a, b, M, max_iter),)


def feature_costs(F1: ArrayLike, F2: ArrayLike) -> Array:
    """Squared Euclidean costs between node features.

    Parameters
    ----------
    F1 : array-like of shape (..., n, d)
    F2 : array-like of shape (..., m, d)

    Returns
    -------
    M : ndarray of shape (..., n, m)
        ``M[..., i, j] = ||F1[..., i, :] - F2[..., j, :]||^2``, clipped at 0.

    Examples
    --------
    >>> feature_costs([[0.0, 1.0]], [[0.0, 1.0], [1.0, 0.0]])
    array([[0., 2.]])
    """
    F1 = np.asarray(F1, dtype=np.float64)
    F2 = np.asarray(F2, dtype=np.float64)
    if F1.ndim < 2 or F2.ndim < 2 or F1.shape[-1] != F2.shape[-1]:
        raise ValueError(
            f"F1 and F2 must be (..., n, d) arrays with the same d; got shapes {F1.shape} and {F2.shape}."
        )
    n1 = (F1 * F1).sum(-1)[..., :, None]
    n2 = (F2 * F2).sum(-1)[..., None, :]
    M = n1 + n2 - 2.0 * F1 @ np.swapaxes(F2, -1, -2)
    return np.maximum(M, 0.0)


@dataclass(frozen=True)
class FGWResult:
    """Outcome of :func:`fgw_distance`.

    Attributes
    ----------
    value : float
        FGW objective at the returned plan.
    plan : ndarray of shape (n, m)
        Transport plan with marginals ``p`` and ``q``.
    n_iter : int
        Conditional-gradient iterations performed.
    converged : bool
        Whether a tolerance was met before ``max_iter``.
    """

    value: float
    plan: Array
    n_iter: int
    converged: bool


def _check_plans(T: Array, h: Array, qs: Array, name: str) -> None:
    """Refuse starting plans that are not couplings of ``h`` and ``qs``."""
    if not np.all(np.isfinite(T)) or np.any(T < -1e-12):
        raise ValueError(f"{name} must be finite and non-negative.")
    if not (np.allclose(T.sum(2), h[None], atol=1e-8) and np.allclose(T.sum(1), qs, atol=1e-8)):
        raise ValueError(
            f"{name} must be a coupling: rows must sum to the first graph's masses and columns to "
            "the second's (for example np.outer(p, q))."
        )


def _check_masses(masses: ArrayLike, size: int, name: str) -> Array:
    """Node masses: one per node, non-negative, summing to one."""
    h = np.asarray(masses, dtype=np.float64).ravel()
    if h.shape != (size,) or not np.all(np.isfinite(h)) or np.any(h < 0) or not np.isclose(h.sum(), 1.0):
        raise ValueError(
            f"{name} must hold {size} non-negative masses summing to 1; got {np.round(h, 4).tolist()}."
        )
    return h


def _check_pair(M, C1, C2, p, q) -> tuple[Array, Array, Array, Array, Array]:
    M = np.asarray(M, dtype=np.float64)
    C1 = np.asarray(C1, dtype=np.float64)
    C2 = np.asarray(C2, dtype=np.float64)
    if C1.ndim != 2 or C2.ndim != 2:
        raise ValueError(f"C1 and C2 must be square matrices; got shapes {C1.shape} and {C2.shape}.")
    n, m = C1.shape[0], C2.shape[0]
    p = np.full(n, 1.0 / n) if p is None else np.asarray(p, dtype=np.float64)
    q = np.full(m, 1.0 / m) if q is None else np.asarray(q, dtype=np.float64)
    if C1.shape != (n, n) or C2.shape != (m, m):
        raise ValueError(
            f"C1 and C2 must be square; got shapes {C1.shape} and {C2.shape}."
        )
    if M.shape != (n, m):
        raise ValueError(f"M must have shape {(n, m)} (len(C1), len(C2)); got {M.shape}.")
    if p.shape != (n,) or q.shape != (m,):
        raise ValueError(
            f"p and q must have shapes {(n,)} and {(m,)}; got {p.shape} and {q.shape}."
        )
    for name, arr in (("M", M), ("C1", C1), ("C2", C2), ("p", p), ("q", q)):
        if not np.all(np.isfinite(arr)):
            raise ValueError(f"{name} contains NaN or infinite values; clean the input first.")
    if np.any(p < 0) or np.any(q < 0) or not np.isclose(p.sum(), q.sum(), rtol=1e-9):
        raise ValueError(
            f"p and q must be non-negative with equal sums; got sums {p.sum()} and {q.sum()}."
        )
    return M, C1, C2, p, q


def fgw_distance(
    M: ArrayLike,
    C1: ArrayLike,
    C2: ArrayLike,
    p: ArrayLike | None = None,
    q: ArrayLike | None = None,
    *,
    alpha: float = 0.5,
    init_plan: ArrayLike | None = None,
    max_iter: int = 10_000,
    tol_rel: float = 1e-9,
    tol_abs: float = 1e-9,
) -> FGWResult:
    r"""FGW discrepancy and plan between two graphs (square loss).

    Parameters
    ----------
    M : array-like of shape (n, m)
        Feature cost between the nodes of graph 1 and graph 2.
    C1 : array-like of shape (n, n)
        Symmetric structure matrix of graph 1.
    C2 : array-like of shape (m, m)
        Symmetric structure matrix of graph 2.
    p, q : array-like of shape (n,) and (m,), default=uniform
        Node masses (equal total mass).
    alpha : float, default=0.5
        Trade-off in ``[0, 1]``: 0 is pure feature transport (Wasserstein),
        1 is pure structure (Gromov-Wasserstein).
    init_plan : array-like of shape (n, m), default=None
        Starting coupling (a warm start). ``None`` starts from the product
        coupling ``p q^T``.
    max_iter : int, default=10000
        Conditional-gradient iteration limit (POT's default).
    tol_rel, tol_abs : float, default=1e-9
        Stop when the objective changes by less than ``tol_rel`` relative to
        its value, or by less than ``tol_abs``.

    Returns
    -------
    FGWResult
        ``value``, ``plan``, ``n_iter`` and ``converged``.

    Raises
    ------
    ValueError
        On mismatched shapes, non-finite values, masses that do not balance or
        ``alpha`` outside ``[0, 1]``.

    Notes
    -----
    The problem is non-convex for ``alpha > 0``; the method finds a
    stationary point that depends on ``init_plan``. Each iteration solves
    one exact transport problem (Algorithm 2 of [1]_), then takes the exact
    minimiser of the quadratic objective along the segment to its solution.

    References
    ----------
    .. [1] T. Vayer et al., "Optimal transport for structured data with
       application on graphs", ICML 2019.

    Examples
    --------
    >>> import numpy as np
    >>> C = np.array([[0.0, 1.0], [1.0, 0.0]])
    >>> res = fgw_distance(np.zeros((2, 2)), C, C, alpha=0.5)
    >>> round(res.value, 6)
    0.0
    """
    M, C1, C2, p, q = _check_pair(M, C1, C2, p, q)
    if not 0.0 <= alpha <= 1.0:
        raise ValueError(f"alpha must lie in [0, 1]; got {alpha}.")
    G = np.outer(p, q) if init_plan is None else np.array(init_plan, dtype=np.float64)
    if G.shape != M.shape:
        raise ValueError(f"init_plan must have shape {M.shape}; got {G.shape}.")
    _check_plans(G[None], p, q[None], "init_plan")
    plans, values, iters, conv = _cg_batch(
        M[None], C1, C2[None], p, q[None], G[None], alpha, max_iter, tol_rel, tol_abs
    )
    return FGWResult(float(values[0]), plans[0], int(iters[0]), bool(conv[0]))


def _cg_batch(
    M: Array,
    C1: Array,
    C2: Array,
    p: Array,
    q: Array,
    G: Array,
    alpha: float,
    max_iter: int,
    tol_rel: float,
    tol_abs: float,
    sizes: NDArray[np.int64] | None = None,
    transport: str = "simplex",
) -> tuple[Array, Array, NDArray[np.int64], NDArray[np.bool_]]:
    r"""Conditional gradient for S FGW problems sharing the first graph.

    Shapes: ``M (S, n, m)``, ``C1 (n, n)`` shared or ``(S, n, n)`` one per
    problem, ``C2 (S, m, m)``, ``p (n,)``, ``q (S, m)``, ``G (S, n, m)``; graph
    ``s`` uses its first ``sizes[s]`` columns (the rest have zero mass); ``transport``
    as in :func:`fgw_barycenter`.
    Returns plans, objective values, iteration counts and convergence flags.

    With :math:`L(G) = c - 2 C_1 G C_2` (``c`` the marginal term of the square
    loss, Peyre et al. 2016, Prop. 1) the objective is
    :math:`(1-\alpha)\langle M, G\rangle + \alpha \langle L(G), G\rangle` and its
    gradient :math:`(1-\alpha) M + 2 \alpha L(G)`.
    """
    S, n, m = M.shape
    if sizes is None:
        sizes = np.full(S, m, dtype=np.int64)
    G = G.copy()
    # marginal term of the square loss, computed as POT's init_matrix does so
    # that the linear programs see the same numbers and break ties alike
    stacked = C1.ndim == 3  # one first graph per problem (barycenters of several queries)
    row = ((C1 * C1) @ p)[..., :, None]
    constC = (row if stacked else row[None]) + np.matmul(q[:, None, :], np.swapaxes(C2 * C2, 1, 2))
    linM = (1.0 - alpha) * M
    twoC2 = 2.0 * C2
    CGC = C1 @ G @ twoC2
    cost = (linM * G).sum((1, 2)) + alpha * ((constC - CGC) * G).sum((1, 2))
    n_iter = np.zeros(S, dtype=np.int64)
    done = np.zeros(S, dtype=bool)
    active = np.arange(S)
    target = np.zeros((S, n, m))
    # second marginals balanced once, rounded as ot.emd does
    ks = sizes.tolist()
    qs_bal: list[Array] = [q[0, :0]] * S
    total = p.sum()
    for k in set(ks):  # rows of one size at once: the same sums as row by row
        rows = np.flatnonzero(sizes == k)
        block = q[rows, :k]
        block = block * total / block.sum(1)[:, None]
        for j, s in enumerate(rows.tolist()):
            qs_bal[s] = block[j]
    lp = _emd_c if _emd_c is not None else _emd_plan
    # square problems with uniform masses on both sides: the LP's vertices are
    # permutations (Birkhoff), solved as assignments when asked
    assign = [False] * S
    if transport == "assignment" and bool(np.all(p == p[0])) and n in ks:
        rows = np.flatnonzero(sizes == n)
        square = np.all(q[rows, :n] == p[0], axis=1)  # uniform second marginal, already balanced
        for s in rows[square].tolist():
            assign[s] = True
    rows_n = np.arange(n)
    every = True  # all problems still active: plain views instead of fancy-index copies
    while active.size:
        sel = slice(None) if every else active
        # gradient (1-a) M + 2a (constC - 2 C1 G C2); one exact LP per problem
        grad = linM[sel] + alpha * (2.0 * (constC[sel] - CGC[sel]))
        act = active.tolist()
        perm_rows, perms = [], []
        for j, s in enumerate(act):
            k = ks[s]
            if assign[s]:  # an assignment: only the permutation is kept, written below at once
                perm_rows.append(s)
                perms.append(linear_sum_assignment(grad[j, :, :k])[1])
            elif k == m:  # the common case: no padding, a plain row of the stack
                target[s] = lp(p, qs_bal[s], grad[j], 100_000, 1, None, None)[0]
            else:
                target[s, :, :k] = lp(p, qs_bal[s], np.ascontiguousarray(grad[j, :, :k]), 100_000, 1, None, None)[0]
        if perm_rows:
            target[perm_rows] = 0.0
            target[np.asarray(perm_rows)[:, None], rows_n, np.asarray(perms)] = p
        Ga = G[sel]
        dG = target[sel] - Ga
        dC = (C1[sel] if stacked else C1) @ dG @ twoC2[sel]
        # exact line search on a t^2 + b t for every problem at once (Vayer et al.
        # 2019, Alg. 2); <constC, dG> vanishes because dG has zero marginals
        qa = -alpha * (dC * dG).sum((1, 2))
        qb = (linM[sel] * dG).sum((1, 2)) - 2.0 * alpha * (dC * Ga).sum((1, 2))
        t = np.where(qa + qb < 0, 1.0, 0.0)
        convex = qa > 0
        if convex.any():
            with np.errstate(over="ignore"):  # a tiny curvature: the step is +-inf, clipped to [0, 1]
                t[convex] = np.clip(-qb[convex] / (2.0 * qa[convex]), 0.0, 1.0)
        step = qa * t * t + qb * t
        new_cost = cost[sel] + step
        G[sel] = Ga + t[:, None, None] * dG
        n_iter[sel] += 1
        cost[sel] = new_cost
        delta = np.abs(step)
        scale = np.abs(new_cost)
        # a zero step leaves the plan as it is, so every later iteration would repeat this one
        # (a plan of objective 0, such as a barycenter started from this very graph, never
        # met the relative test and ran to max_iter); stopping returns the same plan
        done[sel] = (delta == 0.0) | (delta < tol_abs) | ((scale > 0) & (delta < tol_rel * scale))
        keep = (~done[active]) & (n_iter[active] < max_iter)
        if keep.all():
            CGC[sel] = (C1[sel] if stacked else C1) @ G[sel] @ twoC2[sel]
            continue
        every = False
        active = active[keep]
        if active.size:
            CGC[active] = (C1[active] if stacked else C1) @ G[active] @ twoC2[active]
    return G, cost, n_iter, done


@dataclass(frozen=True)
class BarycenterResult:
    """Outcome of :func:`fgw_barycenter`.

    Attributes
    ----------
    structure : ndarray of shape (n, n)
        Barycenter structure matrix.
    features : ndarray of shape (n, d)
        Barycenter node features.
    plans : ndarray of shape (S, n, m_max)
        Final plans to each input graph (zero-padded columns).
    objective : float
        :math:`\\sum_s \\lambda_s \\mathrm{FGW}` at the final plans.
    n_outer : int
        Outer (plan / update) iterations performed.
    converged : bool
        Whether the outer tolerance was met.
    history : list of float
        Objective after each outer iteration.
    """

    structure: Array
    features: Array
    plans: Array
    objective: float
    n_outer: int
    converged: bool
    history: list[float] = field(default_factory=list)


def pad_graphs(
    structures: list[ArrayLike], features: list[ArrayLike], masses: list[ArrayLike] | None = None
) -> tuple[Array, Array, Array, NDArray[np.int64]]:
    """Stack graphs of different sizes, padding with zero-mass nodes.

    Parameters
    ----------
    structures : list of array-like of shape (m_s, m_s)
    features : list of array-like of shape (m_s, d)
    masses : list of array-like of shape (m_s,), default=uniform

    Returns
    -------
    C : ndarray of shape (S, m_max, m_max)
    F : ndarray of shape (S, m_max, d)
    q : ndarray of shape (S, m_max)
    sizes : ndarray of shape (S,)

    Examples
    --------
    >>> C, F, q, sizes = pad_graphs([[[0.0]], [[0, 1], [1, 0]]], [[[1.0]], [[1.0], [0.0]]])
    >>> C.shape, q.tolist(), sizes.tolist()
    ((2, 2, 2), [[1.0, 0.0], [0.5, 0.5]], [1, 2])
    """
    if len(structures) == 0 or len(structures) != len(features):
        raise ValueError(
            f"need one feature array per structure and at least one graph; got "
            f"{len(structures)} structures and {len(features)} feature arrays."
        )
    shapes = [np.shape(c) for c in structures]
    if any(len(sh) != 2 or sh[0] != sh[1] or sh[0] == 0 for sh in shapes):
        raise ValueError(f"every structure must be a non-empty square matrix; got shapes {shapes}.")
    sizes = np.array([sh[0] for sh in shapes], dtype=np.int64)
    d = np.shape(features[0])[1] if np.ndim(features[0]) == 2 else -1
    bad = [s for s, f in enumerate(features) if np.shape(f) != (sizes[s], d)]
    if d < 0 or bad:
        raise ValueError(
            f"features[s] must have shape (len(structures[s]), d) with one d for all; "
            f"graph {bad[0] if bad else 0} has {np.shape(features[bad[0] if bad else 0])}."
        )
    if masses is not None and len(masses) != len(structures):
        raise ValueError(f"masses needs one array per graph; got {len(masses)} for {len(structures)} graphs.")
    S, m = len(structures), int(sizes.max())
    C = np.zeros((S, m, m))
    F = np.zeros((S, m, d))
    q = np.zeros((S, m))
    for s, (c, f) in enumerate(zip(structures, features)):
        k = sizes[s]
        C[s, :k, :k] = c
        F[s, :k] = f
        q[s, :k] = 1.0 / k if masses is None else _check_masses(masses[s], k, f"masses[{s}]")
    return C, F, q, sizes


def fgw_barycenter(
    structures: list[ArrayLike],
    features: list[ArrayLike],
    weights: ArrayLike,
    init_structure: ArrayLike,
    init_features: ArrayLike,
    *,
    masses: list[ArrayLike] | None = None,
    bary_masses: ArrayLike | None = None,
    alpha: float = 0.5,
    init_plans: ArrayLike | str | None = None,
    max_outer: int = 10,
    tol_outer: float = 1e-7,
    max_inner: int = 10,
    tol_inner: float = 1e-5,
    fixed_features: bool = False,
    fixed_structure: bool = False,
    init_from: int | None = None,
    restarts: int = 2,
    transport: str = "assignment",
) -> BarycenterResult:
    r"""FGW barycenter of weighted graphs with fixed size and node masses.

    Minimises, over the structure ``C`` and features ``F`` of an ``n``-node
    graph with masses ``bary_masses``,

    .. math::

        \sum_s \lambda_s \mathrm{FGW}_\alpha\big((C, F, h), (C_s, F_s, q_s)\big)

    by alternating (i) FGW plans :math:`T_s` from the current barycenter to
    every input and (ii) the closed-form updates
    :math:`F = \mathrm{diag}(1/h) \sum_s \lambda_s T_s F_s` and
    :math:`C = \sum_s \lambda_s T_s C_s T_s^\top / (h h^\top)`
    (Vayer et al. 2020, Eqs. 14-15; Peyre et al. 2016, Prop. 3).

    Parameters
    ----------
    structures : list of array-like of shape (m_s, m_s)
        Symmetric structure matrices of the ``S`` input graphs.
    features : list of array-like of shape (m_s, d)
        Node features of the input graphs.
    weights : array-like of shape (S,)
        Non-negative barycentric weights :math:`\lambda_s` (normalised to sum 1).
    init_structure : array-like of shape (n, n)
        Starting structure; it fixes the barycenter size ``n``.  A constant
        matrix is a known failure mode (every node looks alike and the plans
        stay uniform); start from a real graph, such as the input with the
        largest weight.
    init_features : array-like of shape (n, d)
        Starting node features.
    masses : list of array-like of shape (m_s,), default=uniform
        Node masses of the inputs.
    bary_masses : array-like of shape (n,), default=uniform
        Node masses of the barycenter (kept fixed).
    alpha : float, default=0.5
        FGW trade-off in ``[0, 1]``.
    init_plans : {"product", "features"} or array-like of shape (S, n, m_max), default=None
        First plans of the inner solver.  ``None`` or ``"product"`` starts
        each from the product coupling; ``"features"`` from the exact
        transport plan of the feature costs alone (a cheap label matching);
        an array is a warm start, for example the ``plans`` of an earlier
        result.  Later outer iterations always warm-start from the previous
        plans.
    max_outer : int, default=10
        Outer iteration limit.
    tol_outer : float, default=1e-7
        Stop when the objective decreases by less than this (relative).
    max_inner : int, default=10
        Conditional-gradient iteration limit per plan and outer iteration.
        Plans carry over between outer iterations, so a small limit spreads
        the inner work over the outer loop instead of polishing plans of a
        barycenter that is about to move (``benchmarks/bench_barycenter.py``).
    tol_inner : float, default=1e-5
        Relative tolerance of the inner solver (POT's barycenter uses the same).
    fixed_features, fixed_structure : bool, default=False
        Keep the features or the structure at their initial values.
    init_from : int or None, default=None
        Index of the input graph that ``init_structure`` and ``init_features``
        copy (same node order).  Its first plan is then the diagonal coupling,
        which is optimal for it; other starts can settle on a permuted copy,
        and the barycenter's nodes would no longer be that graph's nodes.
    restarts : int, default=2
        In this many outer iterations after the first, solve each plan both
        from the previous plan and from the product coupling, and keep the
        better.  Twice the work in those iterations; it escapes local minima
        (lower objective), while warm starts alone keep the barycenter close
        to where it started.
    transport : {"assignment", "simplex"}, default="assignment"
        Solver of each step's exact transport problem.  ``simplex``: POT's
        network simplex (``ot.emd``) for every problem.  ``assignment``: a
        square problem with uniform masses on both sides (a barycenter and an
        input graph of its size, the common case) has an optimal plan that is
        a scaled permutation (Birkhoff), found by scipy's
        ``linear_sum_assignment`` in about a quarter of the time; other
        problems use the network simplex.  Both return optimal plans; they
        differ only in which of several optimal plans they pick (ties).

    Returns
    -------
    BarycenterResult

    Raises
    ------
    ValueError
        On inconsistent shapes, negative or all-zero weights, or non-finite values.

    Notes
    -----
    All inputs are solved together: zero-mass padding lets the gradient and
    line-search computations run as batched array operations, leaving one
    exact linear program per input and step.  Plans are warm-started from one
    outer iteration to the next, so that iterations without restarts need
    few steps; the first (cold) iteration and the restarts take most of the
    time.

    Examples
    --------
    >>> import numpy as np
    >>> C = np.array([[0.0, 1.0], [1.0, 0.0]]); F = np.eye(2)
    >>> res = fgw_barycenter([C, C], [F, F], [0.5, 0.5], C, F)
    >>> np.allclose(res.structure, C), round(res.objective, 8)
    (True, 0.0)
    """
    w = np.asarray(weights, dtype=np.float64).ravel()
    if w.shape[0] != len(structures):
        raise ValueError(
            f"weights has {w.shape[0]} entries but {len(structures)} graphs were given."
        )
    if not np.all(np.isfinite(w)) or np.any(w < 0) or w.sum() <= 0:
        raise ValueError(
            "weights must be finite, non-negative and not all zero; got "
            f"{np.round(w, 4).tolist()}. Clip or renormalise kernel weights first."
        )
    if not 0.0 <= alpha <= 1.0:
        raise ValueError(f"alpha must lie in [0, 1]; got {alpha}.")
    w = _per_barycenter(w, np.zeros(w.shape[0], dtype=np.int64))
    Cs, Fs, qs, sizes = pad_graphs(structures, features, masses)
    C = np.array(init_structure, dtype=np.float64)
    F = np.array(init_features, dtype=np.float64)
    n = C.shape[0]
    if C.shape != (n, n) or F.shape != (n, Fs.shape[2]):
        raise ValueError(
            f"init_structure must be (n, n) and init_features (n, {Fs.shape[2]}); got "
            f"{C.shape} and {F.shape}."
        )
    h = np.full(n, 1.0 / n) if bary_masses is None else _check_masses(bary_masses, n, "bary_masses")
    for name, arr in (("structures", Cs), ("features", Fs), ("init_structure", C), ("init_features", F)):
        if not np.all(np.isfinite(arr)):
            raise ValueError(f"{name} contains NaN or infinite values; clean the input first.")
    S = Cs.shape[0]
    if init_from is not None and not (0 <= init_from < S and sizes[init_from] == n):
        raise ValueError(
            f"init_from={init_from} must index an input graph with {n} nodes (the size of init_structure)."
        )
    T = _initial_plans(init_plans, h, qs, feature_costs(F, Fs), sizes)
    batch = _barycenters(
        Cs, Fs, qs, sizes, np.zeros(S, dtype=np.int64), w, C[None], F[None], h, T,
        np.array([-1 if init_from is None else init_from]), alpha, max_outer, tol_outer, max_inner,
        tol_inner, fixed_features, fixed_structure, int(restarts), _check_transport(transport),
    )
    history = [float(v) for v in batch.history[: batch.n_outer[0], 0]]
    return BarycenterResult(
        batch.structures[0], batch.features[0], batch.plans, float(batch.objectives[0]),
        int(batch.n_outer[0]), bool(batch.converged[0]), history,
    )


@dataclass(frozen=True)
class BatchResult:
    """Outcome of :func:`fgw_barycenter_batch` for ``Q`` barycenters of one size ``n``.

    Attributes
    ----------
    structures : ndarray of shape (Q, n, n)
    features : ndarray of shape (Q, n, d)
    plans : ndarray of shape (P, n, m)
        Final plan of every problem (barycenter ``owner[p]`` to input graph ``p``).
    objectives : ndarray of shape (Q,)
    n_outer : ndarray of shape (Q,)
    converged : ndarray of shape (Q,)
    history : ndarray of shape (max_outer, Q)
        Objective after each outer iteration (NaN after a barycenter stopped).
    """

    structures: Array
    features: Array
    plans: Array
    objectives: Array
    n_outer: NDArray[np.int64]
    converged: NDArray[np.bool_]
    history: Array


def _segments(owner: NDArray[np.int64]) -> NDArray[np.int64]:
    """Start of each run of equal values in a sorted owner array."""
    return np.flatnonzero(np.r_[True, owner[1:] != owner[:-1]])


def _per_barycenter(w: Array, owner: NDArray[np.int64]) -> Array:
    """Weights normalised to sum one per barycenter (one summation order for every batch)."""
    return w / np.add.reduceat(w, _segments(owner))[owner]


def _barycenters(
    Cs: Array,
    Fs: Array,
    qs: Array,
    sizes: NDArray[np.int64],
    owner: NDArray[np.int64],
    w: Array,
    C: Array,
    F: Array,
    h: Array,
    T: Array,
    init_from: NDArray[np.int64],
    alpha: float,
    max_outer: int,
    tol_outer: float,
    max_inner: int,
    tol_inner: float,
    fixed_features: bool,
    fixed_structure: bool,
    restarts: int,
    transport: str,
) -> BatchResult:
    """Outer loop of :func:`fgw_barycenter` for many barycenters at once (inputs checked)."""
    Q, n = C.shape[0], C.shape[1]
    C, F, T = C.copy(), F.copy(), T.copy()
    for q, p in enumerate(init_from):
        if p >= 0:  # the start graph's own plan: the identity coupling
            T[p] = 0.0
            T[p, :, :n] = np.diag(h)
    M = feature_costs(F[owner], Fs)
    hh = np.outer(h, h)
    product = h[None, :, None] * qs[:, None, :]
    history = np.full((max(max_outer, 1), Q), np.nan)
    objective = np.full(Q, np.inf)
    n_outer = np.zeros(Q, dtype=np.int64)
    converged = np.zeros(Q, dtype=bool)
    live = np.ones(Q, dtype=bool)
    for it in range(1, max_outer + 1):
        # the problems of the barycenters still moving, as whole contiguous runs
        sel = np.flatnonzero(live[owner])
        own = owner[sel]
        starts = _segments(own)
        qsel = own[starts]
        Ts, values, _, _ = _cg_batch(
            M[sel], C[own], Cs[sel], h, qs[sel], T[sel], alpha, max_inner, tol_inner, 0.0, sizes[sel], transport
        )
        if 1 < it <= 1 + restarts:  # also solve from the product plan; keep the better
            T2, values2, _, _ = _cg_batch(
                M[sel], C[own], Cs[sel], h, qs[sel], product[sel], alpha, max_inner, tol_inner, 0.0, sizes[sel],
                transport,
            )
            better = values2 < values
            Ts[better], values[better] = T2[better], values2[better]
        T[sel] = Ts
        ws = w[sel]
        previous = objective[qsel]
        objective[qsel] = np.add.reduceat(ws * values, starts)
        history[it - 1, qsel] = objective[qsel]
        n_outer[qsel] = it
        if not fixed_features:
            F[qsel] = np.add.reduceat(ws[:, None, None] * (Ts @ Fs[sel]), starts) / h[:, None]
            M[sel] = feature_costs(F[own], Fs[sel])
        if not fixed_structure:
            TCT = Ts @ Cs[sel] @ np.swapaxes(Ts, 1, 2)
            C[qsel] = np.add.reduceat(ws[:, None, None] * TCT, starts) / hh
        done = previous - objective[qsel] <= tol_outer * np.maximum(np.abs(objective[qsel]), 1e-12)
        converged[qsel[done]] = True
        live[qsel[done]] = False
        if not live.any():
            break
    return BatchResult(C, F, T, objective, n_outer, converged, history)


def fgw_barycenter_batch(
    structures: ArrayLike,
    features: ArrayLike,
    masses: ArrayLike,
    owner: ArrayLike,
    weights: ArrayLike,
    init_structures: ArrayLike,
    init_features: ArrayLike,
    *,
    sizes: ArrayLike | None = None,
    alpha: float = 0.5,
    init_plans: str | None = "product",
    init_from: ArrayLike | None = None,
    max_outer: int = 10,
    tol_outer: float = 1e-7,
    max_inner: int = 10,
    tol_inner: float = 1e-5,
    fixed_features: bool = False,
    fixed_structure: bool = False,
    restarts: int = 2,
    transport: str = "assignment",
) -> BatchResult:
    r"""Many FGW barycenters of one size at once, each of its own weighted input graphs.

    The same computation as :func:`fgw_barycenter` run for ``Q`` barycenters
    together: every plan of every barycenter is one problem of a single
    batched conditional-gradient solve, and the closed-form updates are
    segment sums over each barycenter's problems, so that the per-step Python
    cost is paid once per batch instead of once per barycenter.  A barycenter
    stops when its own objective stops decreasing, as it would alone, and its
    result is bitwise that of :func:`fgw_barycenter` on its own graphs padded
    to the same size ``m``.

    Parameters
    ----------
    structures : array-like of shape (P, m, m)
        Input graphs of all barycenters, zero-padded (see :func:`pad_graphs`).
    features : array-like of shape (P, m, d)
    masses : array-like of shape (P, m)
        Node masses, zero on padding; each row sums to one.
    owner : array-like of int, shape (P,)
        Barycenter of each input graph, non-decreasing, every one of
        ``0..Q-1`` present.
    weights : array-like of shape (P,)
        Non-negative weights; normalised to sum one per barycenter.
    init_structures : array-like of shape (Q, n, n)
    init_features : array-like of shape (Q, n, d)
        Starting barycenters (all of size ``n``, uniform masses).
    sizes : array-like of int, shape (P,), default=None
        Real nodes of each input graph (its first ones); None counts the
        non-zero masses.
    alpha, max_outer, tol_outer, max_inner, tol_inner, fixed_features, fixed_structure, restarts, transport
        As in :func:`fgw_barycenter`.
    init_plans : {"product", "features"}, default="product"
        First plans, as in :func:`fgw_barycenter`.
    init_from : array-like of int, shape (Q,), default=None
        Per barycenter, the input graph (a row of ``structures``) that its
        start copies, or -1; see ``init_from`` of :func:`fgw_barycenter`.

    Returns
    -------
    BatchResult

    Raises
    ------
    ValueError
        On inconsistent shapes, an owner array that is not sorted or skips a
        barycenter, bad weights or non-finite values.

    Examples
    --------
    >>> import numpy as np
    >>> C = np.array([[0.0, 1.0], [1.0, 0.0]]); F = np.eye(2)
    >>> res = fgw_barycenter_batch([C, C, C], [F, F, F], np.full((3, 2), 0.5), [0, 0, 1],
    ...                            [1.0, 1.0, 1.0], [C, C], [F, F])
    >>> np.allclose(res.structures, C), res.objectives.round(8).tolist()
    (True, [0.0, 0.0])
    """
    Cs = np.asarray(structures, dtype=np.float64)
    Fs = np.asarray(features, dtype=np.float64)
    qs = np.asarray(masses, dtype=np.float64)
    own = np.asarray(owner)
    w = np.asarray(weights, dtype=np.float64).ravel()
    C = np.array(init_structures, dtype=np.float64)
    F = np.array(init_features, dtype=np.float64)
    if Cs.ndim != 3 or Fs.ndim != 3 or qs.ndim != 2:
        raise ValueError("structures, features and masses must be (P, m, m), (P, m, d) and (P, m) arrays.")
    P, m = Cs.shape[0], Cs.shape[1]
    if P == 0 or Cs.shape != (P, m, m) or Fs.shape[:2] != (P, m) or qs.shape != (P, m):
        raise ValueError(
            f"structures, features and masses must describe the same P >= 1 padded graphs; got shapes "
            f"{Cs.shape}, {Fs.shape} and {qs.shape}."
        )
    if C.ndim != 3 or C.shape[1] != C.shape[2] or F.shape != (C.shape[0], C.shape[1], Fs.shape[2]):
        raise ValueError(
            f"init_structures must be (Q, n, n) and init_features (Q, n, {Fs.shape[2]}); got "
            f"{C.shape} and {F.shape}."
        )
    Q, n = C.shape[0], C.shape[1]
    if own.shape != (P,) or not np.issubdtype(own.dtype, np.integer):
        raise ValueError(f"owner must hold one integer per input graph ({P}); got shape {own.shape}.")
    own = own.astype(np.int64)
    if Q == 0 or np.any(np.diff(own) < 0) or own[0] != 0 or own[-1] != Q - 1 or np.any(np.diff(own) > 1):
        raise ValueError(
            f"owner must be sorted and name every barycenter 0..{Q - 1} at least once; "
            "group the input graphs by barycenter."
        )
    if w.shape != (P,) or not np.all(np.isfinite(w)) or np.any(w < 0):
        raise ValueError(f"weights must hold {P} finite, non-negative values.")
    totals = np.add.reduceat(w, _segments(own))
    if np.any(totals <= 0):
        raise ValueError(
            f"barycenter {int(np.flatnonzero(totals <= 0)[0])} has only zero weights; drop it or give "
            "its graphs positive weights."
        )
    w = _per_barycenter(w, own)
    if not 0.0 <= alpha <= 1.0:
        raise ValueError(f"alpha must lie in [0, 1]; got {alpha}.")
    for name, arr in (("structures", Cs), ("features", Fs), ("masses", qs), ("init_structures", C),
                      ("init_features", F)):
        if not np.all(np.isfinite(arr)):
            raise ValueError(f"{name} contains NaN or infinite values; clean the input first.")
    if np.any(qs < 0) or not np.allclose(qs.sum(1), 1.0):
        raise ValueError("masses must be non-negative and each row must sum to one.")
    k = (qs > 0).sum(1) if sizes is None else np.asarray(sizes, dtype=np.int64)
    if k.shape != (P,) or np.any(k < 1) or np.any(k > m) or np.any(qs[np.arange(m)[None, :] >= k[:, None]] != 0):
        raise ValueError("sizes must give each graph's real nodes (its first ones; zero mass after them).")
    h = np.full(n, 1.0 / n)
    start = np.full(Q, -1, dtype=np.int64) if init_from is None else np.asarray(init_from, dtype=np.int64)
    if start.shape != (Q,) or any(p >= 0 and not (own[p] == q and k[p] == n) for q, p in enumerate(start)):
        raise ValueError(
            f"init_from must give, per barycenter, -1 or one of its own input graphs with {n} nodes."
        )
    if init_plans not in (None, "product", "features"):
        raise ValueError(f"init_plans must be 'product', 'features' or None; got {init_plans!r}.")
    if init_plans == "features":
        T = np.zeros((P, n, m))
        Mf = feature_costs(F[own], Fs)
        for p in range(P):
            T[p, :, : k[p]] = _emd(h, qs[p, : k[p]], Mf[p, :, : k[p]])
    else:
        T = h[None, :, None] * qs[:, None, :]
    return _barycenters(
        Cs, Fs, qs, k, own, w, C, F, h, T, start, alpha, int(max_outer), tol_outer, int(max_inner),
        tol_inner, fixed_features, fixed_structure, int(restarts), _check_transport(transport),
    )


def _check_transport(transport: str) -> str:
    if transport not in TRANSPORTS:
        raise ValueError(f"transport must be one of {list(TRANSPORTS)}; got {transport!r}.")
    return transport


def _initial_plans(
    init_plans: ArrayLike | str | None, h: Array, qs: Array, M: Array, sizes: NDArray[np.int64]
) -> Array:
    """Starting plans ``(S, n, m)``: product, feature matching or given."""
    S, n, m = M.shape
    if init_plans is None or (isinstance(init_plans, str) and init_plans == "product"):
        return h[None, :, None] * qs[:, None, :]
    if isinstance(init_plans, str) and init_plans == "features":
        T = np.zeros((S, n, m))
        for s in range(S):
            T[s, :, : sizes[s]] = _emd(h, qs[s, : sizes[s]], M[s, :, : sizes[s]])
        return T
    if isinstance(init_plans, str):
        raise ValueError(
            f"init_plans must be 'product', 'features', None or an array; got {init_plans!r}."
        )
    T = np.array(init_plans, dtype=np.float64)
    if T.shape != (S, n, m):
        raise ValueError(f"init_plans must have shape {(S, n, m)}; got {T.shape}.")
    _check_plans(T, h, qs, "init_plans")
    return T


def fgw_to_many(
    structure: ArrayLike,
    features: ArrayLike,
    structures: list[ArrayLike],
    features_list: list[ArrayLike],
    *,
    alpha: float = 0.5,
    init_plans: ArrayLike | str | None = "features",
    max_iter: int = 200,
    tol: float = 1e-7,
) -> tuple[Array, Array]:
    r"""FGW discrepancies from one graph to several, solved as one batch.

    Parameters
    ----------
    structure : array-like of shape (n, n)
    features : array-like of shape (n, d)
        The common first graph (uniform masses).
    structures : list of array-like of shape (m_s, m_s)
    features_list : list of array-like of shape (m_s, d)
        The other graphs (uniform masses).
    alpha : float, default=0.5
    init_plans : {"product", "features"} or array-like, default="features"
        See :func:`fgw_barycenter`.
    max_iter : int, default=200
    tol : float, default=1e-7

    Returns
    -------
    values : ndarray of shape (S,)
    plans : ndarray of shape (S, n, m_max)

    Examples
    --------
    >>> import numpy as np
    >>> C = np.array([[0.0, 1.0], [1.0, 0.0]]); F = np.eye(2)
    >>> values, _ = fgw_to_many(C, F, [C, np.zeros((1, 1))], [F, F[:1]])
    >>> values.round(3).tolist()
    [0.0, 0.75]
    """
    if not 0.0 <= alpha <= 1.0:
        raise ValueError(f"alpha must lie in [0, 1]; got {alpha}.")
    C = np.asarray(structure, dtype=np.float64)
    F = np.asarray(features, dtype=np.float64)
    Cs, Fs, qs, sizes = pad_graphs(structures, features_list)
    h = np.full(C.shape[0], 1.0 / C.shape[0])
    M = feature_costs(F, Fs)
    T = _initial_plans(init_plans, h, qs, M, sizes)
    T, values, _, _ = _cg_batch(M, C, Cs, h, qs, T, alpha, max_iter, tol, 0.0, sizes)
    return values, T


def transport_average(plans: ArrayLike, tensors: ArrayLike, weights: ArrayLike, bary_masses: ArrayLike) -> Array:
    r"""Carry per-graph pairwise tensors onto the barycenter with its plans.

    Computes :math:`\sum_s \lambda_s T_s E_s T_s^\top / (h h^\top)` channel
    by channel, the same update as the structure matrix; used for edge-label
    scores.

    Parameters
    ----------
    plans : array-like of shape (S, n, m)
    tensors : array-like of shape (S, m, m, L)
    weights : array-like of shape (S,)
    bary_masses : array-like of shape (n,)

    Returns
    -------
    ndarray of shape (n, n, L)

    Examples
    --------
    >>> import numpy as np
    >>> T = np.eye(2)[None] / 2; E = np.eye(2)[None, :, :, None]
    >>> transport_average(T, E, [1.0], [0.5, 0.5])[..., 0]
    array([[1., 0.],
           [0., 1.]])
    """
    T = np.asarray(plans, dtype=np.float64)
    E = np.asarray(tensors, dtype=np.float64)
    w = np.asarray(weights, dtype=np.float64)
    h = np.asarray(bary_masses, dtype=np.float64)
    w = w / w.sum()
    per_channel = T[:, None] @ np.moveaxis(E, 3, 1) @ np.swapaxes(T, 1, 2)[:, None]  # (S, L, n, n)
    out = np.moveaxis(np.tensordot(w, per_channel, axes=1), 0, 2)
    return out / np.outer(h, h)[:, :, None]

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
from numpy.typing import ArrayLike, NDArray

__all__ = [
    "FGWResult",
    "BarycenterResult",
    "fgw_distance",
    "fgw_barycenter",
    "fgw_to_many",
    "feature_costs",
    "pad_graphs",
    "transport_average",
]

Array = NDArray[np.float64]

try:  # the C network simplex behind ``ot.emd``, without its per-call overhead
    from ot.lp.emd_wrap import emd_c as _emd_c

    _emd_c(np.ones(1), np.ones(1), np.zeros((1, 1)), 10, 1, None, None)
except Exception:  # pragma: no cover - depends on the POT version
    _emd_c = None


def _emd(a: Array, b: Array, M: Array, max_iter: int = 100_000) -> Array:
    """Exact optimal transport plan between histograms ``a`` and ``b``."""
    M = np.ascontiguousarray(M, dtype=np.float64)
    b = b * (a.sum() / b.sum())  # exact mass balance, as ot.emd does
    if _emd_c is not None:
        return _emd_c(a, b, M, max_iter, 1, None, None)[0]
    import ot  # pragma: no cover

    return ot.emd(a, b, M, numItermax=max_iter)  # pragma: no cover


def _quad_step(a: float, b: float) -> float:
    """Minimiser of ``a t^2 + b t`` on ``[0, 1]`` (exact line search)."""
    if a > 0:
        return min(1.0, max(0.0, -b / (2.0 * a)))
    return 1.0 if a + b < 0 else 0.0


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


def _check_pair(M, C1, C2, p, q) -> tuple[Array, Array, Array, Array, Array]:
    M = np.asarray(M, dtype=np.float64)
    C1 = np.asarray(C1, dtype=np.float64)
    C2 = np.asarray(C2, dtype=np.float64)
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
) -> tuple[Array, Array, NDArray[np.int64], NDArray[np.bool_]]:
    r"""Conditional gradient for S FGW problems sharing the first graph.

    Shapes: ``M (S, n, m)``, ``C1 (n, n)``, ``C2 (S, m, m)``, ``p (n,)``,
    ``q (S, m)``, ``G (S, n, m)``; graph ``s`` uses its first ``sizes[s]``
    columns (the rest have zero mass).  Returns plans, objective values,
    iteration counts and convergence flags.

    With :math:`L(G) = c - 2 C_1 G C_2` (``c`` the marginal term of the square
    loss, Peyre et al. 2016, Prop. 1) the objective is
    :math:`(1-\alpha)\langle M, G\rangle + \alpha \langle L(G), G\rangle` and its
    gradient :math:`(1-\alpha) M + 2 \alpha L(G)`.
    """
    S, n, m = M.shape
    if sizes is None:
        sizes = np.full(S, m, dtype=np.int64)
    G = G.copy()
    # marginal term of the square loss (POT's init_matrix), fixed along the iterations
    constC = ((C1 * C1) @ p)[None, :, None] + np.einsum("skl,sl->sk", C2 * C2, q)[:, None, :]
    linM = (1.0 - alpha) * M
    twoC2 = 2.0 * C2
    # the arithmetic follows POT's cg so that LP ties are broken alike
    CGC = C1 @ G @ twoC2
    cost = np.einsum("snm,snm->s", linM, G) + alpha * np.einsum("snm,snm->s", constC - CGC, G)
    n_iter = np.zeros(S, dtype=np.int64)
    done = np.zeros(S, dtype=bool)
    active = np.arange(S)
    while active.size:
        # gradient (1-a) M + 2a (constC - 2 C1 G C2)
        grad = linM[active] + alpha * (2.0 * (constC[active] - CGC[active]))
        for j, s in enumerate(active):
            k = sizes[s]
            target = np.zeros((n, m))
            target[:, :k] = _emd(p, q[s, :k], grad[j, :, :k])
            dG = target - G[s]
            dC = C1 @ dG @ twoC2[s]
            # exact line search on a t^2 + b t (Vayer et al. 2019, Alg. 2);
            # <constC, dG> vanishes because dG has zero marginals
            a = -alpha * float(np.sum(dC * dG))
            b = float(np.sum(linM[s] * dG)) - 2.0 * alpha * float(np.sum(dC * G[s]))
            t = _quad_step(a, b)
            new_cost = cost[s] + a * t * t + b * t
            G[s] = G[s] + t * dG
            n_iter[s] += 1
            delta = abs(new_cost - cost[s])
            cost[s] = new_cost
            if delta < tol_abs or (new_cost != 0.0 and delta / abs(new_cost) < tol_rel):
                done[s] = True
        active = active[(~done[active]) & (n_iter[active] < max_iter)]
        if active.size:
            CGC[active] = C1 @ G[active] @ twoC2[active]
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
    sizes = np.array([np.shape(c)[0] for c in structures], dtype=np.int64)
    d = np.shape(features[0])[1]
    S, m = len(structures), int(sizes.max())
    C = np.zeros((S, m, m))
    F = np.zeros((S, m, d))
    q = np.zeros((S, m))
    for s, (c, f) in enumerate(zip(structures, features)):
        k = sizes[s]
        C[s, :k, :k] = c
        F[s, :k] = f
        q[s, :k] = 1.0 / k if masses is None else masses[s]
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
    max_inner: int = 200,
    tol_inner: float = 1e-7,
    fixed_features: bool = False,
    fixed_structure: bool = False,
    init_from: int | None = None,
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
    max_inner : int, default=200
        Conditional-gradient iteration limit per plan.
    tol_inner : float, default=1e-7
        Relative tolerance of the inner solver.
    fixed_features, fixed_structure : bool, default=False
        Keep the features or the structure at their initial values.
    init_from : int or None, default=None
        Index of the input graph that ``init_structure`` and ``init_features``
        copy (same node order).  Its first plan is then the diagonal coupling,
        which is optimal for it; other starts can settle on a permuted copy,
        and the barycenter's nodes would no longer be that graph's nodes.

    Returns
    -------
    BarycenterResult

    Raises
    ------
    ValueError
        On inconsistent shapes, negative or all-zero weights, or non-finite values.

    Notes
    -----
    All inputs are solved together: zero-mass padding lets the gradient
    computations run as batched matrix products, and plans are warm-started
    from one outer iteration to the next, so later iterations need only one
    or two linear programs each.

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
    w = w / w.sum()
    Cs, Fs, qs, sizes = pad_graphs(structures, features, masses)
    C = np.array(init_structure, dtype=np.float64)
    F = np.array(init_features, dtype=np.float64)
    n = C.shape[0]
    if C.shape != (n, n) or F.shape != (n, Fs.shape[2]):
        raise ValueError(
            f"init_structure must be (n, n) and init_features (n, {Fs.shape[2]}); got "
            f"{C.shape} and {F.shape}."
        )
    h = np.full(n, 1.0 / n) if bary_masses is None else np.asarray(bary_masses, float)
    for name, arr in (("structures", Cs), ("features", Fs), ("init_structure", C), ("init_features", F)):
        if not np.all(np.isfinite(arr)):
            raise ValueError(f"{name} contains NaN or infinite values; clean the input first.")
    S, m = Cs.shape[0], Cs.shape[1]
    M = feature_costs(F, Fs)
    T = _initial_plans(init_plans, h, qs, M, sizes)
    if init_from is not None:
        if not (0 <= init_from < S and sizes[init_from] == n):
            raise ValueError(
                f"init_from={init_from} must index an input graph with {n} nodes (the size of init_structure)."
            )
        T[init_from] = 0.0
        T[init_from, :, :n] = np.diag(h)
    hh = np.outer(h, h)
    history: list[float] = []
    converged = False
    objective = np.inf
    it = 0
    for it in range(1, max_outer + 1):
        T, values, _, _ = _cg_batch(
            M, C, Cs, h, qs, T, alpha, max_inner, tol_inner, 0.0, sizes
        )
        objective_prev, objective = objective, float(w @ values)
        history.append(objective)
        if not fixed_features:
            F = np.einsum("s,snm,smd->nd", w, T, Fs) / h[:, None]
            M = feature_costs(F, Fs)
        if not fixed_structure:
            C = np.einsum("s,sij,sjk,slk->il", w, T, Cs, T, optimize=True) / hh
        if objective_prev - objective <= tol_outer * max(abs(objective), 1e-12):
            converged = True
            break
    return BarycenterResult(C, F, T, objective, it, converged, history)


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
    out = np.einsum("s,sij,sjkc,slk->ilc", w, T, E, T, optimize=True)
    return out / np.outer(h, h)[:, :, None]

r"""FGW pieces in PyTorch with transport plans held fixed, for training template graphs.

The plans come from the numpy solver (:mod:`gwpred.fgw`) and are constants
here: by the envelope theorem, the gradient of the optimal FGW value with
respect to the structures and features of either graph is the gradient of
the FGW objective *at the optimal plan* (Danskin's theorem; this is also how
POT's ``ot.gromov.fused_gromov_wasserstein2`` differentiates on its torch
backend).  With the square loss the objective at a plan :math:`T` is

.. math::

    (1 - \alpha) \langle M, T \rangle + \alpha \Big(
        \sum_{ik} C_{1,ik}^2 a_i a_k + \sum_{jl} C_{2,jl}^2 b_j b_l
        - 2 \langle C_1, T C_2 T^\top \rangle \Big)

with :math:`a = T 1`, :math:`b = T^\top 1` and
:math:`M_{ij} = \lVert F_{1,i} - F_{2,j} \rVert^2`, the convention of
:func:`gwpred.fgw.fgw_distance` (Vayer et al. 2019, 2020).  The closed-form
barycenter updates (Vayer et al. 2020, Eqs. 14-15) are written here in torch
too, so that a barycenter built from the plans is differentiable in its
weights and in the input graphs.

Every function takes and returns tensors (any leading batch dimensions);
zero-padded nodes with zero plan mass contribute nothing.  PyTorch is the
``neural`` extra.
"""

from __future__ import annotations

from typing import Any

from .._utils import require_extra

__all__ = [
    "barycenter_at_plans",
    "feature_costs_torch",
    "fgw_at_plan",
    "structure_term",
]

_PURPOSE = "TemplateGraphPredictor (training templates)"


def _torch() -> Any:
    return require_extra("torch", _PURPOSE)


def feature_costs_torch(F1: Any, F2: Any) -> Any:
    """Squared Euclidean costs ``(..., n, m)`` between node features ``(..., n, d)`` and ``(..., m, d)``.

    Computed as a difference (not the expanded form) so that equal features cost exactly 0.
    """
    diff = F1.unsqueeze(-2) - F2.unsqueeze(-3)
    return (diff * diff).sum(-1)


def structure_term(C1: Any, C2: Any, T: Any) -> Any:
    r"""The Gromov-Wasserstein term :math:`\sum_{ijkl} (C_{1,ik} - C_{2,jl})^2 T_{ij} T_{kl}` at plan ``T``.

    Parameters
    ----------
    C1 : tensor of shape (..., n, n)
    C2 : tensor of shape (..., m, m)
    T : tensor of shape (..., n, m)

    Returns
    -------
    tensor of shape (...)
        Peyre et al. (2016), Prop. 1: the square loss splits into the two
        marginal terms and ``-2 <C1, T C2 T^T>``.
    """
    a = T.sum(-1)
    b = T.sum(-2)
    first = ((C1 * C1) * a.unsqueeze(-1) * a.unsqueeze(-2)).sum((-2, -1))
    second = ((C2 * C2) * b.unsqueeze(-1) * b.unsqueeze(-2)).sum((-2, -1))
    cross = (C1 * (T @ C2 @ T.transpose(-1, -2))).sum((-2, -1))
    return first + second - 2.0 * cross


def fgw_at_plan(M: Any, C1: Any, C2: Any, T: Any, alpha: float) -> Any:
    r"""FGW objective (square loss) at a fixed plan; its gradient is the envelope gradient.

    Parameters
    ----------
    M : tensor of shape (..., n, m)
        Feature costs.
    C1 : tensor of shape (..., n, n)
    C2 : tensor of shape (..., m, m)
    T : tensor of shape (..., n, m)
        The plan (treated as a constant: pass it detached).
    alpha : float
        Trade-off in ``[0, 1]``, as in :func:`gwpred.fgw.fgw_distance`.

    Returns
    -------
    tensor of shape (...)
    """
    return (1.0 - alpha) * (M * T).sum((-2, -1)) + alpha * structure_term(C1, C2, T)


def barycenter_at_plans(weights: Any, plans: Any, structures: Any, features: Any, channels: Any | None = None) -> tuple:
    r"""Closed-form FGW barycenter of weighted graphs given the plans (square loss, uniform masses).

    :math:`C = \sum_s \lambda_s T_s C_s T_s^\top / (h h^\top)` and
    :math:`F = \mathrm{diag}(1/h) \sum_s \lambda_s T_s F_s` (Vayer et al. 2020,
    Eqs. 14-15), with :math:`h = T_s 1` the barycenter's masses; the
    edge-label channels are carried like the structure.

    Parameters
    ----------
    weights : tensor of shape (..., S)
        Barycentric weights (each row sums to one).
    plans : tensor of shape (..., S, n, m)
        Plans from the barycenter's ``n`` nodes to each input graph's ``m`` (padded) nodes.
    structures : tensor of shape (..., S, m, m)
    features : tensor of shape (..., S, m, d)
    channels : tensor of shape (..., S, m, m, L), optional

    Returns
    -------
    C : tensor of shape (..., n, n)
    F : tensor of shape (..., n, d)
    E : tensor of shape (..., n, n, L) or None
    """
    torch = _torch()
    h = plans.sum(-1)[..., 0, :]  # barycenter masses, the same for every s
    hh = h.unsqueeze(-1) * h.unsqueeze(-2)
    TCT = plans @ structures @ plans.transpose(-1, -2)
    C = (weights.unsqueeze(-1).unsqueeze(-1) * TCT).sum(-3) / hh
    F = (weights.unsqueeze(-1).unsqueeze(-1) * (plans @ features)).sum(-3) / h.unsqueeze(-1)
    E = None
    if channels is not None:
        TET = torch.einsum("...sim,...smlc,...sjl->...sijc", plans, channels, plans)
        E = (weights[..., None, None, None] * TET).sum(-4) / hh.unsqueeze(-1)
    return C, F, E

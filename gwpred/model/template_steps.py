r"""Learned templates: the arrays, the numpy forward pass, the start and the training (torch).

The parametric variant of FGW-barycenter graph prediction (Brogat-Motte et
al., ICML 2022): a network maps an input ``x`` to simplex weights over ``M``
*template* graphs, and the prediction is the FGW barycenter of the templates
(Vayer et al. 2019, 2020), decoded as in :mod:`gwpred.model.steps`.  Each
template has its own size, a structure matrix in ``[0, 1]``, node-label
scores on the simplex and edge-label channels that sum to its structure.

- :class:`TemplateSet` holds the templates (padded arrays) and turns weights
  over them into a :class:`~gwpred.model.steps.Neighbourhood`, so that the
  barycenter and the decoders of :mod:`gwpred.model.steps` run unchanged;
- :class:`TemplateNetwork` is the trained network as arrays, with a numpy
  forward pass (predicting, saving and loading need no torch);
- :func:`initial_templates` picks FGW medoids of clusters of the inputs;
- :func:`train_templates` trains the network and the templates end to end
  through the FGW loss (torch on the CPU, the ``neural`` extra), plans held
  fixed (:mod:`gwpred.model.fgw_torch`).

Everything is arrays in, arrays out; the estimator is
:class:`gwpred.model.templates.TemplateGraphPredictor`.
"""

from __future__ import annotations

import copy
import time
from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from numpy.typing import NDArray
from sklearn.cluster import KMeans

from .._utils import progress_bar, require_extra, torch_settings
from ..codec import TrainingSet
from ..fgw import fgw_barycenter_batch, fgw_to_many
from ..ranking import training_output_features
from .fgw_torch import barycenter_at_plans, feature_costs_torch, fgw_at_plan, structure_term
from .steps import Neighbourhood

__all__ = [
    "TemplateNetwork",
    "TemplateSet",
    "initial_templates",
    "solve_on_templates",
    "top_weights",
    "train_templates",
]

_PURPOSE = "TemplateGraphPredictor (training templates)"

#: Logit of a 0/1 entry when a template is started from a graph (sigmoid(4) = 0.982).
INIT_LOGIT = 4.0


# --------------------------------------------------------------------------- arrays
@dataclass(frozen=True)
class TemplateSet:
    """``M`` template graphs of their own sizes, zero-padded to ``m`` nodes.

    Attributes
    ----------
    structures : ndarray of shape (M, m, m)
        Symmetric, in ``[0, 1]``, zero diagonal; zero beyond each template's size.
    features : ndarray of shape (M, m, n_node_labels)
        Node-label scores (rows on the simplex; zero rows beyond the size).
    channels : ndarray of shape (M, m, m, n_edge_labels)
        Edge-label channels; they sum to ``structures``.
    sizes : ndarray of shape (M,)
    """

    structures: NDArray[np.float64]
    features: NDArray[np.float64]
    channels: NDArray[np.float64]
    sizes: NDArray[np.int64]

    def __len__(self) -> int:
        return len(self.sizes)

    @property
    def n_edges(self) -> NDArray[np.int64]:
        """Expected edge count of each template (half its structure's sum), rounded."""
        return np.rint(self.structures.sum((1, 2)) / 2.0).astype(np.int64)

    def hood(self, indices: NDArray[np.int64], weights: NDArray[np.float64]) -> Neighbourhood:
        """The templates ``indices`` with ``weights`` (positive ones kept) as a neighbourhood.

        Examples
        --------
        >>> C = np.zeros((1, 2, 2)); C[0, 0, 1] = C[0, 1, 0] = 1.0
        >>> ts = TemplateSet(C, np.ones((1, 2, 1)), C[..., None], np.array([2]))
        >>> ts.hood(np.array([0]), np.array([1.0])).n_edges.tolist()
        [1]
        """
        keep = weights > 0
        idx, w = np.asarray(indices)[keep], np.asarray(weights)[keep]
        ks = self.sizes[idx].tolist()
        return Neighbourhood(
            idx.astype(np.int64),
            w,
            [self.structures[i, :k, :k] for i, k in zip(idx.tolist(), ks)],
            [self.features[i, :k] for i, k in zip(idx.tolist(), ks)],
            [self.channels[i, :k, :k] for i, k in zip(idx.tolist(), ks)],
            self.sizes[idx],
            self.n_edges[idx],
        )

    def to_arrays(self) -> dict[str, NDArray]:
        """The arrays a model file stores."""
        return {"template_structures": self.structures, "template_features": self.features,
                "template_channels": self.channels, "template_sizes": self.sizes}

    @classmethod
    def from_arrays(cls, arrays: dict[str, Any]) -> TemplateSet:
        """Inverse of :meth:`to_arrays`, checked.

        Raises
        ------
        ValueError
            For missing arrays, shapes that disagree or values out of range.
        """
        try:
            C = np.asarray(arrays["template_structures"], dtype=np.float64)
            F = np.asarray(arrays["template_features"], dtype=np.float64)
            E = np.asarray(arrays["template_channels"], dtype=np.float64)
            sizes = np.asarray(arrays["template_sizes"], dtype=np.int64)
        except KeyError as err:
            raise ValueError(f"templates need the array {err}") from None
        M = len(sizes)
        if C.ndim != 3 or C.shape[0] != M or C.shape[1] != C.shape[2] or F.shape[:2] != C.shape[:2] \
                or E.shape[:3] != C.shape or M == 0 or sizes.min() < 1 or sizes.max() > C.shape[1]:
            raise ValueError("template arrays have shapes that disagree")
        if not all(np.all(np.isfinite(a)) for a in (C, F, E)) or C.min() < 0 or C.max() > 1:
            raise ValueError("template structures must be finite and in [0, 1]")
        return cls(C, F, E, sizes)


@dataclass(frozen=True)
class TemplateNetwork:
    """The trained network as arrays: standardised input, ReLU layers, then template and size logits.

    Attributes
    ----------
    mean, scale : ndarray of shape (n_features,)
        Input standardisation.
    weights, biases : list of ndarray
        Layers (``W`` of shape (in, out), float32 as trained); ReLU between them, none after the last.
    n_templates : int
        The last layer's first ``n_templates`` outputs are template logits, the rest size logits.
    size_values : ndarray of shape (n_sizes,)
        Graph size of each size logit.
    """

    mean: NDArray[np.float64]
    scale: NDArray[np.float64]
    weights: list[NDArray[np.float32]]
    biases: list[NDArray[np.float32]]
    n_templates: int
    size_values: NDArray[np.int64]

    def forward(self, X: NDArray) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
        """Template logits ``(n, M)`` and size logits ``(n, n_sizes)`` of the rows of ``X`` (numpy)."""
        h = ((np.asarray(X, dtype=np.float64) - self.mean) / self.scale).astype(np.float32)
        for layer, (W, b) in enumerate(zip(self.weights, self.biases)):
            h = h @ W + b  # float32 as in training
            if layer < len(self.weights) - 1:
                h = np.maximum(h, 0.0)
        h = h.astype(np.float64)
        return h[:, : self.n_templates], h[:, self.n_templates :]

    def to_arrays(self) -> tuple[dict[str, NDArray], dict]:
        arrays: dict[str, NDArray] = {"net_mean": self.mean, "net_scale": self.scale,
                                      "net_size_values": self.size_values}
        for k, (W, b) in enumerate(zip(self.weights, self.biases)):
            arrays[f"net_W{k}"] = W
            arrays[f"net_b{k}"] = b
        return arrays, {"n_layers": len(self.weights), "n_templates": int(self.n_templates)}

    @classmethod
    def from_arrays(cls, arrays: dict[str, Any], description: dict) -> TemplateNetwork:
        """Inverse of :meth:`to_arrays`, checked.

        Raises
        ------
        ValueError
            For missing arrays or layer shapes that do not chain.
        """
        try:
            n_layers, M = int(description["n_layers"]), int(description["n_templates"])
            mean = np.asarray(arrays["net_mean"], dtype=np.float64)
            scale = np.asarray(arrays["net_scale"], dtype=np.float64)
            sizes = np.asarray(arrays["net_size_values"], dtype=np.int64)
            Ws = [np.asarray(arrays[f"net_W{k}"]) for k in range(n_layers)]
            bs = [np.asarray(arrays[f"net_b{k}"]) for k in range(n_layers)]
        except (KeyError, TypeError, ValueError) as err:
            raise ValueError(f"the template network needs its arrays and layer count ({err!r})") from None
        width = len(mean)
        for W, b in zip(Ws, bs):
            if not (np.issubdtype(W.dtype, np.floating) and np.issubdtype(b.dtype, np.floating)):
                raise ValueError("the template network's layers must hold floating-point numbers")
            if W.ndim != 2 or W.shape[0] != width or b.shape != (W.shape[1],) or not np.all(np.isfinite(W)):
                raise ValueError("the template network's layer shapes do not chain")
            width = W.shape[1]
        if n_layers < 1 or width != M + len(sizes) or scale.shape != mean.shape or np.any(scale <= 0):
            raise ValueError("the template network's output does not match its templates and sizes")
        return cls(mean, scale, Ws, bs, M, sizes)


def softmax(z: NDArray[np.float64]) -> NDArray[np.float64]:
    """Row-wise softmax."""
    e = np.exp(z - z.max(1, keepdims=True))
    return e / e.sum(1, keepdims=True)


def top_weights(logits: NDArray[np.float64], k: int) -> tuple[NDArray[np.int64], NDArray[np.float64]]:
    """The ``k`` largest softmax weights per row (ties by index), renormalised to sum one.

    Returns indices and weights of shape (n, k), by decreasing weight.

    Examples
    --------
    >>> top_weights(np.log(np.array([[0.1, 0.6, 0.3]])), 2)[0].tolist()
    [[1, 2]]
    """
    k = min(int(k), logits.shape[1])
    order = np.argsort(-logits, axis=1, kind="stable")[:, :k]
    w = softmax(np.take_along_axis(logits, order, 1))
    return order.astype(np.int64), w


# --------------------------------------------------------------------------- start
def initial_templates(
    X: NDArray, training: TrainingSet, n_templates: int, seed: int, *, alpha: float, sample: int = 12,
    cluster_on: str = "inputs",
) -> tuple[TemplateSet, NDArray[np.int64]]:
    """FGW medoids of ``n_templates`` clusters of the training pairs.

    ``cluster_on="inputs"``: k-means on the standardised inputs ``X``;
    ``"graphs"``: k-means on the graphs' unit-norm Weisfeiler-Lehman feature
    counts (:func:`gwpred.ranking.training_output_features`), so that a
    cluster holds graphs alike whatever their inputs.

    In each cluster, up to ``sample`` members (drawn with ``seed``) are compared
    with each other by FGW (:func:`gwpred.fgw.fgw_to_many`); the member with
    the least summed FGW to the others is the template, started as that graph
    (0/1 entries, one-hot labels).  Clusters left empty by k-means are filled
    with random training graphs.  Also returns the template of each training
    input's cluster (the network's warm start, see :func:`train_templates`).
    """
    rng = np.random.default_rng(seed)
    if cluster_on == "graphs":
        Xs = training_output_features(training, "wl")[0]
    else:
        Xf = np.asarray(X, dtype=np.float64)
        scale = Xf.std(0)
        Xs = (Xf - Xf.mean(0)) / np.where(scale > 1e-12, scale, 1.0)
    k = min(n_templates, Xs.shape[0])
    cluster = KMeans(n_clusters=k, n_init=1, max_iter=50, random_state=seed).fit_predict(Xs)
    L = training.labels.n_node_labels
    chosen: list[int] = []
    assignment = np.zeros(Xs.shape[0], dtype=np.int64)
    for c in range(k):
        members = np.flatnonzero(cluster == c)
        if members.size == 0:
            continue
        assignment[members] = len(chosen)
        if members.size > sample:
            members = np.sort(rng.choice(members, sample, replace=False))
        cost = np.zeros(members.size)
        for a, i in enumerate(members.tolist()):
            values, _ = fgw_to_many(training.structures[i], training.features[i][:, :L],
                                    [training.structures[j] for j in members],
                                    [training.features[j][:, :L] for j in members], alpha=alpha)
            cost[a] = values.sum()
        chosen.append(int(members[np.argmin(cost)]))
    while len(chosen) < n_templates:
        chosen.append(int(rng.integers(len(training))))
    return _as_templates(training, chosen), assignment


def _as_templates(training: TrainingSet, indices: Sequence[int]) -> TemplateSet:
    """Training graphs ``indices`` as templates (padded)."""
    sizes = training.sizes[list(indices)]
    m, L, Le = int(sizes.max()), training.labels.n_node_labels, training.channels[0].shape[2]
    M = len(indices)
    C, F, E = np.zeros((M, m, m)), np.zeros((M, m, L)), np.zeros((M, m, m, Le))
    for t, i in enumerate(indices):
        n = sizes[t]
        C[t, :n, :n] = training.structures[i]
        F[t, :n] = training.features[i][:, :L]
        E[t, :n, :n] = training.channels[i]
    return TemplateSet(C, F, E, sizes.astype(np.int64))


def _start_graph(ts: TemplateSet, idx: NDArray[np.int64], n: int) -> tuple:
    """Start of a barycenter of size ``n``: the highest-weight kept template of that size, else the
    closest in size with its nodes repeated (as :func:`gwpred.model.steps.choose_start`)."""
    sizes = ts.sizes[idx]
    same = np.flatnonzero(sizes == n)
    pos = int(same[0]) if same.size else int(np.argmin(np.abs(sizes - n)))
    t, k = int(idx[pos]), int(sizes[pos])
    C0, F0 = ts.structures[t, :k, :k], ts.features[t, :k]
    if k != n:
        reps = np.resize(np.arange(k), n)
        C0, F0 = C0[np.ix_(reps, reps)].copy(), F0[reps]
        np.fill_diagonal(C0, 0.0)
        return C0, F0, -1
    return C0, F0, pos


def solve_on_templates(
    ts: TemplateSet,
    idx: NDArray[np.int64],
    w: NDArray[np.float64],
    sizes: NDArray[np.int64],
    *,
    alpha: float,
    max_outer: int,
    max_inner: int,
    tol: float,
) -> list[tuple[NDArray[np.float64], NDArray[np.float64], NDArray[np.float64]]]:
    """FGW barycenters of weighted templates at given sizes, with their plans (numpy solver).

    Parameters
    ----------
    ts : TemplateSet
    idx, w : ndarray of shape (Q, k)
        Kept templates of each query and their weights (rows sum to one).
    sizes : ndarray of shape (Q,)
        Barycenter size of each query.

    Returns
    -------
    list of (structure (n, n), features (n, d), plans (k, n, m))
        One per query; ``m`` is the templates' padded size.  Queries of one
        size are solved together by :func:`gwpred.fgw.fgw_barycenter_batch`.
    """
    Q, k = idx.shape
    out: list[Any] = [None] * Q
    for n in np.unique(sizes).tolist():
        members = np.flatnonzero(sizes == n)
        starts = [_start_graph(ts, idx[q], n) for q in members]
        rows = idx[members].ravel()
        res = fgw_barycenter_batch(
            ts.structures[rows], ts.features[rows], _masses(ts, rows), np.repeat(np.arange(len(members)), k),
            w[members].ravel(), np.stack([s[0] for s in starts]), np.stack([s[1] for s in starts]),
            sizes=ts.sizes[rows], alpha=alpha, init_plans="features",
            init_from=[j * k + s[2] if s[2] >= 0 else -1 for j, s in enumerate(starts)],
            max_outer=max_outer, tol_outer=tol, max_inner=max_inner, tol_inner=tol,
        )
        for j, q in enumerate(members.tolist()):
            out[q] = (res.structures[j], res.features[j], res.plans[j * k : (j + 1) * k])
    return out


def _masses(ts: TemplateSet, rows: NDArray[np.int64]) -> NDArray[np.float64]:
    """Uniform masses of templates ``rows`` on their real nodes, zero on padding."""
    m = ts.structures.shape[1]
    real = np.arange(m)[None, :] < ts.sizes[rows][:, None]
    return real / ts.sizes[rows][:, None]


def target_plans(
    structures: Sequence[NDArray], features: Sequence[NDArray], targets_C: Sequence[NDArray],
    targets_F: Sequence[NDArray], *, alpha: float, max_inner: int,
) -> list[NDArray[np.float64]]:
    """FGW plans from each predicted barycenter to its target graph of the same size.

    One batched solve per size (:func:`gwpred.fgw.fgw_barycenter_batch` with the
    barycenter held fixed, one outer step) from the feature-matching start
    and from the product coupling; the plan of the lower objective is kept.
    """
    sizes = np.array([len(c) for c in structures])
    out: list[Any] = [None] * len(structures)
    for n in np.unique(sizes).tolist():
        members = np.flatnonzero(sizes == n)
        Cb = np.stack([structures[q] for q in members])
        Fb = np.stack([features[q] for q in members])
        Ct = np.stack([targets_C[q] for q in members])
        Ft = np.stack([targets_F[q] for q in members])
        best = None
        for start in ("features", "product"):
            res = fgw_barycenter_batch(
                Ct, Ft, np.full((len(members), n), 1.0 / n), np.arange(len(members)), np.ones(len(members)),
                Cb, Fb, alpha=alpha, init_plans=start, max_outer=1, max_inner=max_inner, tol_inner=1e-7,
                fixed_features=True, fixed_structure=True,
            )
            if best is None:
                best = res
            else:
                better = res.objectives < best.objectives
                plans = np.where(better[:, None, None], res.plans, best.plans)
                best = type(res)(best.structures, best.features, plans, np.minimum(res.objectives, best.objectives),
                                 best.n_outer, best.converged, best.history)
        for j, q in enumerate(members.tolist()):
            out[q] = best.plans[j]
    return out


# --------------------------------------------------------------------------- training (torch)
def _torch() -> Any:
    return require_extra("torch", _PURPOSE)


@dataclass
class TrainingOptions:
    """Options of :func:`train_templates` (the estimator's parameters, resolved)."""

    alpha: float = 0.9
    n_mixed: int = 4
    hidden: tuple[int, ...] = (256,)
    epochs: int = 50
    batch_size: int = 64
    learning_rate: float = 3e-3
    validation_share: float = 0.1
    patience: int = 5
    size_weight: float = 0.1
    warm_epochs: int = 5
    warm_smoothing: float = 0.5
    max_outer: int = 3
    max_inner: int = 20
    tol: float = 1e-5
    n_threads: int | None = 1
    seed: int = 0
    progress: bool = False
    history: dict = field(default_factory=dict)


class _Model:
    """torch parameters: the network and the template logits (built inside :func:`train_templates`)."""

    def __init__(self, torch: Any, n_features: int, hidden: tuple[int, ...], n_out: int, init: TemplateSet) -> None:
        nn = torch.nn
        parts: list[Any] = []
        width = n_features
        for h in hidden:
            parts += [nn.Linear(width, h), nn.ReLU()]
            width = h
        parts.append(nn.Linear(width, n_out))
        self.net = nn.Sequential(*parts)  # float32: half the model file; the FGW side stays float64
        M, m = init.structures.shape[:2]
        self.real = torch.from_numpy((np.arange(m)[None, :] < init.sizes[:, None]).astype(np.float64))  # (M, m)
        pair = self.real[:, :, None] * self.real[:, None, :] * (1.0 - torch.eye(m, dtype=torch.float64))
        self.pair = pair
        self.structure_logits = torch.nn.Parameter(torch.from_numpy(INIT_LOGIT * (2.0 * init.structures - 1.0)))
        F = np.clip(init.features, 0.0, 1.0)
        self.node_logits = torch.nn.Parameter(torch.from_numpy(INIT_LOGIT * (2.0 * F - 1.0)))
        Le = init.channels.shape[3]
        label = init.channels / np.maximum(init.structures[..., None], 1e-12)
        self.edge_logits = torch.nn.Parameter(torch.from_numpy(INIT_LOGIT * (2.0 * np.clip(label, 0, 1) - 1.0))) \
            if Le > 1 else None

    def parameters(self) -> list[Any]:
        extra = [self.structure_logits, self.node_logits] + ([self.edge_logits] if self.edge_logits is not None else [])
        return list(self.net.parameters()) + extra

    def templates(self, torch: Any) -> tuple[Any, Any, Any]:
        """Structures in [0, 1] (sigmoid of the symmetrised logits), node scores (softmax) and channels."""
        S = 0.5 * (self.structure_logits + self.structure_logits.transpose(1, 2))
        C = torch.sigmoid(S) * self.pair
        F = torch.softmax(self.node_logits, dim=-1) * self.real[..., None]
        if self.edge_logits is None:
            E = C[..., None]
        else:
            Z = 0.5 * (self.edge_logits + self.edge_logits.transpose(1, 2))
            E = C[..., None] * torch.softmax(Z, dim=-1)
        return C, F, E

    def state(self) -> dict:
        return copy.deepcopy({"net": self.net.state_dict(), "S": self.structure_logits.detach().clone(),
                              "N": self.node_logits.detach().clone(),
                              "E": None if self.edge_logits is None else self.edge_logits.detach().clone()})

    def load(self, state: dict) -> None:
        self.net.load_state_dict(state["net"])
        with _torch().no_grad():
            self.structure_logits.copy_(state["S"])
            self.node_logits.copy_(state["N"])
            if self.edge_logits is not None:
                self.edge_logits.copy_(state["E"])


def train_templates(
    X: NDArray, training: TrainingSet, init: TemplateSet, assignment: NDArray[np.int64], options: TrainingOptions
) -> tuple[TemplateNetwork, TemplateSet, dict]:
    r"""Train the network and the templates end to end through the FGW loss (torch, CPU).

    For a mini-batch of pairs :math:`(x_i, y_i)`: the network gives weights
    :math:`\lambda(x_i)` over the templates (softmax, the ``n_mixed`` largest
    kept and renormalised); the numpy solver finds the FGW barycenter of
    those templates at the size of :math:`y_i` and its plans, then the plan
    from that barycenter to :math:`y_i`; with all plans held fixed, torch
    rebuilds the barycenter in closed form (:func:`~gwpred.model.fgw_torch.barycenter_at_plans`)
    and the loss is its FGW objective to :math:`y_i`
    (:func:`~gwpred.model.fgw_torch.fgw_at_plan`, plus the same structure
    term on each edge-label channel), plus ``size_weight`` times the
    cross-entropy of the size logits.  Adam, early stopping on the validation
    loss with ``patience``; the best epoch's network and templates are kept.

    Only the ``n_mixed`` kept templates of a pair get a gradient, so a
    template that the untrained network never ranks high would never be
    used; the network is first trained for ``warm_epochs`` epochs to put its
    largest weight on the template of each input's cluster (``assignment``,
    cross-entropy with label smoothing ``warm_smoothing``, no FGW: without
    smoothing the weights become one-hot and the FGW loss has no gradient
    left for them), and the size head with it.

    Returns
    -------
    network : TemplateNetwork
    templates : TemplateSet
    history : dict
        Per-epoch losses, best epoch, seconds and the options.
    """
    torch = _torch()
    o = options
    rng = np.random.default_rng(o.seed)
    n = len(training)
    order = rng.permutation(n)
    n_val = min(max(1, int(round(o.validation_share * n))), n - 1)
    val, fit = np.sort(order[:n_val]), np.sort(order[n_val:])
    Xf = np.asarray(X, dtype=np.float64)
    mean = Xf[fit].mean(0)
    scale = Xf[fit].std(0)
    scale = np.where(scale > 1e-12, scale, 1.0)
    Xs = torch.from_numpy(((Xf - mean) / scale).astype(np.float32))
    size_values = np.unique(training.sizes)
    size_class = torch.from_numpy(np.searchsorted(size_values, training.sizes))
    L = training.labels.n_node_labels
    Le = training.channels[0].shape[2]
    M = len(init)
    k = min(o.n_mixed, M)
    history: dict[str, Any] = {"train_loss": [], "validation_loss": [], "validation_size_accuracy": []}
    start_time = time.perf_counter()

    def batch_loss(model: _Model, rows: NDArray[np.int64]) -> tuple[Any, Any, float]:
        out = model.net(Xs[torch.from_numpy(rows)]).double()
        logits, size_logits = out[:, :M], out[:, M:]
        idx = np.argsort(-logits.detach().numpy(), axis=1, kind="stable")[:, :k]
        tidx = torch.from_numpy(idx)
        lam = torch.softmax(torch.gather(logits, 1, tidx), dim=1)
        C_all, F_all, E_all = model.templates(torch)
        ts = TemplateSet(C_all.detach().numpy(), F_all.detach().numpy(), E_all.detach().numpy(), init.sizes)
        sizes = training.sizes[rows]
        barys = solve_on_templates(ts, idx, lam.detach().numpy(), sizes, alpha=o.alpha, max_outer=o.max_outer,
                                   max_inner=o.max_inner, tol=o.tol)
        plans_y = target_plans([b[0] for b in barys], [b[1] for b in barys],
                               [training.structures[i] for i in rows], [training.features[i][:, :L] for i in rows],
                               alpha=o.alpha, max_inner=max(o.max_inner, 50))
        total = 0.0
        for size in np.unique(sizes).tolist():
            g = np.flatnonzero(sizes == size)
            tg = torch.from_numpy(g)
            P = torch.from_numpy(np.stack([barys[q][2] for q in g]))  # (G, k, n, m), held fixed
            sel = tidx[tg]
            C, F, E = barycenter_at_plans(lam[tg], P, C_all[sel], F_all[sel], E_all[sel] if Le > 1 else None)
            Ty = torch.from_numpy(np.stack([plans_y[q] for q in g]))  # (G, n, n), held fixed
            Cy = torch.from_numpy(np.stack([training.structures[rows[q]] for q in g]))
            Fy = torch.from_numpy(np.stack([training.features[rows[q]][:, :L] for q in g]))
            value = fgw_at_plan(feature_costs_torch(F, Fy), C, Cy, Ty, o.alpha)
            if E is not None:  # the structure term on each edge-label channel
                Ey = torch.from_numpy(np.stack([training.channels[rows[q]] for q in g]))
                value = value + o.alpha * sum(structure_term(E[..., c], Ey[..., c], Ty) for c in range(Le))
            total = total + value.sum()
        fgw = total / len(rows)
        ce = torch.nn.functional.cross_entropy(size_logits, size_class[torch.from_numpy(rows)])
        accuracy = float((size_logits.argmax(1) == size_class[torch.from_numpy(rows)]).double().mean())
        return fgw, ce, accuracy

    with torch_settings(o.n_threads, o.seed, _PURPOSE):
        model = _Model(torch, Xf.shape[1], tuple(o.hidden), M + len(size_values), init)
        opt = torch.optim.Adam(model.parameters(), lr=o.learning_rate)
        val_batches = [val[s : s + 256] for s in range(0, len(val), 256)]

        def validate() -> tuple[float, float]:
            with torch.no_grad():
                parts = [batch_loss(model, b) for b in val_batches]
            loss = sum((float(f) + o.size_weight * float(c)) * len(b) for (f, c, _), b in zip(parts, val_batches))
            acc = sum(a * len(b) for (_, _, a), b in zip(parts, val_batches))
            return loss / len(val), acc / len(val)

        target = torch.from_numpy(np.asarray(assignment, dtype=np.int64))
        for _ in range(o.warm_epochs):  # warm start: each input's own cluster template first
            for rows in [p for p in np.array_split(rng.permutation(fit), max(1, len(fit) // o.batch_size))]:
                opt.zero_grad()
                out = model.net(Xs[torch.from_numpy(rows)])
                t = torch.from_numpy(rows)
                # smoothed targets keep the softmax away from one-hot: its gradient, which the FGW
                # training needs, vanishes there (benchmarks/bench_template_gradients.py)
                loss = torch.nn.functional.cross_entropy(out[:, :M], target[t], label_smoothing=o.warm_smoothing) + \
                    torch.nn.functional.cross_entropy(out[:, M:], size_class[t])
                loss.backward()
                opt.step()
        best, _ = validate()
        history["initial_validation_loss"] = best
        best_state, waited, best_epoch = model.state(), 0, -1
        bar = progress_bar(None, progress=o.progress, total=o.epochs, desc="templates", unit="epoch")
        for epoch in range(o.epochs):
            perm = rng.permutation(fit)
            parts = [perm[s : s + o.batch_size] for s in range(0, len(perm), o.batch_size)]
            running = 0.0
            for rows in parts:
                opt.zero_grad()
                fgw, ce, _ = batch_loss(model, np.sort(rows))
                loss = fgw + o.size_weight * ce
                loss.backward()
                opt.step()
                running += float(loss.detach()) * len(rows)
            v, acc = validate()
            history["train_loss"].append(running / len(fit))
            history["validation_loss"].append(v)
            history["validation_size_accuracy"].append(acc)
            bar.update(1)
            if hasattr(bar, "set_postfix"):
                bar.set_postfix(train=f"{running / len(fit):.4f}", validation=f"{v:.4f}", size=f"{acc:.2f}")
            if v < best - 1e-6:
                best, best_state, waited, best_epoch = v, model.state(), 0, epoch
            else:
                waited += 1
                if waited >= o.patience:
                    break
        bar.close()
        model.load(best_state)
        with torch.no_grad():
            C_all, F_all, E_all = model.templates(torch)
        linear = [m for m in model.net if isinstance(m, torch.nn.Linear)]
        network = TemplateNetwork(
            mean, scale, [m.weight.detach().numpy().T.copy() for m in linear],
            [m.bias.detach().numpy().copy() for m in linear], M, size_values.astype(np.int64),
        )
        templates = TemplateSet(C_all.numpy().copy(), F_all.numpy().copy(), E_all.numpy().copy(), init.sizes.copy())
    history["best_epoch"] = best_epoch
    history["seconds"] = time.perf_counter() - start_time
    return network, templates, history

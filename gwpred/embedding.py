r"""Learned input embeddings: inputs mapped so that their similarities follow their graphs'.

The input kernels of :mod:`gwpred.weights` are fixed: an RBF kernel sees two
spectra with a band shifted by 20 cm-1 as different, however alike their
molecules.  Here a small network :math:`f_\theta` (a multilayer perceptron,
optionally after a 1-D convolution for inputs on a grid such as spectra) is
trained so that the cosine similarity of embedded inputs follows an *output*
similarity of their training graphs (the WL kernel, or fingerprint Tanimoto
for molecules); kernel ridge weights are then computed on the embeddings.
Two losses, over mini-batches of training pairs:

``listwise``
    For each input of a batch, the softmax over the batch of its embedding
    similarities (temperature ``temperature``) is fitted by cross-entropy to
    the softmax of its output similarities (temperature
    ``target_temperature``): the listwise loss of Cao et al., "Learning to
    rank: from pairwise approach to listwise approach", ICML 2007.
``alignment``
    Minus the centred kernel-target alignment between the batch's input
    kernel :math:`\exp((\cos - 1) / \tau)` and its output kernel
    (Cristianini et al., "On kernel-target alignment", NIPS 2001; centred as
    in Cortes, Mohri and Rostamizadeh, JMLR 13, 2012).

Training uses PyTorch on the CPU (the ``neural`` extra, imported only here and
only by :func:`train_embedding`), Adam, and early stopping on a held-out
share of the training inputs.  A trained :class:`InputEmbedding` holds plain
arrays and embeds with numpy: predicting, saving and loading need no torch.

Arrays in, arrays out: the caller (``BarycenterGraphPredictor(kernel="learned")``)
supplies the output similarity of its training graphs as an
:class:`OutputSimilarity`.
"""

from __future__ import annotations

import copy
import time
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import scipy.sparse as sp
from numpy.typing import ArrayLike, NDArray

from ._utils import progress_bar, require_extra, torch_settings

__all__ = [
    "EMBEDDING_LOSSES",
    "InputEmbedding",
    "OutputSimilarity",
    "train_embedding",
]

#: Training losses of :func:`train_embedding`.
EMBEDDING_LOSSES = ("listwise", "alignment")

_PURPOSE = "kernel='learned' (training an input embedding)"


# --------------------------------------------------------------------------- targets
@dataclass(frozen=True)
class OutputSimilarity:
    """Similarities between training graphs, served by blocks.

    Build with :meth:`cosine` (rows whose dot products are the kernel, e.g.
    unit-norm WL feature counts) or :meth:`tanimoto` (0/1 fingerprint bits).
    """

    rows: sp.csr_matrix
    kind: str  # "cosine" or "tanimoto"
    _bits: NDArray[np.float64] = field(default_factory=lambda: np.zeros(0), repr=False)

    @classmethod
    def cosine(cls, features: Any) -> OutputSimilarity:
        """Similarity ``F[i] . F[j]`` of feature rows (normalised to unit norm here)."""
        F = sp.csr_matrix(features, dtype=np.float64)
        norms = np.sqrt(np.asarray(F.multiply(F).sum(1)).ravel())
        if np.any(norms == 0):
            raise ValueError("every training graph needs a non-zero output feature row")
        return cls(sp.csr_matrix(sp.diags(1.0 / norms) @ F), "cosine")

    @classmethod
    def tanimoto(cls, bits: Any) -> OutputSimilarity:
        """Tanimoto similarity ``|a & b| / (|a| + |b| - |a & b|)`` of 0/1 rows."""
        B = sp.csr_matrix(bits, dtype=np.float64)
        if B.nnz and not np.all(B.data == 1.0):
            raise ValueError("tanimoto needs 0/1 bit rows")
        return cls(B, "tanimoto", np.asarray(B.sum(1)).ravel())

    def __len__(self) -> int:
        return self.rows.shape[0]

    def block(self, index: NDArray[np.int64], other: NDArray[np.int64] | None = None) -> NDArray[np.float64]:
        """The similarity matrix of the rows ``index`` against the rows ``other`` (default: ``index``)."""
        other = index if other is None else other
        inner = (self.rows[index] @ self.rows[other].T).toarray()
        if self.kind == "cosine":
            return inner
        union = self._bits[index][:, None] + self._bits[other][None, :] - inner
        return np.where(union > 0, inner / np.where(union > 0, union, 1.0), 1.0)

    def nearest(self, index: NDArray[np.int64], k: int, block_rows: int = 1024) -> NDArray[np.int64]:
        """For each of the rows ``index``, its ``k`` most similar other rows among ``index``.

        Returns an array of shape ``(len(index), k)`` of row numbers (values of
        ``index``), most similar first, ties by the smaller row number.
        """
        k = min(k, len(index) - 1)
        out = np.empty((len(index), k), dtype=np.int64)
        for start in range(0, len(index), block_rows):
            rows = np.arange(start, min(start + block_rows, len(index)))
            S = self.block(index[rows], index)
            S[np.arange(len(rows)), rows] = -np.inf  # not its own neighbour
            order = np.argsort(-S, axis=1, kind="stable")[:, :k]
            out[rows] = index[order]
        return out


# --------------------------------------------------------------------------- the embedding
@dataclass(frozen=True)
class InputEmbedding:
    """A trained embedding: standardisation, optional 1-D convolution, MLP, unit norm.

    ``z = normalise(W_L relu(... relu(W_1 h + b_1) ...) + b_L)`` with
    ``h = (x - mean) / scale``, or, with a convolution, ``h`` the flattened
    max-pooled ReLU of ``conv_channels`` filters of width ``conv_width``
    run along the standardised input.

    Attributes
    ----------
    mean, scale : ndarray of shape (n_features,)
    weights, biases : list of ndarray
        Dense layers, ``weights[l]`` of shape (inputs, outputs).
    conv_filters : ndarray of shape (channels, width), or empty (no convolution)
    conv_bias : ndarray of shape (channels,)
    pool : int
        Max-pooling width after the convolution.
    history : dict
        Training record (losses per epoch, best epoch, seconds, options).
    raw_weight : float, default=0.0
        When > 0, the embedding is ``[c u, z] / sqrt(1 + c^2)`` with ``u`` the
        raw input scaled to unit norm and ``c = raw_weight``: an RBF kernel on
        it is the product of one on the raw inputs and one on the learned part,
        so the network learns what the raw input's similarity misses.
    """

    mean: NDArray[np.float64]
    scale: NDArray[np.float64]
    weights: list[NDArray[np.float64]]
    biases: list[NDArray[np.float64]]
    conv_filters: NDArray[np.float64]
    conv_bias: NDArray[np.float64]
    pool: int
    history: dict
    raw_weight: float = 0.0

    @property
    def n_features_in(self) -> int:
        return len(self.mean)

    @property
    def dim(self) -> int:
        """Length of an embedding (the raw input's columns included when ``raw_weight > 0``)."""
        return self.weights[-1].shape[1] + (self.n_features_in if self.raw_weight > 0 else 0)

    def transform(self, X: ArrayLike, batch_size: int = 4096) -> NDArray[np.float64]:
        """Unit-norm embeddings of the rows of ``X``, shape (n, dim).

        Raises
        ------
        ValueError
            For a wrong number of columns or non-finite values.
        """
        X = sp.csr_matrix(X).toarray() if sp.issparse(X) else np.asarray(X, dtype=np.float64)
        if X.ndim != 2 or X.shape[1] != self.n_features_in:
            raise ValueError(
                f"X has shape {X.shape}; the embedding was trained on {self.n_features_in} columns"
            )
        if not np.all(np.isfinite(X)):
            raise ValueError("X holds NaN or infinite values; clean or impute them first")
        out = np.empty((len(X), self.dim))
        for start in range(0, len(X), batch_size):
            out[start : start + batch_size] = self._forward(X[start : start + batch_size])
        return out

    def _forward(self, X: NDArray[np.float64]) -> NDArray[np.float64]:
        h = (X - self.mean) / self.scale
        if self.conv_filters.size:
            h = _conv_pool_numpy(h, self.conv_filters, self.conv_bias, self.pool)
        for layer, (W, b) in enumerate(zip(self.weights, self.biases)):
            h = h @ W + b
            if layer < len(self.weights) - 1:
                h = np.maximum(h, 0.0)
        z = h / np.maximum(np.linalg.norm(h, axis=1, keepdims=True), 1e-12)
        if self.raw_weight <= 0:
            return z
        c = self.raw_weight
        return np.hstack([c * _unit_rows(X), z]) / np.sqrt(1.0 + c * c)

    # ------------------------------------------------------------ files
    def to_arrays(self) -> tuple[dict[str, NDArray[np.float64]], dict]:
        """Arrays and a JSON-ready description (model files store both; no pickle)."""
        arrays = {"mean": self.mean, "scale": self.scale, "conv_filters": self.conv_filters,
                  "conv_bias": self.conv_bias}
        for layer, (W, b) in enumerate(zip(self.weights, self.biases)):
            arrays[f"W{layer}"] = W
            arrays[f"b{layer}"] = b
        return arrays, {"n_layers": len(self.weights), "pool": int(self.pool), "history": self.history,
                        "raw_weight": float(self.raw_weight)}

    @classmethod
    def from_arrays(cls, arrays: dict[str, Any], description: dict) -> InputEmbedding:
        """Inverse of :meth:`to_arrays`, checked.

        Raises
        ------
        ValueError
            For missing arrays, shapes that do not chain, or non-finite values.
        """
        try:
            n_layers, pool = int(description["n_layers"]), int(description["pool"])
            raw_weight = float(description.get("raw_weight", 0.0))
            history = dict(description.get("history", {}))
            get = {k: np.asarray(arrays[k], dtype=np.float64) for k in ("mean", "scale", "conv_filters", "conv_bias")}
            weights = [np.asarray(arrays[f"W{i}"], dtype=np.float64) for i in range(n_layers)]
            biases = [np.asarray(arrays[f"b{i}"], dtype=np.float64) for i in range(n_layers)]
        except (KeyError, TypeError, ValueError) as err:
            raise ValueError(f"an input embedding needs its arrays and layer count ({err!r})") from err
        every = [*get.values(), *weights, *biases]
        if n_layers < 1 or pool < 1 or not all(np.all(np.isfinite(a)) for a in every):
            raise ValueError("an input embedding needs at least one layer, pool >= 1 and finite arrays")
        if not (np.isfinite(raw_weight) and raw_weight >= 0):
            raise ValueError(f"an input embedding's raw_weight must be a finite number >= 0; got {raw_weight!r}")
        mean, scale, filters, cbias = get["mean"], get["scale"], get["conv_filters"], get["conv_bias"]
        if mean.ndim != 1 or scale.shape != mean.shape or np.any(scale <= 0):
            raise ValueError("an input embedding's mean and scale must be vectors of one length, scale > 0")
        width = len(mean)
        if filters.size:
            if filters.ndim != 2 or cbias.shape != (filters.shape[0],) or filters.shape[1] > width:
                raise ValueError("an input embedding's convolution filters and bias do not match")
            width = filters.shape[0] * ((width - filters.shape[1] + 1) // pool)
        for W, b in zip(weights, biases):
            if W.ndim != 2 or W.shape[0] != width or b.shape != (W.shape[1],):
                raise ValueError("an input embedding's layer shapes do not chain")
            width = W.shape[1]
        return cls(mean, scale, weights, biases, filters, cbias, pool, history, raw_weight)


def _unit_rows(X: NDArray[np.float64]) -> NDArray[np.float64]:
    """Rows scaled to unit Euclidean norm (all-zero rows stay zero)."""
    norms = np.linalg.norm(X, axis=1, keepdims=True)
    return X / np.where(norms > 0, norms, 1.0)


def _conv_pool_numpy(h: NDArray[np.float64], filters: NDArray[np.float64], bias: NDArray[np.float64],
                     pool: int) -> NDArray[np.float64]:
    """ReLU(valid 1-D cross-correlation + bias), max-pooled by ``pool``, flattened channel-major."""
    windows = np.lib.stride_tricks.sliding_window_view(h, filters.shape[1], axis=1)  # (n, L, w)
    maps = np.maximum(np.einsum("nlw,cw->ncl", windows, filters) + bias[None, :, None], 0.0)
    length = maps.shape[2] // pool
    pooled = maps[:, :, : length * pool].reshape(len(h), len(filters), length, pool).max(3)
    return pooled.reshape(len(h), -1)


# --------------------------------------------------------------------------- torch side
def _torch() -> Any:
    return require_extra("torch", _PURPOSE)


def listwise_loss(Z: Any, K: Any, temperature: float, target_temperature: float) -> Any:
    """Mean over rows of the cross-entropy between softmax(K / target_temperature) and
    softmax(Z Z^T / temperature), the diagonal left out (torch tensors; ``Z`` unit rows)."""
    torch = _torch()
    n = Z.shape[0]
    eye = torch.eye(n, dtype=torch.bool)
    S = (Z @ Z.T / temperature).masked_fill(eye, float("-inf"))
    T = (K / target_temperature).masked_fill(eye, float("-inf"))
    P = torch.softmax(T, dim=1)
    logQ = torch.log_softmax(S, dim=1).masked_fill(eye, 0.0)
    return -(P * logQ).sum(1).mean()


def alignment_loss(Z: Any, K: Any, temperature: float) -> Any:
    """Minus the centred alignment of exp((Z Z^T - 1) / temperature) with ``K`` (torch tensors)."""
    torch = _torch()
    n = Z.shape[0]
    H = torch.eye(n, dtype=Z.dtype) - 1.0 / n
    Kin = H @ torch.exp((Z @ Z.T - 1.0) / temperature) @ H
    Kout = H @ K @ H
    return -(Kin * Kout).sum() / (Kin.norm() * Kout.norm() + 1e-12)


def _network(n_features: int, hidden: tuple[int, ...], dim: int, conv: tuple[int, int, int] | None,
             dtype: Any) -> Any:
    torch = _torch()
    nn = torch.nn
    parts: list[Any] = []
    width = n_features
    if conv is not None:
        channels, kernel, pool = conv
        parts += [nn.Unflatten(1, (1, n_features)), nn.Conv1d(1, channels, kernel), nn.ReLU(),
                  nn.MaxPool1d(pool), nn.Flatten()]
        width = channels * ((n_features - kernel + 1) // pool)
    for h in hidden:
        parts += [nn.Linear(width, h), nn.ReLU()]
        width = h
    parts.append(nn.Linear(width, dim))
    return nn.Sequential(*parts).to(dtype)


def _as_embedding(net: Any, mean: NDArray[np.float64], scale: NDArray[np.float64], conv: tuple | None,
                  history: dict, raw_weight: float) -> InputEmbedding:
    torch = _torch()
    linear = [m for m in net if isinstance(m, torch.nn.Linear)]
    weights = [m.weight.detach().double().numpy().T.copy() for m in linear]
    biases = [m.bias.detach().double().numpy().copy() for m in linear]
    filters, cbias, pool = np.zeros((0, 0)), np.zeros(0), 1
    if conv is not None:
        c = next(m for m in net if isinstance(m, torch.nn.Conv1d))
        filters = c.weight.detach().double().numpy()[:, 0, :].copy()
        cbias = c.bias.detach().double().numpy().copy()
        pool = conv[2]
    return InputEmbedding(mean, scale, weights, biases, filters, cbias, pool, history, raw_weight)


def _loss_floor(K: NDArray[np.float64], loss: str, target_temperature: float) -> float:
    """The lowest value of the loss on a batch with output similarities ``K``: the mean entropy of
    the target rows (listwise; reached when the embedding's softmax equals the target's), or -1
    (alignment)."""
    if loss == "alignment":
        return -1.0
    T = K / target_temperature
    np.fill_diagonal(T, -np.inf)
    T -= T.max(1, keepdims=True)
    P = np.exp(T)
    P /= P.sum(1, keepdims=True)
    with np.errstate(divide="ignore", invalid="ignore"):
        return float(-np.nansum(np.where(P > 0, P * np.log(P), 0.0), axis=1).mean())


def _batches(index: NDArray[np.int64], size: int, rng: np.random.Generator | None,
             neighbours: NDArray[np.int64] | None = None) -> list[NDArray[np.int64]]:
    """Mini-batches of ``index``: random (shuffled by ``rng``, in order without it), or, with
    ``neighbours`` (one row of output neighbours per item of ``index``), groups of anchors each
    joined by its neighbours, the same number of batches as random ones would make."""
    order = index if rng is None else rng.permutation(index)
    if neighbours is not None:
        pos = np.searchsorted(index, order)
        group = 1 + neighbours.shape[1]
        anchors = max(1, size // group)
        n_batches = max(1, len(index) // size)
        out = []
        for b in range(n_batches):
            take = pos[(b * anchors + np.arange(anchors)) % len(pos)]
            out.append(np.unique(np.concatenate([index[take], neighbours[take].ravel()])))
        return out
    out = [order[s : s + size] for s in range(0, len(order), size)]
    if len(out) > 1 and len(out[-1]) < max(2, size // 4):  # a tiny last batch says little: merge it
        last = out.pop()
        out[-1] = np.concatenate([out[-1], last])
    return out


def train_embedding(
    X: ArrayLike,
    similarity: OutputSimilarity,
    *,
    dim: int = 64,
    hidden: tuple[int, ...] = (256,),
    conv: tuple[int, int, int] | None = None,
    loss: str = "listwise",
    temperature: float = 0.1,
    target_temperature: float = 0.1,
    epochs: int = 200,
    batch_size: int = 256,
    neighbours: int = 0,
    raw_weight: float = 1.0,
    learning_rate: float = 1e-3,
    weight_decay: float = 1e-5,
    validation_share: float = 0.1,
    patience: int = 10,
    n_threads: int | None = None,
    random_state: int | None = None,
    progress: bool = False,
) -> InputEmbedding:
    """Train :math:`f_\\theta` so that embedding similarities follow ``similarity`` (see the module notes).

    Parameters
    ----------
    X : array-like of shape (n, n_features)
        Training inputs (dense or sparse, finite).
    similarity : OutputSimilarity
        Output similarity of the ``n`` training graphs, in the order of ``X``.
    dim : int, default=64
        Embedding length.
    hidden : tuple of int, default=(256,)
        Hidden layer widths (ReLU).
    conv : (channels, width, pool), optional
        A 1-D convolution over the input columns first (inputs on a grid,
        e.g. spectra), max-pooled by ``pool``.
    loss : {"listwise", "alignment"}, default="listwise"
    temperature, target_temperature : float, default=0.1
        Of the embedding similarities and of the output similarities.
    epochs : int, default=200
        Most passes over the training part.
    batch_size : int, default=256
    neighbours : int, default=0
        0: random batches.  k > 0: each batch is ``batch_size // (k + 1)``
        random anchors, each with its ``k`` most similar training graphs
        under the output similarity (hard negatives: the batch's softmax
        must tell close graphs apart, not only far ones); the validation
        batches are built the same way within the held-out part.
    raw_weight : float, default=1.0
        Keep the raw input (unit norm, weight ``raw_weight``) beside the
        learned part, in training and after (see :class:`InputEmbedding`);
        0 for the learned part alone.  On QM9 (10,000 training molecules,
        ``benchmarks/bench_learned_kernel.py``) the learned part alone did
        worse than the fixed kernels, and beside the raw input better.
    learning_rate, weight_decay : float
        Adam's.
    validation_share : float, default=0.1
        Share of ``X`` held out for early stopping (at least 2 rows).
    patience : int, default=10
        Epochs without a lower validation loss before stopping; the best
        epoch's weights are kept.
    n_threads : int, optional
        torch threads while training (None: torch's default); restored after.
    random_state : int, optional
        Seeds the split, the batches and torch's initialisation
        (deterministic algorithms on): equal seeds give equal embeddings.
    progress : bool, default=False
        A progress bar over epochs, with the losses.

    Returns
    -------
    InputEmbedding
        ``history`` holds per-epoch training and validation losses, the
        untrained network's validation loss and the lowest any network could
        reach there (``validation_floor``), the best epoch, seconds and these
        options.

    Raises
    ------
    ValueError
        For mismatched lengths, non-finite inputs, fewer than 4 rows or bad options.
    ImportError
        Without PyTorch (install the ``neural`` extra).
    """
    X = sp.csr_matrix(X).toarray() if sp.issparse(X) else np.asarray(X, dtype=np.float64)
    if X.ndim != 2 or len(X) != len(similarity):
        raise ValueError(f"X has {len(X)} rows but the output similarity covers {len(similarity)} graphs")
    if len(X) < 4:
        raise ValueError("training an embedding needs at least 4 pairs")
    if not np.all(np.isfinite(X)):
        raise ValueError("X holds NaN or infinite values; clean or impute them first")
    if loss not in EMBEDDING_LOSSES:
        raise ValueError(f"loss must be one of {list(EMBEDDING_LOSSES)}; got {loss!r}")
    if not 0.0 < validation_share < 1.0 or temperature <= 0 or target_temperature <= 0:
        raise ValueError("validation_share must lie in (0, 1) and the temperatures be > 0")
    if not (isinstance(raw_weight, (int, float, np.integer, np.floating)) and np.isfinite(raw_weight)
            and raw_weight >= 0) or isinstance(raw_weight, bool):
        raise ValueError(f"raw_weight must be a finite number >= 0; got {raw_weight!r}")
    if isinstance(neighbours, bool) or not isinstance(neighbours, (int, np.integer)) or neighbours < 0:
        raise ValueError(f"neighbours must be an integer >= 0; got {neighbours!r}")
    if conv is not None and (len(conv) != 3 or min(conv) < 1 or conv[1] > X.shape[1]):
        raise ValueError(f"conv must be (channels, width, pool), each >= 1, width <= {X.shape[1]}; got {conv!r}")
    torch = _torch()
    options = {"dim": dim, "hidden": list(hidden), "conv": None if conv is None else list(conv), "loss": loss,
               "temperature": temperature, "target_temperature": target_temperature, "epochs": epochs,
               "batch_size": batch_size, "neighbours": neighbours, "raw_weight": raw_weight, "learning_rate": learning_rate, "weight_decay": weight_decay,
               "validation_share": validation_share, "patience": patience, "n_threads": n_threads,
               "random_state": random_state}
    rng = np.random.default_rng(random_state)
    order = rng.permutation(len(X))
    n_val = min(max(2, int(round(validation_share * len(X)))), len(X) - 2)
    val, fit = np.sort(order[:n_val]), np.sort(order[n_val:])
    mean = X[fit].mean(0)
    scale = X[fit].std(0)
    scale = np.where(scale > 1e-12, scale, 1.0)
    Xs = torch.from_numpy(((X - mean) / scale).astype(np.float32))
    raw = torch.from_numpy((raw_weight * _unit_rows(X)).astype(np.float32)) if raw_weight > 0 else None
    seed = int(rng.integers(2**31 - 1))

    def batch_loss(net: Any, index: NDArray[np.int64]) -> Any:
        rows = torch.from_numpy(index)
        Z = torch.nn.functional.normalize(net(Xs[rows]), dim=1)
        if raw is not None:
            Z = torch.cat([raw[rows], Z], dim=1) / float(np.sqrt(1.0 + raw_weight**2))
        K = torch.from_numpy(similarity.block(index).astype(np.float32))
        if loss == "listwise":
            return listwise_loss(Z, K, temperature, target_temperature)
        return alignment_loss(Z, K, temperature)

    start = time.perf_counter()
    history: dict[str, Any] = {"train_loss": [], "validation_loss": [], "options": options}
    with torch_settings(n_threads, seed, _PURPOSE):
        net = _network(X.shape[1], tuple(hidden), dim, None if conv is None else tuple(conv), torch.float32)
        opt = torch.optim.Adam(net.parameters(), lr=learning_rate, weight_decay=weight_decay)
        near_fit = similarity.nearest(fit, neighbours) if neighbours else None
        near_val = similarity.nearest(val, neighbours) if neighbours else None
        val_batches = _batches(val, batch_size, None, near_val)
        with torch.no_grad():  # the untrained network's, and the lowest any network can reach, for reference
            history["initial_validation_loss"] = float(np.mean([float(batch_loss(net, i)) for i in val_batches]))
            history["validation_floor"] = float(np.mean([_loss_floor(similarity.block(i), loss, target_temperature)
                                                         for i in val_batches]))
        best, best_state, waited = np.inf, copy.deepcopy(net.state_dict()), 0
        bar = progress_bar(None, progress=progress, total=epochs, desc="embedding", unit="epoch")
        for epoch in range(epochs):
            net.train()
            total = 0.0
            parts = _batches(fit, batch_size, rng, near_fit)
            for index in parts:
                opt.zero_grad()
                value = batch_loss(net, index)
                value.backward()
                opt.step()
                total += float(value.detach())
            net.eval()
            with torch.no_grad():
                v = float(np.mean([float(batch_loss(net, index)) for index in val_batches]))
            history["train_loss"].append(total / len(parts))
            history["validation_loss"].append(v)
            bar.update(1)
            if hasattr(bar, "set_postfix"):
                bar.set_postfix(train=f"{total / len(parts):.4f}", validation=f"{v:.4f}")
            if v < best - 1e-6:
                best, best_state, waited = v, copy.deepcopy(net.state_dict()), 0
                history["best_epoch"] = epoch
            else:
                waited += 1
                if waited >= patience:
                    break
        bar.close()
        net.load_state_dict(best_state)
    history["seconds"] = time.perf_counter() - start
    history.setdefault("best_epoch", 0)
    return _as_embedding(net, mean, scale, None if conv is None else tuple(conv), history, float(raw_weight))

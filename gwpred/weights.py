r"""Input kernels and weights over training items: x -> w(x).

Kernel ridge regression with an output-space target writes its prediction
for an input ``x`` as a weighted combination of training outputs with weights

.. math::

    \alpha(x) = (K + n \lambda I)^{-1} k(x)

where :math:`K` is the training kernel matrix and :math:`k(x)` the kernel
values between the training inputs and ``x``; the FGW barycenter of the
training graphs with these weights is the surrogate prediction (Brogat-Motte
et al., ICML 2022).  This module computes kernels and such weights, and
sparsifies them to the few training items that matter.  It does not know
about graphs.
"""

from __future__ import annotations

from typing import Callable

import numpy as np
from numpy.typing import ArrayLike, NDArray
from scipy.linalg import cho_factor, cho_solve

__all__ = [
    "KERNELS",
    "kernel_matrix",
    "median_gamma",
    "KernelRidgeWeights",
    "sparsify",
]

Array = NDArray[np.float64]


def _sqdist(X: Array, Y: Array) -> Array:
    d = (X * X).sum(1)[:, None] + (Y * Y).sum(1)[None, :] - 2.0 * X @ Y.T
    return np.maximum(d, 0.0)


def _rbf(X: Array, Y: Array, gamma: float) -> Array:
    return np.exp(-gamma * _sqdist(X, Y))


def _laplacian(X: Array, Y: Array, gamma: float) -> Array:
    d = np.abs(X[:, None, :] - Y[None, :, :]).sum(-1) if X.size * len(Y) < 5e7 else None
    if d is None:  # row blocks keep memory bounded
        d = np.vstack([np.abs(X[i : i + 64, None, :] - Y[None]).sum(-1) for i in range(0, len(X), 64)])
    return np.exp(-gamma * d)


def _tanimoto(X: Array, Y: Array, gamma: float) -> Array:
    # MinMax similarity sum(min) / sum(max): Tanimoto on binary vectors, MinMax on counts
    if np.array_equal(X, X.astype(bool)) and np.array_equal(Y, Y.astype(bool)):
        inter = X @ Y.T
        union = X.sum(1)[:, None] + Y.sum(1)[None, :] - inter
    else:
        inter = np.vstack([np.minimum(X[i : i + 64, None, :], Y[None]).sum(-1) for i in range(0, len(X), 64)])
        union = np.vstack([np.maximum(X[i : i + 64, None, :], Y[None]).sum(-1) for i in range(0, len(X), 64)])
    with np.errstate(invalid="ignore", divide="ignore"):
        K = np.where(union > 0, inter / np.where(union > 0, union, 1.0), 1.0)
    return K


def _cosine(X: Array, Y: Array, gamma: float) -> Array:
    nx_ = np.linalg.norm(X, axis=1)[:, None]
    ny_ = np.linalg.norm(Y, axis=1)[None, :]
    with np.errstate(invalid="ignore", divide="ignore"):
        K = (X @ Y.T) / (nx_ * ny_)
    return np.nan_to_num(K, nan=0.0)


def _linear(X: Array, Y: Array, gamma: float) -> Array:
    return X @ Y.T


KERNELS: dict[str, Callable[[Array, Array, float], Array]] = {
    "rbf": _rbf,
    "laplacian": _laplacian,
    "tanimoto": _tanimoto,
    "cosine": _cosine,
    "linear": _linear,
}
"""Named input kernels: ``name -> f(X, Y, gamma)``; ``precomputed`` is handled apart."""


def median_gamma(X: ArrayLike, kernel: str = "rbf", max_rows: int = 1000, random_state: int = 0) -> float:
    """Bandwidth ``1 / median distance`` (the median heuristic, common practice).

    Parameters
    ----------
    X : array-like of shape (n, d)
    kernel : {"rbf", "laplacian"}, default="rbf"
        ``rbf`` uses squared Euclidean distances, ``laplacian`` L1 distances.
    max_rows : int, default=1000
        Subsample size for large ``X``.
    random_state : int, default=0

    Returns
    -------
    float

    Examples
    --------
    >>> median_gamma([[0.0], [1.0], [3.0]])
    0.25
    """
    if kernel not in ("rbf", "laplacian"):
        raise ValueError(f"median_gamma supports kernel='rbf' or 'laplacian'; got {kernel!r}.")
    X = np.asarray(X, dtype=np.float64)
    if len(X) > max_rows:
        X = X[np.random.default_rng(random_state).choice(len(X), max_rows, replace=False)]
    if kernel == "laplacian":
        D = np.abs(X[:, None, :] - X[None]).sum(-1)
    else:
        D = _sqdist(X, X)
    med = np.median(D[np.triu_indices(len(X), 1)]) if len(X) > 1 else 0.0
    return float(1.0 / med) if med > 0 else 1.0


def kernel_matrix(X: ArrayLike, Y: ArrayLike, kernel: str = "rbf", gamma: float = 1.0) -> Array:
    """Kernel values between the rows of ``X`` and the rows of ``Y``.

    Parameters
    ----------
    X : array-like of shape (n, d)
    Y : array-like of shape (m, d)
    kernel : {"rbf", "laplacian", "tanimoto", "cosine", "linear"}, default="rbf"
        ``rbf``: ``exp(-gamma ||x - y||^2)``; ``laplacian``: ``exp(-gamma ||x - y||_1)``;
        ``tanimoto``: ``sum(min(x, y)) / sum(max(x, y))`` (Tanimoto on binary
        fingerprints, MinMax on counts; two zero vectors have similarity 1);
        ``cosine``; ``linear``.
    gamma : float, default=1.0
        Bandwidth of ``rbf`` and ``laplacian``; ignored by the others.

    Returns
    -------
    ndarray of shape (n, m)

    Raises
    ------
    ValueError
        For an unknown kernel name, or negative entries with ``tanimoto``.

    Examples
    --------
    >>> kernel_matrix([[1, 1, 0]], [[1, 0, 0], [1, 1, 0]], "tanimoto")
    array([[0.5, 1. ]])
    """
    if kernel not in KERNELS:
        raise ValueError(
            f"kernel must be one of {sorted(KERNELS) + ['precomputed']}; got {kernel!r}."
        )
    X = np.asarray(X, dtype=np.float64)
    Y = np.asarray(Y, dtype=np.float64)
    if kernel == "tanimoto" and (np.any(X < 0) or np.any(Y < 0)):
        raise ValueError(
            "the tanimoto kernel needs non-negative inputs (bits or counts); "
            "use kernel='rbf' or 'cosine' for signed features."
        )
    return KERNELS[kernel](X, Y, gamma)


def sparsify(
    W: ArrayLike, top_k: int | None = 10, *, negative: str = "clip"
) -> tuple[NDArray[np.int64], Array]:
    """Keep the ``top_k`` largest weights per row, made non-negative and summing to one.

    Parameters
    ----------
    W : array-like of shape (n_queries, n_train)
        Raw weights (kernel ridge coefficients, kernel values, ...).
    top_k : int or None, default=10
        Number of training items kept per row; ``None`` keeps all.
    negative : {"clip", "shift"}, default="clip"
        ``clip`` sets negative weights to zero; ``shift`` subtracts the row
        minimum of the kept weights.  If a row has no positive weight left,
        its largest weight gets all the mass.

    Returns
    -------
    indices : ndarray of shape (n_queries, k)
        Training indices, by decreasing weight (ties by index).
    weights : ndarray of shape (n_queries, k)
        Non-negative weights that sum to one per row.

    Raises
    ------
    ValueError
        For a non-positive ``top_k``, an unknown ``negative`` policy or non-finite weights.

    Notes
    -----
    FGW barycenters need weights on the probability simplex: the closed-form
    structure update is a convex combination only then, and a negative
    weight can push structure scores outside ``[0, 1]``.

    Examples
    --------
    >>> idx, w = sparsify([[0.1, -0.2, 0.3, 0.6]], top_k=3)
    >>> idx.tolist(), w.round(2).tolist()
    ([[3, 2, 0]], [[0.6, 0.3, 0.1]])
    """
    W = np.atleast_2d(np.asarray(W, dtype=np.float64))
    if not np.all(np.isfinite(W)):
        raise ValueError("weights contain NaN or infinite values; check the inputs and kernel.")
    if negative not in ("clip", "shift"):
        raise ValueError(f"negative must be 'clip' or 'shift'; got {negative!r}.")
    n_train = W.shape[1]
    if n_train == 0:
        raise ValueError("W has no columns (no training items); fit on at least one item.")
    k = n_train if top_k is None else int(top_k)
    if k < 1:
        raise ValueError(f"top_k must be a positive integer or None; got {top_k!r}.")
    k = min(k, n_train)
    # stable sort on -W: ties resolved by training index
    idx = np.argsort(-W, axis=1, kind="stable")[:, :k]
    vals = np.take_along_axis(W, idx, axis=1)
    if negative == "clip":
        vals = np.maximum(vals, 0.0)
    else:
        vals = vals - vals.min(axis=1, keepdims=True)
    sums = vals.sum(axis=1, keepdims=True)
    dead = sums[:, 0] <= 0
    vals[dead] = 0.0
    vals[dead, 0] = 1.0
    sums[dead] = 1.0
    return idx, vals / sums


class KernelRidgeWeights:
    r"""Kernel ridge weights :math:`(K + n\lambda I)^{-1} k(x)` or k-NN weights.

    Parameters
    ----------
    kernel : {"rbf", "laplacian", "tanimoto", "cosine", "linear", "precomputed"}, default="rbf"
        Input kernel.  With ``precomputed``, ``fit`` takes the training kernel
        matrix and ``raw_weights`` the test-by-train kernel matrix.
    gamma : float or None, default=None
        Bandwidth of ``rbf``/``laplacian``; ``None`` uses the median heuristic
        on the training inputs.
    ridge : float, default=1e-3
        Regularisation :math:`\lambda`.
    method : {"ridge", "knn"}, default="ridge"
        ``ridge``: kernel ridge coefficients.  ``knn``: the kernel values
        themselves (so that :func:`sparsify` keeps the nearest neighbours
        weighted by similarity).
    random_state : int, default=0
        Seed of the subsample used by the bandwidth heuristic.

    Attributes
    ----------
    gamma_ : float
        Bandwidth used.
    X_fit_ : ndarray of shape (n, d)
        Training inputs (absent with ``precomputed``).
    K_fit_ : ndarray of shape (n, n)
        Training kernel (only with ``precomputed``).
    n_train_ : int

    Examples
    --------
    >>> import numpy as np
    >>> X = np.array([[0.0], [1.0], [2.0]])
    >>> w = KernelRidgeWeights(gamma=1.0, ridge=1e-6).fit(X).raw_weights(X)
    >>> np.allclose(w, np.eye(3), atol=1e-4)
    True
    """

    def __init__(
        self,
        kernel: str = "rbf",
        gamma: float | None = None,
        ridge: float = 1e-3,
        method: str = "ridge",
        random_state: int = 0,
    ) -> None:
        self.kernel = kernel
        self.gamma = gamma
        self.ridge = ridge
        self.method = method
        self.random_state = random_state

    def _k(self, X: Array, Y: Array) -> Array:
        return kernel_matrix(X, Y, self.kernel, self.gamma_)

    def fit(self, X: ArrayLike) -> KernelRidgeWeights:
        """Store the training inputs and factor :math:`K + n\\lambda I`.

        Parameters
        ----------
        X : array-like of shape (n, d), or (n, n) with ``kernel="precomputed"``

        Returns
        -------
        KernelRidgeWeights
            ``self``.

        Raises
        ------
        ValueError
            For an unknown kernel or method, a negative ridge, a non-square
            precomputed kernel or a kernel matrix that cannot be factored.
        """
        if self.kernel != "precomputed" and self.kernel not in KERNELS:
            raise ValueError(
                f"kernel must be one of {sorted(KERNELS) + ['precomputed']}; got {self.kernel!r}."
            )
        if self.method not in ("ridge", "knn"):
            raise ValueError(f"method must be 'ridge' or 'knn'; got {self.method!r}.")
        if not (isinstance(self.ridge, (int, float)) and self.ridge >= 0):
            raise ValueError(f"ridge must be a non-negative number; got {self.ridge!r}.")
        X = np.asarray(X, dtype=np.float64)
        n = X.shape[0]
        if self.kernel == "precomputed":
            if X.shape != (n, n):
                raise ValueError(
                    f"with kernel='precomputed', fit needs the square training kernel matrix; got shape {X.shape}."
                )
            K = X
            self.K_fit_ = X
            self.gamma_ = float("nan")
        else:
            if X.ndim != 2:
                raise ValueError(f"X must be 2-D (n_samples, n_features); got shape {X.shape}.")
            if self.gamma is not None:
                self.gamma_ = float(self.gamma)
            elif self.kernel in ("rbf", "laplacian"):
                self.gamma_ = median_gamma(X, self.kernel, random_state=self.random_state)
            else:  # the other kernels have no bandwidth
                self.gamma_ = 1.0
            self.X_fit_ = X
            K = self._k(X, X)
        self.n_train_ = n
        if self.method == "ridge":
            A = K + n * self.ridge * np.eye(n)
            try:
                self._factor = cho_factor(A, lower=True, check_finite=False)
            except np.linalg.LinAlgError:
                raise ValueError(
                    "the regularised kernel matrix is not positive definite; increase ridge "
                    f"(now {self.ridge}) or use a positive definite kernel."
                ) from None
        return self

    def raw_weights(self, X: ArrayLike) -> Array:
        """Dense weights of each query over the training items.

        Parameters
        ----------
        X : array-like of shape (n_queries, d), or (n_queries, n_train) with ``precomputed``

        Returns
        -------
        ndarray of shape (n_queries, n_train)
            Kernel ridge coefficients (may be negative, need not sum to one),
            or kernel values with ``method="knn"``.
        """
        if not hasattr(self, "n_train_"):
            raise ValueError("this KernelRidgeWeights is not fitted yet; call fit(X) first.")
        X = np.asarray(X, dtype=np.float64)
        if self.kernel == "precomputed":
            if X.ndim != 2 or X.shape[1] != self.n_train_:
                raise ValueError(
                    f"with kernel='precomputed', pass the (n_queries, {self.n_train_}) kernel "
                    f"between queries and training items; got shape {X.shape}."
                )
            Kx = X
        else:
            if X.ndim != 2 or X.shape[1] != self.X_fit_.shape[1]:
                raise ValueError(
                    f"queries must have {self.X_fit_.shape[1]} features like the training inputs; "
                    f"got shape {X.shape}."
                )
            Kx = self._k(X, self.X_fit_)
        if self.method == "knn":
            return Kx
        return cho_solve(self._factor, Kx.T, check_finite=False).T

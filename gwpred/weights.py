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

from typing import Any, Callable

import numpy as np
import scipy.sparse as sp
from numpy.typing import ArrayLike, NDArray
from scipy.linalg import cho_factor, cho_solve
from threadpoolctl import threadpool_limits

from ._utils import half_physical_memory
from .parallel import parallel_map

__all__ = [
    "KERNELS",
    "kernel_matrix",
    "median_gamma",
    "default_memory_limit",
    "KernelRidgeWeights",
    "LocalRidgeWeights",
    "sparsify",
]

Array = NDArray[np.float64]

#: Elements of one block's temporaries in the kernels below (2 MiB of float64): kernels
#: are computed in blocks into their result, never with full-size temporaries.
_BLOCK_ELEMENTS = 2**18


def _row_blocks(n_rows: int, row_elements: int) -> list[slice]:
    """Row slices whose temporaries of ``row_elements`` elements per row fit :data:`_BLOCK_ELEMENTS`."""
    step = max(1, _BLOCK_ELEMENTS // max(1, row_elements))
    return [slice(i, i + step) for i in range(0, n_rows, step)]


def _sqdist(X: Array, Y: Array) -> Array:
    # (|x|^2 + |y|^2) - (2 x).y, in place in the product, block by block (same values as one expression)
    d = (2.0 * X) @ Y.T
    x2, y2 = (X * X).sum(1), (Y * Y).sum(1)
    for b in _row_blocks(len(X), len(Y)):
        np.subtract(x2[b, None] + y2[None, :], d[b], out=d[b])
    return np.maximum(d, 0.0, out=d)


def _rbf(X: Array, Y: Array, gamma: float) -> Array:
    d = _sqdist(X, Y)
    d *= -gamma
    return np.exp(d, out=d)


def _pairwise_sums(X: Array, Y: Array, op: Callable[..., Array]) -> Array:
    """``sum(op(x, y))`` over features for every pair of rows, in blocks of rows of both."""
    out = np.empty((len(X), len(Y)))
    for c in _row_blocks(len(Y), X.shape[1]):
        Yc = Y[None, c]
        for b in _row_blocks(len(X), Yc.size):
            out[b, c] = op(X[b, None, :], Yc).sum(-1)
    return out


def _laplacian(X: Array, Y: Array, gamma: float) -> Array:
    d = _pairwise_sums(X, Y, lambda a, b: np.abs(a - b))
    d *= -gamma
    return np.exp(d, out=d)


def _is_binary(X: NDArray[Any]) -> bool:
    """Whether every entry is 0 or 1 (no full-size temporary)."""
    if X.dtype == np.bool_ or X.size == 0:
        return True
    if np.issubdtype(X.dtype, np.integer):
        return bool(X.min() >= 0 and X.max() <= 1)
    return all(np.array_equal(X[b], X[b].astype(bool)) for b in _row_blocks(len(X), X.shape[-1]))


def _ratio(inter: Array, union: Array) -> Array:
    # intersection / union, with 1 where both vectors are zero
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(union > 0, inter / np.where(union > 0, union, 1.0), 1.0)


def _ratio_rows(inter: Array, x_sums: Array, y_sums: Array) -> Array:
    """Tanimoto from intersections and bit counts, written over ``inter`` block by block."""
    for b in _row_blocks(len(inter), inter.shape[1]):
        inter[b] = _ratio(inter[b], x_sums[b, None] + y_sums[None, :] - inter[b])
    return inter


def _tanimoto(X: Array, Y: Array, gamma: float) -> Array:
    # MinMax similarity sum(min) / sum(max): Tanimoto on binary vectors, MinMax on counts
    if _is_binary(X) and _is_binary(Y):
        return _ratio_rows(X @ Y.T, X.sum(1), Y.sum(1))
    inter, union = _pairwise_sums(X, Y, np.minimum), _pairwise_sums(X, Y, np.maximum)
    for b in _row_blocks(len(X), len(Y)):
        inter[b] = _ratio(inter[b], union[b])
    return inter


def _tanimoto_sparse(X: sp.csr_matrix, x_sums: Array, Y: Array, y_sums: Array) -> Array:
    # the same Tanimoto on 0/1 rows; intersections from a sparse-by-dense product (exact integer
    # counts) that costs nnz(X) * len(Y) instead of the dense len(X) * d * len(Y)
    inter = np.ascontiguousarray(X @ np.ascontiguousarray(Y.T), dtype=np.float64)
    return _ratio_rows(inter, x_sums, y_sums)


def _cosine(X: Array, Y: Array, gamma: float) -> Array:
    nx_, ny_ = np.linalg.norm(X, axis=1), np.linalg.norm(Y, axis=1)
    K = X @ Y.T
    with np.errstate(invalid="ignore", divide="ignore"):
        for b in _row_blocks(len(X), len(Y)):
            np.divide(K[b], nx_[b, None] * ny_[None, :], out=K[b])
    return np.nan_to_num(K, nan=0.0, copy=False)


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
    X = np.asarray(X)
    if len(X) > max_rows:  # the subsample first: a compact X is converted only there
        X = X[np.random.default_rng(random_state).choice(len(X), max_rows, replace=False)]
    X = np.asarray(X, dtype=np.float64)
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
    _check_kernel_name(kernel)
    X = np.asarray(X, dtype=np.float64)
    Y = np.asarray(Y, dtype=np.float64)
    _check_kernel_inputs(kernel, X)
    _check_kernel_inputs(kernel, Y)
    return _kernel(X, Y, kernel, gamma)


def _kernel(X: ArrayLike, Y: ArrayLike, kernel: str, gamma: float) -> Array:
    """:func:`kernel_matrix` without the input checks, for inputs the weight models checked once
    (the training inputs at fit, the queries on entry), not again on every block."""
    return KERNELS[kernel](np.asarray(X, dtype=np.float64), np.asarray(Y, dtype=np.float64), gamma)


def _check_kernel_name(kernel: str, precomputed: bool = False) -> None:
    if kernel not in KERNELS and not (precomputed and kernel == "precomputed"):
        raise ValueError(
            f"kernel must be one of {sorted(KERNELS) + ['precomputed']}; got {kernel!r}."
        )


def _check_kernel_inputs(kernel: str, X: NDArray[Any]) -> None:
    if np.issubdtype(X.dtype, np.floating) and X.size:
        # squared norms overflow to inf long before the values do: every kernel would be NaN
        with np.errstate(over="ignore"):
            big = not all(np.isfinite(np.einsum("ij,ij->i", X[b], X[b])).all() for b in _row_blocks(len(X), X.shape[1]))
        if big:
            raise ValueError(
                f"the inputs hold values so large (largest magnitude {np.abs(X).max():.3g}) that squared "
                "norms overflow and every kernel value would be NaN; rescale the features (e.g. "
                "standardise them) the same way for fit and predict."
            )
    if kernel != "tanimoto" or X.dtype == np.bool_ or np.issubdtype(X.dtype, np.unsignedinteger):
        return
    # integers: min() makes no (n, d) temporary; floats may hold NaN, which min() would return
    negative = X.size > 0 and X.min() < 0 if np.issubdtype(X.dtype, np.integer) else np.any(X < 0)
    if negative:
        raise ValueError(
            "the tanimoto kernel needs non-negative inputs (bits or counts); "
            "use kernel='rbf' or 'cosine' for signed features."
        )


def default_memory_limit() -> int:
    """Half of the machine's physical memory in bytes (8 GB where it cannot be read).

    The default ``memory_limit`` of :class:`KernelRidgeWeights`.

    Returns
    -------
    int

    Examples
    --------
    >>> default_memory_limit() > 0
    True
    """
    return half_physical_memory()


def _check_method_and_ridge(method: str, ridge: float) -> None:
    if method not in ("ridge", "knn"):
        raise ValueError(f"method must be 'ridge' or 'knn'; got {method!r}.")
    if not (isinstance(ridge, (int, float)) and ridge >= 0):
        raise ValueError(f"ridge must be a non-negative number; got {ridge!r}.")


def _fit_gamma(X: Array, kernel: str, gamma: float | None, random_state: int) -> float:
    if gamma is not None:
        return float(gamma)
    if kernel in ("rbf", "laplacian"):
        return median_gamma(X, kernel, random_state=random_state)
    return 1.0  # the other kernels have no bandwidth


def _factor(A: Array, ridge: float) -> tuple[Array, bool]:
    try:
        return cho_factor(A, lower=True, check_finite=False)
    except np.linalg.LinAlgError:
        raise ValueError(
            "the regularised kernel matrix is not positive definite; increase ridge "
            f"(now {ridge}) or use a positive definite kernel."
        ) from None


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


def _check_empty(empty: str) -> None:
    if empty not in ("first", "error"):
        raise ValueError(f"empty must be 'first' or 'error'; got {empty!r}.")


def _empty_rows(W: Array) -> NDArray[np.int64]:
    """Rows whose raw weights are all zero (every kernel value 0)."""
    return np.flatnonzero(~np.any(W != 0, axis=1)) if W.shape[1] else np.zeros(0, dtype=np.int64)


def _refuse_empty(rows: NDArray[np.int64]) -> None:
    """Refuse inputs that no training graph can be weighted for, naming them."""
    if rows.size:
        shown = ", ".join(str(int(r)) for r in rows[:10]) + (", ..." if rows.size > 10 else "")
        raise ValueError(
            f"{rows.size} input row(s) ({shown}) are unlike every training input: all their kernel "
            "values are 0, so no training graph can be weighted (features far outside the training "
            "data, or a bandwidth gamma too small for their scale). Give them the same preprocessing "
            "and units as the training inputs, or use a wider kernel (smaller gamma)."
        )


def _check_queries(X: ArrayLike, n_features: int) -> Array:
    X = np.asarray(X, dtype=np.float64)
    if X.ndim != 2 or X.shape[1] != n_features:
        raise ValueError(
            f"queries must have {n_features} features like the training inputs; got shape {X.shape}."
        )
    return X


class KernelRidgeWeights:
    r"""Kernel ridge weights :math:`(K + n\lambda I)^{-1} k(x)` or k-NN weights.

    A dense solve over all training inputs: ``fit`` holds the (n, n) kernel and
    its Cholesky factor, about ``16 n^2`` bytes (1.6 GB at n = 10,000); it
    refuses beyond ``memory_limit``, where :class:`LocalRidgeWeights` scales.

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
    memory_limit : int or None, default=None
        Largest number of bytes the (n, n) kernel and its factor may take
        (estimated as ``2 * 8 * n**2`` before anything is allocated);
        ``None`` is :func:`default_memory_limit` (half the physical memory).
        Applies to ``method="ridge"`` with a kernel function.

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
        memory_limit: int | None = None,
    ) -> None:
        self.kernel = kernel
        self.gamma = gamma
        self.ridge = ridge
        self.method = method
        self.random_state = random_state
        self.memory_limit = memory_limit

    def _k(self, X: Array, Y: Array) -> Array:
        return _kernel(X, Y, self.kernel, self.gamma_)

    def _check_memory(self, n: int) -> None:
        limit = default_memory_limit() if self.memory_limit is None else self.memory_limit
        # Two (n, n) float64 arrays: the kernel and the Fortran-ordered copy that LAPACK factors;
        # the kernels are computed in place with blocked temporaries (at most a few MiB). Measured
        # peak of fit with tracemalloc in a fresh process: 16.0 n^2 bytes for rbf and tanimoto at
        # n = 3,000, 6,000 and 10,000 (resident growth 16.7-17.6 n^2 at n >= 6,000). Before the
        # in-place kernels it was 24 n^2 (rbf) and 33 n^2 (tanimoto: 3.1 GiB at n = 10,000).
        need = 2 * 8 * n * n
        if need > limit:
            raise ValueError(
                f"a dense kernel ridge solve on {n} training inputs needs about {need / 2**30:.2f} GiB "
                f"(the {n} x {n} kernel and its factor), more than memory_limit={limit} bytes "
                f"({limit / 2**30:.2f} GiB); use weight_model='local' (LocalRidgeWeights: a ridge "
                "solve on each query's most similar training inputs), fewer training inputs, "
                "or a larger memory_limit."
            )

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
            precomputed kernel, a kernel matrix that cannot be factored, or a
            dense solve that would exceed ``memory_limit``.
        """
        _check_kernel_name(self.kernel, precomputed=True)
        _check_method_and_ridge(self.method, self.ridge)
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
            _check_kernel_inputs(self.kernel, X)
            if self.method == "ridge":
                self._check_memory(n)
            self.gamma_ = _fit_gamma(X, self.kernel, self.gamma, self.random_state)
            self.X_fit_ = X
            K = self._k(X, X) if self.method == "ridge" else None  # knn needs no training kernel
        self.n_train_ = n
        if self.method == "ridge":
            A = K.copy() if self.kernel == "precomputed" else K  # the user's matrix stays as it is
            A[np.diag_indices_from(A)] += n * self.ridge
            self._factor = _factor(A, self.ridge)
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
        if self.kernel == "precomputed":
            X = np.asarray(X, dtype=np.float64)
            if X.ndim != 2 or X.shape[1] != self.n_train_:
                raise ValueError(
                    f"with kernel='precomputed', pass the (n_queries, {self.n_train_}) kernel "
                    f"between queries and training items; got shape {X.shape}."
                )
            Kx = X
        else:
            Xq = _check_queries(X, self.X_fit_.shape[1])
            _check_kernel_inputs(self.kernel, Xq)
            Kx = self._k(Xq, self.X_fit_)
        if self.method == "knn":
            return Kx
        return cho_solve(self._factor, Kx.T, check_finite=False).T

    def top_weights(
        self, X: ArrayLike, top_k: int | None = 10, *, negative: str = "clip", empty: str = "first"
    ) -> tuple[NDArray[np.int64], Array]:
        """The ``top_k`` largest weights of each query, on the simplex: ``sparsify(raw_weights(X))``.

        Parameters
        ----------
        X : array-like of shape (n_queries, d), or (n_queries, n_train) with ``precomputed``
        top_k : int or None, default=10
        negative : {"clip", "shift"}, default="clip"
            See :func:`sparsify`.
        empty : {"first", "error"}, default="first"
            A row whose weights are all zero (every kernel value 0: an input
            unlike all training inputs): ``first`` gives all the mass to the
            first training item (as :func:`sparsify`), ``error`` raises a
            ValueError naming the rows.

        Returns
        -------
        indices : ndarray of shape (n_queries, k)
        weights : ndarray of shape (n_queries, k)
        """
        _check_empty(empty)
        W = self.raw_weights(X)
        if empty == "error":
            _refuse_empty(_empty_rows(W))
        return sparsify(W, top_k, negative=negative)


class LocalRidgeWeights:
    r"""Local kernel ridge weights: per query, a ridge solve on its ``local_size`` most similar training inputs.

    For a query :math:`x`, let :math:`S(x)` be the :math:`M` training inputs
    with the largest kernel values :math:`k(x_i, x)` (ties broken by the
    smaller training index).  The weights are

    .. math::

        \alpha_{S(x)}(x) = (K_{SS} + M \lambda I)^{-1} k_S(x), \qquad
        \alpha_i(x) = 0 \text{ for } i \notin S(x),

    so with :math:`M \ge n` they are the dense weights of
    :class:`KernelRidgeWeights`.  Memory is bounded by ``block_size`` rows of
    the query-by-train kernel and one (M, M) system at a time, never an
    (n, n) matrix; the kernel to all training inputs is computed once per
    query.  Binary inputs (0/1, of any dtype) with the ``tanimoto`` kernel
    are stored only as sparse rows and bit counts, and take their
    intersections from a sparse product (the same values as the dense
    formula); other inputs are stored as float64.
    The many small solves run on one BLAS thread each (``threadpoolctl``,
    which comes with scikit-learn): threads cost more than they give on
    systems of this size.

    Parameters
    ----------
    kernel : {"rbf", "laplacian", "tanimoto", "cosine", "linear"}, default="rbf"
        Input kernel (a kernel function is needed to find the nearest
        training inputs; ``precomputed`` is not supported).
    gamma : float or None, default=None
        Bandwidth of ``rbf``/``laplacian``; ``None`` uses the median heuristic
        on the training inputs (as :class:`KernelRidgeWeights`).
    ridge : float, default=1e-3
        Regularisation :math:`\lambda` (scaled by the local size :math:`M`).
    method : {"ridge", "knn"}, default="ridge"
        ``ridge``: local kernel ridge coefficients.  ``knn``: the kernel
        values of the :math:`M` nearest training inputs (zero elsewhere).
    local_size : int, default=500
        :math:`M`, training inputs per local solve (all of them when larger
        than the training set).
    block_size : int, default=256
        Queries whose kernel row to all training inputs is held at once:
        about ``8 * block_size * n_train`` bytes.  Results do not depend on it.
    random_state : int, default=0
        Seed of the subsample used by the bandwidth heuristic.

    Attributes
    ----------
    gamma_ : float
        Bandwidth used.
    X_fit_ : ndarray of shape (n, d)
        Training inputs, float64; binary inputs with ``tanimoto`` come back
        in the dtype given to ``fit``, rebuilt from the sparse rows on each
        access (a property; costly for large training sets).
    n_train_ : int
    n_features_in_ : int
    local_size_ : int
        :math:`M` used: ``min(local_size, n_train_)``.

    Examples
    --------
    >>> import numpy as np
    >>> X = np.array([[0.0], [1.0], [2.0], [3.0]])
    >>> model = LocalRidgeWeights(gamma=1.0, ridge=1e-6, local_size=2).fit(X)
    >>> idx, w = model.top_weights([[1.1]], top_k=2)
    >>> idx.tolist(), bool(w[0, 0] > 0.5)
    ([[1, 2]], True)
    """

    def __init__(
        self,
        kernel: str = "rbf",
        gamma: float | None = None,
        ridge: float = 1e-3,
        method: str = "ridge",
        local_size: int = 500,
        block_size: int = 256,
        random_state: int = 0,
    ) -> None:
        self.kernel = kernel
        self.gamma = gamma
        self.ridge = ridge
        self.method = method
        self.local_size = local_size
        self.block_size = block_size
        self.random_state = random_state

    def fit(self, X: ArrayLike) -> LocalRidgeWeights:
        """Store the training inputs (nothing is factored: solves are per query).

        Parameters
        ----------
        X : array-like of shape (n, d)
            Bool and integer arrays are used as they are (not converted
            to float64): pass 0/1 fingerprints as ``uint8`` or ``bool``.

        Returns
        -------
        LocalRidgeWeights
            ``self``.

        Raises
        ------
        ValueError
            For an unknown or ``precomputed`` kernel, an unknown method, a
            negative ridge, a non-positive ``local_size`` or ``block_size``, or
            negative inputs with ``tanimoto``.
        """
        if self.kernel == "precomputed":
            raise ValueError(
                "LocalRidgeWeights needs a kernel function to find each query's most similar training "
                "inputs; got kernel='precomputed': use KernelRidgeWeights (weight_model='dense') "
                "with a precomputed kernel."
            )
        _check_kernel_name(self.kernel)
        _check_method_and_ridge(self.method, self.ridge)
        for name in ("local_size", "block_size"):
            value = getattr(self, name)
            if isinstance(value, (bool, np.bool_)) or not isinstance(value, (int, np.integer)) or value < 1:
                raise ValueError(f"{name} must be a positive integer; got {value!r}.")
        X = np.asarray(X)
        if not (X.dtype == np.bool_ or np.issubdtype(X.dtype, np.integer)):
            X = np.asarray(X, dtype=np.float64)
        if X.ndim != 2 or X.shape[0] == 0:
            raise ValueError(f"X must be 2-D (n_samples, n_features) with a row; got shape {X.shape}.")
        _check_kernel_inputs(self.kernel, X)
        self.gamma_ = _fit_gamma(X, self.kernel, self.gamma, self.random_state)
        self.n_train_, self.n_features_in_ = X.shape
        self.local_size_ = int(min(self.local_size, self.n_train_))
        # 0/1 fingerprints: only sparse rows and bit counts, for fast exact intersections
        self._bits = self.kernel == "tanimoto" and _is_binary(X)
        if self._bits:
            self._X_sparse = sp.csr_matrix(X).astype(np.float64)
            self._X_sums = np.diff(self._X_sparse.indptr).astype(np.float64)  # = X.sum(1) on 0/1 rows
            self._X_dtype = X.dtype
            self._X = None
        else:
            self._X = np.asarray(X, dtype=np.float64)
        return self

    @property
    def X_fit_(self) -> NDArray[Any]:
        """Training inputs, shape (n_train_, n_features_in_).

        float64, except binary inputs with the ``tanimoto`` kernel: those
        come back in the dtype given to :meth:`fit` (``uint8``, ``bool``,
        float64, ...), rebuilt from the sparse rows on each access, which
        costs a dense array of ``n * d * itemsize`` bytes: keep your own
        copy rather than reading this in a loop.
        """
        if not hasattr(self, "n_train_"):
            raise AttributeError("this LocalRidgeWeights is not fitted yet; call fit(X) first.")
        if self._X is not None:
            return self._X
        return self._X_sparse.astype(self._X_dtype).toarray()

    def _kernel_rows(self, Xq: Array) -> Array:
        """Kernel between query rows and all training inputs, shape (len(Xq), n_train)."""
        if self._bits and _is_binary(Xq):  # the sparse side is the (larger) training set
            return _tanimoto_sparse(self._X_sparse, self._X_sums, Xq, Xq.sum(1)).T
        # X_fit_ is rebuilt dense only for non-binary queries against binary training inputs
        return _kernel(Xq, self.X_fit_, self.kernel, self.gamma_)

    def _train_kernel(self, sel: NDArray[np.int64]) -> Array:
        """Kernel among the training inputs ``sel``, shape (len(sel), len(sel))."""
        if self._bits:  # sparse-by-sparse intersections: exact counts, half the time of sparse-by-dense
            rows = self._X_sparse[sel]
            inter = (rows @ rows.T).toarray()
            return _ratio_rows(inter, self._X_sums[sel], self._X_sums[sel])
        Xs = self._X[sel]
        return _kernel(Xs, Xs, self.kernel, self.gamma_)

    def _local_rows(self, Xq: Array) -> Array:
        """Local coefficients of a block of queries, zero outside each query's neighbourhood."""
        K = self._kernel_rows(Xq)
        n, M = self.n_train_, self.local_size_
        if M == n:  # every query's neighbourhood is the whole training set: the dense solve
            if self.method == "knn":
                return K
            A = self._train_kernel(np.arange(n))
            A[np.diag_indices_from(A)] += M * self.ridge
            return cho_solve(_factor(A, self.ridge), K.T, check_finite=False).T
        # the M-th largest value of each row; ties at it are taken by training index
        kth = -np.partition(-K, M - 1, axis=1)[:, M - 1]
        # many small (M, M) systems: one BLAS thread each is much faster than several
        with threadpool_limits(limits=1, user_api="blas"):
            for r in range(len(K)):
                row = K[r]  # overwritten in place by the row's coefficients
                above = np.flatnonzero(row > kth[r])
                tied = np.flatnonzero(row == kth[r])[: M - len(above)]
                sel = np.sort(np.concatenate([above, tied]))
                k_sel = row[sel]  # a copy (fancy indexing)
                row[:] = 0.0
                if self.method == "knn":
                    row[sel] = k_sel
                else:
                    A = self._train_kernel(sel)
                    A[np.diag_indices_from(A)] += M * self.ridge
                    row[sel] = cho_solve(_factor(A, self.ridge), k_sel, check_finite=False)
        return K

    def _blocks(self, X: ArrayLike) -> tuple[Array, list[slice]]:
        if not hasattr(self, "n_train_"):
            raise ValueError("this LocalRidgeWeights is not fitted yet; call fit(X) first.")
        X = _check_queries(X, self.n_features_in_)
        _check_kernel_inputs(self.kernel, X)
        b = int(self.block_size)
        return X, [slice(i, i + b) for i in range(0, len(X), b)]

    def raw_weights(self, X: ArrayLike) -> Array:
        """Dense local weights of each query over all training items (for small training sets).

        Parameters
        ----------
        X : array-like of shape (n_queries, d)

        Returns
        -------
        ndarray of shape (n_queries, n_train)
            Local kernel ridge coefficients (kernel values with
            ``method="knn"``) at each query's ``local_size_`` nearest training
            inputs, zero elsewhere.  Use :meth:`top_weights` for large
            training sets: it never holds all rows at once.
        """
        X, blocks = self._blocks(X)
        if not blocks:
            return np.zeros((0, self.n_train_))
        return np.vstack([self._local_rows(X[b]) for b in blocks])

    def top_weights(
        self,
        X: ArrayLike,
        top_k: int | None = 10,
        *,
        negative: str = "clip",
        progress: bool = False,
        empty: str = "first",
        n_jobs: int = 1,
    ) -> tuple[NDArray[np.int64], Array]:
        """The ``top_k`` largest local weights per query, on the simplex, block by block.

        Equal to ``sparsify(self.raw_weights(X), top_k, negative=negative)``
        while holding only ``block_size`` rows of length ``n_train`` at a time.
        With ``n_jobs``, blocks run on workers (:func:`gwpred.parallel.parallel_map`);
        the result is the same.

        Parameters
        ----------
        X : array-like of shape (n_queries, d)
        top_k : int or None, default=10
        negative : {"clip", "shift"}, default="clip"
            See :func:`sparsify`.
        progress : bool, default=False
            Progress bar over the queries (a tick per block).
        empty : {"first", "error"}, default="first"
            See :meth:`KernelRidgeWeights.top_weights`.
        n_jobs : int, default=1
            Workers for the blocks, as in :func:`gwpred.parallel.parallel_map`.

        Returns
        -------
        indices : ndarray of shape (n_queries, k)
            Training indices, by decreasing weight (ties by index).
        weights : ndarray of shape (n_queries, k)
            Non-negative weights that sum to one per row.
        """
        _check_empty(empty)
        X, blocks = self._blocks(X)
        if not blocks:
            return sparsify(np.zeros((0, self.n_train_)), top_k, negative=negative)
        done = parallel_map(
            _local_top, [(X[b],) for b in blocks], n_jobs=n_jobs, progress=progress, desc="local weights",
            unit="query", weights=[b.stop - b.start for b in blocks],
            shared={"model": self, "top_k": top_k, "negative": negative},
        )
        if empty == "error":
            _refuse_empty(np.concatenate([rows + b.start for (_, _, rows), b in zip(done, blocks)]))
        return np.vstack([d[0] for d in done]), np.vstack([d[1] for d in done])


def _local_top(
    X: Array, model: LocalRidgeWeights, top_k: int | None, negative: str
) -> tuple[NDArray[np.int64], Array, NDArray[np.int64]]:
    """One block of :meth:`LocalRidgeWeights.top_weights`: indices, weights and the empty rows."""
    W = model._local_rows(X)
    return (*sparsify(W, top_k, negative=negative), _empty_rows(W))

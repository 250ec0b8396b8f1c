"""Tests for gwpred.weights: input kernels, kernel ridge weights, sparsification.

Outside references used here:
- scikit-learn ``sklearn.metrics.pairwise`` (rbf_kernel, laplacian_kernel,
  cosine_similarity, linear_kernel) for the named kernels.
- scikit-learn ``KernelRidge``: fitted on ``Y = I`` its prediction is
  ``k(x)^T (K + alpha I)^{-1}``, i.e. the kernel ridge weights with
  ``alpha = n * ridge``.
- Tanimoto on sets, ``|A & B| / |A | B|`` (common practice), computed with
  Python sets; MinMax ``sum(min) / sum(max)`` on counts (common practice).
- RDKit ``DataStructs.BulkTanimotoSimilarity`` on Morgan fingerprints of QM9
  SMILES from ``gwpred.datasets.load_demo``.
- scipy ``pdist`` for the median heuristic (median pairwise distance,
  common practice).
- numpy ``linalg.solve`` and scikit-learn ``KernelRidge`` on each query's
  ``M`` nearest training inputs (chosen here with a stable numpy sort) for the
  local kernel ridge weights; ``os.sysconf`` for the default memory limit.
"""

from __future__ import annotations

import os
import re

import numpy as np
import pytest
from scipy.spatial.distance import pdist
from sklearn.kernel_ridge import KernelRidge
from sklearn.metrics.pairwise import cosine_similarity, laplacian_kernel, linear_kernel, rbf_kernel

from gwpred.datasets import load_demo
from gwpred.weights import (
    KERNELS,
    KernelRidgeWeights,
    LocalRidgeWeights,
    default_memory_limit,
    kernel_matrix,
    median_gamma,
    sparsify,
)


@pytest.fixture(scope="module")
def data() -> tuple[np.ndarray, np.ndarray]:
    rng = np.random.default_rng(42)
    return rng.normal(size=(30, 5)), rng.normal(size=(7, 5))


@pytest.fixture(scope="module")
def qm9_fingerprints():
    """Morgan bit and count fingerprints of 40 QM9 SMILES (RDKit)."""
    pytest.importorskip("rdkit")
    from rdkit import Chem
    from rdkit.Chem import rdFingerprintGenerator

    _, _, smiles = load_demo(return_smiles=True, start=400.0, stop=4000.0, step=1800.0)
    mols = [Chem.MolFromSmiles(s) for s in smiles[:40]]
    assert all(m is not None for m in mols)
    gen = rdFingerprintGenerator.GetMorganGenerator(radius=2, fpSize=1024)
    bits = [gen.GetFingerprint(m) for m in mols]
    counts = [gen.GetCountFingerprint(m) for m in mols]
    bit_arr = np.array([gen.GetFingerprintAsNumPy(m) for m in mols], dtype=np.float64)
    count_arr = np.array([gen.GetCountFingerprintAsNumPy(m) for m in mols], dtype=np.float64)
    return bits, counts, bit_arr, count_arr


# --------------------------------------------------------------------------
# kernels vs scikit-learn
# --------------------------------------------------------------------------
def test_kernel_names() -> None:
    assert sorted(KERNELS) == ["cosine", "laplacian", "linear", "rbf", "tanimoto"]


@pytest.mark.parametrize("gamma", [0.05, 0.7, 3.0])
def test_rbf_matches_sklearn(data, gamma: float) -> None:
    X, Y = data
    np.testing.assert_allclose(kernel_matrix(X, Y, "rbf", gamma), rbf_kernel(X, Y, gamma=gamma), rtol=1e-10, atol=1e-14)
    K = kernel_matrix(X, X, "rbf", gamma)
    np.testing.assert_allclose(np.diag(K), 1.0)


@pytest.mark.parametrize("gamma", [0.05, 0.7, 3.0])
def test_laplacian_matches_sklearn(data, gamma: float) -> None:
    X, Y = data
    np.testing.assert_allclose(
        kernel_matrix(X, Y, "laplacian", gamma), laplacian_kernel(X, Y, gamma=gamma), rtol=1e-10, atol=1e-14
    )


def test_laplacian_blocked_path_matches_sklearn() -> None:
    # X.size * len(Y) >= 5e7 switches to row blocks
    rng = np.random.default_rng(1)
    X, Y = rng.random((500, 100)), rng.random((1000, 100))
    np.testing.assert_allclose(
        kernel_matrix(X, Y, "laplacian", 0.02), laplacian_kernel(X, Y, gamma=0.02), rtol=1e-10, atol=1e-14
    )


def test_cosine_matches_sklearn(data) -> None:
    X, Y = data
    X = np.vstack([X, np.zeros(5)])  # a zero row: similarity 0, as sklearn
    np.testing.assert_allclose(kernel_matrix(X, Y, "cosine"), cosine_similarity(X, Y), atol=1e-12)
    assert np.all(kernel_matrix(X, Y, "cosine")[-1] == 0.0)


def test_linear_matches_sklearn(data) -> None:
    X, Y = data
    np.testing.assert_allclose(kernel_matrix(X, Y, "linear", gamma=123.0), linear_kernel(X, Y), rtol=1e-12)


def test_kernel_matrix_doc_example() -> None:
    np.testing.assert_allclose(kernel_matrix([[1, 1, 0]], [[1, 0, 0], [1, 1, 0]], "tanimoto"), [[0.5, 1.0]])


# --------------------------------------------------------------------------
# tanimoto / MinMax
# --------------------------------------------------------------------------
def set_tanimoto(a: np.ndarray, b: np.ndarray) -> float:
    # |A & B| / |A | B| with Python sets (common practice); two empty sets -> 1
    # (gwpred's documented convention; RDKit returns 0 there)
    A, B = set(np.flatnonzero(a)), set(np.flatnonzero(b))
    return len(A & B) / len(A | B) if A | B else 1.0


def test_tanimoto_binary_matches_sets() -> None:
    rng = np.random.default_rng(3)
    X = (rng.random((12, 40)) < 0.3).astype(float)
    Y = (rng.random((9, 40)) < 0.5).astype(float)
    X[0] = 0.0
    Y[0] = 0.0
    Y[1] = X[2]
    expected = np.array([[set_tanimoto(x, y) for y in Y] for x in X])
    K = kernel_matrix(X, Y, "tanimoto")
    np.testing.assert_allclose(K, expected, rtol=1e-12)
    assert K[0, 0] == 1.0 and K[2, 1] == 1.0


def test_minmax_on_counts_matches_direct_formula() -> None:
    rng = np.random.default_rng(4)
    X = rng.integers(0, 5, size=(10, 20)).astype(float)
    Y = rng.integers(0, 3, size=(70, 20)).astype(float)  # > 64 rows: several blocks
    Y[5] = 0.0
    expected = np.array(
        [[sum(min(a, b) for a, b in zip(x, y)) / sum(max(a, b) for a, b in zip(x, y)) for y in Y] for x in X]
    )
    np.testing.assert_allclose(kernel_matrix(X, Y, "tanimoto"), expected, rtol=1e-12)
    # binary X against count Y goes through the MinMax path too
    Xb = (X > 2).astype(float)
    expected_b = np.array([[np.minimum(x, y).sum() / np.maximum(x, y).sum() for y in Y] for x in Xb])
    np.testing.assert_allclose(kernel_matrix(Xb, Y, "tanimoto"), expected_b, rtol=1e-12)


def test_tanimoto_matches_rdkit_bits(qm9_fingerprints) -> None:
    from rdkit import DataStructs

    bits, _, bit_arr, _ = qm9_fingerprints
    # reference: RDKit BulkTanimotoSimilarity on ExplicitBitVect
    ref = np.array([DataStructs.BulkTanimotoSimilarity(fp, bits) for fp in bits])
    np.testing.assert_allclose(kernel_matrix(bit_arr, bit_arr, "tanimoto"), ref, rtol=1e-12, atol=1e-15)


def test_minmax_matches_rdkit_counts(qm9_fingerprints) -> None:
    from rdkit import DataStructs

    _, counts, _, count_arr = qm9_fingerprints
    assert count_arr.max() > 1  # really counts
    # reference: RDKit Tanimoto on count vectors = sum(min) / (sum a + sum b - sum(min))
    ref = np.array([DataStructs.BulkTanimotoSimilarity(fp, counts) for fp in counts])
    np.testing.assert_allclose(kernel_matrix(count_arr, count_arr, "tanimoto"), ref, rtol=1e-12, atol=1e-15)


def test_kernel_ridge_tanimoto_matches_sklearn_on_rdkit_kernel(qm9_fingerprints) -> None:
    from rdkit import DataStructs

    bits, _, bit_arr, _ = qm9_fingerprints
    train, test = slice(0, 30), slice(30, 40)
    K = np.array([DataStructs.BulkTanimotoSimilarity(fp, bits[train]) for fp in bits[train]])
    Kx = np.array([DataStructs.BulkTanimotoSimilarity(fp, bits[train]) for fp in bits[test]])
    ridge = 1e-2
    ref = KernelRidge(alpha=30 * ridge, kernel="precomputed").fit(K, np.eye(30)).predict(Kx)
    W = KernelRidgeWeights("tanimoto", ridge=ridge).fit(bit_arr[train]).raw_weights(bit_arr[test])
    np.testing.assert_allclose(W, ref, atol=1e-9)


# --------------------------------------------------------------------------
# median heuristic
# --------------------------------------------------------------------------
def test_median_gamma_rbf_and_laplacian(data) -> None:
    X, _ = data
    # reference: scipy pdist; rbf uses squared Euclidean, laplacian L1 distances
    assert median_gamma(X) == pytest.approx(1.0 / np.median(pdist(X, "sqeuclidean")), rel=1e-12)
    assert median_gamma(X, "laplacian") == pytest.approx(1.0 / np.median(pdist(X, "cityblock")), rel=1e-12)
    assert median_gamma([[0.0], [1.0], [3.0]]) == 0.25  # docstring example, by hand


def test_median_gamma_degenerate_cases() -> None:
    assert median_gamma([[1.0, 2.0]]) == 1.0  # one row
    assert median_gamma(np.ones((5, 3))) == 1.0  # all distances zero


def test_median_gamma_subsample() -> None:
    X = np.random.default_rng(5).normal(size=(60, 3))
    sub = X[np.random.default_rng(7).choice(60, 20, replace=False)]
    assert median_gamma(X, max_rows=20, random_state=7) == pytest.approx(1.0 / np.median(pdist(sub, "sqeuclidean")))
    assert median_gamma(X, max_rows=60) == pytest.approx(1.0 / np.median(pdist(X, "sqeuclidean")))


def test_gamma_none_uses_median_heuristic(data) -> None:
    X, _ = data
    assert KernelRidgeWeights("laplacian").fit(X).gamma_ == pytest.approx(median_gamma(X, "laplacian"))
    assert KernelRidgeWeights("rbf", gamma=0.3).fit(X).gamma_ == 0.3
    assert np.isnan(KernelRidgeWeights("precomputed").fit(np.eye(3)).gamma_)


# --------------------------------------------------------------------------
# kernel ridge weights vs scikit-learn KernelRidge on Y = I
# --------------------------------------------------------------------------
@pytest.mark.parametrize("kernel", ["rbf", "laplacian", "linear", "cosine"])
@pytest.mark.parametrize("ridge", [1e-3, 0.1])
def test_ridge_weights_match_sklearn(data, kernel: str, ridge: float) -> None:
    X, Xt = data
    n = len(X)
    gamma = 0.2
    model = KernelRidgeWeights(kernel, gamma=gamma, ridge=ridge).fit(X)
    ref = KernelRidge(alpha=n * ridge, kernel=kernel, gamma=gamma).fit(X, np.eye(n)).predict(Xt)
    np.testing.assert_allclose(model.raw_weights(Xt), ref, atol=1e-8, rtol=1e-7)
    assert model.n_train_ == n


def test_ridge_weights_precomputed_match_sklearn(data) -> None:
    X, Xt = data
    n, ridge = len(X), 0.05
    K, Kx = rbf_kernel(X, X, gamma=0.3), rbf_kernel(Xt, X, gamma=0.3)
    ref = KernelRidge(alpha=n * ridge, kernel="precomputed").fit(K, np.eye(n)).predict(Kx)
    model = KernelRidgeWeights("precomputed", ridge=ridge).fit(K)
    np.testing.assert_allclose(model.raw_weights(Kx), ref, atol=1e-9)
    # same as the named kernel
    named = KernelRidgeWeights("rbf", gamma=0.3, ridge=ridge).fit(X).raw_weights(Xt)
    np.testing.assert_allclose(model.raw_weights(Kx), named, atol=1e-9)


def test_ridge_weights_interpolate_at_training_points() -> None:
    X = np.array([[0.0], [1.0], [2.0]])
    w = KernelRidgeWeights(gamma=1.0, ridge=1e-9).fit(X).raw_weights(X)
    np.testing.assert_allclose(w, np.eye(3), atol=1e-6)  # (K + eps I)^-1 K ~ I


def test_knn_method_returns_kernel_values(data) -> None:
    X, Xt = data
    w = KernelRidgeWeights("rbf", gamma=0.4, method="knn").fit(X).raw_weights(Xt)
    np.testing.assert_allclose(w, rbf_kernel(Xt, X, gamma=0.4), rtol=1e-10)
    # knn needs no factorisation: a non-PD precomputed kernel and ridge 0 are fine
    K = np.array([[1.0, 2.0], [2.0, 1.0]])
    model = KernelRidgeWeights("precomputed", ridge=0.0, method="knn").fit(K)
    np.testing.assert_array_equal(model.raw_weights([[0.3, 0.9]]), [[0.3, 0.9]])
    idx, sw = sparsify(w, top_k=3)
    np.testing.assert_array_equal(idx, np.argsort(-w, axis=1, kind="stable")[:, :3])


# --------------------------------------------------------------------------
# sparsify
# --------------------------------------------------------------------------
def test_sparsify_doc_example() -> None:
    idx, w = sparsify([[0.1, -0.2, 0.3, 0.6]], top_k=3)
    assert idx.tolist() == [[3, 2, 0]]
    np.testing.assert_allclose(w, [[0.6, 0.3, 0.1]])


def test_sparsify_ties_by_index() -> None:
    idx, w = sparsify([[0.5, 0.2, 0.5, 0.5]], top_k=2)
    assert idx.tolist() == [[0, 2]]
    np.testing.assert_allclose(w, [[0.5, 0.5]])


def test_sparsify_clip_vs_shift() -> None:
    W = [[0.5, 0.3, -0.2, 0.1]]
    _, w = sparsify(W, top_k=3, negative="clip")
    np.testing.assert_allclose(w, [[0.5, 0.3, 0.1]] / np.float64(0.9))
    _, w = sparsify(W, top_k=3, negative="shift")  # minus 0.1
    np.testing.assert_allclose(w, [[0.4, 0.2, 0.0]] / np.float64(0.6))
    idx, w = sparsify(W, top_k=4, negative="clip")
    assert idx.tolist() == [[0, 1, 3, 2]]
    np.testing.assert_allclose(w, [[0.5, 0.3, 0.1, 0.0]] / np.float64(0.9))
    _, w = sparsify(W, top_k=4, negative="shift")  # plus 0.2
    np.testing.assert_allclose(w, [[0.7, 0.5, 0.3, 0.0]] / np.float64(1.5))


def test_sparsify_all_negative_row_puts_mass_on_largest() -> None:
    idx, w = sparsify([[-3.0, -1.0, -2.0], [0.2, 0.1, 0.3]], top_k=2)
    assert idx.tolist() == [[1, 2], [2, 0]]
    np.testing.assert_allclose(w, [[1.0, 0.0], [0.6, 0.4]])
    idx, w = sparsify([[0.0, 0.0, 0.0]], top_k=None)
    np.testing.assert_allclose(w, [[1.0, 0.0, 0.0]])


def test_sparsify_shift_equal_weights_puts_mass_on_first() -> None:
    # documented behaviour: shift subtracts the kept minimum, so equal kept
    # weights all become 0 and the first (lowest index) takes all the mass
    idx, w = sparsify([[0.2, 0.2, 0.2]], top_k=2, negative="shift")
    assert idx.tolist() == [[0, 1]]
    np.testing.assert_allclose(w, [[1.0, 0.0]])


@pytest.mark.parametrize("negative", ["clip", "shift"])
@pytest.mark.parametrize("top_k", [1, 5, 50, None])
def test_sparsify_rows_on_simplex(negative: str, top_k) -> None:
    W = np.random.default_rng(6).normal(size=(40, 20))
    idx, w = sparsify(W, top_k=top_k, negative=negative)
    k = 20 if top_k is None else min(top_k, 20)
    assert idx.shape == w.shape == (40, k)
    assert np.all(w >= 0)
    np.testing.assert_allclose(w.sum(axis=1), 1.0)
    assert np.all(np.diff(np.take_along_axis(W, idx, axis=1), axis=1) <= 0)  # by decreasing raw weight
    assert np.all(np.diff(w, axis=1) <= 1e-15)
    for row, i in zip(W, idx):  # the kept ones are the k largest
        np.testing.assert_array_equal(np.sort(i), np.sort(np.argsort(-row, kind="stable")[:k]))
    if top_k is None:
        np.testing.assert_array_equal(np.sort(idx, axis=1), np.tile(np.arange(20), (40, 1)))


def test_sparsify_one_row_input() -> None:
    idx, w = sparsify([0.2, 0.8], top_k=1)
    assert idx.tolist() == [[1]] and w.tolist() == [[1.0]]


# --------------------------------------------------------------------------
# errors
# --------------------------------------------------------------------------
KNOWN = r"\['cosine', 'laplacian', 'linear', 'rbf', 'tanimoto', 'precomputed'\]"


def test_unknown_kernel() -> None:
    with pytest.raises(ValueError, match=rf"kernel must be one of {KNOWN}; got 'gauss'"):
        kernel_matrix([[1.0]], [[1.0]], "gauss")
    with pytest.raises(ValueError, match=rf"kernel must be one of {KNOWN}; got 'gauss'"):
        KernelRidgeWeights("gauss").fit([[1.0]])


def test_tanimoto_negative_input() -> None:
    with pytest.raises(ValueError, match=r"the tanimoto kernel needs non-negative inputs \(bits or counts\).*'rbf'"):
        kernel_matrix([[1.0, 0.0]], [[1.0, -1.0]], "tanimoto")
    with pytest.raises(ValueError, match=r"tanimoto kernel needs non-negative inputs"):
        KernelRidgeWeights("tanimoto").fit([[1.0, -0.5], [0.0, 1.0]])


@pytest.mark.parametrize("top_k", [0, -3])
def test_sparsify_non_positive_top_k(top_k: int) -> None:
    with pytest.raises(ValueError, match=rf"top_k must be a positive integer or None; got {top_k}"):
        sparsify([[1.0, 2.0]], top_k=top_k)


def test_sparsify_unknown_negative_policy() -> None:
    with pytest.raises(ValueError, match=r"negative must be 'clip' or 'shift'; got 'abs'"):
        sparsify([[1.0, 2.0]], negative="abs")


@pytest.mark.parametrize("bad", [np.nan, np.inf, -np.inf])
def test_sparsify_non_finite(bad: float) -> None:
    with pytest.raises(ValueError, match=r"weights contain NaN or infinite values; check the inputs and kernel"):
        sparsify([[1.0, bad]])


def test_precomputed_fit_needs_square() -> None:
    with pytest.raises(
        ValueError, match=r"with kernel='precomputed', fit needs the square training kernel matrix; got shape \(3, 4\)"
    ):
        KernelRidgeWeights("precomputed").fit(np.ones((3, 4)))
    with pytest.raises(ValueError, match=r"got shape \(3,\)"):
        KernelRidgeWeights("precomputed").fit(np.ones(3))


@pytest.mark.parametrize("shape", [(2, 4), (3,), (2, 3, 1)])
def test_precomputed_query_shape(shape) -> None:
    model = KernelRidgeWeights("precomputed").fit(np.eye(3))
    with pytest.raises(
        ValueError,
        match=r"pass the \(n_queries, 3\) kernel between queries and training items; got shape " + re.escape(str(shape)),
    ):
        model.raw_weights(np.ones(shape))


@pytest.mark.parametrize("ridge", [-1e-3, float("nan"), "0.1"])
def test_bad_ridge(ridge) -> None:
    with pytest.raises(ValueError, match=rf"ridge must be a non-negative number; got {ridge!r}"):
        KernelRidgeWeights(ridge=ridge).fit([[0.0], [1.0]])


def test_unknown_method() -> None:
    with pytest.raises(ValueError, match=r"method must be 'ridge' or 'knn'; got 'lasso'"):
        KernelRidgeWeights(method="lasso").fit([[0.0], [1.0]])


def test_non_positive_definite_kernel() -> None:
    K = np.array([[1.0, 2.0], [2.0, 1.0]])  # eigenvalues 3 and -1
    with pytest.raises(ValueError, match=r"not positive definite; increase ridge \(now 0.0\)"):
        KernelRidgeWeights("precomputed", ridge=0.0).fit(K)
    with pytest.raises(ValueError, match=r"increase ridge \(now 0.1\)"):
        KernelRidgeWeights("precomputed", ridge=0.1).fit(K)  # -1 + 2 * 0.1 < 0
    KernelRidgeWeights("precomputed", ridge=1.0).fit(K)  # -1 + 2 * 1.0 > 0: fine


# --------------------------------------------------------------------------
# problems found in review, fixed
# --------------------------------------------------------------------------
def test_raw_weights_before_fit() -> None:
    with pytest.raises(ValueError, match=r"fit"):
        KernelRidgeWeights().raw_weights([[1.0]])


def test_raw_weights_feature_mismatch() -> None:
    model = KernelRidgeWeights(gamma=1.0).fit(np.ones((3, 2)) * np.arange(3)[:, None])
    with pytest.raises(ValueError, match=r"features"):
        model.raw_weights(np.ones((2, 3)))


def test_median_gamma_unknown_kernel() -> None:
    with pytest.raises(ValueError, match=r"kernel"):
        median_gamma([[0.0], [1.0]], kernel="gauss")


def test_sparsify_no_training_items() -> None:
    with pytest.raises(ValueError, match=r"W"):
        sparsify(np.zeros((1, 0)))


# --------------------------------------------------------------------------
# local kernel ridge weights and the dense memory guard
# --------------------------------------------------------------------------
def random_bits(rng: np.random.Generator, n: int, d: int, p: float) -> np.ndarray:
    return (rng.random((n, d)) < p).astype(float)


def test_local_ridge_with_all_training_inputs_is_the_dense_solve(data) -> None:
    # reference: numpy solve of (K + n ridge I) a = k(x) with scikit-learn's rbf_kernel, and
    # scikit-learn KernelRidge on Y = I (dual_coef_ = (K + alpha I)^{-1}, alpha = n * ridge)
    X, Xt = data
    n, ridge, gamma = len(X), 1e-2, 0.3
    K, Kx = rbf_kernel(X, X, gamma=gamma), rbf_kernel(Xt, X, gamma=gamma)
    expected = np.linalg.solve(K + n * ridge * np.eye(n), Kx.T).T
    kr = KernelRidge(alpha=n * ridge, kernel="rbf", gamma=gamma).fit(X, np.eye(n))
    np.testing.assert_allclose(kr.dual_coef_ @ Kx.T, expected.T, rtol=1e-8, atol=1e-10)
    for M in (n, n + 7):
        local = LocalRidgeWeights("rbf", gamma=gamma, ridge=ridge, local_size=M).fit(X)
        assert local.local_size_ == n
        np.testing.assert_allclose(local.raw_weights(Xt), expected, rtol=1e-8, atol=1e-10)
        np.testing.assert_allclose(local.raw_weights(Xt), kr.predict(Xt), rtol=1e-8, atol=1e-10)


def test_local_ridge_tanimoto_with_all_training_inputs_is_the_dense_solve() -> None:
    # reference: the set formula |A & B| / |A | B| and a numpy solve
    rng = np.random.default_rng(11)
    X, Xt = random_bits(rng, 40, 60, 0.2), random_bits(rng, 6, 60, 0.2)
    K = np.array([[set_tanimoto(a, b) for b in X] for a in X])
    Kx = np.array([[set_tanimoto(a, b) for b in X] for a in Xt])
    expected = np.linalg.solve(K + 40 * 1e-3 * np.eye(40), Kx.T).T
    local = LocalRidgeWeights("tanimoto", local_size=40).fit(X)
    np.testing.assert_allclose(local.raw_weights(Xt), expected, rtol=1e-8, atol=1e-10)


@pytest.mark.parametrize("kernel", ["rbf", "tanimoto"])
def test_local_ridge_solves_on_each_querys_nearest_inputs(kernel: str) -> None:
    # reference: per query, the M largest kernel values (numpy stable sort: ties by index) and
    # scikit-learn KernelRidge fitted on those M inputs with Y = I and alpha = M * ridge
    rng = np.random.default_rng(5)
    if kernel == "rbf":
        X, Xt = rng.normal(size=(80, 4)), rng.normal(size=(9, 4))
        Kx = rbf_kernel(Xt, X, gamma=0.2)
    else:
        X, Xt = random_bits(rng, 80, 50, 0.25), random_bits(rng, 9, 50, 0.25)
        Kx = np.array([[set_tanimoto(a, b) for b in X] for a in Xt])
    M, ridge = 15, 1e-2
    local = LocalRidgeWeights(kernel, gamma=0.2, ridge=ridge, local_size=M).fit(X)
    W = local.raw_weights(Xt)
    for row, x, w in zip(Kx, Xt, W):
        near = np.sort(np.argsort(-row, kind="stable")[:M])
        ref_kernel = "rbf" if kernel == "rbf" else "precomputed"
        kr = KernelRidge(alpha=M * ridge, kernel=ref_kernel, gamma=0.2)
        if kernel == "rbf":
            coef = kr.fit(X[near], np.eye(M)).predict(x[None])[0]
        else:
            Kmm = np.array([[set_tanimoto(a, b) for b in X[near]] for a in X[near]])
            coef = kr.fit(Kmm, np.eye(M)).predict(row[near][None])[0]
        expected = np.zeros(len(X))
        expected[near] = coef
        np.testing.assert_allclose(w, expected, rtol=1e-8, atol=1e-10)


def test_local_neighbourhood_ties_are_broken_by_index() -> None:
    # reference: identical training rows have equal kernel values; the lower indices are kept
    X = np.array([[0.0], [1.0], [1.0], [1.0], [5.0], [1.0]])
    W = LocalRidgeWeights("rbf", gamma=1.0, method="knn", local_size=3).fit(X).raw_weights([[1.0]])
    assert np.flatnonzero(W[0]).tolist() == [1, 2, 3]


def test_local_knn_gives_the_kernel_values_of_the_nearest(data) -> None:
    # reference: scikit-learn rbf_kernel; the M largest values kept, zero elsewhere
    X, Xt = data
    Kx = rbf_kernel(Xt, X, gamma=0.4)
    W = LocalRidgeWeights("rbf", gamma=0.4, method="knn", local_size=5).fit(X).raw_weights(Xt)
    for row, w in zip(Kx, W):
        near = np.argsort(-row, kind="stable")[:5]
        expected = np.zeros_like(row)
        expected[near] = row[near]
        np.testing.assert_allclose(w, expected, rtol=1e-12)
    # the dense model's knn top-k is the same when top_k <= M
    dense = KernelRidgeWeights("rbf", gamma=0.4, method="knn").fit(X)
    local = LocalRidgeWeights("rbf", gamma=0.4, method="knn", local_size=5).fit(X)
    for a, b in zip(dense.top_weights(Xt, 5), local.top_weights(Xt, 5)):
        np.testing.assert_allclose(a, b, rtol=1e-12)


def test_sparse_tanimoto_equals_the_dense_formula() -> None:
    # reference: the dense formula X Y^T / (|x| + |y| - X Y^T) with numpy, and 1 for two empty rows
    rng = np.random.default_rng(9)
    X, Y = random_bits(rng, 300, 256, 0.05), random_bits(rng, 23, 256, 0.08)
    X[3] = 0.0
    Y[0] = 0.0
    Y[1] = X[7]
    inter = Y @ X.T
    union = Y.sum(1)[:, None] + X.sum(1)[None, :] - inter
    expected = np.where(union > 0, inter / np.where(union > 0, union, 1.0), 1.0)
    local = LocalRidgeWeights("tanimoto", method="knn", local_size=300).fit(X)
    W = local.raw_weights(Y)
    np.testing.assert_array_equal(W, expected)
    np.testing.assert_array_equal(W, kernel_matrix(Y, X, "tanimoto"))
    assert W[0, 3] == 1.0 and W[1, 7] == 1.0


def test_local_counts_use_the_minmax_kernel() -> None:
    # reference: MinMax sum(min) / sum(max) on count vectors, computed directly
    rng = np.random.default_rng(4)
    X = rng.integers(0, 4, size=(30, 12)).astype(float)
    Y = rng.integers(0, 3, size=(5, 12)).astype(float)
    expected = np.array([[np.minimum(y, x).sum() / np.maximum(y, x).sum() for x in X] for y in Y])
    W = LocalRidgeWeights("tanimoto", method="knn", local_size=30).fit(X).raw_weights(Y)
    np.testing.assert_allclose(W, expected, rtol=1e-12)


@pytest.mark.parametrize("kernel", ["rbf", "tanimoto", "cosine"])
def test_block_size_does_not_change_local_weights(kernel: str) -> None:
    rng = np.random.default_rng(2)
    X, Xt = random_bits(rng, 120, 40, 0.3), random_bits(rng, 17, 40, 0.3)
    if kernel != "tanimoto":
        X, Xt = X + rng.normal(size=X.shape), Xt + rng.normal(size=Xt.shape)
    results = []
    for block in (1, 4, 17, 1000):
        model = LocalRidgeWeights(kernel, gamma=0.1, local_size=25, block_size=block).fit(X)
        results.append((model.raw_weights(Xt), *model.top_weights(Xt, 6)))
    for W, idx, w in results[1:]:
        # reference: numpy comparison with the one-row-at-a-time results
        np.testing.assert_allclose(W, results[0][0], rtol=1e-12, atol=1e-15)
        np.testing.assert_array_equal(idx, results[0][1])
        np.testing.assert_allclose(w, results[0][2], rtol=1e-12, atol=1e-15)


def test_local_weights_on_workers_equal_one_process() -> None:
    # bitwise: each block is the same computation wherever it runs; the empty-row check still
    # names the right query (reference: the one-process results and the row we made empty)
    rng = np.random.default_rng(5)
    X, Xt = random_bits(rng, 150, 40, 0.3), random_bits(rng, 23, 40, 0.3)
    Xt[13] = 0  # Tanimoto 0 to every training input: an empty row
    model = LocalRidgeWeights("tanimoto", local_size=20, block_size=4).fit(X)
    idx1, w1 = model.top_weights(Xt, 5)
    idx2, w2 = model.top_weights(Xt, 5, n_jobs=2)
    np.testing.assert_array_equal(idx1, idx2)
    np.testing.assert_array_equal(w1, w2)
    with pytest.raises(ValueError, match=r"\b13\b"):
        model.top_weights(Xt, 5, empty="error", n_jobs=2)


@pytest.mark.parametrize("negative", ["clip", "shift"])
@pytest.mark.parametrize("top_k", [1, 4, None])
def test_top_weights_equal_sparsify_of_raw_weights(data, negative: str, top_k) -> None:
    X, Xt = data
    for model in (
        KernelRidgeWeights("rbf", gamma=0.3).fit(X),
        LocalRidgeWeights("rbf", gamma=0.3, local_size=8, block_size=3).fit(X),
    ):
        idx, w = model.top_weights(Xt, top_k, negative=negative)
        ref_idx, ref_w = sparsify(model.raw_weights(Xt), top_k, negative=negative)
        np.testing.assert_array_equal(idx, ref_idx)
        np.testing.assert_array_equal(w, ref_w)
    K = rbf_kernel(X, X, gamma=0.3)
    pre = KernelRidgeWeights("precomputed").fit(K)
    idx, w = pre.top_weights(rbf_kernel(Xt, X, gamma=0.3), top_k, negative=negative)
    np.testing.assert_array_equal(idx, sparsify(pre.raw_weights(rbf_kernel(Xt, X, gamma=0.3)), top_k, negative=negative)[0])


def test_local_gamma_is_the_dense_models(data) -> None:
    X, _ = data
    assert LocalRidgeWeights("rbf").fit(X).gamma_ == KernelRidgeWeights("rbf").fit(X).gamma_ == median_gamma(X)
    assert LocalRidgeWeights("rbf", gamma=0.7).fit(X).gamma_ == 0.7


def test_default_memory_limit_is_half_the_physical_memory() -> None:
    # reference: os.sysconf page size times number of physical pages
    total = os.sysconf("SC_PAGE_SIZE") * os.sysconf("SC_PHYS_PAGES")
    assert default_memory_limit() == total // 2


def test_dense_memory_guard_names_the_scalable_option() -> None:
    X = np.arange(40.0).reshape(20, 2)
    # 2 * 8 * 20**2 = 6400 bytes for the kernel and its factor
    with pytest.raises(
        ValueError,
        match=r"a dense kernel ridge solve on 20 training inputs needs about .* GiB \(the 20 x 20 kernel and its "
        r"factor\), more than memory_limit=6399 bytes .*; use weight_model='local' \(LocalRidgeWeights",
    ):
        KernelRidgeWeights(gamma=1.0, memory_limit=6399).fit(X)
    KernelRidgeWeights(gamma=1.0, memory_limit=6400).fit(X)  # at the limit: fine
    KernelRidgeWeights(gamma=1.0, method="knn", memory_limit=1).fit(X)  # knn holds no (n, n) matrix
    LocalRidgeWeights(gamma=1.0, local_size=5).fit(X)


def test_local_refuses_a_precomputed_kernel() -> None:
    with pytest.raises(ValueError, match=r"LocalRidgeWeights needs a kernel function .*got kernel='precomputed': "
                       r"use KernelRidgeWeights \(weight_model='dense'\)"):
        LocalRidgeWeights("precomputed").fit(np.eye(3))


@pytest.mark.parametrize("name, value", [("local_size", 0), ("local_size", 2.5), ("block_size", -1), ("block_size", True)])
def test_local_bad_sizes(name: str, value) -> None:
    with pytest.raises(ValueError, match=rf"{name} must be a positive integer; got {re.escape(repr(value))}\."):
        LocalRidgeWeights(**{name: value}).fit([[0.0], [1.0]])


def test_local_errors_shared_with_the_dense_model() -> None:
    with pytest.raises(ValueError, match=rf"kernel must be one of {KNOWN}; got 'gauss'"):
        LocalRidgeWeights("gauss").fit([[1.0]])
    with pytest.raises(ValueError, match=r"method must be 'ridge' or 'knn'; got 'lasso'"):
        LocalRidgeWeights(method="lasso").fit([[0.0], [1.0]])
    with pytest.raises(ValueError, match=r"ridge must be a non-negative number; got -1"):
        LocalRidgeWeights(ridge=-1).fit([[0.0], [1.0]])
    with pytest.raises(ValueError, match=r"tanimoto kernel needs non-negative inputs"):
        LocalRidgeWeights("tanimoto").fit([[1.0, -0.5], [0.0, 1.0]])
    with pytest.raises(ValueError, match=r"this LocalRidgeWeights is not fitted yet; call fit\(X\) first"):
        LocalRidgeWeights().top_weights([[1.0]])
    model = LocalRidgeWeights(gamma=1.0).fit(np.ones((3, 2)))
    with pytest.raises(ValueError, match=r"queries must have 2 features like the training inputs; got shape \(1, 3\)"):
        model.raw_weights(np.ones((1, 3)))
    with pytest.raises(ValueError, match=r"X must be 2-D \(n_samples, n_features\) with a row; got shape \(3,\)"):
        LocalRidgeWeights().fit(np.ones(3))


def test_local_ridge_not_positive_definite() -> None:
    # a linear kernel on 3 collinear points is singular; ridge 0 cannot factor it
    X = np.array([[1.0], [2.0], [3.0]])
    with pytest.raises(ValueError, match=r"not positive definite; increase ridge \(now 0\)"):
        LocalRidgeWeights("linear", ridge=0, local_size=3).fit(X).raw_weights([[1.0]])


def test_rows_with_only_zero_kernel_values_are_named_or_given_to_the_first_item():
    # exp(-1 * 40^2) underflows to exactly 0.0 in IEEE 754 doubles: such a row has no weight at all
    X = np.arange(6.0).reshape(-1, 1)
    Q = np.array([[1.0], [45.0], [2.0], [50.0]])
    for model in (KernelRidgeWeights(gamma=1.0).fit(X), LocalRidgeWeights(gamma=1.0, local_size=3, block_size=3).fit(X)):
        idx, w = model.top_weights(Q, 2)  # default: the documented fallback of sparsify
        assert idx[1].tolist() == [0, 1] and w[1].tolist() == [1.0, 0.0]
        with pytest.raises(ValueError, match=r"2 input row\(s\) \(1, 3\) are unlike every training input"):
            model.top_weights(Q, 2, empty="error")
        with pytest.raises(ValueError, match=r"empty must be 'first' or 'error'; got 'skip'\."):
            model.top_weights(Q, 2, empty="skip")

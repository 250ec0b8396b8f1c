"""Compact (bool / integer) inputs end to end: checks, fingerprints, weights, estimator, model files.

Outside references used here:

- numpy's dtype kinds (``np.issubdtype``) and ``np.shares_memory``: what
  "returned without conversion" means for :func:`gwpred._utils.check_inputs`.
- RDKit ``rdFingerprintGenerator.GetMorganGenerator`` (``GetFingerprintAsNumPy``,
  ``GetCountFingerprintAsNumPy``) for Morgan bits and counts.
- The Jaccard-Tanimoto coefficient of two bit sets, ``|a & b| / (|a| + |b| - |a & b|)``
  (Tanimoto 1958; the usual definition for fingerprints), computed with numpy
  boolean operations; two empty sets get 1, as gwpred documents.
- scipy ``cho_factor`` / ``cho_solve`` for the ridge solve on that reference kernel.
- Python's ``tracemalloc`` for allocated bytes (numpy reports its buffers to it).
- networkx node-link data: "identical predictions" means equal node order, labels and edges.
- QM9 SMILES from ``gwpred.datasets.load_demo`` and rows of the QM9 CSV files
  installed by the PyPI package qm9pack.
"""

from __future__ import annotations

import csv
import importlib.machinery
import importlib.util
import sys
import tracemalloc
from pathlib import Path

import networkx as nx
import numpy as np
import pytest
from scipy.linalg import cho_factor, cho_solve

from gwpred import BarycenterGraphPredictor, load_model, save_model
from gwpred._utils import check_inputs
from gwpred.datasets import load_demo, load_qm9
from gwpred.weights import KernelRidgeWeights, LocalRidgeWeights

DTYPES = (np.uint8, np.bool_, np.float64)


def jaccard_tanimoto(A: np.ndarray, B: np.ndarray) -> np.ndarray:
    """|a & b| / (|a| + |b| - |a & b|) for every row a of A and b of B, with numpy boolean algebra."""
    a, b = A.astype(bool), B.astype(bool)
    inter = (a[:, None, :] & b[None, :, :]).sum(-1)
    union = a.sum(1)[:, None] + b.sum(1)[None, :] - inter
    out = np.ones(inter.shape)  # two empty sets: 1
    np.divide(inter, union, out=out, where=union > 0)
    return out


def random_bits(rng: np.random.Generator, n: int, d: int, p: float) -> np.ndarray:
    return (rng.random((n, d)) < p).astype(np.uint8)


# --------------------------------------------------------------------------
# check_inputs(compact=True)
# --------------------------------------------------------------------------
@pytest.mark.parametrize("dtype", [np.bool_, np.uint8, np.uint16, np.int32, np.int64])
def test_compact_keeps_bool_and_integer_arrays(dtype) -> None:
    # reference: numpy dtype kinds; the same buffer comes back (np.shares_memory), no float64 copy
    X = np.eye(3, 4, dtype=dtype)
    out = check_inputs(X, compact=True)
    assert out.dtype == np.dtype(dtype) and np.shares_memory(out, X)
    plain = check_inputs(X)  # the default is unchanged: float64 with the same values
    assert plain.dtype == np.float64
    np.testing.assert_array_equal(plain, X.astype(np.float64))


def test_compact_converts_everything_else_to_float64() -> None:
    # reference: numpy's float64 conversion of the same values
    for X in (np.ones((2, 2), dtype=np.float32), [[0.5, 1.0]], np.ones((2, 3))):
        out = check_inputs(X, compact=True)
        assert out.dtype == np.float64
        np.testing.assert_array_equal(out, np.asarray(X, dtype=np.float64))
    # Python integers give numpy's default integer array, kept as it is
    assert np.issubdtype(check_inputs([[0, 1], [1, 0]], compact=True).dtype, np.integer)


def test_compact_keeps_every_check() -> None:
    with pytest.raises(ValueError, match=r"X must be 2-D \(n_samples, n_features\); got 1-D"):
        check_inputs(np.ones(3, dtype=np.uint8), compact=True)
    with pytest.raises(ValueError, match=r"F has no rows; pass at least one sample"):
        check_inputs(np.zeros((0, 4), dtype=np.uint8), "F", compact=True)
    with pytest.raises(ValueError, match=r"X has 1 NaN or infinite value\(s\), the first at row 0, column 1"):
        check_inputs([[0.0, np.inf]], compact=True)
    with pytest.raises(ValueError, match=r"X must be a numeric array of shape \(n_samples, n_features\)"):
        check_inputs([[1, 2], [3]], compact=True)


# --------------------------------------------------------------------------
# fingerprints: morgan_fingerprints(dtype=...) and load_qm9
# --------------------------------------------------------------------------
SMILES = ["CCO", "c1ccccc1O", "CC(=O)N", "OCC(O)CO", "C#N", "FC(F)(F)C1CC1"]


def test_morgan_fingerprint_dtypes_match_rdkit() -> None:
    pytest.importorskip("rdkit")
    from rdkit import Chem
    from rdkit.Chem import rdFingerprintGenerator

    from gwpred.chem import morgan_fingerprints

    gen = rdFingerprintGenerator.GetMorganGenerator(radius=2, fpSize=256)
    mols = [Chem.MolFromSmiles(s) for s in SMILES]
    bits = np.array([gen.GetFingerprintAsNumPy(m) for m in mols])
    counts = np.array([gen.GetCountFingerprintAsNumPy(m) for m in mols])
    for dtype in (np.uint8, np.bool_, np.float64):
        X = morgan_fingerprints(SMILES, n_bits=256, dtype=dtype)
        assert X.dtype == np.dtype(dtype)
        np.testing.assert_array_equal(X, bits.astype(dtype))
    X = morgan_fingerprints(SMILES, n_bits=256, counts=True, dtype=np.uint16)
    assert X.dtype == np.uint16
    np.testing.assert_array_equal(X, counts)
    assert morgan_fingerprints(SMILES, n_bits=256).dtype == np.float64  # the default is unchanged


def test_morgan_fingerprint_dtype_errors() -> None:
    pytest.importorskip("rdkit")
    from gwpred.chem import morgan_fingerprints

    # one folded bit collects every environment (radius 0, 1, 2) of 60 carbons, well over the
    # largest int8 (127, numpy's iinfo)
    assert np.iinfo(np.int8).max == 127
    with pytest.raises(ValueError, match=r"molecules\[1\] has a fingerprint count of \d+, more than dtype int8 "
                       r"holds; use a wider dtype"):
        morgan_fingerprints(["C", "C" * 60], n_bits=1, counts=True, dtype=np.int8)
    with pytest.raises(TypeError, match=r"dtype must be a bool, integer or float dtype \(e\.g\. np\.uint8\), got <U3"):
        morgan_fingerprints(["C"], dtype="U3")
    with pytest.raises(TypeError, match=r"dtype must be a numpy number dtype"):
        morgan_fingerprints(["C"], dtype="no such type")


@pytest.fixture
def few_qm9_rows(tmp_path, monkeypatch) -> Path:
    """A qm9pack folder holding the header and first 8 rows of each real QM9 CSV file; returns a cache dir."""
    pytest.importorskip("rdkit")
    spec = importlib.util.find_spec("qm9pack")
    if spec is None or not spec.submodule_search_locations:
        pytest.skip("qm9pack is not installed (pip install 'gwpred[data]')")
    real_dir = Path(next(iter(spec.submodule_search_locations))) / "data"
    fake = tmp_path / "site" / "qm9pack"
    (fake / "data").mkdir(parents=True)
    csv.field_size_limit(sys.maxsize)
    for name in ("qm9_part1.csv", "qm9_part2.csv", "qm9_part3.csv"):
        with open(real_dir / name, newline="", encoding="utf-8") as src, open(
            fake / "data" / name, "w", newline="", encoding="utf-8"
        ) as dst:
            reader, writer = csv.reader(src), csv.writer(dst)
            writer.writerows(row for _, row in zip(range(9), reader))
    real_find_spec = importlib.util.find_spec

    def find_spec(name, *args, **kwargs):
        if name == "qm9pack":
            found = importlib.machinery.ModuleSpec("qm9pack", None, is_package=True)
            found.submodule_search_locations = [str(fake)]
            return found
        return real_find_spec(name, *args, **kwargs)

    monkeypatch.setattr(importlib.util, "find_spec", find_spec)
    return tmp_path / "cache"


def test_load_qm9_fingerprints_are_uint8_bits_and_uint16_counts(few_qm9_rows) -> None:
    from rdkit import Chem
    from rdkit.Chem import rdFingerprintGenerator

    bits = load_qm9(features="fingerprint", fingerprint_bits=512, cache_dir=few_qm9_rows, progress=False)
    counts = load_qm9(
        features="fingerprint", fingerprint_bits=512, fingerprint_counts=True, cache_dir=few_qm9_rows, progress=False
    )
    assert len(bits.smiles) >= 20 and bits.X.shape == (len(bits.smiles), 512)
    assert bits.X.dtype == np.uint8 and counts.X.dtype == np.uint16
    gen = rdFingerprintGenerator.GetMorganGenerator(radius=2, fpSize=512)
    mols = [Chem.MolFromSmiles(s) for s in bits.smiles]
    np.testing.assert_array_equal(bits.X, [gen.GetFingerprintAsNumPy(m) for m in mols])
    np.testing.assert_array_equal(counts.X, [gen.GetCountFingerprintAsNumPy(m) for m in mols])


# --------------------------------------------------------------------------
# LocalRidgeWeights on binary inputs of any dtype
# --------------------------------------------------------------------------
def test_local_tanimoto_kernel_rows_are_the_jaccard_tanimoto_coefficient() -> None:
    # reference: jaccard_tanimoto above, bit for bit (integer counts divided once in float64)
    rng = np.random.default_rng(21)
    X, Y = random_bits(rng, 250, 300, 0.04), random_bits(rng, 31, 300, 0.06)
    X[5] = 0
    Y[0] = 0
    Y[1] = X[9]
    expected = jaccard_tanimoto(Y, X)
    for dtype in DTYPES:
        model = LocalRidgeWeights("tanimoto", method="knn", local_size=250).fit(X.astype(dtype))
        for queries in (Y, Y.astype(dtype)):
            np.testing.assert_array_equal(model.raw_weights(queries), expected)
    assert expected[0, 5] == 1.0 and expected[1, 9] == 1.0


def test_local_tanimoto_training_kernel_is_the_jaccard_tanimoto_coefficient() -> None:
    # reference: scipy's Cholesky solve of (K + n ridge I) a = k(x) with K, k from jaccard_tanimoto;
    # the same LAPACK calls on the same matrix give the same bits
    rng = np.random.default_rng(22)
    X, Y = random_bits(rng, 120, 200, 0.05), random_bits(rng, 9, 200, 0.05)
    K = jaccard_tanimoto(X, X)
    K[np.diag_indices_from(K)] += 120 * 1e-3
    expected = cho_solve(cho_factor(K, lower=True, check_finite=False), jaccard_tanimoto(Y, X).T, check_finite=False).T
    for dtype in DTYPES:
        model = LocalRidgeWeights("tanimoto", ridge=1e-3, local_size=500).fit(X.astype(dtype))
        np.testing.assert_array_equal(model.raw_weights(Y), expected)


def test_local_top_weights_do_not_depend_on_the_dtype() -> None:
    # reference: the float64 fit of the same 0/1 values (numpy equality, bit for bit), and numpy
    # equality of the training inputs given back
    rng = np.random.default_rng(23)
    X, Y = random_bits(rng, 400, 128, 0.08), random_bits(rng, 37, 128, 0.08)
    results = {}
    for dtype in DTYPES:
        model = LocalRidgeWeights("tanimoto", local_size=40, block_size=16).fit(X.astype(dtype))
        results[dtype] = model.top_weights(Y.astype(np.float64), 7)
        back = model.X_fit_
        assert back.dtype == np.dtype(dtype)
        np.testing.assert_array_equal(back, X.astype(dtype))
    for dtype in DTYPES[:2]:
        np.testing.assert_array_equal(results[dtype][0], results[np.float64][0])
        np.testing.assert_array_equal(results[dtype][1], results[np.float64][1])


def test_local_non_binary_inputs_are_held_as_float64() -> None:
    # reference: numpy float64 conversion of the counts; MinMax sum(min) / sum(max) computed directly
    rng = np.random.default_rng(24)
    X, Y = rng.integers(0, 4, size=(30, 12), dtype=np.uint16), rng.integers(0, 3, size=(4, 12))
    model = LocalRidgeWeights("tanimoto", method="knn", local_size=30).fit(X)
    assert model.X_fit_.dtype == np.float64
    np.testing.assert_array_equal(model.X_fit_, X.astype(np.float64))
    expected = np.array([[np.minimum(y, x).sum() / np.maximum(y, x).sum() for x in X] for y in Y])
    np.testing.assert_allclose(model.raw_weights(Y), expected, rtol=1e-12)


def test_local_fit_on_uint8_bits_makes_no_dense_float64_copy() -> None:
    # reference: tracemalloc's peak over fit, against the 20000 x 2048 x 8 bytes of a float64 copy
    rng = np.random.default_rng(25)
    n, d = 20_000, 2048
    X = np.zeros((n, d), dtype=np.uint8)
    X[np.repeat(np.arange(n), 30), rng.integers(0, d, size=30 * n)] = 1  # about 30 bits per row
    tracemalloc.start()
    try:
        model = LocalRidgeWeights("tanimoto").fit(X)
        _, peak = tracemalloc.get_traced_memory()
    finally:
        tracemalloc.stop()
    assert peak < 0.25 * n * d * 8, f"fit allocated {peak / 2**20:.0f} MiB"
    np.testing.assert_array_equal(model.X_fit_[:50], X[:50])


# --------------------------------------------------------------------------
# the dense solve's memory guard against the measured peak
# --------------------------------------------------------------------------
@pytest.mark.parametrize("kernel", ["rbf", "laplacian", "tanimoto", "cosine"])
def test_dense_memory_estimate_matches_the_measured_peak(kernel: str) -> None:
    # reference: tracemalloc's peak over fit; the guard's estimate is 2 * 8 * n**2 bytes (the kernel
    # and LAPACK's copy that it factors); kernels are computed in blocks of at most 2 MiB temporaries
    rng = np.random.default_rng(26)
    n = 1500
    X = random_bits(rng, n, 64, 0.2).astype(np.float64) if kernel == "tanimoto" else rng.normal(size=(n, 64))
    tracemalloc.start()
    try:
        KernelRidgeWeights(kernel, gamma=0.01).fit(X)
        _, peak = tracemalloc.get_traced_memory()
    finally:
        tracemalloc.stop()
    estimate = 2 * 8 * n * n
    assert estimate <= peak <= estimate + 12 * 2**20, f"peak {peak / n**2:.2f} n^2 bytes"


# --------------------------------------------------------------------------
# the estimator and model files on uint8 fingerprints
# --------------------------------------------------------------------------
@pytest.fixture(scope="module")
def fingerprints():
    """Morgan bits (RDKit) of 160 QM9 training molecules and 6 queries, as uint8, and the graphs."""
    pytest.importorskip("rdkit")
    from gwpred.chem import morgan_fingerprints

    _, graphs, smiles = load_demo(return_smiles=True)
    X = morgan_fingerprints(smiles[:166], n_bits=1024, dtype=np.uint8)
    return X[:160], graphs[:160], X[160:]


def node_link(graphs: list[nx.Graph]) -> list[dict]:
    return [nx.node_link_data(g, edges="edges") for g in graphs]


def local_tanimoto() -> BarycenterGraphPredictor:
    return BarycenterGraphPredictor(
        kernel="tanimoto", weight_model="local", local_size=40, n_neighbors=4, valence=True, random_state=0
    )


def test_estimator_on_uint8_fingerprints_equals_float64(fingerprints) -> None:
    # reference: the same model fitted on the float64 copy of the same bits (numpy equality,
    # networkx node-link data)
    Xtr, Gtr, Xte = fingerprints
    compact = local_tanimoto().fit(Xtr, Gtr)
    wide = local_tanimoto().fit(Xtr.astype(np.float64), Gtr)
    assert compact.weights_.X_fit_.dtype == np.uint8
    for queries in (Xte, Xte.astype(np.float64)):
        for a, b in zip(compact.neighbors(queries), wide.neighbors(Xte.astype(np.float64))):
            np.testing.assert_array_equal(a, b)
    assert node_link(compact.predict(Xte)) == node_link(wide.predict(Xte.astype(np.float64)))


def test_model_fitted_on_uint8_round_trips(fingerprints, tmp_path) -> None:
    # reference: numpy reads the saved inputs member; the loaded model's neighbours and
    # predictions equal the saved one's (numpy equality, networkx node-link data)
    Xtr, Gtr, Xte = fingerprints
    model = local_tanimoto().fit(Xtr, Gtr)
    save_model(model, tmp_path / "m.npz")
    with np.load(tmp_path / "m.npz", allow_pickle=False) as npz:
        saved = npz["inputs"]
    assert saved.dtype == np.uint8
    np.testing.assert_array_equal(saved, Xtr)
    loaded = load_model(tmp_path / "m.npz")
    assert loaded.weights_.X_fit_.dtype == np.uint8
    np.testing.assert_array_equal(loaded.weights_.X_fit_, Xtr)
    for a, b in zip(loaded.neighbors(Xte), model.neighbors(Xte)):
        np.testing.assert_array_equal(a, b)
    assert node_link(loaded.predict(Xte)) == node_link(model.predict(Xte))
    # float64 inputs are still saved as float64 (files as before)
    wide = local_tanimoto().fit(Xtr.astype(np.float64), Gtr)
    save_model(wide, tmp_path / "w.npz")
    with np.load(tmp_path / "w.npz", allow_pickle=False) as npz:
        assert npz["inputs"].dtype == np.float64
        np.testing.assert_array_equal(npz["inputs"], Xtr)

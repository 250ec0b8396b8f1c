"""Tests for gwpred.datasets: demo loader, full QM9 loader, graph arrays, broadening, splits.

Outside references used here:
- RDKit: heavy-atom graph rebuilt from each stored SMILES (Kekulé bond orders, formal charges);
  Hill formulas (CalcMolFormula); Morgan fingerprints (rdFingerprintGenerator).
- QM9 CSV files of the PyPI package qm9pack: Index, Stoichiometry, SMILES and Harmonic_Freq_cmi
  columns; the published size of QM9 (Ramakrishnan et al. 2014, Scientific Data 1, 140022).
- scipy.stats.cauchy / scipy.stats.norm: the line shapes are these densities up to a factor;
  analytic areas of the Lorentzian and Gaussian.
- numpy.random.default_rng: the permutation behind split_indices.
- networkx: is_connected / is_isomorphic / graphs_equal.
"""

from __future__ import annotations

import csv
import hashlib
import importlib.machinery
import importlib.util
import re
import sys
import time
import warnings
from pathlib import Path

import networkx as nx
import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from gwpred.datasets import demo as demo_module
from gwpred.datasets import qm9 as qm9_module
from gwpred.datasets import spectra as spectra_module
from gwpred.datasets import (
    Qm9Data,
    broadened_spectra,
    graphs_from_arrays,
    load_demo,
    load_qm9,
    lorentzian_spectra,
    lorentzian_spectrum,
    split_indices,
    wavenumber_grid,
)

REPO = Path(__file__).resolve().parents[1]
DEMO_FILE = REPO / "data" / "qm9_demo.npz"
GRAPH_KEYS = ("n_nodes", "node_element", "elements", "edge_offsets", "edge_src", "edge_dst", "edge_order")


# --------------------------------------------------------------------------
# fixtures
# --------------------------------------------------------------------------
@pytest.fixture(scope="module")
def demo():
    return load_demo(return_smiles=True)


@pytest.fixture(scope="module")
def raw_arrays():
    with np.load(DEMO_FILE, allow_pickle=False) as archive:
        return {k: archive[k] for k in archive.files}


@pytest.fixture(scope="module")
def qm9_rows(raw_arrays):
    """The QM9 CSV rows (from qm9pack's data files) of the demo molecules, by Index."""
    data_dir = _qm9pack_data_dir()
    wanted = set(raw_arrays["qm9_index"].tolist())
    csv.field_size_limit(sys.maxsize)
    rows = {}
    for name in ("qm9_part1.csv", "qm9_part2.csv", "qm9_part3.csv"):
        with open(data_dir / name, newline="", encoding="utf-8") as handle:
            for rec in csv.DictReader(handle):
                if int(rec["Index"]) in wanted:
                    rows[int(rec["Index"])] = rec
    return rows


def _qm9pack_data_dir() -> Path:
    """qm9pack's data folder (found, not imported), or skip."""
    spec = importlib.util.find_spec("qm9pack")
    if spec is None or not spec.submodule_search_locations:
        pytest.skip("qm9pack is not installed (pip install 'gwpred[data]')")
    return Path(next(iter(spec.submodule_search_locations))) / "data"


def _write_variant(path: Path, arrays: dict, **changes) -> Path:
    """Save the demo arrays with some entries replaced (None drops an entry;
    a callable gets the original arrays)."""
    out = dict(arrays)
    for key, value in changes.items():
        if callable(value):
            value = value(arrays)
        if value is None:
            out.pop(key)
        else:
            out[key] = value
    np.savez(path, **out)
    return path


# --------------------------------------------------------------------------
# load_demo: shapes, types, invariants
# --------------------------------------------------------------------------
def test_load_demo_shapes_and_types(demo):
    X, graphs, smiles = demo
    assert isinstance(X, np.ndarray) and X.dtype == np.float64
    assert X.shape == (3000, 361)
    assert np.all(np.isfinite(X)) and np.all(X >= 0)
    assert len(graphs) == len(smiles) == 3000
    assert all(isinstance(g, nx.Graph) and not g.is_directed() for g in graphs)
    assert all(isinstance(s, str) and s for s in smiles)
    # every molecule has at least one line, so every row has unit L2 norm
    np.testing.assert_allclose(np.linalg.norm(X, axis=1), 1.0, rtol=1e-12)


def test_load_demo_without_smiles_returns_pair(demo):
    out = load_demo()
    assert len(out) == 2
    np.testing.assert_array_equal(out[0], demo[0])


def test_demo_graph_labels_sizes_connectivity(demo):
    _, graphs, _ = demo
    for g in graphs:
        n = g.number_of_nodes()
        assert 2 <= n <= 9  # QM9: at most 9 heavy atoms; demo keeps >= 2
        assert sorted(g.nodes) == list(range(n))
        assert {lab for _, lab in g.nodes(data="label")} <= {"C", "N", "O", "F"}
        assert all(type(lab) is str for _, lab in g.nodes(data="label"))
        assert all(type(o) is int and o in (1, 2, 3) for _, _, o in g.edges(data="label"))
        assert nx.is_connected(g)
        assert nx.number_of_selfloops(g) == 0


def test_demo_valence_not_exceeded(demo):
    # Common practice: neutral C, N, O, F have valences 4, 3, 2, 1; the sum of
    # bond orders at a heavy atom cannot exceed it.
    _, graphs, _ = demo
    valence = {"C": 4, "N": 3, "O": 2, "F": 1}
    for g in graphs:
        for v, lab in g.nodes(data="label"):
            assert g.degree(v, weight="label") <= valence[lab]


def test_demo_sizes_vary(demo):
    _, graphs, _ = demo
    sizes = {g.number_of_nodes() for g in graphs}
    assert min(sizes) == 2 and max(sizes) == 9


# --------------------------------------------------------------------------
# against RDKit: stored graph == heavy-atom graph of the stored SMILES
# --------------------------------------------------------------------------
def _rdkit_heavy_graph(smiles: str) -> nx.Graph:
    from rdkit import Chem

    mol = Chem.MolFromSmiles(smiles)
    assert mol is not None, smiles
    Chem.Kekulize(mol, clearAromaticFlags=True)
    g = nx.Graph()
    for atom in mol.GetAtoms():
        if atom.GetAtomicNum() > 1:
            g.add_node(atom.GetIdx(), label=atom.GetSymbol())
    for bond in mol.GetBonds():
        a, b = bond.GetBeginAtomIdx(), bond.GetEndAtomIdx()
        if a in g and b in g:
            g.add_edge(a, b, label=int(bond.GetBondTypeAsDouble()))
    return g


def test_graphs_match_rdkit_from_smiles(demo):
    # Reference: RDKit (MolFromSmiles + Kekulize), all 3000 molecules.
    pytest.importorskip("rdkit")
    from rdkit import RDLogger

    RDLogger.DisableLog("rdApp.*")
    _, graphs, smiles = demo
    match = nx.algorithms.isomorphism.categorical_node_match("label", None)
    ematch = nx.algorithms.isomorphism.categorical_edge_match("label", None)
    bad = [
        s
        for g, s in zip(graphs, smiles)
        if not nx.is_isomorphic(g, _rdkit_heavy_graph(s), node_match=match, edge_match=ematch)
    ]
    assert bad == []


# --------------------------------------------------------------------------
# against the QM9 CSV files shipped in qm9pack
# --------------------------------------------------------------------------
def _stoichiometry(text: str) -> dict[str, int]:
    # QM9 CSV (qm9pack): Stoichiometry lists atom counts as [H, C, N, O, F];
    # e.g. methane (Index 1) is "[4,1,0,0,0]".
    return dict(zip("HCNOF", (int(v) for v in text.strip("[] ").split(","))))


def test_heavy_atom_counts_match_qm9_stoichiometry(demo, raw_arrays, qm9_rows):
    _, graphs, smiles = demo
    index = raw_arrays["qm9_index"].tolist()
    assert len(qm9_rows) == len(index) == len(set(index))
    for g, s, i, n_h in zip(graphs, smiles, index, raw_arrays["n_hydrogens"].tolist()):
        row = qm9_rows[i]
        counts = _stoichiometry(row["Stoichiometry"])
        labels = [lab for _, lab in g.nodes(data="label")]
        assert {e: labels.count(e) for e in "CNOF"} == {e: counts[e] for e in "CNOF"}, i
        assert n_h == counts["H"], i
        assert s == row["SMILES"].strip(), i


def test_frequencies_match_qm9_column(raw_arrays, qm9_rows):
    offsets, freqs = raw_arrays["freq_offsets"], raw_arrays["frequencies"]
    for k, i in enumerate(raw_arrays["qm9_index"].tolist()):
        row = qm9_rows[i]
        ref = np.array([float(v) for v in row["Harmonic_Freq_cmi"].strip("[] ").split(",")])
        got = freqs[offsets[k] : offsets[k + 1]]
        # stored as float32: relative error below 2**-24
        np.testing.assert_allclose(got, ref, rtol=1e-7, atol=0)
        # Common practice: a molecule of N atoms has 3N-6 vibrational modes (3N-5 if linear).
        n_atoms = sum(_stoichiometry(row["Stoichiometry"]).values())
        assert got.size in (3 * n_atoms - 6, 3 * n_atoms - 5), i


def test_make_demo_reproduces_bundled_file(tmp_path, monkeypatch):
    # The bundled file must be exactly what data/make_demo.py builds from qm9pack.
    pytest.importorskip("rdkit")
    if importlib.util.find_spec("qm9pack") is None:
        pytest.skip("qm9pack is not installed")
    spec = importlib.util.spec_from_file_location("make_demo", REPO / "data" / "make_demo.py")
    module = importlib.util.module_from_spec(spec)
    monkeypatch.setitem(sys.modules, "make_demo", module)  # dataclasses look the module up
    spec.loader.exec_module(module)
    out = tmp_path / "demo.npz"
    module.main(["--out", str(out)])
    digest = hashlib.sha256(out.read_bytes()).hexdigest()
    assert digest == hashlib.sha256(DEMO_FILE.read_bytes()).hexdigest()


def test_demo_file_needs_no_pickle_and_is_small(raw_arrays):
    assert DEMO_FILE.stat().st_size < 1_000_000
    for key, arr in raw_arrays.items():
        assert arr.dtype.kind in "iufU", key


# --------------------------------------------------------------------------
# load_demo: broadening parameters are passed through
# --------------------------------------------------------------------------
def test_load_demo_broadening_matches_lorentzian_spectra(raw_arrays):
    off, f = raw_arrays["freq_offsets"], raw_arrays["frequencies"].astype(float)
    lines = [f[off[i] : off[i + 1]] for i in range(5)]
    X, _ = load_demo(half_width=7.5, start=500.0, stop=3500.0, step=5.0, normalize=False)
    ref = lorentzian_spectra(lines, half_width=7.5, start=500.0, stop=3500.0, step=5.0, normalize=False)
    assert X.shape == (3000, 601)
    np.testing.assert_allclose(X[:5], ref, rtol=1e-12)
    grid = np.array([1000.0, 1500.0])
    Xg, _ = load_demo(grid=grid)
    assert Xg.shape == (3000, 2)


def test_load_demo_explicit_path(tmp_path, raw_arrays):
    path = _write_variant(tmp_path / "copy.npz", raw_arrays)
    X, graphs = load_demo(path=path)
    assert X.shape == (3000, 361) and len(graphs) == 3000


# --------------------------------------------------------------------------
# Lorentzian broadening against outside definitions
# --------------------------------------------------------------------------
def test_wavenumber_grid_default():
    g = wavenumber_grid()
    assert g.shape == (361,)
    np.testing.assert_array_equal(g, np.arange(400.0, 4005.0, 10.0))


def test_single_line_peak_and_half_height():
    # Common practice: a Lorentzian's half width is the half width at half maximum
    # (HWHM), so a unit-height line is 1 at its centre and 1/2 at centre +- HWHM.
    grid = wavenumber_grid()
    s = lorentzian_spectrum([1000.0], half_width=20.0, normalize=False)
    assert grid[np.argmax(s)] == 1000.0
    assert s[grid == 1000.0][0] == 1.0
    np.testing.assert_allclose(s[np.isin(grid, [980.0, 1020.0])], [0.5, 0.5], rtol=1e-15)


@pytest.mark.parametrize("half_width", [2.5, 7.5, 33.0])
def test_half_height_at_any_width(half_width):
    grid = np.array([1000.0 - half_width, 1000.0, 1000.0 + half_width])
    s = lorentzian_spectrum([1000.0], grid=grid, half_width=half_width, normalize=False)
    np.testing.assert_allclose(s, [0.5, 1.0, 0.5], rtol=1e-15)


def test_line_shape_equals_scaled_cauchy_density():
    # Reference: scipy.stats.cauchy. Cauchy pdf with scale g is 1 / (pi g (1 + ((x - x0)/g)^2)),
    # so the unit-height Lorentzian is pi * g * pdf.
    stats = pytest.importorskip("scipy.stats")
    grid = wavenumber_grid()
    lines = [812.3, 1650.0, 3010.7]
    s = lorentzian_spectrum(lines, half_width=15.0, normalize=False)
    ref = sum(np.pi * 15.0 * stats.cauchy.pdf(grid, loc=v, scale=15.0) for v in lines)
    np.testing.assert_allclose(s, ref, rtol=1e-12)


def test_normalized_has_unit_l2_norm_and_same_shape():
    raw = lorentzian_spectrum([1000.0, 1200.0], normalize=False)
    s = lorentzian_spectrum([1000.0, 1200.0])
    assert np.linalg.norm(s) == pytest.approx(1.0, rel=1e-14)
    np.testing.assert_allclose(s, raw / np.linalg.norm(raw), rtol=1e-14)


def test_empty_line_list_gives_zeros_not_nan():
    s = lorentzian_spectrum([])
    assert s.shape == (361,)
    assert not np.any(np.isnan(s)) and np.all(s == 0)
    batch = lorentzian_spectra([[], [1000.0], []])
    assert np.all(batch[0] == 0) and np.all(batch[2] == 0)
    assert np.linalg.norm(batch[1]) == pytest.approx(1.0)


def test_batch_equals_singles_across_blocks(monkeypatch):
    rng = np.random.default_rng(0)
    lists = [rng.uniform(300, 4100, size=rng.integers(0, 12)) for _ in range(40)]
    single = np.array([lorentzian_spectrum(f) for f in lists])
    # a tiny block size forces molecules to straddle block boundaries
    monkeypatch.setattr(spectra_module, "_BLOCK_ELEMENTS", 361 * 3)
    np.testing.assert_allclose(lorentzian_spectra(lists), single, rtol=1e-13, atol=1e-15)
    assert lorentzian_spectra([]).shape == (0, 361)


@settings(max_examples=40, deadline=None)
@given(
    st.lists(st.floats(min_value=-5000, max_value=9000, allow_nan=False), min_size=1, max_size=30),
    st.floats(min_value=0.5, max_value=200.0),
)
def test_property_unit_norm_and_additivity(lines, half_width):
    s = lorentzian_spectrum(lines, half_width=half_width)
    assert np.linalg.norm(s) == pytest.approx(1.0, rel=1e-12)
    parts = sum(lorentzian_spectrum([v], half_width=half_width, normalize=False) for v in lines)
    whole = lorentzian_spectrum(lines, half_width=half_width, normalize=False)
    np.testing.assert_allclose(whole, parts, rtol=1e-12, atol=1e-300)


# --------------------------------------------------------------------------
# graphs_from_arrays
# --------------------------------------------------------------------------
def test_graphs_from_arrays_roundtrip(raw_arrays, demo):
    graphs = graphs_from_arrays(*(raw_arrays[k] for k in GRAPH_KEYS))
    for g, index in zip(graphs, raw_arrays["qm9_index"].tolist()):
        g.graph["id"] = f"dsgdb9nsd_{index:06d}"  # load_demo names each molecule as QM9 does (its .xyz file)
    assert all(nx.utils.graphs_equal(a, b) for a, b in zip(graphs, demo[1]))


def test_graphs_from_arrays_small_example():
    (g, h) = graphs_from_arrays([2, 1], [0, 2, 1], ["C", "N", "O"], [0, 1, 1], [0], [1], [3])
    assert dict(g.nodes(data="label")) == {0: "C", 1: "O"}
    assert list(g.edges(data="label")) == [(0, 1, 3)]
    assert dict(h.nodes(data="label")) == {0: "N"} and h.number_of_edges() == 0


GOOD = {
    "n_nodes": [2, 2],
    "node_element": [0, 1, 0, 0],
    "elements": ["C", "N"],
    "edge_offsets": [0, 1, 2],
    "edge_src": [0, 0],
    "edge_dst": [1, 1],
    "edge_order": [1, 2],
}


@pytest.mark.parametrize(
    ("change", "error", "match"),
    [
        ({"n_nodes": [[2, 2]]}, ValueError, r"n_nodes must be 1-D, got shape \(1, 2\)"),
        ({"n_nodes": [2.0, 2.0]}, TypeError, r"n_nodes must hold integers, got dtype float64"),
        ({"n_nodes": [-1, 2], "node_element": [0]}, ValueError, r"n_nodes must be >= 0, got \[-1\]"),
        ({"node_element": [0, 1, 0]}, ValueError, r"node_element must have length sum\(n_nodes\) = 4, got 3"),
        ({"node_element": [0, 1, 0, 5]}, ValueError, r"node_element codes must lie in 0\.\.1 .*got values from 0 to 5"),
        ({"edge_order": [1]}, ValueError, r"edge_src, edge_dst and edge_order must have equal lengths, got 2, 2 and 1"),
        ({"edge_offsets": [0, 2]}, ValueError, r"edge_offsets must have length n_molecules \+ 1 = 3, got 2"),
        ({"edge_offsets": [0, 2, 1]}, ValueError, r"edge_offsets must start at 0, never decrease and end at the number of edges \(2\)"),
        ({"edge_dst": [1, 2]}, ValueError, r"edge 1 joins nodes \(0, 2\) outside its graph of 2 nodes"),
        ({"edge_dst": [0, 1]}, ValueError, r"edge 0 is a self loop on node 0"),
        (
            {"edge_offsets": [0, 2, 2], "edge_dst": [1, 1], "n_nodes": [2, 2]},
            ValueError,
            r"graph 0 lists the same edge more than once",
        ),
    ],
)
def test_graphs_from_arrays_errors(change, error, match):
    kwargs = {**GOOD, **change}
    with pytest.raises(error, match=match):
        graphs_from_arrays(**kwargs)


# --------------------------------------------------------------------------
# spectrum errors
# --------------------------------------------------------------------------
@pytest.mark.parametrize(
    ("kwargs", "error", "match"),
    [
        ({"frequencies": [1000.0, np.nan]}, ValueError, r"frequencies must hold finite values only, got \[nan\]"),
        ({"frequencies": [[1000.0]]}, ValueError, r"frequencies must be 1-D, got an array of shape \(1, 1\); for several line lists use lorentzian_spectra"),
        ({"frequencies": ["abc"]}, TypeError, r"frequencies must be a 1-D array of real numbers, got \['abc'\]"),
        ({"frequencies": [1000.0], "half_width": -1.0}, ValueError, r"half_width must be > 0 \(cm\^-1\), got -1\.0"),
        ({"frequencies": [1000.0], "half_width": 0}, ValueError, r"half_width must be > 0 \(cm\^-1\), got 0"),
        ({"frequencies": [1000.0], "half_width": float("nan")}, ValueError, r"half_width must be finite, got nan"),
        ({"frequencies": [1000.0], "half_width": "20"}, TypeError, r"half_width must be a real number, got '20' of type str"),
        ({"frequencies": [1000.0], "half_width": True}, TypeError, r"half_width must be a real number, got True"),
        ({"frequencies": [1000.0], "grid": []}, ValueError, r"grid must hold at least one wavenumber, got an empty array"),
        ({"frequencies": [1000.0], "grid": [1000.0, np.inf]}, ValueError, r"grid must hold finite values only, got \[inf\]"),
        ({"frequencies": [1000.0], "grid": [[1000.0]]}, ValueError, r"grid must be 1-D, got an array of shape \(1, 1\)"),
        ({"frequencies": [1000.0], "grid": [1000.0], "start": 500.0}, ValueError, r"grid was given together with start; pass either grid or start/stop/step"),
        ({"frequencies": [1000.0], "grid": [1000.0], "stop": 5.0, "step": 1.0}, ValueError, r"grid was given together with stop, step"),
        ({"frequencies": [1000.0], "normalize": 1}, TypeError, r"normalize must be True or False, got 1"),
        ({"frequencies": [1000.0], "step": 0.0}, ValueError, r"step must be > 0 \(cm\^-1\), got 0\.0"),
        ({"frequencies": [1000.0], "start": 5000.0}, ValueError, r"stop must be >= start, got start=5000\.0 and stop=4000\.0"),
    ],
)
def test_lorentzian_spectrum_errors(kwargs, error, match):
    with pytest.raises(error, match=match):
        lorentzian_spectrum(**kwargs)


@pytest.mark.parametrize(
    ("args", "error", "match"),
    [
        ((float("inf"), 10.0, 1.0), ValueError, r"start must be finite, got inf"),
        ((0.0, 10.0, -1.0), ValueError, r"step must be > 0 \(cm\^-1\), got -1\.0"),
        ((10.0, 0.0, 1.0), ValueError, r"stop must be >= start, got start=10\.0 and stop=0\.0"),
        ((0.0, None, 1.0), TypeError, r"stop must be a real number, got None of type NoneType"),
    ],
)
def test_wavenumber_grid_errors(args, error, match):
    with pytest.raises(error, match=match):
        wavenumber_grid(*args)


@pytest.mark.parametrize(
    ("frequencies", "error", "match"),
    [
        (1000.0, TypeError, r"frequencies must be a list of 1-D arrays \(one per item\), got float; for one line list use lorentzian_spectrum"),
        ("1000", TypeError, r"frequencies must be a list of 1-D arrays \(one per item\), got str"),
        ([1000.0, 1200.0], ValueError, r"frequencies\[0\] must be 1-D, got an array of shape \(\); pass a list of 1-D arrays, or lorentzian_spectrum"),
        ([[1000.0], [np.nan]], ValueError, r"frequencies\[1\] must hold finite values only, got \[nan\]"),
    ],
)
def test_lorentzian_spectra_errors(frequencies, error, match):
    with pytest.raises(error, match=match):
        lorentzian_spectra(frequencies)


# --------------------------------------------------------------------------
# load_demo errors: missing and damaged files
# --------------------------------------------------------------------------
def test_load_demo_missing_path(tmp_path):
    missing = tmp_path / "nope.npz"
    with pytest.raises(FileNotFoundError, match=r"path='.*nope\.npz' is not a file; pass the path of a qm9_demo\.npz file"):
        load_demo(path=missing)


def test_load_demo_missing_bundled_file(monkeypatch):
    monkeypatch.setattr(demo_module, "_DEMO_FILE", "absent_demo.npz")
    with pytest.raises(FileNotFoundError, match=r"absent_demo\.npz was found neither .*python data/make_demo\.py"):
        load_demo()


def test_load_demo_not_an_archive(tmp_path):
    bad = tmp_path / "bad.npz"
    bad.write_bytes(b"this is not a zip file")
    with pytest.raises(ValueError, match=r"bad\.npz is not a readable \.npz archive .*python data/make_demo\.py"):
        load_demo(path=bad)


def test_load_demo_refuses_pickled_arrays(tmp_path, raw_arrays):
    path = _write_variant(tmp_path / "obj.npz", raw_arrays, smiles=np.array(["C", None], dtype=object))
    with pytest.raises(ValueError, match=r"obj\.npz is not a readable \.npz archive \(.*allow_pickle"):
        load_demo(path=path)


@pytest.mark.parametrize(
    ("changes", "match"),
    [
        ({"edge_order": None}, r"lacks the arrays \['edge_order'\]; it is not a gwpred demo file"),
        ({"format_version": np.array(2)}, r"has format_version 2, this gwpred reads version 1"),
        ({"format_version": np.array([1])}, r"has format_version \[1\], this gwpred reads version 1"),
        ({"smiles": np.zeros(3000)}, r"smiles must be a unicode array, got dtype float64"),
        ({"qm9_index": np.arange(5)}, r"qm9_index has shape \(5,\), expected \(3000,\)"),
        ({"frequencies": np.array([np.nan], dtype=np.float32)}, r"frequencies must be a 1-D finite float array"),
        ({"freq_offsets": np.arange(3001)}, r"freq_offsets must start at 0, never decrease and end at the number of frequencies"),
        ({"edge_src": lambda a: np.full_like(a["edge_src"], 20)}, r"holds inconsistent graph arrays \(edge 0 joins nodes \(20, "),
    ],
)
def test_load_demo_damaged_contents(tmp_path, raw_arrays, changes, match):
    path = _write_variant(tmp_path / "damaged.npz", raw_arrays, **changes)
    with pytest.raises(ValueError, match=match):
        load_demo(path=path)


def test_load_demo_parameter_errors():
    with pytest.raises(TypeError, match=r"return_smiles must be True or False, got 'yes'"):
        load_demo(return_smiles="yes")
    with pytest.raises(ValueError, match=r"half_width must be > 0 \(cm\^-1\), got -5\.0"):
        load_demo(half_width=-5.0)
    with pytest.raises(ValueError, match=r"grid was given together with step"):
        load_demo(grid=[1000.0], step=5.0)


# --------------------------------------------------------------------------
# graphs_from_arrays: formal charges
# --------------------------------------------------------------------------
def test_graphs_from_arrays_with_charges():
    (g,) = graphs_from_arrays([2], [1, 2], ["C", "N", "O"], [0, 1], [0], [1], [1], node_charge=[1, -1])
    assert dict(g.nodes(data="charge")) == {0: 1, 1: -1}
    assert all(type(q) is int for _, q in g.nodes(data="charge"))
    (h,) = graphs_from_arrays([1], [0], ["C"], [0, 0], [], [], [])
    assert "charge" not in h.nodes[0]


@pytest.mark.parametrize(
    ("charge", "error", "match"),
    [
        ([0, 1, 0], ValueError, r"node_charge must have length sum\(n_nodes\) = 4, got 3"),
        ([0.0, 1.0, 0.0, 0.0], TypeError, r"node_charge must hold integers, got dtype float64"),
    ],
)
def test_graphs_from_arrays_charge_errors(charge, error, match):
    with pytest.raises(error, match=match):
        graphs_from_arrays(**GOOD, node_charge=charge)


# --------------------------------------------------------------------------
# broadened_spectra: Lorentzian and Gaussian line shapes
# --------------------------------------------------------------------------
def test_broadened_lorentzian_equals_lorentzian_spectra():
    rng = np.random.default_rng(1)
    lists = [rng.uniform(300, 4100, size=rng.integers(0, 12)) for _ in range(30)]
    for normalize in (True, False):
        np.testing.assert_array_equal(
            broadened_spectra(lists, normalize=normalize),
            lorentzian_spectra(lists, normalize=normalize),
        )


@pytest.mark.parametrize("half_width", [3.0, 20.0, 55.5])
def test_gaussian_half_maximum_at_half_width(half_width):
    # Common practice: "half width" = half width at half maximum (HWHM); a unit-height line
    # is 1 at its centre and 1/2 at centre +- HWHM, for both shapes.
    grid = [1000.0 - half_width, 1000.0, 1000.0 + half_width]
    for shape in ("gaussian", "lorentzian"):
        s = broadened_spectra([[1000.0]], shape=shape, grid=grid, half_width=half_width, normalize=False)
        np.testing.assert_allclose(s[0], [0.5, 1.0, 0.5], rtol=1e-14)


def test_gaussian_equals_scaled_normal_density():
    # Reference: scipy.stats.norm. A Gaussian of HWHM h has sigma = h / sqrt(2 ln 2)
    # (common practice: FWHM = 2 sqrt(2 ln 2) sigma), and unit height = pdf * sigma sqrt(2 pi).
    stats = pytest.importorskip("scipy.stats")
    grid = wavenumber_grid()
    lines, h = [812.3, 1650.0, 3010.7], 15.0
    sigma = h / np.sqrt(2 * np.log(2))
    ref = sum(sigma * np.sqrt(2 * np.pi) * stats.norm.pdf(grid, loc=v, scale=sigma) for v in lines)
    s = broadened_spectra([lines], shape="gaussian", half_width=h, normalize=False)
    np.testing.assert_allclose(s[0], ref, rtol=1e-12, atol=1e-300)


def test_line_areas_match_analytic_values():
    # Common practice: a unit-height Lorentzian of HWHM g has area pi * g; a unit-height
    # Gaussian of HWHM h has area h * sqrt(pi / ln 2). Checked by the trapezoid rule on a wide
    # grid; over [x0 - L, x0 + L] the Lorentzian's exact area is 2 g atan(L / g).
    g, L = 20.0, 2.0e5
    grid = np.linspace(1000.0 - L, 1000.0 + L, 4_000_001)  # step 0.1 cm^-1
    lor = broadened_spectra([[1000.0]], half_width=g, grid=grid, normalize=False)[0]
    gau = broadened_spectra([[1000.0]], shape="gaussian", half_width=g, grid=grid, normalize=False)[0]
    np.testing.assert_allclose(np.trapezoid(lor, grid), 2 * g * np.arctan(L / g), rtol=1e-9)
    np.testing.assert_allclose(np.trapezoid(lor, grid), np.pi * g, rtol=1e-3)  # tails beyond L
    np.testing.assert_allclose(np.trapezoid(gau, grid), g * np.sqrt(np.pi / np.log(2)), rtol=1e-12)


def test_intensities_scale_each_line():
    lines = [[1000.0, 1500.0], [], [3000.0]]
    heights = [[2.0, 0.5], [], [0.0]]
    for shape in ("lorentzian", "gaussian"):
        s = broadened_spectra(lines, shape=shape, intensities=heights, normalize=False)
        one = [broadened_spectra([[v]], shape=shape, normalize=False)[0] for v in (1000.0, 1500.0)]
        np.testing.assert_allclose(s[0], 2.0 * one[0] + 0.5 * one[1], rtol=1e-13)
        assert np.all(s[1] == 0) and np.all(s[2] == 0)
        normed = broadened_spectra(lines, shape=shape, intensities=heights)
        assert np.linalg.norm(normed[0]) == pytest.approx(1.0) and np.all(normed[2] == 0)


def test_broadened_spectra_blocks(monkeypatch):
    rng = np.random.default_rng(2)
    lists = [rng.uniform(300, 4100, size=rng.integers(0, 9)) for _ in range(25)]
    heights = [rng.uniform(0, 3, size=f.size) for f in lists]
    whole = broadened_spectra(lists, shape="gaussian", intensities=heights)
    monkeypatch.setattr(spectra_module, "_BLOCK_ELEMENTS", 361 * 2)
    np.testing.assert_allclose(
        broadened_spectra(lists, shape="gaussian", intensities=heights), whole, rtol=1e-13, atol=1e-15
    )


@pytest.mark.parametrize(
    ("args", "kwargs", "error", "match"),
    [
        ((1000.0,), {}, TypeError, r"frequency_lists must be a list of 1-D arrays \(one per item\), got float"),
        (("1000",), {}, TypeError, r"frequency_lists must be a list of 1-D arrays \(one per item\), got str"),
        (([1000.0],), {}, ValueError, r"frequency_lists\[0\] must be 1-D, got an array of shape \(\)"),
        (([[1000.0]],), {"shape": "voigt"}, ValueError, r"shape must be 'lorentzian' or 'gaussian', got 'voigt'"),
        (([[1000.0]],), {"half_width": 0.0}, ValueError, r"half_width must be > 0 \(cm\^-1\), got 0\.0"),
        (([[1000.0]],), {"intensities": 2.0}, TypeError, r"intensities must be a list of 1-D arrays \(one per line list\) or None, got float"),
        (([[1000.0]],), {"intensities": [[1.0], [1.0]]}, ValueError, r"intensities must hold one array per line list \(1\), got 2"),
        (([[1000.0]],), {"intensities": [[1.0, 2.0]]}, ValueError, r"intensities\[0\] must have one value per line of frequency_lists\[0\] \(1\), got 2"),
        (([[1000.0]],), {"intensities": [[-1.0]]}, ValueError, r"intensities\[0\] must be >= 0, got \[-1\.0\]"),
        (([[1000.0]],), {"intensities": [[np.nan]]}, ValueError, r"intensities\[0\] must hold finite values only"),
        (([[1000.0]],), {"grid": [1000.0], "step": 1.0}, ValueError, r"grid was given together with step"),
    ],
)
def test_broadened_spectra_errors(args, kwargs, error, match):
    with pytest.raises(error, match=match):
        broadened_spectra(*args, **kwargs)


# --------------------------------------------------------------------------
# split_indices
# --------------------------------------------------------------------------
def test_split_indices_disjoint_sorted_reproducible():
    train, test = split_indices(1000, n_train=600, n_test=300, random_state=7)
    assert train.size == 600 and test.size == 300
    assert train.dtype == test.dtype == np.int64
    assert np.intersect1d(train, test).size == 0
    assert np.all(np.diff(train) > 0) and np.all(np.diff(test) > 0)
    again = split_indices(1000, n_train=600, n_test=300, random_state=7)
    np.testing.assert_array_equal(train, again[0])
    np.testing.assert_array_equal(test, again[1])
    other = split_indices(1000, n_train=600, n_test=300, random_state=8)
    assert not np.array_equal(test, other[1])
    # Reference: numpy.random.default_rng(seed).permutation; test first, then train.
    order = np.random.default_rng(7).permutation(1000)
    np.testing.assert_array_equal(test, np.sort(order[:300]))
    np.testing.assert_array_equal(train, np.sort(order[300:900]))


def test_split_indices_nested_and_exclude():
    small, test_a = split_indices(500, n_train=50, n_test=100)
    large, test_b = split_indices(500, n_train=300, n_test=100)
    np.testing.assert_array_equal(test_a, test_b)  # the test set does not depend on n_train
    assert set(small) <= set(large)
    exclude = np.arange(0, 500, 2)
    train, test = split_indices(500, n_train=200, n_test=50, exclude=[*exclude, 0])
    assert np.all(train % 2 == 1) and np.all(test % 2 == 1)
    assert train.size + test.size == 250 and np.intersect1d(train, test).size == 0
    gen_split = split_indices(10, n_train=3, n_test=3, random_state=np.random.default_rng(0))
    np.testing.assert_array_equal(gen_split[1], split_indices(10, n_train=3, n_test=3)[1])
    assert [a.size for a in split_indices(0, n_train=0, n_test=0)] == [0, 0]


@pytest.mark.parametrize(
    ("args", "kwargs", "error", "match"),
    [
        ((10,), {"n_train": 8, "n_test": 3}, ValueError, r"n_train \+ n_test = 8 \+ 3 = 11 exceeds the 10 available items \(10 items, 0 excluded\); ask for fewer"),
        ((10,), {"n_train": 5, "n_test": 3, "exclude": [0, 1, 2]}, ValueError, r"exceeds the 7 available items \(10 items, 3 excluded\)"),
        ((10,), {"n_train": -1, "n_test": 3}, ValueError, r"n_train must be >= 0, got -1"),
        ((10.0,), {"n_train": 1, "n_test": 3}, TypeError, r"n_items must be an integer, got 10\.0 of type float"),
        ((10,), {"n_train": 1, "n_test": True}, TypeError, r"n_test must be an integer, got True"),
        ((10,), {"n_train": 1, "n_test": 1, "random_state": None}, TypeError, r"random_state must be an int or a numpy\.random\.Generator, got None"),
        ((10,), {"n_train": 1, "n_test": 1, "exclude": [10]}, ValueError, r"exclude must hold positions in 0\.\.9, got values from 10 to 10"),
        ((10,), {"n_train": 1, "n_test": 1, "exclude": [1.5]}, TypeError, r"exclude must hold integers, got dtype float64"),
    ],
)
def test_split_indices_errors(args, kwargs, error, match):
    with pytest.raises(error, match=match):
        split_indices(*args, **kwargs)


# --------------------------------------------------------------------------
# load_qm9 on a small copy of the qm9pack files (fast: cache, rejections, errors)
# --------------------------------------------------------------------------
QM9_FILES = ("qm9_part1.csv", "qm9_part2.csv", "qm9_part3.csv")


@pytest.fixture(scope="module")
def qm9_head():
    """Header and the first 12 rows of each QM9 CSV file of qm9pack (raw fields)."""
    pytest.importorskip("rdkit", reason="RDKit is not installed (pip install 'gwpred[chem]')")
    data_dir = _qm9pack_data_dir()
    csv.field_size_limit(sys.maxsize)
    head = {}
    for name in QM9_FILES:
        with open(data_dir / name, newline="", encoding="utf-8") as handle:
            reader = csv.reader(handle)
            header = next(reader)
            head[name] = [row for _, row in zip(range(12), reader)]
    return header, head


def _fake_qm9pack(root: Path, monkeypatch, header, files) -> Path:
    """Write ``files`` (name -> rows) as a package folder and make find_spec find it there."""
    data = root / "qm9pack" / "data"
    data.mkdir(parents=True, exist_ok=True)
    for name, rows in files.items():
        with open(data / name, "w", newline="", encoding="utf-8") as handle:
            writer = csv.writer(handle)
            writer.writerow(header)
            writer.writerows(rows)
    real = importlib.util.find_spec

    def find_spec(name, *args, **kwargs):
        if name == "qm9pack":
            spec = importlib.machinery.ModuleSpec("qm9pack", None, is_package=True)
            spec.submodule_search_locations = [str(root / "qm9pack")]
            return spec
        return real(name, *args, **kwargs)

    monkeypatch.setattr(importlib.util, "find_spec", find_spec)
    return data


# Invented changes to real rows (qm9_part2.csv), one per rejection reason.
# Each entry: (row number, {column: new value}, reason).
BROKEN_ROWS = [
    (0, {"SMILES": "C1CC"}, "RDKit cannot parse SMILES"),  # unclosed ring
    (1, {"SMILES": "c1cccc1"}, "RDKit cannot parse SMILES"),  # cannot be kekulized
    (2, {"SMILES": "[H][H]"}, "gwpred.chem.graph_from_smiles refuses the SMILES"),
    (3, {"SMILES": "CC.O"}, "more than one fragment"),
    (4, {"SMILES": "CS"}, "element outside C N O F"),
    (5, {"Stoichiometry": "[4,9,0,0,0]"}, "SMILES disagrees with Stoichiometry (heavy atoms)"),
    (6, {"Stoichiometry": "[0,9,0,0,0]"}, "SMILES disagrees with Stoichiometry (heavy atoms)"),
    (7, {"Harmonic_Freq_cmi": "[100.0,200.0]"}, "number of frequencies is not 3N-6 or 3N-5"),
    (8, {"Stoichiometry": "[4,1,0,0,oops]"}, "unreadable Stoichiometry"),
    (9, {"Harmonic_Freq_cmi": "[1.0,x]"}, "unreadable Harmonic_Freq_cmi"),
]


def _break(header, rows):
    out = [list(r) for r in rows]
    for k, change, _ in BROKEN_ROWS:
        for col, value in change.items():
            out[k][header.index(col)] = value
    return out


@pytest.fixture
def small_qm9(tmp_path, monkeypatch, qm9_head):
    """A fake qm9pack with 36 real rows, 10 of them broken; returns (cache dir, header, files)."""
    header, head = qm9_head
    files = dict(head)
    files["qm9_part2.csv"] = _break(header, head["qm9_part2.csv"])
    # part1 row 3 is water (Index 3): a wrong hydrogen count and an imaginary mode
    part1 = [list(r) for r in head["qm9_part1.csv"]]
    assert part1[2][header.index("SMILES")] == "O"
    part1[2][header.index("Stoichiometry")] = "[3,0,0,1,0]"  # H3O: one H too many
    freq = header.index("Harmonic_Freq_cmi")
    assert part1[1][header.index("SMILES")] == "N"  # ammonia: 6 modes
    part1[1][freq] = "[-100.0" + part1[1][freq][part1[1][freq].index(",") :]
    files["qm9_part1.csv"] = part1
    _fake_qm9pack(tmp_path / "site", monkeypatch, header, files)
    return tmp_path / "cache", header, files


EXPECTED_SMALL_REJECTIONS = {
    "RDKit cannot parse SMILES": 2,
    "gwpred.chem.graph_from_smiles refuses the SMILES": 1,
    "more than one fragment": 1,
    "element outside C N O F": 1,
    "SMILES disagrees with Stoichiometry (heavy atoms)": 2,
    "SMILES disagrees with Stoichiometry (hydrogens)": 1,
    "number of frequencies is not 3N-6 or 3N-5": 1,
    "non-positive (imaginary) or non-finite frequency": 1,
    "unreadable Stoichiometry": 1,
    "unreadable Harmonic_Freq_cmi": 1,
}


def _spy_parse(monkeypatch) -> list:
    calls = []
    real = qm9_module._parse_qm9

    def spy(*args, **kwargs):
        calls.append(1)
        return real(*args, **kwargs)

    monkeypatch.setattr(qm9_module, "_parse_qm9", spy)
    return calls


def _same_data(a: Qm9Data, b: Qm9Data) -> None:
    np.testing.assert_array_equal(a.index, b.index)
    assert a.smiles == b.smiles and a.formulas == b.formulas
    assert a.rejected == b.rejected and a.n_rows == b.n_rows
    assert a.rejected_index.keys() == b.rejected_index.keys()
    for reason in a.rejected_index:
        np.testing.assert_array_equal(a.rejected_index[reason], b.rejected_index[reason])
    assert len(a.graphs) == len(b.graphs)
    assert all(nx.utils.graphs_equal(g, h) for g, h in zip(a.graphs, b.graphs))
    assert all(np.array_equal(f, e) for f, e in zip(a.frequencies, b.frequencies))


def test_load_qm9_small_counts_every_rejection(small_qm9, capsys):
    cache, header, files = small_qm9
    data = load_qm9(features=None, cache_dir=cache, progress=True)
    assert data.rejected == EXPECTED_SMALL_REJECTIONS
    assert data.n_rows == 36 and len(data) == 36 - 12 and data.X is None
    # the QM9 indices behind the counts
    idx = header.index("Index")
    part1, part2 = files["qm9_part1.csv"], files["qm9_part2.csv"]
    np.testing.assert_array_equal(data.rejected_index["unreadable Stoichiometry"], [int(part2[8][idx])])
    np.testing.assert_array_equal(
        data.rejected_index["SMILES disagrees with Stoichiometry (hydrogens)"], [int(part1[2][idx])]
    )
    np.testing.assert_array_equal(
        data.rejected_index["non-positive (imaginary) or non-finite frequency"], [int(part1[1][idx])]
    )
    every = sorted(int(r[idx]) for rows in files.values() for r in rows)
    rejected = np.concatenate(list(data.rejected_index.values()))
    assert sorted([*data.index.tolist(), *rejected.tolist()]) == every  # nothing lost
    err = capsys.readouterr().err
    assert "36 rows, 24 passed the checks, 12 rejected (" in err
    assert "RDKit cannot parse SMILES: 2" in err and "24 molecules with 1..9 heavy atoms returned" in err


def test_load_qm9_small_second_call_reads_cache(small_qm9, monkeypatch, capsys):
    cache, _, _ = small_qm9
    first = load_qm9(features=None, cache_dir=cache, progress=False)
    assert (cache / "qm9_full.npz").is_file()
    calls = _spy_parse(monkeypatch)
    second = load_qm9(features=None, cache_dir=cache, progress=True)
    assert calls == []
    _same_data(first, second)
    assert f"QM9 from cache {cache / 'qm9_full.npz'}" in capsys.readouterr().err
    # the cache holds plain arrays only
    with np.load(cache / "qm9_full.npz", allow_pickle=False) as archive:
        assert all(archive[k].dtype.kind in "iufU" for k in archive.files)
    assert [p.name for p in cache.iterdir()] == ["qm9_full.npz"]  # no temporary file left


def test_load_qm9_small_rebuilds_when_source_changes(small_qm9, monkeypatch, qm9_head, capsys):
    cache, header, files = small_qm9
    before = load_qm9(features=None, cache_dir=cache, progress=False)
    changed = dict(files)
    changed["qm9_part3.csv"] = files["qm9_part3.csv"][:-1]  # one row less
    _fake_qm9pack(cache.parent / "site", monkeypatch, header, changed)
    calls = _spy_parse(monkeypatch)
    after = load_qm9(features=None, cache_dir=cache, progress=True)
    assert calls == [1] and after.n_rows == before.n_rows - 1 and len(after) == len(before) - 1
    assert "is out of date (other source files or RDKit version); rebuilding it" in capsys.readouterr().err
    load_qm9(features=None, cache_dir=cache, progress=False)
    assert calls == [1]  # the rebuilt cache is used


def test_load_qm9_small_rebuilds_on_format_version(small_qm9, monkeypatch, capsys):
    cache, _, _ = small_qm9
    before = load_qm9(features=None, cache_dir=cache, progress=False)
    monkeypatch.setattr(qm9_module, "_QM9_CACHE_VERSION", 2)
    calls = _spy_parse(monkeypatch)
    after = load_qm9(features=None, cache_dir=cache, progress=True)
    assert calls == [1]
    assert "is out of date (format version 1)" in capsys.readouterr().err
    _same_data(before, after)


def _truncate(path: Path) -> None:
    path.write_bytes(path.read_bytes()[:5000])


def _garbage(path: Path) -> None:
    path.write_bytes(b"not a zip file at all")


def _flip_byte(path: Path) -> None:
    raw = bytearray(path.read_bytes())
    raw[len(raw) // 2] ^= 0xFF  # inside a member: the zip CRC check fails
    path.write_bytes(bytes(raw))


def _inconsistent(path: Path) -> None:
    with np.load(path, allow_pickle=False) as archive:
        arrays = {k: archive[k] for k in archive.files}
    arrays["edge_src"] = np.full_like(arrays["edge_src"], 50)
    np.savez(path.with_suffix(".tmp.npz"), **arrays)
    path.with_suffix(".tmp.npz").replace(path)


def _single_array(path: Path) -> None:
    with open(path, "wb") as handle:
        np.save(handle, np.arange(3))


def _drop_member(path: Path) -> None:
    with np.load(path, allow_pickle=False) as archive:
        arrays = {k: archive[k] for k in archive.files if k != "frequencies"}
    np.savez(path.with_suffix(".tmp.npz"), **arrays)
    path.with_suffix(".tmp.npz").replace(path)


@pytest.mark.parametrize(
    ("damage", "match"),
    [
        (_truncate, r"is not a readable \.npz archive"),
        (_garbage, r"damaged \("),
        (_flip_byte, r"damaged \("),
        (_inconsistent, r"damaged \(edge 0 joins nodes \(50, "),
        (_single_array, r"damaged \(it holds a single array, not an \.npz archive\)"),
        (_drop_member, r"damaged \(it lacks the arrays \['frequencies'\]\)"),
    ],
)
def test_load_qm9_small_damaged_cache_is_rebuilt_with_warning(small_qm9, monkeypatch, damage, match):
    # Documented behaviour: a damaged cache file gives a RuntimeWarning and is rebuilt.
    cache, _, _ = small_qm9
    before = load_qm9(features=None, cache_dir=cache, progress=False)
    damage(cache / "qm9_full.npz")
    calls = _spy_parse(monkeypatch)
    with pytest.warns(RuntimeWarning, match=r"the QM9 cache file .*qm9_full\.npz is damaged") as rec:
        after = load_qm9(features=None, cache_dir=cache, progress=False)
    assert re.search(match, str(rec[0].message)), str(rec[0].message)
    assert str(rec[0].message).endswith("it is rebuilt from the qm9pack CSV files")
    assert calls == [1]
    _same_data(before, after)
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        load_qm9(features=None, cache_dir=cache, progress=False)  # repaired: no warning
    assert calls == [1]


def test_load_qm9_small_unwritable_cache_warns_and_returns_data(small_qm9, monkeypatch):
    cache, _, _ = small_qm9

    def refuse(path, arrays):
        raise PermissionError(13, "Permission denied", str(path))

    monkeypatch.setattr(qm9_module, "_write_qm9_cache", refuse)
    with pytest.warns(RuntimeWarning, match=r"could not write the QM9 cache file .*Permission denied.*pass cache_dir= a writable folder"):
        data = load_qm9(features=None, cache_dir=cache, progress=False)
    assert len(data) == 24


@pytest.mark.usefixtures("small_qm9")
def test_load_qm9_cache_location(tmp_path, monkeypatch):
    monkeypatch.setenv("GWPRED_CACHE", str(tmp_path / "from_env"))
    load_qm9(features=None, progress=False)
    assert (tmp_path / "from_env" / "qm9_full.npz").is_file()
    monkeypatch.delenv("GWPRED_CACHE")
    monkeypatch.setenv("HOME", str(tmp_path / "home"))  # Path.home() reads HOME on POSIX
    assert qm9_module._qm9_cache_path(None) == tmp_path / "home" / ".cache" / "gwpred" / "qm9_full.npz"
    assert qm9_module._qm9_cache_path("~/x") == tmp_path / "home" / "x" / "qm9_full.npz"


def test_load_qm9_small_features_and_range(small_qm9):
    cache, _, _ = small_qm9
    full = load_qm9(features=None, cache_dir=cache, progress=False)
    small = load_qm9(features="spectrum", max_heavy=2, cache_dir=cache, progress=False)
    sizes = np.array([g.number_of_nodes() for g in full.graphs])
    np.testing.assert_array_equal(small.index, full.index[sizes <= 2])
    assert small.X.shape == (len(small), 361)
    np.testing.assert_allclose(small.X, lorentzian_spectra(small.frequencies), rtol=1e-13)
    mid = load_qm9(features=None, min_heavy=3, max_heavy=3, cache_dir=cache, progress=False)
    assert {g.number_of_nodes() for g in mid.graphs} == {3}


@pytest.mark.parametrize(
    ("files", "match"),
    [
        ({"bad_header": True}, r"qm9_part1\.csv lacks the columns \['Harmonic_Freq_cmi'\]; it is not a QM9 file of qm9pack"),
        ({"short_row": True}, r"qm9_part1\.csv, row 3: \d+ fields where the header has \d+; the file is damaged"),
        ({"index": "x7"}, r"QM9 file row with Index 'x7': not an integer; .*reinstall qm9pack"),
        ({"duplicate": True}, r"QM9 Index 1 appears twice in .*; the files are damaged"),
    ],
)
def test_load_qm9_damaged_source_files(tmp_path, monkeypatch, qm9_head, files, match):
    header, head = qm9_head
    rows = {k: [list(r) for r in v] for k, v in head.items()}
    hdr = list(header)
    if files.get("bad_header"):
        hdr[hdr.index("Harmonic_Freq_cmi")] = "Frequencies"
    if files.get("short_row"):
        rows["qm9_part1.csv"][1] = rows["qm9_part1.csv"][1][:5]
    if "index" in files:
        rows["qm9_part1.csv"][0][header.index("Index")] = files["index"]
    if files.get("duplicate"):
        rows["qm9_part2.csv"][0][header.index("Index")] = "1"
    _fake_qm9pack(tmp_path / "site", monkeypatch, hdr, rows)
    with pytest.raises(ValueError, match=match):
        load_qm9(features=None, cache_dir=tmp_path / "cache", progress=False)


def test_load_qm9_missing_csv_file(tmp_path, monkeypatch, qm9_head):
    header, head = qm9_head
    _fake_qm9pack(tmp_path / "site", monkeypatch, header, {"qm9_part1.csv": head["qm9_part1.csv"]})
    with pytest.raises(FileNotFoundError, match=r"lacks \['qm9_part2\.csv', 'qm9_part3\.csv'\]; reinstall it"):
        load_qm9(features=None, cache_dir=tmp_path / "cache", progress=False)


@pytest.mark.parametrize(
    ("missing", "match"),
    [
        ("qm9pack", r"'qm9pack', which is not installed; install it with: pip install 'gwpred\[data\]' \(or 'gwpred\[all\]'\)"),
        ("rdkit", r"load_qm9 needs RDKit .*pip install 'gwpred\[chem\]' \(or 'gwpred\[all\]'\)"),
    ],
)
def test_load_qm9_missing_extra(tmp_path, monkeypatch, missing, match):
    if missing == "rdkit":
        _qm9pack_data_dir()  # qm9pack is looked for first
    real = importlib.util.find_spec
    monkeypatch.setattr(
        importlib.util, "find_spec", lambda name, *a, **k: None if name == missing else real(name, *a, **k)
    )
    with pytest.raises(ImportError, match=match):
        load_qm9(features=None, cache_dir=tmp_path, progress=False)


@pytest.mark.parametrize(
    ("kwargs", "error", "match"),
    [
        ({"features": "ir"}, ValueError, r"features must be 'spectrum', 'fingerprint' or None, got 'ir'"),
        ({"min_heavy": 0}, ValueError, r"min_heavy must be >= 1, got 0"),
        ({"min_heavy": 5, "max_heavy": 4}, ValueError, r"max_heavy must be >= min_heavy, got min_heavy=5 and max_heavy=4"),
        ({"max_heavy": "9"}, TypeError, r"max_heavy must be an integer, got '9'"),
        ({"progress": "yes"}, TypeError, r"progress must be True or False, got 'yes'"),
        ({"line_shape": "voigt"}, ValueError, r"line_shape must be 'lorentzian' or 'gaussian', got 'voigt'"),
        ({"half_width": -1.0}, ValueError, r"half_width must be > 0 \(cm\^-1\), got -1\.0"),
        ({"grid": []}, ValueError, r"grid must hold at least one wavenumber"),
        ({"features": "fingerprint", "fingerprint_bits": 0}, ValueError, r"fingerprint_bits must be >= 1, got 0; use e\.g\. 2048"),
        ({"features": "fingerprint", "fingerprint_radius": -1}, ValueError, r"fingerprint_radius must be >= 0, got -1"),
        ({"features": "fingerprint", "fingerprint_counts": 1}, TypeError, r"fingerprint_counts must be True or False, got 1"),
        ({"cache_dir": 3}, TypeError, r"cache_dir must be a path \(str or os\.PathLike\) or None, got 3"),
    ],
)
def test_load_qm9_parameter_errors(kwargs, error, match):
    with pytest.raises(error, match=match):
        load_qm9(**kwargs)


def test_load_qm9_cache_dir_is_a_file(tmp_path):
    target = tmp_path / "file"
    target.write_text("x")
    with pytest.raises(NotADirectoryError, match=r"exists but is not a folder; pass cache_dir= a folder"):
        load_qm9(features=None, cache_dir=target, progress=False)


def test_hill_formula_order():
    # Common practice (Hill system): C, then H, then the others alphabetically; without C,
    # everything alphabetically. Counts in the QM9 Stoichiometry order H, C, N, O, F.
    assert qm9_module._hill_formula([6, 2, 0, 1, 0]) == "C2H6O"
    assert qm9_module._hill_formula([3, 0, 1, 0, 0]) == "H3N"
    assert qm9_module._hill_formula([1, 0, 0, 0, 1]) == "FH"
    assert qm9_module._hill_formula([0, 1, 0, 1, 2]) == "CF2O"


# --------------------------------------------------------------------------
# load_qm9 on the whole qm9pack set (one parse per session)
# --------------------------------------------------------------------------
@pytest.fixture(scope="module")
def qm9_cache_dir(tmp_path_factory):
    pytest.importorskip("rdkit", reason="RDKit is not installed (pip install 'gwpred[chem]')")
    _qm9pack_data_dir()
    return tmp_path_factory.mktemp("qm9_cache")


@pytest.fixture(scope="module")
def qm9_full(qm9_cache_dir):
    """All of QM9, parsed once (about a minute) into a temporary cache."""
    start = time.perf_counter()
    data = load_qm9(features=None, cache_dir=qm9_cache_dir, progress=False)
    print(f"\nload_qm9 first call (parse): {time.perf_counter() - start:.1f} s")
    return data


@pytest.fixture(scope="module")
def qm9_csv(qm9_full):
    """Index -> (Stoichiometry counts, SMILES, number of frequencies, smallest frequency) for
    every row of the qm9pack CSV files, read here with the csv module alone."""
    data_dir = _qm9pack_data_dir()
    csv.field_size_limit(sys.maxsize)
    out = {}
    for name in QM9_FILES:
        with open(data_dir / name, newline="", encoding="utf-8") as handle:
            reader = csv.reader(handle)
            header = next(reader)
            cols = [header.index(c) for c in ("Index", "Stoichiometry", "SMILES", "Harmonic_Freq_cmi")]
            for rec in reader:
                index, stoichiometry, smiles, freq_text = (rec[c] for c in cols)
                freqs = [float(v) for v in freq_text.strip("[] ").split(",")]
                out[int(index)] = (_stoichiometry(stoichiometry), smiles, len(freqs), min(freqs))
    return out


@pytest.mark.slow
def test_qm9_full_size_and_rejections(qm9_full, qm9_csv):
    # Ramakrishnan et al. 2014 (Scientific Data 1, 140022) publish 133,885 molecules. The qm9pack
    # files hold 130,831 rows = 133,885 - 3,054 (3,054: from memory, the molecules that failed the
    # authors' geometry consistency check; see data/README.md). Of these rows, 336 are rejected
    # here, all for their frequencies: 334 list a number of modes other than 3N-6 / 3N-5 and 2
    # have a non-positive (imaginary) mode. Every SMILES parses into one connected heavy-atom graph
    # whose atom and hydrogen counts agree with Stoichiometry. 130,831 - 336 = 130,495.
    assert qm9_full.n_rows == len(qm9_csv) == 133_885 - 3_054
    assert qm9_full.rejected == {
        "number of frequencies is not 3N-6 or 3N-5": 334,
        "non-positive (imaginary) or non-finite frequency": 2,
    }
    assert len(qm9_full) == 130_495 == qm9_full.n_rows - 336
    assert qm9_full.index.dtype == np.int64 and np.all(np.diff(qm9_full.index) > 0)
    # Recount from the CSV rows (common practice: N atoms have 3N-6 modes, 3N-5 if linear).
    wrong_count = sorted(
        i for i, (c, _, n_freq, _) in qm9_csv.items() if n_freq not in (3 * sum(c.values()) - 6, 3 * sum(c.values()) - 5)
    )
    imaginary = sorted(i for i, (_, _, n, low) in qm9_csv.items() if low <= 0 and i not in wrong_count)
    np.testing.assert_array_equal(qm9_full.rejected_index["number of frequencies is not 3N-6 or 3N-5"], wrong_count)
    np.testing.assert_array_equal(qm9_full.rejected_index["non-positive (imaginary) or non-finite frequency"], imaginary)
    assert sorted({*qm9_full.index.tolist(), *wrong_count, *imaginary}) == sorted(qm9_csv)


@pytest.mark.slow
def test_qm9_full_graphs_formulas_and_source_columns(qm9_full, qm9_csv):
    sizes = np.array([g.number_of_nodes() for g in qm9_full.graphs])
    assert sizes.min() == 1 and sizes.max() == 9  # QM9: 1 to 9 heavy atoms
    for g, formula, i, f in zip(qm9_full.graphs, qm9_full.formulas, qm9_full.index.tolist(), qm9_full.frequencies):
        counts, smiles, n_freq, _ = qm9_csv[i]
        assert nx.is_connected(g), i
        labels = [lab for _, lab in g.nodes(data="label")]
        assert set(labels) <= {"C", "N", "O", "F"}, i
        assert all(type(o) is int and o in (1, 2, 3) for _, _, o in g.edges(data="label")), i
        assert all(type(q) is int for _, q in g.nodes(data="charge")), i
        # the formula agrees with the graph's heavy atoms and with Stoichiometry
        parsed = {e: int(n or 1) for e, n in re.findall(r"([A-Z][a-z]?)(\d*)", formula)}
        assert {e: parsed.get(e, 0) for e in "CNOF"} == {e: labels.count(e) for e in "CNOF"}, i
        assert {e: parsed.get(e, 0) for e in "HCNOF"} == counts, i
        assert f.dtype == np.float64 and f.size == n_freq, i
        assert g.graph["smiles"] == smiles.strip()
    assert qm9_full.smiles == [qm9_csv[i][1].strip() for i in qm9_full.index.tolist()]


@pytest.mark.slow
def test_qm9_full_formulas_and_graphs_match_rdkit(qm9_full):
    # Reference: RDKit. CalcMolFormula gives the Hill formula of the SMILES (hydrogens included);
    # the heavy-atom graph (elements, formal charges, Kekulé bond orders) is rebuilt from the
    # SMILES directly. All charged molecules (zwitterions) and every 25th other molecule.
    from rdkit import Chem, RDLogger
    from rdkit.Chem.rdMolDescriptors import CalcMolFormula

    RDLogger.DisableLog("rdApp.*")
    charged = [k for k, g in enumerate(qm9_full.graphs) if any(q for _, q in g.nodes(data="charge"))]
    assert len(charged) == 579  # zwitterions, e.g. [NH3+]CCC([O-])=O; kept, unlike the demo
    sample = sorted({*charged, *range(0, len(qm9_full), 25)})
    for k in sample:
        smiles, g = qm9_full.smiles[k], qm9_full.graphs[k]
        mol = Chem.MolFromSmiles(smiles)
        assert CalcMolFormula(mol) == qm9_full.formulas[k], smiles
        Chem.Kekulize(mol, clearAromaticFlags=True)
        heavy = [a for a in mol.GetAtoms() if a.GetAtomicNum() > 1]
        position = {a.GetIdx(): n for n, a in enumerate(heavy)}
        assert [(a.GetSymbol(), a.GetFormalCharge()) for a in heavy] == [
            (g.nodes[v]["label"], g.nodes[v]["charge"]) for v in range(len(heavy))
        ], smiles
        ref = {
            (min(position[b.GetBeginAtomIdx()], position[b.GetEndAtomIdx()]), max(position[b.GetBeginAtomIdx()], position[b.GetEndAtomIdx()]), int(b.GetBondTypeAsDouble()))
            for b in mol.GetBonds()
            if b.GetBeginAtomIdx() in position and b.GetEndAtomIdx() in position
        }
        assert {(min(a, b), max(a, b), o) for a, b, o in g.edges(data="label")} == ref, smiles


@pytest.mark.slow
def test_qm9_full_contains_the_demo(qm9_full, demo, raw_arrays):
    # The 3000 demo molecules (data/qm9_demo.npz, built by data/make_demo.py with its own RDKit
    # code) are in the full set under the same QM9 index, with identical graphs (the full set
    # adds the node attribute charge, 0 for all demo molecules) and the same frequencies.
    _, graphs, smiles = demo
    qm9_index = raw_arrays["qm9_index"].astype(np.int64)
    pos = np.searchsorted(qm9_full.index, qm9_index)
    np.testing.assert_array_equal(qm9_full.index[pos], qm9_index)
    offsets, freqs = raw_arrays["freq_offsets"], raw_arrays["frequencies"]
    for k, p in enumerate(pos.tolist()):
        g = qm9_full.graphs[p].copy()
        assert g.graph.pop("smiles") == smiles[k] == qm9_full.smiles[p]
        assert [g.nodes[v].pop("charge") for v in g] == [0] * g.number_of_nodes()
        assert nx.utils.graphs_equal(g, graphs[k]), smiles[k]
        # demo stores float32: equal after rounding the full set's float64 values
        np.testing.assert_array_equal(qm9_full.frequencies[p].astype(np.float32), freqs[offsets[k] : offsets[k + 1]])
        n_h = re.search(r"H(\d*)", qm9_full.formulas[p])
        assert (int(n_h.group(1) or 1) if n_h else 0) == raw_arrays["n_hydrogens"][k]


@pytest.mark.slow
def test_qm9_full_second_call_reads_cache(qm9_full, qm9_cache_dir, monkeypatch, capsys):
    def no_parse(*args, **kwargs):
        raise AssertionError("the cache should have been used")

    monkeypatch.setattr(qm9_module, "_parse_qm9", no_parse)
    again = load_qm9(features=None, cache_dir=qm9_cache_dir, progress=True)
    err = capsys.readouterr().err
    assert "QM9 from cache" in err and "130,831 rows, 130,495 passed the checks, 336 rejected" in err
    # Every array, and every 10th graph (graphs are rebuilt from the same arrays by the same code
    # on both paths; the small-set tests above compare all graphs).
    np.testing.assert_array_equal(qm9_full.index, again.index)
    assert qm9_full.smiles == again.smiles and qm9_full.formulas == again.formulas
    assert qm9_full.rejected == again.rejected and qm9_full.n_rows == again.n_rows
    np.testing.assert_array_equal(np.concatenate(qm9_full.frequencies), np.concatenate(again.frequencies))
    assert [f.size for f in qm9_full.frequencies] == [f.size for f in again.frequencies]
    assert all(nx.utils.graphs_equal(qm9_full.graphs[k], again.graphs[k]) for k in range(0, len(again), 10))


@pytest.mark.slow
def test_qm9_full_features_on_small_molecules(qm9_full, qm9_cache_dir):
    # Spectra: the same broadening as broadened_spectra / lorentzian_spectra on the same lines.
    # Fingerprints: RDKit's Morgan generator on the QM9 SMILES (reference).
    from rdkit import Chem
    from rdkit.Chem import rdFingerprintGenerator

    sizes = np.array([g.number_of_nodes() for g in qm9_full.graphs])
    spec = load_qm9(max_heavy=4, cache_dir=qm9_cache_dir, progress=False)
    np.testing.assert_array_equal(spec.index, qm9_full.index[sizes <= 4])
    assert spec.X.shape == (47, 361)  # 3 + 5 + 9 + 30 molecules with 1..4 heavy atoms
    np.testing.assert_allclose(spec.X, lorentzian_spectra(spec.frequencies), rtol=1e-13)
    gauss = load_qm9(max_heavy=4, line_shape="gaussian", half_width=8.0, grid=[1000.0, 2000.0, 3000.0], cache_dir=qm9_cache_dir, progress=False)
    np.testing.assert_allclose(gauss.X, broadened_spectra(spec.frequencies, shape="gaussian", half_width=8.0, grid=[1000.0, 2000.0, 3000.0]), rtol=1e-13)
    fp = load_qm9(features="fingerprint", max_heavy=4, fingerprint_bits=512, fingerprint_counts=True, cache_dir=qm9_cache_dir, progress=False)
    gen = rdFingerprintGenerator.GetMorganGenerator(radius=2, fpSize=512)
    ref = np.array([gen.GetCountFingerprintAsNumPy(Chem.MolFromSmiles(s)) for s in fp.smiles], dtype=float)
    np.testing.assert_array_equal(fp.X, ref)


@pytest.mark.slow
def test_qm9_full_split_leaves_out_the_demo(qm9_full, raw_arrays):
    demo_pos = np.searchsorted(qm9_full.index, raw_arrays["qm9_index"])
    train, test = split_indices(len(qm9_full), n_train=10_000, n_test=2_000, exclude=demo_pos)
    assert not set(demo_pos) & (set(train) | set(test))
    again = split_indices(len(qm9_full), n_train=10_000, n_test=2_000, exclude=demo_pos)
    np.testing.assert_array_equal(train, again[0])
    np.testing.assert_array_equal(test, again[1])


def _graph(nodes, edges):
    g = nx.Graph()
    g.add_nodes_from((v, d) for v, d in nodes)
    g.add_edges_from((a, b, {"label": o}) for a, b, o in edges)
    return g


@pytest.mark.parametrize(
    ("graph", "stoichiometry", "reason"),
    [
        (_graph([(1, {"label": "C"}), (2, {"label": "C"})], [(1, 2, 1)]), "[6,2,0,0,0]", "graph nodes are not numbered 0..n-1"),
        (_graph([(0, {"label": "C"}), (1, {"label": "C"})], [(0, 1, 4)]), "[0,2,0,0,0]", "bond order other than 1, 2 or 3"),
        (_graph([(0, {"label": "C"}), (1, {"label": "C"})], [(0, 1, 1.5)]), "[5,2,0,0,0]", "bond order other than 1, 2 or 3"),
        (_graph([(0, {"label": "C", "charge": 0.5})], []), "[4,1,0,0,0]", "formal charge is not an integer"),
        (_graph([(0, {"label": "C", "charge": 3})], []), "[4,1,0,0,0]", "SMILES disagrees with Stoichiometry (hydrogens)"),
        (_graph([(0, {"label": "O"}), (1, {"label": "O"})], [(0, 1, 3)]), "[0,0,0,2,0]", "SMILES disagrees with Stoichiometry (hydrogens)"),
        (_graph([], []), "[0,0,0,0,0]", "more than one fragment"),
    ],
)
def test_qm9_row_checks_on_unusual_graphs(graph, stoichiometry, reason):
    # Invented graphs that graph_from_smiles should never return: the checks still catch them.
    freqs = "[" + ",".join(["1000.0"] * 12) + "]"
    assert qm9_module._qm9_molecule(1, "X", stoichiometry, freqs, lambda s: graph) == reason


@pytest.mark.parametrize(
    ("smiles", "hydrogens"),
    [("[NH4+]", 4), ("C[NH3+]", 6), ("CC(=O)[O-]", 3), ("[CH2-]C", 5), ("C[O+]=C", 5), ("[CH2+]C", 5), ("CC", 6)],
)
def test_implied_hydrogens_agree_with_rdkit(smiles, hydrogens):
    # Reference: RDKit's total hydrogen count (default valences, formal charges) of the SMILES.
    Chem = pytest.importorskip("rdkit.Chem")
    from gwpred.chem import graph_from_smiles

    mol = Chem.MolFromSmiles(smiles)
    assert sum(a.GetTotalNumHs() for a in mol.GetAtoms()) == hydrogens
    parts = qm9_module._graph_parts(graph_from_smiles(smiles, check_hydrogens=False))
    assert qm9_module._implied_hydrogens(*parts) == hydrogens

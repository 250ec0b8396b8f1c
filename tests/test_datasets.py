"""Tests for gwpred.datasets: demo loader, graph arrays, Lorentzian broadening.

Outside references used here:
- RDKit: heavy-atom graph rebuilt from each stored SMILES (Kekulé bond orders).
- QM9 CSV files of the PyPI package qm9pack: Stoichiometry, SMILES and Harmonic_Freq_cmi columns.
- scipy.stats.cauchy: the Lorentzian line shape is the Cauchy density up to a factor.
- networkx: is_connected / is_isomorphic.
"""

from __future__ import annotations

import csv
import hashlib
import importlib.util
import sys
from pathlib import Path

import networkx as nx
import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from gwpred import datasets
from gwpred.datasets import (
    graphs_from_arrays,
    load_demo,
    lorentzian_spectra,
    lorentzian_spectrum,
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
    spec = importlib.util.find_spec("qm9pack")
    if spec is None or not spec.submodule_search_locations:
        pytest.skip("qm9pack is not installed")
    data_dir = Path(list(spec.submodule_search_locations)[0]) / "data"
    wanted = set(raw_arrays["qm9_index"].tolist())
    csv.field_size_limit(sys.maxsize)
    rows = {}
    for name in ("qm9_part1.csv", "qm9_part2.csv", "qm9_part3.csv"):
        with open(data_dir / name, newline="", encoding="utf-8") as handle:
            for rec in csv.DictReader(handle):
                if int(rec["Index"]) in wanted:
                    rows[int(rec["Index"])] = rec
    return rows


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
    monkeypatch.setattr(datasets, "_BLOCK_ELEMENTS", 361 * 3)
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
    assert all(nx.utils.graphs_equal(a, b) for a, b in zip(graphs, demo[1]))


def test_graphs_from_arrays_small_example():
    (g, h) = graphs_from_arrays([2, 1], [0, 2, 1], ["C", "N", "O"], [0, 1, 1], [0], [1], [3])
    assert dict(g.nodes(data="label")) == {0: "C", 1: "O"}
    assert list(g.edges(data="label")) == [(0, 1, 3)]
    assert dict(h.nodes(data="label")) == {0: "N"} and h.number_of_edges() == 0


GOOD = dict(
    n_nodes=[2, 2],
    node_element=[0, 1, 0, 0],
    elements=["C", "N"],
    edge_offsets=[0, 1, 2],
    edge_src=[0, 0],
    edge_dst=[1, 1],
    edge_order=[1, 2],
)


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
    monkeypatch.setattr(datasets, "_DEMO_FILE", "absent_demo.npz")
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

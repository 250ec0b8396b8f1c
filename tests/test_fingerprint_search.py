"""Fingerprint search: predictions edited until their Morgan fingerprints match the inputs.

References:

- RDKit (a general-purpose reference library): Morgan fingerprints
  (``rdFingerprintGenerator.GetMorganGenerator``, bits and counts, with its bit
  information), canonical SMILES, sanitisation.
- Real molecules: the NCI open-database sample shipped in RDKit's PyPI wheel
  (``Data/NCI/first_5K.smi``, through ``gwpred.datasets.load_druglike``).
- Graph edit distance: ``gwpred.ged.edit_distance``, itself checked against networkx in
  ``tests/test_ged.py``.
"""

from __future__ import annotations

import re
import warnings

import networkx as nx
import numpy as np
import pytest

Chem = pytest.importorskip("rdkit.Chem")
from rdkit import RDLogger  # noqa: E402
from rdkit.Chem import rdFingerprintGenerator  # noqa: E402

from gwpred import BarycenterGraphPredictor, load_model, save_model  # noqa: E402
from gwpred.chem import check_molecule, mol_from_arrays, morgan_fingerprints, morgan_of_mol  # noqa: E402
from gwpred.datasets import load_druglike  # noqa: E402
from gwpred.formula import formula_matches, graph_formula, valence_table  # noqa: E402
from gwpred.ged import edit_distance  # noqa: E402
from gwpred.model import estimator as estimator_module  # noqa: E402
from gwpred.model.fingerprint_search import (  # noqa: E402
    MorganSpec,
    find_morgan_spec,
    fingerprint_search,
)

RDLogger.DisableLog("rdApp.*")


@pytest.fixture(scope="module")
def druglike():
    return load_druglike()


def arrays(g: nx.Graph) -> tuple[list[str], np.ndarray]:
    n = g.number_of_nodes()
    O = np.zeros((n, n), dtype=np.int64)
    for u, v, d in g.edges(data=True):
        O[u, v] = O[v, u] = d["label"]
    return [g.nodes[v]["label"] for v in range(n)], O


def canonical(smiles: str) -> str:
    return Chem.MolToSmiles(Chem.MolFromSmiles(smiles))


# --------------------------------------------------------------------------- the RDKit bridge
def test_mol_from_arrays_round_trips_real_molecules(druglike):
    # RDKit canonical SMILES of the molecule built from the graph's arrays (charges in the
    # labels, kekulé orders) equals RDKit's canonical SMILES of the source SMILES
    for g, smi in list(zip(druglike.graphs, druglike.smiles))[:300]:
        labels, O = arrays(g)
        assert Chem.MolToSmiles(mol_from_arrays(labels, O)) == canonical(smi)


def test_mol_from_arrays_refuses_what_rdkit_refuses():
    O = np.array([[0, 2], [2, 0]])
    assert mol_from_arrays(["F", "F"], O) is None  # F=F: no valence allows it (RDKit)
    assert mol_from_arrays(["Xx", "C"], O) is None  # not an element
    assert mol_from_arrays(["C", "C"], 4 * O) is None  # bond order 8


@pytest.mark.parametrize("counts", [False, True])
def test_morgan_of_mol_equals_rdkit_with_its_bit_information(druglike, counts):
    # reference: RDKit's Morgan generator, radius 2, 1024 bits, and its bit-info map
    gen = rdFingerprintGenerator.GetMorganGenerator(radius=2, fpSize=1024)
    for smi in druglike.smiles[:100]:
        mol = Chem.MolFromSmiles(smi)
        fp, atoms = morgan_of_mol(mol, radius=2, n_bits=1024, counts=counts, with_atoms=True)
        ref = (gen.GetCountFingerprintAsNumPy if counts else gen.GetFingerprintAsNumPy)(mol)
        assert np.array_equal(fp, ref)
        assert np.array_equal(fp, morgan_fingerprints([smi], n_bits=1024, counts=counts)[0])
        out = rdFingerprintGenerator.AdditionalOutput()
        out.AllocateBitInfoMap()
        gen.GetFingerprint(mol, additionalOutput=out)
        info = out.GetBitInfoMap()
        assert set(atoms) == set(np.flatnonzero(ref).tolist()) == set(info)
        for bit, envs in info.items():  # each environment's centre is among the bit's atoms
            assert {c for c, _ in envs} <= atoms[bit]


# --------------------------------------------------------------------------- what the inputs are
@pytest.mark.parametrize("radius, n_bits, counts", [(2, 2048, False), (1, 1024, False), (3, 512, True)])
def test_find_morgan_spec_recovers_how_the_fingerprints_were_made(druglike, radius, n_bits, counts):
    graphs = druglike.graphs[:150]
    X = morgan_fingerprints(druglike.smiles[:150], radius=radius, n_bits=n_bits, counts=counts, dtype=np.uint8)
    spec, why = find_morgan_spec(X, lambda i: arrays(graphs[i]))
    assert spec == MorganSpec(radius, n_bits, counts) and why == ""


def test_find_morgan_spec_says_why_not(druglike):
    graphs = druglike.graphs[:50]
    X = morgan_fingerprints(druglike.smiles[:50], radius=4)
    spec, why = find_morgan_spec(X, lambda i: arrays(graphs[i]))
    # (radius 3 and 4 agree on a few small molecules)
    assert spec is None and re.match(r"4\d of 50 checked rows differ; the first: row 0 of X differs from the "
                                     r"radius-\d Morgan bits of its graph in \d+ of 2048 positions$", why)
    shuffled = morgan_fingerprints(druglike.smiles[1:51])  # rows of other molecules
    assert find_morgan_spec(shuffled, lambda i: arrays(graphs[i]))[0] is None
    spec, why = find_morgan_spec(X - 0.5, lambda i: arrays(graphs[i]))
    assert spec is None and "fractional" in why


def test_find_morgan_spec_tolerates_a_few_rows_and_says_which(druglike, split):
    # 2 of 100 checked rows altered (one bit flipped): still Morgan fingerprints, with the two named;
    # the estimator fits with a warning that says so
    graphs = druglike.graphs[:150]
    X = morgan_fingerprints(druglike.smiles[:150], dtype=np.uint8)
    X[0, 7] ^= 1
    X[149, 7] ^= 1
    spec, why = find_morgan_spec(X, lambda i: arrays(graphs[i]))
    assert spec == MorganSpec(2, 2048, False)
    assert why == "2 of 100 checked rows differ; the first: row 0 of X differs from the radius-2 Morgan bits of " \
                  "its graph in 1 of 2048 positions"
    with pytest.warns(UserWarning, match=r"fingerprint_search: 2 of 100 checked rows differ"):
        model = BarycenterGraphPredictor(kernel="tanimoto", fingerprint_search=True).fit(X, graphs)
    assert model.fingerprint_spec_ == spec


# --------------------------------------------------------------------------- the search
def _one_edit(labels, O, rng):
    """A copy with one random valid edit: a bond removed from a ring, or an atom relabelled."""
    for _ in range(100):
        L, M = list(labels), O.copy()
        if rng.random() < 0.5:
            i = int(rng.integers(len(L)))
            L[i] = str(rng.choice(["C", "N", "O", "S"]))
        else:
            iu, ju = np.nonzero(np.triu(M, 1))
            k = int(rng.integers(len(iu)))
            M[iu[k], ju[k]] = M[ju[k], iu[k]] = 0
            if not nx.is_connected(nx.from_numpy_array(M > 0)):
                continue
        if mol_from_arrays(L, M) is not None and (L != list(labels) or not np.array_equal(M, O)):
            return L, M
    raise AssertionError("no edit found")


def test_search_undoes_one_edit_on_real_molecules(druglike):
    # From a real NCI molecule with one random edit, the search reaches a molecule whose
    # Morgan fingerprint (RDKit) equals the original's; RDKit's canonical SMILES says it
    # is the original itself for nearly all of them (bits may collide or miss repeats).
    rng = np.random.default_rng(0)
    symbols = sorted({g.nodes[v]["label"] for g in druglike.graphs for v in g})
    caps = valence_table(symbols)
    index = {s: i for i, s in enumerate(symbols)}
    spec = MorganSpec(2, 2048, False)
    same = 0
    picks = rng.choice(len(druglike.graphs), size=30, replace=False)
    for i in picks.tolist():
        labels, O = arrays(druglike.graphs[i])
        L, M = _one_edit(labels, O, rng)
        target = morgan_fingerprints([druglike.smiles[i]])[0].astype(np.int64)
        res = fingerprint_search([(np.array([index[s] for s in L]), M)], target, symbols, caps, spec)
        assert res.start_similarity < 1.0 <= res.similarity
        mol = mol_from_arrays([symbols[c] for c in res.classes], res.orders)
        assert np.array_equal(morgan_of_mol(mol)[0], target)
        same += Chem.MolToSmiles(mol) == canonical(druglike.smiles[i])
    assert same >= 27


def test_search_results_are_valid_connected_and_repeatable(druglike):
    # every result passes RDKit's sanitisation (gwpred.chem.check_molecule) and stays connected
    symbols = sorted({g.nodes[v]["label"] for g in druglike.graphs for v in g})
    caps = valence_table(symbols)
    index = {s: i for i, s in enumerate(symbols)}
    spec = MorganSpec(2, 2048, False)
    for i in range(10):
        labels, O = arrays(druglike.graphs[i + 100])  # start from an unrelated molecule
        target = morgan_fingerprints([druglike.smiles[i]])[0]
        start = [(np.array([index[s] for s in labels]), O)]
        a = fingerprint_search(start, target, symbols, caps, spec, width=2, max_evaluations=3000)
        b = fingerprint_search(start, target, symbols, caps, spec, width=2, max_evaluations=3000)
        assert np.array_equal(a.classes, b.classes) and np.array_equal(a.orders, b.orders)
        assert a.similarity >= a.start_similarity and a.evaluations <= 3000
        assert nx.is_connected(nx.from_numpy_array(a.orders))
        g = nx.Graph()
        g.add_nodes_from((v, {"label": symbols[c]}) for v, c in enumerate(a.classes.tolist()))
        g.add_edges_from((u, v, {"label": int(a.orders[u, v])}) for u, v in zip(*np.nonzero(np.triu(a.orders, 1))))
        assert check_molecule(g).valid


def test_search_without_a_valid_start_gives_none():
    O = np.array([[0, 2], [2, 0]])
    assert fingerprint_search([(np.array([0, 0]), O)], np.zeros(64), ["F"], [1], MorganSpec(2, 64, False)) is None


# --------------------------------------------------------------------------- the estimator
@pytest.fixture(scope="module")
def split(druglike):
    rng = np.random.default_rng(1)
    order = rng.permutation(len(druglike.graphs))
    train, test = order[:1500], order[1500:1512]
    X = morgan_fingerprints(druglike.smiles, dtype=np.uint8)
    return X, druglike.graphs, train, test


def test_estimator_search_lowers_the_edit_distance_on_nci_molecules(split):
    # 12 held-out NCI molecules, 1,500 training: the searched predictions are closer to the
    # truth (GED) than the ordinary ones, all valid by RDKit, each with its similarity
    X, G, train, test = split
    plain = BarycenterGraphPredictor(kernel="tanimoto").fit(X[train], [G[i] for i in train])
    model = BarycenterGraphPredictor(kernel="tanimoto", fingerprint_search=True).fit(X[train], [G[i] for i in train])
    assert model.fingerprint_spec_ == MorganSpec(2, 2048, False) and plain.fingerprint_spec_ is None
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)  # decoding notes
        before = plain.predict(X[test])
        after = model.predict(X[test])
    ged_before = [edit_distance(p, G[i], time_limit=2).value for p, i in zip(before, test)]
    ged_after = [edit_distance(p, G[i], time_limit=2).value for p, i in zip(after, test)]
    assert np.mean(ged_after) < np.mean(ged_before)
    assert all(check_molecule(p).valid for p in after)
    sims = [p.graph["fingerprint_similarity"] for p in after]
    fps = morgan_fingerprints(after)
    for s, fp, i in zip(sims, fps, test):  # the stated similarity is RDKit's Tanimoto to the input
        x = X[i].astype(bool)
        assert s == pytest.approx((fp.astype(bool) & x).sum() / (fp.astype(bool) | x).sum())


def test_estimator_search_keeps_formulas_and_does_not_depend_on_workers(split):
    X, G, train, test = split
    kw = dict(kernel="tanimoto", fingerprint_search=True, search_width=2)
    one = BarycenterGraphPredictor(**kw).fit(X[train], [G[i] for i in train])
    two = BarycenterGraphPredictor(**kw, n_jobs=2).fit(X[train], [G[i] for i in train])
    rows = test[:4]
    formulas = [graph_formula(G[rows[0]]), None, None, None]
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)  # decoding notes
        a, b = one.predict(X[rows], formulas=formulas), two.predict(X[rows], formulas=formulas)
    for p, q in zip(a, b):
        assert nx.utils.graphs_equal(p, q)
    plain = BarycenterGraphPredictor(kernel="tanimoto").fit(X[train], [G[i] for i in train])
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        ref = plain.predict(X[rows[:1]], formulas=formulas[:1])[0]
    # the formula row keeps its formula (heavy atoms, hydrogens, charge: gwpred.formula, checked
    # against RDKit's CalcMolFormula in tests/test_druglike.py) and is at least as similar
    assert formula_matches(a[0], formulas[0])
    fp_ref = morgan_fingerprints([ref])[0].astype(bool)
    x = X[rows[0]].astype(bool)
    assert a[0].graph["fingerprint_similarity"] >= (fp_ref & x).sum() / (fp_ref | x).sum()
    assert all("fingerprint_similarity" in p.graph for p in a)


def test_fingerprint_search_true_refuses_inputs_that_are_not_fingerprints(split):
    X, G, train, _ = split
    Gtr = [G[i] for i in train[:200]]
    other = morgan_fingerprints(Gtr, radius=4, dtype=np.uint8)
    with pytest.raises(ValueError, match=r"fingerprint_search=True needs the rows of X to be the Morgan "
                                         r"fingerprints of their training graphs.*row 0 of X differs"):
        BarycenterGraphPredictor(kernel="tanimoto", fingerprint_search=True).fit(other, Gtr)
    auto = BarycenterGraphPredictor(kernel="tanimoto", fingerprint_search="auto").fit(other, Gtr)
    assert auto.fingerprint_spec_ is None
    assert BarycenterGraphPredictor(kernel="tanimoto", fingerprint_search="auto").fit(
        X[train[:200]], Gtr).fingerprint_spec_ == MorganSpec(2, 2048, False)


def test_fingerprint_search_true_refuses_graphs_that_are_not_molecules():
    graphs = [nx.path_graph(n) for n in (3, 4, 5)]
    for g in graphs:
        nx.set_node_attributes(g, "A", "label")
    with pytest.raises(ValueError, match="the training graphs are not molecules"):
        BarycenterGraphPredictor(fingerprint_search=True, edge_label=None).fit(np.eye(3), graphs)
    with pytest.raises(ValueError, match="fingerprint_search must be one of"):
        BarycenterGraphPredictor(fingerprint_search="yes", edge_label=None).fit(np.eye(3), graphs)


def test_fingerprint_search_without_rdkit_names_the_extra(split, monkeypatch):
    X, G, train, _ = split
    Gtr = [G[i] for i in train[:50]]
    monkeypatch.setattr(estimator_module, "has_extra", lambda name: False)
    monkeypatch.setattr(estimator_module, "require_extra",
                        lambda module, purpose: (_ for _ in ()).throw(ImportError(f"{purpose} needs gwpred[chem]")))
    with pytest.raises(ImportError, match=r"fingerprint_search needs gwpred\[chem\]"):
        BarycenterGraphPredictor(kernel="tanimoto", fingerprint_search=True).fit(X[train[:50]], Gtr)
    off = BarycenterGraphPredictor(kernel="tanimoto", fingerprint_search="auto").fit(X[train[:50]], Gtr)
    assert off.fingerprint_spec_ is None


def test_model_file_keeps_the_search(split, tmp_path):
    X, G, train, test = split
    model = BarycenterGraphPredictor(kernel="tanimoto", fingerprint_search=True, search_width=2).fit(
        X[train[:300]], [G[i] for i in train[:300]])
    save_model(model, tmp_path / "m.npz")
    back = load_model(tmp_path / "m.npz")
    assert back.fingerprint_search is True and back.search_width == 2
    assert back.fingerprint_spec_ == model.fingerprint_spec_
    for p, q in zip(model.predict(X[test[:2]]), back.predict(X[test[:2]])):
        assert nx.utils.graphs_equal(p, q) and p.graph == q.graph

"""Charged atom labels, valence sets and charged formulas on drug-like molecules.

References:

- RDKit (a general-purpose reference library): canonical SMILES, formal charges,
  hydrogen counts (``GetTotalNumHs``), molecular formulas (``CalcMolFormula``),
  sanitisation, and its periodic table's valence lists.
- Real molecules: the NCI open-database sample shipped in RDKit's PyPI wheel
  (``Data/NCI/first_5K.smi``, through ``gwpred.datasets.load_druglike``) and the PubChem
  examples of the NIBR substructure filters shipped in the same wheel
  (``Contrib/NIBRSubstructureFilters/...wPubChemExamples.csv``).
"""

from __future__ import annotations

import csv
import os

import networkx as nx
import numpy as np
import pytest

Chem = pytest.importorskip("rdkit.Chem")
from rdkit import RDConfig, RDLogger  # noqa: E402
from rdkit.Chem.rdMolDescriptors import CalcMolFormula  # noqa: E402

from gwpred import BarycenterGraphPredictor  # noqa: E402
from gwpred.chem import (  # noqa: E402
    check_molecule,
    graph_from_smiles,
    graph_to_smiles,
    morgan_bits_of_arrays,
    morgan_fingerprints,
)
from gwpred.datasets import load_druglike  # noqa: E402
from gwpred.decode import decode_valence  # noqa: E402
from gwpred.formula import (  # noqa: E402
    _VALENCE,
    formula_matches,
    graph_formula,
    hydrogen_counts,
    parse_formula,
    split_atom_label,
    valence_set,
    valence_sets,
)

RDLogger.DisableLog("rdApp.*")

GROUPS = {  # SMARTS of the charged groups (common practice)
    "nitro": "[N+](=O)[O-]",
    "carboxylate": "[CX3](=O)[O-]",
    "quaternary ammonium": "[NX4+]",
}


@pytest.fixture(scope="module")
def druglike():
    return load_druglike()


def _nibr_carboxylates() -> list[str]:
    path = os.path.join(RDConfig.RDContribDir, "NIBRSubstructureFilters",
                        "SubstructureFilter_HitTriaging_wPubChemExamples.csv")
    if not os.path.exists(path):
        return []
    pattern = Chem.MolFromSmarts(GROUPS["carboxylate"])
    out = []
    with open(path, encoding="utf-8") as fh:
        for row in csv.reader(fh):
            for cell in row:
                if "O-" not in cell:
                    continue
                for part in cell.replace(" ", ".").split("."):
                    mol = Chem.MolFromSmiles(part)
                    if (mol is not None and mol.GetNumAtoms() > 1 and mol.HasSubstructMatch(pattern)
                            and not any(a.GetNumRadicalElectrons() for a in mol.GetAtoms())):
                        out.append(Chem.MolToSmiles(mol))
    return sorted(set(out))


def test_charged_groups_round_trip_on_real_molecules(druglike):
    # Reference: RDKit's canonical SMILES of each real molecule; SMILES -> graph -> SMILES must
    # give it back exactly, with the charges carried by the atom labels alone.
    patterns = {k: Chem.MolFromSmarts(v) for k, v in GROUPS.items()}
    found = {k: 0 for k in GROUPS}
    checked = 0
    for smiles in druglike.smiles + _nibr_carboxylates():
        mol = Chem.MolFromSmiles(smiles)
        hits = [k for k, p in patterns.items() if mol.HasSubstructMatch(p)]
        if not hits:
            continue
        g = graph_from_smiles(smiles)
        for v in g:
            del g.nodes[v]["charge"]  # the label alone must carry the charge
        # graphs hold no stereochemistry (gwpred.chem's convention): compared without it
        assert graph_to_smiles(g) == Chem.MolToSmiles(mol, isomericSmiles=False), smiles
        checked += 1
        for k in hits:
            found[k] += 1
    assert checked >= 200, found
    assert all(found.values()), found  # every group among them


def test_morgan_bits_of_arrays_read_charged_labels(druglike):
    # Reference: RDKit's Morgan generator (radius 2, 2048 bits) on RDKit's own parse of each real
    # NCI molecule with a charged atom; the arrays carry the charges in the labels alone ("N+"),
    # as the hypothesis search builds them.
    from rdkit.Chem import rdFingerprintGenerator

    generator = rdFingerprintGenerator.GetMorganGenerator(radius=2, fpSize=2048)
    molecules, smiles = [], []
    for s, g in zip(druglike.smiles, druglike.graphs):
        labels = [g.nodes[v]["label"] for v in range(len(g))]
        if not any(lab.endswith(("+", "-")) for lab in labels):
            continue
        O = np.zeros((len(g), len(g)), dtype=np.int64)
        for u, v, order in g.edges(data="label"):
            O[u, v] = O[v, u] = order
        molecules.append((labels, O))
        smiles.append(s)
    assert len(molecules) >= 200
    for on, s in zip(morgan_bits_of_arrays(molecules), smiles):
        assert on is not None and on.tolist() == sorted(generator.GetFingerprint(Chem.MolFromSmiles(s)).GetOnBits()), s
    assert morgan_bits_of_arrays([(["C", "Q+"], np.array([[0, 1], [1, 0]]))]) == [None]  # not an atom label


def test_hydrogens_and_formulas_match_rdkit_on_real_molecules(druglike):
    # Reference: RDKit's implicit hydrogens per atom and CalcMolFormula (with the net charge).
    for smiles, g in zip(druglike.smiles[:1500], druglike.graphs[:1500]):
        mol = Chem.MolFromSmiles(smiles)
        h = hydrogen_counts(g)
        assert [h[v] for v in range(mol.GetNumAtoms())] == [a.GetTotalNumHs() for a in mol.GetAtoms()], smiles
        ours, theirs = parse_formula(graph_formula(g)), parse_formula(CalcMolFormula(mol))
        # the same atoms and charge (RDKit writes carbon-free formulas H first, gwpred in Hill order)
        assert (ours.heavy, ours.hydrogens, ours.charge) == (theirs.heavy, theirs.hydrogens, theirs.charge), smiles
        assert formula_matches(g, CalcMolFormula(mol))


def test_built_in_valences_are_rdkits():
    # Reference: RDKit's periodic table (GetValenceList) for the neutral elements gwpred
    # keeps a copy of, so that its core runs without RDKit.
    table = Chem.GetPeriodicTable()
    for symbol, allowed in _VALENCE.items():
        assert allowed == tuple(sorted(table.GetValenceList(symbol))), symbol


@pytest.mark.parametrize(
    ("smiles", "atom", "allowed"),
    [
        # values from memory (common practice), each checked against RDKit's hydrogens below
        ("C[N+](C)(C)C", 1, (4,)),
        ("CC(=O)[O-]", 3, (1,)),
        ("C[S+](C)C", 1, (3, 5)),
        ("CS(=O)(=O)C", 1, (2, 4, 6)),
        ("CP(=O)(O)O", 1, (3, 5)),
        ("C[O+](C)C", 1, (3,)),
    ],
)
def test_valence_sets_of_charged_and_heavier_atoms(smiles, atom, allowed):
    mol = Chem.MolFromSmiles(smiles)
    a = mol.GetAtomWithIdx(atom)
    label = a.GetSymbol() + {0: "", 1: "+", -1: "-"}[a.GetFormalCharge()]
    assert valence_set(label) == allowed
    # Reference: RDKit's total valence of the atom is one of the allowed values
    assert a.GetTotalValence() in allowed


@pytest.mark.parametrize("take", [slice(0, 40), slice(2000, 2040)])
def test_formula_decoding_recovers_real_molecules(druglike, take):
    # One-hot scores of the true graph with its formula (RDKit's CalcMolFormula): the
    # truth costs nothing, so the decoding must give it back; RDKit's canonical SMILES
    # is the reference.
    graphs = druglike.graphs[take]
    smiles = druglike.smiles[take]
    labels = sorted({lab for g in druglike.graphs for _, lab in g.nodes(data="label")})
    sets = valence_sets(labels)
    atoms = [split_atom_label(lab) for lab in labels]
    elements = sorted({e for e, _ in atoms})
    for g, smi in zip(graphs, smiles):
        n = g.number_of_nodes()
        F = np.zeros((n, len(labels)))
        for v, lab in g.nodes(data="label"):
            F[v, labels.index(lab)] = 1.0
        C = np.zeros((n, n))
        E = np.zeros((n, n, 3))
        for a, b, o in g.edges(data="label"):
            C[a, b] = C[b, a] = 1.0
            E[a, b, o - 1] = E[b, a, o - 1] = 1.0
        f = parse_formula(CalcMolFormula(Chem.MolFromSmiles(smi)))
        out = decode_valence(
            C, F, E, [8 if s is None else s[-1] for s in sets], [1, 2, 3],
            label_groups=[elements.index(e) for e, _ in atoms],
            group_counts=[f.heavy.get(e, 0) for e in elements],
            label_charges=[q for _, q in atoms], net_charge=f.charge,
            valence_sets=sets, hydrogens=f.hydrogens,
        )
        assert out.note == ""
        h = nx.Graph()
        h.add_nodes_from((i, {"label": labels[c]}) for i, c in enumerate(out.node_classes))
        h.add_edges_from((int(a), int(b), {"label": int(c) + 1}) for (a, b), c in zip(out.edges, out.edge_classes))
        assert graph_to_smiles(h) == smi


def test_predictions_with_charged_labels_are_valid_and_match_formulas(druglike):
    # Reference: RDKit sanitisation (check_molecule) and CalcMolFormula of each test molecule.
    small = [i for i, g in enumerate(druglike.graphs) if g.number_of_nodes() <= 20][:640]
    rng = np.random.default_rng(0)
    rng.shuffle(small)
    train, test = small[:600], small[600:]
    X = morgan_fingerprints([druglike.smiles[i] for i in small])
    Xtr, Xte = X[:600], X[600:]
    model = BarycenterGraphPredictor(kernel="tanimoto").fit(Xtr, [druglike.graphs[i] for i in train])
    assert model.valence_  # "auto": every label is an atom with RDKit valences, charged ones too
    assert any(lab.endswith(("+", "-")) for lab in model.labels_.node_labels_)
    pred = model.predict(Xte)
    assert all(check_molecule(g).valid for g in pred)
    formulas = [CalcMolFormula(Chem.MolFromSmiles(druglike.smiles[i])) for i in test]
    pred = model.predict(Xte, formulas=formulas)
    for g, f in zip(pred, formulas):
        assert check_molecule(g).valid
        assert "decoding_note" in g.graph or formula_matches(g, f), (f, graph_formula(g))


@pytest.mark.parametrize(
    ("call", "match"),
    [
        (lambda: valence_set("Xx+"), r"node label 'Xx\+' is not an element symbol"),
        (lambda: valence_set("N+1"), r"a charge of one without the 1"),
        (lambda: valence_set("C-5"), r"RDKit has no valence rule for 'C-5'"),
        (lambda: graph_from_smiles("[CH3]"), r"radical"),
        (lambda: parse_formula("C2H6O+-"), r"cannot read '\+'"),
    ],
)
def test_bad_chemistry_is_refused(call, match):
    with pytest.raises(ValueError, match=match):
        call()


def test_impossible_charged_formula_is_refused():
    # acetate's atoms with a +1 charge: no label set of C, O, O- reaches it
    g = graph_from_smiles("CC(=O)[O-]")
    labels = ["C", "O", "O-"]
    F = np.zeros((4, 3))
    for v, lab in g.nodes(data="label"):
        F[v, labels.index(lab)] = 1.0
    C = nx.to_numpy_array(g, nodelist=range(4), weight=None)
    E = np.zeros((4, 4, 3))
    E[..., 0] = C
    with pytest.raises(ValueError, match=r"no graph satisfies the valence constraints, the label counts, the net charge"):
        decode_valence(C, F, E, [4, 2, 1], [1, 2, 3], label_groups=[0, 1, 1], group_counts=[2, 2],
                       label_charges=[0, 0, -1], net_charge=1, valence_sets=[(4,), (2,), (1,)], hydrogens=3)


def test_charged_formula_needs_charged_training_labels():
    X = np.eye(3)
    graphs = [graph_from_smiles(s) for s in ("CCO", "CCC", "CCN")]
    model = BarycenterGraphPredictor(n_neighbors=2).fit(X, graphs)
    with pytest.raises(ValueError, match=r"formula C2H6N\+: it has net charge \+1, but no training node label is a "
                                         r"charged atom"):
        model.predict(X[:1], formulas=["C2H6N+"])

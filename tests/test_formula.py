"""Tests for gwpred.formula (molecular formulas, valences, implicit hydrogens).

Outside references used here:

- Hill order of formulas (common practice; the Chemical Abstracts convention:
  C, then H, then the other elements alphabetically; without carbon all
  elements alphabetically).
- Valences of neutral C, N, O, F: 4, 3, 2, 1 (common practice).
- RDKit: ``rdMolDescriptors.CalcMolFormula`` (Hill formula with implicit
  hydrogens) and ``PeriodicTable.GetDefaultValence``.
- QM9 (Ramakrishnan et al., Scientific Data 1, 140022, 2014; the CSV files of
  the PyPI package qm9pack): the hydrogen count of each bundled demo molecule,
  taken from its ``Stoichiometry`` column when the demo file was built.
"""

from __future__ import annotations

import networkx as nx
import pytest

from gwpred.datasets import load_demo
from gwpred.datasets.demo import _read_demo_arrays, _read_demo_bytes
from gwpred.formula import (
    Formula,
    default_valence,
    formula_matches,
    graph_formula,
    hill_formula,
    hydrogen_counts,
    parse_formula,
    valence_table,
)


def _mol(labels, bonds):
    g = nx.Graph()
    g.add_nodes_from((i, {"label": lab}) for i, lab in enumerate(labels))
    g.add_edges_from((i, j, {"label": o}) for i, j, o in bonds)
    return g


# ---------------------------------------------------------------- parsing
@pytest.mark.parametrize(
    "text, heavy, hydrogens",
    [
        ("C4H6O2", {"C": 4, "O": 2}, 6),
        ("CH4", {"C": 1}, 4),
        ("C2H5NO", {"C": 2, "N": 1, "O": 1}, 5),
        ("OC2", {"C": 2, "O": 1}, None),  # any order; hydrogens omitted
        ("CH3CH2OH", {"C": 2, "O": 1}, 6),  # condensed formula: counts add up
        ("ClC6H5", {"C": 6, "Cl": 1}, 5),  # two-letter symbol
        (" C9H8O4 ", {"C": 9, "O": 4}, 8),  # aspirin (common practice), spaces trimmed
    ],
)
def test_parse_formula(text, heavy, hydrogens):
    f = parse_formula(text)
    assert f.heavy == heavy
    assert f.hydrogens == hydrogens
    assert f.n_heavy == sum(heavy.values())


@pytest.mark.parametrize(
    "text, match",
    [
        ("", "empty formula"),
        ("   ", "empty formula"),
        ("C4Xx2", "unknown element symbol 'Xx'"),
        ("c4h6", "cannot read 'c4h6'"),
        ("C4H6O2+-", r"cannot read '\+'"),  # one net charge at most ("C4H6O2+" is an ion, read since 0.3)
        ("C2H6O.H2O", r"cannot read '\.H2O'"),
        ("C0H4", "count 0 for C"),
        ("H2", "no heavy atom"),
    ],
)
def test_parse_formula_errors(text, match):
    with pytest.raises(ValueError, match=match):
        parse_formula(text)


def test_parse_formula_type_error():
    with pytest.raises(TypeError, match="must be a string"):
        parse_formula(42)


@pytest.mark.parametrize(
    "heavy, h, expected",
    [
        # Hill order (common practice): C, H, then alphabetical
        ({"O": 1, "C": 2}, 6, "C2H6O"),
        ({"N": 1, "C": 1, "O": 1}, 1, "CHNO"),
        ({"Cl": 1, "C": 1}, 3, "CH3Cl"),
        # without carbon everything is alphabetical, H included
        ({"N": 1}, 3, "H3N"),
        ({"O": 1}, 2, "H2O"),
        ({"S": 1, "O": 4}, 2, "H2O4S"),
        ({"C": 4, "O": 2}, None, "C4O2"),
    ],
)
def test_hill_formula(heavy, h, expected):
    assert hill_formula(heavy, h) == expected


def test_formula_str_is_hill():
    assert str(parse_formula("OH2C")) == "CH2O"
    assert isinstance(parse_formula("CO"), Formula)


# ----------------------------------------------------------------- valences
def test_default_valences_common_practice():
    # neutral C, N, O, F: 4, 3, 2, 1 (common practice)
    assert [default_valence(s) for s in "CNOF"] == [4, 3, 2, 1]


def test_default_valences_agree_with_rdkit():
    Chem = pytest.importorskip("rdkit.Chem")
    table = Chem.GetPeriodicTable()
    # reference: RDKit's periodic table, for the built-in and a looked-up element
    for sym in ["C", "N", "O", "F", "S", "Cl", "Br", "P", "Se"]:
        assert default_valence(sym) == table.GetDefaultValence(sym)


def test_valence_errors():
    with pytest.raises(ValueError, match="not an element symbol"):
        default_valence("X1")
    with pytest.raises(ValueError, match="not an element symbol"):
        default_valence(6)
    with pytest.raises(
        ValueError, match="valence of 'X' must be a non-negative integer"
    ):
        valence_table(["X"], {"X": -1})
    assert valence_table(["C", "R"], {"R": 1}) == [4, 1]


# --------------------------------------------------------------- hydrogens
def test_hydrogens_ethanol_and_acetic_acid():
    # ethanol C2H6O and acetic acid C2H4O2 (common practice)
    ethanol = _mol("CCO", [(0, 1, 1), (1, 2, 1)])
    assert hydrogen_counts(ethanol) == {0: 3, 1: 2, 2: 1}
    assert graph_formula(ethanol) == "C2H6O"
    acid = _mol("CCOO", [(0, 1, 1), (1, 2, 2), (1, 3, 1)])
    assert graph_formula(acid) == "C2H4O2"
    assert graph_formula(acid, hydrogens=False) == "C2O2"
    assert formula_matches(acid, "C2H4O2") and formula_matches(acid, "C2O2")
    assert not formula_matches(acid, "C2H6O2") and not formula_matches(acid, "C3H4O2")


def test_over_valence_has_no_formula():
    pentavalent = _mol("CCCCCC", [(0, k, 1) for k in range(1, 6)])
    assert hydrogen_counts(pentavalent)[0] == -1
    with pytest.raises(ValueError, match="exceed their valence"):
        graph_formula(pentavalent)
    assert not formula_matches(pentavalent, "C6")


def test_bond_order_labels_checked():
    g = _mol("CC", [(0, 1, "double")])
    with pytest.raises(ValueError, match="not a bond order"):
        hydrogen_counts(g)
    g = _mol("CC", [(0, 1, 1.5)])
    with pytest.raises(ValueError, match="not a bond order"):
        hydrogen_counts(g)
    g = nx.Graph()
    g.add_node(0)
    with pytest.raises(ValueError, match="no 'label' attribute"):
        hydrogen_counts(g)
    # no edge labels: every bond single
    assert graph_formula(_mol("CC", [(0, 1, 2)]), edge_label=None) == "C2H6"


@pytest.fixture(scope="module")
def demo():
    _, graphs, smiles = load_demo(return_smiles=True)
    raw, where = _read_demo_bytes(None)
    return graphs, smiles, _read_demo_arrays(raw, where)["n_hydrogens"]


def test_graph_formula_matches_qm9_hydrogen_counts(demo):
    # Reference: QM9 Stoichiometry hydrogen counts stored with the 3000 demo molecules
    graphs, _, n_h = demo
    for g, h in zip(graphs, n_h):
        assert sum(hydrogen_counts(g).values()) == h


def test_graph_formula_matches_rdkit(demo):
    # Reference: RDKit CalcMolFormula of the molecule's SMILES, 3000 QM9 molecules
    pytest.importorskip("rdkit")
    from rdkit import Chem
    from rdkit.Chem import rdMolDescriptors

    graphs, smiles, _ = demo
    for g, s in zip(graphs, smiles):
        expected = rdMolDescriptors.CalcMolFormula(Chem.MolFromSmiles(s))
        assert graph_formula(g) == expected, s
        assert formula_matches(g, expected)


@pytest.mark.parametrize("text, shown", [("C1000000", "1,000,000"), ("C99999999999999999999", "99,999,999,999,999,999,999"),
                                          ("C5000H5001", "10,001")])
def test_absurdly_large_formulas_are_refused(text, shown):
    # no molecule gwpred can predict has 10,000 atoms; counts beyond it used to reach numpy
    # (a 7 TiB allocation, an OverflowError) instead of a message
    with pytest.raises(ValueError, match=rf"formula '{text}' has {shown} atoms; gwpred reads formulas of at most 10,000 atoms\."):
        parse_formula(text)
    assert sum(parse_formula("C4000H6000").heavy.values()) == 4000  # the limit itself is accepted

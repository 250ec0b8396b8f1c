"""Tests for gwpred.chem (RDKit bridge) and the molecule files of gwpred.io.

Outside references used as checks:

* RDKit itself: ``Chem.MolFromSmiles`` / ``Chem.MolToSmiles(..., isomericSmiles=False)``
  give the canonical SMILES a graph must reproduce, ``Chem.SDMolSupplier``
  reads the SDF files gwpred writes, and ``rdFingerprintGenerator`` bit
  vectors give the Morgan fingerprints.
* QM9 molecules (qm9pack, via the bundled demo subset of ``load_demo``), whose
  heavy-atom graphs were built by ``data/make_demo.py`` with RDKit.
* Facts of the trade, marked "common practice": kekulé structures of benzene
  and pyridine, default valences of C, N, O and F, the SMILES file layout
  (SMILES, whitespace, name), the SDF record layout (MOL block, data fields,
  ``$$$$``).
"""

from __future__ import annotations

import dataclasses
import subprocess
import sys
from collections import Counter
from pathlib import Path

import networkx as nx
import numpy as np
import pytest

pytest.importorskip("rdkit")
from rdkit import Chem
from rdkit.Chem import rdFingerprintGenerator

from gwpred.chem import (
    MoleculeCheck,
    check_molecule,
    graph_from_smiles,
    graph_to_mol,
    graph_to_smiles,
    morgan_bits_of_arrays,
    morgan_fingerprints,
    read_sdf,
    read_smiles_file,
    write_sdf,
    write_smiles_file,
)
from gwpred.datasets import load_demo
from gwpred.io import GRAPH_EXTENSIONS, read_graphs, write_graphs


def rdkit_canonical(smiles: str) -> str:
    """RDKit's canonical SMILES without stereo: the reference for every round trip."""
    return Chem.MolToSmiles(Chem.MolFromSmiles(smiles), isomericSmiles=False)


def label_isomorphic(G: nx.Graph, H: nx.Graph) -> bool:
    def same(a: dict, b: dict) -> bool:
        return a.get("label") == b.get("label") and a.get("charge", 0) == b.get("charge", 0)

    return nx.is_isomorphic(G, H, node_match=same, edge_match=lambda a, b: a["label"] == b["label"])


def mol_graph(labels: list, edges: list[tuple], charges: dict | None = None) -> nx.Graph:
    G = nx.Graph()
    for i, label in enumerate(labels):
        G.add_node(i, label=label)
    for i, q in (charges or {}).items():
        G.nodes[i]["charge"] = q
    for u, v, order in edges:
        G.add_edge(u, v, label=order)
    return G


# Molecules written from memory (textbook structures): ethanol, acetic acid,
# phenol, acetonitrile, naphthalene, pyrrole, glycine zwitterion, nitromethane.
MOLECULES = [
    "CCO",
    "CC(=O)O",
    "Oc1ccccc1",
    "CC#N",
    "c1ccc2ccccc2c1",
    "c1cc[nH]c1",
    "[NH3+]CC(=O)[O-]",
    "C[N+](=O)[O-]",
]


@pytest.fixture(scope="module")
def demo() -> tuple[list[nx.Graph], list[str]]:
    _, graphs, smiles = load_demo(return_smiles=True)
    return graphs, smiles


# --------------------------------------------------------------------------- SMILES <-> graph


def test_qm9_round_trip_matches_rdkit_and_demo_graphs(demo):
    # Reference: for every one of the 3000 QM9 molecules of the demo subset
    # (qm9pack), the canonical SMILES RDKit writes for the SMILES itself, and
    # the heavy-atom graph data/make_demo.py built with RDKit.
    graphs, smiles = demo
    assert len(smiles) >= 1000
    for s, G in zip(smiles, graphs):
        H = graph_from_smiles(s)
        assert H.graph["smiles"] == s
        assert graph_to_smiles(H) == rdkit_canonical(s), s
        assert label_isomorphic(H, G), s
        # Same RDKit atom order as the demo graphs, so even the node ids agree.
        assert dict(H.nodes(data="label")) == dict(G.nodes(data="label")), s
        assert all(q == 0 for _, q in H.nodes(data="charge"))  # QM9 demo: neutral molecules


def test_aromatic_input_is_kekulized():
    # Common practice: a kekulé structure of benzene has 3 single and 3 double
    # bonds with one double bond at every carbon; pyridine likewise (5 C + 1 N);
    # pyrrole has two C=C double bonds and an N-H nitrogen with single bonds only.
    for smiles, elements in [("c1ccccc1", "CCCCCC"), ("c1ccncc1", "CCCCCN")]:
        G = graph_from_smiles(smiles)
        assert sorted(G.nodes[v]["label"] for v in G) == sorted(elements)
        assert Counter(o for _, _, o in G.edges(data="label")) == {1: 3, 2: 3}
        for v in G:
            assert sum(G.edges[v, w]["label"] == 2 for w in G[v]) == 1
        assert graph_to_smiles(G) == rdkit_canonical(smiles)
    pyrrole = graph_from_smiles("c1cc[nH]c1")
    assert Counter(o for _, _, o in pyrrole.edges(data="label")) == {1: 3, 2: 2}
    (n,) = [v for v in pyrrole if pyrrole.nodes[v]["label"] == "N"]
    assert all(pyrrole.edges[n, w]["label"] == 1 for w in pyrrole[n])
    # The kekulé spelling of benzene gives the same graph as the aromatic one.
    assert label_isomorphic(graph_from_smiles("C1=CC=CC=C1"), graph_from_smiles("c1ccccc1"))


@pytest.mark.parametrize(
    "smiles",
    ["C[N+](C)(C)C", "[O-]C=O", "C[N+](=O)[O-]", "[NH3+]CC(=O)[O-]", "[O-][n+]1ccccc1", "[Na+].[Cl-]"],
)
def test_charged_molecules_round_trip(smiles):
    # Reference: RDKit's element symbols and formal charges of the parsed SMILES, and its
    # canonical SMILES. The label keeps the charge as SMILES brackets write it ([N+] -> "N+").
    mol = Chem.MolFromSmiles(smiles)
    G = graph_from_smiles(smiles)
    assert [G.nodes[v]["charge"] for v in G] == [a.GetFormalCharge() for a in mol.GetAtoms()]
    sign = {0: "", 1: "+", -1: "-"}
    assert [G.nodes[v]["label"] for v in G] == [a.GetSymbol() + sign[a.GetFormalCharge()] for a in mol.GetAtoms()]
    assert graph_to_smiles(G) == rdkit_canonical(smiles)
    # the label alone carries the charge: without the attribute the molecule is the same
    for v in G:
        del G.nodes[v]["charge"]
    assert graph_to_smiles(G) == rdkit_canonical(smiles)


def test_multi_fragment_smiles_gives_components():
    # Reference: RDKit's fragment count for a salt written from memory (sodium acetate).
    G = graph_from_smiles("CC(=O)[O-].[Na+]")
    assert nx.number_connected_components(G) == len(Chem.GetMolFrags(Chem.MolFromSmiles("CC(=O)[O-].[Na+]")))
    assert graph_to_smiles(G) == rdkit_canonical("CC(=O)[O-].[Na+]")


def test_explicit_hydrogens_are_folded_and_stereo_dropped():
    # Reference: RDKit canonicalises these spellings to the same molecules.
    assert graph_to_smiles(graph_from_smiles("[H]C([H])([H])O[H]")) == rdkit_canonical("CO")
    assert graph_from_smiles("[2H]OC").number_of_nodes() == 2  # deuterium becomes an implicit H
    assert graph_to_smiles(graph_from_smiles("C[C@H](N)O")) == rdkit_canonical("C[C@H](N)O") == "CC(N)O"
    assert graph_to_smiles(graph_from_smiles("F/C=C/F")) == rdkit_canonical("FC=CF")


def test_graph_from_smiles_attribute_names():
    G = graph_from_smiles("C=O", node_label="element", edge_label="order")
    assert dict(G.nodes(data="element")) == {0: "C", 1: "O"}
    assert G.edges[0, 1]["order"] == 2
    assert graph_to_smiles(G, node_label="element", edge_label="order") == rdkit_canonical("C=O")


@pytest.mark.parametrize(
    ("smiles", "match"),
    [
        ("", r"SMILES '' is empty"),
        ("   ", r"SMILES '   ' is empty"),
        ("C1CC", r"RDKit cannot parse SMILES 'C1CC' \(unclosed ring.*check its syntax"),
        ("CC(", r"RDKit cannot parse SMILES 'CC\('"),
        ("c1cccc1", r"RDKit cannot kekulize SMILES 'c1cccc1'.*kekulé form"),
        ("C(C)(C)(C)(C)C", r"RDKit rejects SMILES 'C\(C\)\(C\)\(C\)\(C\)C' \(Explicit valence.*fix"),
        ("[CH3]", r"atom 0 \(C\) has 3 hydrogen\(s\) and 1 radical.*check_hydrogens=False"),
        ("[H][H]", r"hydrogen atom\(s\) \[0, 1\] are not bound to exactly one heavy atom"),
        ("C->[Fe]", r"bond between atoms 0 and 1 has type DATIVE"),
    ],
)
def test_graph_from_smiles_errors(smiles, match):
    # Reference: RDKit rejects each of these (or, for the last three, accepts a
    # molecule a heavy-atom graph with default valences cannot represent).
    with pytest.raises(ValueError, match=match):
        graph_from_smiles(smiles)


def test_graph_from_smiles_type_error_and_hydrogen_opt_out():
    with pytest.raises(TypeError, match=r"SMILES must be a str, got 5 of type int"):
        graph_from_smiles(5)  # type: ignore[arg-type]
    # With the check off, the methyl radical becomes the graph of methane
    # (reference: RDKit's SMILES of CH4 is 'C').
    G = graph_from_smiles("[CH3]", check_hydrogens=False)
    assert graph_to_smiles(G) == rdkit_canonical("C")


# --------------------------------------------------------------------------- graph -> molecule


def pentavalent_carbon() -> nx.Graph:
    # A carbon bonded to five carbons: beyond carbon's valence of 4 (common practice).
    return mol_graph(["C"] * 6, [(0, k, 1) for k in range(1, 6)])


def test_graph_to_mol_follows_node_order_and_implicit_hydrogens():
    # Reference (common practice): formic acid H-C(=O)-O-H has one H on C and one on O.
    G = nx.Graph()
    G.add_node("a", label="O")
    G.add_node("b", label="C")
    G.add_node("c", label="O")
    G.add_edge("a", "b", label=1)
    G.add_edge("b", "c", label=2)
    mol = graph_to_mol(G)
    assert [a.GetSymbol() for a in mol.GetAtoms()] == ["O", "C", "O"]
    assert [a.GetTotalNumHs() for a in mol.GetAtoms()] == [1, 1, 0]
    assert Chem.MolToSmiles(mol) == rdkit_canonical("OC=O")
    raw = graph_to_mol(pentavalent_carbon(), sanitize=False)
    assert raw.GetNumAtoms() == 6


@pytest.mark.parametrize(
    ("graph", "error", "match"),
    [
        (nx.Graph(), ValueError, r"graph has no nodes"),
        (pentavalent_carbon(), ValueError, r"graph is not a valid molecule: RDKit reports: Explicit valence"),
        ([("C", "C")], TypeError, r"expected a networkx graph, got list"),
        (nx.DiGraph(mol_graph(["C", "O"], [(0, 1, 1)])), ValueError, r"must be undirected"),
        (nx.MultiGraph(mol_graph(["C", "O"], [(0, 1, 1)])), ValueError, r"must not be a multigraph"),
        (nx.path_graph(2), ValueError, r"node 0 has no 'label' attribute"),
        (mol_graph(["C", "Xx"], [(0, 1, 1)]), ValueError, r"label='Xx', which is not an element symbol"),
        (mol_graph(["C", "c"], [(0, 1, 1)]), ValueError, r"label='c', which is not an element symbol"),
        (mol_graph(["C", 6], [(0, 1, 1)]), TypeError, r"label=6 of type int.*element symbol str"),
        (mol_graph(["C", "C"], [(0, 1, 1.5)]), ValueError, r"edge \(0, 1\) has label=1.5; a bond order must"),
        (mol_graph(["C", "C"], [(0, 1, 4)]), ValueError, r"a bond order must be 1, 2 or 3"),
        (mol_graph(["C", "C"], [(0, 1, True)]), ValueError, r"a bond order must be 1, 2 or 3"),
        (mol_graph(["C", "O"], [(0, 1, 1)], {1: 0.5}), TypeError, r"charge=0.5 of type float.*int"),
        (mol_graph(["C", "C"], [(0, 0, 1)]), ValueError, r"node 0 has an edge to itself"),
    ],
)
def test_graph_to_smiles_errors(graph, error, match):
    with pytest.raises(error, match=match):
        graph_to_smiles(graph)


def test_missing_edge_label_error():
    G = mol_graph(["C", "O"], [])
    G.add_edge(0, 1)
    with pytest.raises(ValueError, match=r"edge \(0, 1\) has no 'label' attribute"):
        graph_to_smiles(G)


def test_float_bond_orders_and_missing_charge_are_accepted():
    # GraphML files may store bond orders as doubles; a missing charge means neutral.
    G = mol_graph(["C", "O"], [(0, 1, 2.0)])
    assert graph_to_smiles(G) == rdkit_canonical("C=O")


# --------------------------------------------------------------------------- validity check


def test_check_molecule_valid_and_invalid():
    # Reference: RDKit's canonical SMILES of acetic acid.
    expected = MoleculeCheck(True, rdkit_canonical("CC(=O)O"), None)
    assert check_molecule(graph_from_smiles("OC(C)=O")) == expected
    bad = check_molecule(pentavalent_carbon())
    assert not bad.valid
    assert "Explicit valence for atom # 0 C, 5" in bad.message
    # RDKit can still write the unsanitized molecule (neopentane skeleton plus one C).
    assert bad.smiles is not None and Chem.MolFromSmiles(bad.smiles, sanitize=False).GetNumAtoms() == 6
    unknown = check_molecule(mol_graph(["C", "Xx"], [(0, 1, 1)]))
    assert not unknown.valid and unknown.smiles is None and "'Xx'" in unknown.message
    assert not check_molecule(nx.Graph()).valid
    assert not check_molecule(nx.path_graph(3)).valid  # no labels at all
    assert not check_molecule(mol_graph(["C", 6], [(0, 1, 1)])).valid  # label of the wrong type
    with pytest.raises(dataclasses.FrozenInstanceError):
        bad.valid = True  # type: ignore[misc]


def test_check_molecule_type_error():
    with pytest.raises(TypeError, match=r"expected a networkx graph, got str"):
        check_molecule("CCO")  # type: ignore[arg-type]


def test_check_molecule_agrees_with_default_valences():
    # Common practice: neutral C, N, O, F have valences 4, 3, 2, 1; a kekulé
    # graph of these elements is a valid molecule exactly when no atom's bond
    # orders add up to more than its valence.
    valence = {"C": 4, "N": 3, "O": 2, "F": 1}
    rng = np.random.default_rng(0)
    seen = Counter()
    for _ in range(300):
        n = int(rng.integers(2, 8))
        G = nx.gnp_random_graph(n, 0.5, seed=int(rng.integers(1 << 30)))
        for v in G:
            G.nodes[v]["label"] = str(rng.choice(list(valence)))
        for u, v in G.edges:
            G.edges[u, v]["label"] = int(rng.choice([1, 1, 1, 2, 3]))
        expected = all(
            sum(G.edges[v, w]["label"] for w in G[v]) <= valence[G.nodes[v]["label"]] for v in G
        )
        result = check_molecule(G)
        assert result.valid == expected
        assert (result.message is None) == expected
        seen[expected] += 1
    assert seen[True] > 20 and seen[False] > 20


# --------------------------------------------------------------------------- SMILES files


def test_smi_round_trip_through_io(tmp_path):
    # Reference: each line of the written file is RDKit's canonical SMILES, and
    # the SMILES file layout is "SMILES name" (common practice).
    graphs = [graph_from_smiles(s) for s in MOLECULES]
    for k, G in enumerate(graphs):
        if k % 2 == 0:
            G.graph["id"] = f"mol {k}"  # names may contain spaces (rest of the line)
    path = tmp_path / "mols.smi"
    write_graphs(path, graphs)
    lines = path.read_text(encoding="utf-8").splitlines()
    assert [line.split()[0] for line in lines] == [rdkit_canonical(s) for s in MOLECULES]
    back = read_graphs(path)
    assert len(back) == len(graphs)
    for s, G, H in zip(MOLECULES, graphs, back):
        assert H.graph["smiles"] == rdkit_canonical(s)
        assert H.graph.get("id") == G.graph.get("id")  # the sample id is the line's name
        assert graph_to_smiles(H) == rdkit_canonical(s)
        assert label_isomorphic(G, H)


def test_smi_reader_skips_comments_and_blank_lines(tmp_path):
    path = tmp_path / "in.smi"
    text = "# SMILES name\n\nCCO\tethanol\n  \n# comment\nc1ccccc1   benzene ring\n"
    path.write_text(text, encoding="utf-8")
    graphs = read_smiles_file(path)
    assert [G.graph.get("id") for G in graphs] == ["ethanol", "benzene ring"]
    assert [graph_to_smiles(G) for G in graphs] == [rdkit_canonical("CCO"), rdkit_canonical("c1ccccc1")]


def test_smi_reader_errors(tmp_path):
    path = tmp_path / "bad.smi"
    path.write_text("CCO ethanol\n\nC1CC broken\n", encoding="utf-8")
    with pytest.raises(ValueError, match=r"bad.smi' line 3: RDKit cannot parse SMILES 'C1CC'"):
        read_graphs(path)
    path.write_text("SMILES Name\nCCO\n", encoding="utf-8")
    with pytest.raises(ValueError, match=r"line 1 \(a header line must start with '#'\)"):
        read_smiles_file(path)
    path.write_text("CCO\n[CH3] methyl\n", encoding="utf-8")
    with pytest.raises(ValueError, match=r"line 2: SMILES '\[CH3\]': atom 0 \(C\) has 3 hydrogen"):
        read_smiles_file(path)
    path.write_bytes(b"CCO\nCC\xff\n")
    with pytest.raises(ValueError, match=r"line 2 is not UTF-8 text"):
        read_smiles_file(path)
    with pytest.raises(FileNotFoundError, match=r"SMILES file not found"):
        read_smiles_file(tmp_path / "missing.smi")


def test_smi_writer_errors(tmp_path):
    path = tmp_path / "out.smi"
    with pytest.raises(ValueError, match=r"graphs\[1\] cannot be written as SMILES: graph is not a valid"):
        write_smiles_file(path, [graph_from_smiles("C"), pentavalent_carbon()])
    with pytest.raises(ValueError, match=r"graphs\[0\] cannot be written as SMILES: graph has no nodes"):
        write_smiles_file(path, [nx.Graph()])
    named = graph_from_smiles("C")
    named.graph["name"] = 7.5
    with pytest.raises(TypeError, match=r"graphs\[0\] has name=7.5 of type float.*str\(\)"):
        write_smiles_file(path, [named])
    named.graph["name"] = "two\nlines"
    with pytest.raises(ValueError, match=r"graphs\[0\] has name='two\\nlines'; a molecule name must be"):
        write_smiles_file(path, [named])
    with pytest.raises(TypeError, match=r"graphs\[0\] is a str, not a networkx graph"):
        write_smiles_file(path, ["CCO"])  # type: ignore[list-item]
    with pytest.raises(TypeError, match=r"graphs\[0\] cannot be written as SMILES: node 1 has label=6"):
        write_smiles_file(path, [mol_graph(["C", 6], [(0, 1, 1)])])
    assert not path.exists()  # nothing is written when a graph is rejected


# --------------------------------------------------------------------------- SDF files


def test_sdf_round_trip_through_io(tmp_path):
    graphs = [graph_from_smiles(s) for s in MOLECULES]
    graphs[0].graph["name"] = "ethanol"
    graphs[1].graph["id"] = 17
    path = tmp_path / "mols.sdf"
    write_graphs(path, graphs)
    back = read_graphs(path)
    assert len(back) == len(graphs)
    for G, H in zip(graphs, back):
        # Same atom order and the very bond orders written.
        assert dict(H.nodes(data=True)) == dict(G.nodes(data=True))
        assert {frozenset(e[:2]): e[2] for e in H.edges(data="label")} == {
            frozenset(e[:2]): e[2] for e in G.edges(data="label")
        }
    # the title is the sample id: written from "id" (or an older "name"), read back as "id" (text)
    assert back[0].graph == {"id": "ethanol", "smiles": "CCO"}
    assert back[1].graph == {"id": "17", "smiles": "CC(=O)O"}
    # Reference: RDKit reads the file on its own: same molecules, names, fields,
    # and 2D coordinates (every z is 0).
    records = list(Chem.SDMolSupplier(str(path)))
    written = [Chem.MolToSmiles(m, isomericSmiles=False) for m in records]
    assert written == [rdkit_canonical(s) for s in MOLECULES]
    assert records[0].GetProp("_Name") == "ethanol" and records[1].GetProp("_Name") == "17"
    for m in records:
        xyz = m.GetConformer().GetPositions()
        assert not m.GetConformer().Is3D() and np.all(xyz[:, 2] == 0) and np.ptp(xyz[:, :2]) > 0


def test_sdf_reader_folds_hydrogens_and_kekulizes_aromatic_bonds(tmp_path):
    # Reference: a MOL block written by RDKit with explicit hydrogens and
    # aromatic bond type 4 (kekulize=False); common practice for toluene's
    # kekulé structure: 3 double bonds in the ring.
    mol = Chem.AddHs(Chem.MolFromSmiles("Cc1ccccc1"))
    mol.SetProp("_Name", "toluene")
    path = tmp_path / "toluene.mol"
    path.write_text(Chem.MolToMolBlock(mol, kekulize=False), encoding="utf-8")
    assert "  4  0" in path.read_text(encoding="utf-8")  # aromatic bonds in the file
    (G,) = read_graphs(path)
    assert G.graph["id"] == "toluene"
    assert sorted(G.nodes[v]["label"] for v in G) == ["C"] * 7
    assert Counter(o for _, _, o in G.edges(data="label")) == {1: 4, 2: 3}
    assert graph_to_smiles(G) == rdkit_canonical("Cc1ccccc1")


def test_sdf_reader_errors(tmp_path):
    good = tmp_path / "good.sdf"
    write_sdf(good, [graph_from_smiles(s) for s in ("CCO", "C[N+](=O)[O-]", "CC#N")])
    records = good.read_text(encoding="utf-8").split("$$$$\n")
    # Record 2 with a truncated atom line: RDKit cannot read it.
    broken = tmp_path / "broken.sdf"
    bad_block = "\n".join(line if k != 5 else "xxx" for k, line in enumerate(records[1].split("\n")))
    broken.write_text(records[0] + "$$$$\n" + bad_block + "$$$$\n" + records[2] + "$$$$\n", encoding="utf-8")
    with pytest.raises(ValueError, match=r"broken.sdf' record 2: RDKit cannot read this record \(.*\); fix"):
        read_graphs(broken)
    # Record 2 with a pentavalent nitrogen (the N-C bond made double).
    valence = tmp_path / "valence.sdf"
    text = good.read_text(encoding="utf-8")
    valence.write_text(text.replace("  1  2  1  0\n  2  3  2  0", "  1  2  2  0\n  2  3  2  0"), encoding="utf-8")
    with pytest.raises(ValueError, match=r"valence.sdf' record 2 is not a valid molecule: RDKit reports: Explicit"):
        read_sdf(valence)
    junk = tmp_path / "junk.sdf"
    junk.write_text("hello\n", encoding="utf-8")
    with pytest.raises(ValueError, match=r"junk.sdf' record 1: not a MOL record"):
        read_sdf(junk)
    # A record whose title and 'id' data field disagree.
    clash = tmp_path / "clash.sdf"
    with_field = records[0].replace("M  END\n", "M  END\n>  <id>\nother\n\n", 1)
    clash.write_text(with_field + "$$$$\n", encoding="utf-8")
    text = clash.read_text(encoding="utf-8")
    clash.write_text("title\n" + text.split("\n", 1)[1], encoding="utf-8")
    with pytest.raises(ValueError, match=r"record 1: has the title 'title' and a data field 'id'"):
        read_sdf(clash)
    empty = tmp_path / "empty.sdf"
    empty.write_text("", encoding="utf-8")
    assert read_sdf(empty) == []
    with pytest.raises(FileNotFoundError, match=r"SDF file not found"):
        read_sdf(tmp_path / "missing.sdf")


def test_sdf_writer_errors(tmp_path):
    path = tmp_path / "out.sdf"
    with pytest.raises(ValueError, match=r"graphs\[1\] cannot be written as SDF: graphs\[1\] is not a valid"):
        write_sdf(path, [graph_from_smiles("C"), pentavalent_carbon()])
    with pytest.raises(ValueError, match=r"graphs\[0\] has no nodes"):
        write_sdf(path, [nx.Graph()])
    G = graph_from_smiles("C")
    G.graph["tags"] = ["a", "b"]
    with pytest.raises(TypeError, match=r"graphs\[0\] has graph attribute tags=\['a', 'b'\] of type list"):
        write_sdf(path, [G])
    G.graph["tags"] = "a\n\nb"
    with pytest.raises(ValueError, match=r"SDF data field value cannot be empty, hold blank lines"):
        write_sdf(path, [G])
    del G.graph["tags"]
    G.graph["a<b"] = 1
    with pytest.raises(ValueError, match=r"graph attribute 'a<b'; SDF data field names"):
        write_sdf(path, [G])
    with pytest.raises(ValueError, match=r"a \.mol file holds one molecule and is read only.*\.sdf"):
        write_graphs(tmp_path / "out.mol", [graph_from_smiles("C")])
    assert not path.exists()


# --------------------------------------------------------------------------- optional extra


def test_molecule_extensions_are_graph_extensions():
    assert {".smi", ".sdf", ".mol"} <= set(GRAPH_EXTENSIONS)


def test_missing_rdkit_names_the_extra(tmp_path, monkeypatch):
    path = tmp_path / "mols.smi"
    path.write_text("CCO\n", encoding="utf-8")
    monkeypatch.setitem(sys.modules, "rdkit", None)  # makes `import rdkit` fail
    with pytest.raises(ImportError, match=r"\.smi graph files .*pip install 'gwpred\[chem\]'"):
        read_graphs(path)
    with pytest.raises(ImportError, match=r"\.sdf graph files .*pip install 'gwpred\[chem\]'"):
        write_graphs(tmp_path / "x.sdf", [nx.Graph()])
    with pytest.raises(ImportError, match=r"optional extra 'chem'.*pip install 'gwpred\[chem\]'"):
        graph_from_smiles("CCO")
    with pytest.raises(ImportError, match=r"pip install 'gwpred\[chem\]'"):
        morgan_fingerprints(["CCO"])


def test_importing_gwpred_does_not_import_rdkit():
    code = "import sys, gwpred, gwpred.io, gwpred.chem, gwpred.datasets; print('rdkit' in sys.modules)"
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "False"


# --------------------------------------------------------------------------- fingerprints


@pytest.mark.parametrize(("radius", "n_bits"), [(0, 64), (1, 128), (2, 2048), (3, 1024)])
def test_morgan_fingerprints_match_rdkit(radius, n_bits):
    # Reference: RDKit's Morgan generator, read through its bit-vector and
    # sparse-count interfaces instead of the numpy ones gwpred uses.
    generator = rdFingerprintGenerator.GetMorganGenerator(radius=radius, fpSize=n_bits)
    bits = morgan_fingerprints(MOLECULES, radius=radius, n_bits=n_bits)
    counts = morgan_fingerprints(MOLECULES, radius=radius, n_bits=n_bits, counts=True)
    assert bits.shape == counts.shape == (len(MOLECULES), n_bits)
    assert bits.dtype == counts.dtype == np.float64
    for row_bits, row_counts, smiles in zip(bits, counts, MOLECULES):
        mol = Chem.MolFromSmiles(smiles)
        assert np.flatnonzero(row_bits).tolist() == sorted(generator.GetFingerprint(mol).GetOnBits())
        expected = generator.GetCountFingerprint(mol).GetNonzeroElements()
        assert {int(k): int(row_counts[k]) for k in np.flatnonzero(row_counts)} == expected
    if radius == 0:
        # Common practice: at radius 0 every heavy atom contributes one environment.
        heavy = [Chem.MolFromSmiles(s).GetNumHeavyAtoms() for s in MOLECULES]
        assert counts.sum(axis=1).tolist() == heavy


def test_morgan_fingerprints_smiles_equal_graphs(demo):
    # Reference: RDKit's own parse of each SMILES (QM9 demo subset and the
    # charged/aromatic examples); the graph must give the same fingerprint.
    graphs, smiles = demo
    sample = list(smiles[:300]) + MOLECULES
    from_smiles = morgan_fingerprints(sample, counts=True)
    from_graphs = morgan_fingerprints([graph_from_smiles(s) for s in sample], counts=True)
    np.testing.assert_array_equal(from_smiles, from_graphs)
    np.testing.assert_array_equal(morgan_fingerprints(graphs[:300], counts=True), from_smiles[:300])
    mixed = morgan_fingerprints(["CCO", graph_from_smiles("CCO"), "[H]OC([H])([H])C"], n_bits=256)
    np.testing.assert_array_equal(mixed[0], mixed[1])
    np.testing.assert_array_equal(mixed[0], mixed[2])  # explicit hydrogens, as RDKit removes them
    assert morgan_fingerprints([], n_bits=16).shape == (0, 16)


def test_morgan_bits_of_arrays_match_rdkit(demo):
    # Reference: RDKit's Morgan generator (radius 2, 2048 bits) on RDKit's own parse of each
    # QM9 SMILES of the bundled demo subset (qm9pack); the arrays are the demo graphs'.
    graphs, smiles = demo
    generator = rdFingerprintGenerator.GetMorganGenerator(radius=2, fpSize=2048)
    molecules = []
    for g in graphs[:300]:
        O = np.zeros((len(g), len(g)), dtype=np.int64)
        for u, v, order in g.edges(data="label"):
            O[u, v] = O[v, u] = order
        molecules.append(([g.nodes[v]["label"] for v in range(len(g))], O))
    bits = morgan_bits_of_arrays(molecules)
    for on, s in zip(bits, smiles[:300]):
        assert on is not None and on.tolist() == sorted(generator.GetFingerprint(Chem.MolFromSmiles(s)).GetOnBits())
    # common practice: carbon has valence 4, so a carbon with five single bonds is rejected (None)
    star = np.zeros((6, 6), dtype=np.int64)
    star[0, 1:] = star[1:, 0] = 1
    assert morgan_bits_of_arrays([(["C"] * 6, star), (["C", "C"], np.array([[0, 4], [4, 0]]))]) == [None, None]


def test_morgan_fingerprints_errors():
    with pytest.raises(ValueError, match=r"radius must be >= 0, got -1"):
        morgan_fingerprints(["C"], radius=-1)
    with pytest.raises(ValueError, match=r"n_bits must be >= 1, got 0"):
        morgan_fingerprints(["C"], n_bits=0)
    with pytest.raises(TypeError, match=r"radius must be an int, got 1.5"):
        morgan_fingerprints(["C"], radius=1.5)  # type: ignore[arg-type]
    with pytest.raises(TypeError, match=r"n_bits must be an int, got True"):
        morgan_fingerprints(["C"], n_bits=True)  # type: ignore[arg-type]
    with pytest.raises(TypeError, match=r"not one str; wrap it"):
        morgan_fingerprints("CCO")  # type: ignore[arg-type]
    with pytest.raises(TypeError, match=r"molecules\[1\] is a int"):
        morgan_fingerprints(["C", 3])  # type: ignore[list-item]
    with pytest.raises(ValueError, match=r"molecules\[0\]: RDKit cannot parse SMILES 'C1CC'"):
        morgan_fingerprints(["C1CC"])
    with pytest.raises(ValueError, match=r"molecules\[0\]: graph is not a valid molecule"):
        morgan_fingerprints([pentavalent_carbon()])


def test_written_paths_are_path_like(tmp_path):
    # str and pathlib paths both work for the chem readers and writers.
    write_smiles_file(str(tmp_path / "a.smi"), [graph_from_smiles("CO")])
    write_sdf(Path(tmp_path / "a.sdf"), [graph_from_smiles("CO")])
    assert len(read_smiles_file(tmp_path / "a.smi")) == len(read_sdf(str(tmp_path / "a.sdf"))) == 1

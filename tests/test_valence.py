"""Valence-aware and formula-constrained decoding (gwpred.decode.decode_valence,
``BarycenterGraphPredictor(valence=True)`` and ``predict(X, formulas=...)``).

Outside references used here:

- Exhaustive enumeration of every labeled graph on 4 nodes: the integer
  program's optimum must equal the best enumerated graph (a brute-force
  reference, independent of scipy's solver).
- Valences of neutral C, N, O, F: 4, 3, 2, 1 (common practice).
- RDKit: ``SanitizeMol`` (validity) and ``rdMolDescriptors.CalcMolFormula``
  (formula of a predicted molecule), via gwpred.chem when installed.
- networkx ``is_connected``.
- QM9 molecules and spectra of ``gwpred.datasets.load_demo`` (QM9 from the
  PyPI package qm9pack).
"""

from __future__ import annotations

import itertools

import networkx as nx
import re

import numpy as np
import pytest

from gwpred import BarycenterGraphPredictor
from gwpred.datasets import load_demo
from gwpred.decode import DecodedGraph, decode_valence
from gwpred.formula import formula_matches, graph_formula, hydrogen_counts


def _random_barycenter(rng, n, K, L):
    C = rng.random((n, n)) ** 2
    C = np.triu(C, 1)
    C = C + C.T
    share = rng.dirichlet(np.ones(L), size=(n, n))
    share = 0.5 * (share + share.transpose(1, 0, 2))
    E = C[:, :, None] * share
    F = rng.dirichlet(np.ones(K), size=n)
    return C, F, E


def _objective(C, F, E, g: DecodedGraph, ref: DecodedGraph | None, lam: float) -> float:
    """Expected edit cost of a decoded graph, as documented in decode_valence."""
    n = len(F)
    state = np.full((n, n), -1)
    for (i, j), b in zip(g.edges, g.edge_classes):
        state[i, j] = state[j, i] = b
    rstate = np.full((n, n), -1)
    if ref is not None:
        for (i, j), b in zip(ref.edges, ref.edge_classes):
            rstate[i, j] = rstate[j, i] = b
    total = 0.0
    for i in range(n):
        a = g.node_classes[i]
        total += (
            1 - F[i, a] + (lam * (a != ref.node_classes[i]) if ref is not None else 0)
        )
    for i, j in itertools.combinations(range(n), 2):
        b = state[i, j]
        total += C[i, j] if b < 0 else 1 - E[i, j, b]
        if ref is not None:
            total += lam * (b != rstate[i, j])
    return total


def _brute_force(
    C, F, E, val, order, *, connected, counts=None, total=None, ref=None, lam=1.0
):
    """Best graph by enumeration of every labeling and every edge state."""
    n, K = F.shape
    L = E.shape[2]
    pairs = list(itertools.combinations(range(n), 2))
    best, best_g = np.inf, None
    for labels in itertools.product(range(K), repeat=n):
        labels = np.array(labels)
        if counts is not None and not np.array_equal(
            np.bincount(labels, minlength=K), counts
        ):
            continue
        for states in itertools.product(range(-1, L), repeat=len(pairs)):
            load = np.zeros(n)
            edges, cls = [], []
            for (i, j), b in zip(pairs, states):
                if b >= 0:
                    load[i] += order[b]
                    load[j] += order[b]
                    edges.append((i, j))
                    cls.append(b)
            if np.any(load > np.asarray(val)[labels]):
                continue
            if total is not None and sum(order[b] for b in cls) != total:
                continue
            if connected:
                g = nx.Graph(edges)
                g.add_nodes_from(range(n))
                if not nx.is_connected(g):
                    continue
            dg = DecodedGraph(
                labels,
                np.array(edges, dtype=np.int64).reshape(-1, 2),
                np.array(cls, dtype=np.int64),
            )
            obj = _objective(C, F, E, dg, ref, lam)
            if obj < best - 1e-12:
                best, best_g = obj, dg
    return best, best_g


@pytest.mark.parametrize("seed", range(12))
def test_integer_program_matches_enumeration(seed):
    # Reference: exhaustive enumeration of all graphs on 4 nodes (2 node labels
    # with valences 4 and 1, bond orders 1 and 2)
    rng = np.random.default_rng(seed)
    n, K, L = 4, 2, 2
    C, F, E = _random_barycenter(rng, n, K, L)
    val, order = [4, 1], [1, 2]
    kind = seed % 4
    kw: dict = {"connected": kind != 1}
    if kind == 2:
        kw["counts"] = np.array([3, 1])
    if kind == 3:
        kw["counts"] = np.array([4, 0])
        kw["total"] = 4
    ref = None
    lam = 0.0
    if seed >= 6:  # with a reference to stay close to
        ref = DecodedGraph(
            rng.integers(0, K, n),
            np.array([[0, 1], [1, 2], [2, 3]]),
            np.array([0, 1, 0]),
        )
        lam = [0.3, 1.0][seed % 2]
    best, _ = _brute_force(C, F, E, val, order, ref=ref, lam=lam, **kw)
    out = decode_valence(
        C,
        F,
        E,
        val,
        order,
        reference=ref,
        reference_weight=lam,
        connected=kw["connected"],
        label_counts=kw.get("counts"),
        total_bond_order=kw.get("total"),
    )
    assert _objective(C, F, E, out, ref, lam) == pytest.approx(best, abs=1e-7)


def _as_graph(out: DecodedGraph, symbols, orders) -> nx.Graph:
    g = nx.Graph()
    g.add_nodes_from((i, {"label": symbols[c]}) for i, c in enumerate(out.node_classes))
    g.add_edges_from(
        (int(i), int(j), {"label": orders[b]})
        for (i, j), b in zip(out.edges, out.edge_classes)
    )
    return g


@pytest.mark.parametrize("seed", range(40))
def test_decoded_molecules_obey_valence_and_are_connected(seed):
    # C N O F with valences 4 3 2 1 (common practice); bond orders 1 2 3
    rng = np.random.default_rng(100 + seed)
    n = int(rng.integers(2, 10))
    C, F, E = _random_barycenter(rng, n, 4, 3)
    out = decode_valence(C, F, E, [4, 3, 2, 1], [1, 2, 3])
    g = _as_graph(out, "CNOF", [1, 2, 3])
    assert all(h >= 0 for h in hydrogen_counts(g).values())
    assert nx.is_connected(g)


def test_valid_reference_comes_back_unchanged():
    rng = np.random.default_rng(5)
    C, F, E = _random_barycenter(rng, 5, 4, 3)
    ref = DecodedGraph(
        np.array([0, 0, 1, 2, 0]),
        np.array([[0, 1], [1, 2], [2, 3], [1, 4]]),
        np.array([0, 1, 0, 0]),
    )
    out = decode_valence(C, F, E, [4, 3, 2, 1], [1, 2, 3], reference=ref)
    assert out is ref


def test_invalid_reference_is_repaired_with_one_edit():
    # a carbon with five single bonds: one bond must go (valence 4, common practice)
    n = 6
    C = np.zeros((n, n))
    C[0, 1:] = C[1:, 0] = 0.9
    E = C[:, :, None].copy()
    F = np.tile([1.0, 0, 0, 0], (n, 1))
    ref = DecodedGraph(
        np.zeros(n, np.int64),
        np.array([[0, k] for k in range(1, 6)]),
        np.zeros(5, np.int64),
    )
    out = decode_valence(C, F, E, [4, 3, 2, 1], [1], reference=ref, connected=False)
    assert len(out.edges) == 4
    assert set(map(tuple, out.edges.tolist())) < set(map(tuple, ref.edges.tolist()))


def test_formula_constraints_are_met():
    # C3H6O (acetone / propanal family): 3 C and 1 O; (3*4 + 2 - 6) / 2 = 4 bond orders
    rng = np.random.default_rng(7)
    C, F, E = _random_barycenter(rng, 4, 4, 3)
    out = decode_valence(
        C, F, E, [4, 3, 2, 1], [1, 2, 3], label_counts=[3, 0, 1, 0], total_bond_order=4
    )
    g = _as_graph(out, "CNOF", [1, 2, 3])
    assert graph_formula(g) == "C3H6O"
    assert nx.is_connected(g)


def test_decode_valence_errors():
    rng = np.random.default_rng(0)
    C, F, E = _random_barycenter(rng, 3, 2, 1)
    with pytest.raises(ValueError, match="no graph satisfies"):
        # three fluorines cannot form a connected molecule (valence 1)
        decode_valence(C, F, E, [4, 1], [1], label_counts=[0, 3])
    with pytest.raises(ValueError, match="label_counts sum to 2"):
        decode_valence(C, F, E, [4, 1], [1], label_counts=[1, 1])
    with pytest.raises(ValueError, match="valences must hold 2 integers"):
        decode_valence(C, F, E, [4], [1])
    with pytest.raises(ValueError, match="bond_orders must hold 1 integers >= 1"):
        decode_valence(C, F, E, [4, 1], [0])
    with pytest.raises(
        ValueError, match="reference_weight must be a non-negative number"
    ):
        decode_valence(C, F, E, [4, 1], [1], reference_weight=-1.0)
    with pytest.raises(ValueError, match="reference has 2 nodes"):
        ref = DecodedGraph(
            np.zeros(2, np.int64), np.zeros((0, 2), np.int64), np.zeros(0, np.int64)
        )
        decode_valence(C, F, E, [4, 1], [1], reference=ref)
    with pytest.raises(ValueError, match="needs edge_scores"):
        decode_valence(C, F, None, [4, 1], [1])


# ------------------------------------------------------------- estimator
@pytest.fixture(scope="module")
def fitted():
    X, graphs, smiles = load_demo(return_smiles=True)
    rng = np.random.default_rng(3)
    perm = rng.permutation(len(graphs))
    te, tr = perm[:40], perm[40:1540]
    model = BarycenterGraphPredictor(valence=True).fit(X[tr], [graphs[i] for i in tr])
    return model, X[te], [graphs[i] for i in te], [smiles[i] for i in te]


def test_valence_predictions_are_valid_molecules(fitted):
    model, X, _, _ = fitted
    pred = model.predict(X)
    for g in pred:
        assert all(h >= 0 for h in hydrogen_counts(g).values())
        assert nx.is_connected(g)
    chem = pytest.importorskip("gwpred.chem")
    # Reference: RDKit sanitisation of every predicted molecule
    assert all(chem.check_molecule(g).valid for g in pred)


def test_formula_predictions_match_the_formula(fitted):
    model, X, _, smiles = fitted
    pytest.importorskip("rdkit")
    from rdkit import Chem
    from rdkit.Chem import rdMolDescriptors

    # Reference: RDKit CalcMolFormula of the true molecule (QM9 SMILES)
    formulas = [rdMolDescriptors.CalcMolFormula(Chem.MolFromSmiles(s)) for s in smiles]
    pred = model.predict(X, formulas=formulas)
    chem = pytest.importorskip("gwpred.chem")
    for g, f in zip(pred, formulas):
        assert formula_matches(g, f)
        mol = Chem.MolFromSmiles(chem.graph_to_smiles(g))
        assert rdMolDescriptors.CalcMolFormula(mol) == f
    # heavy atoms only: the counts match, hydrogens are free; None leaves a row free
    pred = model.predict(X[:5], formulas=[None, "C3O", "C2NO", None, "CN"])
    assert formula_matches(pred[1], "C3O") and formula_matches(pred[2], "C2NO")
    assert formula_matches(pred[4], "CN")


def test_formula_errors(fitted):
    model, X, _, _ = fitted
    with pytest.raises(ValueError, match="X has 2 rows but 1 formulas"):
        model.predict(X[:2], formulas=["C2H6O"])
    with pytest.raises(TypeError, match="one formula"):
        model.predict(X[:1], formulas="C2H6O")
    with pytest.raises(ValueError, match=r"formulas\[0\]: formula 'C2Q'"):
        model.predict(X[:1], formulas=["C2Q"])
    with pytest.raises(
        ValueError, match=r"formulas\[0\] \(C2SH6\) holds \['S'\], never seen"
    ):
        model.predict(X[:1], formulas=["C2SH6"])
    with pytest.raises(ValueError, match="odd"):
        model.predict(X[:1], formulas=["CH3"])  # a radical
    with pytest.raises(ValueError, match="negative"):
        model.predict(X[:1], formulas=["CH6"])
    with pytest.raises(ValueError, match="formula F3: no graph satisfies"):
        model.predict(X[:1], formulas=["F3"])


def test_valence_needs_bond_orders_and_elements():
    g = nx.path_graph(3)
    nx.set_node_attributes(g, "C", "label")
    nx.set_edge_attributes(g, "aromatic", "label")
    X = np.arange(3.0).reshape(-1, 1)
    model = BarycenterGraphPredictor(valence=True, n_neighbors=1).fit(X, [g, g, g])
    with pytest.raises(ValueError, match="needs bond orders 1, 2 or 3"):
        model.predict(X[:1])
    h = nx.path_graph(3)
    nx.set_node_attributes(h, "atom", "label")
    model = BarycenterGraphPredictor(valence=True, n_neighbors=1, edge_label=None).fit(
        X, [h, h, h]
    )
    with pytest.raises(ValueError, match="not an element symbol"):
        model.predict(X[:1])
    # a table of one's own makes any label usable
    model.set_params(valence={"atom": 2})
    assert nx.is_connected(model.predict(X[:1])[0])
    with pytest.raises(TypeError, match="valence must be 'auto', True, False or a dict"):
        BarycenterGraphPredictor(valence="yes").fit(X, [h, h, h])


def test_time_limit_is_not_reported_as_an_impossible_formula():
    # 60 carbons with total bond order 61: connected skeletons exist (e.g. a 60-ring with one
    # double bond), but HiGHS cannot find one within a millisecond; the answer must say that
    # time ran out, not that no graph exists. Since 0.3 it is a repaired decoding that keeps
    # the valences, with a note naming what it gave up (never an unannounced invalid graph).
    rng = np.random.default_rng(0)
    C = rng.random((60, 60))
    C = (C + C.T) / 2
    np.fill_diagonal(C, 0)
    F = np.zeros((60, 4))
    F[:, 0] = 1
    E = np.repeat(C[:, :, None] / 3, 3, axis=2)
    out = decode_valence(C, F, E, [4, 3, 2, 1], [1, 2, 3], label_counts=[60, 0, 0, 0], total_bond_order=61,
                         time_limit=0.001)
    assert re.match(r"the valence integer program found no graph of 60 nodes within its time budget \(0\.001 s\); "
                    r"a quick repair keeps the valences", out.note)
    load = np.zeros(60, dtype=int)
    for (a, b), c in zip(out.edges, out.edge_classes):
        load[a] += c + 1
        load[b] += c + 1
    assert np.all(load <= 4)  # carbon's valence (common practice)
    given_up = out.note.partition(" but not ")[2]
    total_ok = int(sum(c + 1 for c in out.edge_classes)) == 61
    assert ("the total bond order" in given_up) == (not total_ok)


def test_formulas_far_larger_than_training_are_refused():
    # the demo's molecules have at most 9 heavy atoms (QM9); C60H122 has 60
    X, graphs = load_demo()
    model = BarycenterGraphPredictor(n_neighbors=5).fit(X[:200], graphs[:200])
    limit = 4 * max(g.number_of_nodes() for g in graphs[:200])
    with pytest.raises(ValueError, match=rf"formulas\[1\] \(C60H122\) has 60 heavy atoms, more than {limit} \(four "
                                         r"times the largest training graph\)"):
        model.predict(X[200:202], formulas=["C4H10", "C60H122"])


def test_valence_auto_is_on_for_molecules_and_off_for_other_graphs():
    # valence="auto" (the default): on when every node label is an element symbol (periodic table,
    # common practice) and every edge label a bond order 1/2/3; off otherwise, without an error
    X = np.arange(3.0).reshape(-1, 1)
    path = nx.path_graph(3)
    nx.set_node_attributes(path, "C", "label")
    nx.set_edge_attributes(path, 1, "label")
    assert BarycenterGraphPredictor(n_neighbors=1).fit(X, [path] * 3).valence_ is True
    aromatic = path.copy()
    nx.set_edge_attributes(aromatic, "aromatic", "label")
    model = BarycenterGraphPredictor(n_neighbors=1).fit(X, [aromatic] * 3)
    assert model.valence_ is False
    assert len(model.predict(X[:1])[0]) == 3  # decodes without valence rules, no error
    atoms = nx.path_graph(3)
    nx.set_node_attributes(atoms, "atom", "label")
    assert BarycenterGraphPredictor(n_neighbors=1, edge_label=None).fit(X, [atoms] * 3).valence_ is False
    assert BarycenterGraphPredictor(n_neighbors=1, valence=False).fit(X, [path] * 3).valence_ is False
    # the bundled demo molecules (QM9 heavy atoms): on, and every default prediction RDKit-valid
    X, graphs = load_demo()
    model = BarycenterGraphPredictor().fit(X[:500], graphs[:500])
    assert model.valence_ is True
    Chem = pytest.importorskip("rdkit.Chem")
    from gwpred.chem import graph_to_smiles

    assert all(Chem.MolFromSmiles(graph_to_smiles(g)) is not None for g in model.predict(X[500:560]))


def _butene_scores():
    # two strongly suggested C=C pairs (0-1, 2-3) and a weak 1-2 link: without connectivity
    # the best C4H8 graph is two ethylenes (common practice: C2H4 twice is C4H8)
    C = np.zeros((4, 4))
    C[0, 1], C[2, 3] = 0.95, 0.9  # unequal, so that one butene is the single best
    C[1, 2] = 0.3
    C = C + C.T
    E = np.zeros((4, 4, 2))
    E[..., 1] = np.where(C > 0.5, C, 0.0)  # double bonds
    E[..., 0] = np.where(C <= 0.5, C, 0.0)  # single bonds
    F = np.ones((4, 1))
    return C, F, E


def _connected_c4h8(out):
    g = nx.Graph()
    g.add_nodes_from((i, {"label": "C"}) for i in range(4))
    g.add_edges_from((int(a), int(b), {"label": int(c) + 1}) for (a, b), c in zip(out.edges, out.edge_classes))
    return nx.is_connected(g) and formula_matches(g, "C4H8")


def test_connectivity_cuts_give_the_flow_programs_optimum(monkeypatch):
    import gwpred.decode as decode_module

    monkeypatch.setattr(decode_module, "CUT_ROUNDS", 5)  # cut until connected, no joining repair
    C, F, E = _butene_scores()
    kw = dict(valences=[4], bond_orders=[1, 2], label_counts=[4], total_bond_order=4)
    flow = decode_valence(C, F, E, **kw)
    cut = decode_valence(C, F, E, cuts=True, **kw)
    assert _connected_c4h8(flow) and _connected_c4h8(cut)
    key = lambda o: sorted(zip(map(tuple, o.edges.tolist()), o.edge_classes.tolist()))  # noqa: E731
    assert key(cut) == key(flow) and cut.note == ""


def test_pieces_are_joined_keeping_the_formula(monkeypatch):
    # with no cut rounds allowed, the two ethylenes are joined by a single bond paid for by one
    # double bond less: a butene, still C4H8 (checked by gwpred.formula against the formula)
    import gwpred.decode as decode_module

    monkeypatch.setattr(decode_module, "CUT_ROUNDS", 0)
    C, F, E = _butene_scores()
    out = decode_valence(C, F, E, [4], [1, 2], label_counts=[4], total_bond_order=4, cuts=True)
    assert _connected_c4h8(out)
    assert "joined by single bonds" in out.note


def test_saturated_pieces_trade_bond_ends(monkeypatch):
    # cyclopropane + F2 (C3H6F2, every fluorine full): no bond can be added between the pieces,
    # so a ring bond and the F-F bond trade ends: 1,3-difluoropropane, the same formula
    # (common practice: C3H6 + F2 = C3H6F2), checked by gwpred.formula
    import gwpred.decode as decode_module

    monkeypatch.setattr(decode_module, "CUT_ROUNDS", 0)
    C = np.zeros((5, 5))
    C[0, 1] = C[1, 2] = C[0, 2] = 0.9  # the ring
    C[3, 4] = 0.9  # F-F
    C[0, 3] = C[1, 4] = 0.2
    C = C + C.T
    E = C[:, :, None]
    F = np.array([[1, 0], [1, 0], [1, 0], [0, 1], [0, 1.0]])  # C, C, C, F, F
    out = decode_valence(C, F, E, [4, 1], [1], label_counts=[3, 2], total_bond_order=4, cuts=True)
    g = nx.Graph()
    g.add_nodes_from((i, {"label": "CF"[c]}) for i, c in enumerate(out.node_classes))
    g.add_edges_from((int(a), int(b), {"label": 1}) for a, b in out.edges)
    assert nx.is_connected(g) and formula_matches(g, "C3H6F2")
    assert "joined by single bonds" in out.note

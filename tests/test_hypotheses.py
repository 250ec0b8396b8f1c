"""Tests for gwpred.model.hypotheses and BarycenterGraphPredictor.predict_hypotheses.

Outside references used here:

- QM9 molecules bundled with gwpred (``gwpred.datasets.load_demo``, from the
  QM9 data of the PyPI package qm9pack): training graphs, inputs, and the true
  molecules' SMILES.
- RDKit: ``Chem.MolFromSmiles`` (which sanitises: a molecule RDKit refuses is
  invalid) and ``rdMolDescriptors.CalcMolFormula`` (hydrogens included), the
  references for validity and for formula match.
- networkx ``is_isomorphic`` with categorical label matchers: the reference
  for "no two hypotheses are the same labeled graph".
- scikit-learn ``IsotonicRegression``: the reference calibration map.
- An elementary fact: C2H6O has exactly two constitutional isomers (ethanol
  and dimethyl ether), so no pool can hold more than two distinct graphs.
"""

from __future__ import annotations

import copy
import dataclasses
import itertools
import warnings

import networkx as nx
import numpy as np
import pytest
from networkx.algorithms.isomorphism import categorical_edge_match, categorical_node_match
from sklearn.isotonic import IsotonicRegression

from gwpred import BarycenterGraphPredictor
from gwpred.chem import graph_to_smiles
from gwpred.datasets import load_demo
from gwpred.io import load_archive, save_archive
from gwpred.model import load_model, save_model
from gwpred.model.hypotheses import (
    HypothesisList,
    calibrate_hypotheses,
    calibration_from,
    expected_calibration_error,
    list_features,
    single_edits,
    within_one,
)

Chem = pytest.importorskip("rdkit.Chem")
rdMolDescriptors = pytest.importorskip("rdkit.Chem.rdMolDescriptors")

N_TRAIN = 600
QUERIES = slice(600, 606)
HELD_OUT = slice(606, 622)


@pytest.fixture(scope="module")
def demo():
    X, graphs, smiles = load_demo(return_smiles=True)
    model = BarycenterGraphPredictor(random_state=0).fit(X[:N_TRAIN], graphs[:N_TRAIN])
    formulas = [rdMolDescriptors.CalcMolFormula(Chem.MolFromSmiles(s)) for s in smiles]  # RDKit, with H
    return model, X, graphs, formulas


@pytest.fixture(scope="module")
def plain(demo):
    model, X, _, _ = demo
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UserWarning)
        return model.predict_hypotheses(X[QUERIES], top_k=8)


@pytest.fixture(scope="module")
def with_formula(demo):
    model, X, _, formulas = demo
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UserWarning)
        return model.predict_hypotheses(X[QUERIES], top_k=8, formulas=formulas[QUERIES])


def same(a: nx.Graph, b: nx.Graph) -> bool:
    return nx.is_isomorphic(a, b, node_match=categorical_node_match("label", None),
                            edge_match=categorical_edge_match("label", None))


def rdkit_formula(g: nx.Graph) -> str:
    mol = Chem.MolFromSmiles(graph_to_smiles(g))  # sanitised by RDKit; None when invalid
    assert mol is not None
    return rdMolDescriptors.CalcMolFormula(mol)


@pytest.mark.parametrize("which", ["plain", "with_formula"])
def test_distinct_sorted_valid(which, request):
    lists = request.getfixturevalue(which)
    for hyps in lists:
        assert isinstance(hyps, HypothesisList) and 1 <= len(hyps) <= 8
        scores = [h.score for h in hyps]
        assert scores == sorted(scores, reverse=True)
        for a, b in itertools.combinations(hyps, 2):
            assert not same(a.graph, b.graph)  # networkx: no two label-isomorphic
        for h in hyps:
            assert Chem.MolFromSmiles(graph_to_smiles(h.graph)) is not None  # RDKit sanitises it
            assert 0.0 <= h.confidence <= 1.0
        assert not hyps.calibrated


def test_formula_matches_rdkit(demo, with_formula):
    _, _, _, formulas = demo
    for hyps, f in zip(with_formula, formulas[QUERIES]):
        assert {rdkit_formula(h.graph) for h in hyps} == {f}


def test_reproducible(demo, with_formula):
    model, X, graphs, formulas = demo
    again = BarycenterGraphPredictor(random_state=0).fit(X[:N_TRAIN], graphs[:N_TRAIN])
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UserWarning)
        lists = again.predict_hypotheses(X[QUERIES], top_k=8, formulas=formulas[QUERIES])
    for a, b in zip(lists, with_formula):
        assert [h.score for h in a] == [h.score for h in b]
        assert all(nx.utils.graphs_equal(x.graph, y.graph) for x, y in zip(a, b))


def test_calibration_monotone_and_isotonic(demo):
    model, X, graphs, formulas = demo
    cal = calibrate_hypotheses(model, X[HELD_OUT], graphs[HELD_OUT], formulas[HELD_OUT], top_k=5, n_rounds=1)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UserWarning)
        lists = model.predict_hypotheses(X[QUERIES], top_k=5, formulas=formulas[QUERIES], n_rounds=1, calibration=cal)
    assert all(hyps.calibrated for hyps in lists)
    for hyps in lists:  # down a list, confidences never rise; "within GED 1" is at least "exact"
        conf = np.array([h.confidence for h in hyps])
        near = np.array([h.confidence_near for h in hyps])
        assert np.all((conf >= 0) & (conf <= 1) & (near <= 1)) and np.all(near >= conf)
        assert np.all(np.diff(conf) <= 1e-12) and np.all(np.diff(near) <= 1e-12)
    # monotone in the score it calibrates, u = score + margin_weight * margin
    u = np.concatenate([list_features([h.score for h in hyps]) @ [1.0, cal.margin_weight] for hyps in lists])
    conf = np.array([h.confidence for hyps in lists for h in hyps])
    assert np.all(np.diff(conf[np.argsort(u, kind="stable")]) >= -1e-12)
    # scikit-learn's IsotonicRegression on the same held-out hypotheses gives the same map
    held = model.predict_hypotheses(X[HELD_OUT], top_k=5, formulas=formulas[HELD_OUT], n_rounds=1, calibration=False)
    u_held = np.concatenate([list_features([h.score for h in hyps]) @ [1.0, cal.margin_weight] for hyps in held])
    y = np.array([same(h.graph, t) for hyps, t in zip(held, graphs[HELD_OUT]) for h in hyps], dtype=float)
    iso = IsotonicRegression(y_min=0, y_max=1, out_of_bounds="clip").fit(u_held, y)
    np.testing.assert_allclose(conf, iso.predict(u), atol=1e-12)
    assert cal.n_inputs == 16 and cal.options["formulas"] is True


def test_within_one_matches_networkx(demo, with_formula):
    # Reference: networkx graph_edit_distance with upper_bound=1 (None when no edit path of
    # cost <= 1 exists), uniform costs, labels compared by the categorical matchers
    model, _, graphs, _ = demo
    pairs = [(h.graph, t) for hyps, t in zip(with_formula, graphs[QUERIES]) for h in hyps]
    t = graphs[0]
    pairs += [(t, t)]
    for u, v in list(t.edges)[:3]:  # one bond removed, one bond order changed: distance 1
        g = t.copy()
        g.remove_edge(u, v)
        pairs.append((g, t))
        h = t.copy()
        h.edges[u, v]["label"] = 2 if h.edges[u, v]["label"] == 1 else 1
        pairs.append((h, t))
    near = 0
    for g, truth in pairs:
        ref = nx.graph_edit_distance(g, truth, node_match=categorical_node_match("label", None),
                                     edge_match=categorical_edge_match("label", None), upper_bound=1)
        assert within_one(g, truth, model.labels_) == (ref is not None)
        near += ref is not None
    assert 4 <= near < len(pairs)


def test_model_calibrate_save_and_load(demo, tmp_path):
    model, X, graphs, formulas = demo
    model = copy.deepcopy(model)  # the module's fixture stays uncalibrated
    model.calibrate(X[HELD_OUT], graphs[HELD_OUT], top_k=5, n_rounds=1)
    assert set(model.hypothesis_calibration_) == {"plain", "formula"}
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UserWarning)
        mixed = [formulas[600], None]
        lists = model.predict_hypotheses(X[600:602], top_k=5, formulas=mixed, n_rounds=1)
        raw = model.predict_hypotheses(X[600:602], top_k=5, formulas=mixed, n_rounds=1, calibration=False)
    assert all(h.calibrated for h in lists) and not any(h.calibrated for h in raw)
    # each input uses the map of its own case: with a formula, or without
    for hyps, case in zip(lists, ("formula", "plain")):
        expected = model.hypothesis_calibration_[case]([h.score for h in hyps])
        np.testing.assert_array_equal([h.confidence for h in hyps], expected)
    path = tmp_path / "m.npz"
    save_model(model, path)
    back = load_model(path)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UserWarning)
        again = back.predict_hypotheses(X[600:602], top_k=5, formulas=mixed, n_rounds=1)
    for a, b in zip(lists, again):
        assert [(h.score, h.confidence, h.confidence_near) for h in a] == [
            (h.score, h.confidence, h.confidence_near) for h in b]
    for case, cal in model.hypothesis_calibration_.items():  # the measured GEDs come back too
        assert np.isfinite(cal.ged_first) and np.isfinite(cal.ged_decoding)
        assert (back.hypothesis_calibration_[case].ged_first, back.hypothesis_calibration_[case].ged_decoding) == (
            cal.ged_first, cal.ged_decoding)
    # a damaged calibration is refused with the file named, never used
    arrays, manifest = load_archive(path)
    manifest["hypothesis_calibration"]["plain"]["probabilities"][0] = 1.5
    save_archive(tmp_path / "bad.npz", arrays, manifest)
    with pytest.raises(ValueError, match=r"bad\.npz.*rates be non-decreasing in \[0, 1\]"):
        load_model(tmp_path / "bad.npz")
    # refitting drops a calibration made for the old training set
    model.fit(X[:50], graphs[:50])
    assert not hasattr(model, "hypothesis_calibration_")


def test_fit_with_calibration_share(demo):
    _, X, graphs, _ = demo
    model = BarycenterGraphPredictor(random_state=0).fit(X[:120], graphs[:120], calibration_share=0.1)
    assert set(model.hypothesis_calibration_) == {"plain", "formula"}
    assert model.hypothesis_calibration_["plain"].n_inputs == 12 and model.n_train_ == 120
    with pytest.raises(ValueError, match=r"calibration_share must be a number in \[0, 0.5\]"):
        BarycenterGraphPredictor().fit(X[:20], graphs[:20], calibration_share=0.7)
    with pytest.raises(ValueError, match="hold out at least 2"):
        BarycenterGraphPredictor().fit(X[:10], graphs[:10], calibration_share=0.05)


def test_k_larger_than_pool_returns_fewer_with_a_note(demo):
    model, X, _, _ = demo
    with pytest.warns(UserWarning, match="fewer than top_k=20 distinct hypotheses"):
        lists = model.predict_hypotheses(X[:1], top_k=20, formulas=["C2H6O"])
    hyps = lists[0]
    assert 1 <= len(hyps) <= 2  # C2H6O: ethanol and dimethyl ether only
    assert "only" in hyps.note and hyps.requested == 20
    assert {rdkit_formula(h.graph) for h in hyps} == {"C2H6O"}


def test_single_edits_of_propane():
    # elementary: one bond added to propane's C-C-C gives propene or cyclopropane (the C3H6
    # isomers); keeping the hydrogens (total bond order), only propane renumbered remains
    O = np.array([[0, 1, 0], [1, 0, 1], [0, 1, 0]])
    carbon = np.zeros(3, dtype=np.int64)

    def as_graph(M):
        g = nx.from_numpy_array(M, edge_attr="label")
        nx.set_node_attributes(g, "C", "label")
        return g

    propane, propene, cyclopropane = as_graph(O), as_graph(O + np.diag([1, 0], 1) + np.diag([1, 0], -1)), \
        as_graph(np.ones((3, 3), dtype=np.int64) - np.eye(3, dtype=np.int64))
    kept = [as_graph(M) for _, M in single_edits(carbon, O, np.array([4]))]
    assert kept and all(same(g, propane) for g in kept)
    free = [as_graph(M) for _, M in single_edits(carbon, O, np.array([4]), fixed_total=False)]
    classes = [next(i for i, ref in enumerate((propane, propene, cyclopropane)) if same(g, ref)) for g in free]
    assert sorted(set(classes)) == [0, 1, 2]
    for g in free:
        assert nx.is_connected(g) and all(d <= 4 for _, d in g.degree(weight="label"))


def test_array_path_equals_graph_path(demo):
    # The local search hashes, certifies and fingerprints edits from their arrays; each must
    # equal what the graph path gives for the same edit built as a networkx graph by
    # LabelSpace.build_graph (reference: networkx graph equality and gwpred's graph path).
    from gwpred.model.hypotheses import _chem, _edit_ids, _ids_certificate, _to_arrays, _to_graph
    from gwpred.ranking import CandidateLibrary
    from gwpred.wl import LabelIds, graph_ids, wl_encoding, wl_graph_hashes, wl_hash

    model, _, graphs, _ = demo
    chem = _chem(model._settings(True))
    space = LabelIds.of(model.labels_)
    checked = 0
    for g in graphs[600:610]:
        cls, O = _to_arrays(g, model.labels_, chem)
        edits = single_edits(cls, O, chem.valences, max_order=chem.max_order, fixed_counts=False,
                             fixed_total=False)
        built = [_to_graph(c, M, model.labels_, chem) for c, M in edits]
        hashes = wl_graph_hashes(CandidateLibrary(built), model.labels_).tolist()
        for (c, M), h, b in zip(edits, hashes, built):
            iu, ju = np.nonzero(np.triu(M, 1))
            ref = model.labels_.build_graph(c, np.stack([iu, ju], 1), [chem.order_class[int(o)] for o in M[iu, ju]])
            assert nx.utils.graphs_equal(b, ref)
            ids = _edit_ids(c, M, chem)
            assert ids == graph_ids(ref, space, "ref")
            assert wl_hash(wl_encoding(ids, 3)) == h
            checked += 1
        # isomorphic edits share a certificate, others differ (networkx is the reference)
        for (c1, M1), b1, (c2, M2), b2 in itertools.islice(
                ((*x, *y) for x, y in itertools.combinations(zip(edits, built), 2)), 200):
            equal = _ids_certificate(_edit_ids(c1, M1, chem)) == _ids_certificate(_edit_ids(c2, M2, chem))
            assert equal == same(b1, b2)
    assert checked > 100


def test_expected_calibration_error_direct():
    conf = np.array([0.05, 0.15, 0.95, 0.95])
    hit = np.array([0, 1, 1, 0])
    # bins [0, .1): |0 - .05| x 1/4; [.1, .2): |1 - .15| x 1/4; [.9, 1]: |.5 - .95| x 2/4
    assert expected_calibration_error(conf, hit) == pytest.approx(0.05 / 4 + 0.85 / 4 + 0.45 / 2)


@pytest.mark.parametrize(
    ("kwargs", "match"),
    [
        ({"top_k": 0}, "top_k must be an integer >= 1"),
        ({"output_kernel": "cosine"}, "output_kernel must be one of"),
        ({"n_rounds": -1}, "n_rounds must be an integer >= 0"),
    ],
)
def test_errors(demo, kwargs, match):
    model, X, _, _ = demo
    with pytest.raises(ValueError, match=match):
        model.predict_hypotheses(X[:1], **kwargs)


def test_calibration_errors(demo, plain):
    model, _, graphs, _ = demo
    with pytest.raises(ValueError, match="hypothesis lists but 1 graphs"):
        calibration_from(plain, graphs[:1], model.labels_)
    with pytest.raises(ValueError, match="equal, non-zero length"):
        expected_calibration_error([0.5], [1, 0])


@pytest.mark.parametrize("keep", [True, False])
def test_scores_are_weighted_tanimoto_without_self_terms(demo, keep):
    # Reference: RDKit Morgan fingerprints (radius 2, 2048 bits) and DataStructs' Tanimoto
    # similarity, weighted by the model's own neighbour weights. Without self terms, a
    # hypothesis equal (networkx isomorphism) to some of the input's training graphs is scored
    # by the others only: sum over the rest of w_i T(y_i, c), divided by their total weight.
    from rdkit import DataStructs
    from rdkit.Chem import rdFingerprintGenerator

    model, X, _, _ = demo
    gen = rdFingerprintGenerator.GetMorganGenerator(radius=2, fpSize=2048)

    def fp(g):
        return gen.GetFingerprint(Chem.MolFromSmiles(graph_to_smiles(g)))

    idx, w = model.neighbors(X[QUERIES])
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UserWarning)
        lists = model.predict_hypotheses(X[QUERIES], top_k=40, output_kernel="fingerprint",
                                         keep_self_terms=keep)
    equal_seen = 0
    for hyps, ii, ww in zip(lists, idx, w):
        train = [model.training_.graph(int(i)) for i in ii]
        for h in hyps:
            sims = np.array([DataStructs.TanimotoSimilarity(fp(h.graph), fp(t)) for t in train])
            other = np.array([keep or not same(h.graph, t) for t in train])
            equal_seen += int((~other).any())
            expected = (ww[other] @ sims[other]) / ww[other].sum()
            assert h.score == pytest.approx(expected, abs=1e-9)
    if not keep:
        assert equal_seen > 0  # some hypotheses were training graphs: the rule was exercised


def test_predict_with_hypotheses_returns_the_first_hypothesis(demo):
    # the first hypothesis of predict_hypotheses, as predict's answer; the decoding stays the default
    model, X, _, formulas = demo
    other = copy.deepcopy(model).set_params(predict_with="hypotheses")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UserWarning)
        first = [hyps[0].graph for hyps in model.predict_hypotheses(X[QUERIES], top_k=1, formulas=formulas[QUERIES])]
    pred = other.predict(X[QUERIES], formulas=formulas[QUERIES])
    assert all(same(a, b) for a, b in zip(pred, first))
    assert [rdkit_formula(g) for g in pred] == list(formulas[QUERIES])  # RDKit's formula, hydrogens included
    # the default, "auto", decodes when the model has no calibration
    assert model.get_params()["predict_with"] == "auto" and not hasattr(model, "hypothesis_calibration_")
    decoded = copy.deepcopy(model).set_params(predict_with="decoding").predict(X[QUERIES], formulas=formulas[QUERIES])
    assert all(same(a, b) for a, b in zip(model.predict(X[QUERIES], formulas=formulas[QUERIES]), decoded))
    with pytest.raises(ValueError, match=r"predict_with must be one of \['auto', 'decoding', 'hypotheses'\]"):
        copy.deepcopy(model).set_params(predict_with="best").predict(X[:1])


def test_auto_follows_the_measured_geds(demo):
    # "auto": per input, the first hypothesis where its case's calibration measured the lower
    # mean GED, else the decoding. The GEDs are gwpred.ged's (checked against networkx in
    # tests/test_ged_limits.py); here they are recomputed pair by pair as the reference.
    from gwpred.ged import edit_distance

    model, X, graphs, formulas = demo
    model = copy.deepcopy(model)
    model.calibrate(X[HELD_OUT], graphs[HELD_OUT], top_k=3, n_rounds=1)
    plain = model.hypothesis_calibration_["plain"]
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UserWarning)
        firsts = [h[0].graph for h in model.predict_hypotheses(X[HELD_OUT], top_k=3, n_rounds=1)]
    decoded = copy.deepcopy(model).set_params(predict_with="decoding").predict(X[HELD_OUT])
    truth = graphs[HELD_OUT]
    assert plain.ged_first == pytest.approx(np.mean([edit_distance(a, t).upper for a, t in zip(firsts, truth)]))
    assert plain.ged_decoding == pytest.approx(np.mean([edit_distance(a, t).upper for a, t in zip(decoded, truth)]))
    # force the choice both ways: plain inputs -> first hypothesis, formula inputs -> decoding
    cal = model.hypothesis_calibration_
    cal["plain"] = dataclasses.replace(cal["plain"], ged_first=1.0, ged_decoding=2.0)
    cal["formula"] = dataclasses.replace(cal["formula"], ged_first=2.0, ged_decoding=1.0)
    mixed = [None, formulas[601], None]
    pred = model.predict(X[600:603], formulas=mixed)
    by_decoding = copy.deepcopy(model).set_params(predict_with="decoding").predict(X[600:603], formulas=mixed)
    by_hypotheses = copy.deepcopy(model).set_params(predict_with="hypotheses").predict(X[600:603], formulas=mixed)
    assert [same(a, b) for a, b in zip(pred, by_hypotheses)][::2] == [True, True]
    assert same(pred[1], by_decoding[1])

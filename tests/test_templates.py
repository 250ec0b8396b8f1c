"""Tests for the learned-template predictor (gwpred.model.templates, template_steps, fgw_torch).

Outside references used here:

- POT (``import ot``) on its torch backend: ``ot.gromov.fused_gromov_wasserstein2``
  gives the FGW value, its plan (``log["T"]``) and gradients with respect to
  ``C1``, ``C2`` and ``M`` (POT's own envelope gradients at the optimal plan);
  ``ot.gromov.init_matrix`` / ``ot.gromov.gwloss`` evaluate the objective at a
  given plan; ``ot.gromov.update_barycenter_structure`` /
  ``update_barycenter_feature`` are the closed-form barycenter updates.
- PyTorch's ``torch.autograd.gradcheck``: central finite differences in float64.
- QM9 heavy-atom graphs of the bundled demo data (``gwpred.datasets.load_demo``,
  built from QM9; see data/README.md).
- Synthetic tasks whose answer is known by construction (the input encodes the
  size of a ring or a path); networkx ``is_isomorphic`` checks predicted graphs.
- scikit-learn's ``clone``, ``Pipeline`` and ``GridSearchCV``: the estimator contract.
"""

from __future__ import annotations

import networkx as nx
import numpy as np
import ot
import pytest
from sklearn.base import clone
from sklearn.exceptions import NotFittedError
from sklearn.model_selection import GridSearchCV
from sklearn.pipeline import Pipeline
from sklearn.preprocessing import StandardScaler

from gwpred import TemplateGraphPredictor, load_model, save_model
from gwpred.codec import LabelSpace, TrainingSet
from gwpred.datasets import load_demo
from gwpred.fgw import fgw_distance
from gwpred.io import load_archive, save_archive
from gwpred.model.fgw_torch import barycenter_at_plans, feature_costs_torch, fgw_at_plan, structure_term
from gwpred.model.template_steps import TemplateSet, top_weights

torch = pytest.importorskip("torch", reason="the neural extra (PyTorch) is not installed")


# --------------------------------------------------------------------------- helpers
def random_graph(rng: np.random.Generator, n: int, d: int = 3) -> tuple[np.ndarray, np.ndarray]:
    """A random 0/1 symmetric structure and continuous features (test inputs only)."""
    C = np.triu((rng.random((n, n)) < 0.4).astype(float), 1)
    return C + C.T, rng.random((n, d))


def demo_pairs(n_pairs: int) -> list[tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]]:
    """Pairs of QM9 heavy-atom graphs from the bundled demo data: 0/1 adjacency, one-hot elements."""
    _, graphs = load_demo()
    ts = TrainingSet.encode(graphs[:2 * n_pairs], LabelSpace().fit(graphs[:2 * n_pairs]))
    return [(ts.structures[2 * i], ts.features[2 * i], ts.structures[2 * i + 1], ts.features[2 * i + 1])
            for i in range(n_pairs)]


def random_pairs(n_pairs: int, seed: int = 0) -> list:
    rng = np.random.default_rng(seed)
    out = []
    for _ in range(n_pairs):
        C1, F1 = random_graph(rng, int(rng.integers(2, 8)))
        C2, F2 = random_graph(rng, int(rng.integers(2, 8)))
        out.append((C1, F1, C2, F2))
    return out


def pot_fgw(C1, F1, C2, F2, alpha, G0=None):
    """POT's FGW on the torch backend: value, plan and gradients w.r.t. C1, C2 and M."""
    tC1, tC2 = torch.tensor(C1, requires_grad=True), torch.tensor(C2, requires_grad=True)
    tM = torch.tensor(ot.dist(F1, F2), requires_grad=True)
    p, q = torch.tensor(ot.unif(len(C1))), torch.tensor(ot.unif(len(C2)))
    value, log = ot.gromov.fused_gromov_wasserstein2(tM, tC1, tC2, p, q, loss_fun="square_loss", alpha=alpha,
                                                     G0=None if G0 is None else torch.tensor(G0), log=True)
    value.backward()
    return float(value.detach()), log["T"].detach().numpy(), tC1.grad.numpy(), tC2.grad.numpy(), tM.grad.numpy()


CASES = [("random", pair) for pair in random_pairs(12)] + [("qm9", pair) for pair in demo_pairs(8)]


# --------------------------------------------------------------------------- FGW pieces vs POT
@pytest.mark.parametrize("alpha", [0.5, 0.9])
@pytest.mark.parametrize("kind,pair", CASES, ids=[f"{k}{i}" for i, (k, _) in enumerate(CASES)])
def test_fgw_value_and_gradient_at_pot_plan_match_pot(kind, pair, alpha):
    """Reference: POT fused_gromov_wasserstein2 (torch backend): its value, and its gradients with
    respect to C1, C2 and M (POT's envelope gradients), against ours at POT's own plan."""
    C1, F1, C2, F2 = pair
    value, T, gC1, gC2, gM = pot_fgw(C1, F1, C2, F2, alpha)
    tC1, tC2 = torch.tensor(C1, requires_grad=True), torch.tensor(C2, requires_grad=True)
    tF1 = torch.tensor(F1)
    tM = feature_costs_torch(tF1, torch.tensor(F2)).detach().requires_grad_(True)
    ours = fgw_at_plan(tM, tC1, tC2, torch.tensor(T), alpha)
    ours.backward()
    assert float(ours.detach()) == pytest.approx(value, abs=1e-10)
    np.testing.assert_allclose(tC1.grad.numpy(), gC1, atol=1e-10)
    np.testing.assert_allclose(tC2.grad.numpy(), gC2, atol=1e-10)
    np.testing.assert_allclose(tM.grad.numpy(), gM, atol=1e-10)


def test_feature_costs_match_pot_dist():
    """Reference: POT ot.dist (squared Euclidean), on random features."""
    rng = np.random.default_rng(1)
    F1, F2 = rng.random((4, 3)), rng.random((6, 3))
    np.testing.assert_allclose(feature_costs_torch(torch.tensor(F1), torch.tensor(F2)).numpy(), ot.dist(F1, F2),
                               atol=1e-12)


def test_numpy_solver_plan_gives_pot_value_from_the_same_start():
    """Reference: POT fused_gromov_wasserstein2 from the same start (the product plan), and POT's
    gwloss at our plan. FGW is non-convex; both solvers run the same conditional gradient, so from
    one start they should reach the same value; we count agreements as tests/test_fgw.py does."""
    agree = 0
    for _, (C1, F1, C2, F2) in CASES:
        ours = fgw_distance(ot.dist(F1, F2), C1, C2, alpha=0.5)
        value = pot_fgw(C1, F1, C2, F2, 0.5)[0]
        agree += abs(ours.value - value) <= 1e-7
        # the torch objective at our numpy plan is the numpy solver's value, judged by POT's gwloss
        p, q = ot.unif(len(C1)), ot.unif(len(C2))
        constC, hC1, hC2 = ot.gromov.init_matrix(C1, C2, p, q, "square_loss")
        pot_at_ours = 0.5 * np.sum(ot.dist(F1, F2) * ours.plan) + 0.5 * ot.gromov.gwloss(constC, hC1, hC2, ours.plan)
        torch_at_ours = float(fgw_at_plan(torch.tensor(ot.dist(F1, F2)), torch.tensor(C1), torch.tensor(C2),
                                          torch.tensor(ours.plan), 0.5))
        assert torch_at_ours == pytest.approx(pot_at_ours, abs=1e-10)
    assert agree >= 0.9 * len(CASES)


def test_barycenter_at_plans_matches_pot_updates():
    """Reference: POT update_barycenter_structure and update_barycenter_feature (Vayer et al. 2020,
    Eqs. 14-15) with the same plans and weights; the edge channels by the structure update per channel."""
    rng = np.random.default_rng(2)
    n, sizes = 4, [3, 5, 4]
    graphs = [random_graph(rng, k) for k in sizes]
    lam = np.array([0.2, 0.5, 0.3])
    h = ot.unif(n)
    plans = [ot.emd(h, ot.unif(k), rng.random((n, k))) for k in sizes]
    m = max(sizes)
    P, Cs, Fs, Es = np.zeros((3, n, m)), np.zeros((3, m, m)), np.zeros((3, m, 3)), np.zeros((3, m, m, 2))
    channels = []
    for s, ((C, F), T) in enumerate(zip(graphs, plans)):
        k = sizes[s]
        split = rng.random((k, k))
        E = np.stack([C * (split + split.T > 1), C * (split + split.T <= 1)], -1)
        channels.append(E)
        P[s, :, :k], Cs[s, :k, :k], Fs[s, :k], Es[s, :k, :k] = T, C, F, E
    C, F, E = barycenter_at_plans(torch.tensor(lam), torch.tensor(P), torch.tensor(Cs), torch.tensor(Fs),
                                  torch.tensor(Es))
    # POT's default target=True places the barycenter as the target: plans (m_s, n), transposed here
    back = [T.T for T in plans]
    C_pot = ot.gromov.update_barycenter_structure(back, [g[0] for g in graphs], lam, p=h)
    F_pot = ot.gromov.update_barycenter_feature(back, [g[1] for g in graphs], lam, p=h)
    np.testing.assert_allclose(C.numpy(), C_pot, atol=1e-12)
    np.testing.assert_allclose(F.numpy(), F_pot, atol=1e-12)
    for c in range(2):
        E_pot = ot.gromov.update_barycenter_structure(back, [e[..., c] for e in channels], lam, p=h)
        np.testing.assert_allclose(E[..., c].numpy(), E_pot, atol=1e-12)


def test_loss_through_barycenter_gradient_matches_finite_differences():
    """Reference: torch.autograd.gradcheck (central finite differences, float64) of the training
    loss, FGW at fixed plans of the fixed-plan barycenter, w.r.t. the weights and the templates."""
    rng = np.random.default_rng(3)
    S, n, m = 3, 4, 5
    P = torch.tensor(np.stack([ot.emd(ot.unif(n), ot.unif(m), rng.random((n, m))) for _ in range(S)]))
    Ty = torch.tensor(ot.emd(ot.unif(n), ot.unif(n), rng.random((n, n))))
    Cy, Fy = (torch.tensor(a) for a in random_graph(rng, n))

    def loss(logits, Cs, Fs):
        C, F, _ = barycenter_at_plans(torch.softmax(logits, 0), P, Cs, Fs)
        return fgw_at_plan(feature_costs_torch(F, Fy), C, Cy, Ty, 0.7)

    inputs = (torch.tensor(rng.standard_normal(S), requires_grad=True),
              torch.tensor(rng.random((S, m, m)), requires_grad=True),
              torch.tensor(rng.random((S, m, 3)), requires_grad=True))
    assert torch.autograd.gradcheck(loss, inputs)


def test_structure_term_matches_pot_gwloss():
    """Reference: POT init_matrix + gwloss (square loss) at a plan with the graphs' marginals."""
    rng = np.random.default_rng(4)
    C1, _ = random_graph(rng, 5)
    C2, _ = random_graph(rng, 6)
    p, q = ot.unif(5), ot.unif(6)
    T = ot.emd(p, q, rng.random((5, 6)))
    constC, hC1, hC2 = ot.gromov.init_matrix(C1, C2, p, q, "square_loss")
    assert float(structure_term(torch.tensor(C1), torch.tensor(C2), torch.tensor(T))) == pytest.approx(
        ot.gromov.gwloss(constC, hC1, hC2, T), abs=1e-12)


def test_top_weights_keeps_largest_and_renormalises():
    """Reference: elementary fact: the kept softmax weights renormalised are the softmax of the kept logits."""
    logits = np.log(np.array([[0.1, 0.5, 0.15, 0.25]]))
    idx, w = top_weights(logits, 2)
    assert idx.tolist() == [[1, 3]]
    np.testing.assert_allclose(w, [[0.5 / 0.75, 0.25 / 0.75]])


# --------------------------------------------------------------------------- synthetic task
def ring_or_path(n: int, ring: bool) -> nx.Graph:
    g = nx.cycle_graph(n) if ring else nx.path_graph(n)
    nx.set_node_attributes(g, "C", "label")
    nx.set_edge_attributes(g, 1, "label")
    return g


def rings_and_paths(n: int, seed: int) -> tuple[np.ndarray, list[nx.Graph]]:
    """Synthetic task with a known answer: x is a noisy one-hot code of one of 8 kinds (ring or path
    of 3..6 nodes); the right graph of a held-out x is the kind's graph."""
    rng = np.random.default_rng(seed)
    kinds = rng.integers(0, 8, n)
    X = np.eye(8)[kinds] + 0.1 * rng.standard_normal((n, 8))
    return X, [ring_or_path(3 + k // 2, bool(k % 2)) for k in kinds]


@pytest.fixture(scope="module")
def fitted() -> tuple[TemplateGraphPredictor, np.ndarray, list[nx.Graph]]:
    X, graphs = rings_and_paths(120, 0)
    model = TemplateGraphPredictor(n_templates=8, epochs=15, random_state=0).fit(X, graphs)
    return model, X, graphs


def same(a: nx.Graph, b: nx.Graph) -> bool:
    return nx.is_isomorphic(a, b, node_match=lambda u, v: u["label"] == v["label"],
                            edge_match=lambda u, v: u.get("label") == v.get("label"))


def test_synthetic_rings_and_paths_recovered_exactly(fitted):
    """Reference: networkx is_isomorphic against the known answer of held-out inputs (synthetic task)."""
    model, _, _ = fitted
    X, truth = rings_and_paths(40, 1)
    pred = model.predict(X)
    assert all(same(p, t) for p, t in zip(pred, truth))


def test_templates_stay_in_range(fitted):
    """Reference: elementary facts of the parametrisation: structures symmetric in [0, 1] with a zero
    diagonal, node scores on the simplex, edge channels summing to the structure."""
    ts = fitted[0].templates_
    assert ts.structures.min() >= 0 and ts.structures.max() <= 1
    np.testing.assert_allclose(ts.structures, np.swapaxes(ts.structures, 1, 2))
    assert np.all(np.diagonal(ts.structures, axis1=1, axis2=2) == 0)
    for t, k in enumerate(ts.sizes):
        np.testing.assert_allclose(ts.features[t, :k].sum(1), 1.0)
    np.testing.assert_allclose(ts.channels.sum(-1), ts.structures, atol=1e-12)


def test_template_weights_are_on_the_simplex(fitted):
    """Reference: elementary fact: softmax rows are positive and sum to one."""
    model, X, _ = fitted
    w = model.template_weights(X[:5])
    assert w.shape == (5, 8) and np.all(w > 0)
    np.testing.assert_allclose(w.sum(1), 1.0)


def test_same_random_state_gives_the_same_model():
    """Reference: elementary determinism: two fits with one seed give equal arrays."""
    X, graphs = rings_and_paths(40, 2)
    a = TemplateGraphPredictor(n_templates=4, epochs=2, random_state=7).fit(X, graphs)
    b = TemplateGraphPredictor(n_templates=4, epochs=2, random_state=7).fit(X, graphs)
    np.testing.assert_array_equal(a.templates_.structures, b.templates_.structures)
    for Wa, Wb in zip(a.network_.weights, b.network_.weights):
        np.testing.assert_array_equal(Wa, Wb)


def test_numpy_forward_matches_torch_network():
    """Reference: PyTorch's own forward pass (torch.nn.Linear and ReLU) with the saved arrays."""
    X, graphs = rings_and_paths(30, 3)
    model = TemplateGraphPredictor(n_templates=4, epochs=1, hidden=(16, 8), random_state=0).fit(X, graphs)
    net = model.network_
    h = torch.tensor(((X - net.mean) / net.scale).astype(np.float32))  # the network is float32, as trained
    for k, (W, b) in enumerate(zip(net.weights, net.biases)):
        h = torch.nn.functional.linear(h, torch.tensor(W.T), torch.tensor(b))
        if k < len(net.weights) - 1:
            h = torch.relu(h)
    logits, sizes = net.forward(X)
    np.testing.assert_allclose(np.hstack([logits, sizes]), h.numpy(), rtol=1e-5, atol=1e-5)


# --------------------------------------------------------------------------- files
def test_save_load_round_trip(fitted, tmp_path):
    """Reference: the saved model's own predictions (networkx is_isomorphic) and arrays; the file is
    a zip of .npy arrays and a JSON manifest that numpy reads with allow_pickle=False."""
    model, X, _ = fitted
    path = tmp_path / "templates.npz"
    save_model(model, path)
    loaded = load_model(path)
    assert isinstance(loaded, TemplateGraphPredictor)
    assert loaded.get_params() == model.get_params()
    np.testing.assert_array_equal(loaded.templates_.structures, model.templates_.structures)
    assert all(same(a, b) for a, b in zip(loaded.predict(X[:20]), model.predict(X[:20])))
    with np.load(path, allow_pickle=False) as z:
        assert "template_structures" in z.files and "inputs" not in z.files  # no training data stored
    assert load_archive(path)[1]["kind"] == "TemplateGraphPredictor"  # the kind load_model dispatches on


def test_load_refuses_corrupted_and_inconsistent_files(fitted, tmp_path):
    """Reference: the file's own bytes (truncated), and an archive whose arrays disagree."""
    model, _, _ = fitted
    path = tmp_path / "m.npz"
    save_model(model, path)
    cut = tmp_path / "cut.npz"
    cut.write_bytes(path.read_bytes()[:200])
    with pytest.raises(ValueError, match="corrupted|truncated|not a zip"):
        load_model(cut)
    bad = tmp_path / "bad.npz"
    from gwpred.model.template_files import template_archive

    arrays, manifest = template_archive(model)
    arrays["template_sizes"] = arrays["template_sizes"][:-1]
    save_archive(bad, arrays, manifest)
    with pytest.raises(ValueError, match="inconsistent contents"):
        load_model(bad)


def test_save_unfitted_is_refused(tmp_path):
    with pytest.raises(ValueError, match="fitted TemplateGraphPredictor; call fit first"):
        save_model(TemplateGraphPredictor(), tmp_path / "m.npz")


# --------------------------------------------------------------------------- scikit-learn contract
def test_clone_pipeline_and_grid_search():
    """Reference: scikit-learn clone, Pipeline and GridSearchCV (negative mean GED as the score)."""
    X, graphs = rings_and_paths(48, 4)
    base = TemplateGraphPredictor(n_templates=4, epochs=2, random_state=0)
    copy = clone(base)
    assert copy.get_params() == base.get_params() and not hasattr(copy, "network_")
    pipe = Pipeline([("scale", StandardScaler()), ("model", base)]).fit(X, graphs)
    assert len(pipe.predict(X[:3])) == 3
    search = GridSearchCV(base, {"n_mixed": [1, 2]}, cv=2).fit(X, graphs)
    assert search.best_params_["n_mixed"] in (1, 2)
    assert np.isfinite(search.best_score_)


# --------------------------------------------------------------------------- bad input
def test_bad_inputs_raise_clear_errors(fitted):
    X, graphs = rings_and_paths(10, 5)
    Xn = X.copy()
    Xn[0, 0] = np.nan
    with pytest.raises(ValueError, match="NaN"):
        TemplateGraphPredictor(n_templates=2).fit(Xn, graphs)
    with pytest.raises(ValueError, match="10 rows but 9 graphs"):
        TemplateGraphPredictor(n_templates=2).fit(X, graphs[:9])
    with pytest.raises(ValueError, match="no nodes"):
        TemplateGraphPredictor(n_templates=2).fit(X, graphs[:9] + [nx.Graph()])
    with pytest.raises(ValueError, match="n_templates=20 is more than the 10 training graphs"):
        TemplateGraphPredictor(n_templates=20).fit(X, graphs)
    with pytest.raises(ValueError, match="n_mixed"):
        TemplateGraphPredictor(n_mixed=0).fit(X, graphs)
    with pytest.raises(TypeError, match="hidden"):
        TemplateGraphPredictor(hidden=16).fit(X, graphs)
    with pytest.raises(ValueError, match="at least 4 pairs"):
        TemplateGraphPredictor(n_templates=1).fit(X[:3], graphs[:3])
    with pytest.raises(NotFittedError):
        TemplateGraphPredictor().predict(X)
    model = fitted[0]
    with pytest.raises(ValueError, match="fitted with 8"):
        model.predict(X[:, :5])
    with pytest.raises(ValueError, match="NaN"):
        model.predict(Xn)


def test_unknown_element_in_formula_is_refused(fitted):
    """Reference: the training labels (only carbon): a formula with nitrogen cannot be placed."""
    model, X, _ = fitted
    with pytest.raises(ValueError, match="never seen as a node label"):
        model.predict(X[:1], formulas=["C3H7N"])


# --------------------------------------------------------------------------- drawing
def test_draw_templates_shows_weights_and_top_templates(fitted):
    """Reference: the model's own arrays: the drawn heat maps hold the top templates' structures,
    by decreasing weight (matplotlib's AxesImage data)."""
    import matplotlib

    matplotlib.use("Agg")
    from gwpred.plot import draw_templates

    model, X, _ = fitted
    fig = draw_templates(model, X[0], top=2)
    w = model.template_weights(X[:1])[0]
    first = int(np.argmax(w))
    k = int(model.templates_.sizes[first])
    images = [ax.images[0].get_array() for ax in fig.axes if ax.images]
    np.testing.assert_allclose(np.asarray(images[0]), model.templates_.structures[first, :k, :k])
    assert any(ax.patches for ax in fig.axes)  # the bar chart of the weights
    with pytest.raises(ValueError, match="top must be a positive integer"):
        draw_templates(model, X[0], top=0)
    with pytest.raises(ValueError, match="fitted TemplateGraphPredictor"):
        draw_templates(TemplateGraphPredictor())


# --------------------------------------------------------------------------- molecules
def test_molecules_with_formulas_have_the_formula_atoms_and_are_valid():
    """Reference: QM9 molecules of the bundled demo data; each prediction given the true graph's
    heavy atoms (counted from its labels) must have exactly those atoms, and RDKit must accept it
    (gwpred.chem.check_molecule sanitises with RDKit). Predicted molecules are hypotheses; this
    checks the decoding's contract, not their truth."""
    pytest.importorskip("rdkit")
    from collections import Counter

    from gwpred.chem import check_molecule

    X, graphs = load_demo()
    model = TemplateGraphPredictor(n_templates=6, epochs=2, cluster_on="graphs", random_state=0)
    model.fit(X[:80], graphs[:80])
    assert model.valence_
    truth = graphs[80:86]
    formulas = ["".join(f"{e}{k}" for e, k in sorted(Counter(d["label"] for _, d in g.nodes(data=True)).items()))
                for g in truth]
    pred = model.predict(X[80:86], formulas=formulas)
    for p, t in zip(pred, truth):
        assert Counter(d["label"] for _, d in p.nodes(data=True)) == Counter(d["label"] for _, d in t.nodes(data=True))
        assert check_molecule(p).valid


def test_cluster_on_is_checked():
    X, graphs = rings_and_paths(10, 6)
    with pytest.raises(ValueError, match="cluster_on"):
        TemplateGraphPredictor(cluster_on="labels").fit(X, graphs)


def test_size_rules(fitted):
    """Reference: the known answer of the synthetic task (sizes 3..6), and a fixed size given."""
    model, _, _ = fitted
    X, truth = rings_and_paths(20, 8)
    voted = clone(model).set_params(n_nodes="vote")
    voted.__dict__.update({k: v for k, v in vars(model).items() if k.endswith("_")})
    assert [g.number_of_nodes() for g in voted.predict(X)] == [g.number_of_nodes() for g in truth]
    fixed = clone(model).set_params(n_nodes=4)
    fixed.__dict__.update({k: v for k, v in vars(model).items() if k.endswith("_")})
    assert all(g.number_of_nodes() == 4 for g in fixed.predict(X))


def test_predictions_do_not_depend_on_batches_or_workers(fitted):
    """Reference: the model's own one-at-a-time predictions (networkx is_isomorphic); a query's
    result must not depend on its batch or on the worker that solved it (DEVELOPERS.md)."""
    model, _, _ = fitted
    X, _ = rings_and_paths(24, 9)
    one = clone(model).set_params(batch_size=1)
    one.__dict__.update({k: v for k, v in vars(model).items() if k.endswith("_")})
    two = clone(model).set_params(batch_size=5, n_jobs=2)
    two.__dict__.update({k: v for k, v in vars(model).items() if k.endswith("_")})
    reference = model.predict(X)
    assert all(same(a, b) for a, b in zip(one.predict(X), reference))
    assert all(same(a, b) for a, b in zip(two.predict(X), reference))


# --------------------------------------------------------------------------- report
def test_report_draws_the_templates_and_each_inputs_weights(fitted):
    """The HTML report of a template model: one page-level figure of the templates and, per drawn
    item with an input, one figure of its weights; the weights drawn are the model's own
    (template_weights, rows on the simplex as checked above)."""
    from gwpred.report import build_report

    model, _, _ = fitted
    X, truth = rings_and_paths(5, 2)
    pred = model.predict(X)
    page = build_report(pred, truth, templates=model, inputs=X, drawings=3, time_limit=5.0)
    assert page.count("<h2>Learned templates</h2>") == 1
    assert page.count("The weights this input puts on each of the 8 learned templates") == 3
    with pytest.raises(ValueError, match="templates must be a fitted TemplateGraphPredictor"):
        build_report(pred, truth, templates=object(), inputs=X)


def test_cli_report_with_a_template_model(fitted, tmp_path, capsys):
    """``gwpred report --model --features`` reads a saved template model (load_model tells the kind)
    and draws its templates instead of training neighbours."""
    from gwpred.cli import main
    from gwpred.io import write_features, write_graphs

    model, _, _ = fitted
    X, truth = rings_and_paths(4, 3)
    save_model(model, tmp_path / "templates.npz")
    write_features(tmp_path / "x.csv", X)
    write_graphs(tmp_path / "pred.jsonl", model.predict(X))
    write_graphs(tmp_path / "truth.jsonl", truth)
    code = main(["report", str(tmp_path / "pred.jsonl"), "--truth", str(tmp_path / "truth.jsonl"),
                 "--model", str(tmp_path / "templates.npz"), "--features", str(tmp_path / "x.csv"),
                 "--out", str(tmp_path / "page.html"), "-q"])
    assert code == 0, capsys.readouterr().err
    page = (tmp_path / "page.html").read_text(encoding="utf-8")
    assert "<h2>Learned templates</h2>" in page and page.count("learned templates (top)") == 4

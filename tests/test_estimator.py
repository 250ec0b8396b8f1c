"""Tests for gwpred.model.BarycenterGraphPredictor.

Outside references used here:

- scikit-learn: the estimator conventions of its developer guide ("Developing
  scikit-learn estimators": ``__init__`` only stores parameters, validation in
  ``fit``, ``get_params``/``set_params``, ``clone``, ``NotFittedError``) and the
  public checks of ``sklearn.utils.estimator_checks`` that need no target;
  ``Pipeline``, ``StandardScaler`` and ``GridSearchCV`` as the consumers.
- scikit-learn ``KernelRidge``: fitted on identity targets, its predictions
  are the kernel ridge coefficients ``(K + a I)^{-1} k(x)``; the reference for
  the weights the estimator puts on the training graphs.
- networkx: ``is_isomorphic`` with label matchers (VF2) for "same labeled
  graph", ``is_connected``, ``number_of_selfloops``, and
  ``graph_edit_distance`` for the score on small graphs.
- QM9 heavy-atom graphs and broadened spectra from ``gwpred.datasets.load_demo``
  (built from the QM9 data of the PyPI package qm9pack).
- scikit-learn ``KernelRidge`` fitted on each query's ``local_size`` nearest
  training inputs (a stable numpy sort of scikit-learn's ``rbf_kernel``) for
  ``weight_model="local"``.

No expected value below is made up: the toy chain graphs only feed error
paths and the networkx GED cross-check.
"""

from __future__ import annotations

import inspect
import math

import networkx as nx
import numpy as np
import pytest
import sklearn
from networkx.algorithms.isomorphism import categorical_edge_match, categorical_node_match
from sklearn.base import clone
from sklearn.exceptions import NotFittedError
from sklearn.kernel_ridge import KernelRidge
from sklearn.metrics.pairwise import rbf_kernel
from sklearn.model_selection import GridSearchCV
from sklearn.pipeline import Pipeline
from sklearn.preprocessing import StandardScaler
from sklearn.utils import estimator_checks

from gwpred import BarycenterGraphPredictor, SoftGraph
from gwpred.model import estimator as estimator_module
from gwpred.datasets import load_demo
from gwpred.metrics import edit_distance
from gwpred.weights import kernel_matrix

N_TRAIN = 300
N_TEST = 20
TOP_K = 3  # small: keeps the barycenters and the exact GEDs cheap

NODE_MATCH = categorical_node_match("label", None)
EDGE_MATCH = categorical_edge_match("label", None)


# --------------------------------------------------------------------------
# data and helpers
# --------------------------------------------------------------------------
@pytest.fixture(scope="module")
def demo():
    """First 300 QM9 molecules for training, the next 20 as queries."""
    X, graphs = load_demo()
    return (
        X[:N_TRAIN],
        graphs[:N_TRAIN],
        X[N_TRAIN : N_TRAIN + N_TEST],
        graphs[N_TRAIN : N_TRAIN + N_TEST],
    )


@pytest.fixture(scope="module")
def fitted(demo):
    Xtr, Gtr, _, _ = demo
    return BarycenterGraphPredictor(n_neighbors=TOP_K, random_state=0).fit(Xtr, Gtr)


@pytest.fixture(scope="module")
def predicted(fitted, demo):
    return fitted.predict(demo[2])


def same_labeled_graph(g: nx.Graph, h: nx.Graph) -> bool:
    # reference: networkx VF2 isomorphism with node and edge label matching
    return nx.is_isomorphic(g, h, node_match=NODE_MATCH, edge_match=EDGE_MATCH)


def node_link(graphs: list[nx.Graph]) -> list[dict]:
    """Exact identity of graphs: node order, labels and edges (networkx node-link data)."""
    return [nx.node_link_data(g, edges="edges") for g in graphs]


def chain(n: int, node_label="C", edge_label=1) -> nx.Graph:
    g = nx.path_graph(n)
    nx.set_node_attributes(g, node_label, "label")
    if edge_label is not None:
        nx.set_edge_attributes(g, edge_label, "label")
    return g


def toy():
    """Six chains of 2..7 nodes against a 1-D input, for error paths and small GEDs."""
    X = np.arange(6.0).reshape(-1, 1)
    graphs = [chain(k + 2, edge_label=1 + k % 2) for k in range(6)]
    return X, graphs


# --------------------------------------------------------------------------
# scikit-learn conventions
# --------------------------------------------------------------------------
@pytest.mark.parametrize(
    "check",
    [
        # scikit-learn's own public checks that need no target values
        "check_no_attributes_set_in_init",
        "check_parameters_default_constructible",
        "check_get_params_invariance",
        "check_set_params",
        "check_estimator_cloneable",
        "check_estimator_repr",
        "check_do_not_raise_errors_in_init_or_set_params",
    ],
)
def test_sklearn_public_checks(check):
    fn = getattr(estimator_checks, check, None)
    if fn is None:  # older scikit-learn releases lack some of these checks
        pytest.skip(f"scikit-learn {sklearn.__version__} has no {check}")
    # older releases took the class, newer ones an instance
    takes_class = "Estimator" in inspect.signature(fn).parameters
    fn("BarycenterGraphPredictor", BarycenterGraphPredictor if takes_class else BarycenterGraphPredictor())


def test_init_only_stores_parameters():
    # scikit-learn developer guide: __init__ sets exactly its arguments, no
    # validation; invalid values are reported by fit.
    est = BarycenterGraphPredictor(alpha=2, n_neighbors=0, kernel="nope")
    assert set(vars(est)) == set(est.get_params())
    assert est.alpha == 2 and est.n_neighbors == 0 and est.kernel == "nope"
    assert not any(k.endswith("_") for k in vars(est))


def test_get_set_params_round_trip():
    est = BarycenterGraphPredictor()
    new = {
        "kernel": "laplacian",
        "gamma": 0.5,
        "ridge": 0.1,
        "weighting": "knn",
        "n_neighbors": 4,
        "alpha": 0.25,
        "n_nodes": 5,
        "edges": "threshold",
        "connect": False,
        "decoding": "free",
        "edge_label": None,
        "random_state": 7,
    }
    assert est.set_params(**new) is est
    params = est.get_params()
    for k, v in new.items():
        assert params[k] == v
    # set_params(**get_params()) is the identity (scikit-learn convention)
    again = BarycenterGraphPredictor().set_params(**params)
    assert again.get_params() == params
    with pytest.raises(ValueError, match="Invalid parameter 'no_such_param'"):
        est.set_params(no_such_param=1)


def test_clone_of_fitted_model_is_unfitted_with_same_params(fitted):
    c = clone(fitted)
    assert c is not fitted
    assert c.get_params() == fitted.get_params()
    assert not hasattr(c, "labels_") and not hasattr(c, "weights_")
    with pytest.raises(NotFittedError, match="instance is not fitted yet"):
        c.predict(np.zeros((1, fitted.n_features_in_)))


def test_fit_returns_self_and_sets_fitted_attributes(demo):
    Xtr, Gtr, _, _ = demo
    est = BarycenterGraphPredictor(n_neighbors=TOP_K)
    assert est.fit(Xtr, Gtr) is est
    assert est.n_features_in_ == Xtr.shape[1]
    assert est.n_train_ == len(Gtr)
    # node / edge counts cross-checked with networkx
    assert est.sizes_.tolist() == [g.number_of_nodes() for g in Gtr]
    assert est.n_edges_.tolist() == [g.number_of_edges() for g in Gtr]
    assert est.connected_ == all(nx.is_connected(g) for g in Gtr)


def test_pipeline_with_standard_scaler(demo):
    # graphs travel as y through a scikit-learn Pipeline
    Xtr, Gtr, Xte, Gte = demo
    pipe = Pipeline(
        [("scale", StandardScaler()), ("model", BarycenterGraphPredictor(n_neighbors=TOP_K, random_state=0))]
    )
    assert pipe.fit(Xtr, Gtr) is pipe
    got = pipe.predict(Xte[:5])
    # reference: the same two steps done by hand
    scaler = StandardScaler().fit(Xtr)
    manual = BarycenterGraphPredictor(n_neighbors=TOP_K, random_state=0).fit(scaler.transform(Xtr), Gtr)
    assert node_link(got) == node_link(manual.predict(scaler.transform(Xte[:5])))
    assert pipe.get_params()["model__n_neighbors"] == TOP_K
    pipe.set_params(model__alpha=0.5)
    assert pipe.named_steps["model"].alpha == 0.5


def test_grid_search_over_alpha_and_n_neighbors():
    # the 40 smallest molecules of the demo file keep the 160 exact GEDs
    # (4 candidates x 2 folds x 20 held-out items) cheap
    X, graphs = load_demo()
    idx = np.argsort([g.number_of_nodes() for g in graphs], kind="stable")[:40]
    X40, G40 = X[idx], [graphs[i] for i in idx]
    grid = {"alpha": [0.5, 0.9], "n_neighbors": [1, 2]}
    search = GridSearchCV(BarycenterGraphPredictor(random_state=0), grid, cv=2, error_score="raise")
    search.fit(X40, G40)
    assert set(search.best_params_) == {"alpha", "n_neighbors"}
    assert search.best_params_["alpha"] in grid["alpha"]
    assert search.best_params_["n_neighbors"] in grid["n_neighbors"]
    scores = np.asarray(search.cv_results_["mean_test_score"], dtype=float)
    assert scores.shape == (4,) and np.all(np.isfinite(scores))
    # score is a negative mean GED: never positive, higher is better
    assert np.all(scores <= 0)
    assert search.best_score_ == pytest.approx(scores.max())
    assert len(search.predict(X40[:2])) == 2


# --------------------------------------------------------------------------
# predictions
# --------------------------------------------------------------------------
def test_same_random_state_gives_identical_predictions(demo, predicted):
    Xtr, Gtr, Xte, _ = demo
    again = BarycenterGraphPredictor(n_neighbors=TOP_K, random_state=0).fit(Xtr, Gtr).predict(Xte)
    assert node_link(again) == node_link(predicted)


@pytest.mark.parametrize("decoding", ["anchored", "free"])
@pytest.mark.parametrize("edges", ["budget", "threshold"])
def test_predictions_are_valid_graphs(demo, decoding, edges):
    Xtr, Gtr, Xte, _ = demo
    model = BarycenterGraphPredictor(n_neighbors=TOP_K, decoding=decoding, edges=edges).fit(Xtr, Gtr)
    pred = model.predict(Xte)
    assert len(pred) == len(Xte)
    node_set = {lab for g in Gtr for _, lab in g.nodes(data="label")}
    edge_set = {lab for g in Gtr for _, _, lab in g.edges(data="label")}
    # largest degree per element in training, computed with networkx
    max_deg: dict = {}
    for g in Gtr:
        for v, d in g.degree():
            lab = g.nodes[v]["label"]
            max_deg[lab] = max(max_deg.get(lab, 0), d)
    assert all(nx.is_connected(g) for g in Gtr)  # QM9 heavy-atom graphs are connected
    for g in pred:
        assert type(g) is nx.Graph  # undirected, simple
        assert g.number_of_nodes() >= 1
        assert {lab for _, lab in g.nodes(data="label")} <= node_set
        assert {lab for _, _, lab in g.edges(data="label")} <= edge_set
        assert nx.number_of_selfloops(g) == 0
        assert nx.is_connected(g)
        for v, d in g.degree():
            assert d <= max_deg[g.nodes[v]["label"]]


def test_fixed_n_nodes_with_free_decoding(demo):
    Xtr, Gtr, Xte, _ = demo
    model = BarycenterGraphPredictor(n_neighbors=TOP_K, n_nodes=6, decoding="free").fit(Xtr, Gtr)
    assert [g.number_of_nodes() for g in model.predict(Xte[:5])] == [6] * 5


def test_predict_barycenters_soft_graph_invariants(fitted, demo):
    _, _, Xte, _ = demo
    softs = fitted.predict_barycenters(Xte)
    assert len(softs) == len(Xte)
    n_nl, n_el = fitted.labels_.n_node_labels, fitted.labels_.n_edge_labels
    for s in softs:
        assert isinstance(s, SoftGraph)
        n = s.structure.shape[0]
        assert s.structure.shape == (n, n)
        np.testing.assert_allclose(s.structure, s.structure.T, atol=1e-9)
        assert s.structure.min() >= -1e-9 and s.structure.max() <= 1 + 1e-9
        assert s.node_scores.shape == (n, n_nl)
        np.testing.assert_allclose(s.node_scores.sum(axis=1), 1.0, atol=1e-9)
        assert s.edge_scores.shape == (n, n, n_el)
        np.testing.assert_allclose(s.edge_scores.sum(axis=-1), s.structure, atol=1e-9)
        k = len(s.neighbors)
        assert 1 <= k <= TOP_K and s.weights.shape == (k,)
        assert len(set(s.neighbors.tolist())) == k
        assert np.all((s.neighbors >= 0) & (s.neighbors < fitted.n_train_))
        assert np.all(s.weights > 0)
        assert s.weights.sum() == pytest.approx(1.0, abs=1e-12)
        assert np.all(np.diff(s.weights) <= 0)  # sorted by decreasing weight
        sizes = fitted.sizes_[s.neighbors]
        assert sizes.min() <= n <= sizes.max()
        assert math.isfinite(s.objective) and s.objective >= -1e-9


def test_weights_match_sklearn_kernel_ridge(fitted, demo):
    # reference: scikit-learn KernelRidge fitted on identity targets predicts
    # k(x)^T (K + a I)^{-1}, i.e. the kernel ridge coefficients of every
    # training item; here a = n * ridge. Then keep the top_k, clip at zero,
    # normalise (as documented for the estimator).
    Xtr, _, Xte, _ = demo
    n = len(Xtr)
    gamma = fitted.weights_.gamma_
    kr = KernelRidge(alpha=n * fitted.ridge, kernel="rbf", gamma=gamma).fit(Xtr, np.eye(n))
    coef = kr.predict(Xte)
    for row, s in zip(coef, fitted.predict_barycenters(Xte)):
        order = np.argsort(-row, kind="stable")[: fitted.n_neighbors]
        w = np.clip(row[order], 0, None)
        keep = w > 0
        assert s.neighbors.tolist() == order[keep].tolist()
        np.testing.assert_allclose(s.weights, w[keep] / w.sum(), rtol=1e-6)


def test_input_kernel_is_the_fitted_kernel(fitted, demo):
    # reference: scikit-learn's rbf_kernel with the fitted bandwidth (what 1-NN retrieval in the
    # CLI demo and gwpred.compare ranks training inputs by)
    Xtr, _, Xte, _ = demo
    np.testing.assert_allclose(fitted.input_kernel(Xte, Xtr), rbf_kernel(Xte, Xtr, gamma=fitted.weights_.gamma_),
                               rtol=1e-10, atol=1e-12)
    pre = BarycenterGraphPredictor(kernel="precomputed").fit(rbf_kernel(Xtr[:20], Xtr[:20]), demo[1][:20])
    with pytest.raises(ValueError, match="no kernel function"):
        pre.input_kernel(Xte, Xtr)


@pytest.mark.parametrize("decoding", ["anchored", "free"])
def test_known_answer_training_input_returns_its_graph(demo, decoding):
    # With a tiny ridge, kernel ridge interpolates: (K + n*lambda*I)^{-1} k(x_i)
    # is close to the i-th unit vector (common practice), so top_k=1 keeps
    # graph i alone, and the FGW barycenter of one graph is that graph.
    Xtr, Gtr, _, _ = demo
    model = BarycenterGraphPredictor(n_neighbors=1, ridge=1e-8, decoding=decoding).fit(Xtr, Gtr)
    rows = list(range(0, N_TRAIN, 15))
    softs = model.predict_barycenters(Xtr[rows])
    assert [s.neighbors.tolist() for s in softs] == [[i] for i in rows]
    assert all(s.weights.tolist() == [1.0] for s in softs)
    for i, g in zip(rows, model.predict(Xtr[rows])):
        assert same_labeled_graph(g, Gtr[i]), f"training item {i}"


def test_precomputed_kernel_matches_rbf(fitted, demo, predicted):
    Xtr, Gtr, Xte, _ = demo
    gamma = fitted.weights_.gamma_
    pre = BarycenterGraphPredictor(kernel="precomputed", n_neighbors=TOP_K, random_state=0)
    pre.fit(kernel_matrix(Xtr, Xtr, "rbf", gamma), Gtr)
    got = pre.predict(kernel_matrix(Xte, Xtr, "rbf", gamma))
    assert node_link(got) == node_link(predicted)


def test_score_is_minus_mean_edit_distance(fitted, demo):
    _, _, Xte, Gte = demo
    X5, G5 = Xte[:5], Gte[:5]
    pred = fitted.predict(X5)
    direct = [edit_distance(p, t).value for p, t in zip(pred, G5)]
    assert fitted.score(X5, G5) == pytest.approx(-float(np.mean(direct)))


def test_score_agrees_with_networkx_graph_edit_distance():
    # reference: networkx.graph_edit_distance with unit insertion/deletion
    # costs and substitution cost 0 for equal labels, 1 otherwise (its
    # defaults when node_match / edge_match are given, per its documentation,
    # recalled from memory); exact on graphs this small.
    X, graphs = toy()
    model = BarycenterGraphPredictor(n_neighbors=2).fit(X, graphs)
    Xq = np.array([[0.4], [2.5], [4.6]])
    truth = [chain(3, "O", 1), chain(4, "C", 2), chain(6, "C", 1)]
    pred = model.predict(Xq)
    ged = [nx.graph_edit_distance(p, t, node_match=NODE_MATCH, edge_match=EDGE_MATCH) for p, t in zip(pred, truth)]
    assert model.score(Xq, truth) == pytest.approx(-float(np.mean(ged)))


def test_score_mismatched_lengths(fitted, demo):
    _, _, Xte, Gte = demo
    with pytest.raises(ValueError, match=r"X has 2 rows but 3 graphs were given; pass one graph per row"):
        fitted.score(Xte[:2], Gte[:3])


def test_score_ignores_edge_labels_when_edge_label_is_none():
    X, graphs = toy()  # edges labelled 1 or 2
    model = BarycenterGraphPredictor(n_neighbors=1, ridge=1e-8, edge_label=None).fit(X, graphs)
    pred = model.predict(X)
    # the predictions are the training graphs up to edge labels (networkx VF2)
    assert all(nx.is_isomorphic(p, g, node_match=NODE_MATCH) for p, g in zip(pred, graphs))
    assert model.score(X, graphs) == 0.0


def test_random_state_seeds_bandwidth_subsample():
    # more than 1000 rows: the median heuristic works on a random subsample
    X, graphs = load_demo()
    gammas = [
        BarycenterGraphPredictor(random_state=seed).fit(X[:1100], graphs[:1100]).weights_.gamma_
        for seed in (0, 1)
    ]
    assert gammas[0] != gammas[1]


# --------------------------------------------------------------------------
# bad input
# --------------------------------------------------------------------------
def test_predict_before_fit():
    est = BarycenterGraphPredictor()
    msg = "This BarycenterGraphPredictor instance is not fitted yet"
    with pytest.raises(NotFittedError, match=msg):
        est.predict([[0.0]])
    with pytest.raises(NotFittedError, match=msg):
        est.predict_barycenters([[0.0]])
    with pytest.raises(NotFittedError, match=msg):
        est.score([[0.0]], [chain(2)])


def test_nan_in_X_at_fit():
    X, graphs = toy()
    X[2, 0] = np.nan
    with pytest.raises(ValueError, match=r"X has 1 NaN or infinite value\(s\), the first at row 2, column 0; impute"):
        BarycenterGraphPredictor().fit(X, graphs)


def test_inf_in_X_at_predict():
    X, graphs = toy()
    model = BarycenterGraphPredictor(n_neighbors=1).fit(X, graphs)
    with pytest.raises(ValueError, match=r"X has 2 NaN or infinite value\(s\), the first at row 1, column 0"):
        model.predict([[0.0], [np.nan], [np.inf]])


def test_one_dimensional_X():
    _, graphs = toy()
    with pytest.raises(ValueError, match=r"X must be 2-D \(n_samples, n_features\); got 1-D with shape \(6,\)\. Reshape"):
        BarycenterGraphPredictor().fit(np.arange(6.0), graphs)


def test_non_numeric_and_empty_X():
    _, graphs = toy()
    with pytest.raises(ValueError, match=r"X must be a numeric array of shape \(n_samples, n_features\)"):
        BarycenterGraphPredictor().fit([["a"]] * 6, graphs)
    with pytest.raises(ValueError, match=r"X has no rows; pass at least one sample"):
        BarycenterGraphPredictor().fit(np.zeros((0, 2)), [])


def test_mismatched_lengths_of_X_and_graphs():
    X, graphs = toy()
    with pytest.raises(ValueError, match=r"X has 6 rows but 5 graphs were given; pass one graph per input row"):
        BarycenterGraphPredictor().fit(X, graphs[:5])


def _bad_graph(kind: str):
    if kind == "empty":
        return nx.Graph()
    if kind == "selfloop":
        g = chain(3)
        g.add_edge(1, 1, label=1)
        return g
    if kind == "directed":
        return nx.DiGraph(chain(3))
    if kind == "multigraph":
        return nx.MultiGraph(chain(3))
    if kind == "unlabeled":
        g = chain(3)
        del g.nodes[1]["label"]
        return g
    return "CCO"


@pytest.mark.parametrize(
    "kind, exc, match",
    [
        ("empty", ValueError, r"graphs\[1\] has no nodes; every graph needs at least one node"),
        ("selfloop", ValueError, r"graphs\[1\] has 1 self-loop\(s\); gwpred does not model them"),
        ("directed", TypeError, r"graphs\[1\] is directed; .*to_undirected\(\)"),
        ("multigraph", TypeError, r"graphs\[1\] is a multigraph; gwpred needs simple graphs"),
        ("unlabeled", ValueError, r"node 1 of graphs\[1\] has no 'label' attribute; every node needs one"),
        ("not a graph", TypeError, r"graphs\[1\] must be a networkx\.Graph; got str"),
    ],
)
def test_bad_training_graph(kind, exc, match):
    X, graphs = toy()
    graphs[1] = _bad_graph(kind)
    with pytest.raises(exc, match=match):
        BarycenterGraphPredictor().fit(X, graphs)


def test_wrong_number_of_columns_at_predict():
    X, graphs = toy()
    model = BarycenterGraphPredictor(n_neighbors=1).fit(np.hstack([X, X]), graphs)
    with pytest.raises(ValueError, match=r"X has 3 columns but the model was fitted with 2; use the same features"):
        model.predict(np.zeros((1, 3)))


@pytest.mark.parametrize(
    "params, match",
    [
        ({"alpha": 2}, r"alpha must be a number in \[0, 1\]; got 2\."),
        ({"alpha": "0.5"}, r"alpha must be a number in \[0, 1\]; got '0\.5'"),
        ({"n_neighbors": 0}, r"n_neighbors must be a positive integer; got 0\."),
        ({"n_neighbors": 2.5}, r"n_neighbors must be a positive integer; got 2\.5"),
        ({"n_neighbors": True}, r"n_neighbors must be a positive integer; got True"),
        ({"max_outer": 0}, r"max_outer must be a positive integer; got 0"),
        ({"max_inner": -1}, r"max_inner must be a positive integer; got -1"),
        ({"kernel": "nope"}, r"kernel must be one of \[.*'rbf'.*'precomputed', 'learned'\]; got 'nope'"),
        ({"n_nodes": 0}, r"n_nodes must be 'vote' or a positive integer; got 0\."),
        ({"n_nodes": "many"}, r"n_nodes must be 'vote' or a positive integer; got 'many'"),
        ({"decoding": "x"}, r"decoding must be one of \['anchored', 'free'\]; got 'x'"),
        ({"edges": "x"}, r"edges must be one of \['budget', 'threshold'\]; got 'x'"),
        ({"connect": "x"}, r"connect must be one of \['auto', True, False\]; got 'x'"),
        ({"weighting": "x"}, r"weighting must be one of \['ridge', 'knn'\]; got 'x'"),
        ({"handle_unknown": "x"}, r"handle_unknown must be one of \['error', 'ignore'\]; got 'x'"),
        ({"ridge": -1}, r"ridge must be a non-negative number; got -1\."),
        ({"tol": -1e-3}, r"tol must be a non-negative number; got -0\.001"),
    ],
)
def test_invalid_parameter_values(params, match):
    X, graphs = toy()
    est = BarycenterGraphPredictor(**params)  # stored without complaint
    with pytest.raises(ValueError, match=match):
        est.fit(X, graphs)


@pytest.mark.parametrize("gamma", [-1.0, float("nan"), "abc"])
def test_invalid_gamma_is_named(gamma):
    X, graphs = toy()
    with pytest.raises(ValueError, match=r"gamma"):
        BarycenterGraphPredictor(gamma=gamma).fit(X, graphs)


def test_precomputed_kernel_of_wrong_shape():
    X, graphs = toy()
    K = kernel_matrix(X, X, "rbf", 0.5)
    with pytest.raises(ValueError, match=r"with kernel='precomputed', fit needs the square training kernel matrix; got shape \(6, 5\)"):
        BarycenterGraphPredictor(kernel="precomputed").fit(K[:, :5], graphs)
    model = BarycenterGraphPredictor(kernel="precomputed", n_neighbors=1).fit(K, graphs)
    with pytest.raises(ValueError, match=r"X has 5 columns but the model was fitted with 6; .*kernel to the training items"):
        model.predict(K[:2, :5])


def _as_data(graphs):
    return [nx.node_link_data(g, edges="edges") for g in graphs]


def test_batched_barycenters_equal_one_query_at_a_time():
    # batch_size only changes how many queries share one batched solve; every prediction
    # and soft barycenter must be what the query gives alone (bitwise for the soft
    # barycenters), with plain decoding, valence repair and formulas (QM9 demo molecules)
    X, graphs = load_demo()
    fit = dict(n_neighbors=8, valence=True)
    one = BarycenterGraphPredictor(batch_size=1, **fit).fit(X[:300], graphs[:300])
    many = BarycenterGraphPredictor(batch_size=7, **fit).fit(X[:300], graphs[:300])
    queries, truth = X[300:340], graphs[300:340]
    formulas = [None if i % 3 else "".join(sorted(d["label"] for _, d in g.nodes(data=True)))
                for i, g in enumerate(truth)]
    assert _as_data(one.predict(queries)) == _as_data(many.predict(queries))
    assert _as_data(one.predict(queries, formulas)) == _as_data(many.predict(queries, formulas))
    for a, b in zip(one.predict_barycenters(queries), many.predict_barycenters(queries)):
        np.testing.assert_array_equal(a.structure, b.structure)
        np.testing.assert_array_equal(a.edge_scores, b.edge_scores)
        assert a.objective == b.objective and a.anchor == b.anchor


def test_predict_on_two_workers_equals_one():
    # the per-query steps run in joblib worker processes (outside reference: joblib/loky);
    # the predictions on QM9 spectra must not depend on where they ran
    X, graphs = load_demo()
    one = BarycenterGraphPredictor(n_neighbors=5, valence=True).fit(X[:200], graphs[:200])
    two = BarycenterGraphPredictor(n_neighbors=5, valence=True, n_jobs=2).fit(X[:200], graphs[:200])
    a, b = one.predict(X[200:212]), two.predict(X[200:212])
    assert [nx.node_link_data(g, edges="edges") for g in a] == [nx.node_link_data(g, edges="edges") for g in b]


@pytest.mark.parametrize(
    "params, exc, match",
    [
        ({"n_jobs": 0}, ValueError, r"n_jobs must be a non-zero integer \(1: no parallelism, -1: one worker per processor\); got 0\."),
        ({"progress": "yes"}, ValueError, r"progress must be bool; got 'yes'\."),
        ({"decoding": "round"}, ValueError, r"decoding must be one of \['anchored', 'free'\]; got 'round'\."),
    ],
)
def test_new_parameter_checks(params, exc, match):
    X, graphs = toy()
    with pytest.raises(exc, match=match):
        BarycenterGraphPredictor(**params).fit(X, graphs)


# --------------------------------------------------------------------------
# weight models: dense and local
# --------------------------------------------------------------------------
def test_weight_model_defaults_and_auto_choice(demo, fitted, monkeypatch):
    assert fitted.get_params()["weight_model"] == "auto" and fitted.get_params()["local_size"] == 500
    assert fitted.weight_model_ == "dense" and type(fitted.weights_).__name__ == "KernelRidgeWeights"
    Xtr, Gtr, _, _ = demo
    monkeypatch.setattr(estimator_module, "AUTO_DENSE_MAX", len(Xtr) - 1)
    above = BarycenterGraphPredictor(n_neighbors=TOP_K).fit(Xtr, Gtr)
    assert above.weight_model_ == "local" and type(above.weights_).__name__ == "LocalRidgeWeights"
    # a precomputed kernel stays dense whatever the size
    K = kernel_matrix(Xtr, Xtr, "rbf", fitted.weights_.gamma_)
    assert BarycenterGraphPredictor(kernel="precomputed", n_neighbors=TOP_K).fit(K, Gtr).weight_model_ == "dense"


def test_local_weights_match_sklearn_kernel_ridge_on_the_nearest(demo):
    # reference: scikit-learn KernelRidge on each query's M nearest training inputs (stable
    # numpy sort of sklearn's rbf_kernel), identity targets, alpha = M * ridge; then the top_k
    # clipped and normalised as documented
    Xtr, Gtr, Xte, _ = demo
    M = 40
    model = BarycenterGraphPredictor(n_neighbors=TOP_K, weight_model="local", local_size=M, random_state=0).fit(Xtr, Gtr)
    gamma = model.weights_.gamma_
    idx, w = model.neighbors(Xte)
    for row, x, i, ww in zip(rbf_kernel(Xte, Xtr, gamma=gamma), Xte, idx, w):
        near = np.sort(np.argsort(-row, kind="stable")[:M])
        coef = np.zeros(len(Xtr))
        kr = KernelRidge(alpha=M * model.ridge, kernel="rbf", gamma=gamma).fit(Xtr[near], np.eye(M))
        coef[near] = kr.predict(x[None])[0]
        order = np.argsort(-coef, kind="stable")[:TOP_K]
        keep = np.clip(coef[order], 0, None)
        assert i.tolist() == order.tolist()
        np.testing.assert_allclose(ww, keep / keep.sum(), rtol=1e-6)


def test_local_with_every_training_input_predicts_as_dense(demo, fitted, predicted):
    # with local_size >= n the local solve is the dense solve (checked against scikit-learn above)
    Xtr, Gtr, Xte, _ = demo
    local = BarycenterGraphPredictor(n_neighbors=TOP_K, weight_model="local", local_size=len(Xtr), random_state=0)
    local.fit(Xtr, Gtr)
    assert local.weight_model_ == "local"
    a, b = local.neighbors(Xte), fitted.neighbors(Xte)
    np.testing.assert_array_equal(a[0], b[0])
    np.testing.assert_allclose(a[1], b[1], rtol=1e-9)
    assert all(same_labeled_graph(p, q) for p, q in zip(local.predict(Xte), predicted))


@pytest.mark.parametrize(
    "params, match",
    [
        ({"weight_model": "sparse"}, r"weight_model must be one of \['auto', 'dense', 'local'\]; got 'sparse'\."),
        ({"weight_model": None}, r"weight_model must be one of \['auto', 'dense', 'local'\]; got None\."),
        ({"local_size": 0}, r"local_size must be a positive integer; got 0\."),
        ({"local_size": 2.5}, r"local_size must be a positive integer; got 2\.5\."),
        ({"local_size": True}, r"local_size must be a positive integer; got True\."),
        ({"batch_size": 0}, r"batch_size must be a positive integer; got 0\."),
        ({"batch_size": 8.0}, r"batch_size must be a positive integer; got 8\.0\."),
    ],
)
def test_weight_model_parameter_checks(params, match):
    X, graphs = toy()
    with pytest.raises(ValueError, match=match):
        BarycenterGraphPredictor(**params).fit(X, graphs)


def test_local_weight_model_refuses_a_precomputed_kernel():
    X, graphs = toy()
    K = kernel_matrix(X, X, "rbf", 0.5)
    est = BarycenterGraphPredictor(kernel="precomputed", weight_model="local")
    with pytest.raises(
        ValueError,
        match=r"weight_model='local' needs a kernel function to find each query's most similar training inputs; "
        r"with kernel='precomputed' use weight_model='dense' or 'auto'",
    ):
        est.fit(K, graphs)
    assert not hasattr(est, "training_")  # refused before anything was stored
    model = BarycenterGraphPredictor(kernel="precomputed", n_neighbors=1)
    assert model.fit(K, graphs).weight_model_ == "dense"


@pytest.mark.parametrize("weight_model", ["dense", "local"])
def test_inputs_unlike_every_training_input_are_refused(weight_model):
    # features 30 times too large: every RBF value exp(-gamma d^2) underflows to 0.0 (IEEE 754
    # double, the smallest subnormal is about 5e-324), so no training graph can be weighted;
    # the rows are named instead of silently predicting training graph 0
    X, graphs = load_demo()
    model = BarycenterGraphPredictor(weight_model=weight_model, local_size=50).fit(X[:300], graphs[:300])
    bad = X[300:306].copy()
    bad[[1, 4]] *= 30
    with pytest.raises(ValueError, match=r"2 input row\(s\) \(1, 4\) are unlike every training input: all their "
                                         r"kernel values are 0"):
        model.predict(bad)
    assert len(model.predict(X[300:302])) == 2


def test_inputs_whose_squares_overflow_are_refused_at_fit():
    # 1e200 squared is beyond the largest double (about 1.8e308): the kernel would be NaN
    X, graphs = load_demo()
    with pytest.raises(ValueError, match=r"the inputs hold values so large \(largest magnitude 1e\+200\) that "
                                         r"squared norms overflow"):
        BarycenterGraphPredictor().fit(X[:50] / np.abs(X[:50]).max() * 1e200, graphs[:50])


def test_predict_weighted_is_the_step_after_neighbors():
    # predict(X) == predict_weighted(*neighbors(X)), on one process and on two workers (where the
    # padded training graphs are sent once and the tasks carry only indices and weights)
    X, graphs = load_demo()
    model = BarycenterGraphPredictor(n_neighbors=6, batch_size=5).fit(X[:300], graphs[:300])
    queries = X[300:330]
    expected = _as_data(model.predict(queries))
    idx, w = model.neighbors(queries)
    assert _as_data(model.predict_weighted(idx, w)) == expected
    assert _as_data(model.set_params(n_jobs=2).predict_weighted(idx, 3 * w)) == _as_data(model.predict_weighted(idx, w))
    # a hand-picked neighbourhood: training graph 7 alone is predicted as itself (anchored decoding
    # keeps the anchor's edges unless the weighted graphs disagree; here there is nothing to disagree)
    one = model.set_params(n_jobs=1).predict_weighted([[7, 8]], [[1.0, 0.0]])[0]
    assert nx.is_isomorphic(one, graphs[7], node_match=categorical_node_match("label", None),
                            edge_match=categorical_edge_match("label", None))


@pytest.mark.parametrize(
    "indices, weights, match",
    [
        ([[0, 1]], [[0.5]], r"indices must be integers and weights numbers, both of shape \(n_queries, k\)"),
        ([[0.0, 1.0]], [[0.5, 0.5]], r"indices must be integers"),
        ([[0, 300]], [[0.5, 0.5]], r"indices must lie in 0\.\.299 \(the training graphs\)\."),
        ([[0, 1]], [[0.0, 0.0]], r"weights must be finite and non-negative with a positive entry in every row\."),
        ([[0, 1]], [[-1.0, 2.0]], r"weights must be finite and non-negative"),
    ],
)
def test_predict_weighted_errors(indices, weights, match):
    X, graphs = load_demo()
    model = BarycenterGraphPredictor(n_neighbors=3).fit(X[:300], graphs[:300])
    with pytest.raises(ValueError, match=match):
        model.predict_weighted(indices, weights)


def test_score_bounds_the_edit_distance_search(monkeypatch):
    # score() must never run an unbounded exact GED search (large pairs could take hours)
    import gwpred.model.estimator as est

    X, graphs = load_demo()
    model = BarycenterGraphPredictor(n_neighbors=3).fit(X[:100], graphs[:100])
    seen = []
    real = est.edit_distance

    def spy(*args, **kwargs):
        seen.append(kwargs.get("time_limit"))
        return real(*args, **kwargs)

    monkeypatch.setattr(est, "edit_distance", spy)
    assert model.score(X[100:103], graphs[100:103]) <= 0
    assert seen == [est.SCORE_TIME_LIMIT] * 3 and est.SCORE_TIME_LIMIT == 10.0


@pytest.mark.parametrize(
    "label, match",
    [
        (["C"], r"node 0 of graphs\[0\] has 'label' = \['C'\], a list; labels must be single values"),
        (float("nan"), r"node 0 of graphs\[0\] has a NaN 'label'; give every label a value"),
    ],
)
def test_labels_must_be_single_values(label, match):
    g = nx.path_graph(3)
    nx.set_node_attributes(g, "C", "label")
    g.nodes[0]["label"] = label
    with pytest.raises(ValueError, match=match):
        BarycenterGraphPredictor().fit(np.ones((1, 2)), [g])


def test_complex_inputs_are_refused():
    # numpy would drop the imaginary part with only a ComplexWarning
    X, graphs = load_demo()
    with pytest.raises(ValueError, match=r"X holds complex numbers; pass real features"):
        BarycenterGraphPredictor().fit(X[:20] + 1j, graphs[:20])


def test_old_parameter_names_still_work_with_a_future_warning(tmp_path):
    # One vocabulary (README "Names"): top_k= of the estimator is now n_neighbors=, k= of rank
    # and rank_candidates is now top_k=, top= of the report is now top_k=; the old names work
    # for one release, with a FutureWarning, and give the same results as the new ones.
    from gwpred import load_model, save_model
    from gwpred.report import build_report

    X, graphs = load_demo()
    new = BarycenterGraphPredictor(n_neighbors=3, random_state=0).fit(X[:80], graphs[:80])
    with pytest.warns(FutureWarning, match=r"top_k= is now called n_neighbors="):
        old = BarycenterGraphPredictor(top_k=3, random_state=0).fit(X[:80], graphs[:80])
    with pytest.warns(FutureWarning):
        assert [nx.weisfeiler_lehman_graph_hash(g, node_attr="label") for g in old.predict(X[80:84])] == [
            nx.weisfeiler_lehman_graph_hash(g, node_attr="label") for g in new.predict(X[80:84])]
    save_model(old, tmp_path / "m.npz")  # stored under the new name, as the value it stood for
    assert load_model(tmp_path / "m.npz").get_params()["n_neighbors"] == 3
    with pytest.raises(TypeError, match=r"top_k= and n_neighbors= are the same option"):
        BarycenterGraphPredictor(top_k=3, n_neighbors=4).fit(X[:80], graphs[:80])
    with pytest.warns(FutureWarning, match=r"k= is now called top_k="):
        assert new.rank(X[80:82], graphs[:10], k=2) == new.rank(X[80:82], graphs[:10], top_k=2)
    with pytest.warns(FutureWarning, match=r"top= is now called top_k="):
        build_report(graphs[:2], ranked=[graphs[:3], None], top=1, drawings=0, molecules=False)

"""scikit-learn's own estimator checks on BarycenterGraphPredictor and TemplateGraphPredictor.

Reference: scikit-learn's estimator checks, ``sklearn.utils.estimator_checks``
(``parametrize_with_checks`` and ``check_estimator`` with
``expected_failed_checks``, scikit-learn >= 1.6), and the conventions of its
developer guide ("Developing scikit-learn estimators") that those checks encode.

Three parts:

1. Every built-in check runs on three small instances (a named kernel,
   ``kernel="precomputed"``, and a small TemplateGraphPredictor).  The estimator's y is a list of networkx graphs
   and ``predict`` returns graphs, so a check that fits on numeric y cannot
   pass: those are listed with a reason in :data:`EXPECTED_FAILED_CHECKS`.
   Every other check, :data:`MUST_PASS_CHECKS`, must pass: parameters, clone,
   repr, tags, no work in ``__init__``, not-fitted errors, and the validation of
   X (1-D, complex, sparse, empty), which happens before y is looked at.
2. :func:`test_each_expected_failure_is_the_refusal_of_numeric_y` runs
   ``check_estimator`` and checks that every listed check fails *because* the
   estimator refused numeric y (its "graphs[i] must be a networkx.Graph"
   TypeError), not for some other reason hidden behind the expected failure.
3. Graph versions of the listed checks whose property matters (for
   BarycenterGraphPredictor; tests/test_templates.py has the template model's) (same
   property, named after the check they stand for), on real QM9 molecules
   from :func:`gwpred.datasets.load_demo`: a few dozen rows.
"""

from __future__ import annotations

import inspect
import pickle
import re
from functools import partial
from unittest import SkipTest

import joblib
import networkx as nx
import numpy as np
import pytest
import scipy.sparse as sp
import sklearn
from networkx.algorithms.isomorphism import categorical_edge_match, categorical_node_match
from sklearn.base import clone
from sklearn.exceptions import NotFittedError
from sklearn.metrics.pairwise import rbf_kernel
from sklearn.model_selection import cross_val_score
from sklearn.pipeline import make_pipeline
from sklearn.utils import estimator_checks
from sklearn.utils.validation import check_is_fitted

from gwpred import BarycenterGraphPredictor, TemplateGraphPredictor
from gwpred.datasets import load_demo

# The number of kept training graphs is being renamed from ``top_k`` to ``n_neighbors``
# (the old name deprecated); use whichever this version's constructor has as its own.
_PARAMS = inspect.signature(BarycenterGraphPredictor).parameters
NEIGHBOURS = "n_neighbors" if "n_neighbors" in _PARAMS else "top_k"

#: Small, fast settings for the built-in checks.
SMALL = {NEIGHBOURS: 2, "max_outer": 2}
ESTIMATORS = [
    BarycenterGraphPredictor(**SMALL),
    BarycenterGraphPredictor(kernel="precomputed", **SMALL),
    # the learned-template predictor: the same contract (its fit refuses numeric y before torch)
    TemplateGraphPredictor(n_templates=2, epochs=1),
]

_Y = "y must be a list of networkx graphs (it fits on numeric y)"
_GRAPHS_OUT = "predict returns graphs, not an array to compare"

#: Built-in checks that cannot pass, with why; "->" names the graph version below.
EXPECTED_FAILED_CHECKS: dict[str, str] = {
    "check_fit_score_takes_y": f"{_Y} -> test_fit_and_score_take_y_second",
    "check_estimators_overwrite_params": f"{_Y} -> test_fit_does_not_change_its_parameters",
    "check_dont_overwrite_parameters": f"{_Y} -> test_fit_sets_only_trailing_underscore_attributes",
    "check_estimators_fit_returns_self": f"{_Y} -> test_fit_returns_self_also_on_read_only_memmaps",
    "check_readonly_memmap_input": f"{_Y} -> test_fit_returns_self_also_on_read_only_memmaps",
    "check_n_features_in_after_fitting": f"{_Y} -> test_n_features_in_is_set_by_fit_and_checked_after",
    "check_positive_only_tag_during_fit": f"{_Y} (iris targets) -> test_negative_inputs_are_accepted",
    "check_estimators_dtypes": f"{_Y} -> test_float32_and_integer_inputs",
    "check_dtype_object": f"{_Y}; its y.astype(object) part is about class labels -> test_object_dtype_inputs",
    "check_pipeline_consistency": f"{_Y} -> test_pipeline_gives_the_same_score",
    "check_estimators_nan_inf": f"{_Y} before predicting on NaN -> test_nan_and_inf_are_refused_by_every_method",
    "check_estimators_pickle": f"{_Y}; {_GRAPHS_OUT} -> test_pickled_and_memory_mapped_models_predict_the_same",
    "check_array_api_input": f"runs only with SCIPY_ARRAY_API=1 (skipped otherwise), then {_Y}; "
                             "the estimator has no array API support",
    "check_f_contiguous_array_estimator": f"{_Y} -> test_fortran_ordered_inputs",
    "check_methods_sample_order_invariance": f"{_Y}; {_GRAPHS_OUT} -> test_predictions_do_not_depend_on_sample_order",
    "check_methods_subset_invariance": f"{_Y}; {_GRAPHS_OUT} -> test_predictions_do_not_depend_on_the_other_queries",
    "check_fit2d_1sample": f"{_Y} -> test_one_training_sample",
    "check_fit2d_1feature": f"{_Y} -> test_one_feature",
    "check_dict_unchanged": f"{_Y} -> test_predicting_leaves_the_estimator_unchanged",
    "check_fit_idempotent": f"{_Y}; {_GRAPHS_OUT} -> test_fit_is_idempotent_and_resets",
    "check_fit_check_is_fitted": f"{_Y} -> test_check_is_fitted_before_and_after_fit",
    "check_n_features_in": f"{_Y} -> test_n_features_in_is_set_by_fit_and_checked_after",
    "check_fit2d_predict1d": f"{_Y} -> test_one_dimensional_inputs_after_fit",
    # only with the pairwise tag (kernel="precomputed"): numeric y is refused before X's shape
    "check_nonsquare_error": f"{_Y}, refused before the kernel's shape -> test_precomputed_kernel_must_be_square",
}

#: Built-in checks that do not depend on y being numeric: they must pass.
MUST_PASS_CHECKS: frozenset[str] = frozenset({
    "check_estimator_cloneable",
    "check_estimator_tags_renamed",
    "check_valid_tag_types",
    "check_estimator_repr",
    "check_no_attributes_set_in_init",
    "check_estimators_unfitted",
    "check_do_not_raise_errors_in_init_or_set_params",
    "check_mixin_order",
    "check_parameters_default_constructible",
    "check_get_params_invariance",
    "check_set_params",
    "check_fit1d",  # 1-D X is refused before y is read
    "check_complex_data",  # complex X, likewise
    "check_estimators_empty_data_messages",  # X without rows or without columns, likewise
    "check_estimator_sparse_tag",  # sparse X must be refused saying "sparse"
    "check_estimator_sparse_array",
    "check_estimator_sparse_matrix",
    "check_requires_y_none",  # only with the target tag "required": fit(X, None) says y is needed
})

_HAS_EXPECTED_FAILED = "expected_failed_checks" in inspect.signature(
    estimator_checks.parametrize_with_checks
).parameters
_STRICT = (
    {"xfail_strict": True}  # a listed check that starts passing must leave the list
    if "xfail_strict" in inspect.signature(estimator_checks.parametrize_with_checks).parameters
    else {}
)
_OLD = f"scikit-learn {sklearn.__version__} has no expected_failed_checks (added in 1.6)"

_NUMERIC_Y = re.compile(r"\w+\[\d+\] must be a networkx\.Graph; got ")


def _check_name(check) -> str:
    while isinstance(check, partial) or hasattr(check, "__wrapped__"):
        check = check.func if isinstance(check, partial) else check.__wrapped__
    return check.__name__


def _refused_numeric_y(exc: BaseException | None) -> bool:
    """Whether ``exc`` (or an exception it was raised from) is the refusal of a non-graph y."""
    seen = set()
    while exc is not None and id(exc) not in seen:
        seen.add(id(exc))
        if isinstance(exc, TypeError) and _NUMERIC_Y.search(str(exc)):
            return True
        exc = exc.__cause__ or exc.__context__
    return False


def _expected_failed_checks(estimator) -> dict[str, str]:
    return EXPECTED_FAILED_CHECKS


# --------------------------------------------------------------------------
# 1. every built-in check
# --------------------------------------------------------------------------
if _HAS_EXPECTED_FAILED:

    @estimator_checks.parametrize_with_checks(
        ESTIMATORS, legacy=True, expected_failed_checks=_expected_failed_checks, **_STRICT
    )
    def test_sklearn_estimator_checks(estimator, check):
        # reference: sklearn.utils.estimator_checks (every check of the installed release)
        name = _check_name(check)
        try:
            check(estimator)
        except SkipTest:
            raise
        except Exception as exc:
            if name not in EXPECTED_FAILED_CHECKS and name not in MUST_PASS_CHECKS and _refused_numeric_y(exc):
                # a check newer than these lists: it cannot pass for the listed reason
                pytest.xfail(f"{name} (new in scikit-learn {sklearn.__version__}): {_Y}; list it here")
            raise

else:

    @pytest.mark.skip(reason=_OLD)
    def test_sklearn_estimator_checks():
        pass


def test_the_lists_name_real_checks():
    # reference: sklearn.utils.estimator_checks, where every check is a public function
    assert not set(EXPECTED_FAILED_CHECKS) & MUST_PASS_CHECKS
    unknown = [n for n in [*EXPECTED_FAILED_CHECKS, *MUST_PASS_CHECKS] if not hasattr(estimator_checks, n)]
    if unknown and _HAS_EXPECTED_FAILED:
        pytest.fail(f"not checks of scikit-learn {sklearn.__version__}: {unknown}")


@pytest.mark.skipif(not _HAS_EXPECTED_FAILED, reason=_OLD)
@pytest.mark.parametrize("estimator", ESTIMATORS, ids=["rbf", "precomputed", "templates"])
def test_each_expected_failure_is_the_refusal_of_numeric_y(estimator):
    # reference: sklearn.utils.estimator_checks.check_estimator(on_fail=None) reports every
    # check's status and exception; an expected failure must be the estimator refusing
    # numeric y, never another error hidden behind the listing, and must still fail
    results = estimator_checks.check_estimator(
        clone(estimator), legacy=True, expected_failed_checks=EXPECTED_FAILED_CHECKS, on_skip=None, on_fail=None
    )
    problems = []
    for r in results:
        name, status, exc = r["check_name"], r["status"], r["exception"]
        if name not in EXPECTED_FAILED_CHECKS or status == "skipped":
            continue  # the others are test_sklearn_estimator_checks' business
        if status == "passed":
            problems.append(f"{name} passes now: take it out of EXPECTED_FAILED_CHECKS")
        elif not _refused_numeric_y(exc):
            problems.append(f"{name} fails, but not on numeric y: {type(exc).__name__}: {exc}")
    assert not problems, "\n".join(problems)


# --------------------------------------------------------------------------
# 2. tags and y: what the estimator should declare
# --------------------------------------------------------------------------
def test_fit_and_score_take_y_second(demo):
    # check_fit_score_takes_y: fit and score take (X, y); meta-estimators and metadata
    # routing treat any other second name as metadata to route, not as the target
    Xtr, Gtr, Xq, Gq = demo
    model = small()
    assert model.fit(X=Xtr, y=Gtr) is model
    assert model.score(X=Xq, y=Gq) <= 0
    for method in (model.fit, model.score):
        assert list(inspect.signature(method).parameters)[:2] == ["X", "y"]


def test_fit_without_y_says_that_y_is_required(demo):
    # check_requires_y_none: fit(X, None) is a ValueError saying that y is needed, with one
    # of the phrases scikit-learn's check accepts
    Xtr = demo[0]
    phrases = [
        "requires y to be passed, but the target y is None",
        "Expected array-like (array or non-string sequence), got None",
        "y should be a 1d array",
    ]
    with pytest.raises(ValueError, match="|".join(map(re.escape, phrases))):
        small().fit(Xtr, None)


@pytest.mark.skipif(not hasattr(sklearn.utils, "get_tags"), reason="scikit-learn < 1.6 has no __sklearn_tags__")
def test_tags_declare_a_required_target_and_a_pairwise_precomputed_kernel():
    # scikit-learn Tags (sklearn.utils.get_tags): target_tags.required for a supervised
    # estimator; input_tags.pairwise when X is a kernel between samples, as SVC sets it for
    # kernel="precomputed" (cross-validation then splits its columns too)
    get_tags = sklearn.utils.get_tags
    assert get_tags(small()).target_tags.required
    assert not get_tags(small()).input_tags.pairwise
    assert get_tags(small(kernel="precomputed")).input_tags.pairwise


def test_cross_validation_splits_a_precomputed_kernel_like_the_features(demo):
    # scikit-learn cross-validation (sklearn.model_selection.cross_val_score): with the
    # pairwise tag a fold trains on K[train][:, train] and predicts from K[test][:, train],
    # so the scores equal those of the same RBF computed from the features; the kernel is
    # scikit-learn's rbf_kernel
    Xtr, Gtr, Xq, Gq = demo
    X, graphs = np.vstack([Xtr, Xq]), Gtr + Gq
    gamma = small().fit(X, graphs).weights_.gamma_  # the median heuristic's bandwidth, then fixed
    by_features = cross_val_score(small(gamma=gamma), X, graphs, cv=3, error_score="raise")
    by_kernel = cross_val_score(
        small(kernel="precomputed"), rbf_kernel(X, gamma=gamma), graphs, cv=3, error_score="raise"
    )
    np.testing.assert_allclose(by_kernel, by_features)


def test_precomputed_kernel_must_be_square(demo):
    # check_nonsquare_error: a pairwise estimator refuses a non-square training kernel
    Xtr, Gtr, _, _ = demo
    K = rbf_kernel(Xtr)
    with pytest.raises(ValueError, match=r"square training kernel matrix; got shape \(40, 30\)"):
        small(kernel="precomputed").fit(K[:, :30], Gtr)


# --------------------------------------------------------------------------
# 3. the listed checks' properties, with graphs as y
# --------------------------------------------------------------------------
N_TRAIN, N_QUERIES = 40, 12

NODE_MATCH = categorical_node_match("label", None)
EDGE_MATCH = categorical_edge_match("label", None)


@pytest.fixture(scope="module")
def demo():
    """The first 40 QM9 molecules of the demo set for training, the next 12 as queries."""
    X, graphs = load_demo()
    end = N_TRAIN + N_QUERIES
    return X[:N_TRAIN], graphs[:N_TRAIN], X[N_TRAIN:end], graphs[N_TRAIN:end]


def small(**params) -> BarycenterGraphPredictor:
    """Three kept graphs; batches of five queries, so that several batches are solved."""
    return BarycenterGraphPredictor(**{NEIGHBOURS: 3, "batch_size": 5, **params})


def exact(graphs: list[nx.Graph]) -> list[dict]:
    """Graphs as networkx node-link data: node order, labels and edges, for exact equality."""
    return [nx.node_link_data(g, edges="edges") for g in graphs]


def assert_labeled_graphs(pred: list, n: int) -> None:
    assert len(pred) == n
    for g in pred:
        assert isinstance(g, nx.Graph) and g.number_of_nodes() > 0
        assert all("label" in d for _, d in g.nodes(data=True))


def test_fit_does_not_change_its_parameters(demo):
    # check_estimators_overwrite_params: joblib.hash of every parameter is the same after
    # fit (a mutable one included: the valence dict)
    Xtr, Gtr, _, _ = demo
    model = small(valence={"C": 4, "N": 3, "O": 2, "F": 1}, random_state=0)
    before = {k: joblib.hash(v) for k, v in model.get_params().items()}
    model.fit(Xtr, Gtr)
    assert {k: joblib.hash(v) for k, v in model.get_params().items()} == before


def test_fit_sets_only_trailing_underscore_attributes(demo):
    # check_dont_overwrite_parameters: fit adds no public attribute without a trailing
    # underscore and leaves every public attribute the very same object
    Xtr, Gtr, _, _ = demo
    model = small()
    before = dict(vars(model))
    model.fit(Xtr, Gtr)
    public = [k for k in vars(model) if not k.startswith("_") and not k.endswith("_")]
    assert [k for k in public if k not in before] == []
    assert [k for k in public if vars(model)[k] is not before[k]] == []


@pytest.mark.parametrize("kind", ["float", "uint8 fingerprints"])
def test_fit_returns_self_also_on_read_only_memmaps(demo, tmp_path, kind):
    # check_estimators_fit_returns_self and check_readonly_memmap_input: fit returns self, also
    # on read-only memory-mapped inputs (numpy np.load(mmap_mode="r"), as joblib hands them to
    # workers), and the predictions equal those from in-memory inputs; uint8 0/1 rows are kept
    # without a copy (Tanimoto, local weights), so they are the ones that could be written to
    Xtr, Gtr, Xq, _ = demo
    params = {}
    if kind != "float":
        cut = np.median(Xtr)
        Xtr, Xq = (Xtr > cut).astype(np.uint8), (Xq > cut).astype(np.uint8)
        params = {"kernel": "tanimoto", "weight_model": "local", "local_size": 20}
    np.save(tmp_path / "train.npy", Xtr)
    np.save(tmp_path / "queries.npy", Xq)
    Xtr_ro = np.load(tmp_path / "train.npy", mmap_mode="r")
    Xq_ro = np.load(tmp_path / "queries.npy", mmap_mode="r")
    assert not Xtr_ro.flags.writeable and not Xq_ro.flags.writeable
    model = small(**params)
    assert model.fit(Xtr_ro, Gtr) is model
    assert exact(model.predict(Xq_ro)) == exact(small(**params).fit(Xtr, Gtr).predict(Xq))


def test_n_features_in_is_set_by_fit_and_checked_after(demo):
    # check_n_features_in and check_n_features_in_after_fitting: no n_features_in_ before fit,
    # the column count after, and every method taking X refuses another count with a
    # ValueError naming both
    Xtr, Gtr, Xq, Gq = demo
    model = small()
    assert not hasattr(model, "n_features_in_")
    model.fit(Xtr, Gtr)
    assert model.n_features_in_ == Xtr.shape[1] == 361
    bad = Xq[:, [1]]
    msg = r"X has 1 (columns?|features?),? but .*\b361\b"
    for call in (model.predict, model.predict_barycenters, model.neighbors,
                 lambda X: model.score(X, Gq), lambda X: model.rank(X, Gtr[:5])):
        with pytest.raises(ValueError, match=msg):
            call(bad)


def test_negative_inputs_are_accepted(demo):
    # check_positive_only_tag_during_fit: the positive_only tag is not set, so centred
    # (negative) inputs must be accepted by fit and predict
    Xtr, Gtr, Xq, _ = demo
    mean = Xtr.mean()
    assert (Xtr - mean).min() < 0
    assert_labeled_graphs(small().fit(Xtr - mean, Gtr).predict(Xq - mean), N_QUERIES)


def test_float32_and_integer_inputs(demo):
    # check_estimators_dtypes: float32, float64, int64 and int32 inputs fit and predict; integer
    # inputs are kept compact, yet give the predictions of the same values as float64 (numpy
    # converts these small integers to float64 exactly)
    Xtr, Gtr, Xq, _ = demo
    assert_labeled_graphs(small().fit(Xtr.astype(np.float32), Gtr).predict(Xq.astype(np.float32)), N_QUERIES)
    Ztr, Zq = np.round(Xtr * 100), np.round(Xq * 100)
    as_float = exact(small().fit(Ztr, Gtr).predict(Zq))
    for dtype in (np.int64, np.int32):
        assert exact(small().fit(Ztr.astype(dtype), Gtr).predict(Zq.astype(dtype))) == as_float


def test_object_dtype_inputs(demo):
    # check_dtype_object: an object array of numbers is used as numbers; an element that is
    # neither a string nor a number is a TypeError with numpy's float() message
    Xtr, Gtr, Xq, _ = demo
    as_float = exact(small().fit(Xtr, Gtr).predict(Xq))
    assert exact(small().fit(Xtr.astype(object), Gtr).predict(Xq.astype(object))) == as_float
    bad = Xtr.astype(object)
    bad[0, 0] = {"foo": "bar"}
    with pytest.raises(TypeError, match="argument must be .* string.* number"):
        small().fit(bad, Gtr)


def test_pipeline_gives_the_same_score(demo):
    # check_pipeline_consistency: make_pipeline(estimator) scores as the estimator does
    Xtr, Gtr, Xq, Gq = demo
    alone = small().fit(Xtr, Gtr).score(Xq, Gq)
    assert make_pipeline(small()).fit(Xtr, Gtr).score(Xq, Gq) == alone


@pytest.mark.parametrize("value", [np.nan, np.inf, -np.inf])
def test_nan_and_inf_are_refused_by_every_method(demo, value):
    # check_estimators_nan_inf: fit refuses NaN and inf; so do the methods of a model fitted on
    # finite inputs
    Xtr, Gtr, Xq, Gq = demo
    bad_tr, bad_q = Xtr.copy(), Xq.copy()
    bad_tr[3, 7] = bad_q[2, 5] = value
    msg = r"NaN or infinite value"
    with pytest.raises(ValueError, match=msg):
        small().fit(bad_tr, Gtr)
    model = small().fit(Xtr, Gtr)
    for call in (model.predict, model.predict_barycenters, model.neighbors, lambda X: model.rank(X, Gtr[:5])):
        with pytest.raises(ValueError, match=msg):
            call(bad_q)
    with pytest.raises(ValueError, match=msg):
        model.score(bad_q, Gq)


def test_pickled_and_memory_mapped_models_predict_the_same(demo, tmp_path):
    # check_estimators_pickle (also with readonly_memmap=True): a pickled model, and a model
    # whose arrays are read-only memory maps (joblib.dump / joblib.load(mmap_mode="r")),
    # predict exactly what the original predicts
    Xtr, Gtr, Xq, _ = demo
    model = small().fit(Xtr, Gtr)
    expected = exact(model.predict(Xq))
    assert exact(pickle.loads(pickle.dumps(model)).predict(Xq)) == expected
    joblib.dump(model, tmp_path / "model.joblib")
    mapped = joblib.load(tmp_path / "model.joblib", mmap_mode="r")
    assert exact(mapped.predict(Xq)) == expected


def test_fortran_ordered_inputs(demo):
    # check_f_contiguous_array_estimator: Fortran-ordered inputs give the predictions of C order
    Xtr, Gtr, Xq, _ = demo
    expected = exact(small().fit(Xtr, Gtr).predict(Xq))
    assert exact(small().fit(np.asfortranarray(Xtr), Gtr).predict(np.asfortranarray(Xq))) == expected


def test_predictions_do_not_depend_on_sample_order(demo):
    # check_methods_sample_order_invariance: permuting the queries permutes the predictions
    # (exactly: the same graphs, node order included), although with batches of five the
    # permuted queries are solved in other batches
    Xtr, Gtr, Xq, _ = demo
    model = small().fit(Xtr, Gtr)
    perm = np.random.RandomState(0).permutation(N_QUERIES)
    pred = exact(model.predict(Xq))
    assert exact(model.predict(Xq[perm])) == [pred[i] for i in perm]
    idx, w = model.neighbors(Xq)
    pidx, pw = model.neighbors(Xq[perm])
    np.testing.assert_array_equal(pidx, idx[perm])
    np.testing.assert_array_equal(pw, w[perm])


def test_predictions_do_not_depend_on_the_other_queries(demo):
    # check_methods_subset_invariance: predicting one row at a time gives the predictions of
    # the whole set
    Xtr, Gtr, Xq, _ = demo
    model = small().fit(Xtr, Gtr)
    one_by_one = [g for i in range(N_QUERIES) for g in model.predict(Xq[i : i + 1])]
    assert exact(one_by_one) == exact(model.predict(Xq))


def test_one_training_sample(demo):
    # check_fit2d_1sample: fitting one sample works (or says so); a barycenter of one graph with
    # weight one is that graph, so every prediction is the training graph (networkx VF2
    # isomorphism with label matching)
    Xtr, Gtr, Xq, _ = demo
    i = next(i for i, g in enumerate(Gtr) if g.number_of_nodes() >= 6 and nx.cycle_basis(g))
    pred = small().fit(Xtr[i : i + 1], Gtr[i : i + 1]).predict(Xq)
    assert all(nx.is_isomorphic(g, Gtr[i], node_match=NODE_MATCH, edge_match=EDGE_MATCH) for g in pred)


def test_one_feature(demo):
    # check_fit2d_1feature: one column fits and predicts
    Xtr, Gtr, Xq, _ = demo
    model = small().fit(Xtr[:, [100]], Gtr)
    assert model.n_features_in_ == 1
    assert_labeled_graphs(model.predict(Xq[:, [100]]), N_QUERIES)


def test_predicting_leaves_the_estimator_unchanged(demo):
    # check_dict_unchanged: no method that uses a fitted model changes its __dict__ (nor its
    # parameters)
    Xtr, Gtr, Xq, Gq = demo
    model = small().fit(Xtr, Gtr)
    before, params = dict(vars(model)), joblib.hash(model.get_params())
    model.predict(Xq)
    model.predict_barycenters(Xq)
    model.neighbors(Xq)
    model.score(Xq, Gq)
    model.rank(Xq, Gtr[:5], 2)
    assert vars(model) == before and joblib.hash(model.get_params()) == params


def test_fit_is_idempotent_and_resets(demo):
    # check_fit_idempotent: fitting twice predicts as fitting once; and, per scikit-learn's
    # developer guide, a new fit forgets the previous one (here a fit on other molecules)
    Xtr, Gtr, Xq, Gq = demo
    model = small().fit(Xtr, Gtr)
    once = exact(model.predict(Xq))
    assert exact(model.fit(Xtr, Gtr).predict(Xq)) == once
    model.fit(Xq, Gq)
    assert exact(model.fit(Xtr, Gtr).predict(Xq)) == once


def test_check_is_fitted_before_and_after_fit(demo):
    # check_fit_check_is_fitted and check_estimators_unfitted: NotFittedError before fit from
    # check_is_fitted and from every method that needs a fitted model; nothing after
    Xtr, Gtr, Xq, Gq = demo
    model = small()
    with pytest.raises(NotFittedError):
        check_is_fitted(model)
    for call in (lambda: model.predict(Xq), lambda: model.predict_barycenters(Xq),
                 lambda: model.neighbors(Xq), lambda: model.score(Xq, Gq),
                 lambda: model.rank(Xq, Gtr[:5]), lambda: model.predict_weighted([[0, 1]], [[0.5, 0.5]])):
        with pytest.raises(NotFittedError):
            call()
    check_is_fitted(model.fit(Xtr, Gtr))


def test_one_dimensional_inputs_after_fit(demo):
    # check_fit2d_predict1d: a 1-D row given to a fitted model is a ValueError that says how to
    # reshape it
    Xtr, Gtr, Xq, Gq = demo
    model = small().fit(Xtr, Gtr)
    for call in (model.predict, model.predict_barycenters, model.neighbors, lambda X: model.rank(X, Gtr[:5])):
        with pytest.raises(ValueError, match=r"2-D .*[Rr]eshape"):
            call(Xq[0])
    with pytest.raises(ValueError, match=r"2-D .*[Rr]eshape"):
        model.score(Xq[0], Gq[:1])


def test_fit_and_predict_leave_their_inputs_unchanged(demo):
    # scikit-learn developer guide: fit and predict do not modify their inputs (the property
    # behind check_sample_weights_not_overwritten); X and the graphs, node-link data included
    Xtr, Gtr, Xq, Gq = demo
    Xtr0, Xq0, Gtr0, Gq0 = Xtr.copy(), Xq.copy(), exact(Gtr), exact(Gq)
    model = small().fit(Xtr, Gtr)
    model.predict(Xq)
    model.score(Xq, Gq)
    model.rank(Xq, Gq, 2)
    np.testing.assert_array_equal(Xtr, Xtr0)
    np.testing.assert_array_equal(Xq, Xq0)
    assert exact(Gtr) == Gtr0 and exact(Gq) == Gq0


# --------------------------------------------------------------------------
# the validation of X that the built-in checks reach only before y is read
# --------------------------------------------------------------------------
def test_zero_features_are_refused(demo):
    # check_estimators_empty_data_messages: no rows, or no columns, is a ValueError; for no
    # columns, with scikit-learn's message
    Xtr, Gtr, _, _ = demo
    with pytest.raises(ValueError, match=r"X has no rows"):
        small().fit(np.empty((0, 5)), [])
    with pytest.raises(ValueError, match=r"0 feature\(s\) \(shape=\(40, 0\)\) while a minimum of 1 is required"):
        small().fit(np.empty((N_TRAIN, 0)), Gtr)


@pytest.mark.parametrize("container", [sp.csr_array, sp.csr_matrix, sp.csc_array, sp.coo_array])
def test_sparse_inputs_are_refused_saying_sparse(demo, container):
    # check_estimator_sparse_tag / _array / _matrix: the sparse tag is not set, so sparse X is
    # a TypeError or ValueError whose message says "sparse"
    Xtr, Gtr, Xq, _ = demo
    with pytest.raises((TypeError, ValueError), match="[Ss]parse"):
        small().fit(container(Xtr), Gtr)
    model = small().fit(Xtr, Gtr)
    for call in (model.predict, model.neighbors):
        with pytest.raises((TypeError, ValueError), match="[Ss]parse"):
            call(container(Xq))

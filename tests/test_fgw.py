"""Tests for gwpred.fgw: FGW distance, batched solver, barycenter, padding.

Outside references used here:

* POT (Python Optimal Transport, ``import ot``) is the general-purpose
  reference implementation of FGW: ``ot.gromov.fused_gromov_wasserstein2``
  for the distance, ``ot.gromov.fgw_barycenters`` for barycenters,
  ``ot.gromov.init_matrix`` / ``ot.gromov.gwloss`` to evaluate the objective
  at a given plan, ``ot.gromov.update_barycenter_structure`` /
  ``update_barycenter_feature`` for the closed-form barycenter updates, and
  ``ot.emd2`` for exact optimal transport (FGW with ``alpha = 0``).
* The QM9 heavy-atom graphs bundled with gwpred (``gwpred.datasets.load_demo``;
  QM9: Ramakrishnan et al., Scientific Data 1, 140022, 2014), turned into
  arrays here with networkx (``to_numpy_array``), not with gwpred's codec.
* networkx ``is_isomorphic`` with a node-label matcher for "the same graph up
  to node order".

Random graphs below are test inputs only; every expected value comes from POT,
networkx or a closed form.
"""

from __future__ import annotations

import warnings

import networkx as nx
import numpy as np
import ot
import pytest
from scipy.optimize import linear_sum_assignment

from gwpred.datasets import load_demo
from gwpred.fgw import (
    fgw_barycenter_batch,
    _cg_batch,
    feature_costs,
    fgw_barycenter,
    fgw_distance,
    fgw_to_many,
    pad_graphs,
    transport_average,
)

ELEMENTS = ["C", "N", "O", "F"]  # QM9 heavy atoms


# --------------------------------------------------------------------------
# random inputs
# --------------------------------------------------------------------------
def _structure(rng: np.random.Generator, n: int, kind: str) -> np.ndarray:
    """Binary symmetric adjacency (no loops) or weighted symmetric matrix."""
    if kind == "binary":
        A = np.triu((rng.random((n, n)) < 0.4).astype(float), 1)
        return A + A.T
    A = rng.random((n, n))
    A = (A + A.T) / 2.0
    np.fill_diagonal(A, 0.0)
    return A


def _features(rng: np.random.Generator, n: int, kind: str, d: int = 3) -> np.ndarray:
    if kind == "onehot":
        return np.eye(d)[rng.integers(0, d, n)]
    return rng.normal(size=(n, d))


def _masses(rng: np.random.Generator, n: int, uniform: bool) -> np.ndarray:
    if uniform:
        return np.full(n, 1.0 / n)
    p = rng.random(n) + 0.1
    return p / p.sum()


def _mixed_start(rng: np.random.Generator, p: np.ndarray, q: np.ndarray) -> np.ndarray:
    """A feasible, non-product plan: a convex mix of an LP vertex and p q^T.

    The vertex is POT's exact transport plan (``ot.emd``) for random costs.
    """
    vertex = ot.emd(p, q, rng.random((len(p), len(q))))
    t = rng.uniform(0.2, 1.0)
    return t * vertex + (1.0 - t) * np.outer(p, q)


def _random_pair(rng: np.random.Generator, case: int, feature_kind: str):
    n, m = (int(k) for k in rng.integers(1, 11, 2))
    kind = ("binary", "weighted")[case % 2]
    C1, C2 = _structure(rng, n, kind), _structure(rng, m, kind)
    M = feature_costs(_features(rng, n, feature_kind), _features(rng, m, feature_kind))
    uniform = case % 3 == 0
    p, q = _masses(rng, n, uniform), _masses(rng, m, uniform)
    alpha = float(rng.uniform(0.0, 1.0))
    return M, C1, C2, p, q, alpha


def _pot_fgw(M, C1, C2, p, q, alpha, G0=None):
    """POT's FGW value and plan (square loss), the reference solver."""
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        value, log = ot.gromov.fused_gromov_wasserstein2(
            M, C1, C2, p, q, loss_fun="square_loss", alpha=alpha, G0=G0, log=True
        )
    return float(value), np.asarray(log["T"])


def _pot_objective_at(M, C1, C2, p, q, alpha, T) -> float:
    """FGW objective at a fixed plan, computed with POT's own helpers."""
    constC, hC1, hC2 = ot.gromov.init_matrix(C1, C2, p, q, "square_loss")
    return float((1 - alpha) * np.sum(M * T) + alpha * ot.gromov.gwloss(constC, hC1, hC2, T))


def _assert_marginals(T, p, q, atol=1e-8):
    # POT's own tests check the coupling's marginals this way
    np.testing.assert_allclose(T.sum(axis=1), p, atol=atol)
    np.testing.assert_allclose(T.sum(axis=0), q, atol=atol)


# --------------------------------------------------------------------------
# FGW distance against POT
# --------------------------------------------------------------------------
def test_fgw_distance_matches_pot_from_same_start():
    """Reference: POT fused_gromov_wasserstein2 started from the same plan.

    400 random cases: sizes 1..10, alpha in [0, 1], binary and weighted
    structures, one-hot and continuous features, uniform and random masses.
    """
    rng = np.random.default_rng(20240611)
    mismatches, other_plans = [], 0
    for case in range(400):
        feature_kind = ("onehot", "continuous")[(case // 2) % 2]
        M, C1, C2, p, q, alpha = _random_pair(rng, case, feature_kind)
        G0 = _mixed_start(rng, p, q)
        ref_value, ref_plan = _pot_fgw(M, C1, C2, p, q, alpha, G0)
        res = fgw_distance(M, C1, C2, p, q, alpha=alpha, init_plan=G0)
        _assert_marginals(res.plan, p, q)
        _assert_marginals(ref_plan, p, q)
        assert res.plan.min() >= -1e-12
        assert res.value == pytest.approx(_pot_objective_at(M, C1, C2, p, q, alpha, res.plan), abs=1e-9)
        if abs(res.value - ref_value) > 1e-6:
            mismatches.append((case, len(p), len(q), feature_kind, alpha, res.value, ref_value))
        # an optimal face with several vertices (e.g. an all-zero structure)
        # can give another plan of the same value
        other_plans += not np.allclose(res.plan, ref_plan, atol=1e-6)
    assert mismatches == []
    assert other_plans <= 4


def test_fgw_distance_product_start_continuous_features_matches_pot():
    """Reference: POT fused_gromov_wasserstein2 with its default start (p q^T).

    Continuous features make exact ties in the linear programs a null event,
    so both solvers must follow the same path.
    """
    rng = np.random.default_rng(7)
    mismatches = []
    for case in range(150):
        M, C1, C2, p, q, alpha = _random_pair(rng, case, "continuous")
        ref_value, ref_plan = _pot_fgw(M, C1, C2, p, q, alpha)
        res = fgw_distance(M, C1, C2, p, q, alpha=alpha)
        _assert_marginals(res.plan, p, q)
        if abs(res.value - ref_value) > 1e-6:
            mismatches.append((case, res.value, ref_value))
    assert mismatches == []


def test_fgw_distance_product_start_one_hot_features_mostly_matches_pot():
    """Reference: POT fused_gromov_wasserstein2 from the product plan.

    One-hot features with the product start give linear programs with tied
    optima; the network simplex then picks a vertex that depends on the last
    bit of its inputs. gwpred rounds two quantities differently from POT 0.9.7
    (the mass rescaling ``b * (sum a / sum b)`` against POT's
    ``b * sum a / sum b`` in ``ot.emd``, and the ``q^T C2^2`` term of the
    square-loss constant, einsum against POT's dot), so a few cases in a
    thousand reach another stationary point (measured: 0 of these 300, 5 of
    1500 with other seeds).
    Both results must still be valid: feasible plans, values equal to the
    objective at the plan (evaluated with POT's gwloss).
    """
    rng = np.random.default_rng(11)
    n_cases, mismatches = 300, 0
    for case in range(n_cases):
        M, C1, C2, p, q, alpha = _random_pair(rng, case, "onehot")
        ref_value, ref_plan = _pot_fgw(M, C1, C2, p, q, alpha)
        res = fgw_distance(M, C1, C2, p, q, alpha=alpha)
        _assert_marginals(res.plan, p, q)
        assert res.value == pytest.approx(_pot_objective_at(M, C1, C2, p, q, alpha, res.plan), abs=1e-9)
        mismatches += abs(res.value - ref_value) > 1e-6
    assert mismatches <= 0.02 * n_cases


def test_fgw_distance_alpha_zero_is_exact_transport():
    """Reference: POT ot.emd2; FGW with alpha = 0 is the Wasserstein problem."""
    rng = np.random.default_rng(3)
    for case in range(40):
        M, C1, C2, p, q, _ = _random_pair(rng, case, "continuous")
        res = fgw_distance(M, C1, C2, p, q, alpha=0.0)
        assert res.value == pytest.approx(float(ot.emd2(p, q, M)), abs=1e-9)


def test_fgw_distance_identical_graph_is_zero():
    """Known answer: a graph is at FGW distance 0 from itself (identity plan)."""
    rng = np.random.default_rng(5)
    C = _structure(rng, 6, "weighted")
    F = _features(rng, 6, "continuous")
    res = fgw_distance(feature_costs(F, F), C, C, alpha=0.7, init_plan=np.eye(6) / 6)
    assert res.value == pytest.approx(0.0, abs=1e-12)
    np.testing.assert_allclose(res.plan, np.eye(6) / 6, atol=1e-12)
    assert res.converged


def test_zero_objective_stops_without_absolute_tolerance():
    """Known answer as above (FGW of a graph with itself is 0 at the identity plan): with no
    absolute tolerance, the relative test cannot pass at objective 0, yet a zero step leaves the
    plan unchanged, so the solver stops at once with the same plan instead of repeating itself
    to max_iter (the barycenter's own start graph is such a problem in every prediction)."""
    rng = np.random.default_rng(5)
    C = _structure(rng, 8, "binary")  # 0/1 entries and masses 1/8: the objective is exactly 0
    F = _features(rng, 8, "onehot")
    res = fgw_distance(feature_costs(F, F), C, C, alpha=0.7, init_plan=np.eye(8) / 8, tol_abs=0.0, max_iter=50)
    assert res.value == 0.0
    np.testing.assert_array_equal(res.plan, np.eye(8) / 8)
    assert res.converged and res.n_iter == 1


def test_cg_batch_padded_graphs_match_pot_one_by_one():
    """Reference: POT fused_gromov_wasserstein2 on each unpadded pair.

    The batched solver sees zero-mass padding columns; each problem must give
    what POT gives on the graph alone, from the same start.
    """
    rng = np.random.default_rng(17)
    n, alpha = 6, 0.6
    C1 = _structure(rng, n, "binary")
    F1 = _features(rng, n, "continuous")
    h = np.full(n, 1.0 / n)
    structures, features = [], []
    for m in (3, 8, 5, 1, 7):
        structures.append(_structure(rng, m, "weighted"))
        features.append(_features(rng, m, "continuous"))
    Cs, Fs, qs, sizes = pad_graphs(structures, features)
    M = feature_costs(F1, Fs)
    G = np.zeros_like(M)
    starts = []
    for s, k in enumerate(sizes):
        starts.append(_mixed_start(rng, h, qs[s, :k]))
        G[s, :, :k] = starts[-1]
    plans, values, _, conv = _cg_batch(M, C1, Cs, h, qs, G, alpha, 10_000, 1e-9, 1e-9, sizes)
    for s, k in enumerate(sizes):
        ref_value, ref_plan = _pot_fgw(M[s, :, :k], C1, structures[s], h, qs[s, :k], alpha, starts[s])
        assert values[s] == pytest.approx(ref_value, abs=1e-6)
        np.testing.assert_allclose(plans[s, :, :k], ref_plan, atol=1e-6)
        assert np.all(plans[s, :, k:] == 0.0)
    assert conv.all()


# --------------------------------------------------------------------------
# barycenter against POT
# --------------------------------------------------------------------------
def _graph_arrays(g: nx.Graph) -> tuple[np.ndarray, np.ndarray]:
    """Adjacency (networkx) and one-hot element features of a labeled graph."""
    nodes = sorted(g.nodes)
    A = nx.to_numpy_array(g, nodelist=nodes, weight=None)
    F = np.eye(len(ELEMENTS))[[ELEMENTS.index(g.nodes[v]["label"]) for v in nodes]]
    return A, F


def _molecule_like(rng: np.random.Generator, n: int) -> nx.Graph:
    """Random tree with degrees <= 4, sometimes one ring bond, element labels."""
    g = nx.Graph()
    g.add_node(0)
    for v in range(1, n):
        free = [u for u in g.nodes if g.degree(u) < 4]
        g.add_edge(int(rng.choice(free)), v)
    if n >= 5 and rng.random() < 0.5:
        u, v = (int(x) for x in rng.choice(n, 2, replace=False))
        if g.degree(u) < 4 and g.degree(v) < 4:
            g.add_edge(u, v)
    # element frequencies as counted in the bundled QM9 demo graphs (C 72%, O 16%, N 11%, F <1%)
    labels = rng.choice(4, n, p=[0.72, 0.11, 0.16, 0.01])
    for v in g.nodes:
        g.nodes[v]["label"] = ELEMENTS[labels[v]]
    return g


def _weighted_median(values: np.ndarray, weights: np.ndarray) -> int:
    """Smallest value whose cumulative weight reaches half the total (common practice)."""
    order = np.argsort(values, kind="stable")
    cum = np.cumsum(weights[order])
    return int(values[order][np.searchsorted(cum, 0.5 * cum[-1] - 1e-12)])


def _common_objective(C, F, Cs, Fs, w, alpha, plan_sets) -> float:
    """sum_s w_s FGW(barycenter, graph s), judged by POT for every barycenter.

    Each term is the best of POT's fused_gromov_wasserstein2 started from the
    product plan and from each given set of plans (ours and POT's), so both
    barycenters get exactly the same chances.
    """
    n = C.shape[0]
    h = np.full(n, 1.0 / n)
    total = 0.0
    for s, (Cs_s, Fs_s) in enumerate(zip(Cs, Fs)):
        q = np.full(len(Cs_s), 1.0 / len(Cs_s))
        M = feature_costs(F, Fs_s)
        best = min(_pot_fgw(M, C, Cs_s, h, q, alpha, G0)[0] for G0 in [None] + [ps[s] for ps in plan_sets])
        total += w[s] * best
    return total


def _barycenter_case(rng: np.random.Generator, graphs: list[nx.Graph], alpha: float) -> dict:
    Cs, Fs = (list(t) for t in zip(*[_graph_arrays(g) for g in graphs]))
    S = len(Cs)
    w = rng.dirichlet(np.full(S, 0.5))
    sizes = np.array([len(c) for c in Cs])
    n = _weighted_median(sizes, w)
    j = max((i for i in range(S) if sizes[i] == n), key=lambda i: w[i])
    ours = fgw_barycenter(Cs, Fs, w, Cs[j], Fs[j], alpha=alpha)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        X_pot, C_pot, log = ot.gromov.fgw_barycenters(
            n, Fs, Cs, None, list(w), alpha=alpha, init_C=Cs[j].copy(), init_X=Fs[j].copy(), log=True
        )
    plan_sets = [[ours.plans[s][:, : sizes[s]] for s in range(S)], [np.asarray(T) for T in log["T"]]]
    # POT again on the same problem with the nodes of every input (and of the
    # start graph) listed in another order: a relabelled copy, same optimum.
    perms = [np.random.default_rng(7 + s).permutation(len(c)) for s, c in enumerate(Cs)]
    Cs_p = [c[np.ix_(o, o)] for c, o in zip(Cs, perms)]
    Fs_p = [f[o] for f, o in zip(Fs, perms)]
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        X_rel, C_rel, log_rel = ot.gromov.fgw_barycenters(
            n, Fs_p, Cs_p, None, list(w), alpha=alpha, init_C=Cs_p[j].copy(), init_X=Fs_p[j].copy(), log=True
        )
    pot_sets = [plan_sets[1], [np.asarray(T)[:, np.argsort(o)] for T, o in zip(log_rel["T"], perms)]]
    return {
        "ours": _common_objective(ours.structure, ours.features, Cs, Fs, w, alpha, plan_sets),
        "pot": _common_objective(C_pot, X_pot, Cs, Fs, w, alpha, plan_sets),
        # POT relabelled / POT, both judged with the same two plan sets
        "pot_self": _common_objective(C_rel, X_rel, Cs, Fs, w, alpha, pot_sets)
        / _common_objective(C_pot, X_pot, Cs, Fs, w, alpha, pot_sets),
        "result": ours,
    }


@pytest.fixture(scope="module")
def qm9_graphs() -> list[nx.Graph]:
    _, graphs = load_demo(grid=[1000.0])  # one grid point: the spectra are not needed
    return [g for g in graphs if 5 <= g.number_of_nodes() <= 9]


@pytest.fixture(scope="module")
def barycenter_cases(qm9_graphs) -> dict[str, list[dict]]:
    """Ours vs POT fgw_barycenters on the same weights, sizes and start graph."""
    rng = np.random.default_rng(2024)
    cases: dict[str, list[dict]] = {"random": [], "qm9": []}
    for i in range(30):
        graphs = [_molecule_like(rng, int(rng.integers(5, 10))) for _ in range(10)]
        cases["random"].append(_barycenter_case(rng, graphs, (0.5, 0.9)[i % 2]))
    for i in range(16):
        idx = rng.choice(len(qm9_graphs), 10, replace=False)
        cases["qm9"].append(_barycenter_case(rng, [qm9_graphs[k] for k in idx], (0.5, 0.9)[i % 2]))
    return cases


@pytest.mark.parametrize("source", ["random", "qm9"])
def test_barycenter_objective_comparable_to_pot(barycenter_cases, source):
    """Reference: POT fgw_barycenters, judged by one common evaluator (POT's FGW).

    gwpred warm-starts its plans across outer iterations and, in its first
    two iterations after the first, also restarts them from the product plan
    (keeping the better); POT restarts every inner solve from the product
    plan. Both are local descents of a non-convex objective, so either can
    win. On the cases here (package defaults: restarts=2, max_inner=10,
    tol_inner=1e-5): random graphs mean ratio 0.992, 4 of 30 worse by more
    than 1% (worst +6.5%); QM9 graphs mean 0.994, 7 of 16 worse by more than
    1% (worst +8.4%). The bounds are a regression guard on the mean and median.
    """
    ratios = np.array([c["ours"] / c["pot"] for c in barycenter_cases[source]])
    mean_bound, median_bound = {"random": (1.01, 1.01), "qm9": (1.01, 1.01)}[source]
    assert ratios.mean() <= mean_bound, ratios.round(4).tolist()
    assert np.median(ratios) <= median_bound, ratios.round(4).tolist()
    assert np.any(ratios < 1.0)  # and sometimes better than POT


@pytest.mark.xfail(
    strict=True,
    raises=AssertionError,
    reason=(
        "target not met: gwpred's barycenter objective is better than POT's on "
        "average but more than 1% above it in 4 of 30 random and 7 of 16 QM9 "
        "cases (worst +8.4%); both are local descents of a non-convex objective, "
        "and POT misses the same target against itself on relabelled inputs "
        "(test_barycenter_spread_around_pot_within_pots_own)"
    ),
)
@pytest.mark.parametrize("source", ["random", "qm9"])
def test_barycenter_objective_never_1pct_worse_than_pot(barycenter_cases, source):
    """Target: our objective <= 1.01 x POT's in every case (reference: POT)."""
    ratios = np.array([c["ours"] / c["pot"] for c in barycenter_cases[source]])
    worse = ratios > 1.01
    assert not worse.any(), (f"{worse.sum()} of {len(ratios)} worse by >1%, worst {ratios.max():.4f}, "
                             f"mean {ratios.mean():.4f}")


@pytest.mark.parametrize("source", ["random", "qm9"])
def test_barycenter_spread_around_pot_within_pots_own(barycenter_cases, source):
    """Reference: POT fgw_barycenters against itself on relabelled inputs.

    Listing the nodes of every input graph (and of the start graph) in
    another order leaves the barycenter problem unchanged, yet POT's own
    local descent then ends more than 1% above its first answer in 10 of 30
    random and 6 of 16 QM9 cases here (worst +19.2% and +26.8%, mean
    +0.4% and +0.5%; ties between equal-cost plans send it into other
    basins), while gwpred is more than 1% above POT in 4 and 7 cases (worst
    +6.5% and +8.4%, mean -0.8% and -0.7%). The "never more than 1%
    worse than POT" target above is therefore not met by POT itself. What
    is checked: the worst ratio of gwpred to POT does not exceed the worst
    ratio of POT-relabelled to POT on the same cases.
    """
    ours = np.array([c["ours"] / c["pot"] for c in barycenter_cases[source]])
    self_ratio = np.array([c["pot_self"] for c in barycenter_cases[source]])
    assert (self_ratio > 1.01).any(), self_ratio.round(4).tolist()
    assert ours.max() <= self_ratio.max(), (ours.max(), self_ratio.max())


@pytest.mark.parametrize("source", ["random", "qm9"])
def test_barycenter_descent_is_monotone_and_consistent(barycenter_cases, source):
    """Block coordinate descent with warm starts never increases the objective.

    The objective POT finds for our final barycenter (starting from our plans)
    cannot exceed our last recorded objective: the closed-form update is
    optimal for fixed plans and the solver only descends.
    """
    for c in barycenter_cases[source]:
        hist = np.array(c["result"].history)
        assert np.all(np.diff(hist) <= 1e-12 * max(1.0, hist[0]))
        assert c["result"].objective == hist[-1]
        assert c["ours"] <= c["result"].objective + 1e-9


# --------------------------------------------------------------------------
# barycenter: closed form, known answers, invariants
# --------------------------------------------------------------------------
def _random_inputs(rng, S=6, d=3, feature_kind="onehot"):
    structures, features = [], []
    for _ in range(S):
        m = int(rng.integers(3, 9))
        structures.append(_structure(rng, m, "binary"))
        features.append(_features(rng, m, feature_kind, d))
    return structures, features, rng.dirichlet(np.ones(S))


@pytest.mark.parametrize("alpha", [0.0, 0.5, 0.9, 1.0])
def test_barycenter_layers_agree_with_pot_updates(alpha):
    """Reference: POT update_barycenter_structure / update_barycenter_feature.

    Rebuilding the barycenter from the returned plans with POT's closed-form
    updates gives back the returned structure and features (as in POT's own
    barycenter tests, the layers must agree).
    """
    rng = np.random.default_rng(31)
    structures, features, w = _random_inputs(rng, feature_kind="continuous")
    n = 5
    h = np.full(n, 1.0 / n)
    res = fgw_barycenter(
        structures, features, w, _structure(rng, n, "binary"), _features(rng, n, "continuous"), alpha=alpha
    )
    Ts = [res.plans[s][:, : len(c)] for s, c in enumerate(structures)]
    C_ref = ot.gromov.update_barycenter_structure(Ts, structures, list(w), h, "square_loss", target=False)
    F_ref = ot.gromov.update_barycenter_feature(Ts, features, list(w), h, "square_loss", target=False)
    np.testing.assert_allclose(res.structure, C_ref, atol=1e-12)
    np.testing.assert_allclose(res.features, F_ref, atol=1e-12)
    for T, c in zip(Ts, structures):
        _assert_marginals(T, h, np.full(len(c), 1.0 / len(c)))


def test_barycenter_one_hot_weights_identity_start_gives_the_graph(qm9_graphs):
    """Known answer: all weight on one graph, started on it, plan = identity.

    The barycenter is exactly that graph (QM9 graphs from the demo data).
    """
    rng = np.random.default_rng(41)
    for _ in range(10):
        idx = rng.choice(len(qm9_graphs), 5, replace=False)
        Cs, Fs = (list(t) for t in zip(*[_graph_arrays(qm9_graphs[k]) for k in idx]))
        j = int(rng.integers(5))
        w = np.eye(5)[j]
        n, m = len(Cs[j]), max(len(c) for c in Cs)
        h = np.full(n, 1.0 / n)
        T0 = np.zeros((5, n, m))
        for s, c in enumerate(Cs):
            T0[s, :, : len(c)] = np.outer(h, np.full(len(c), 1.0 / len(c)))
        T0[j] = 0.0
        T0[j, :, :n] = np.eye(n) / n
        for alpha in (0.5, 0.9):
            res = fgw_barycenter(Cs, Fs, w, Cs[j], Fs[j], alpha=alpha, init_plans=T0)
            np.testing.assert_allclose(res.structure, Cs[j], atol=1e-12)
            np.testing.assert_allclose(res.features, Fs[j], atol=1e-12)
            assert res.objective == pytest.approx(0.0, abs=1e-12)


def _as_graph(C: np.ndarray, F: np.ndarray) -> nx.Graph:
    g = nx.from_numpy_array(np.round(C))
    for v in g.nodes:
        g.nodes[v]["label"] = int(np.argmax(F[v]))
    return g


@pytest.mark.parametrize("init_plans", ["features", None])
def test_barycenter_one_hot_weights_gives_the_graph_up_to_node_order(qm9_graphs, init_plans):
    """Known answer (up to node order, checked with networkx is_isomorphic).

    Without the identity plan the first inner solve can stop in a blurred
    local minimum even though the start graph is the answer (measured on QM9
    graphs: 9 of 600 runs from the feature-matching start, 5 of 600 from the
    product start), so up to 3 misses in 40 runs are allowed; a miss always
    shows as a positive objective.
    """
    rng = np.random.default_rng(43)
    misses = 0
    for _ in range(20):
        idx = rng.choice(len(qm9_graphs), 5, replace=False)
        Cs, Fs = (list(t) for t in zip(*[_graph_arrays(qm9_graphs[k]) for k in idx]))
        j = int(rng.integers(5))
        for alpha in (0.5, 0.9):
            res = fgw_barycenter(Cs, Fs, np.eye(5)[j], Cs[j], Fs[j], alpha=alpha, init_plans=init_plans)
            exact = np.allclose(res.structure, np.round(res.structure), atol=1e-9) and np.allclose(
                res.features, np.round(res.features), atol=1e-9
            )
            same = exact and nx.is_isomorphic(
                _as_graph(res.structure, res.features),
                _as_graph(Cs[j], Fs[j]),
                node_match=lambda a, b: a["label"] == b["label"],
            )
            if same:
                assert res.objective == pytest.approx(0.0, abs=1e-12)
            else:
                misses += 1
                assert res.objective > 1e-6
    assert misses <= 3


@pytest.mark.parametrize("feature_kind", ["onehot", "continuous"])
def test_barycenter_invariants(feature_kind):
    """Structure symmetric; feature rows convex combinations of input rows.

    Common practice: with weights on the simplex and plans with barycenter
    marginal h, F_i = sum_s w_s sum_j T_sij F_sj / h_i is a convex combination.
    """
    rng = np.random.default_rng(53)
    for _ in range(10):
        structures, features, w = _random_inputs(rng, feature_kind=feature_kind)
        n = int(rng.integers(2, 8))
        res = fgw_barycenter(
            structures, features, w, _structure(rng, n, "binary"), _features(rng, n, feature_kind),
            alpha=float(rng.uniform(0.1, 0.9)),
        )
        np.testing.assert_allclose(res.structure, res.structure.T, atol=1e-12)
        assert res.structure.min() >= -1e-12 and res.structure.max() <= 1 + 1e-12
        allF = np.vstack(features)
        assert np.all(res.features >= allF.min(axis=0) - 1e-12)
        assert np.all(res.features <= allF.max(axis=0) + 1e-12)
        if feature_kind == "onehot":
            np.testing.assert_allclose(res.features.sum(axis=1), 1.0, atol=1e-12)
            assert res.features.min() >= -1e-12


def test_barycenter_fixed_parts_stay_fixed():
    rng = np.random.default_rng(59)
    structures, features, w = _random_inputs(rng)
    C0, F0 = _structure(rng, 4, "binary"), _features(rng, 4, "onehot")
    res = fgw_barycenter(structures, features, w, C0, F0, fixed_structure=True)
    np.testing.assert_array_equal(res.structure, C0)
    res = fgw_barycenter(structures, features, w, C0, F0, fixed_features=True)
    np.testing.assert_array_equal(res.features, F0)


# --------------------------------------------------------------------------
# transport_average and pad_graphs
# --------------------------------------------------------------------------
def test_transport_average_matches_direct_loop():
    """Reference: an explicit loop over graphs, pairs and channels."""
    rng = np.random.default_rng(61)
    S, n, m, L = 3, 4, 5, 2
    T = rng.random((S, n, m))
    E = rng.random((S, m, m, L))
    w = np.array([0.2, 0.5, 0.3]) * 2.0  # unnormalised on purpose
    h = rng.random(n) + 0.1
    out = transport_average(T, E, w, h)
    ref = np.zeros((n, n, L))
    wn = w / w.sum()
    for s in range(S):
        for c in range(L):
            for i in range(n):
                for k in range(n):
                    ref[i, k, c] += wn[s] * sum(
                        T[s, i, j] * E[s, j, l, c] * T[s, k, l] for j in range(m) for l in range(m)
                    )
    ref /= np.outer(h, h)[:, :, None]
    np.testing.assert_allclose(out, ref, rtol=1e-12)


def test_transport_average_single_channel_equals_structure_update():
    rng = np.random.default_rng(67)
    structures, features, w = _random_inputs(rng)
    res = fgw_barycenter(structures, features, w, _structure(rng, 4, "binary"), _features(rng, 4, "onehot"))
    Cs, _, _, _ = pad_graphs(structures, features)
    out = transport_average(res.plans, Cs[..., None], w, np.full(4, 0.25))
    np.testing.assert_allclose(out[..., 0], res.structure, atol=1e-12)


def test_pad_graphs_output():
    C1 = np.array([[0.0]])
    C2 = np.array([[0.0, 1.0, 0.0], [1.0, 0.0, 1.0], [0.0, 1.0, 0.0]])
    F1 = np.array([[1.0, 0.0]])
    F2 = np.array([[0.0, 1.0], [1.0, 0.0], [1.0, 1.0]])
    C, F, q, sizes = pad_graphs([C1, C2], [F1, F2])
    assert C.shape == (2, 3, 3) and F.shape == (2, 3, 2) and q.shape == (2, 3)
    assert sizes.tolist() == [1, 3]
    np.testing.assert_array_equal(C[0], [[0, 0, 0], [0, 0, 0], [0, 0, 0]])
    np.testing.assert_array_equal(C[1], C2)
    np.testing.assert_array_equal(F[0], [[1, 0], [0, 0], [0, 0]])
    np.testing.assert_array_equal(F[1], F2)
    np.testing.assert_allclose(q, [[1.0, 0.0, 0.0], [1 / 3, 1 / 3, 1 / 3]])
    _, _, q, _ = pad_graphs([C1, C2], [F1, F2], masses=[[1.0], [0.5, 0.25, 0.25]])
    np.testing.assert_allclose(q, [[1.0, 0.0, 0.0], [0.5, 0.25, 0.25]])


def test_feature_costs_match_pot_dist():
    """Reference: POT ot.dist (squared Euclidean by default)."""
    rng = np.random.default_rng(71)
    F1, F2 = rng.normal(size=(4, 3)), rng.normal(size=(6, 3))
    np.testing.assert_allclose(feature_costs(F1, F2), ot.dist(F1, F2), atol=1e-12)


# --------------------------------------------------------------------------
# errors
# --------------------------------------------------------------------------
C2x2 = np.array([[0.0, 1.0], [1.0, 0.0]])
F2x2 = np.eye(2)
NAN2 = np.array([[0.0, np.nan], [1.0, 0.0]])
INF2 = np.array([[np.inf, 0.0], [0.0, 1.0]])


@pytest.mark.parametrize(
    ("kwargs", "match"),
    [
        (dict(C1=np.zeros((2, 3))), r"C1 and C2 must be square; got shapes \(2, 3\) and \(2, 2\)"),
        (dict(M=np.zeros((2, 3))), r"M must have shape \(2, 2\) \(len\(C1\), len\(C2\)\); got \(2, 3\)"),
        (dict(p=np.ones(3) / 3), r"p and q must have shapes \(2,\) and \(2,\); got \(3,\) and \(2,\)"),
        (dict(M=np.array([[0.0, np.nan], [0.0, 0.0]])), "M contains NaN or infinite values"),
        (dict(C1=np.array([[0.0, np.inf], [1.0, 0.0]])), "C1 contains NaN or infinite values"),
        (dict(C2=np.array([[0.0, np.nan], [1.0, 0.0]])), "C2 contains NaN or infinite values"),
        (dict(p=np.array([np.nan, 0.5])), "p contains NaN or infinite values"),
        (dict(q=np.array([0.5, np.inf])), "q contains NaN or infinite values"),
        (dict(p=np.array([0.7, 0.7])), r"p and q must be non-negative with equal sums; got sums 1.4 and 1.0"),
        (dict(q=np.array([1.5, -0.5])), "p and q must be non-negative with equal sums"),
        (dict(alpha=1.5), r"alpha must lie in \[0, 1\]; got 1.5"),
        (dict(alpha=-0.1), r"alpha must lie in \[0, 1\]; got -0.1"),
        (dict(init_plan=np.ones((3, 2))), r"init_plan must have shape \(2, 2\); got \(3, 2\)"),
    ],
)
def test_fgw_distance_errors(kwargs, match):
    args = dict(M=np.zeros((2, 2)), C1=C2x2, C2=C2x2, p=None, q=None)
    call = {k: kwargs.pop(k, v) for k, v in args.items()}
    with pytest.raises(ValueError, match=match):
        fgw_distance(call["M"], call["C1"], call["C2"], call["p"], call["q"], **kwargs)


def test_pad_graphs_errors():
    msg = "need one feature array per structure and at least one graph; got 0 structures and 0"
    with pytest.raises(ValueError, match=msg):
        pad_graphs([], [])
    with pytest.raises(ValueError, match="got 2 structures and 1 feature arrays"):
        pad_graphs([C2x2, C2x2], [F2x2])


@pytest.mark.parametrize(
    ("kwargs", "match"),
    [
        (dict(weights=[1.0]), "weights has 1 entries but 2 graphs were given"),
        (
            dict(weights=[1.0, -1.0]),
            r"weights must be finite, non-negative and not all zero; got \[1.0, -1.0\]",
        ),
        (dict(weights=[0.0, 0.0]), "Clip or renormalise kernel weights first"),
        (dict(weights=[np.nan, 1.0]), "weights must be finite"),
        (dict(alpha=2.0), r"alpha must lie in \[0, 1\]; got 2.0"),
        (
            dict(init_structure=np.zeros((2, 3))),
            r"init_structure must be \(n, n\) and init_features \(n, 2\); got \(2, 3\) and \(2, 2\)",
        ),
        (dict(init_features=np.zeros((2, 3))), r"init_structure must be \(n, n\) and init_features \(n, 2\)"),
        (dict(structures=[C2x2, NAN2]), "structures contains NaN or infinite values"),
        (dict(features=[F2x2, INF2]), "features contains NaN or infinite values"),
        (dict(init_structure=NAN2), "init_structure contains NaN or infinite values"),
        (dict(init_features=INF2), "init_features contains NaN or infinite values"),
        (dict(init_plans="uniform"), r"must be 'product', 'features', None or an array; got 'uniform'"),
        (dict(init_plans=np.zeros((2, 2))), r"init_plans must have shape \(2, 2, 2\); got \(2, 2\)"),
    ],
)
def test_fgw_barycenter_errors(kwargs, match):
    call = dict(
        structures=[C2x2, C2x2], features=[F2x2, F2x2], weights=[0.5, 0.5],
        init_structure=C2x2, init_features=F2x2,
    )
    call.update(kwargs)
    with pytest.raises(ValueError, match=match):
        fgw_barycenter(**call)


# Inputs that are accepted today and give a silent wrong answer (negative
# "distances", plans off the marginals). The rules ask for a clear error.
def test_fgw_distance_rejects_init_plan_off_the_marginals():
    # today: value -2.0 with plan marginals [2, 2]
    with pytest.raises(ValueError, match="init_plan"):
        fgw_distance(np.zeros((2, 2)), C2x2, C2x2, init_plan=np.ones((2, 2)))


def test_fgw_barycenter_rejects_masses_with_wrong_sum():
    # today: structure [[8, 8], [8, 8]] for two copies of one edge
    with pytest.raises(ValueError, match="masses"):
        fgw_barycenter([C2x2, C2x2], [F2x2, F2x2], [0.5, 0.5], C2x2, F2x2, masses=[[2.0, 2.0], [2.0, 2.0]])


def test_fgw_barycenter_rejects_bary_masses_with_wrong_sum():
    # today: objective -0.5
    with pytest.raises(ValueError, match="bary_masses"):
        fgw_barycenter([C2x2, C2x2], [F2x2, F2x2], [0.5, 0.5], C2x2, F2x2, bary_masses=[1.0, 1.0])


def test_input_shape_errors_name_the_argument():
    """Bad shapes get a ValueError naming the argument, not numpy's broadcast error."""
    with pytest.raises(ValueError, match="C1 and C2 must be square matrices"):
        fgw_distance(np.zeros((1, 1)), np.float64(0.0), C2x2)
    with pytest.raises(ValueError, match="same d"):
        feature_costs(np.ones((2, 3)), np.ones((2, 2)))
    with pytest.raises(ValueError, match="non-empty square matrix"):
        pad_graphs([np.zeros((2, 3))], [np.ones((2, 1))])
    with pytest.raises(ValueError, match=r"features\[s\] must have shape"):
        pad_graphs([C2x2, C2x2], [np.ones((2, 1)), np.ones((3, 1))])
    with pytest.raises(ValueError, match="masses needs one array per graph"):
        pad_graphs([C2x2], [F2x2], masses=[[0.5, 0.5], [0.5, 0.5]])
    with pytest.raises(ValueError, match="init_plans must be a coupling"):
        fgw_barycenter([C2x2], [F2x2], [1.0], C2x2, F2x2, init_plans=np.ones((1, 2, 2)))
    with pytest.raises(ValueError, match="init_from=5 must index an input graph"):
        fgw_barycenter([C2x2], [F2x2], [1.0], C2x2, F2x2, init_from=5)


def test_fgw_to_many_matches_pot_from_the_product_plan():
    """Reference: POT fused_gromov_wasserstein2, started from the same product plan.

    Continuous features make the linear programs free of ties, so the batched
    solve must give POT's values graph by graph.
    """
    rng = np.random.default_rng(7)
    C = _structure(rng, 5, "binary")
    F = _features(rng, 5, "continuous", 3)
    Cs = [_structure(rng, m, "binary") for m in (3, 5, 7)]
    Fs = [_features(rng, len(c), "continuous", 3) for c in Cs]
    values, plans = fgw_to_many(C, F, Cs, Fs, alpha=0.6, init_plans="product", max_iter=10_000, tol=1e-9)
    for v, Cs_, Fs_, T in zip(values, Cs, Fs, plans):
        ref = ot.gromov.fused_gromov_wasserstein2(
            feature_costs(F, Fs_), C, Cs_, ot.unif(5), ot.unif(len(Cs_)), alpha=0.6
        )
        assert v == pytest.approx(float(ref), abs=1e-6)
        _assert_marginals(T[:, : len(Cs_)], ot.unif(5), ot.unif(len(Cs_)))


# --------------------------------------------------------------------------- many barycenters at once


def _batch_inputs(rng, qm9_graphs, n_queries: int):
    """Per query: 10 QM9 graphs, Dirichlet weights, a start graph of the weighted-median size."""
    queries = []
    for _ in range(n_queries):
        idx = rng.choice(len(qm9_graphs), 10, replace=False)
        Cs, Fs = (list(t) for t in zip(*[_graph_arrays(qm9_graphs[k]) for k in idx]))
        w = rng.dirichlet(np.full(10, 0.5))
        sizes = np.array([len(c) for c in Cs])
        n = _weighted_median(sizes, w)
        j = max((i for i in range(10) if sizes[i] == n), key=lambda i: w[i])
        queries.append((Cs, Fs, w, j))
    return queries


@pytest.mark.parametrize("restarts, init_plans", [(0, "features"), (2, "product")])
def test_batch_equals_one_barycenter_at_a_time(qm9_graphs, restarts, init_plans):
    # fgw_barycenter_batch must give, for each barycenter, exactly what fgw_barycenter gives for
    # it alone (same arithmetic, array for array); the one-at-a-time solver is itself checked
    # against POT's fgw_barycenters above.
    rng = np.random.default_rng(11)
    queries = _batch_inputs(rng, qm9_graphs, 30)
    # one batch holds barycenters of one size n whose inputs pad to one size m: take n = m = 9
    queries = [q for q in queries if len(q[0][q[3]]) == 9 and max(len(c) for c in q[0]) == 9][:12]
    assert len(queries) >= 5
    alone = [
        fgw_barycenter(Cs, Fs, w, Cs[j], Fs[j], alpha=0.9, init_plans=init_plans, init_from=j,
                       restarts=restarts, max_outer=5, max_inner=100, tol_outer=1e-6, tol_inner=1e-6)
        for Cs, Fs, w, j in queries
    ]
    C, F, q, sizes = pad_graphs([c for Cs, *_ in queries for c in Cs], [f for _, Fs, *_ in queries for f in Fs])
    owner = np.repeat(np.arange(len(queries)), 10)
    res = fgw_barycenter_batch(
        C, F, q, owner, np.concatenate([w for *_, w, _ in queries]),
        np.stack([Cs[j] for Cs, _, _, j in queries]), np.stack([Fs[j] for _, Fs, _, j in queries]),
        sizes=sizes, alpha=0.9, init_plans=init_plans, init_from=[10 * i + j for i, (*_, j) in enumerate(queries)],
        restarts=restarts, max_outer=5, max_inner=100, tol_outer=1e-6, tol_inner=1e-6,
    )
    for i, one in enumerate(alone):
        np.testing.assert_array_equal(res.structures[i], one.structure)
        np.testing.assert_array_equal(res.features[i], one.features)
        np.testing.assert_array_equal(res.plans[10 * i : 10 * i + 10, :, : one.plans.shape[2]], one.plans)
        assert res.objectives[i] == one.objective and res.n_outer[i] == one.n_outer
        assert bool(res.converged[i]) == one.converged


def test_batch_barycenters_stop_on_their_own():
    # a barycenter whose inputs all equal its start stops after two outer iterations (no
    # decrease), whatever the others in its batch do
    rng = np.random.default_rng(3)
    C = _structure(rng, 5, "sym")
    F = _features(rng, 5, "onehot")
    others = [_structure(rng, 5, "sym") for _ in range(3)]
    Cs = np.stack([C, C, *others])
    Fs = np.stack([F, F, *[_features(rng, 5, "onehot") for _ in range(3)]])
    res = fgw_barycenter_batch(Cs, Fs, np.full((5, 5), 0.2), [0, 0, 1, 1, 1], np.ones(5),
                               np.stack([C, others[0]]), np.stack([F, Fs[2]]), alpha=0.5, max_outer=8)
    assert res.n_outer[0] == 2 and res.converged[0]
    np.testing.assert_allclose(res.structures[0], C, atol=1e-12)
    assert np.isnan(res.history[2:, 0]).all() and np.isfinite(res.history[: res.n_outer[1], 1]).all()


@pytest.mark.parametrize(
    "change, match",
    [
        ({"owner": [0, 1, 0]}, r"owner must be sorted and name every barycenter 0\.\.1"),
        ({"owner": [0, 0, 2]}, r"owner must be sorted and name every barycenter"),
        ({"weights": [1.0, 1.0, 0.0]}, r"barycenter 1 has only zero weights"),
        ({"weights": [1.0, np.nan, 1.0]}, r"weights must hold 3 finite, non-negative values"),
        ({"masses": np.full((3, 2), 0.4)}, r"each row must sum to one"),
        ({"init_from": [1, 0]}, r"init_from must give, per barycenter, -1 or one of its own input graphs"),
        ({"init_plans": "identity"}, r"init_plans must be 'product', 'features' or None"),
        ({"init_features": np.ones((2, 2, 3))}, r"init_features \(Q, n, 2\)"),
    ],
)
def test_batch_errors(change, match):
    C = np.array([[0.0, 1.0], [1.0, 0.0]])
    F = np.eye(2)
    kwargs = dict(structures=[C, C, C], features=[F, F, F], masses=np.full((3, 2), 0.5), owner=[0, 0, 1],
                  weights=[1.0, 1.0, 1.0], init_structures=[C, C], init_features=[F, F])
    kwargs.update(change)
    with pytest.raises(ValueError, match=match):
        fgw_barycenter_batch(**kwargs)


# --------------------------------------------------------------------------
# transport="assignment": square uniform steps solved by scipy's assignment solver
# --------------------------------------------------------------------------
def test_assignment_steps_are_optimal_transport_plans(qm9_graphs):
    # Reference: POT's exact transport value ot.emd2 on the same linearised cost. A square
    # problem with uniform masses has a permutation among its optimal plans (Birkhoff-von
    # Neumann theorem, textbook linear programming), so scipy's assignment must reach emd2's
    # value, ties included: QM9 structures give many equal costs.
    rng = np.random.default_rng(5)
    checked = 0
    for _ in range(60):
        a, b = rng.choice(len(qm9_graphs), 2, replace=False)
        (C1, F1), (C2, F2) = _graph_arrays(qm9_graphs[a]), _graph_arrays(qm9_graphs[b])
        if len(C1) != len(C2):
            continue
        n = len(C1)
        p = np.full(n, 1.0 / n)
        M = feature_costs(F1, F2)
        G0 = ot.emd(p, p, rng.random((n, n)))  # a permutation plan, as warm starts often are
        constC = ot.gromov.init_matrix(C1, C2, p, p, "square_loss")[0]
        grad = 0.1 * M + 1.8 * (constC - 2.0 * C1 @ G0 @ C2)  # the solver's gradient at alpha 0.9
        rows, cols = linear_sum_assignment(grad)
        assert grad[rows, cols].sum() / n == pytest.approx(ot.emd2(p, p, grad), abs=1e-12)
        # the whole solve: a coupling whose objective, evaluated by POT, is the value returned
        T, value, _, _ = _cg_batch(M[None], C1, C2[None], p, p[None], G0[None], 0.9, 100, 1e-9, 0.0,
                                   None, "assignment")
        _assert_marginals(T[0], p, p)
        assert _pot_objective_at(M, C1, C2, p, p, 0.9, T[0]) == pytest.approx(float(value[0]), abs=1e-12)
        checked += 1
    assert checked >= 5


@pytest.mark.parametrize("alpha", [0.5, 0.9])
def test_assignment_and_simplex_barycenters_agree_without_ties(alpha):
    # Reference: the network-simplex path (POT's ot.emd for every step). With continuous random
    # structures and features, ties between transport plans have probability zero, so both
    # solvers take the same steps and the barycenters agree to rounding.
    rng = np.random.default_rng(17)
    for _ in range(5):
        n = int(rng.integers(3, 9))
        Cs = [_structure(rng, n, "weighted") for _ in range(4)]
        Fs = [_features(rng, n, "normal") for _ in range(4)]
        w = rng.dirichlet(np.ones(4))
        a = fgw_barycenter(Cs, Fs, w, Cs[0], Fs[0], alpha=alpha, transport="assignment")
        b = fgw_barycenter(Cs, Fs, w, Cs[0], Fs[0], alpha=alpha, transport="simplex")
        np.testing.assert_allclose(a.structure, b.structure, atol=1e-9)
        np.testing.assert_allclose(a.features, b.features, atol=1e-9)
        assert a.objective == pytest.approx(b.objective, abs=1e-10)


def test_unknown_transport_is_refused():
    C = np.array([[0.0, 1.0], [1.0, 0.0]])
    with pytest.raises(ValueError, match=r"transport must be one of \['assignment', 'simplex'\]"):
        fgw_barycenter([C], [np.eye(2)], [1.0], C, np.eye(2), transport="hungarian")

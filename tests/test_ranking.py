"""Tests for gwpred.ranking and BarycenterGraphPredictor.rank (candidate ranking).

Outside references used here:

- networkx ``weisfeiler_lehman_subgraph_hashes`` (with node and edge labels,
  initial labels included): the Weisfeiler-Lehman subtree patterns of each
  node; the WL subtree kernel is the inner product of pattern counts,
  normalised k(g, h) / sqrt(k(g, g) k(h, h)) (Shervashidze et al., JMLR 12,
  2011).  The reference for the ``kernel`` scorer, computed pair by pair.
- RDKit: Morgan fingerprints (``rdFingerprintGenerator.GetMorganGenerator``,
  radius 2, 2048 bits) of the QM9 SMILES and ``DataStructs.BulkTanimotoSimilarity``,
  the reference for the fingerprint output kernel.
- POT: ``ot.gromov.fused_gromov_wasserstein2`` (FGW value and plan) and
  ``ot.gromov.init_matrix`` / ``ot.gromov.gwloss`` (the square-loss structure
  term at a given plan), the reference for the FGW scorers.
- networkx ``is_isomorphic`` with label matchers: a renumbered candidate is the
  same labeled graph.
- QM9 molecules bundled with gwpred (``gwpred.datasets.load_demo``, from the
  QM9 data of the PyPI package qm9pack): training graphs and candidates.

Toy graphs (chains) feed only error paths; random arrays are test inputs
whose expected values come from POT.
"""

from __future__ import annotations

import json
import warnings
from collections import Counter

import networkx as nx
import numpy as np
import ot
import pytest
from networkx.algorithms.isomorphism import (
    categorical_edge_match,
    categorical_node_match,
)
from sklearn.base import clone
from sklearn.exceptions import NotFittedError

from gwpred import BarycenterGraphPredictor
from gwpred.cli import main
from gwpred.datasets import load_demo
from gwpred.io import write_ranked
from gwpred.ranking import (
    CandidateLibrary,
    fgw_candidate_values,
    prepare_candidates,
)

N_TRAIN = 300
QUERIES = slice(300, 303)
CANDIDATES = range(303, 333)
SAME = {
    "node_match": categorical_node_match("label", None),
    "edge_match": categorical_edge_match("label", None),
}


@pytest.fixture(scope="module")
def demo():
    X, graphs, smiles = load_demo(return_smiles=True)
    return X, graphs, smiles


@pytest.fixture(scope="module")
def model(demo):
    X, graphs, _ = demo
    return BarycenterGraphPredictor(n_neighbors=3, random_state=0).fit(X[:N_TRAIN], graphs[:N_TRAIN])


@pytest.fixture(scope="module")
def cands(demo):
    return [demo[1][i] for i in CANDIDATES]


def chain(n: int, label: str = "C") -> nx.Graph:
    g = nx.path_graph(n)
    nx.set_node_attributes(g, label, "label")
    return g


def renumbered(g: nx.Graph, seed: int) -> nx.Graph:
    """The same labeled graph with shuffled node names and insertion order."""
    rng = np.random.default_rng(seed)
    names = rng.permutation(len(g)) + 100
    mapping = dict(zip(g.nodes, names.tolist()))
    h = nx.Graph()
    nodes = list(g.nodes(data=True))
    for k in rng.permutation(len(nodes)):
        v, d = nodes[k]
        h.add_node(mapping[v], **d)
    edges = list(g.edges(data=True))
    for k in rng.permutation(len(edges)):
        u, v, d = edges[k]
        h.add_edge(mapping[v], mapping[u], **d)
    return h


def as_dict(row: list[tuple[int, float]]) -> dict[int, float]:
    return dict(row)


# --------------------------------------------------------------------------
# kernel scorer against direct, unbatched references
# --------------------------------------------------------------------------
def _wl_counts(g: nx.Graph, iterations: int = 3) -> Counter:
    # networkx's WL subtree hashes, round by round (round 0 = the labels)
    hashes = nx.weisfeiler_lehman_subgraph_hashes(
        g, node_attr="label", edge_attr="label", iterations=iterations, include_initial_labels=True
    )
    return Counter((t, h) for per_node in hashes.values() for t, h in enumerate(per_node))


def _wl_kernel(a: Counter, b: Counter) -> float:
    dot = sum(a[f] * b[f] for f in a.keys() & b.keys())
    return dot / np.sqrt(sum(v * v for v in a.values()) * sum(v * v for v in b.values()))


def test_kernel_scorer_matches_networkx_wl_pair_by_pair(demo, model, cands):
    X, graphs, _ = demo
    ranked = model.rank(X[QUERIES], cands, top_k=len(cands), scorer="kernel")
    softs = model.predict_barycenters(X[QUERIES])  # public neighbours and weights
    cand_counts = [_wl_counts(c) for c in cands]
    for row, soft in zip(ranked, softs):
        got = as_dict(row)
        assert sorted(got) == list(range(len(cands)))
        for j, cc in enumerate(cand_counts):
            ref = sum(w * _wl_kernel(_wl_counts(graphs[i]), cc) for i, w in zip(soft.neighbors, soft.weights))
            assert got[j] == pytest.approx(ref, abs=1e-9)
        scores = [s for _, s in row]
        assert scores == sorted(scores, reverse=True)  # higher is better


def test_fingerprint_kernel_matches_rdkit_tanimoto(demo, model, cands):
    pytest.importorskip("rdkit")
    from rdkit import Chem, DataStructs
    from rdkit.Chem import rdFingerprintGenerator

    X, _, smiles = demo
    gen = rdFingerprintGenerator.GetMorganGenerator(radius=2, fpSize=2048)

    def fp(i: int):
        return gen.GetFingerprint(Chem.MolFromSmiles(smiles[i]))

    ranked = model.rank(X[QUERIES], cands, top_k=len(cands), output_kernel="fingerprint")
    softs = model.predict_barycenters(X[QUERIES])
    cand_fps = [fp(i) for i in CANDIDATES]
    for row, soft in zip(ranked, softs):
        ref = np.zeros(len(cands))
        for i, w in zip(soft.neighbors, soft.weights):
            ref += w * np.array(DataStructs.BulkTanimotoSimilarity(fp(int(i)), cand_fps))
        got = as_dict(row)
        np.testing.assert_allclose([got[j] for j in range(len(cands))], ref, atol=1e-9)


# --------------------------------------------------------------------------
# FGW values against POT
# --------------------------------------------------------------------------
def _pot(M, C1, C2, alpha, G0):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        value, log = ot.gromov.fused_gromov_wasserstein2(
            M,
            C1,
            C2,
            ot.unif(len(C1)),
            ot.unif(len(C2)),
            loss_fun="square_loss",
            alpha=alpha,
            G0=G0,
            log=True,
        )
    return float(value), np.asarray(log["T"])


def _channels_at(A, B, T):
    """Square-loss structure term summed over edge-label channels, with POT's helpers."""
    p, q = T.sum(1), T.sum(0)
    total = 0.0
    for a, b in zip(np.moveaxis(A, 2, 0), np.moveaxis(B, 2, 0)):
        constC, hC1, hC2 = ot.gromov.init_matrix(a, b, p, q, "square_loss")
        total += float(ot.gromov.gwloss(constC, hC1, hC2, T))
    return total


def _random_graph(rng, n, d, n_channels):
    C = np.triu((rng.random((n, n)) < 0.4).astype(float), 1)
    C = C + C.T
    F = rng.normal(size=(n, d))  # continuous features: no ties in the linear programs
    E = np.zeros((n, n, n_channels))
    lab = rng.integers(0, n_channels, (n, n))
    lab = np.triu(lab, 1) + np.triu(lab, 1).T
    for i, j in zip(*np.nonzero(C)):
        E[i, j, lab[i, j]] = 1.0
    return C, F, E


@pytest.mark.parametrize("n_channels", [1, 3])
def test_fgw_candidate_values_match_pot(n_channels):
    """One channel: POT's FGW value from the product plan.  Several: the channel
    objective evaluated with POT at POT's plan (the plan comes from the adjacency)."""
    rng = np.random.default_rng(11)
    C, F, E = _random_graph(rng, 5, 3, n_channels)
    others = [_random_graph(rng, m, 3, n_channels) for m in (3, 5, 7, 4)]
    got = fgw_candidate_values(
        C,
        F,
        E,
        [o[0] for o in others],
        [o[1] for o in others],
        [o[2] for o in others],
        alpha=0.6,
        starts=("product",),
        max_iter=10_000,
    )
    for value, (C2, F2, E2) in zip(got, others):
        M = ot.dist(F, F2)  # squared Euclidean
        ref, T = _pot(M, C, C2, 0.6, np.outer(ot.unif(len(C)), ot.unif(len(C2))))
        if n_channels == 1:
            assert value == pytest.approx(ref, abs=1e-6)
        ref = 0.4 * float((M * T).sum()) + 0.6 * _channels_at(E, E2, T)
        assert value == pytest.approx(ref, abs=1e-6)


def test_fgw_candidate_values_keep_the_better_start():
    rng = np.random.default_rng(5)
    C, F, E = _random_graph(rng, 6, 2, 1)
    others = [_random_graph(rng, m, 2, 1) for m in (4, 6, 8)]
    args = (C, F, E, [o[0] for o in others], [o[1] for o in others], [o[2] for o in others])
    both = fgw_candidate_values(*args, alpha=0.5, max_iter=10_000)
    for value, (C2, F2, _) in zip(both, others):
        M = ot.dist(F, F2)
        product, _ = _pot(M, C, C2, 0.5, np.outer(ot.unif(len(C)), ot.unif(len(C2))))
        matched, _ = _pot(M, C, C2, 0.5, ot.emd(ot.unif(len(C)), ot.unif(len(C2)), M))
        assert value == pytest.approx(min(product, matched), abs=1e-6)


# --------------------------------------------------------------------------
# node order, ties
# --------------------------------------------------------------------------
@pytest.mark.parametrize(
    "scorer, output_kernel",
    [("kernel", "wl"), ("kernel", "fingerprint"), ("fgw", "wl"), ("objective", "wl")],
)
def test_scores_do_not_change_when_candidate_nodes_are_renumbered(demo, model, cands, scorer, output_kernel):
    if output_kernel == "fingerprint":
        pytest.importorskip("rdkit")
    X = demo[0]
    base = cands[:12]
    shuffled = [renumbered(g, seed) for seed, g in enumerate(base)]
    for g, h in zip(base, shuffled):
        assert nx.is_isomorphic(g, h, **SAME)  # networkx: same labeled graph
        assert list(g.nodes) != list(h.nodes)
    pool = base + shuffled
    ranked = model.rank(X[QUERIES], pool, top_k=len(pool), scorer=scorer, output_kernel=output_kernel)
    for row in ranked:
        got = as_dict(row)
        for j in range(len(base)):
            assert got[j] == got[j + len(base)]
        # equal scores: the lower index comes first, and right before its copy
        order = [j for j, _ in row]
        for j in range(len(base)):
            assert order.index(j) < order.index(j + len(base))


def test_canonical_arrays_of_every_demo_molecule_survive_renumbering(demo, model):
    from gwpred.ranking import fgw_arrays
    from gwpred.wl import LabelIds, graph_ids

    space = LabelIds.of(model.labels_)
    graphs = list(demo[1])
    pytest.importorskip("rdkit")
    from gwpred.chem import graph_from_smiles

    # a QM9 molecule whose ring and chain CH2 groups colour refinement cannot tell apart
    graphs.append(graph_from_smiles("C(CC1CC1)C1CC1"))
    for seed, g in enumerate(graphs):
        h = renumbered(g, seed)
        a = fgw_arrays(graph_ids(g, space, "g"), space.n_node, space.n_edge)
        b = fgw_arrays(graph_ids(h, space, "h"), space.n_node, space.n_edge)
        for x, y in ((a.structure, b.structure), (a.features, b.features), (a.channels, b.channels)):
            assert np.array_equal(x, y), seed


def test_ties_are_broken_by_candidate_index_and_runs_repeat(demo, model, cands):
    X = demo[0]
    a, b = cands[0], cands[1]
    pool = [b, a, b, a, a]  # copies score alike
    first = model.rank(X[QUERIES], pool, top_k=5)
    assert first == model.rank(X[QUERIES], pool, top_k=5)
    for row in first:
        scores = as_dict(row)
        assert scores[1] == scores[3] == scores[4] and scores[0] == scores[2]
        order = [j for j, _ in row]
        assert [j for j in order if j in (1, 3, 4)] == [1, 3, 4]
        assert [j for j in order if j in (0, 2)] == [0, 2]


def test_lower_is_better_for_fgw_scorers(demo, model, cands):
    X = demo[0]
    for scorer in ("fgw", "objective"):
        row = model.rank(X[QUERIES][:1], cands[:10], top_k=10, scorer=scorer)[0]
        scores = [s for _, s in row]
        assert scores == sorted(scores)
        assert all(s >= 0 for s in scores)


# --------------------------------------------------------------------------
# candidate sets and filters
# --------------------------------------------------------------------------
def test_per_input_lists_report_positions_in_each_list(demo, model, cands):
    X = demo[0]
    shared = model.rank(X[QUERIES], cands[:10], top_k=10)
    lists = [cands[:10], cands[:10][::-1], cands[5:10]]
    ranked = model.rank(X[QUERIES], lists, top_k=10)
    assert ranked[0] == shared[0]
    flipped = {9 - j: s for j, s in shared[1]}
    assert as_dict(ranked[1]) == pytest.approx(flipped)
    assert sorted(j for j, _ in ranked[2]) == list(range(5))
    assert as_dict(ranked[2]) == pytest.approx({j - 5: s for j, s in shared[2] if j >= 5})


def test_formula_size_and_index_filters(demo, model, cands):
    X = demo[0]
    heavy = [Counter(d["label"] for _, d in g.nodes(data=True)) for g in cands]
    target = heavy[0]
    formula = "".join(f"{el}{n}" for el, n in sorted(target.items()))
    n0 = cands[0].number_of_nodes()
    ranked = model.rank(X[QUERIES], cands, top_k=100, filter=[formula, n0, [3, 1, 3]])
    assert sorted(j for j, _ in ranked[0]) == [j for j, h in enumerate(heavy) if h == target]
    assert sorted(j for j, _ in ranked[1]) == [j for j, g in enumerate(cands) if len(g) == n0]
    assert sorted(j for j, _ in ranked[2]) == [1, 3]
    # hydrogens are not compared: the same heavy atoms with any hydrogen count
    with_h = model.rank(X[QUERIES][:1], cands, top_k=100, filter=[formula + "H99"])
    assert with_h[0] == ranked[0]
    # None and "" leave a row unfiltered
    assert len(model.rank(X[QUERIES][:2], cands, top_k=100, filter=[None, ""])[1]) == len(cands)


def test_k_longer_than_the_set_returns_all(demo, model, cands):
    ranked = model.rank(demo[0][QUERIES], cands[:4], top_k=50)
    assert all(len(row) == 4 for row in ranked)


def test_library_encodes_each_candidate_once(demo, model, cands, monkeypatch):
    from gwpred import wl

    calls = Counter()
    original = wl.graph_ids

    def counting(graph, space, where):
        calls[where] += 1
        return original(graph, space, where)

    monkeypatch.setattr(wl, "graph_ids", counting)
    library = CandidateLibrary(cands[:8])
    X = demo[0][QUERIES]
    for _ in range(2):
        model.rank(X, library, top_k=3)
        model.rank(X, library, top_k=3, scorer="fgw")
    assert calls and max(calls.values()) == 2  # once for WL, once for FGW arrays
    prepare_candidates(model, library, scorer="objective")
    assert max(calls.values()) == 2


# --------------------------------------------------------------------------
# labels unseen in training
# --------------------------------------------------------------------------
def _relabel(g: nx.Graph, node_label: str, edge_label=None) -> nx.Graph:
    h = g.copy()
    nx.set_node_attributes(h, node_label, "label")
    if edge_label is not None:
        nx.set_edge_attributes(h, edge_label, "label")
    return h


def test_unseen_labels_are_ranked_and_never_match(demo, model, cands):
    assert model.handle_unknown == "error"  # ranking does not refuse them
    assert "S" not in model.labels_.node_labels_
    X = demo[0][QUERIES]
    g = next(c for c in cands if c.number_of_nodes() >= 3)
    one_s = g.copy()
    first = next(iter(one_s.nodes))
    one_s.nodes[first]["label"] = "S"
    alien = _relabel(g, "S", edge_label=7)
    pool = [g, one_s, alien]
    softs = model.predict_barycenters(X)
    graphs = demo[1]
    for scorer in ("kernel", "fgw", "objective"):
        got = [as_dict(r) for r in model.rank(X, pool, top_k=3, scorer=scorer)]
        for s, soft in zip(got, softs):
            if scorer == "kernel":
                # networkx's WL treats "S" as one more label, which no training graph has
                for j, c in enumerate(pool):
                    ref = sum(
                        w * _wl_kernel(_wl_counts(graphs[i]), _wl_counts(c))
                        for i, w in zip(soft.neighbors, soft.weights)
                    )
                    assert s[j] == pytest.approx(ref, abs=1e-9)
                assert s[1] <= s[0]
                assert s[2] == 0.0  # no WL pattern shared with any training graph
            else:  # scored; FGW values are local optima, so only the all-unseen copy is clearly worse
                assert np.isfinite(s[1]) and s[2] > max(s[0], s[1])


def test_unseen_label_is_one_more_category_pot(demo, model):
    """Single-node candidates: the plan is forced, so the FGW value is POT's exactly.
    The unseen label is one more one-hot category (documented), so it costs at
    least as much as any known label."""
    X = demo[0][QUERIES][:1]
    soft = model.predict_barycenters(X)[0]
    k = model.labels_.n_node_labels
    Fb = np.concatenate([soft.node_scores[:, :k], np.zeros((len(soft.node_scores), 1))], 1)
    n = len(Fb)
    known = model.labels_.node_labels_[-1]
    got = as_dict(model.rank(X, [chain(1, "S"), chain(1, known)], top_k=2, scorer="fgw")[0])
    assert got[0] >= got[1]
    for j, column in ((0, k), (1, k - 1)):
        f = np.zeros((1, k + 1))
        f[0, column] = 1.0
        M = ot.dist(Fb, f)
        T = np.full((n, 1), 1.0 / n)
        ref = (1 - model.alpha) * float((M * T).sum()) + model.alpha * _channels_at(
            soft.edge_scores, np.zeros((1, 1, soft.edge_scores.shape[2])), T
        )
        assert got[j] == pytest.approx(ref, abs=1e-9)


# --------------------------------------------------------------------------
# errors
# --------------------------------------------------------------------------
def test_empty_candidate_sets_give_a_clear_message(demo, model, cands):
    X = demo[0][QUERIES]
    with pytest.raises(ValueError, match="candidates is empty: there is nothing to rank"):
        model.rank(X, [])
    with pytest.raises(ValueError, match=r"no candidates to rank for 1 input row\(s\): row 1 \(empty list\)"):
        model.rank(X, [cands[:2], [], cands[:1]])
    with pytest.raises(
        ValueError, match=r"row 0 \(filter formula Cl9 \(heavy atoms\) keeps none of 30\).*loosen the filter"
    ):
        model.rank(X, cands, filter=["Cl9", None, None])
    with pytest.raises(ValueError, match=r"row 2 \(filter 99 nodes keeps none of 30\)"):
        model.rank(X, cands, filter=[None, None, 99])


@pytest.mark.parametrize(
    "kwargs, error, message",
    [
        (
            {"scorer": "best"},
            ValueError,
            r"scorer must be one of \['kernel', 'fgw', 'objective'\]; got 'best'",
        ),
        ({"output_kernel": "rbf"}, ValueError, r"output_kernel must be one of \['wl', 'fingerprint'\]"),
        ({"top_k": 0}, ValueError, r"top_k must be an integer >= 1; got 0"),
        ({"top_k": 2.5}, ValueError, r"top_k must be an integer >= 1; got 2.5"),
        ({"filter": "C4O2"}, TypeError, r"filter must be a list with one entry per input row"),
        ({"filter": [None]}, ValueError, r"filter has 1 entries but X has 3 rows"),
        (
            {"filter": [None, None, [0, 40]]},
            ValueError,
            r"filter\[2\] holds candidate index 40, outside 0..29",
        ),
        ({"filter": [None, None, [0.5]]}, TypeError, r"filter\[2\] must be a formula \(str\), a node count"),
        ({"filter": [None, None, "C4+-"]}, ValueError, r"filter\[2\]: formula 'C4\+-': cannot read"),  # one net charge at most
    ],
)
def test_bad_arguments(demo, model, cands, kwargs, error, message):
    with pytest.raises(error, match=message):
        model.rank(demo[0][QUERIES], cands, **kwargs)


def test_bad_candidates(demo, model, cands):
    X = demo[0][QUERIES]
    with pytest.raises(TypeError, match="not a single graph"):
        model.rank(X, cands[0])
    with pytest.raises(TypeError, match=r"candidates\[1\]\[0\] is a str; expected a networkx graph"):
        model.rank(X, [cands[:1], ["CCO"], cands[:1]])
    with pytest.raises(ValueError, match="candidates holds 2 lists but X has 3 rows"):
        model.rank(X, [cands[:1], cands[:2]])
    with pytest.raises(TypeError, match=r"candidates\[1\] is a str; candidates must be networkx graphs"):
        CandidateLibrary([cands[0], "CCO"])
    unlabeled = nx.path_graph(3)
    with pytest.raises(ValueError, match=r"node 0 of candidates\[1\] has no 'label' attribute"):
        model.rank(X, [cands[0], unlabeled])
    with pytest.raises(ValueError, match=r"candidates\[0\] has no nodes"):
        model.rank(X, [nx.Graph()])
    with pytest.raises(TypeError, match="candidates must be a list of networkx graphs shared by all inputs"):
        model.rank(X, "graphs.jsonl")


def test_rank_needs_a_fitted_model(cands):
    with pytest.raises(NotFittedError):
        BarycenterGraphPredictor().rank([[0.0]], cands)


def test_prepare_candidates_checks_names(model, cands):
    with pytest.raises(ValueError, match="scorer must be one of"):
        prepare_candidates(model, CandidateLibrary(cands), scorer="best")
    with pytest.raises(ValueError, match="output_kernel must be one of"):
        prepare_candidates(model, CandidateLibrary(cands), output_kernel="rbf")


# --------------------------------------------------------------------------
# ranked-list files and the command line
# --------------------------------------------------------------------------
def _read_ranked(path):
    rows = [json.loads(line) for line in path.read_text(encoding="utf-8").splitlines() if line.strip()]
    for r in rows:
        for item in r["ranked"]:
            item["graph"] = nx.node_link_graph(item["graph"], edges="edges")
    return rows


def test_write_ranked_per_input_lists(tmp_path, demo, model, cands):
    lists = [cands[:3], cands[3:8], cands[8:9]]
    ranked = model.rank(demo[0][QUERIES], lists, top_k=2)
    write_ranked(tmp_path / "r.jsonl", ranked, lists)
    rows = _read_ranked(tmp_path / "r.jsonl")
    assert [r["row"] for r in rows] == [0, 1, 2]
    for r, row, pool in zip(rows, ranked, lists):
        assert [(it["candidate"], it["score"]) for it in r["ranked"]] == [(j, s) for j, s in row]
        for it in r["ranked"]:
            assert nx.is_isomorphic(it["graph"], pool[it["candidate"]], **SAME)
    with pytest.raises(ValueError, match=r"give a .jsonl path; got '.*r.txt'"):
        write_ranked(tmp_path / "r.txt", ranked, lists)


@pytest.fixture(scope="module")
def cli_files(tmp_path_factory, demo, model):
    from gwpred import save_model
    from gwpred.io import write_features, write_graphs

    X, graphs, _ = demo
    d = tmp_path_factory.mktemp("rank")
    save_model(model, d / "model.npz")
    write_features(d / "x.csv", X[QUERIES])
    write_graphs(d / "cands.jsonl", [graphs[i] for i in CANDIDATES])
    return d


def test_cli_rank_writes_the_documented_json_lines(capsys, cli_files, demo, model, cands):
    d = cli_files
    code = main(
        [
            "rank",
            "--model",
            str(d / "model.npz"),
            "--features",
            str(d / "x.csv"),
            "--candidates",
            str(d / "cands.jsonl"),
            "--out",
            str(d / "ranked.jsonl"),
            "--top-k",
            "4",
            "-q",
        ]
    )
    out, err = capsys.readouterr()
    assert code == 0, err
    assert "ranked 30 candidates for 3 inputs" in out and "the best 4 per input written to" in out
    assert "hypotheses" in err  # the caution on stderr
    rows = _read_ranked(d / "ranked.jsonl")
    expected = model.rank(demo[0][QUERIES], cands, top_k=4)
    assert [[(it["candidate"], it["score"]) for it in r["ranked"]] for r in rows] == [
        [(j, pytest.approx(s, abs=1e-12)) for j, s in row] for row in expected
    ]
    for r in rows:
        for it in r["ranked"]:
            assert nx.is_isomorphic(it["graph"], cands[it["candidate"]], **SAME)


def test_cli_rank_with_formulas_and_scorer(capsys, cli_files, demo, cands):
    d = cli_files
    heavy = Counter(dd["label"] for _, dd in cands[0].nodes(data=True))
    formula = "".join(f"{el}{n}" for el, n in sorted(heavy.items()))
    (d / "f.txt").write_text(f"{formula}\n\n{formula}H4\n")
    code = main(
        [
            "rank",
            "--model",
            str(d / "model.npz"),
            "--features",
            str(d / "x.csv"),
            "--candidates",
            str(d / "cands.jsonl"),
            "--out",
            str(d / "f.jsonl"),
            "--formulas",
            str(d / "f.txt"),
            "--scorer",
            "fgw",
            "-q",
        ]
    )
    out, err = capsys.readouterr()
    assert code == 0, err
    rows = _read_ranked(d / "f.jsonl")
    same = {j for j, g in enumerate(cands) if Counter(dd["label"] for _, dd in g.nodes(data=True)) == heavy}
    assert {it["candidate"] for it in rows[0]["ranked"]} == same
    assert len(rows[1]["ranked"]) == 10
    # the message counts what each row really ranked after the formula filter (row 1 has none)
    assert f"ranked {len(same)} to {len(cands)} candidates per input (of {len(cands)}; formula filter)" in out


@pytest.mark.parametrize(
    "extra, message",
    [
        (["--top-k", "0"], "--top-k must be at least 1; got 0"),
        (["--out", "ranked.csv"], "--out must name a JSON Lines file ending in .jsonl"),
        (["--formulas", "one.txt"], "holds 1 formulas but"),
    ],
)
def test_cli_rank_errors(capsys, cli_files, extra, message):
    d = cli_files
    (d / "one.txt").write_text("C2\n")
    argv = [
        "rank",
        "--model",
        str(d / "model.npz"),
        "--features",
        str(d / "x.csv"),
        "--candidates",
        str(d / "cands.jsonl"),
        "--out",
        str(d / "e.jsonl"),
        "-q",
    ]
    for opt, val in zip(extra[::2], extra[1::2]):
        val = str(d / val) if opt in ("--out", "--formulas") else val
        if opt in argv:
            argv[argv.index(opt) + 1] = val
        else:
            argv += [opt, val]
    assert main(argv) == 2
    assert message in capsys.readouterr().err


def test_cli_compare_small_run(capsys, tmp_path):
    out = tmp_path / "cmp"
    code = main(
        [
            "compare",
            "--n-train",
            "200",
            "--n-test",
            "4",
            "--fgw-rows",
            "2",
            "--scorer",
            "kernel",
            "fgw",
            "--out",
            str(out),
            "--n-neighbors",
            "3",
            "-q",
        ]
    )
    text, err = capsys.readouterr()
    assert code == 0, err
    for name in ("comparison.txt", "comparison.json", "comparison.png"):
        assert (out / name).stat().st_size > 0
    summary = json.loads((out / "comparison.json").read_text())
    methods = {(r["method"], r["setting"]) for r in summary["results"]}
    for m in ("generation", "generation + formula", "1-NN retrieval", "rank: kernel (wl)", "rank: fgw"):
        assert (m, "in") in methods and (m, "out") in methods
    fgw = next(r for r in summary["results"] if r["method"] == "rank: fgw")
    assert fgw["n"] == 2
    assert "true graph removed" in text and "hypotheses" in err  # the caution on stderr
    # the true graph removed: no method can rank it first
    for r in summary["results"]:
        if r["setting"] == "out" and r["method"].startswith("rank"):
            assert r["top_k_accuracy"]["10"] == 0.0


def test_cli_compare_rejects_negative_fgw_rows(capsys, tmp_path):
    assert main(["compare", "--fgw-rows", "-1", "--out", str(tmp_path / "x"), "-q"]) == 2
    assert "--fgw-rows must be 0 (all test inputs) or more" in capsys.readouterr().err


def test_fgw_scorer_on_two_workers_equals_one(demo, model, cands):
    # the FGW values of the fgw scorer run in joblib worker processes with n_jobs=2 (outside
    # reference: joblib/loky); the ranked lists must not depend on where they ran
    X = demo[0]
    two = clone(model).set_params(n_jobs=2).fit(X[:N_TRAIN], demo[1][:N_TRAIN])
    assert two.rank(X[QUERIES], cands, top_k=5, scorer="fgw") == model.rank(X[QUERIES], cands, top_k=5, scorer="fgw")

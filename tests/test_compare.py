"""Tests for gwpred.compare (generation against ranking on one split).

Outside references used here:

- networkx ``is_isomorphic`` with label matchers: which candidates are copies
  of the true graph (they must all leave the "true graph removed" setting),
  and the Counter of node labels for "same heavy-atom formula".
- QM9 molecules bundled with gwpred (``gwpred.datasets.load_demo``, from the
  QM9 data of the PyPI package qm9pack).
"""

from __future__ import annotations

from collections import Counter

import networkx as nx
import numpy as np
import pytest
from networkx.algorithms.isomorphism import (
    categorical_edge_match,
    categorical_node_match,
)

from gwpred import BarycenterGraphPredictor
from gwpred.compare import (
    candidate_rows,
    compare_methods,
    comparison_table,
    load_comparison_data,
)
from gwpred.datasets import load_demo
from gwpred.ranking import CandidateLibrary

SAME = {
    "node_match": categorical_node_match("label", None),
    "edge_match": categorical_edge_match("label", None),
}


@pytest.fixture(scope="module")
def demo():
    return load_demo()


def test_candidate_rows_keep_the_formula_and_drop_every_copy(demo):
    X, graphs = demo
    pool = graphs[:400] + [graphs[10].copy(), graphs[20].copy()]  # two exact duplicates
    model = BarycenterGraphPredictor(n_neighbors=3).fit(X[:100], graphs[:100])
    truth = [graphs[10], graphs[20], graphs[30]]
    with_true, without_true = candidate_rows(CandidateLibrary(pool), truth, model.labels_)
    for t, inside, outside in zip(truth, with_true, without_true):
        want = Counter(d["label"] for _, d in t.nodes(data=True))
        same = [i for i, g in enumerate(pool) if Counter(d["label"] for _, d in g.nodes(data=True)) == want]
        assert inside.tolist() == same
        copies = [i for i in same if nx.is_isomorphic(pool[i], t, **SAME)]
        assert copies  # the true graph itself is in the pool
        assert outside.tolist() == [i for i in same if i not in copies]
    assert len([i for i in with_true[0] if i not in without_true[0]]) >= 2


def test_compare_methods_small_run(demo):
    X, graphs = demo
    rng = np.random.default_rng(0)
    order = rng.permutation(len(graphs))
    train, test = np.sort(order[:150]), np.sort(order[150:153])
    result = compare_methods(
        X, graphs, train, test, params={"n_neighbors": 3}, scorers=("kernel",), progress=False, data="demo"
    )
    names = {(m.name, m.setting) for m in result.methods}
    assert ("rank: kernel (wl)", "in") in names and ("generation", "out") in names
    kernel_in = next(m for m in result.methods if m.name == "rank: kernel (wl)" and m.setting == "in")
    assert kernel_in.rows.tolist() == [0, 1, 2]
    kernel_out = next(m for m in result.methods if m.name == "rank: kernel (wl)" and m.setting == "out")
    assert kernel_out.top_k(10) == 0.0  # every copy of the true graph was removed
    text = comparison_table(result)
    assert "true graph in the candidate set" in text and "rank: kernel (wl)" in text
    d = result.to_dict()
    assert d["rows_per_setting"]["in"] == 3 and d["n_train"] == 150


@pytest.mark.parametrize(
    "train, test, kwargs, message",
    [
        ([], [1], {}, "train and test must both be non-empty"),
        ([0, 1], [1, 2], {}, "train and test overlap; test inputs must be excluded from training"),
        ([0, 1], [2], {"fgw_rows": 0}, "fgw_rows must be a positive integer or None; got 0"),
    ],
)
def test_compare_methods_errors(demo, train, test, kwargs, message):
    X, graphs = demo
    with pytest.raises(ValueError, match=message):
        compare_methods(
            X, graphs, np.array(train, dtype=int), np.array(test, dtype=int), progress=False, **kwargs
        )


def test_unknown_data_source():
    with pytest.raises(
        ValueError, match=r"data must be one of \['demo', 'qm9-spectrum', 'qm9-fingerprint'\]"
    ):
        load_comparison_data("zinc")

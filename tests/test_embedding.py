"""Tests for gwpred.embedding and BarycenterGraphPredictor(kernel="learned").

Outside references used here:

- PyTorch's ``torch.autograd.gradcheck``: central finite differences in
  float64, the reference for the losses' gradients.
- PyTorch's own forward pass (``torch.nn``): the reference for the numpy
  forward pass of a trained embedding.
- A synthetic task whose answer is known by construction (inputs are noisy,
  shifted copies of a signal set by the graph), so the right neighbours and
  graphs are known; networkx ``is_isomorphic`` checks predicted graphs.
- scikit-learn's ``clone``, ``Pipeline`` and ``GridSearchCV``: the estimator contract.
"""

from __future__ import annotations

import networkx as nx
import numpy as np
import pytest
import scipy.sparse as sp
from sklearn.base import clone
from sklearn.model_selection import GridSearchCV
from sklearn.pipeline import Pipeline
from sklearn.preprocessing import FunctionTransformer

from gwpred import BarycenterGraphPredictor
from gwpred.embedding import InputEmbedding, OutputSimilarity, alignment_loss, listwise_loss, train_embedding
from gwpred.model import load_model, save_model

torch = pytest.importorskip("torch", reason="the neural extra (PyTorch) is not installed")


def ring_or_path(n: int, ring: bool) -> nx.Graph:
    g = nx.cycle_graph(n) if ring else nx.path_graph(n)
    nx.set_node_attributes(g, "C", "label")
    nx.set_edge_attributes(g, 1, "label")
    return g


def synthetic(n: int, seed: int) -> tuple[np.ndarray, list[nx.Graph], np.ndarray]:
    """Inputs on a 120-point grid: a band whose position is set by the graph (size 3..8, ring or
    path: 12 kinds), shifted at random by up to 3 grid points, plus noise; so two inputs of one
    kind can look unlike to an RBF kernel while their graphs are the same."""
    rng = np.random.default_rng(seed)
    kinds = rng.integers(0, 12, size=n)
    grid = np.arange(120.0)
    X = np.empty((n, 120))
    for i, k in enumerate(kinds):
        centre = 8 + 9 * k + rng.integers(-3, 4)
        X[i] = np.exp(-0.5 * ((grid - centre) / 1.5) ** 2) + 0.05 * rng.standard_normal(120)
    graphs = [ring_or_path(3 + k // 2, bool(k % 2)) for k in kinds]
    return X, graphs, kinds


def one_hot_similarity(kinds: np.ndarray) -> OutputSimilarity:
    return OutputSimilarity.cosine(sp.csr_matrix(np.eye(12)[kinds]))


# --------------------------------------------------------------------------- losses
def test_loss_gradients_match_finite_differences():
    # Reference: torch.autograd.gradcheck (central finite differences, float64).
    gen = torch.Generator().manual_seed(0)
    raw = torch.randn(6, 4, dtype=torch.float64, generator=gen, requires_grad=True)
    K = torch.rand(6, 6, dtype=torch.float64, generator=gen)
    K = (K + K.T) / 2

    def listwise(r):
        return listwise_loss(torch.nn.functional.normalize(r, dim=1), K, 0.3, 0.2)

    def alignment(r):
        return alignment_loss(torch.nn.functional.normalize(r, dim=1), K, 0.5)

    assert torch.autograd.gradcheck(listwise, (raw,), eps=1e-6, atol=1e-5)
    assert torch.autograd.gradcheck(alignment, (raw,), eps=1e-6, atol=1e-5)


def test_network_gradients_match_finite_differences():
    # A tiny model end to end (convolution, hidden layer, loss): autograd against finite
    # differences on every parameter (torch.autograd.gradcheck, float64).
    from gwpred.embedding import _network

    torch.manual_seed(0)
    net = _network(12, (5,), 3, (2, 3, 2), torch.float64)
    X = torch.randn(5, 12, dtype=torch.float64)
    K = torch.eye(5, dtype=torch.float64) * 0.5 + 0.5
    names = [n for n, _ in net.named_parameters()]

    def loss(*values):
        out = torch.func.functional_call(net, dict(zip(names, values)), (X,))
        return listwise_loss(torch.nn.functional.normalize(out, dim=1), K, 0.5, 0.5)

    inputs = tuple(p.detach().clone().requires_grad_(True) for p in net.parameters())
    assert torch.autograd.gradcheck(loss, inputs, eps=1e-6, atol=1e-5)


def test_output_similarity_blocks():
    # Reference: Tanimoto written out by hand, |a & b| / |a | b|, and cosine by numpy.
    bits = np.array([[1, 1, 0, 0], [1, 0, 1, 0], [0, 0, 0, 1]])
    T = OutputSimilarity.tanimoto(bits).block(np.array([0, 1, 2]))
    assert T[0, 1] == pytest.approx(1 / 3) and T[0, 2] == 0.0 and np.allclose(np.diag(T), 1.0)
    F = np.array([[3.0, 4.0], [1.0, 0.0]])
    C = OutputSimilarity.cosine(F).block(np.array([1, 0]))
    assert C[0, 1] == pytest.approx(0.6) and np.allclose(np.diag(C), 1.0)
    with pytest.raises(ValueError, match="non-zero output feature row"):
        OutputSimilarity.cosine(np.zeros((2, 3)))


def test_nearest_output_neighbours_match_brute_force():
    # Reference: scipy.spatial.distance.cdist(metric="jaccard"); for 0/1 rows Tanimoto = 1 - Jaccard
    # distance (common practice), so the k nearest are the k smallest distances (ties by index).
    from scipy.spatial.distance import cdist

    rng = np.random.default_rng(0)
    bits = (rng.random((60, 40)) < 0.3).astype(np.uint8)
    bits[:, 0] = 1  # no empty row
    index = np.sort(rng.choice(60, size=45, replace=False))
    got = OutputSimilarity.tanimoto(bits).nearest(index, 5, block_rows=7)
    D = cdist(bits[index].astype(bool), bits[index].astype(bool), metric="jaccard")
    np.fill_diagonal(D, np.inf)
    want = index[np.argsort(D, axis=1, kind="stable")[:, :5]]
    np.testing.assert_array_equal(got, want)


def test_neighbour_batches_hold_each_anchor_with_its_neighbours():
    from gwpred.embedding import _batches

    index = np.arange(10, 110)
    near = np.stack([(index - 10 + j) % 100 + 10 for j in (1, 2, 3)], axis=1)  # 3 neighbours each
    parts = _batches(index, 32, np.random.default_rng(0), near)
    assert len(parts) == 100 // 32  # as many batches as random ones
    anchors = 32 // 4
    for part in parts:
        members = set(part.tolist())
        held = [i for i in members if set(near[i - 10].tolist()) <= members]
        assert len(held) >= anchors  # every anchor came with its neighbours
        assert np.all(np.diff(part) > 0)  # no row twice


# --------------------------------------------------------------------------- training
@pytest.mark.parametrize("loss, neighbours", [("listwise", 0), ("alignment", 0), ("listwise", 7)])
def test_training_learns_the_synthetic_task(loss, neighbours):
    # The answer is known by construction: inputs of one kind belong together. The loss must
    # fall most of the way to the lowest value any network could reach on the validation part,
    # and the nearest training embedding of a new input must be of its kind.
    X, _, kinds = synthetic(300, seed=0)
    Xt, _, kt = synthetic(100, seed=1)
    emb = train_embedding(X, one_hot_similarity(kinds), dim=16, hidden=(64,), conv=(8, 9, 4), epochs=30,
                          batch_size=128, learning_rate=3e-3, patience=10, loss=loss, neighbours=neighbours,
                          raw_weight=0.0, random_state=0)  # the network alone must learn it
    h = emb.history
    floor, start, best = h["validation_floor"], h["initial_validation_loss"], h["validation_loss"][h["best_epoch"]]
    assert best - floor < 0.5 * (start - floor)
    Z, Zt = emb.transform(X), emb.transform(Xt)
    assert np.mean(kinds[(Zt @ Z.T).argmax(1)] == kt) >= 0.9


def test_numpy_forward_equals_torch_and_is_reproducible():
    X, _, kinds = synthetic(120, seed=2)
    a = train_embedding(X, one_hot_similarity(kinds), dim=8, hidden=(16,), conv=(3, 5, 2), epochs=3, raw_weight=0.0,
                        random_state=7)
    b = train_embedding(X, one_hot_similarity(kinds), dim=8, hidden=(16,), conv=(3, 5, 2), epochs=3, raw_weight=0.0,
                        random_state=7)
    np.testing.assert_array_equal(a.transform(X), b.transform(X))  # same seed, same embedding
    # reference: torch's forward of the same weights (float64)
    from gwpred.embedding import _network

    net = _network(120, (16,), 8, (3, 5, 2), torch.float64)
    conv = next(m for m in net if isinstance(m, torch.nn.Conv1d))
    conv.weight.data = torch.from_numpy(a.conv_filters[:, None, :].copy())
    conv.bias.data = torch.from_numpy(a.conv_bias.copy())
    for layer, (W, bias) in zip([m for m in net if isinstance(m, torch.nn.Linear)], zip(a.weights, a.biases)):
        layer.weight.data = torch.from_numpy(W.T.copy())
        layer.bias.data = torch.from_numpy(bias.copy())
    ref = torch.nn.functional.normalize(net(torch.from_numpy((X - a.mean) / a.scale)), dim=1).detach().numpy()
    np.testing.assert_allclose(a.transform(X), ref, atol=1e-10)
    c = train_embedding(X, one_hot_similarity(kinds), dim=8, hidden=(16,), conv=(3, 5, 2), epochs=3, raw_weight=0.0,
                        random_state=8)
    assert not np.allclose(a.transform(X), c.transform(X))  # another seed, another embedding


def test_embedding_arrays_round_trip_and_refuse_damage():
    X, _, kinds = synthetic(60, seed=3)
    emb = train_embedding(X, one_hot_similarity(kinds), dim=4, hidden=(8,), epochs=2, random_state=0)
    arrays, description = emb.to_arrays()
    back = InputEmbedding.from_arrays(arrays, description)
    np.testing.assert_array_equal(back.transform(X), emb.transform(X))
    broken = dict(arrays, W1=arrays["W1"][:-1])
    with pytest.raises(ValueError, match="do not chain"):
        InputEmbedding.from_arrays(broken, description)
    with pytest.raises(ValueError, match="needs its arrays"):
        InputEmbedding.from_arrays({k: v for k, v in arrays.items() if k != "mean"}, description)
    with pytest.raises(ValueError, match="trained on 120 columns"):
        emb.transform(X[:, :10])
    with pytest.raises(ValueError, match="NaN"):
        emb.transform(np.full((1, 120), np.nan))


def test_raw_weight_keeps_the_raw_input_beside_the_learned_part():
    # By definition (see InputEmbedding): [c u, z] / sqrt(1 + c^2), u the unit-norm raw input, so
    # dot products are (c^2 cos(raw) + cos(learned)) / (1 + c^2); checked against numpy's norms.
    X, _, kinds = synthetic(120, seed=6)
    sim = one_hot_similarity(kinds)
    plain = train_embedding(X, sim, dim=8, hidden=(16,), epochs=3, random_state=1, raw_weight=0.0)
    both = train_embedding(X, sim, dim=8, hidden=(16,), epochs=3, random_state=1, raw_weight=2.0)
    Z = both.transform(X)
    assert Z.shape == (120, 120 + 8) and both.dim == 128
    np.testing.assert_allclose(np.linalg.norm(Z, axis=1), 1.0)
    U = X / np.linalg.norm(X, axis=1, keepdims=True)
    np.testing.assert_allclose(Z[:, :120], 2.0 * U / np.sqrt(5.0))
    learned = Z[:, 120:] * np.sqrt(5.0)
    np.testing.assert_allclose(np.linalg.norm(learned, axis=1), 1.0)
    assert not np.allclose(learned, plain.transform(X))  # trained with the raw part, so another network
    arrays, description = both.to_arrays()
    back = InputEmbedding.from_arrays(arrays, description)
    assert back.raw_weight == 2.0
    np.testing.assert_array_equal(back.transform(X), Z)
    with pytest.raises(ValueError, match="raw_weight"):
        InputEmbedding.from_arrays(arrays, dict(description, raw_weight=-1.0))


def test_training_errors():
    X, _, kinds = synthetic(20, seed=4)
    sim = one_hot_similarity(kinds)
    with pytest.raises(ValueError, match="covers 20 graphs"):
        train_embedding(X[:10], sim)
    with pytest.raises(ValueError, match="loss must be one of"):
        train_embedding(X, sim, loss="triplet")
    with pytest.raises(ValueError, match="conv must be"):
        train_embedding(X, sim, conv=(2, 500, 2))
    with pytest.raises(ValueError, match="neighbours must be an integer >= 0"):
        train_embedding(X, sim, neighbours=-1)
    for bad_weight in (-0.5, float("nan"), True):
        with pytest.raises(ValueError, match="raw_weight must be a finite number >= 0"):
            train_embedding(X, sim, raw_weight=bad_weight)
    bad = X.copy()
    bad[0, 0] = np.nan
    with pytest.raises(ValueError, match="NaN"):
        train_embedding(bad, sim)


# --------------------------------------------------------------------------- the estimator
@pytest.fixture(scope="module")
def fitted():
    X, graphs, _ = synthetic(300, seed=5)
    model = BarycenterGraphPredictor(kernel="learned", n_neighbors=5, random_state=0,
                                     embedding={"dim": 16, "hidden": (32,), "conv": (4, 9, 4), "epochs": 30,
                                                "learning_rate": 3e-3, "output_kernel": "wl"})
    return model.fit(X, graphs), X, graphs


def test_learned_kernel_predicts_the_right_graphs(fitted):
    # known answer: the test inputs' graphs are set by their kind
    model, _, _ = fitted
    Xt, gt, _ = synthetic(60, seed=6)
    pred = model.predict(Xt)
    nm = nx.isomorphism.categorical_node_match("label", None)
    exact = np.mean([nx.is_isomorphic(p, t, node_match=nm) for p, t in zip(pred, gt)])
    fixed = BarycenterGraphPredictor(n_neighbors=5, random_state=0).fit(*fitted[1:]).predict(Xt)
    exact_fixed = np.mean([nx.is_isomorphic(p, t, node_match=nm) for p, t in zip(fixed, gt)])
    assert exact >= 0.8 and exact >= exact_fixed


def test_learned_model_file_round_trip(fitted, tmp_path):
    model, X, _ = fitted
    save_model(model, tmp_path / "m.npz")
    back = load_model(tmp_path / "m.npz")
    assert isinstance(back.embedding, InputEmbedding)
    a, b = model.neighbors(X[:20]), back.neighbors(X[:20])
    np.testing.assert_array_equal(a[0], b[0])
    np.testing.assert_allclose(a[1], b[1], atol=1e-12)
    assert all(nx.utils.graphs_equal(p, q) for p, q in zip(model.predict(X[:10]), back.predict(X[:10])))


def test_learned_kernel_in_clone_pipeline_and_grid_search(fitted):
    _, X, graphs = fitted
    base = BarycenterGraphPredictor(kernel="learned", n_neighbors=3, random_state=0,
                                    embedding={"dim": 8, "hidden": (16,), "epochs": 3, "output_kernel": "wl"})
    copy_ = clone(base)
    assert copy_.get_params()["embedding"] == base.get_params()["embedding"]
    pipe = Pipeline([("scale", FunctionTransformer(lambda A: A * 2.0)), ("model", base)])
    pipe.fit(X[:100], graphs[:100])
    assert len(pipe.predict(X[100:103])) == 3
    search = GridSearchCV(base, {"n_neighbors": [2, 3]}, cv=2).fit(X[:80], graphs[:80])
    assert search.best_params_["n_neighbors"] in (2, 3)


def test_input_kernel_of_a_learned_model(fitted):
    # Reference: scikit-learn's rbf_kernel on the trained embeddings, with the fitted bandwidth;
    # 1-NN retrieval (the CLI demo, gwpred.compare) ranks training inputs by it.
    from sklearn.metrics.pairwise import rbf_kernel

    model, X, _ = fitted
    Xt, _, _ = synthetic(20, seed=9)
    K = model.input_kernel(Xt, X)
    want = rbf_kernel(model.embedding_.transform(Xt), model.embedding_.transform(X), gamma=model.weights_.gamma_)
    np.testing.assert_allclose(K, want, rtol=1e-10, atol=1e-12)
    with pytest.raises(ValueError, match="columns"):
        model.input_kernel(Xt[:, :5], X)


def test_learned_kernel_bad_options():
    X, graphs, _ = synthetic(30, seed=7)
    with pytest.raises(ValueError, match="embedding options"):
        BarycenterGraphPredictor(kernel="learned", embedding={"width": 3}).fit(X, graphs)
    with pytest.raises(TypeError, match="embedding"):
        BarycenterGraphPredictor(kernel="learned", embedding=[1, 2]).fit(X, graphs)


def test_cli_fit_with_a_learned_kernel(tmp_path, capsys):
    # the command line: --kernel learned with --embedding options, then predict from the file
    import csv

    from gwpred.cli import main
    from gwpred.io import read_graphs, write_graphs

    X, graphs, _ = synthetic(120, seed=8)

    def write_csv(path, A):
        with open(path, "w", newline="", encoding="utf-8") as fh:
            w = csv.writer(fh)
            w.writerow(["id"] + [f"x{j}" for j in range(A.shape[1])])
            w.writerows([[f"s{i}", *map(repr, map(float, row))] for i, row in enumerate(A)])
        return str(path)

    train, test = write_csv(tmp_path / "train.csv", X[:100]), write_csv(tmp_path / "test.csv", X[100:])
    write_graphs(tmp_path / "train.graphml", graphs[:100])
    model = str(tmp_path / "m.npz")
    opts = '{"dim": 8, "hidden": [16], "epochs": 3, "output_kernel": "wl"}'
    assert main(["fit", "--features", train, "--graphs", str(tmp_path / "train.graphml"), "--model", model,
                 "-q", "--kernel", "learned", "--embedding", opts]) == 0
    out = tmp_path / "pred.graphml"
    assert main(["predict", "--model", model, "--features", test, "--out", str(out), "-q"]) == 0
    assert len(read_graphs(out)) == 20
    assert load_model(model).kernel == "learned"
    assert main(["fit", "--features", train, "--graphs", str(tmp_path / "train.graphml"), "--model", model,
                 "-q", "--embedding", opts]) == 2
    assert "add --kernel learned" in capsys.readouterr().err
    with pytest.raises(SystemExit):
        main(["fit", "--features", train, "--graphs", str(tmp_path / "train.graphml"), "--model", model,
              "--kernel", "learned", "--embedding", "[1, 2]"])
    assert "expected a JSON object" in capsys.readouterr().err

"""Tests for saved models: gwpred.save_model / load_model (gwpred.model.files).

Outside references used here:

- numpy's documented ``.npz`` layout (a zip of ``.npy`` members) read with
  ``np.load(..., allow_pickle=False)`` and Python's ``zipfile``: the archives
  are checked, taken apart and rebuilt with these, not with gwpred code, to
  make newer-version, missing-member and altered files.
- networkx node-link data: "identical predictions" means equal node order,
  labels and edges.
- QM9 heavy-atom graphs and spectra from ``gwpred.datasets.load_demo`` (built
  from the QM9 data of the PyPI package qm9pack).
"""

from __future__ import annotations

import io
import json
import zipfile
from pathlib import Path

import networkx as nx
import numpy as np
import pytest
from sklearn.base import clone

from gwpred import BarycenterGraphPredictor, load_model, save_model
from gwpred.datasets import load_demo
from gwpred.io import ARCHIVE_FORMAT, ARCHIVE_VERSION, load_archive, save_archive
from gwpred.model import estimator as estimator_module
from gwpred.weights import kernel_matrix

N_TRAIN = 150
N_TEST = 8

# atomic numbers of the QM9 heavy atoms, from memory (periodic table)
ATOMIC_NUMBER = {"C": 6, "N": 7, "O": 8, "F": 9}


# --------------------------------------------------------------------------
# data and helpers
# --------------------------------------------------------------------------
@pytest.fixture(scope="module")
def demo():
    X, graphs = load_demo()
    return X[:N_TRAIN], graphs[:N_TRAIN], X[N_TRAIN : N_TRAIN + N_TEST]


def node_link(graphs: list[nx.Graph]) -> list[dict]:
    return [nx.node_link_data(g, edges="edges") for g in graphs]


def fit_variant(variant: str, demo) -> tuple[BarycenterGraphPredictor, np.ndarray]:
    """A fitted model and the queries to give it."""
    Xtr, Gtr, Xte = demo
    if variant == "rbf":
        return BarycenterGraphPredictor(n_neighbors=3, random_state=0).fit(Xtr, Gtr), Xte
    if variant == "laplacian-knn":
        return BarycenterGraphPredictor(kernel="laplacian", weighting="knn", n_neighbors=3).fit(Xtr, Gtr), Xte
    if variant == "fixed-gamma-decoded":
        model = BarycenterGraphPredictor(gamma=1.5, n_neighbors=4, alpha=0.5, decoding="free", edges="threshold")
        return model.fit(Xtr, Gtr), Xte
    if variant == "precomputed":
        K = kernel_matrix(Xtr, Xtr, "rbf", 2.0)
        model = BarycenterGraphPredictor(kernel="precomputed", n_neighbors=3).fit(K, Gtr)
        return model, kernel_matrix(Xte, Xtr, "rbf", 2.0)
    if variant == "local":
        model = BarycenterGraphPredictor(n_neighbors=3, weight_model="local", local_size=20, random_state=0)
        return model.fit(Xtr, Gtr), Xte
    if variant == "edge_label=None":
        return BarycenterGraphPredictor(n_neighbors=3, edge_label=None).fit(Xtr, Gtr), Xte
    if variant == "int-node-labels":
        graphs = [g.copy() for g in Gtr]
        for g in graphs:
            for v in g:
                g.nodes[v]["label"] = ATOMIC_NUMBER[g.nodes[v]["label"]]
        return BarycenterGraphPredictor(n_neighbors=3).fit(Xtr, graphs), Xte
    if variant == "str-node-ids-reversed":
        # node order of the stored graphs must not depend on the node ids
        graphs = []
        for g in Gtr:
            h = nx.Graph()
            for v in reversed(list(g.nodes)):
                h.add_node(f"a{v}", **g.nodes[v])
            h.add_edges_from((f"a{u}", f"a{v}", d) for u, v, d in g.edges(data=True))
            graphs.append(h)
        return BarycenterGraphPredictor(n_neighbors=3, node_label="label").fit(Xtr, graphs), Xte
    raise AssertionError(variant)


VARIANTS = [
    "rbf",
    "laplacian-knn",
    "fixed-gamma-decoded",
    "precomputed",
    "local",
    "edge_label=None",
    "int-node-labels",
    "str-node-ids-reversed",
]


@pytest.fixture(scope="module")
def small_model_file(tmp_path_factory, demo):
    """A small saved model, its predictions and queries (for the corruption tests)."""
    Xtr, Gtr, Xte = demo
    model = BarycenterGraphPredictor(n_neighbors=2).fit(Xtr[:30], Gtr[:30])
    path = tmp_path_factory.mktemp("model") / "model.npz"
    save_model(model, path)
    return path, node_link(model.predict(Xte[:3])), Xte[:3]


def npy_bytes(arr: np.ndarray) -> bytes:
    buf = io.BytesIO()
    np.lib.format.write_array(buf, arr, allow_pickle=False)
    return buf.getvalue()


def read_manifest(path: Path) -> dict:
    # reference: numpy reads the member, json decodes it
    with np.load(path, allow_pickle=False) as npz:
        return json.loads(npz["__manifest__"].tobytes().decode("utf-8"))


def rebuild(src: Path, dst: Path, *, drop=(), replace=None, add=None) -> None:
    """Copy an .npz member by member with zipfile, dropping / replacing / adding members."""
    replace, add = replace or {}, add or {}
    with zipfile.ZipFile(src) as zin, zipfile.ZipFile(dst, "w", zipfile.ZIP_DEFLATED) as zout:
        for info in zin.infolist():
            name = info.filename.removesuffix(".npy")
            if name in drop:
                continue
            data = npy_bytes(replace[name]) if name in replace else zin.read(info.filename)
            zout.writestr(info.filename, data)
        for name, arr in add.items():
            zout.writestr(name + ".npy", npy_bytes(arr))


def manifest_array(manifest: dict) -> np.ndarray:
    return np.frombuffer(json.dumps(manifest).encode("utf-8"), dtype=np.uint8)


# --------------------------------------------------------------------------
# round trips
# --------------------------------------------------------------------------
@pytest.mark.parametrize("variant", VARIANTS)
def test_round_trip_gives_identical_predictions(tmp_path, demo, variant):
    model, Xq = fit_variant(variant, demo)
    path = tmp_path / "m.npz"
    save_model(model, path)
    loaded = load_model(path)
    assert type(loaded) is BarycenterGraphPredictor
    assert node_link(loaded.predict(Xq)) == node_link(model.predict(Xq))
    # the fitted state that predictions depend on
    assert loaded.labels_.node_labels_ == model.labels_.node_labels_
    assert loaded.labels_.edge_labels_ == model.labels_.edge_labels_
    assert loaded.sizes_.tolist() == model.sizes_.tolist()
    assert loaded.n_edges_.tolist() == model.n_edges_.tolist()
    assert loaded.connected_ == model.connected_
    assert loaded.n_features_in_ == model.n_features_in_
    np.testing.assert_array_equal(loaded.weights_.gamma_, model.weights_.gamma_)  # nan == nan here
    p_loaded, p_model = loaded.get_params(), model.get_params()
    p_loaded.pop("gamma"), p_model.pop("gamma")  # the loaded model stores the fitted bandwidth
    assert p_loaded == p_model


def test_loaded_soft_barycenters_are_identical(tmp_path, demo):
    model, Xq = fit_variant("rbf", demo)
    save_model(model, tmp_path / "m.npz")
    loaded = load_model(str(tmp_path / "m.npz"))  # str paths work too
    for a, b in zip(model.predict_barycenters(Xq), loaded.predict_barycenters(Xq)):
        np.testing.assert_array_equal(a.neighbors, b.neighbors)
        np.testing.assert_array_equal(a.weights, b.weights)
        np.testing.assert_array_equal(a.structure, b.structure)
        np.testing.assert_array_equal(a.node_scores, b.node_scores)


def test_model_file_is_plain_npz_and_deterministic(tmp_path, demo):
    model, _ = fit_variant("rbf", demo)
    a, b = tmp_path / "a.npz", tmp_path / "b.npz"
    save_model(model, a)
    save_model(model, b)
    assert a.read_bytes() == b.read_bytes()
    # reference: zipfile's CRC check and numpy's loader without pickle
    with zipfile.ZipFile(a) as zf:
        assert zf.testzip() is None
    with np.load(a, allow_pickle=False) as npz:
        assert "__manifest__" in npz.files
        np.testing.assert_array_equal(npz["inputs"], demo[0])
    manifest = read_manifest(a)
    assert manifest["format"] == ARCHIVE_FORMAT and manifest["format_version"] == ARCHIVE_VERSION
    assert manifest["params"]["n_neighbors"] == 3


def test_loaded_model_can_be_cloned_and_refit(tmp_path, demo):
    model, Xq = fit_variant("rbf", demo)
    save_model(model, tmp_path / "m.npz")
    fresh = clone(load_model(tmp_path / "m.npz")).fit(demo[0], demo[1])
    assert len(fresh.predict(Xq[:2])) == 2


@pytest.mark.parametrize("where", ["param", "node labels"])
def test_numpy_scalars_can_be_saved(tmp_path, demo, where):
    Xtr, Gtr, Xte = demo
    if where == "param":
        model = BarycenterGraphPredictor(n_neighbors=np.int64(2)).fit(Xtr[:30], Gtr[:30])
    else:
        graphs = [g.copy() for g in Gtr[:30]]
        for g in graphs:
            for v in g:
                g.nodes[v]["label"] = np.int64(ATOMIC_NUMBER[g.nodes[v]["label"]])
        model = BarycenterGraphPredictor(n_neighbors=2).fit(Xtr[:30], graphs)
    save_model(model, tmp_path / "m.npz")
    assert node_link(load_model(tmp_path / "m.npz").predict(Xte)) == node_link(model.predict(Xte))


# --------------------------------------------------------------------------
# files that must be refused
# --------------------------------------------------------------------------
def test_saving_an_unfitted_model(tmp_path):
    with pytest.raises(ValueError, match=r"save_model needs a fitted BarycenterGraphPredictor; call fit first"):
        save_model(BarycenterGraphPredictor(), tmp_path / "m.npz")
    with pytest.raises(ValueError, match=r"save_model needs a fitted BarycenterGraphPredictor"):
        save_model({"not": "a model"}, tmp_path / "m.npz")
    assert not (tmp_path / "m.npz").exists()


def test_missing_file(tmp_path):
    with pytest.raises(FileNotFoundError, match=r"model archive file not found: .*nope\.npz"):
        load_model(tmp_path / "nope.npz")


@pytest.mark.parametrize("keep", [0.0, 0.1, 0.5, 0.999])
def test_truncated_file(tmp_path, small_model_file, keep):
    raw = small_model_file[0].read_bytes()
    path = tmp_path / "cut.npz"
    path.write_bytes(raw[: int(len(raw) * keep)])
    with pytest.raises(ValueError, match=r"is not a valid \.npz \(zip\) file; the file may be truncated or corrupted"):
        load_model(path)


@pytest.mark.parametrize("member", ["__manifest__", "inputs", "node_classes"])
def test_flipped_byte_inside_a_member(tmp_path, small_model_file, member):
    src = small_model_file[0]
    raw = bytearray(src.read_bytes())
    with zipfile.ZipFile(src) as zf:
        info = zf.getinfo(member + ".npy")
    # zip local file header: 30 fixed bytes, then name and extra field (PKWARE APPNOTE
    # section 4.3.7, from memory; name/extra lengths at byte offsets 26 and 28)
    start = info.header_offset
    name_len = int.from_bytes(raw[start + 26 : start + 28], "little")
    extra_len = int.from_bytes(raw[start + 28 : start + 30], "little")
    pos = start + 30 + name_len + extra_len + info.compress_size // 2
    raw[pos] ^= 0x10
    path = tmp_path / "flipped.npz"
    path.write_bytes(bytes(raw))
    with pytest.raises(
        ValueError, match=rf"member '{member}' could not be read .*the file is corrupted or truncated: save the model again"
    ):
        load_model(path)


def test_every_flipped_byte_is_detected_or_harmless(tmp_path, small_model_file):
    # Property: whatever single byte is flipped, load_model either refuses the
    # file with ValueError or gives a model predicting exactly as the saved one.
    src, expected, Xq = small_model_file
    raw = src.read_bytes()
    rng = np.random.default_rng(0)
    positions = np.unique(np.concatenate([np.arange(0, len(raw), max(1, len(raw) // 120)), rng.integers(0, len(raw), 60)]))
    path = tmp_path / "flip.npz"
    refused = 0
    for pos in positions:
        data = bytearray(raw)
        data[pos] ^= 0xFF
        path.write_bytes(bytes(data))
        try:
            model = load_model(path)
        except ValueError:
            refused += 1
            continue
        assert node_link(model.predict(Xq)) == expected, f"byte {pos} changed the model silently"
    assert refused > len(positions) // 2


def test_newer_format_version(tmp_path, small_model_file):
    src = small_model_file[0]
    manifest = read_manifest(src)
    manifest["format_version"] = ARCHIVE_VERSION + 1
    path = tmp_path / "newer.npz"
    rebuild(src, path, replace={"__manifest__": manifest_array(manifest)})
    with pytest.raises(
        ValueError,
        match=rf"uses model format_version {ARCHIVE_VERSION + 1}, but this gwpred reads versions up to "
        rf"{ARCHIVE_VERSION}; upgrade gwpred to load it",
    ):
        load_model(path)


@pytest.mark.parametrize("version", [0, "1", True, None])
def test_invalid_format_version(tmp_path, small_model_file, version):
    src = small_model_file[0]
    manifest = read_manifest(src)
    manifest["format_version"] = version
    path = tmp_path / "bad_version.npz"
    rebuild(src, path, replace={"__manifest__": manifest_array(manifest)})
    with pytest.raises(ValueError, match=r"has an invalid format_version .*; expected a positive integer"):
        load_model(path)


def test_wrong_format_name(tmp_path, small_model_file):
    src = small_model_file[0]
    manifest = read_manifest(src)
    manifest["format"] = "something-else"
    path = tmp_path / "other.npz"
    rebuild(src, path, replace={"__manifest__": manifest_array(manifest)})
    with pytest.raises(ValueError, match=r"has manifest format 'something-else', expected 'gwpred-model'"):
        load_model(path)


def test_wrong_kind(tmp_path, small_model_file):
    arrays, manifest = load_archive(small_model_file[0])
    path = tmp_path / "kind.npz"
    save_archive(path, arrays, {**manifest, "kind": "SomethingElse"})
    with pytest.raises(
        ValueError,
        match=r"is a gwpred archive but not a saved BarycenterGraphPredictor \(kind='SomethingElse', missing arrays: \[\]\)",
    ):
        load_model(path)


def test_archive_without_a_model_array(tmp_path, small_model_file):
    arrays, manifest = load_archive(small_model_file[0])
    del arrays["inputs"]
    path = tmp_path / "partial.npz"
    save_archive(path, arrays, manifest)
    with pytest.raises(ValueError, match=r"not a saved BarycenterGraphPredictor \(kind='BarycenterGraphPredictor', missing arrays: \['inputs'\]\)"):
        load_model(path)


def test_member_listed_in_manifest_but_missing(tmp_path, small_model_file):
    path = tmp_path / "dropped.npz"
    rebuild(small_model_file[0], path, drop=("inputs",))
    with pytest.raises(ValueError, match=r"lacks array\(s\) \['inputs'\] listed in its manifest; the file is incomplete or corrupted"):
        load_model(path)


def test_member_not_listed_in_manifest(tmp_path, small_model_file):
    path = tmp_path / "extra.npz"
    rebuild(small_model_file[0], path, add={"extra": np.zeros(3)})
    with pytest.raises(ValueError, match=r"holds array\(s\) \['extra'\] not listed in its manifest; the file was altered"):
        load_model(path)


def test_member_replaced_with_valid_zip_crc(tmp_path, small_model_file):
    # the zip CRC is recomputed, so only gwpred's own checksum can notice
    src = small_model_file[0]
    with np.load(src, allow_pickle=False) as npz:
        inputs = npz["inputs"].copy()
    inputs[0, 0] += 1.0
    path = tmp_path / "altered.npz"
    rebuild(src, path, replace={"inputs": inputs})
    with pytest.raises(ValueError, match=r"array 'inputs' does not match its checksum; the file is corrupted: save the model again"):
        load_model(path)


@pytest.mark.parametrize(
    "change",
    ["node counts", "node class", "unknown param"],
)
def test_inconsistent_contents(tmp_path, small_model_file, change):
    arrays, manifest = load_archive(small_model_file[0])
    if change == "node counts":
        arrays["n_nodes"] = arrays["n_nodes"].copy()
        arrays["n_nodes"][0] += 1
    elif change == "node class":
        arrays["node_classes"] = arrays["node_classes"].copy()
        arrays["node_classes"][0] = 99
    else:
        manifest["params"]["no_such_param"] = 1
    path = tmp_path / "inconsistent.npz"
    save_archive(path, arrays, manifest)  # valid checksums: the contents themselves are wrong
    with pytest.raises(ValueError, match=r"model file .* has inconsistent contents \(.+\); it may be corrupted"):
        load_model(path)


def test_random_bytes_are_not_a_model(tmp_path):
    path = tmp_path / "random.npz"
    path.write_bytes(np.random.default_rng(1).integers(0, 256, 4096, dtype=np.uint8).tobytes())
    with pytest.raises(ValueError, match=r"is not a valid \.npz \(zip\) file; .*or it is not a gwpred model"):
        load_model(path)


def test_plain_npz_is_not_a_model(tmp_path):
    path = tmp_path / "plain.npz"
    np.savez(path, inputs=np.ones((2, 2)))
    with pytest.raises(ValueError, match=r"has no '__manifest__' entry; it is not a gwpred model archive"):
        load_model(path)


def test_pickled_member_is_never_loaded(tmp_path):
    path = tmp_path / "pickled.npz"
    with zipfile.ZipFile(path, "w") as zf:
        buf = io.BytesIO()
        np.lib.format.write_array(buf, np.array([{"format": ARCHIVE_FORMAT}], dtype=object), allow_pickle=True)
        zf.writestr("__manifest__.npy", buf.getvalue())
    with pytest.raises(ValueError, match=r"member '__manifest__' holds Python objects \(pickled data\), which gwpred never loads"):
        load_model(path)


def test_valence_table_round_trips_and_non_text_keys_are_refused(tmp_path):
    # a valence table of one's own survives save/load (JSON manifest); integer
    # keys would silently become text in JSON, so they are refused
    g = nx.path_graph(3)
    nx.set_node_attributes(g, "R", "label")
    X = np.arange(3.0).reshape(-1, 1)
    model = BarycenterGraphPredictor(n_neighbors=1, valence={"R": 2}, edge_label=None).fit(X, [g, g, g])
    save_model(model, tmp_path / "m.npz")
    assert load_model(tmp_path / "m.npz").get_params()["valence"] == {"R": 2}
    h = nx.path_graph(3)
    nx.set_node_attributes(h, 6, "label")
    model = BarycenterGraphPredictor(n_neighbors=1, valence={6: 2}, edge_label=None).fit(X, [h, h, h])
    with pytest.raises(ValueError, match="non-text labels cannot be stored"):
        save_model(model, tmp_path / "n.npz")


# --------------------------------------------------------------------------
# files of the first (flat) package layout
# --------------------------------------------------------------------------
DATA = Path(__file__).parent / "data"


def test_model_file_of_the_flat_layout_loads_and_predicts_as_saved():
    # tests/data/model_flat_layout.npz was written by gwpred 0.1.0 before the package was
    # re-laid into layers (gwpred/estimator.py, gwpred/io.py.save_model), from the first 60
    # bundled QM9 molecules with valence=True and the old parameter name verbose=False;
    # model_flat_layout_predictions.json holds what that code predicted for molecules 60-69.
    model = load_model(DATA / "model_flat_layout.npz")
    assert model.get_params()["progress"] is False and model.valence is True
    expected = json.loads((DATA / "model_flat_layout_predictions.json").read_text())
    X, _ = load_demo()
    pred = model.predict(X[60:70])
    assert [[g.nodes[i]["label"] for i in range(len(g))] for g in pred] == expected["nodes"]
    edges = [sorted([int(u), int(v), d["label"]] for u, v, d in g.edges(data=True)) for g in pred]
    assert edges == expected["edges"]


def test_save_and_load_moved_out_of_io_with_a_message():
    import gwpred.io

    with pytest.raises(ImportError, match=r"gwpred.io.save_model moved: use gwpred.save_model"):
        gwpred.io.save_model  # noqa: B018
    with pytest.raises(ImportError, match=r"use gwpred.load_model .*load unchanged"):
        from gwpred.io import load_model as _  # noqa: F401


def test_model_file_with_an_unknown_parameter_is_refused(tmp_path, small_model_file):
    path = small_model_file[0]
    arrays, manifest = load_archive(path)
    manifest["params"]["from_the_future"] = 1
    save_archive(tmp_path / "new.npz", arrays, manifest)
    with pytest.raises(ValueError, match=r"parameters \['from_the_future'\] are unknown to this gwpred; .*upgrade"):
        load_model(tmp_path / "new.npz")


# --------------------------------------------------------------------------
# weight models
# --------------------------------------------------------------------------
def test_local_weight_model_round_trips(tmp_path, demo):
    model, Xq = fit_variant("local", demo)
    save_model(model, tmp_path / "m.npz")
    params = read_manifest(tmp_path / "m.npz")["params"]  # reference: numpy + json
    assert params["weight_model"] == "local" and params["local_size"] == 20
    loaded = load_model(tmp_path / "m.npz")
    assert loaded.weight_model_ == "local" and type(loaded.weights_) is type(model.weights_)
    np.testing.assert_array_equal(loaded.neighbors(Xq)[0], model.neighbors(Xq)[0])
    np.testing.assert_array_equal(loaded.neighbors(Xq)[1], model.neighbors(Xq)[1])


def test_file_written_before_weight_models_keeps_the_dense_solve(tmp_path, small_model_file, monkeypatch):
    # a manifest without weight_model / local_size, as written before they existed (rebuilt with
    # gwpred.io's archive functions); even where "auto" would pick the local model, it loads dense
    path, expected, Xq = small_model_file
    arrays, manifest = load_archive(path)
    del manifest["params"]["weight_model"], manifest["params"]["local_size"]
    save_archive(tmp_path / "old.npz", arrays, manifest)
    monkeypatch.setattr(estimator_module, "AUTO_DENSE_MAX", 1)
    loaded = load_model(tmp_path / "old.npz")
    assert loaded.weight_model == "dense" and loaded.weight_model_ == "dense" and loaded.local_size == 500
    assert node_link(loaded.predict(Xq)) == expected


def _forged(path, name, data: bytes, compress: bool = True) -> None:
    # an .npz written with Python's zipfile: one member whose bytes we choose
    import zipfile

    method = zipfile.ZIP_DEFLATED if compress else zipfile.ZIP_STORED
    with zipfile.ZipFile(path, "w", compression=method) as zf:
        zf.writestr(name + ".npy", data)


def test_members_that_cannot_be_true_are_refused_before_reading(tmp_path):
    # Sizes read from the .npy header (NumPy's format, numpy.lib.format) and the zip directory
    # (Python's zipfile), before any array is allocated.
    from io import BytesIO

    buf = BytesIO()
    np.lib.format.write_array_header_1_0(buf, {"descr": "<f8", "fortran_order": False, "shape": (10**9,)})
    _forged(tmp_path / "claims.npz", "inputs", buf.getvalue() + b"\0" * 64)  # says 8 GB, holds 64 bytes
    with pytest.raises(ValueError, match=r"member 'inputs' declares 8,000,000,000 bytes of data but holds at most"):
        load_model(tmp_path / "claims.npz")
    # a member of zeros that expands more than any array gwpred writes (a decompression bomb); the
    # guard reads the zip directory, so a small "bomb" stands in with the limits lowered
    import gwpred.io as gio

    _forged(tmp_path / "bomb.npz", "inputs", b"\0" * 4_000_000)
    old = gio._BOMB_BYTES
    gio._BOMB_BYTES = 1_000_000
    try:
        with pytest.raises(ValueError, match=r"member 'inputs' would expand from [\d,]+ to 4,000,000 bytes.*"
                                             r"decompression bomb"):
            load_model(tmp_path / "bomb.npz")
    finally:
        gio._BOMB_BYTES = old

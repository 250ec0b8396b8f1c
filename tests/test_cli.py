"""Tests for the ``gwpred`` command line (gwpred.cli).

Commands run in-process through ``gwpred.cli.main`` (one check goes through
``python -m gwpred.cli`` in a subprocess).

Outside references used here:

- Python's ``csv`` and ``json`` modules write the input files and read the
  CSV/JSON outputs; networkx node-link data (``node_link_data`` /
  ``node_link_graph``) and networkx's ``GraphMLReader`` read the graph files.
- networkx ``is_connected`` / ``number_of_nodes`` for the right-size and
  connectivity rates; a graph's edit distance to itself is 0 (definition of
  a distance).
- RDKit (``Chem.MolFromSmiles``) parses the SMILES the demo writes next to the
  true graphs: same heavy atoms as the graph.
- matplotlib's ``imread`` decodes the demo's PNG; the PNG signature is from
  the PNG specification (RFC 2083).
- QM9 heavy-atom graphs and spectra from ``gwpred.datasets.load_demo`` (built
  from the QM9 data of the PyPI package qm9pack).
"""

from __future__ import annotations

import csv
import itertools
import json
import os
import subprocess
import sys
from collections import Counter
from pathlib import Path

import networkx as nx
import numpy as np
import pytest
from networkx.readwrite.graphml import GraphMLReader

import gwpred
from gwpred import BarycenterGraphPredictor
from gwpred.cli import main
from gwpred.datasets import load_demo
from gwpred.io import read_graphs, write_graphs

REPO = Path(__file__).resolve().parents[1]
TRAIN = list(range(0, 3000, 50))  # 60 molecules spread over the demo file
TEST = list(range(25, 3000, 600))  # 5 others
NODE_EDGE_SCORES = ["node_label_accuracy", "edge_precision", "edge_recall", "edge_f1"]
SUMMARY_KEYS = {"n", "mean_ged", "median_ged", "exact_match_rate", "right_size_rate", "connected_rate", "exact_share",
                *NODE_EDGE_SCORES}
# the pair's id, and for molecules (RDKit installed) formulas and SMILES of both graphs
ITEM_COLUMNS = ["index", "id", "formula_predicted", "formula_true", "smiles_predicted", "smiles_true", "ged", "ged_proven", "exact_match", "n_pred", "n_true", "connected", *NODE_EDGE_SCORES]
MODEL_OPTS = ["--n-neighbors", "3", "--alpha", "0.5", "--seed", "0"]


# --------------------------------------------------------------------------
# helpers
# --------------------------------------------------------------------------
@pytest.fixture(scope="module")
def demo():
    X, graphs = load_demo()
    return X[TRAIN], [graphs[i] for i in TRAIN], X[TEST], [graphs[i] for i in TEST]


def write_csv(path: Path, X: np.ndarray) -> Path:
    """Features with a header row and an ``id`` column (Python's csv module)."""
    with open(path, "w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh)
        w.writerow(["id"] + [f"w{j}" for j in range(X.shape[1])])
        for i, row in enumerate(X):
            w.writerow([f"mol{i}"] + [repr(float(v)) for v in row])
    return path


def write_jsonl(path: Path, graphs: list[nx.Graph]) -> Path:
    """One networkx node-link record per line (json module)."""
    with open(path, "w", encoding="utf-8") as fh:
        for g in graphs:
            fh.write(json.dumps(nx.node_link_data(g, edges="edges")) + "\n")
    return path


def read_any(path: Path) -> list[nx.Graph]:
    """Read graph files with networkx only."""
    if path.suffix == ".jsonl":
        lines = [ln for ln in path.read_text(encoding="utf-8").splitlines() if ln.strip()]
        return [nx.node_link_graph(json.loads(ln), edges="edges") for ln in lines]
    return list(GraphMLReader(node_type=int)(path=str(path)))


def run(capsys, *argv: str) -> tuple[int, str, str]:
    code = main([str(a) for a in argv])
    out, err = capsys.readouterr()
    return code, out, err


def same_labeled_graph(g: nx.Graph, h: nx.Graph) -> bool:
    match = lambda a, b: a.get("label") == b.get("label")  # noqa: E731
    return nx.is_isomorphic(g, h, node_match=match, edge_match=match)


@pytest.fixture(scope="module")
def files(tmp_path_factory, demo):
    """Training / test files and a model fitted through the CLI."""
    Xtr, Gtr, Xte, Gte = demo
    d = tmp_path_factory.mktemp("cli")
    paths = {
        "train_x": write_csv(d / "train.csv", Xtr),
        "train_g": d / "train.graphml",
        "train_gj": write_jsonl(d / "train.jsonl", Gtr),
        "test_x": write_csv(d / "test.csv", Xte),
        "truth": write_jsonl(d / "truth.jsonl", Gte),
        "model": d / "model.npz",
    }
    write_graphs(paths["train_g"], Gtr)  # several graphs in one GraphML document
    code = main(["fit", "--features", str(paths["train_x"]), "--graphs", str(paths["train_g"]),
                 "--model", str(paths["model"]), "-q", *MODEL_OPTS])
    assert code == 0
    return paths


# --------------------------------------------------------------------------
# help and entry points
# --------------------------------------------------------------------------
def test_top_level_help(capsys):
    with pytest.raises(SystemExit) as exc:
        main(["--help"])
    assert exc.value.code == 0
    out = capsys.readouterr().out
    assert out.startswith("usage: gwpred")
    for word in ("fit", "predict", "evaluate", "demo", "--version"):
        assert word in out


@pytest.mark.parametrize(
    "command, options",
    [
        ("fit", ["--features", "--graphs", "--model", "--kernel", "--gamma", "--ridge", "--weighting",
                 "--n-neighbors", "--alpha", "--decoding", "--valence", "--id-column", "--ids", "--seed", "--quiet"]),
        ("predict", ["--model", "--features", "--out", "--quiet"]),
        ("evaluate", ["predicted", "--truth", "--time-limit", "--summary", "--items", "--n-jobs", "--quiet"]),
        ("demo", ["--out", "--n-test", "--drawings", "--time-limit", "--kernel", "--n-neighbors", "--alpha",
                  "--seed", "--quiet"]),
    ],
)
def test_subcommand_help(capsys, command, options):
    with pytest.raises(SystemExit) as exc:
        main([command, "--help"])
    assert exc.value.code == 0
    out = capsys.readouterr().out
    assert out.startswith(f"usage: gwpred {command}")
    for opt in options:
        assert opt in out, opt


def test_version(capsys):
    with pytest.raises(SystemExit) as exc:
        main(["--version"])
    assert exc.value.code == 0
    assert capsys.readouterr().out.strip() == f"gwpred {gwpred.__version__}"


def test_no_subcommand_prints_help_and_returns_2(capsys):
    code, out, _ = run(capsys)
    assert code == 2
    assert out.startswith("usage: gwpred")
    assert "fit" in out and "demo" in out


@pytest.mark.parametrize("argv, code", [(["--help"], 0), ([], 2)])
def test_module_entry_point(argv, code):
    env = dict(os.environ)
    env["PYTHONPATH"] = os.pathsep.join([str(REPO), env.get("PYTHONPATH", "")]).rstrip(os.pathsep)
    proc = subprocess.run(
        [sys.executable, "-m", "gwpred.cli", *argv],
        capture_output=True, text=True, env=env, timeout=120, check=False,
    )
    assert proc.returncode == code, proc.stderr
    assert proc.stdout.startswith("usage: gwpred")
    assert "evaluate" in proc.stdout


# --------------------------------------------------------------------------
# fit -> predict -> evaluate
# --------------------------------------------------------------------------
def test_fit_writes_a_loadable_model(capsys, tmp_path, files, demo):
    model_path = tmp_path / "m.npz"
    code, out, err = run(capsys, "fit", "--features", files["train_x"], "--graphs", files["train_gj"],
                         "--model", model_path, "-q", *MODEL_OPTS)
    assert code == 0, err
    assert f"fitted on {len(TRAIN)} graphs" in out
    assert f"model written to {model_path}" in out
    from gwpred import load_model

    model = load_model(model_path)
    assert (model.n_neighbors, model.alpha, model.random_state) == (3, 0.5, 0)
    assert model.n_train_ == len(TRAIN)
    # .jsonl and .graphml training files give the same model
    assert model_path.read_bytes() == files["model"].read_bytes()


@pytest.mark.parametrize("ext", [".jsonl", ".graphml"])
def test_fit_predict_evaluate(capsys, tmp_path, files, demo, ext):
    _, _, Xte, Gte = demo
    pred_path = tmp_path / f"pred{ext}"
    code, out, err = run(capsys, "predict", "--model", files["model"], "--features", files["test_x"],
                         "--out", pred_path, "-q")
    assert code == 0, err
    assert pred_path.is_file()
    assert f"{len(TEST)} predicted graphs written to {pred_path}" in out
    # the caution goes with every molecular output, on stderr (stdout may be piped as data), also with -q
    assert "hypotheses" in err and "lab-safety" in err and "hypotheses" not in out
    pred = read_any(pred_path)
    assert len(pred) == len(TEST)
    # the CLI predicts what the library predicts with the same options
    ref = BarycenterGraphPredictor(n_neighbors=3, alpha=0.5, random_state=0).fit(demo[0], demo[1]).predict(Xte)
    assert all(same_labeled_graph(p, r) for p, r in zip(pred, ref))

    summary_path, items_path = tmp_path / "summary.json", tmp_path / "items.csv"
    code, out, err = run(capsys, "evaluate", pred_path, "--truth", files["truth"], "--summary", summary_path,
                         "--items", items_path, "--time-limit", "5", "-q")
    assert code == 0, err
    assert "mean GED" in out and "GED solved exactly for" in out
    summary = json.loads(summary_path.read_text())
    assert set(summary) == SUMMARY_KEYS
    assert summary["n"] == len(TEST)
    with open(items_path, newline="") as fh:
        rows = list(csv.DictReader(fh))
    assert list(rows[0]) == ITEM_COLUMNS
    assert [int(r["index"]) for r in rows] == list(range(len(TEST)))
    geds = [float(r["ged"]) for r in rows]
    assert summary["mean_ged"] == pytest.approx(np.mean(geds))
    assert summary["median_ged"] == pytest.approx(np.median(geds))
    assert all(g >= 0 for g in geds)
    # sizes and connectivity recomputed with networkx
    assert [int(r["n_pred"]) for r in rows] == [g.number_of_nodes() for g in pred]
    assert [int(r["n_true"]) for r in rows] == [g.number_of_nodes() for g in Gte]
    assert summary["right_size_rate"] == pytest.approx(
        np.mean([p.number_of_nodes() == t.number_of_nodes() for p, t in zip(pred, Gte)])
    )
    assert summary["connected_rate"] == pytest.approx(np.mean([nx.is_connected(p) for p in pred]))
    # the table row shows the summary
    assert f"{summary['mean_ged']:.2f}" in out


def test_precomputed_kernel_files(capsys, tmp_path, demo):
    # kernel matrices from scikit-learn's rbf_kernel, passed as feature files
    from sklearn.metrics.pairwise import rbf_kernel

    Xtr, Gtr, Xte, _ = demo
    k_train = write_csv(tmp_path / "k_train.csv", rbf_kernel(Xtr, Xtr, gamma=1.0))
    k_test = write_csv(tmp_path / "k_test.csv", rbf_kernel(Xte, Xtr, gamma=1.0))
    graphs = write_jsonl(tmp_path / "train.jsonl", Gtr)
    model, pred_path = tmp_path / "k.npz", tmp_path / "pred.jsonl"
    code, _, err = run(capsys, "fit", "--features", k_train, "--graphs", graphs, "--model", model,
                       "--kernel", "precomputed", "-q", *MODEL_OPTS)
    assert code == 0, err
    code, _, err = run(capsys, "predict", "--model", model, "--features", k_test, "--out", pred_path, "-q")
    assert code == 0, err
    ref = BarycenterGraphPredictor(gamma=1.0, n_neighbors=3, alpha=0.5).fit(Xtr, Gtr).predict(Xte)
    assert all(same_labeled_graph(p, r) for p, r in zip(read_any(pred_path), ref))


def test_evaluate_truth_against_itself(capsys, tmp_path, files):
    summary_path = tmp_path / "self.json"
    code, _, err = run(capsys, "evaluate", files["truth"], "--truth", files["truth"], "--summary", summary_path, "-q")
    assert code == 0, err
    s = json.loads(summary_path.read_text())
    # a distance from a graph to itself is 0; every pair is an exact match
    assert (s["mean_ged"], s["exact_match_rate"], s["right_size_rate"], s["exact_share"]) == (0.0, 1.0, 1.0, 1.0)


def evaluate_files(capsys, tmp_path, pred_path, truth_path, *extra: str) -> tuple[str, dict, list[dict]]:
    """Run evaluate; return its stdout, the summary JSON and the items CSV rows."""
    summary_path, items_path = tmp_path / f"summary{len(extra)}.json", tmp_path / f"items{len(extra)}.csv"
    code, out, err = run(capsys, "evaluate", pred_path, "--truth", truth_path, "--summary", summary_path,
                         "--items", items_path, "-q", *extra)
    assert code == 0, err
    with open(items_path, newline="") as fh:
        rows = list(csv.DictReader(fh))
    return out, json.loads(summary_path.read_text()), rows


def test_evaluate_node_and_edge_scores(capsys, tmp_path, demo, files):
    # Each true QM9 graph against the next one (unrelated molecules of up to 9 heavy atoms).
    _, _, _, Gte = demo
    shifted = [g.copy() for g in Gte[1:] + Gte[:1]]
    pred_path = write_jsonl(tmp_path / "shifted.jsonl", shifted)
    # the demo molecules carry their QM9 names as ids: evaluate refuses rows out of order
    expect_usage_error(capsys, ["evaluate", pred_path, "--truth", files["truth"], "-q"],
                       f"row 0: id {shifted[0].graph['id']!r} in", "same samples in the same order")
    for g in shifted:
        del g.graph["id"]  # unrelated molecules paired on purpose
    pred_path = write_jsonl(tmp_path / "shifted.jsonl", shifted)
    out, summary, rows = evaluate_files(capsys, tmp_path, pred_path, files["truth"])
    assert set(summary) == SUMMARY_KEYS
    assert list(rows[0]) == ITEM_COLUMNS
    for key in NODE_EDGE_SCORES:
        per_pair = [float(r[key]) for r in rows]
        assert all(0.0 <= v <= 1.0 for v in per_pair)
        assert summary[key] == pytest.approx(np.mean(per_pair))  # summary = mean over pairs
    for r in rows:
        # F1 is the harmonic mean of precision and recall (common practice)
        p, rec = float(r["edge_precision"]), float(r["edge_recall"])
        assert float(r["edge_f1"]) == pytest.approx(2 * p * rec / (p + rec) if p + rec else 0.0)
    # the line under the table shows the rates in percent
    line = next(ln for ln in out.splitlines() if ln.startswith("node label accuracy"))
    assert f"node label accuracy {100 * summary['node_label_accuracy']:.1f}%" in line
    for name, key in [("precision", "edge_precision"), ("recall", "edge_recall"), ("F1", "edge_f1")]:
        assert f"{name} {100 * summary[key]:.1f}%" in line
    assert out.index("mean GED") < out.index("node label accuracy")


def test_evaluate_truth_against_itself_scores_one(capsys, tmp_path, files):
    # a graph against itself: every node and edge is right (definition of the scores)
    out, summary, rows = evaluate_files(capsys, tmp_path, files["truth"], files["truth"])
    assert [summary[k] for k in NODE_EDGE_SCORES] == [1.0] * 4
    assert all(float(r[k]) == 1.0 for r in rows for k in NODE_EDGE_SCORES)
    assert "node label accuracy 100.0%" in out and "F1 100.0%" in out


def test_evaluate_n_jobs_gives_the_same_scores(capsys, tmp_path, demo, files):
    _, _, _, Gte = demo
    shifted = [g.copy() for g in Gte[2:] + Gte[:2]]
    for g in shifted:
        del g.graph["id"]  # unrelated molecules paired on purpose (ids would refuse the order)
    pred_path = write_jsonl(tmp_path / "shifted.jsonl", shifted)
    out1, summary1, rows1 = evaluate_files(capsys, tmp_path, pred_path, files["truth"])
    out2, summary2, rows2 = evaluate_files(capsys, tmp_path, pred_path, files["truth"], "--n-jobs", "2")
    assert summary1["exact_share"] == 1.0  # no pair stopped by the clock, so results are comparable
    assert summary2 == summary1
    assert rows2 == rows1
    assert out2 == out1


def test_evaluate_needs_the_truth(capsys, files):
    expect_usage_error(capsys, ["evaluate", files["truth"], "-q"], "give the true graphs to score against with --truth FILE")
    expect_usage_error(capsys, ["evaluate", files["truth"], files["truth"], "--truth", files["truth"], "-q"],
                       "give the true graphs once, with --truth")


@pytest.mark.parametrize("value", ["0", "-3"])
def test_evaluate_rejects_bad_n_jobs(capsys, files, value):
    expect_usage_error(capsys, ["evaluate", files["truth"], "--truth", files["truth"], "--n-jobs", value, "-q"],
                       f"--n-jobs must be a number of worker processes >= 1, or -1 for one per processor; got {value}.")


def test_evaluate_n_jobs_must_be_an_integer(capsys, files):
    with pytest.raises(SystemExit) as exc:
        main(["evaluate", str(files["truth"]), "--truth", str(files["truth"]), "--n-jobs", "two"])
    assert exc.value.code == 2
    assert "argument --n-jobs: invalid int value: 'two'" in capsys.readouterr().err


# --------------------------------------------------------------------------
# bad input: exit code 2 and a message on stderr
# --------------------------------------------------------------------------
def expect_usage_error(capsys, argv: list, *fragments: str) -> str:
    code, out, err = run(capsys, *argv)
    assert code == 2
    assert err.startswith(f"gwpred {argv[0]}: error: "), err
    for fragment in fragments:
        assert fragment in err, (fragment, err)
    assert "Traceback" not in err
    return err


def test_missing_features_file(capsys, tmp_path, files):
    missing = tmp_path / "missing.csv"
    expect_usage_error(capsys, ["fit", "--features", missing, "--graphs", files["train_g"],
                                "--model", tmp_path / "m.npz", "-q"],
                       "feature file not found", str(missing))
    assert not (tmp_path / "m.npz").exists()


def test_missing_graphs_file(capsys, tmp_path, files):
    missing = tmp_path / "missing.jsonl"
    expect_usage_error(capsys, ["fit", "--features", files["train_x"], "--graphs", missing,
                                "--model", tmp_path / "m.npz", "-q"],
                       "graph file not found", str(missing))


def test_missing_model_file(capsys, tmp_path, files):
    missing = tmp_path / "missing.npz"
    expect_usage_error(capsys, ["predict", "--model", missing, "--features", files["test_x"],
                                "--out", tmp_path / "p.jsonl", "-q"],
                       "model archive file not found", str(missing))
    assert not (tmp_path / "p.jsonl").exists()


def test_unsupported_graph_extension(capsys, tmp_path, files):
    expect_usage_error(capsys, ["predict", "--model", files["model"], "--features", files["test_x"],
                                "--out", tmp_path / "p.txt", "-q"],
                       "unsupported graph file extension '.txt'", ".jsonl, .graphml")


def test_evaluate_mismatched_counts(capsys, tmp_path, demo, files):
    short = write_jsonl(tmp_path / "short.jsonl", demo[3][:4])
    expect_usage_error(capsys, ["evaluate", short, "--truth", files["truth"], "-q"],
                       f"{short} holds 4 graphs but {files['truth']} holds {len(TEST)}",
                       "one prediction per true graph")


@pytest.mark.parametrize("command", ["fit", "predict"])
def test_nan_in_features(capsys, tmp_path, demo, files, command):
    X = (demo[0] if command == "fit" else demo[2]).copy()
    X[1, 0] = np.nan
    bad = write_csv(tmp_path / "nan.csv", X)
    if command == "fit":
        argv = ["fit", "--features", bad, "--graphs", files["train_g"], "--model", tmp_path / "m.npz", "-q"]
    else:
        argv = ["predict", "--model", files["model"], "--features", bad, "--out", tmp_path / "p.jsonl", "-q"]
    # the csv module wrote 'nan' on line 3 (header is line 1), column 2 (after the id)
    expect_usage_error(capsys, argv, "contains 1 non-finite value(s) (NaN or inf)", "line 3, column 2",
                       "impute or drop them")


@pytest.mark.parametrize("damage", ["truncated", "flipped"])
def test_corrupted_model_file(capsys, tmp_path, files, damage):
    raw = bytearray(files["model"].read_bytes())
    if damage == "truncated":
        raw = raw[: len(raw) // 2]
        fragment = "is not a valid .npz (zip) file; the file may be truncated or corrupted"
    else:
        raw[len(raw) // 3] ^= 0xFF  # inside the compressed training inputs
        fragment = "the file is corrupted"
    bad = tmp_path / "bad.npz"
    bad.write_bytes(bytes(raw))
    expect_usage_error(capsys, ["predict", "--model", bad, "--features", files["test_x"],
                                "--out", tmp_path / "p.jsonl", "-q"], fragment)


def test_fit_features_and_graphs_differ_in_length(capsys, tmp_path, files, demo):
    short = write_jsonl(tmp_path / "short.jsonl", demo[1][:-1])
    expect_usage_error(capsys, ["fit", "--features", files["train_x"], "--graphs", short,
                                "--model", tmp_path / "m.npz", "-q"],
                       f"X has {len(TRAIN)} rows but {len(TRAIN) - 1} graphs were given")


def test_predict_with_wrong_number_of_columns(capsys, tmp_path, files, demo):
    narrow = write_csv(tmp_path / "narrow.csv", demo[2][:, :2])
    expect_usage_error(capsys, ["predict", "--model", files["model"], "--features", narrow,
                                "--out", tmp_path / "p.jsonl", "-q"],
                       f"X has 2 columns but the model was fitted with {demo[2].shape[1]}")


def test_invalid_model_option_value(capsys, tmp_path, files):
    expect_usage_error(capsys, ["fit", "--features", files["train_x"], "--graphs", files["train_g"],
                                "--model", tmp_path / "m.npz", "--alpha", "2", "-q"],
                       "alpha must be a number in [0, 1]; got 2.0")


@pytest.mark.parametrize(
    "argv, fragment",
    [
        (["fit", "--features", "x.csv", "--graphs", "g.jsonl", "--model", "m.npz", "--kernel", "nope"],
         "invalid choice: 'nope'"),
        (["fit", "--features", "x.csv", "--graphs", "g.jsonl"], "the following arguments are required: --model"),
        (["fit", "--features", "x.csv", "--graphs", "g.jsonl", "--model", "m.npz", "--n-neighbors", "many"],
         "argument --n-neighbors: invalid int value: 'many'"),
    ],
)
def test_argparse_errors_exit_2(capsys, argv, fragment):
    with pytest.raises(SystemExit) as exc:
        main(argv)
    assert exc.value.code == 2
    assert fragment in capsys.readouterr().err


def test_demo_rejects_bad_test_size(capsys, tmp_path):
    expect_usage_error(capsys, ["demo", "--n-test", "0", "--out", tmp_path / "d", "-q"],
                       "--n-test must be between 1 and 2999; got 0")


def test_old_option_spellings_still_work_with_a_note(capsys, tmp_path):
    # renamed options (one vocabulary, README "Names") keep working for one release and say so
    code, _, err = run(capsys, "demo", "--test-size", "3", "--show", "1", "--top-k", "2", "--drawings", "0",
                       "--out", tmp_path / "d", "-q")
    assert code == 0, err
    for old, new in (("--test-size", "--n-test"), ("--show", "--drawings"), ("--top-k", "--n-neighbors")):
        assert f"gwpred: {old} is now called {new}" in err
    summary = json.loads((tmp_path / "d" / "summary.json").read_text())
    assert summary["test_size"] == 3 and summary["params"]["n_neighbors"] == 2


def test_demo_drawings_option(capsys, tmp_path):
    # the report's own advice ("raise --drawings to draw more") works on the demo too
    expect_usage_error(capsys, ["demo", "--drawings", "-1", "--out", tmp_path / "d", "-q"],
                       "--drawings must be at least 0; got -1")
    code, _, err = run(capsys, "demo", "--n-test", "3", "--drawings", "0", "--out", tmp_path / "e", "-q")
    assert code == 0, err
    assert "No drawings: only the first 0 items are drawn" in (tmp_path / "e" / "report.html").read_text()


# --------------------------------------------------------------------------
# demo
# --------------------------------------------------------------------------
def test_demo_small_run(capsys, tmp_path):
    out_dir = tmp_path / "demo"
    code, out, err = run(capsys, "demo", "--n-test", "10", "--drawings", "2", "--out", out_dir, "-q")
    assert code == 0, err
    # table rows, and the caution line on stderr
    lines = out.splitlines()
    ours = [ln for ln in lines if ln.startswith("gwpred (FGW barycenter)")]
    base = [ln for ln in lines if ln.startswith("1-NN retrieval")]
    assert len(ours) == 1 and len(base) == 1
    assert err.splitlines()[-1] == gwpred.cli.CAUTION
    assert "hypotheses" in err and "lab-safety" in err
    assert "2990 training and 10 held-out" in out

    pred = read_any(out_dir / "predicted.jsonl")
    truth = read_any(out_dir / "truth.jsonl")
    assert len(pred) == len(truth) == 10
    assert all({lab for _, lab in g.nodes(data="label")} <= {"C", "N", "O", "F"} for g in pred)

    summary = json.loads((out_dir / "summary.json").read_text())
    assert (summary["train_size"], summary["test_size"]) == (2990, 10)
    assert summary["gwpred"]["n"] == summary["nearest_neighbour"]["n"] == 10
    assert SUMMARY_KEYS <= set(summary["gwpred"])
    assert f"{summary['gwpred']['mean_ged']:.2f}" in ours[0]
    assert f"{summary['nearest_neighbour']['mean_ged']:.2f}" in base[0]

    png = out_dir / "predictions.png"
    data = png.read_bytes()
    assert data[:8] == b"\x89PNG\r\n\x1a\n"  # PNG signature (RFC 2083, from memory)
    import matplotlib.image

    img = matplotlib.image.imread(png)
    assert img.ndim == 3 and img.shape[0] > 100 and img.shape[1] > 100
    assert img.std() > 0  # not a blank image

    # the SMILES stored with each true graph describe the same heavy atoms (RDKit)
    Chem = pytest.importorskip("rdkit.Chem")
    for g in truth:
        mol = Chem.MolFromSmiles(g.graph["smiles"])
        assert mol is not None
        assert Counter(a.GetSymbol() for a in mol.GetAtoms()) == Counter(lab for _, lab in g.nodes(data="label"))


# --------------------------------------------------------------------------
# molecules: valence decoding and formula constraints
# --------------------------------------------------------------------------
def test_predict_with_formula_column(capsys, tmp_path, files, demo):
    # Reference for the formulas: hydrogens from the valences C 4, N 3, O 2, F 1
    # (common practice) of the true QM9 heavy-atom graphs.
    from gwpred.formula import formula_matches, graph_formula, hydrogen_counts

    _, _, _, truth = demo
    model = tmp_path / "m.npz"
    code, _, _ = run(capsys, "fit", "--features", str(files["train_x"]), "--graphs", str(files["train_gj"]),
                     "--model", str(model), "--valence", "-q", *MODEL_OPTS)
    assert code == 0
    formulas = [graph_formula(g) for g in truth]
    formulas[1] = ""  # no formula for this row
    fpath = tmp_path / "formulas.csv"
    with open(fpath, "w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh)
        w.writerow(["id", "Formula"])
        w.writerows([f"mol{i}", f] for i, f in enumerate(formulas))
    out = tmp_path / "pred.jsonl"
    code, stdout, stderr = run(capsys, "predict", "--model", str(model), "--features", str(files["test_x"]),
                               "--out", str(out), "--formulas", str(fpath), "-q")
    assert code == 0
    assert "hypotheses" in stderr  # the caution line
    pred = read_any(out)
    assert len(pred) == len(truth)
    for g, f in zip(pred, formulas):
        assert all(h >= 0 for h in hydrogen_counts(g).values())  # --valence
        assert not f or formula_matches(g, f)
    # a formula file with the wrong number of rows, or without the column
    (tmp_path / "short.txt").write_text("C2H6O\n", encoding="utf-8")
    expect_usage_error(capsys, ["predict", "--model", str(model), "--features", str(files["test_x"]), "--out",
                                str(out), "--formulas", str(tmp_path / "short.txt")], "holds 1 formulas")
    expect_usage_error(capsys, ["predict", "--model", str(model), "--features", str(files["test_x"]), "--out",
                                str(out), "--formulas", str(fpath), "--formula-column", "mf"], "no 'mf' column")


def test_output_format_never_changes_the_prediction(capsys, tmp_path, files):
    # The default model (valence="auto", on for element labels) writes the same graphs to every
    # format. References: networkx label-isomorphism between the files' graphs; RDKit parses and
    # sanitises every written SMILES (MolFromSmiles).
    Chem = pytest.importorskip("rdkit.Chem")
    graphs = {}
    for ext in (".jsonl", ".graphml", ".smi", ".sdf"):
        out = tmp_path / f"pred{ext}"
        code, stdout, stderr = run(capsys, "predict", "--model", str(files["model"]), "--features",
                                   str(files["test_x"]), "--out", str(out), "-q")
        assert code == 0, stderr
        assert "hypotheses" in stderr
        graphs[ext] = read_graphs(out)
        assert len(graphs[ext]) == len(TEST)
    for ext, gs in graphs.items():
        assert all(same_labeled_graph(g, h) for g, h in zip(graphs[".jsonl"], gs)), ext
    lines = [ln.split()[0] for ln in (tmp_path / "pred.smi").read_text(encoding="utf-8").splitlines() if ln.strip()]
    assert all(Chem.MolFromSmiles(s) is not None for s in lines)


def test_molecule_output_refuses_a_model_without_valence_rules(capsys, tmp_path, files):
    # a model fitted with --valence off keeps its (possibly invalid) decoding: the .smi writer
    # refuses it before any work instead of decoding differently for that format
    model = tmp_path / "novalence.npz"
    code, _, err = run(capsys, "fit", "--features", str(files["train_x"]), "--graphs", str(files["train_gj"]),
                       "--model", str(model), "--valence", "off", "-q", *MODEL_OPTS)
    assert code == 0, err
    expect_usage_error(capsys, ["predict", "--model", str(model), "--features", str(files["test_x"]),
                                "--out", str(tmp_path / "p.smi")], "--valence off", ".jsonl")
    assert not (tmp_path / "p.smi").exists()


# --------------------------------------------------------------------------
# parallel work: --n-jobs and --scheduler (a Dask cluster on 127.0.0.1)
# --------------------------------------------------------------------------
NO_DISTRIBUTED = "Dask distributed is not installed (pip install 'gwpred[distributed]')"
#: seconds allowed for the test cluster to start, stop, or answer
CLUSTER_TIMEOUT = 30


@pytest.fixture(scope="module")
def scheduler_address():
    """A Dask cluster with one worker thread in this process, listening on 127.0.0.1 only."""
    distributed = pytest.importorskip("distributed", reason=NO_DISTRIBUTED)
    with distributed.LocalCluster(
        n_workers=1, threads_per_worker=1, processes=False, protocol="tcp", host="127.0.0.1",
        dashboard_address=None, scheduler_kwargs={"dashboard_address": "127.0.0.1:0"},
    ) as local:
        yield local.scheduler_address


def free_loopback_port() -> int:
    """A port on 127.0.0.1 that nothing listens on (bound by the OS, then released)."""
    import socket

    with socket.socket(socket.AF_INET, socket.SOCK_STREAM) as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


@pytest.mark.parametrize("command", ["predict", "evaluate", "demo", "rank"])
def test_parallel_options_in_help(capsys, command):
    with pytest.raises(SystemExit) as exc:
        main([command, "--help"])
    assert exc.value.code == 0
    out = capsys.readouterr().out
    for opt in ("--n-jobs", "--scheduler ADDRESS", "--scheduler-timeout SECONDS", "dask scheduler"):
        assert opt in out, opt


def test_predict_and_evaluate_on_a_scheduler(capsys, tmp_path, files, scheduler_address):
    here, there = tmp_path / "here.jsonl", tmp_path / "there.jsonl"
    code, _, err = run(capsys, "predict", "--model", files["model"], "--features", files["test_x"], "--out", here, "-q")
    assert code == 0, err
    code, out, err = run(capsys, "predict", "--model", files["model"], "--features", files["test_x"], "--out", there,
                         "--scheduler", scheduler_address, "--scheduler-timeout", str(CLUSTER_TIMEOUT), "-q")
    assert code == 0, err
    assert f"parallel work on the Dask scheduler at {scheduler_address}: 1 worker, 1 thread" in out
    assert there.read_text() == here.read_text()

    out1, summary1, rows1 = evaluate_files(capsys, tmp_path, here, files["truth"], "--time-limit", "60")
    out2, summary2, rows2 = evaluate_files(capsys, tmp_path, here, files["truth"], "--time-limit", "60",
                                           "--scheduler", scheduler_address)
    assert summary1["exact_share"] == 1.0  # no pair stopped by the clock, so results are comparable
    assert (summary2, rows2) == (summary1, rows1)


@pytest.mark.parametrize("command", ["predict", "evaluate", "demo"])
def test_unreachable_scheduler_exits_2(capsys, tmp_path, files, command):
    pytest.importorskip("distributed", reason=NO_DISTRIBUTED)
    address = f"tcp://127.0.0.1:{free_loopback_port()}"
    argv = {
        "predict": ["predict", "--model", files["model"], "--features", files["test_x"], "--out", tmp_path / "p.jsonl"],
        "evaluate": ["evaluate", files["truth"], "--truth", files["truth"]],
        "demo": ["demo", "--out", tmp_path / "demo"],
    }[command]
    expect_usage_error(capsys, [*argv, "--scheduler", address, "--scheduler-timeout", "1", "-q"],
                       f"no Dask scheduler answered at '{address}' within 1 s",
                       "check that a scheduler runs there ('dask scheduler' prints its address)")
    assert not (tmp_path / "p.jsonl").exists() and not (tmp_path / "demo").exists()


@pytest.mark.parametrize(
    "options, fragment",
    [
        (["--scheduler", "{address}", "--n-jobs", "1"],
         "--n-jobs 1 runs everything in this process and leaves the cluster at {address} idle"),
        (["--scheduler", "{address}", "--scheduler-timeout", "0"],
         "--scheduler-timeout must be a positive number of seconds; got 0"),
        (["--scheduler", "127.0.0.1"], "address '127.0.0.1' is not a Dask scheduler address (missing port"),
        (["--n-jobs", "0"], "--n-jobs must be a number of worker processes >= 1, or -1 for one per processor; got 0."),
    ],
)
def test_predict_rejects_bad_parallel_options(capsys, tmp_path, files, options, fragment):
    # these fail before any connection; the address is still one where nothing listens
    if "--scheduler" in options:
        pytest.importorskip("distributed", reason=NO_DISTRIBUTED)
    address = f"tcp://127.0.0.1:{free_loopback_port()}"
    options = [o.format(address=address) for o in options]
    expect_usage_error(capsys, ["predict", "--model", files["model"], "--features", files["test_x"],
                                "--out", tmp_path / "p.jsonl", *options, "-q"], fragment.format(address=address))


def test_predict_n_jobs_gives_the_same_graphs(capsys, tmp_path, files):
    one, two = tmp_path / "one.jsonl", tmp_path / "two.jsonl"
    for path, n_jobs in ((one, "1"), (two, "2")):
        code, _, err = run(capsys, "predict", "--model", files["model"], "--features", files["test_x"],
                           "--out", path, "--n-jobs", n_jobs, "-q")
        assert code == 0, err
    assert two.read_text() == one.read_text()


@pytest.mark.parametrize("command", ["fit", "predict", "evaluate-summary", "evaluate-items", "rank", "report", "demo",
                                     "compare"])
def test_output_locations_are_checked_before_any_work(capsys, tmp_path, files, command):
    # an output in a folder that does not exist is refused at once (exit 2), not after the work;
    # demo and compare leave no folder behind
    where = tmp_path / "nodir"
    argv = {
        "fit": ["fit", "--features", files["train_x"], "--graphs", files["train_gj"], "--model", where / "m.npz"],
        "predict": ["predict", "--model", files["model"], "--features", files["test_x"], "--out", where / "p.jsonl"],
        "evaluate-summary": ["evaluate", files["truth"], "--truth", files["truth"], "--summary", where / "s.json"],
        "evaluate-items": ["evaluate", files["truth"], "--truth", files["truth"], "--items", where / "i.csv"],
        "rank": ["rank", "--model", files["model"], "--features", files["test_x"], "--candidates", files["truth"],
                 "--out", where / "r.jsonl"],
        "report": ["report", files["truth"], "--out", where / "r.html"],
        "demo": ["demo", "--out", where / "demo"],
        "compare": ["compare", "--data", "demo", "--out", where / "cmp"],
    }[command]
    expect_usage_error(capsys, [*argv, "-q"], f"folder {str(where)!r} does not exist; create it first")
    assert not where.exists()


def test_demo_and_compare_leave_no_folder_when_refused(capsys, tmp_path):
    expect_usage_error(capsys, ["demo", "--out", tmp_path / "d", "--n-test", "0", "-q"], "--n-test must be")
    expect_usage_error(capsys, ["compare", "--data", "demo", "--out", tmp_path / "c", "--fgw-rows", "-1", "-q"],
                       "--fgw-rows must be 0")
    assert not (tmp_path / "d").exists() and not (tmp_path / "c").exists()


def test_report_with_the_model_shows_heat_maps_and_neighbours(capsys, tmp_path, files):
    # `gwpred report` given the model and inputs behind the predictions draws what the demo's page
    # draws: barycenter heat maps and the training graphs each prediction leaned on
    pred = tmp_path / "pred.jsonl"
    code, _, err = run(capsys, "predict", "--model", files["model"], "--features", files["test_x"], "--out", pred, "-q")
    assert code == 0, err
    plain, full = tmp_path / "plain.html", tmp_path / "full.html"
    assert run(capsys, "report", pred, "--truth", files["truth"], "--out", plain, "--drawings", "2", "-q")[0] == 0
    code, _, err = run(capsys, "report", pred, "--truth", files["truth"], "--out", full, "--drawings", "2",
                       "--model", files["model"], "--features", files["test_x"], "-q")
    assert code == 0, err
    assert "training #" not in plain.read_text() and "training #" in full.read_text()
    expect_usage_error(capsys, ["report", pred, "--out", tmp_path / "x.html", "--model", files["model"], "-q"],
                       "--model and --features go together")
    expect_usage_error(capsys, ["report", pred, "--out", tmp_path / "x.html", "--model", files["model"],
                                "--features", files["train_x"], "-q"], "give the inputs the predictions were made from")


def test_predict_hypotheses_files_and_report(capsys, tmp_path, files, demo):
    # References: RDKit reads the SDF back (SDMolSupplier: titles and data fields), networkx
    # is_isomorphic tells that no two hypotheses of an input are the same molecule, and the
    # JSON Lines file is read by the standard json module as well as by report --ranked.
    Chem = pytest.importorskip("rdkit.Chem")
    Xtr, Gtr, _, truth = demo
    model = tmp_path / "m.npz"
    code, stdout, _ = run(capsys, "fit", "--features", str(files["train_x"]), "--graphs", str(files["train_gj"]),
                          "--model", str(model), "--calibration-share", "0.1", "-q", *MODEL_OPTS)
    assert code == 0
    out = tmp_path / "hyps.jsonl"
    code, stdout, stderr = run(capsys, "predict", "--model", str(model), "--features", str(files["test_x"]),
                               "--out", str(out), "--hypotheses", "4", "-q")
    assert code == 0 and "best first" in stdout and "hypotheses" in stderr  # the caution line
    records = [json.loads(line) for line in out.read_text(encoding="utf-8").splitlines()]
    assert [r["row"] for r in records] == list(range(len(truth)))
    for r in records:
        assert r["calibrated"] is True and 1 <= len(r["ranked"]) <= 4
        assert [h["rank"] for h in r["ranked"]] == list(range(1, len(r["ranked"]) + 1))
        scores = [h["score"] for h in r["ranked"]]
        assert scores == sorted(scores, reverse=True)
        assert all(0 <= h["confidence"] <= h["confidence_near"] <= 1 for h in r["ranked"])
        graphs = [nx.node_link_graph(h["graph"], edges="edges") for h in r["ranked"]]
        assert not any(same_labeled_graph(a, b) for a, b in itertools.combinations(graphs, 2))
    sdf = tmp_path / "hyps.sdf"
    code, _, _ = run(capsys, "predict", "--model", str(model), "--features", str(files["test_x"]),
                     "--out", str(sdf), "--hypotheses", "4", "-q")
    assert code == 0
    mols = [m for m in Chem.SDMolSupplier(str(sdf))]
    assert all(m is not None for m in mols) and len(mols) == sum(len(r["ranked"]) for r in records)
    assert mols[0].GetProp("_Name") == f"{records[0]['id']}#1" and mols[0].GetProp("rank") == "1"
    assert mols[0].GetProp("input_id") == records[0]["id"]
    assert float(mols[0].GetProp("confidence")) == pytest.approx(records[0]["ranked"][0]["confidence"])
    # the report shows them like ranked candidates, with the confidence plot against the truth
    page = tmp_path / "r.html"
    code, _, _ = run(capsys, "report", str(out), "--model", str(model), "--features", str(files["test_x"]),
                     "--truth", str(files["truth"]), "--out", str(page), "-q")
    assert code == 0
    html = page.read_text(encoding="utf-8")
    assert "hypothesis #1" in html and "expected calibration error" in html
    expect_usage_error(capsys, ["predict", "--model", str(model), "--features", str(files["test_x"]), "--out",
                                str(out), "--hypotheses", "0"], "--hypotheses must be at least 1")


# --------------------------------------------------------------------------
# fingerprint search


def test_fit_fingerprint_search_on_morgan_fingerprints(capsys, tmp_path, demo, files):
    # features = RDKit Morgan fingerprints (radius 2, 2048 bits) of the demo's QM9 molecules:
    # fit checks them and predict edits towards them; every written SMILES parses (RDKit)
    Chem = pytest.importorskip("rdkit.Chem")
    from gwpred.chem import morgan_fingerprints

    Xtr, Gtr, _, Gte = demo
    np.save(tmp_path / "train.npy", morgan_fingerprints(Gtr))
    np.save(tmp_path / "test.npy", morgan_fingerprints(Gte[:4]))
    model = tmp_path / "fp.npz"
    code, stdout, err = run(capsys, "fit", "--features", tmp_path / "train.npy", "--graphs", files["train_gj"],
                       "--model", model, "--kernel", "tanimoto", "--fingerprint-search", "--search-width", "2", "-q")
    assert code == 0, err
    assert "fingerprint search on: the features are Morgan bits of radius 2, 2048 long" in stdout
    assert gwpred.load_model(model).fingerprint_search is True
    out = tmp_path / "pred.smi"
    code, _, err = run(capsys, "predict", "--model", model, "--features", tmp_path / "test.npy", "--out", out, "-q")
    assert code == 0, err
    lines = [ln.split()[0] for ln in out.read_text(encoding="utf-8").splitlines() if ln.strip()]
    assert len(lines) == 4 and all(Chem.MolFromSmiles(s) is not None for s in lines)
    # spectra are not fingerprints: refused with the reason, no model written
    expect_usage_error(capsys, ["fit", "--features", files["train_x"], "--graphs", files["train_gj"],
                                "--model", tmp_path / "no.npz", "--fingerprint-search", "on"],
                       "fingerprint_search=True needs the rows of X to be the Morgan fingerprints")
    assert not (tmp_path / "no.npz").exists()

"""The ``gwpred`` command line: parse, call the library, print tables.

Exit codes: 0 success; 2 bad usage or bad input (a message says what to do);
1 an unexpected failure.
"""

from __future__ import annotations

import argparse
import csv
import importlib
import json
import sys
import time
import warnings
from collections.abc import Sequence
from contextlib import ExitStack
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np

from ._utils import CAUTION, atomic_open, atomic_write_text
from ._version import __version__

if TYPE_CHECKING:  # for annotations only; the commands import the library when they run
    from .model import BarycenterGraphPredictor

__all__ = ["CAUTION", "UsageError", "build_parser", "main"]

# Library modules are imported inside the commands: `gwpred --help` stays fast
# (scikit-learn and POT take over a second to import).


class _Names(Sequence):
    """Method names of a library table (``KERNELS``, ``DECODERS``, ``SCORERS``), read on first use.

    argparse takes it as ``choices``: the table's module is imported only
    when an option is checked or a subcommand's help is shown.
    """

    def __init__(self, module: str, table: str, extra: Sequence[str] = ()) -> None:
        self._where = (module, table)
        self._extra = tuple(extra)
        self._names: list[str] | None = None

    def _load(self) -> list[str]:
        if self._names is None:
            module, table = self._where
            self._names = [*getattr(importlib.import_module(f"gwpred.{module}"), table), *self._extra]
        return self._names

    def __getitem__(self, i: Any) -> Any:
        return self._load()[i]

    def __len__(self) -> int:
        return len(self._load())

    def __contains__(self, value: object) -> bool:
        return value in self._load()


_KERNELS = _Names("weights", "KERNELS", extra=("precomputed", "learned"))
_DECODERS = _Names("model.steps", "DECODERS")
_WEIGHT_MODELS = _Names("model.estimator", "WEIGHT_MODELS")
_SCORERS = _Names("ranking", "SCORERS")
_OUTPUT_KERNELS = _Names("ranking", "OUTPUT_KERNELS")


class UsageError(Exception):
    """Bad input from the user; printed without a traceback, exit code 2."""


def _renamed(new: str) -> type[argparse.Action]:
    """An argparse action for an option's old spelling: it still works, with a note naming the new one."""

    class Renamed(argparse.Action):
        def __call__(self, parser: Any, namespace: argparse.Namespace, values: Any, option: str | None = None) -> None:
            print(f"gwpred: {option} is now called {new}; the old name will be removed in the next release",
                  file=sys.stderr)
            setattr(namespace, self.dest, values)

    return Renamed


def _json_object(text: str) -> dict[str, Any]:
    """An option value holding a JSON object."""
    try:
        value = json.loads(text)
    except json.JSONDecodeError as err:
        raise argparse.ArgumentTypeError(f"not valid JSON ({err}): {text!r}") from err
    if not isinstance(value, dict):
        raise argparse.ArgumentTypeError(f"expected a JSON object like '{{\"dim\": 64}}', got {text!r}")
    return value


def _model_params(args: argparse.Namespace) -> dict[str, Any]:
    if args.embedding is not None and args.kernel != "learned":
        raise UsageError("--embedding sets the training of --kernel learned; add --kernel learned or drop it")
    return {
        "kernel": args.kernel,
        "embedding": args.embedding,
        "gamma": args.gamma,
        "ridge": args.ridge,
        "weighting": args.weighting,
        "weight_model": args.weight_model,
        "local_size": args.local_size,
        "n_neighbors": args.n_neighbors,
        "alpha": args.alpha,
        "decoding": args.decoding,
        "consensus": args.consensus,
        "valence": {"auto": "auto", "on": True, "off": False}[args.valence],
        "node_label": args.node_label,
        "edge_label": _edge_label(args),
        "random_state": args.seed,
        "progress": not args.quiet,
        "predict_with": args.predict_with,
        "fingerprint_search": {"auto": "auto", "on": True, "off": False}[args.fingerprint_search],
        "search_width": args.search_width,
    }


def _add_label_options(p: Any) -> None:
    p.add_argument("--node-label", default="label", help="node attribute holding labels (default: label)")
    p.add_argument("--edge-label", default="label",
                   help="edge attribute holding labels; 'none' ignores edge labels (default: label)")


def _edge_label(args: argparse.Namespace) -> str | None:
    return None if args.edge_label.lower() == "none" else args.edge_label


def _add_model_options(p: argparse.ArgumentParser, old_top_k: bool = True, kernel_default: str = "rbf") -> None:
    g = p.add_argument_group("model")
    if old_top_k:  # before 0.2, --top-k was the number of training graphs per prediction
        g.add_argument("--top-k", dest="n_neighbors", type=int, action=_renamed("--n-neighbors"), default=argparse.SUPPRESS,
                       help=argparse.SUPPRESS)
    g.add_argument("--kernel", default="rbf", choices=_KERNELS, metavar="KERNEL",
                   help=f"input kernel: %(choices)s (default: {kernel_default})")
    g.add_argument("--embedding", type=_json_object, default=None, metavar="JSON",
                   help="with --kernel learned: training options of the input embedding as a JSON object, e.g. "
                        "'{\"dim\": 64, \"conv\": [16, 9, 4], \"output_kernel\": \"fingerprint\"}' "
                        "(needs the neural extra, PyTorch)")
    g.add_argument("--gamma", type=float, default=None,
                   help="rbf/laplacian bandwidth (default: median heuristic)")
    g.add_argument("--ridge", type=float, default=1e-3, help="kernel ridge regularisation (default: 1e-3)")
    g.add_argument("--weighting", default="ridge", choices=["ridge", "knn"],
                   help="weights over training graphs (default: ridge)")
    g.add_argument("--weight-model", default="auto", choices=_WEIGHT_MODELS, metavar="MODEL",
                   help="kernel ridge solve: %(choices)s; dense: one solve over all training inputs (memory "
                        "grows as n^2), local: per input, a solve over its --local-size most similar training "
                        "inputs (for large training sets), auto: dense up to 5,000 training inputs (default: auto)")
    g.add_argument("--local-size", type=int, default=500,
                   help="training inputs per local solve (default: 500)")
    g.add_argument("--n-neighbors", type=int, default=10,
                   help="training graphs per prediction, the largest weights (default: 10)")
    g.add_argument("--alpha", type=float, default=0.9,
                   help="FGW trade-off: 0 labels only, 1 structure only (default: 0.9)")
    g.add_argument("--decoding", default="anchored", choices=_DECODERS, metavar="DECODER",
                   help="%(choices)s: decode as edits of the start graph (anchored) or from the barycenter "
                        "alone (free) (default: anchored)")
    g.add_argument("--consensus", type=float, default=0.8,
                   help="agreement needed to edit the start graph's edges, in [0.5, 1] (default: 0.8)")
    g.add_argument("--valence", nargs="?", const="on", default="auto", choices=["auto", "on", "off"],
                   help="molecules: decode graphs that obey valences (C 4, N 3, O 2, F 1; node labels are "
                        "element symbols, edge labels bond orders); auto: on when every training node label "
                        "is an element symbol and every edge label a bond order, off for other graphs; a bare "
                        "--valence means on (default: auto)")
    g.add_argument("--predict-with", default="auto", choices=["auto", "decoding", "hypotheses"],
                   help="what predict returns: the decoded barycenter, or the first of the generated hypotheses "
                        "(more often exact, tens of times slower, one process); auto takes the first hypothesis "
                        "where it was closer to the truth on the calibration pairs (fit --calibration-share), "
                        "else the decoding (default: auto)")
    g.add_argument("--fingerprint-search", nargs="?", const="on", default="off", choices=["auto", "on", "off"],
                   help="molecules from Morgan fingerprints: edit each prediction until its own fingerprint "
                        "matches the input as closely as a beam search finds (seconds per molecule, RDKit); on: "
                        "check at fit that every feature row is the Morgan fingerprint of its training molecule "
                        "(radius 1-3, bits or counts) and stop if not; auto: on only when they are; a bare "
                        "--fingerprint-search means on (default: off)")
    g.add_argument("--search-width", type=int, default=5,
                   help="molecules kept per round of the fingerprint search (default: 5)")
    _add_label_options(g)
    g.add_argument("--seed", type=int, default=0, help="random seed (default: 0)")


#: Seconds per graph edit distance before settling for bounds, in every command.
TIME_LIMIT = 10.0


def _add_time_limit(p: argparse.ArgumentParser) -> None:
    p.add_argument("--time-limit", type=float, default=TIME_LIMIT, metavar="SECONDS",
                   help=f"seconds per graph edit distance before settling for bounds (default: {TIME_LIMIT:g})")


def _table(rows: list[tuple[str, dict]]) -> str:
    head = f"{'method':<24}{'mean GED':>9}{'median':>8}{'exact match':>13}{'right size':>12}{'connected':>11}"
    lines = [head, "-" * len(head)]
    for name, s in rows:
        lines.append(
            f"{name:<24}{s['mean_ged']:>9.2f}{s['median_ged']:>8.1f}{100 * s['exact_match_rate']:>12.1f}%"
            f"{100 * s['right_size_rate']:>11.1f}%{100 * s['connected_rate']:>10.1f}%"
        )
    return "\n".join(lines)


def _formulas(args: argparse.Namespace, n_rows: int) -> list[str | None] | None:
    """The --formulas file's formulas, one per input row, or None without the option."""
    from .io import read_formulas

    if not args.formulas:
        return None
    formulas = read_formulas(args.formulas, args.formula_column)
    if len(formulas) != n_rows:
        raise UsageError(
            f"{args.formulas} holds {len(formulas)} formulas but {args.features} has {n_rows} "
            "rows; give one formula (or an empty cell) per input row"
        )
    return formulas


def _add_id_options(p: argparse.ArgumentParser) -> None:
    g = p.add_argument_group("sample ids (kept with every result)")
    g.add_argument("--id-column", metavar="COLUMN",
                   help="column of --features holding sample ids: its header, or its number counting from 1 "
                        "(default: the first column when it is headed 'id')")
    g.add_argument("--ids", metavar="FILE",
                   help="sample ids, one per input row: .txt with one per line, or .csv/.tsv with an 'id' "
                        "column (for .npy features, or to override the features file's ids)")


def _read_inputs(args: argparse.Namespace) -> tuple[np.ndarray, list[str] | None]:
    """--features with its sample ids (from --id-column, an 'id' column, or --ids)."""
    from .io import read_features, read_ids

    X, ids = read_features(args.features, return_ids=True, id_column=getattr(args, "id_column", None))
    if getattr(args, "ids", None):
        given = read_ids(args.ids)
        if len(given) != X.shape[0]:
            raise UsageError(f"{args.ids} holds {len(given)} ids but {args.features} has {X.shape[0]} rows; "
                             "give one id per input row, in the same order")
        ids = given
    return X, ids


def _check_same_ids(ours: list | None, theirs: list, what: str, where: str) -> str | None:
    """Ids of two files read row by row must agree: a mismatch means the rows are out of order.

    Two naming schemes that share no id at all (sample codes against compound names, say) are
    not a mismatch: the ids of ``where`` are kept, and a note saying so is returned.
    """
    if ours is None or any(t is None for t in (*ours, *theirs)):
        return None
    a, b = [str(v) for v in ours], [str(v) for v in theirs]
    if a == b:
        return None
    if not set(a) & set(b):
        return f"note: the ids in {where} and {what} share no name; the results carry those of {where}"
    r = next(r for r, (x, y) in enumerate(zip(a, b)) if x != y)
    raise UsageError(f"row {r}: id {a[r]!r} in {where} but {b[r]!r} in {what}; the files must list the same "
                     "samples in the same order")


def _n_jobs(args: argparse.Namespace) -> int | None:
    """--n-jobs checked: None when not given (and no --scheduler), -1 by default with --scheduler."""
    n = args.n_jobs
    if n is None:
        return -1 if args.scheduler else None
    if n == 0 or n < -1:
        raise UsageError("--n-jobs must be a number of worker processes >= 1, or -1 for one per "
                         f"processor; got {n}.")
    if n == 1 and args.scheduler:
        raise UsageError(f"--n-jobs 1 runs everything in this process and leaves the cluster at "
                         f"{args.scheduler} idle; drop --n-jobs (with --scheduler the cluster's workers "
                         "decide how much runs at once) or drop --scheduler")
    return n


def _on_scheduler(args: argparse.Namespace, stack: ExitStack) -> None:
    """With --scheduler: connect to it; the command's parallel work runs there until ``stack`` closes."""
    if not getattr(args, "scheduler", None):
        return
    from .parallel import cluster

    _n_jobs(args)  # a contradicting --n-jobs fails before any connection is tried
    if not args.scheduler_timeout > 0:
        raise UsageError(f"--scheduler-timeout must be a positive number of seconds; got {args.scheduler_timeout:g}")
    try:
        client = stack.enter_context(cluster(args.scheduler, timeout=args.scheduler_timeout))
    except ConnectionError as err:
        raise UsageError(str(err)) from None
    threads = client.nthreads()
    n, t = len(threads), sum(threads.values())
    print(f"parallel work on the Dask scheduler at {args.scheduler}: {n} worker{'s' * (n != 1)}, "
          f"{t} thread{'s' * (t != 1)}")


def _output_path(value: str, option: str, folder: bool = False) -> Path:
    """Check an output location before any work: its parent folder must exist (no result lost late)."""
    path = Path(value)
    if not path.parent.is_dir():
        raise UsageError(f"{option} {value}: folder {str(path.parent)!r} does not exist; create it first "
                         "(checked before any work is done)")
    if not folder and path.is_dir():
        raise UsageError(f"{option} {value} is a folder; give a file name")
    if folder and path.exists() and not path.is_dir():
        raise UsageError(f"{option} {value} is a file; give a folder (it is created if missing)")
    return path


# ----------------------------------------------------------------- commands
def cmd_fit(args: argparse.Namespace) -> int:
    from .io import read_graphs
    from .model import BarycenterGraphPredictor, save_model

    _output_path(args.model, "--model")
    X, ids = _read_inputs(args)
    graphs = read_graphs(args.graphs)
    note = None
    if ids is not None and len(ids) == len(graphs):
        note = _check_same_ids(ids, [g.graph.get("id") for g in graphs], args.graphs, args.ids or args.features)
        for g, i in zip(graphs, ids):
            g.graph["id"] = i  # kept by the model: reports name the training graphs by them
    t0 = time.perf_counter()
    model = BarycenterGraphPredictor(**_model_params(args)).fit(X, graphs, calibration_share=args.calibration_share)
    save_model(model, args.model)
    print(f"fitted on {len(graphs)} graphs in {time.perf_counter() - t0:.1f} s; "
          f"node labels {model.labels_.node_labels_}, edge labels {model.labels_.edge_labels_}")
    spec = model.fingerprint_spec_
    if spec is not None:
        print(f"fingerprint search on: the features are Morgan {'counts' if spec.counts else 'bits'} of radius "
              f"{spec.radius}, {spec.n_bits} long")
    elif args.fingerprint_search == "auto":
        print("fingerprint search off: the features are not Morgan fingerprints of the training graphs")
    print(f"model written to {args.model}")
    if note:
        print(note)
    return 0


def cmd_predict(args: argparse.Namespace) -> int:
    from .io import GRAPH_EXTENSIONS, MOLECULE_EXTENSIONS, write_graphs
    from .model import load_model

    n_jobs = _n_jobs(args)
    out = _output_path(args.out, "--out")
    if out.suffix.lower() not in GRAPH_EXTENSIONS:
        raise UsageError(f"--out {args.out}: unsupported graph file extension '{out.suffix}'; use one of "
                         f"{', '.join(GRAPH_EXTENSIONS)}")
    model = load_model(args.model)
    model.set_params(progress=not args.quiet)
    if n_jobs is not None:
        model.set_params(n_jobs=n_jobs)
    X, ids = _read_inputs(args)
    formulas = _formulas(args, X.shape[0])
    if out.suffix.lower() in MOLECULE_EXTENSIONS and not model.valence_:
        # the file format never changes the prediction: refuse rather than decode differently
        raise UsageError(f"--out {args.out}: molecule files hold valid molecules only, but {args.model} decodes "
                         "without valence rules (fitted with --valence off, as every model saved before gwpred 0.2 "
                         "is, or its labels are not element symbols and bond orders); write .jsonl or .graphml, "
                         "or refit with --valence auto")
    if args.hypotheses is not None:
        return _write_hypotheses(args, model, X, ids, formulas)
    graphs = model.predict(X, formulas=formulas)
    for r, g in enumerate(graphs):
        if ids is not None:
            g.graph["id"] = ids[r]  # the sample id goes with its prediction into every format
        if formulas is not None and formulas[r] is not None:
            g.graph["formula_given"] = formulas[r]
    write_graphs(args.out, graphs)
    print(f"{len(graphs)} predicted graphs written to {args.out}")
    print(CAUTION, file=sys.stderr)  # with the results, not inside them (stdout may be a data pipe)
    return 0


def _write_hypotheses(args: argparse.Namespace, model: Any, X: Any, ids: list[str] | None,
                      formulas: list[str | None] | None) -> int:
    """``predict --hypotheses K``: the K best generated graphs per input, best first."""
    from .io import write_hypotheses

    if args.hypotheses < 1:
        raise UsageError(f"--hypotheses must be at least 1 (graphs per input); got {args.hypotheses}")
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", UserWarning)
        lists = model.predict_hypotheses(X, top_k=args.hypotheses, formulas=formulas)
    write_hypotheses(args.out, lists, ids, formulas)
    short = sum(bool(h.note) for h in lists)
    print(f"{sum(len(h) for h in lists)} hypotheses for {len(lists)} inputs (up to {args.hypotheses} each, best "
          f"first) written to {args.out}")
    if short:
        print(f"{short} inputs have fewer: their pools held no more distinct graphs")
    if not any(h.calibrated for h in lists):
        print("confidences are raw scores, not probabilities: fit with --calibration-share to calibrate them")
    for w in caught:
        if "fewer than top_k" not in str(w.message):
            print(f"warning: {w.message}", file=sys.stderr)
    print(CAUTION, file=sys.stderr)
    return 0


def cmd_evaluate(args: argparse.Namespace) -> int:
    from .io import read_graphs
    from .metrics import summarize

    n_jobs = _n_jobs(args) or 1
    for option, value in (("--summary", args.summary), ("--items", args.items)):
        if value:
            _output_path(value, option)
    if args.truth_old is not None:
        if args.truth:
            raise UsageError("give the true graphs once, with --truth")
        print("gwpred: the true graphs as a second argument of evaluate are now given with --truth; the old "
              "form will be removed in the next release", file=sys.stderr)
        args.truth = args.truth_old
    if not args.truth:
        raise UsageError("give the true graphs to score against with --truth FILE")
    pred = read_graphs(args.predicted)
    true = read_graphs(args.truth)
    if len(pred) != len(true):
        raise UsageError(
            f"{args.predicted} holds {len(pred)} graphs but {args.truth} holds {len(true)}; "
            "they must be in the same order, one prediction per true graph."
        )
    note = _check_same_ids([g.graph.get("id") for g in pred], [g.graph.get("id") for g in true], args.truth,
                           args.predicted)
    summary = summarize(pred, true, node_label=args.node_label, edge_label=_edge_label(args),
                        time_limit=args.time_limit, progress=not args.quiet, n_jobs=n_jobs)
    print(_table([(Path(args.predicted).name, summary)]))
    print(f"node label accuracy {100 * summary['node_label_accuracy']:.1f}%; edges under the GED node map: "
          f"precision {100 * summary['edge_precision']:.1f}%, recall {100 * summary['edge_recall']:.1f}%, "
          f"F1 {100 * summary['edge_f1']:.1f}% (means over pairs)")
    print(f"GED solved exactly for {100 * summary['exact_share']:.1f}% of pairs")
    if note:
        print(note)
    if args.summary:
        out = {k: v for k, v in summary.items() if k != "items"}
        atomic_write_text(args.summary, json.dumps(out, indent=2))
    if args.items:
        extra = _item_columns(pred, true, args.node_label, _edge_label(args))
        with atomic_open(Path(args.items), binary=False) as fh:
            w = csv.DictWriter(fh, fieldnames=["index", *extra[0].keys(), *summary["items"][0].keys()])
            w.writeheader()
            for i, item in enumerate(summary["items"]):
                w.writerow({"index": i, **extra[i], **item})
    return 0


def _item_columns(pred: list, true: list, node_label: str, edge_label: str | None) -> list[dict[str, str]]:
    """Per pair: the sample id, and for molecules the formulas and SMILES of both graphs."""
    from ._utils import has_extra
    from .chem import graph_to_smiles  # RDKit itself is imported only when a SMILES is made
    from .formula import graph_formula
    from .report import is_molecular

    molecular = edge_label is not None and is_molecular([*pred, *true], node_label)
    smiles = molecular and has_extra("rdkit")
    rows = []
    for p, t in zip(pred, true):
        row = {"id": str(p.graph.get("id", t.graph.get("id", "")))}
        for name, g in (("predicted", p), ("true", t)) if molecular else ():
            try:
                row[f"formula_{name}"] = graph_formula(g, node_label=node_label, edge_label=edge_label)
            except ValueError:  # an atom beyond its valence: no hydrogen count exists
                row[f"formula_{name}"] = graph_formula(g, node_label=node_label, edge_label=edge_label,
                                                       hydrogens=False) + " (invalid)"
        for name, g in (("predicted", p), ("true", t)) if smiles else ():
            try:
                row[f"smiles_{name}"] = graph_to_smiles(g, node_label=node_label, edge_label=edge_label)
            except (ValueError, TypeError):
                row[f"smiles_{name}"] = ""  # not a valid molecule
        rows.append(row)
    return rows


def cmd_demo(args: argparse.Namespace) -> int:
    from .datasets import load_demo
    from .io import write_graphs
    from .metrics import summarize
    from .model import BarycenterGraphPredictor
    from .plot import comparison_grid

    t_start = time.perf_counter()
    n_jobs = _n_jobs(args) or 1
    out = _output_path(args.out, "--out", folder=True)
    X, graphs, smiles = load_demo(return_smiles=True)
    rng = np.random.default_rng(args.seed)
    perm = rng.permutation(len(graphs))
    if not 1 <= args.n_test < len(graphs):
        raise UsageError(f"--n-test must be between 1 and {len(graphs) - 1}; got {args.n_test}.")
    if args.drawings < 0:
        raise UsageError(f"--drawings must be at least 0; got {args.drawings}.")
    out.mkdir(exist_ok=True)  # only after the arguments passed: a refused run leaves no folder
    test, train = perm[: args.n_test], perm[args.n_test:]
    print(f"demo: spectrum -> heavy-atom skeleton, {len(train)} training and {len(test)} held-out "
          f"QM9 molecules (seed {args.seed})")
    model = BarycenterGraphPredictor(**_model_params(args), n_jobs=n_jobs)
    model.fit(X[train], [graphs[i] for i in train])
    t0 = time.perf_counter()
    pred = model.predict(X[test])
    t_pred = time.perf_counter() - t0
    # baseline: the most similar training spectrum's molecule (same kernel and bandwidth)
    nearest = model.input_kernel(X[test], X[train]).argmax(1)
    truth = [graphs[i] for i in test]
    retrieved = []
    for t, j in zip(truth, nearest):  # a retrieved graph answers for its test row: it takes the row's id
        r = graphs[train[j]].copy()
        r.graph.update(id=t.graph["id"], retrieved_from=graphs[train[j]].graph["id"])
        retrieved.append(r)
    for g, t in zip(pred, truth):
        g.graph["id"] = t.graph["id"]
    print(f"predicted {len(test)} graphs in {t_pred:.1f} s; scoring with exact graph edit distance ...")
    ours = summarize(pred, truth, time_limit=args.time_limit, progress=not args.quiet, n_jobs=n_jobs)
    base = summarize(retrieved, truth, time_limit=args.time_limit, progress=not args.quiet, n_jobs=n_jobs)
    print()
    print(_table([("gwpred (FGW barycenter)", ours), ("1-NN retrieval", base)]))
    print(f"GED solved exactly for {100 * min(ours['exact_share'], base['exact_share']):.1f}% of pairs "
          "(the rest: best upper bound within the time limit)")
    for i, g in zip(test, truth):
        g.graph["smiles"] = smiles[i]
    write_graphs(out / "predicted.jsonl", pred)
    write_graphs(out / "truth.jsonl", truth)
    write_graphs(out / "retrieved.jsonl", retrieved)
    summary = {"gwpred": {k: v for k, v in ours.items() if k != "items"},
               "nearest_neighbour": {k: v for k, v in base.items() if k != "items"},
               "train_size": len(train), "test_size": len(test), "seed": args.seed,
               "params": model.get_params()}
    atomic_write_text(out / "summary.json", json.dumps(summary, indent=2, default=str))
    show = list(range(min(max(args.drawings, 1), len(test))))  # the items drawn in full (at least one row)
    comparison_grid(
        [pred[i] for i in show], [truth[i] for i in show], str(out / "predictions.png"),
        titles=[f"GED {ours['items'][i]['ged']:g}" for i in show], caption=CAUTION,
    )
    report = _demo_report(args, out, model, X[test], pred, truth, [graphs[i] for i in train], ours, base)
    print(f"\nwrote {out}/predicted.jsonl, truth.jsonl, retrieved.jsonl, summary.json, predictions.png")
    print(f"report: {report}")
    print(f"total {time.perf_counter() - t_start:.0f} s")
    print(CAUTION, file=sys.stderr)  # with the results, not inside them (stdout may be a data pipe)
    return 0


# items of the demo report drawn in full (alignment, barycenter, training graphs)
_DEMO_DRAWINGS = 8


def _demo_report(args: argparse.Namespace, out: Path, model: BarycenterGraphPredictor, X_test: np.ndarray, pred: list, truth: list,
                 train_graphs: list, ours: dict, base: dict) -> Path:
    """Write the demo's report.html; barycenters only for the items drawn in full."""
    from .datasets import wavenumber_grid
    from .report import write_report

    grid = wavenumber_grid()  # load_demo's default grid (cm-1), one value per feature
    n_draw = min(args.drawings, len(pred))
    soft = model.predict_barycenters(X_test[:n_draw]) if n_draw else []
    notes = [(f"Spectrum -> heavy-atom skeleton: {len(train_graphs)} training and {len(pred)} held-out QM9 "
              f"molecules (seed {args.seed}). Baseline, the molecule of the most similar training spectrum: "
              f"mean GED {base['mean_ged']:.2f}, exact match {100 * base['exact_match_rate']:.1f}%.")]
    idx, w = model.neighbors(X_test)
    return write_report(out / "report.html", pred, truth, summary=ours, barycenters=soft,
                        training_graphs=train_graphs, label_names=list(model.labels_.node_labels_),
                        leaned_on=list(zip(idx, w)), inputs=X_test, training_inputs=model.weights_.X_fit_,
                        input_grid=grid, input_name="IR spectrum (computed)",
                        title="gwpred demo: predicted molecular skeletons", notes=notes,
                        time_limit=args.time_limit, drawings=n_draw, progress=not args.quiet)


class _TrainingGraphs:
    """A model's training graphs as a sequence, each rebuilt only when the report asks for it."""

    def __init__(self, training: Any, ids: list[str] | None = None) -> None:
        self.training = training
        self.ids = ids

    def __len__(self) -> int:
        return len(self.training)

    def __getitem__(self, i: int) -> Any:
        g = self.training.graph(int(i))
        if self.ids is not None:
            g.graph["id"] = self.ids[int(i)]
        return g


def _read_hypotheses(path: str) -> tuple[list, dict] | None:
    """A ``predict --hypotheses`` JSON Lines file as (first hypotheses, ranked lists); None for other files."""
    from .io import read_ranked

    p = Path(path)
    if p.suffix.lower() != ".jsonl" or not p.is_file():
        return None
    with open(p, encoding="utf-8") as fh:
        first = next((line for line in fh if line.strip()), "")
    try:
        record = json.loads(first)
    except json.JSONDecodeError:
        return None  # read_graphs says what is wrong with it
    if not isinstance(record, dict) or "ranked" not in record:
        return None
    ranked = read_ranked(p)
    if sorted(ranked) != list(range(len(ranked))):
        raise UsageError(f"{path}: rows must number the inputs 0..{len(ranked) - 1}, each once")
    first_graphs = []
    for r in range(len(ranked)):
        if not ranked[r]:
            raise UsageError(f"{path}: row {r} has no hypothesis, so there is no prediction to report for it")
        first_graphs.append(ranked[r][0].graph.copy())
    with open(p, encoding="utf-8") as fh:  # the inputs' ids go with their first hypotheses
        for line in fh:
            if line.strip():
                rec = json.loads(line)
                if rec.get("id") is not None:
                    first_graphs[rec["row"]].graph["id"] = rec["id"]
    return first_graphs, ranked


def cmd_report(args: argparse.Namespace) -> int:
    from .io import read_graphs, read_ranked
    from .model import load_model
    from .report import is_molecular, write_report

    if bool(args.model) != bool(args.features):
        raise UsageError("--model and --features go together: the model and the inputs the predictions were "
                         "made from (for the barycenter heat maps and training neighbours)")

    out = Path(args.out)
    if out.suffix.lower() not in (".html", ".htm"):
        raise UsageError(f"--out must name an HTML file ending in .html; got {args.out}")
    _output_path(args.out, "--out")
    for name, value, least in (("--limit", args.limit, 1), ("--drawings", args.drawings, 0), ("--top-k", args.top_k, 0)):
        if value is not None and value < least:
            raise UsageError(f"{name} must be at least {least}; got {value}")
    hypotheses = _read_hypotheses(args.predictions)
    if hypotheses is not None and args.ranked:
        raise UsageError(f"{args.predictions} holds generated hypotheses (predict --hypotheses): it gives both the "
                         "predictions (each input's first hypothesis) and the ranked lists; drop --ranked")
    pred = read_graphs(args.predictions) if hypotheses is None else hypotheses[0]
    truth = read_graphs(args.truth) if args.truth else None
    if truth is not None and len(pred) != len(truth):
        raise UsageError(
            f"{args.predictions} holds {len(pred)} graphs but {args.truth} holds {len(truth)}; "
            "they must be in the same order, one prediction per true graph."
        )
    ranked = read_ranked(args.ranked) if args.ranked else None if hypotheses is None else hypotheses[1]
    t0 = time.perf_counter()
    extra: dict = {}
    notes: list[str] = []
    if truth is not None:
        note = _check_same_ids([g.graph.get("id") for g in pred], [g.graph.get("id") for g in truth], args.truth,
                               args.predictions)
        notes += [note] if note else []
    if args.id_column and not args.model:
        raise UsageError("--id-column names a column of --features: give it with --model and --features, or "
                         "give the ids with --ids FILE")
    if args.ids and not args.model:
        from .io import read_ids

        ids = read_ids(args.ids)
        if len(ids) != len(pred):
            raise UsageError(f"{args.ids} holds {len(ids)} ids but {args.predictions} holds {len(pred)} graphs; "
                             "give one id per prediction, in the same order")
        for g, i in zip(pred, ids):
            g.graph["id"] = i
    if args.model:  # the model and inputs behind the predictions: heat maps and training neighbours
        X, ids = _read_inputs(args)
        if len(X) != len(pred):
            raise UsageError(f"{args.features} holds {len(X)} rows but {args.predictions} holds {len(pred)} "
                             "graphs; give the inputs the predictions were made from, in the same order.")
        if ids is not None:
            note = _check_same_ids(ids, [g.graph.get("id") for g in pred], args.predictions, args.ids or args.features)
            if note:
                notes.append(note)
            for g, i in zip(pred, ids):
                g.graph["id"] = i
        model = load_model(args.model)
        n = len(pred) if args.limit is None else min(args.limit, len(pred))
        n_draw = min(args.drawings, n)
        if hasattr(model, "templates_"):  # learned templates: no training graphs, the templates instead
            extra = dict(templates=model, inputs=X[:n])
        else:
            idx, w = model.neighbors(X[:n])
            extra = dict(barycenters=model.predict_barycenters(X[:n_draw]) if n_draw else [],
                         training_graphs=_TrainingGraphs(model.training_, model.training_ids_),
                         label_names=list(model.labels_.node_labels_), leaned_on=list(zip(idx, w)))
            if model.kernel != "precomputed":  # the inputs beside those of the training graphs leaned on
                extra.update(inputs=X[:n], training_inputs=model.weights_.X_fit_)
    notes += [f"predictions: {args.predictions}" + (f"; truth: {args.truth}" if args.truth else "")
             + (f"; ranked candidates: {args.ranked}" if args.ranked else "")
             + (f"; model: {args.model}, inputs: {args.features}" if args.model else "")]
    path = write_report(out, pred, truth, ranked=ranked, title=args.title or f"gwpred report: {Path(args.predictions).name}",
                        notes=notes, time_limit=args.time_limit, limit=args.limit, drawings=args.drawings,
                        top_k=args.top_k, node_label=args.node_label, edge_label=_edge_label(args),
                        progress=not args.quiet, **extra)
    n = len(pred) if args.limit is None else min(args.limit, len(pred))
    print(f"report on {n} items written to {path} in {time.perf_counter() - t0:.1f} s")
    if is_molecular(pred[:n] + (truth[:n] if truth else []), args.node_label):
        print(CAUTION, file=sys.stderr)  # with the results, not inside them (stdout may be a data pipe)
    return 0


def cmd_rank(args: argparse.Namespace) -> int:
    from .io import read_graphs, write_ranked
    from .model import load_model
    from .ranking import CandidateLibrary, count_candidates, rank_candidates

    if args.top_k < 1:
        raise UsageError(f"--top-k must be at least 1; got {args.top_k}.")
    if Path(args.out).suffix.lower() != ".jsonl":
        raise UsageError(f"--out must name a JSON Lines file ending in .jsonl; got {args.out}")
    _output_path(args.out, "--out")
    n_jobs = _n_jobs(args)
    model = load_model(args.model)
    if n_jobs is not None:
        model.set_params(n_jobs=n_jobs)
    X, ids = _read_inputs(args)
    library = CandidateLibrary(read_graphs(args.candidates))
    formulas = _formulas(args, X.shape[0])
    t0 = time.perf_counter()
    ranked = rank_candidates(model, X, library, top_k=args.top_k, scorer=args.scorer, filter=formulas,
                             output_kernel=args.output_kernel, progress=not args.quiet)
    secs = time.perf_counter() - t0
    write_ranked(args.out, ranked, library, ids=ids)
    if formulas is None:
        ranked_what = f"{len(library)} candidates"
    else:  # the formula filter leaves each row its own number of candidates
        counts = count_candidates(library, X.shape[0], formulas, model.labels_.node_label)
        lo, hi = int(counts.min()), int(counts.max())
        span = f"{lo}" if lo == hi else f"{lo} to {hi}"
        ranked_what = f"{span} candidates per input (of {len(library)}; formula filter)"
    print(f"ranked {ranked_what} for {X.shape[0]} inputs ({args.scorer} scorer) in {secs:.1f} s; "
          f"the best {args.top_k} per input written to {args.out}")
    print(CAUTION, file=sys.stderr)  # with the results, not inside them (stdout may be a data pipe)
    return 0


def cmd_compare(args: argparse.Namespace) -> int:
    from .compare import (
        compare_methods,
        comparison_table,
        load_comparison_data,
        plot_comparison,
    )
    from .datasets import split_indices

    if args.fgw_rows < 0:
        raise UsageError(f"--fgw-rows must be 0 (all test inputs) or more; got {args.fgw_rows}.")
    out = _output_path(args.out, "--out", folder=True)
    X, graphs, kernel = load_comparison_data(args.data, progress=not args.quiet)
    train, test = split_indices(len(graphs), n_train=args.n_train, n_test=args.n_test, random_state=args.seed)
    params = _model_params(args)
    params["kernel"] = args.kernel or kernel
    params["progress"] = False
    t0 = time.perf_counter()
    result = compare_methods(X, graphs, train, test, params=params, scorers=args.scorer or list(_SCORERS),
                             output_kernels=args.output_kernel, top_k=args.top_k, fgw_rows=args.fgw_rows or None,
                             time_limit=args.time_limit, n_jobs=args.n_jobs, random_state=args.seed,
                             progress=not args.quiet, data=args.data)
    table = comparison_table(result)
    print(table)
    out.mkdir(exist_ok=True)  # only now: a run stopped by bad arguments leaves no folder behind
    atomic_write_text(out / "comparison.txt", table + "\n")
    summary = result.to_dict()
    summary["options"] = {k: v for k, v in vars(args).items() if k != "func"}
    atomic_write_text(out / "comparison.json", json.dumps(summary, indent=2, default=str))
    plot_comparison(result, str(out / "comparison.png"))
    print(f"\nwrote {out}/comparison.txt, comparison.json, comparison.png in {time.perf_counter() - t0:.0f} s")
    print(CAUTION, file=sys.stderr)  # with the results, not inside them (stdout may be a data pipe)
    return 0


# ------------------------------------------------------------------- parser
def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="gwpred",
        description="Predict labeled graphs from vectors with fused Gromov-Wasserstein barycenters.",
    )
    parser.add_argument("--version", action="version", version=f"gwpred {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")

    def common(p: argparse.ArgumentParser) -> None:
        p.add_argument("-q", "--quiet", action="store_true", help="no progress bars")

    def parallel(p: argparse.ArgumentParser, work: str, n_jobs_default: str) -> None:
        g = p.add_argument_group("parallel work")
        g.add_argument("--n-jobs", type=int, default=None,
                       help=f"worker processes for {work} on this machine; -1 uses every processor "
                            f"(default: {n_jobs_default}; -1 with --scheduler)")
        g.add_argument("--scheduler", metavar="ADDRESS",
                       help=f"address of a running Dask scheduler (e.g. tcp://10.0.0.5:8786, as printed by "
                            f"'dask scheduler'): {work} run as tasks on its workers, which need gwpred "
                            f"installed (pip install 'gwpred[distributed]' here and there)")
        g.add_argument("--scheduler-timeout", type=float, default=10.0, metavar="SECONDS",
                       help="seconds to wait for the scheduler and a worker to answer (default: 10)")

    p = sub.add_parser("fit", help="learn from a features file and a graphs file; save a model",
                       description="Learn from (vector, graph) pairs and save the model (.npz, no pickle).")
    p.add_argument("--features", required=True, help="inputs: .csv/.tsv (optional header, optional id column) or .npy")
    p.add_argument("--graphs", required=True, help="training graphs, one per input row: .jsonl (node-link) or .graphml; "
                   "molecules as .smi, .sdf or .mol (needs RDKit: pip install 'gwpred[chem]')")
    p.add_argument("--model", required=True, help="model file to write (.npz)")
    p.add_argument("--calibration-share", type=float, default=0.0, metavar="SHARE",
                   help="hold out this share of the pairs (at most 0.5) to calibrate the confidences of "
                        "predict --hypotheses, then fit on all (default: 0, no calibration; costs about "
                        "0.5 s per held-out pair, twice for molecules)")
    _add_model_options(p)
    _add_id_options(p)
    common(p)
    p.set_defaults(func=cmd_fit)

    p = sub.add_parser("predict", help="predict graphs for new inputs with a saved model",
                       description="Predict one labeled graph per input row.")
    p.add_argument("--model", required=True, help="model file written by 'gwpred fit'")
    p.add_argument("--features", required=True, help="inputs (.csv/.tsv/.npy), same columns as in fit")
    p.add_argument("--out", required=True, help="graph file to write: .jsonl, .graphml, or molecules as .smi/.sdf (needs gwpred[chem])")
    p.add_argument("--formulas", metavar="FILE",
                   help="molecular formulas of the unknowns, one per input row (e.g. C4H6O2; hydrogens optional): "
                        ".csv/.tsv with a formula column, or .txt with one per line; an empty cell leaves a row free")
    p.add_argument("--formula-column", default="formula",
                   help="header of the formula column in --formulas (default: formula)")
    p.add_argument("--hypotheses", type=int, metavar="K",
                   help="write the K best distinct generated graphs per input instead of one, best first, with "
                        "scores and confidences (.jsonl: one record per input, readable by report --ranked; "
                        ".sdf/.graphml/.smi: one record per hypothesis named ID#RANK)")
    parallel(p, "the per-input predictions", "the model's own, 1 unless set")
    _add_id_options(p)
    common(p)
    p.set_defaults(func=cmd_predict)

    p = sub.add_parser("evaluate", help="score predicted graphs against true graphs (GED, exact match)",
                       description="Graph edit distance (uniform costs), exact match, right size, connectivity, "
                                   "node label accuracy and edge precision/recall/F1 under the GED node map.")
    p.add_argument("predicted", help="predicted graphs (.jsonl/.graphml/.smi/.sdf/.mol)")
    p.add_argument("--truth", metavar="FILE", help="true graphs, same order (.jsonl/.graphml/.smi/.sdf/.mol); required")
    p.add_argument("truth_old", nargs="?", metavar="TRUTH", help=argparse.SUPPRESS)  # before 0.2: positional
    _add_time_limit(p)
    p.add_argument("--summary", help="write the summary as JSON here")
    p.add_argument("--items", help="write per-pair scores as CSV here")
    parallel(p, "the edit distances of the pairs", "1")
    _add_label_options(p)
    common(p)
    p.set_defaults(func=cmd_evaluate)

    p = sub.add_parser("demo", help="train on the bundled QM9 spectra, predict a held-out part, compare with 1-NN",
                       description="Propose heavy-atom skeletons of small molecules from computed vibrational "
                                   "spectra (bundled QM9 subset), scored against 1-nearest-neighbour retrieval.")
    p.add_argument("--out", default="gwpred-demo", help="output folder (default: gwpred-demo)")
    p.add_argument("--n-test", type=int, default=300, help="held-out molecules (default: 300)")
    p.add_argument("--test-size", dest="n_test", type=int, action=_renamed("--n-test"), default=argparse.SUPPRESS, help=argparse.SUPPRESS)
    p.add_argument("--drawings", type=int, default=_DEMO_DRAWINGS,
                   help=f"items drawn in full: rows of predictions.png and items of report.html with heat maps "
                        f"(default: {_DEMO_DRAWINGS})")
    p.add_argument("--show", dest="drawings", type=int, action=_renamed("--drawings"), default=argparse.SUPPRESS, help=argparse.SUPPRESS)
    _add_time_limit(p)
    _add_model_options(p)
    parallel(p, "the predictions and edit distances", "1")
    common(p)
    p.set_defaults(func=cmd_demo)

    p = sub.add_parser("report", help="write one self-contained HTML page to look at predictions",
                       description="Turn predicted graphs (with the true graphs and ranked candidate lists when "
                                   "given) into one static HTML file: summary scores, a sortable table of items, "
                                   "and drawings of each prediction against its truth.")
    p.add_argument("predictions", help="predicted graphs (.jsonl/.graphml/.smi/.sdf/.mol)")
    p.add_argument("--truth", help="true graphs, same order (without them the page shows the predictions only)")
    p.add_argument("--out", required=True, help="HTML file to write (.html)")
    p.add_argument("--ranked", metavar="FILE.jsonl",
                   help='ranked candidate lists: one JSON object per line, {"row": i, "ranked": [{"candidate": j, '
                        '"score": s, "graph": <node-link record>}, ...]}, best first')
    p.add_argument("--title", help="page title (default: from the predictions file name)")
    _add_time_limit(p)
    p.add_argument("--limit", type=int, help="report only the first N items")
    p.add_argument("--drawings", type=int, default=30,
                   help="items (the first ones) drawn in full; the others show scores only (default: 30)")
    p.add_argument("--top-k", type=int, default=5, help="ranked candidates drawn per item (default: 5)")
    p.add_argument("--top", dest="top_k", type=int, action=_renamed("--top-k"), default=argparse.SUPPRESS, help=argparse.SUPPRESS)
    p.add_argument("--model", help="model file that made the predictions (with --features): adds the "
                                   "barycenter heat maps and the training graphs each prediction leaned on "
                                   "(or, for a model of learned templates, the templates and each input's "
                                   "weights on them)")
    p.add_argument("--features", help="inputs the predictions were made from, same order (with --model)")
    _add_label_options(p)
    _add_id_options(p)
    common(p)
    p.set_defaults(func=cmd_report)

    p = sub.add_parser("rank", help="rank given candidate graphs for each input with a saved model",
                       description="Score a candidate list (e.g. all known isomers of a formula) for each input "
                                   "row and write the best --top-k per row as JSON Lines: {\"row\": i, \"id\": ..., "
                                   "\"ranked\": [{\"candidate\": j, \"id\": ..., \"score\": s, \"graph\": <node-link "
                                   "record>}, ...]} (ids when known).")
    p.add_argument("--model", required=True, help="model file written by 'gwpred fit'")
    p.add_argument("--features", required=True, help="inputs (.csv/.tsv/.npy), same columns as in fit")
    p.add_argument("--candidates", required=True,
                   help="candidate graphs shared by all rows: .jsonl, .graphml, or molecules as .smi/.sdf/.mol")
    p.add_argument("--out", required=True, help="ranked lists to write (.jsonl)")
    p.add_argument("--formulas", metavar="FILE",
                   help="per input row, a molecular formula: only candidates with its heavy atoms are ranked "
                        "(hydrogens are not compared); .csv/.tsv with a formula column or .txt, one per line; "
                        "an empty cell ranks all candidates")
    p.add_argument("--formula-column", default="formula",
                   help="header of the formula column in --formulas (default: formula)")
    p.add_argument("--top-k", type=int, default=10, help="candidates kept per input (default: 10)")
    p.add_argument("--k", dest="top_k", type=int, action=_renamed("--top-k"), default=argparse.SUPPRESS, help=argparse.SUPPRESS)
    p.add_argument("--scorer", default="kernel", choices=_SCORERS, metavar="SCORER",
                   help="%(choices)s. kernel: weighted output-kernel similarity to the training graphs (higher is better); "
                        "fgw: FGW distance to the predicted barycenter; objective: weighted FGW distances to "
                        "the training graphs (lower is better) (default: kernel)")
    p.add_argument("--output-kernel", default="wl", choices=_OUTPUT_KERNELS, metavar="KERNEL",
                   help="%(choices)s. kernel scorer: Weisfeiler-Lehman subtree kernel, or Tanimoto on Morgan fingerprints "
                        "(molecules, needs gwpred[chem]) (default: wl)")
    parallel(p, "the barycenters and FGW values of the fgw scorer", "the model's own, 1 unless set")
    _add_id_options(p)
    common(p)
    p.set_defaults(func=cmd_rank)

    p = sub.add_parser("compare", help="generation against candidate ranking and 1-NN retrieval, on one split",
                       description="On one data set and split: generation (decoded barycenter, with and without "
                                   "the formula), ranking of the same-formula candidates with each scorer, and "
                                   "1-NN retrieval, with the true graph in the candidate set and removed from it. "
                                   "Writes a table (text, JSON) and a plot of top-k curves and GED distributions. "
                                   "The input kernel defaults to rbf for spectra and tanimoto for fingerprints.")
    p.add_argument("--data", default="demo", choices=["demo", "qm9-spectrum", "qm9-fingerprint"],
                   help="bundled demo molecules, or all of QM9 with spectra or fingerprints (needs gwpred[all]) "
                        "(default: demo)")
    p.add_argument("--n-train", type=int, default=2700, help="training inputs (default: 2700)")
    p.add_argument("--n-test", type=int, default=300, help="test inputs (default: 300)")
    p.add_argument("--top-k", type=int, default=10, help="length of the ranked lists (default: 10); training "
                                                          "graphs per prediction are --n-neighbors")
    p.add_argument("--k", dest="top_k", type=int, action=_renamed("--top-k"), default=argparse.SUPPRESS, help=argparse.SUPPRESS)
    p.add_argument("--scorer", nargs="+", default=None,
                   choices=_SCORERS, metavar="SCORER", help="scorers to run, one or more: %(choices)s (default: all)")
    p.add_argument("--scorers", dest="scorer", nargs="+", choices=_SCORERS, action=_renamed("--scorer"), default=argparse.SUPPRESS,
                   help=argparse.SUPPRESS)
    p.add_argument("--output-kernel", nargs="+", default=["wl"], choices=_OUTPUT_KERNELS, metavar="KERNEL",
                   help="output kernels of the kernel scorer, one or more: %(choices)s (default: wl)")
    p.add_argument("--output-kernels", dest="output_kernel", nargs="+", choices=_OUTPUT_KERNELS,
                   action=_renamed("--output-kernel"), default=argparse.SUPPRESS, help=argparse.SUPPRESS)
    p.add_argument("--fgw-rows", type=int, default=50,
                   help="test inputs (drawn at random) the FGW scorers run on; 0 runs them on all (default: 50)")
    _add_time_limit(p)
    p.add_argument("--n-jobs", type=int, default=1, help="worker processes for the edit distances (default: 1)")
    p.add_argument("--out", default="gwpred-compare", help="output folder (default: gwpred-compare)")
    _add_model_options(p, old_top_k=False, kernel_default="rbf for spectra, tanimoto for fingerprints")
    p.set_defaults(kernel=None)
    common(p)
    p.set_defaults(func=cmd_compare)
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    """Entry point of the ``gwpred`` command."""
    parser = build_parser()
    args = parser.parse_args(argv)
    if not getattr(args, "command", None):
        parser.print_help()
        return 2
    try:
        with ExitStack() as stack:
            _on_scheduler(args, stack)  # commands with --scheduler: their parallel work runs there
            return int(args.func(args))
    except (UsageError, ValueError, TypeError, ImportError, FileNotFoundError, IsADirectoryError,
            PermissionError) as err:
        print(f"gwpred {args.command}: error: {err}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print("interrupted", file=sys.stderr)
        return 130


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())

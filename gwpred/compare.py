"""Generation against ranking, on the same inputs: one data set, one split.

For each test input this runs

* generation: the decoded FGW barycenter (``predict``), and the same given the
  test molecule's heavy-atom formula (``predict(formulas=...)``);
* ranking of the candidates with each scorer of :mod:`gwpred.ranking`;
* 1-NN retrieval: training graphs ordered by input similarity (the model's
  input kernel), over the whole training set and over the training graphs
  with the test graph's heavy-atom formula (all of them when there is none);

and scores them in two settings: the true graph is among the candidates, or
every candidate label-isomorphic to it is removed (inputs left without any
candidate are dropped from that setting, and reported).  Generation and
retrieval do not use the candidates; they are scored on the rows of each
setting.  Candidates for a test input are every graph of the data set with
its heavy-atom formula (node-label counts); test graphs are excluded from
training only.

Reported per method and setting: top-1, top-5 and top-10 accuracy (the
true graph, up to label isomorphism, among the first k), the graph edit
distance of the top-ranked or generated graph to the true one, and wall time
per input (candidate encodings are computed once beforehand and timed apart).
"""

from __future__ import annotations

import time
from collections.abc import Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import matplotlib
import matplotlib.pyplot as plt
import networkx as nx
import numpy as np
from numpy.typing import NDArray

from ._utils import atomic_open, renamed_keyword
from .datasets import load_demo, load_qm9
from .formula import graph_formula
from .metrics import exact_match, summarize
from .model import BarycenterGraphPredictor
from .plot import PALETTE
from .ranking import CandidateLibrary, prepare_candidates, rank_candidates
from .wl import wl_graph_hashes

__all__ = [
    "DATA_SOURCES",
    "Comparison",
    "MethodResult",
    "compare_methods",
    "comparison_table",
    "load_comparison_data",
    "plot_comparison",
]

DATA_SOURCES = ("demo", "qm9-spectrum", "qm9-fingerprint")
"""Data sets known to :func:`load_comparison_data`."""

_CURVE = tuple(range(1, 11))
SETTINGS = {"in": "true graph in the candidate set", "out": "true graph removed"}


@dataclass(frozen=True)
class MethodResult:
    """Per-input outcome of one method in one setting.

    Attributes
    ----------
    name : str
    setting : {"in", "out"}
    rows : ndarray of int
        Test positions scored (into the test set).
    hit_rank : list of (int or None)
        1-based rank of the true graph in the first 10, else None.
    ged : ndarray of float
        Edit distance of the top-ranked (or generated) graph to the true one.
    seconds_per_input : float
        Wall time of the method divided by the inputs it ran on.
    """

    name: str
    setting: str
    rows: NDArray[np.int64]
    hit_rank: list[int | None]
    ged: NDArray[np.float64]
    seconds_per_input: float

    def top_k(self, k: int, rows: NDArray[np.int64] | None = None) -> float:
        """Share of inputs (of ``rows``, default all) with the true graph in the first ``k``."""
        hits = [r is not None and r <= k for r in self._select(self.hit_rank, rows)]
        return float(np.mean(hits)) if hits else float("nan")

    def geds(self, rows: NDArray[np.int64] | None = None) -> NDArray[np.float64]:
        """Edit distances on ``rows`` (default all)."""
        return np.asarray(self._select(list(self.ged), rows), dtype=np.float64)

    def _select(self, values: list, rows: NDArray[np.int64] | None) -> list:
        if rows is None:
            return list(values)
        where = {int(r): i for i, r in enumerate(self.rows)}
        return [values[where[int(r)]] for r in rows if int(r) in where]


@dataclass
class Comparison:
    """Everything :func:`compare_methods` measured (see the module notes).

    Attributes
    ----------
    data : str
    n_train, n_test : int
    settings : dict of str to ndarray of int
        Test positions scored in each setting.
    candidates : dict of str to ndarray of int
        Number of candidates per test position in each setting (0: dropped).
    methods : list of MethodResult
    encoding_seconds : dict of str to float
        Time to encode the candidates for each scorer (done once, before timing).
    subset : ndarray of int or None
        Test positions the FGW scorers ran on, when fewer than all.
    params : dict
        Model parameters.
    notes : list of str
        Anything that did not go as planned (e.g. a formula that could not be decoded).
    """

    data: str
    n_train: int
    n_test: int
    settings: dict[str, NDArray[np.int64]]
    candidates: dict[str, NDArray[np.int64]]
    methods: list[MethodResult] = field(default_factory=list)
    encoding_seconds: dict[str, float] = field(default_factory=dict)
    subset: NDArray[np.int64] | None = None
    params: dict[str, Any] = field(default_factory=dict)
    notes: list[str] = field(default_factory=list)

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready summary: per method and setting, the numbers of the table and the GEDs."""

        def block(rows: NDArray[np.int64] | None) -> list[dict]:
            out = []
            for m in self.methods:
                sel = self._rows(m, rows)
                if sel.size == 0:
                    continue
                g = m.geds(sel)
                out.append(
                    {
                        "method": m.name,
                        "setting": m.setting,
                        "n": int(sel.size),
                        "top_k_accuracy": {k: m.top_k(k, sel) for k in _CURVE},
                        "mean_ged": float(g.mean()),
                        "median_ged": float(np.median(g)),
                        "ged": g.tolist(),
                        "seconds_per_input": m.seconds_per_input,
                    }
                )
            return out

        out: dict[str, Any] = {
            "data": self.data,
            "n_train": self.n_train,
            "n_test": self.n_test,
            "settings": {s: SETTINGS[s] for s in self.settings},
            "rows_per_setting": {s: int(r.size) for s, r in self.settings.items()},
            "mean_candidates": {
                s: float(c[c > 0].mean()) if (c > 0).any() else 0.0 for s, c in self.candidates.items()
            },
            "encoding_seconds": self.encoding_seconds,
            "params": {
                k: (v if isinstance(v, (int, float, str, bool, type(None))) else str(v))
                for k, v in self.params.items()
            },
            "results": block(None),
            "notes": self.notes,
        }
        if self.subset is not None:
            out["fgw_subset"] = self.subset.tolist()
            out["results_on_fgw_subset"] = block(self.subset)
        return out

    def _rows(self, m: MethodResult, rows: NDArray[np.int64] | None) -> NDArray[np.int64]:
        base = self.settings[m.setting]
        sel = np.intersect1d(m.rows, base)
        return sel if rows is None else np.intersect1d(sel, rows)


# --------------------------------------------------------------------------- data
def load_comparison_data(
    source: str, *, progress: bool = True
) -> tuple[NDArray[np.float64], list[nx.Graph], str]:
    """Inputs, graphs and the suitable input kernel of a named data set.

    Parameters
    ----------
    source : {"demo", "qm9-spectrum", "qm9-fingerprint"}
        ``demo``: the bundled 3000 QM9 molecules with broadened spectra;
        ``qm9-spectrum`` / ``qm9-fingerprint``: all of QM9 with broadened
        spectra or Morgan fingerprints (:func:`gwpred.datasets.load_qm9`,
        extras ``data`` and ``chem``).

    Returns
    -------
    X : ndarray of shape (n, d)
    graphs : list of networkx.Graph
    kernel : str
        ``"rbf"`` for spectra, ``"tanimoto"`` for fingerprints.
    """
    if source not in DATA_SOURCES:
        raise ValueError(f"data must be one of {list(DATA_SOURCES)}; got {source!r}.")
    if source == "demo":
        X, graphs = load_demo()
        return X, graphs, "rbf"
    kind = source.split("-", 1)[1]
    data = load_qm9(features=kind, progress=progress)
    return data.X, data.graphs, "rbf" if kind == "spectrum" else "tanimoto"


def heavy_formula(graph: nx.Graph, node_label: str = "label") -> str:
    """Heavy-atom formula (Hill order, no hydrogens) from the node-label counts."""
    return graph_formula(graph, node_label=node_label, hydrogens=False)


def candidate_rows(
    library: CandidateLibrary,
    truth: Sequence[nx.Graph],
    labels: Any,
    *,
    node_label: str = "label",
    edge_label: str | None = "label",
) -> tuple[list[NDArray[np.int64]], list[NDArray[np.int64]]]:
    """Per true graph: library graphs with its node-label counts, with and without its copies.

    Parameters
    ----------
    library : CandidateLibrary
    truth : sequence of networkx.Graph
        The true graphs of the test inputs.
    labels : LabelSpace
        The model's label space (for the WL pre-check of isomorphism).
    node_label, edge_label : str

    Returns
    -------
    with_true, without_true : list of ndarray of int
        Library indices; ``without_true`` drops every graph label-isomorphic
        to the true one (WL hashes first, then :func:`gwpred.metrics.exact_match`).
    """
    comps = library.compositions(node_label)
    groups: dict[tuple, list[int]] = {}
    for i, c in enumerate(comps):
        groups.setdefault(c, []).append(i)
    truth_lib = CandidateLibrary(list(truth))
    truth_hash = wl_graph_hashes(truth_lib, labels)
    truth_comps = truth_lib.compositions(node_label)
    with_true, without_true = [], []
    for r, g in enumerate(truth):
        idx = np.asarray(groups.get(truth_comps[r], []), dtype=np.int64)
        with_true.append(idx)
        if idx.size == 0:
            without_true.append(idx)
            continue
        same = idx[wl_graph_hashes(library, labels, idx) == truth_hash[r]]
        copies = [
            i
            for i in same.tolist()
            if exact_match(library.graphs[i], g, node_label=node_label, edge_label=edge_label)
        ]
        without_true.append(np.setdiff1d(idx, np.asarray(copies, dtype=np.int64)))
    return with_true, without_true


# --------------------------------------------------------------------------- running
def _generate_with_formulas(
    model: BarycenterGraphPredictor, X: NDArray[np.float64], formulas: list[str], fallback: list[nx.Graph]
) -> tuple[list[nx.Graph], list[str]]:
    """``predict(X, formulas)``; rows whose formula cannot be decoded keep the unconstrained graph."""
    try:
        return model.predict(X, formulas=formulas), []
    except ValueError:
        pass
    out, notes = [], []
    for r, f in enumerate(formulas):
        try:
            out.append(model.predict(X[r : r + 1], formulas=[f])[0])
        except ValueError as exc:
            out.append(fallback[r])
            notes.append(f"generation + formula, test input {r}: {exc} (the unconstrained graph is used)")
    return out, notes


def _scored(
    name: str,
    setting: str,
    rows: NDArray[np.int64],
    top1: list[nx.Graph],
    ranked: list[list[nx.Graph]],
    truth: list[nx.Graph],
    seconds: float,
    time_limit: float,
    n_jobs: int,
    progress: bool,
    node_label: str,
    edge_label: str | None,
) -> MethodResult:
    s = summarize(
        top1,
        truth,
        node_label=node_label,
        edge_label=edge_label,
        time_limit=time_limit,
        progress=progress,
        n_jobs=n_jobs,
        ranked=ranked,
    )
    return MethodResult(
        name,
        setting,
        rows,
        [it["hit_rank"] for it in s["items"]],
        np.array([it["ged"] for it in s["items"]], dtype=np.float64),
        seconds / max(len(rows), 1),
    )


def compare_methods(
    X: NDArray[np.float64],
    graphs: Sequence[nx.Graph],
    train: NDArray[np.int64],
    test: NDArray[np.int64],
    *,
    params: dict[str, Any] | None = None,
    scorers: Sequence[str] = ("kernel", "fgw", "objective"),
    output_kernels: Sequence[str] = ("wl",),
    top_k: int = 10,
    fgw_rows: int | None = None,
    time_limit: float = 10.0,
    n_jobs: int = 1,
    random_state: int = 0,
    progress: bool = True,
    data: str = "",
    k: int | None = None,
) -> Comparison:
    """Run and score every method on one split (see the module notes).

    Parameters
    ----------
    X : ndarray of shape (n, d)
        Inputs of the whole data set.
    graphs : sequence of networkx.Graph
        Graphs of the whole data set (also the candidate library).
    train, test : ndarray of int
        Disjoint positions (e.g. from :func:`gwpred.datasets.split_indices`).
    params : dict, default=None
        Parameters of the :class:`~gwpred.BarycenterGraphPredictor`.
    scorers : sequence of {"kernel", "fgw", "objective"}
    output_kernels : sequence of {"wl", "fingerprint"}, default=("wl",)
        Output kernels of the ``kernel`` scorer to run.
    top_k : int, default=10
        Length of the ranked lists (top-k is read up to 10; the old name
        ``k`` works for one more release, with a FutureWarning).
    fgw_rows : int or None, default=None
        Run the FGW scorers (``fgw``, ``objective``: thousands of FGW
        problems per input) on this many test inputs, drawn at random with
        ``random_state``; None runs them on all.
    time_limit : float, default=10.0
        Seconds per edit distance before settling for the best bound.
    n_jobs : int, default=1
        Worker processes for the edit distances.
    random_state : int, default=0
    progress : bool, default=True
        Progress bars.
    data : str, default=""
        Name of the data set, for the report.
    k : int, optional
        Old name of ``top_k``.

    Returns
    -------
    Comparison
    """
    top_k = renamed_keyword("k", "top_k", k, top_k, 10)
    train = np.asarray(train, dtype=np.int64)
    test = np.asarray(test, dtype=np.int64)
    if train.size == 0 or test.size == 0:
        raise ValueError("train and test must both be non-empty; ask for at least one item in each.")
    if np.intersect1d(train, test).size:
        raise ValueError("train and test overlap; test inputs must be excluded from training.")
    if fgw_rows is not None and not (isinstance(fgw_rows, int) and fgw_rows >= 1):
        raise ValueError(f"fgw_rows must be a positive integer or None; got {fgw_rows!r}.")
    params = dict(params or {})
    params.setdefault("random_state", random_state)
    model = BarycenterGraphPredictor(**params)
    node_label, edge_label = model.node_label, model.edge_label
    graphs = list(graphs)
    model.fit(X[train], [graphs[i] for i in train])
    model.set_params(progress=progress)
    truth = [graphs[i] for i in test]
    library = CandidateLibrary(graphs)
    # a library of its own, so that the encodings timed below start from nothing
    with_true, without_true = candidate_rows(
        CandidateLibrary(graphs), truth, model.labels_, node_label=node_label, edge_label=edge_label
    )
    n = len(test)
    everyone = np.arange(n, dtype=np.int64)
    settings = {
        "in": everyone[[r.size > 0 for r in with_true]],
        "out": everyone[[r.size > 0 for r in without_true]],
    }
    result = Comparison(
        data,
        len(train),
        n,
        settings,
        {"in": np.array([r.size for r in with_true]), "out": np.array([r.size for r in without_true])},
        params=model.get_params(),
    )
    score = {
        "time_limit": time_limit,
        "n_jobs": n_jobs,
        "progress": progress,
        "node_label": node_label,
        "edge_label": edge_label,
    }
    formulas = [heavy_formula(g, node_label) for g in truth]

    # generation
    t0 = time.perf_counter()
    generated = model.predict(X[test])
    t_gen = time.perf_counter() - t0
    t0 = time.perf_counter()
    generated_f, result.notes = _generate_with_formulas(model, X[test], formulas, generated)
    t_gen_f = time.perf_counter() - t0
    # 1-NN retrieval over the training inputs (the model's kernel and bandwidth)
    t0 = time.perf_counter()
    sim = model.input_kernel(X[test], X[train])
    order = np.argsort(-sim, axis=1, kind="stable")
    t_nn = time.perf_counter() - t0
    train_comps = [library.compositions(node_label)[i] for i in train]
    truth_comps = CandidateLibrary(truth).compositions(node_label)
    nn = [[graphs[train[j]] for j in row[:10]] for row in order]
    nn_f = []
    for r, row in enumerate(order):
        same = [j for j in row.tolist() if train_comps[j] == truth_comps[r]][:10]
        nn_f.append([graphs[train[j]] for j in (same or row[:10].tolist())])
    for setting, rows in settings.items():
        sub = [truth[r] for r in rows]
        for name, graphs_r, secs in (
            ("generation", [[generated[r]] for r in rows], t_gen),
            ("generation + formula", [[generated_f[r]] for r in rows], t_gen_f),
            ("1-NN retrieval", [nn[r] for r in rows], t_nn),
            ("1-NN retrieval, same formula", [nn_f[r] for r in rows], t_nn),
        ):
            top1 = [g[0] for g in graphs_r]
            res = _scored(name, setting, rows, top1, graphs_r, sub, secs * len(rows) / n, **score)
            result.methods.append(res)

    # ranking
    runs = [("kernel", ok) for ok in output_kernels if "kernel" in scorers] + [
        (s, "wl") for s in scorers if s != "kernel"
    ]
    rng = np.random.default_rng(random_state)
    if fgw_rows is not None and fgw_rows < n:
        result.subset = np.sort(rng.choice(n, fgw_rows, replace=False))
    for scorer, ok in runs:
        name = f"rank: {scorer}" + (f" ({ok})" if scorer == "kernel" else "")
        todo = {}
        for setting, cand in (("in", with_true), ("out", without_true)):
            rows = settings[setting]
            if scorer != "kernel" and result.subset is not None:
                rows = np.intersect1d(rows, result.subset)
            if rows.size:
                todo[setting] = (rows, cand)
        if not todo:
            continue
        t0 = time.perf_counter()
        union = np.unique(np.concatenate([with_true[r] for r in todo[next(iter(todo))][0]]))
        prepare_candidates(model, library, union, scorer=scorer, output_kernel=ok)
        result.encoding_seconds[name] = time.perf_counter() - t0
        for setting, (rows, cand) in todo.items():
            t0 = time.perf_counter()
            ranked = rank_candidates(
                model,
                X[test[rows]],
                library,
                top_k=top_k,
                scorer=scorer,
                filter=[cand[r] for r in rows],
                output_kernel=ok,
                progress=progress,
            )
            secs = time.perf_counter() - t0
            lists = [[graphs[j] for j, _ in row] for row in ranked]
            res = _scored(
                name, setting, rows, [g[0] for g in lists], lists, [truth[r] for r in rows], secs, **score
            )
            result.methods.append(res)
    return result


# --------------------------------------------------------------------------- output
def comparison_table(result: Comparison) -> str:
    """The comparison as a plain-text table (one block per setting)."""
    head = f"{'method':<34}{'n':>5}{'top-1':>8}{'top-5':>8}{'top-10':>8}{'mean GED':>10}{'median':>8}{'s/input':>9}"

    def block(title: str, rows: NDArray[np.int64] | None) -> list[str]:
        lines = []
        for setting in result.settings:
            lines += ["", f"{title}{SETTINGS[setting]}", head, "-" * len(head)]
            for m in result.methods:
                if m.setting != setting:
                    continue
                sel = result._rows(m, rows)
                if sel.size == 0:
                    continue
                g = m.geds(sel)
                lines.append(
                    f"{m.name:<34}{sel.size:>5}{100 * m.top_k(1, sel):>7.1f}%{100 * m.top_k(5, sel):>7.1f}%"
                    f"{100 * m.top_k(10, sel):>7.1f}%{g.mean():>10.2f}{np.median(g):>8.1f}{m.seconds_per_input:>9.3f}"
                )
        return lines

    d = result.to_dict()
    out = [
        f"data {result.data or '?'}: {result.n_train} training, {result.n_test} test inputs; mean candidates "
        + ", ".join(f"{SETTINGS[s]} {v:.0f}" for s, v in d["mean_candidates"].items())
    ]
    dropped = result.n_test - result.settings["out"].size
    if dropped:
        out.append(
            f"{dropped} test input(s) have no other graph with their formula: left out of '{SETTINGS['out']}'"
        )
    out += block("", None)
    if result.subset is not None:
        out += ["", f"the same on the {result.subset.size} inputs the FGW scorers ran on:"]
        out += block("subset, ", result.subset)
    if result.encoding_seconds:
        out += [
            "",
            "candidate encoding (once, before timing): "
            + ", ".join(f"{k} {v:.1f} s" for k, v in result.encoding_seconds.items()),
        ]
    out += [f"note: {n}" for n in result.notes]
    out += [
        "",
        (
            "top-k: true graph (up to label isomorphism) among the first k; generation gives one graph. "
            "GED: uniform costs, exact within the time limit."
        ),
    ]
    return "\n".join(out)


def plot_comparison(result: Comparison, path: str) -> None:
    """Top-k curves (true graph in the set) and GED distributions (both settings) as a PNG.

    Parameters
    ----------
    result : Comparison
    path : str
        PNG file to write.
    """
    matplotlib.use("Agg", force=False)
    fig, axes = plt.subplots(1, 3, figsize=(15, 4.5))
    names = list(dict.fromkeys(m.name for m in result.methods))
    colour = {nm: PALETTE[i % len(PALETTE)] for i, nm in enumerate(names)}
    styles = ["-", "--", ":", "-."]
    for m in result.methods:
        sel = result._rows(m, None)
        if sel.size == 0:
            continue
        ls = styles[names.index(m.name) // len(PALETTE) % len(styles)]
        if m.setting == "in":
            axes[0].plot(
                _CURVE,
                [m.top_k(k, sel) for k in _CURVE],
                marker="o",
                ms=3,
                color=colour[m.name],
                linestyle=ls,
                label=f"{m.name} (n={sel.size})",
            )
        ax = axes[1] if m.setting == "in" else axes[2]
        g = np.sort(m.geds(sel))
        ax.step(
            g,
            np.arange(1, g.size + 1) / g.size,
            where="post",
            color=colour[m.name],
            linestyle=ls,
            label=m.name,
        )
    axes[0].set(xlabel="k", ylabel="top-k accuracy", title=SETTINGS["in"], ylim=(0, 1), xticks=list(_CURVE))
    for ax, s in ((axes[1], "in"), (axes[2], "out")):
        ax.set(
            xlabel="GED of the top-ranked / generated graph",
            ylabel="share of inputs with GED <= x",
            title=SETTINGS[s],
            ylim=(0, 1),
        )
    handles, labels = axes[0].get_legend_handles_labels()
    fig.legend(handles, labels, loc="lower center", ncol=4, fontsize=8, frameon=False)
    for ax in axes:
        ax.grid(alpha=0.3)
    fig.suptitle(f"{result.data}: {result.n_train} training, {result.n_test} test inputs", fontsize=10)
    fig.tight_layout(rect=(0, 0.13, 1, 1))
    target = Path(path)
    with atomic_open(target, binary=True) as fh:  # a killed run never leaves half a PNG
        fig.savefig(fh, dpi=120, format=target.suffix.lstrip(".").lower() or "png")
    plt.close(fig)

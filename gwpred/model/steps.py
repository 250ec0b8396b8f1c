"""Pure per-query steps of the barycenter predictor.

For one input, given its kept training graphs and their weights (a
:class:`Neighbourhood`) and the estimator's settings (:class:`Settings`):

1. :func:`choose_size` votes the size (weighted median of the kept sizes, a
   fixed number, or a formula's heavy-atom count);
2. :func:`choose_start` picks the start graph (the *anchor*: the
   highest-weight kept graph of that size);
3. :func:`solve_barycenter` runs the FGW barycenter from it
   (:func:`gwpred.fgw.fgw_barycenter_batch`, many queries at once) and averages
   the edge-label channels;
4. :func:`decode_query` decodes the soft barycenter with the decoder named in
   :data:`DECODERS`, then, for molecules, repairs it into a valid one or
   decodes the formula's graph (:func:`gwpred.decode.decode_valence`).

Everything here takes and returns plain arrays and dataclasses, so a query can
run in another process (:func:`gwpred.parallel.parallel_map`) without the
estimator.
"""

from __future__ import annotations

import numbers
import warnings
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from typing import Any

import networkx as nx
import numpy as np
from numpy.typing import NDArray

from ..codec import LabelSpace, TrainingSet
from ..decode import (
    DecodedGraph,
    decode_anchored,
    decode_barycenter,
    decode_valence,
    edge_budget,
    weighted_median,
)
from ..fgw import fgw_barycenter_batch, pad_graphs, transport_average
from ..formula import (
    Formula,
    bond_total,
    element_of,
    label_counts,
    parse_formula,
    split_atom_label,
    valence_sets,
    valence_table,
)
from ..parallel import file_backed

__all__ = [
    "DECODERS",
    "Neighbourhood",
    "PaddedGraphs",
    "Settings",
    "SoftGraph",
    "barycenter_batch",
    "barycenter_query",
    "bond_orders",
    "choose_size",
    "choose_start",
    "decode_query",
    "formula_counts",
    "gather",
    "molecular_labels",
    "neighbourhood",
    "on_rows",
    "padded_graphs",
    "parse_formulas",
    "predict_batch",
    "predict_query",
    "solve_barycenter",
    "solve_barycenters",
    "valence_arrays",
    "DECODE_BUDGET",
    "label_atoms",
    "make_settings",
    "uses_valence",
]


@dataclass(frozen=True)
class SoftGraph:
    """A soft barycenter prediction, before decoding.

    Attributes
    ----------
    structure : ndarray of shape (n, n)
        Soft adjacency: transported average of the neighbours' adjacency.
    node_scores : ndarray of shape (n, n_node_labels)
        Soft one-hot node labels (rows sum to one for known labels).
    edge_scores : ndarray of shape (n, n, n_edge_labels)
        Soft edge-label channels; they sum to ``structure``.
    neighbors : ndarray of shape (k,)
        Training indices used, by decreasing weight.
    weights : ndarray of shape (k,)
        Their barycentric weights (non-negative, sum one).
    objective : float
        Weighted FGW objective of the barycenter.
    anchor : int
        Training index of the graph the barycenter started from.
    anchor_structure : ndarray of shape (n, n)
        Its 0/1 adjacency in the barycenter's node order.
    anchor_edge_classes : ndarray of shape (n, n)
        Its edge label indices in the same order.
    """

    structure: NDArray[np.float64]
    node_scores: NDArray[np.float64]
    edge_scores: NDArray[np.float64]
    neighbors: NDArray[np.int64]
    weights: NDArray[np.float64]
    objective: float
    anchor: int
    anchor_structure: NDArray[np.float64]
    anchor_edge_classes: NDArray[np.int64]


@dataclass(frozen=True)
class Settings:
    """What a query needs of the estimator: its parameters, resolved, and fitted label facts.

    Attributes
    ----------
    alpha, max_outer, max_inner, tol : float, int, int, float
        FGW trade-off and iteration limits (see the estimator).
    n_nodes : "vote" or int
        Size rule.
    decoding : str
        Key of :data:`DECODERS`.
    edges : {"budget", "threshold"}
        Edge policy of ``free`` decoding.
    consensus : float
        Agreement needed by ``anchored`` decoding to change an anchor edge.
    connect : bool
        Decode connected graphs.
    labels : LabelSpace
        Fitted label categories (to build the graph).
    max_degree : ndarray of shape (n_node_labels,)
        Largest degree per node label in training.
    valence : bool
        Repair decodings into valid molecules.
    valences, orders : list of int or None
        Largest valence per node label and bond order per edge label; needed
        when ``valence`` is on or a formula is given.
    valence_sets : list of (tuple of int or None), optional
        Allowed valences per node label (for a formula's hydrogens).
    charges : list of int, optional
        Formal charge per node label (``"N+"``: 1), for a formula's net charge.
    elements : list of str, optional
        Element (or, for labels of a valence table of one's own, the label)
        of each node label, for a formula's heavy atoms.
    """

    alpha: float
    max_outer: int
    max_inner: int
    tol: float
    n_nodes: str | int
    decoding: str
    edges: str
    consensus: float
    connect: bool
    labels: LabelSpace
    max_degree: NDArray[np.int64]
    valence: bool
    valences: list[int] | None
    orders: list[int] | None
    valence_sets: list[tuple[int, ...] | None] | None = None
    charges: list[int] | None = None
    elements: list[str] | None = None


@dataclass(frozen=True)
class Neighbourhood:
    """The kept training graphs of one query, by decreasing weight.

    Attributes
    ----------
    indices : ndarray of shape (k,)
        Training indices.
    weights : ndarray of shape (k,)
        Barycentric weights (positive, sum one).
    structures, features, channels : list of ndarray
        Their encodings (see :class:`~gwpred.codec.TrainingSet`).
    sizes, n_edges : ndarray of shape (k,)
        Their node and edge counts.
    """

    indices: NDArray[np.int64]
    weights: NDArray[np.float64]
    structures: list[NDArray[np.float64]]
    features: list[NDArray[np.float64]]
    channels: list[NDArray[np.float64]]
    sizes: NDArray[np.int64]
    n_edges: NDArray[np.int64]


def neighbourhood(training: TrainingSet, indices: NDArray[np.int64], weights: NDArray[np.float64]) -> Neighbourhood:
    """Gather the kept graphs of one query (positive weights only) from the training set."""
    keep = weights > 0
    idx, w = indices[keep], weights[keep]
    return Neighbourhood(
        idx,
        w,
        [training.structures[i] for i in idx],
        [training.features[i] for i in idx],
        [training.channels[i] for i in idx],
        training.sizes[idx],
        training.n_edges[idx],
    )


@dataclass(frozen=True)
class PaddedGraphs:
    """Every training graph in zero-padded arrays, to send to workers once instead of per query.

    Attributes
    ----------
    structures : ndarray of shape (n_train, m, m)
    features : ndarray of shape (n_train, m, d)
    channels : ndarray of shape (n_train, m, m, n_edge_labels)
        Graph ``i`` in the first ``sizes[i]`` rows and columns, zeros elsewhere.
    sizes, n_edges : ndarray of shape (n_train,)
    """

    structures: NDArray[np.float64]
    features: NDArray[np.float64]
    channels: NDArray[np.float64]
    sizes: NDArray[np.int64]
    n_edges: NDArray[np.int64]


def padded_graphs(training: TrainingSet, max_padding: float = 4.0, files: bool = False) -> PaddedGraphs | None:
    """The training graphs as :class:`PaddedGraphs` (built once, kept in ``training.derived``).

    Returns None when padding would take more than ``max_padding`` times
    the graphs' own entries (a few large graphs among many small ones).
    With ``files=True`` the arrays are file-backed (:func:`gwpred.parallel.file_backed`,
    removed with ``training``): worker processes then map them instead of
    receiving a copy at every call.
    """
    if files:
        if "padded_files" not in training.derived:
            padded = padded_graphs(training, max_padding)
            training.derived["padded_files"] = None if padded is None else PaddedGraphs(
                **file_backed(vars(padded), training)
            )
        return training.derived["padded_files"]
    if "padded" in training.derived:
        return training.derived["padded"]
    sizes = training.sizes
    m = int(sizes.max())
    if len(sizes) * m * m > max_padding * float(np.sum(sizes.astype(np.float64) ** 2)):
        return None
    n, d, L = len(sizes), training.features[0].shape[1], training.channels[0].shape[2]
    C, F, E = np.zeros((n, m, m)), np.zeros((n, m, d)), np.zeros((n, m, m, L))
    for i, k in enumerate(sizes.tolist()):
        C[i, :k, :k] = training.structures[i]
        F[i, :k] = training.features[i]
        E[i, :k, :k] = training.channels[i]
    padded = PaddedGraphs(C, F, E, sizes, training.n_edges)
    training.derived["padded"] = padded
    return padded


def gather(padded: PaddedGraphs, indices: NDArray[np.int64], weights: NDArray[np.float64]) -> Neighbourhood:
    """:func:`neighbourhood` from padded arrays: the same values, as views."""
    keep = weights > 0
    idx, w = indices[keep], weights[keep]
    ks = padded.sizes[idx].tolist()
    return Neighbourhood(
        idx,
        w,
        [padded.structures[i, :k, :k] for i, k in zip(idx.tolist(), ks)],
        [padded.features[i, :k] for i, k in zip(idx.tolist(), ks)],
        [padded.channels[i, :k, :k] for i, k in zip(idx.tolist(), ks)],
        padded.sizes[idx],
        padded.n_edges[idx],
    )


# --------------------------------------------------------------------------- formulas and valences


def parse_formulas(
    formulas: Any, n_rows: int, known: Sequence[Any], max_heavy: int | None = None
) -> list[Formula | None]:
    """Parse per-row formulas; check the length and that every element was seen in training.

    Parameters
    ----------
    formulas : list of (str, Formula or None), or None
    n_rows : int
        Number of input rows.
    known : sequence
        Node labels seen in training.
    max_heavy : int, optional
        Most heavy atoms a formula may have (the estimator allows four times
        its largest training graph).

    Returns
    -------
    list of (Formula or None)
        One per row; blank strings and None give None.

    Raises
    ------
    TypeError
        For a single string instead of a list.
    ValueError
        For a wrong length, an unreadable formula or an element unseen in training.
    """
    if formulas is None:
        return [None] * n_rows
    if isinstance(formulas, (str, Formula)):
        raise TypeError(
            "formulas must be a list with one formula (or None) per input row, not a single string."
        )
    formulas = list(formulas)
    if len(formulas) != n_rows:
        raise ValueError(
            f"X has {n_rows} rows but {len(formulas)} formulas were given; pass one formula "
            "(or None) per row."
        )
    known_set = {element_of(lab) for lab in known}  # "N+" is nitrogen
    out: list[Formula | None] = []
    for r, f in enumerate(formulas):
        if f is None or (isinstance(f, str) and not f.strip()):
            out.append(None)
            continue
        try:
            parsed = f if isinstance(f, Formula) else parse_formula(f)
        except (TypeError, ValueError) as exc:
            raise ValueError(f"formulas[{r}]: {exc}") from None
        unknown = sorted(set(parsed.heavy) - known_set)
        if unknown:
            raise ValueError(
                f"formulas[{r}] ({parsed.text}) holds {unknown}, never seen as a node label in "
                f"training (known: {sorted(map(str, known_set))}); the model cannot place them."
            )
        n_heavy = sum(parsed.heavy.values())
        if max_heavy is not None and n_heavy > max_heavy:
            raise ValueError(
                f"formulas[{r}] ({parsed.text}) has {n_heavy} heavy atoms, more than {max_heavy} (four "
                f"times the largest training graph); a barycenter of training graphs cannot reach that "
                "size meaningfully. Train on molecules of that size."
            )
        out.append(parsed)
    return out


def bond_orders(edge_labels: Sequence[Any], edge_label: str | None) -> list[int]:
    """Bond order of each edge label (None: single bonds), for valence decoding.

    Raises
    ------
    ValueError
        When an edge label is not 1, 2 or 3.
    """
    orders = []
    for lab in edge_labels:
        if lab is None:
            orders.append(1)
        elif isinstance(lab, numbers.Integral) and not isinstance(lab, bool) and 1 <= lab <= 3:
            orders.append(int(lab))
        else:
            raise ValueError(
                f"valence decoding needs bond orders 1, 2 or 3 as edge labels; the training graphs "
                f"have edge label {lab!r} (attribute {edge_label!r})."
            )
    return orders


def valence_arrays(labels: LabelSpace, valence: bool | dict) -> tuple[list[int], list[int]]:
    """Valence per node label and bond order per edge label of a fitted label space."""
    table = valence if isinstance(valence, dict) else None
    return valence_table(labels.node_labels_, table), bond_orders(labels.edge_labels_, labels.edge_label)


def label_atoms(
    labels: LabelSpace, valence: bool | dict
) -> tuple[list[tuple[int, ...] | None], list[int], list[str]]:
    """Allowed valences, formal charge and element of each node label of a fitted label space.

    Labels of a valence table of one's own (``valence`` a dict) that are not
    atom labels count as elements of their own name, neutral.
    """
    table = valence if isinstance(valence, dict) else None
    charges, elements = [], []
    for lab in labels.node_labels_:
        try:
            symbol, q = split_atom_label(lab)
        except ValueError:
            if table is None or lab not in table:
                raise
            symbol, q = str(lab), 0
        elements.append(symbol)
        charges.append(q)
    return valence_sets(labels.node_labels_, table), charges, elements


def molecular_labels(labels: LabelSpace) -> bool:
    """True when valence rules apply to a fitted label space (``valence="auto"``).

    Every node label must be an element symbol with a known valence and every
    edge label a bond order 1, 2 or 3 (``None``: edge labels ignored, single bonds).

    Raises
    ------
    ImportError
        When an element's valence needs RDKit and it is not installed.
    """
    try:
        valence_table(labels.node_labels_)
        bond_orders(labels.edge_labels_, labels.edge_label)
    except ValueError:
        return False
    return True


def uses_valence(valence: str | bool | dict, labels: LabelSpace) -> bool:
    """An estimator's ``valence`` parameter resolved against its fitted labels (``"auto"``: :func:`molecular_labels`)."""
    if isinstance(valence, str):  # "auto"
        return molecular_labels(labels)
    return bool(valence)


def make_settings(
    labels: LabelSpace,
    max_degree: NDArray[np.int64],
    connected: bool,
    valence: str | bool | dict,
    need_valences: bool,
    *,
    alpha: float,
    max_outer: int,
    max_inner: int,
    tol: float,
    n_nodes: str | int,
    decoding: str,
    edges: str,
    consensus: float,
    connect: str | bool,
) -> Settings:
    """The :class:`Settings` of an estimator's queries, from its parameters and fitted label facts.

    ``need_valences``: fill the valence arrays (when valence rules are on or a
    formula is given); ``connect="auto"`` becomes ``connected`` (every training graph is).
    """
    on = uses_valence(valence, labels)
    valences = orders = sets = charges = elements = None
    if need_valences:
        table = valence if on else False
        valences, orders = valence_arrays(labels, table)
        sets, charges, elements = label_atoms(labels, table)
    return Settings(
        alpha=alpha, max_outer=max_outer, max_inner=max_inner, tol=tol, n_nodes=n_nodes, decoding=decoding,
        edges=edges, consensus=consensus, connect=connected if connect == "auto" else bool(connect),
        labels=labels, max_degree=max_degree, valence=on, valences=valences, orders=orders,
        valence_sets=sets, charges=charges, elements=elements,
    )


# --------------------------------------------------------------------------- size, start, barycenter


def choose_size(hood: Neighbourhood, n_nodes: str | int, counts: NDArray[np.int64] | None = None) -> int:
    """Size of the predicted graph: a formula's heavy atoms, a fixed number, or the weighted median size."""
    if counts is not None:  # a formula fixes the size
        return int(counts.sum())
    if n_nodes == "vote":
        return int(weighted_median(hood.sizes, hood.weights))
    return int(n_nodes)


def choose_start(hood: Neighbourhood, n: int) -> int:
    """Position (in the neighbourhood) of the start graph: the highest-weight graph of size ``n``.

    A real graph, because a constant start leaves all plans uniform; without a
    graph of that size, the closest in size.
    """
    same = np.flatnonzero(hood.sizes == n)
    return int(same[0]) if same.size else int(np.argmin(np.abs(hood.sizes - n)))


def _start(hood: Neighbourhood, settings: Settings, counts: NDArray[np.int64] | None) -> tuple:
    """Size, start position, start graph (structure, features, edge classes) of one query."""
    n = choose_size(hood, settings.n_nodes, counts)
    pos = choose_start(hood, n)
    C0, F0 = hood.structures[pos], hood.features[pos]
    L0 = hood.channels[pos].argmax(-1)
    if C0.shape[0] != n:  # fixed size without a training graph of that size
        reps = np.resize(np.arange(C0.shape[0]), n)
        C0, F0, L0 = C0[np.ix_(reps, reps)], F0[reps], L0[np.ix_(reps, reps)]
        np.fill_diagonal(C0, 0.0)
    return n, pos, C0, F0, L0


def solve_barycenters(
    hoods: Sequence[Neighbourhood],
    settings: Settings,
    counts: Sequence[NDArray[np.int64] | None] | None = None,
) -> list[SoftGraph]:
    """The FGW barycenters of several queries, each started from its anchor, solved together.

    Queries whose barycenters have the same size and whose kept graphs pad to
    the same size form one batch of :func:`gwpred.fgw.fgw_barycenter_batch`:
    the same arithmetic, array for array, as solving each query alone, with
    the per-step Python cost paid once per batch.

    Parameters
    ----------
    hoods : sequence of Neighbourhood
    settings : Settings
    counts : sequence of (ndarray of shape (n_node_labels,) or None), optional
        Per query, heavy atoms per label of a known formula (fixes the size).

    Returns
    -------
    list of SoftGraph
        One per query, in order.
    """
    counts = [None] * len(hoods) if counts is None else list(counts)
    starts = [_start(h, settings, c) for h, c in zip(hoods, counts)]
    groups: dict[tuple[int, int], list[int]] = {}
    for q, (hood, st) in enumerate(zip(hoods, starts)):
        groups.setdefault((st[0], int(hood.sizes.max())), []).append(q)
    out: list[SoftGraph | None] = [None] * len(hoods)
    for (n, m), members in groups.items():
        structures = [C for q in members for C in hoods[q].structures]
        features = [F for q in members for F in hoods[q].features]
        Cs, Fs, qs, sizes = pad_graphs(structures, features)
        owner = np.repeat(np.arange(len(members)), [len(hoods[q].indices) for q in members])
        offsets = np.r_[0, np.cumsum([len(hoods[q].indices) for q in members])]
        init_from = [
            int(offsets[j] + starts[q][1]) if hoods[q].sizes[starts[q][1]] == n else -1
            for j, q in enumerate(members)
        ]
        res = fgw_barycenter_batch(
            Cs,
            Fs,
            qs,
            owner,
            np.concatenate([hoods[q].weights for q in members]),
            np.stack([starts[q][2] for q in members]),
            np.stack([starts[q][3] for q in members]),
            sizes=sizes,
            alpha=settings.alpha,
            init_plans="features",
            init_from=init_from,
            # anchored decoding needs the barycenter's nodes to stay the anchor's
            # nodes: warm starts only (benchmarks/bench_decoding.py)
            restarts=0 if settings.decoding == "anchored" else 2,
            max_outer=settings.max_outer,
            tol_outer=settings.tol,
            max_inner=settings.max_inner,
            tol_inner=settings.tol,
        )
        h = np.full(n, 1.0 / n)
        for j, q in enumerate(members):
            hood, (_, pos, C0, _, L0) = hoods[q], starts[q]
            plans = res.plans[offsets[j] : offsets[j + 1]]
            chans = np.zeros((len(hood.indices), m, m, settings.labels.n_edge_labels))
            for s, E in enumerate(hood.channels):
                k = E.shape[0]
                chans[s, :k, :k] = E
            E = transport_average(plans, chans, hood.weights, h)
            out[q] = SoftGraph(
                res.structures[j], res.features[j], E, hood.indices, hood.weights,
                float(res.objectives[j]), int(hood.indices[pos]), C0, L0,
            )
    return out  # type: ignore[return-value]  # every position was filled


def solve_barycenter(hood: Neighbourhood, settings: Settings, counts: NDArray[np.int64] | None = None) -> SoftGraph:
    """The FGW barycenter of one query's kept graphs, started from its anchor.

    Parameters
    ----------
    hood : Neighbourhood
    settings : Settings
    counts : ndarray of shape (n_node_labels,), optional
        Heavy atoms per label of a known formula (fixes the size).

    Returns
    -------
    SoftGraph
        The same as :func:`solve_barycenters` gives for this query in any batch.
    """
    return solve_barycenters([hood], settings, [counts])[0]


# --------------------------------------------------------------------------- decoding


def _decode_anchored(soft: SoftGraph, hood: Neighbourhood, settings: Settings) -> DecodedGraph:
    k = settings.labels.n_node_labels
    return decode_anchored(
        soft.structure,
        soft.node_scores[:, :k],
        soft.edge_scores,
        soft.anchor_structure,
        soft.anchor_edge_classes,
        consensus=settings.consensus,
        connected=settings.connect,
        max_degree=settings.max_degree,
    )


def _decode_free(soft: SoftGraph, hood: Neighbourhood, settings: Settings) -> DecodedGraph:
    k = settings.labels.n_node_labels
    budget = None
    if settings.edges == "budget":
        budget = edge_budget(soft.structure.shape[0], hood.sizes, hood.n_edges, soft.weights)
    return decode_barycenter(
        soft.structure,
        soft.node_scores[:, :k],
        soft.edge_scores,
        n_edges=budget,
        connected=settings.connect,
        max_degree=settings.max_degree,
    )


#: Decoders by name: ``(soft, neighbourhood, settings) -> DecodedGraph``. A new
#: decoder is a new entry (and a choice of the estimator's ``decoding``).
DECODERS: dict[str, Callable[[SoftGraph, Neighbourhood, Settings], DecodedGraph]] = {
    "anchored": _decode_anchored,
    "free": _decode_free,
}


def decode_query(
    soft: SoftGraph, hood: Neighbourhood, settings: Settings, formula: Formula | None = None
) -> nx.Graph:
    """Decode one soft barycenter into a labeled graph.

    The decoder ``settings.decoding`` gives the ordinary decoding.  With
    ``settings.valence`` it is repaired into a valid molecule with the fewest
    edits; with a formula, the decoding is instead the formula's graph that
    agrees best with the barycenter (measured better than staying close to
    the ordinary decoding, ``benchmarks/bench_qm9.py``).
    """
    out = DECODERS[settings.decoding](soft, hood, settings)
    labels = settings.labels
    if not (settings.valence or formula is not None):
        return labels.build_graph(out.node_classes, out.edges, out.edge_classes)
    assert settings.valences is not None and settings.orders is not None  # set by the estimator
    k = labels.n_node_labels
    try:
        out = decode_valence(
            soft.structure,
            soft.node_scores[:, :k],
            soft.edge_scores,
            settings.valences,
            settings.orders,
            reference=None if formula is not None else out,
            connected=settings.connect,
            time_limit=DECODE_BUDGET,
            min_support=PAIR_SUPPORT if soft.structure.shape[0] > PRUNE_ABOVE else 0.0,
            cuts=soft.structure.shape[0] > PRUNE_ABOVE,
            **_formula_rules(formula, settings),
        )
    except ValueError as exc:
        where = f"formula {formula.text}: " if formula is not None else ""
        raise ValueError(f"{where}{exc}") from None
    graph = labels.build_graph(out.node_classes, out.edges, out.edge_classes)
    if out.note:
        graph.graph["decoding_note"] = out.note
        warnings.warn(f"a prediction of {len(out.node_classes)} nodes: {out.note}", RuntimeWarning, stacklevel=2)
    return graph


#: Seconds the valence and formula integer program of one prediction may take
#: (``benchmarks/bench_druglike.py`` measures the times); past it, the best graph found,
#: or a quick valence repair, comes back with a ``"decoding_note"`` graph attribute.
DECODE_BUDGET = 2.0

#: Above this many nodes, the integer program first considers only the node pairs whose
#: barycenter score reaches PAIR_SUPPORT (``min_support`` of decode_valence) and leaves
#: connectivity to a repair that joins pieces, or to cuts (``cuts``), which keeps 40-atom
#: decodings within the budget
#: (``benchmarks/bench_druglike.py``); smaller graphs (QM9's) are decoded as before.
PRUNE_ABOVE = 20
PAIR_SUPPORT = 0.02


def _plain(settings: Settings) -> bool:
    """Every label a neutral atom with one valence (QM9-like): the formula fixes the bond total."""
    sets, charges = settings.valence_sets, settings.charges
    return sets is None or charges is None or all(
        v is not None and len(v) == 1 and q == 0 for v, q in zip(sets, charges)
    )


def _formula_rules(formula: Formula | None, settings: Settings) -> dict[str, Any]:
    """The constraints a formula puts on :func:`gwpred.decode.decode_valence`."""
    if formula is None:
        return {}
    labels = settings.labels
    if _plain(settings) and formula.charge:
        raise ValueError(
            f"it has net charge {formula.charge:+d}, but no training node label is a charged atom "
            "('N+', 'O-'); train on graphs whose labels carry the charges (gwpred.chem does so)."
        )
    if _plain(settings):  # per-label counts and the bond total from the hydrogens, as since 0.1
        counts = np.array(label_counts(formula, labels.node_labels_), dtype=np.int64)
        return {"label_counts": counts, "total_bond_order": bond_total(formula, counts, settings.valences)}
    assert settings.elements is not None and settings.charges is not None
    elements = sorted(set(settings.elements) | set(formula.heavy), key=str)
    groups = np.array([elements.index(e) for e in settings.elements], dtype=np.int64)
    return {
        "label_groups": groups,
        "group_counts": np.array([formula.heavy.get(e, 0) for e in elements], dtype=np.int64),
        "label_charges": np.asarray(settings.charges, dtype=np.int64),
        "net_charge": formula.charge,
        "valence_sets": settings.valence_sets,
        "hydrogens": formula.hydrogens,
    }


def formula_counts(formula: Formula | None, labels: LabelSpace) -> NDArray[np.int64] | None:
    """Heavy atoms of a formula, per node label when each label is an element of its own, else
    per element (its sum fixes the barycenter's size); or None."""
    if formula is None:
        return None
    counts = label_counts(formula, labels.node_labels_)
    if sum(counts) != formula.n_heavy:  # charged labels ("N+"): counted per element
        counts = list(formula.heavy.values())
    return np.array(counts, dtype=np.int64)


def predict_query(hood: Neighbourhood, settings: Settings, formula: Formula | None = None) -> nx.Graph:
    """One prediction: barycenter of the neighbourhood, then decoding."""
    return predict_batch([hood], [formula], settings)[0]


def barycenter_query(hood: Neighbourhood, settings: Settings, formula: Formula | None = None) -> SoftGraph:
    """One soft barycenter, not decoded."""
    return barycenter_batch([hood], [formula], settings)[0]


def barycenter_batch(
    hoods: Sequence[Neighbourhood], formulas: Sequence[Formula | None], settings: Settings
) -> list[SoftGraph]:
    """Soft barycenters of a batch of queries (:func:`solve_barycenters`), not decoded."""
    return solve_barycenters(hoods, settings, [formula_counts(f, settings.labels) for f in formulas])


def predict_batch(
    hoods: Sequence[Neighbourhood], formulas: Sequence[Formula | None], settings: Settings
) -> list[nx.Graph]:
    """Predictions for a batch of queries: barycenters solved together, then decoded one by one."""
    softs = barycenter_batch(hoods, formulas, settings)
    return [decode_query(soft, hood, settings, f) for soft, hood, f in zip(softs, hoods, formulas)]


def on_rows(
    step: Callable[..., list],
    indices: NDArray[np.int64],
    weights: NDArray[np.float64],
    formulas: Sequence[Formula | None],
    settings: Settings,
    padded: PaddedGraphs,
) -> list:
    """A batch step (:func:`predict_batch` or :func:`barycenter_batch`) on rows of kept training
    indices and weights, gathered from the padded training graphs (a worker's task)."""
    return step([gather(padded, i, w) for i, w in zip(indices, weights)], formulas, settings)

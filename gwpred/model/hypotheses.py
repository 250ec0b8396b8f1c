r"""The k best hypotheses for an input: a generated pool, scored, deduplicated, calibrated.

For one input ``x`` (its kept training graphs :math:`y_i` and weights
:math:`w_i(x)`, a :class:`~gwpred.model.steps.Neighbourhood`), the pool holds,
with no candidate library:

``decoding``
    the ordinary prediction (what ``predict`` returns);
``free``
    the same barycenter decoded without an anchor (``decoding="free"``;
    without a formula only: with one, every decoding is the formula's integer
    program);
``anchor``
    barycenters started from each of the ``n_anchors`` highest-weight
    neighbours (of the formula's size when one is given; else at that
    neighbour's own size), each decoded as edits of its anchor;
``size``
    barycenters one node smaller and one larger than the voted size (only
    without a formula, which fixes the size);
``neighbour``
    the kept training graphs themselves (with a formula, those that match it;
    for molecules, those that obey the valence rules);
``edit``
    a local search: from the ``n_expand`` best-scored members, every valid
    single edit (one bond order up and another down, which also opens or
    closes a ring or moves a bond; a whole bond moved; two atoms of different
    elements swapped, or, without a formula, one atom relabelled), scored,
    for ``n_rounds`` rounds, each expanding the best members not yet expanded.

Members are deduplicated by Weisfeiler-Lehman hash, then by label-preserving
isomorphism (networkx).  Each member is scored with the output-kernel score
:math:`\sum_i w_i(x)\, k(y_i, c)` of :func:`gwpred.ranking.rank_candidates`
(``scorer="kernel"``, run on the input's own candidate list);
``output_kernel="both"`` averages the WL and the fingerprint kernels.  The
list is the ``k`` best by score.

Molecules: with the valence rules on (``model.valence_``) or a formula, every
member obeys valences and is connected (when the training graphs are); with a
formula, every member has exactly its heavy atoms and, when the formula gives
hydrogens, that many implicit hydrogens.

Confidence
----------
A :class:`HypothesisCalibration` (from :func:`calibrate_hypotheses` on
held-out inputs with known graphs) maps a score to the observed rate at which
hypotheses of that score were the exact graph (isotonic regression,
scikit-learn), so confidence is a probability estimate, non-decreasing in the
score.  Without one, ``confidence`` is the raw score (in ``[0, 1]``, same
order) and the lists say ``calibrated=False``: a ranking aid, not a
probability.  Generated molecules are hypotheses to check, never results.
"""

from __future__ import annotations

import warnings
from collections.abc import Callable, Sequence
from dataclasses import dataclass, replace
from functools import lru_cache
from typing import Any, Protocol

import networkx as nx
import numpy as np
from numpy.typing import ArrayLike, NDArray
from sklearn.base import BaseEstimator
from sklearn.isotonic import IsotonicRegression

from .._utils import has_extra, progress_bar
from ..codec import LabelSpace, TrainingSet
from ..formula import Formula, formula_matches, graph_formula
from ..ged import edit_distance, edit_distance_bounds
from ..metrics import expected_calibration_error, summarize
from ..chem import morgan_bits_of_arrays
from ..ranking import CandidateLibrary, rank_candidates, remember_fingerprints
from ..wl import (
    IdGraph,
    LabelIds,
    canonical_order,
    graph_ids,
    remember_wl_encodings,
    wl_encoding,
    wl_graph_hashes,
    wl_hash,
)
from .fingerprint_search import graph_arrays
from .steps import (
    Neighbourhood,
    Settings,
    choose_size,
    decode_query,
    formula_counts,
    neighbourhood,
    solve_barycenters,
)

__all__ = [
    "OUTPUT_KERNELS",
    "Hypothesis",
    "HypothesisCalibration",
    "HypothesisList",
    "calibrate_cases",
    "calibrate_hypotheses",
    "calibration_from",
    "expected_calibration_error",
    "generate_hypotheses",
    "list_features",
    "recalibrated",
    "single_edits",
    "within_one",
]

#: Output kernels of the hypothesis score (``"both"``: mean of the two; ``"auto"``:
#: ``"fingerprint"`` for molecules when RDKit is installed, else ``"wl"``).
OUTPUT_KERNELS = ("auto", "wl", "fingerprint", "both")


@dataclass(frozen=True)
class Hypothesis:
    """One generated graph for an input.

    Attributes
    ----------
    graph : networkx.Graph
        Nodes ``0..n-1`` labeled like the training graphs.
    score : float
        Output-kernel score :math:`\\sum_i w_i(x) k(y_i, c)` (higher is better).
    confidence : float
        In ``[0, 1]``, non-increasing down the list: the calibrated probability
        that this is the exact graph, or the raw score when uncalibrated.
    source : str
        Which part of the pool found it first: ``decoding``, ``free``,
        ``anchor``, ``size``, ``neighbour`` or ``edit``.
    confidence_near : float
        In ``[0, 1]``: the calibrated probability that this graph is within
        graph edit distance 1 of the true graph (at least ``confidence``), or
        the raw score when uncalibrated.
    """

    graph: nx.Graph
    score: float
    confidence: float
    source: str
    confidence_near: float = float("nan")


class HypothesisList(list):
    """The hypotheses of one input, best first (a list of :class:`Hypothesis`).

    Attributes
    ----------
    requested : int
        The ``k`` asked for.
    note : str
        Empty, or why the list is shorter than ``k`` (the pool held fewer
        distinct graphs).
    calibrated : bool
        Whether confidences come from a :class:`HypothesisCalibration`.
    """

    def __init__(self, items: Sequence[Hypothesis], requested: int, note: str = "", calibrated: bool = False) -> None:
        super().__init__(items)
        self.requested = requested
        self.note = note
        self.calibrated = calibrated


def list_features(scores: ArrayLike) -> NDArray[np.float64]:
    """Score and margin of each hypothesis of one list, best first: shape (m, 2).

    The margin of the first is its lead over the second (over 0 when alone);
    of every other, its (negative) distance to the first.
    """
    s = np.asarray(scores, dtype=np.float64).ravel()
    if s.size == 0:
        return np.zeros((0, 2))
    runner_up = s[1] if s.size > 1 else 0.0
    margin = s - s[0]
    margin[0] = s[0] - runner_up
    return np.stack([s, margin], 1)


def _step_map(x: ArrayLike, y: ArrayLike) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """Isotonic (increasing) fit of rates ``y`` in ``[0, 1]`` against ``x``: thresholds and values."""
    iso = IsotonicRegression(y_min=0.0, y_max=1.0, increasing=True, out_of_bounds="clip")
    iso.fit(np.asarray(x, dtype=np.float64), np.asarray(y, dtype=np.float64))
    return np.asarray(iso.X_thresholds_, dtype=np.float64), np.asarray(iso.y_thresholds_, dtype=np.float64)


@dataclass(frozen=True)
class HypothesisCalibration:
    r"""Hypothesis lists -> probabilities of the exact graph and of a graph within GED 1.

    A hypothesis with score :math:`s` and list margin :math:`g` (see
    :func:`list_features`: the top one's lead over the second, the others'
    distance to the top) is mapped through :math:`u = s + eta g`, then two
    non-decreasing step functions of :math:`u` fitted by isotonic regression
    (scikit-learn) on held-out inputs: the rate of exact matches and the rate
    of graphs within edit distance 1.  Down a list :math:`u` decreases, so
    confidences never increase; :math:`eta` (``margin_weight``) is chosen
    by two-fold cross-validation of the Brier score over the inputs.

    Attributes
    ----------
    scores, probabilities : ndarray of shape (m,)
        Thresholds of :math:`u` and exact-match rates there (linear in
        between, constant outside).
    near_scores, near_probabilities : ndarray of shape (m2,)
        The same for "within GED 1" (never below the exact-match rate).
    margin_weight : float
        :math:`\beta`.
    options : dict
        Pool and score options it was fitted with (``top_k``, ``formulas``:
        whether formulas were given, ...); use it on lists made alike.
    n_hypotheses, n_inputs : int
        Hypotheses and inputs it was fitted on.
    ged_first, ged_decoding : float
        Mean graph edit distance to the true graphs, on the calibration
        inputs, of the first hypothesis and of the ordinary decoding (NaN when
        not measured); ``predict_with="auto"`` returns the first hypothesis
        when it was the closer (:attr:`prefers_hypotheses`).
    """

    scores: NDArray[np.float64]
    probabilities: NDArray[np.float64]
    near_scores: NDArray[np.float64]
    near_probabilities: NDArray[np.float64]
    margin_weight: float
    options: dict
    n_hypotheses: int
    n_inputs: int
    ged_first: float = float("nan")
    ged_decoding: float = float("nan")

    @property
    def prefers_hypotheses(self) -> bool:
        """Whether the first hypothesis had the lower mean GED on the calibration inputs."""
        return bool(np.isfinite(self.ged_first) and np.isfinite(self.ged_decoding)
                    and self.ged_first < self.ged_decoding)

    def _u(self, scores: ArrayLike) -> NDArray[np.float64]:
        f = list_features(scores)
        return f[:, 0] + self.margin_weight * f[:, 1]

    def __call__(self, scores: ArrayLike) -> NDArray[np.float64]:
        """Exact-match confidences of one list's scores, best first (in ``[0, 1]``, non-increasing)."""
        return np.clip(np.interp(self._u(scores), self.scores, self.probabilities), 0.0, 1.0)

    def near(self, scores: ArrayLike) -> NDArray[np.float64]:
        """Within-GED-1 confidences of one list's scores, best first (at least :meth:`__call__`'s)."""
        near = np.clip(np.interp(self._u(scores), self.near_scores, self.near_probabilities), 0.0, 1.0)
        return np.maximum(near, self(scores))

    def to_dict(self) -> dict:
        """JSON-ready form (model files)."""
        return {
            "scores": self.scores.tolist(), "probabilities": self.probabilities.tolist(),
            "near_scores": self.near_scores.tolist(), "near_probabilities": self.near_probabilities.tolist(),
            "margin_weight": float(self.margin_weight), "options": dict(self.options),
            "n_hypotheses": int(self.n_hypotheses), "n_inputs": int(self.n_inputs),
            "ged_first": float(self.ged_first) if np.isfinite(self.ged_first) else None,
            "ged_decoding": float(self.ged_decoding) if np.isfinite(self.ged_decoding) else None,
        }

    @classmethod
    def from_dict(cls, data: Any) -> HypothesisCalibration:
        """Inverse of :meth:`to_dict`, checked: equal lengths, finite, increasing thresholds,
        non-decreasing rates in ``[0, 1]``.

        Raises
        ------
        ValueError
            When any of those fails (a damaged or hand-edited model file).
        """
        try:
            arrays = [np.asarray(data[k], dtype=np.float64)
                      for k in ("scores", "probabilities", "near_scores", "near_probabilities")]
            beta = float(data["margin_weight"])
            options, n_h, n_i = dict(data["options"]), int(data["n_hypotheses"]), int(data["n_inputs"])
            # optional: files written before these were measured lack them
            geds = [np.nan if data.get(k) is None else float(data[k]) for k in ("ged_first", "ged_decoding")]
        except (KeyError, TypeError, ValueError) as err:
            raise ValueError(f"a hypothesis calibration needs thresholds, rates and counts ({err})") from err
        for x, y in (arrays[:2], arrays[2:]):
            if (x.ndim != 1 or x.shape != y.shape or x.size == 0 or not np.all(np.isfinite(x))
                    or not np.all(np.isfinite(y)) or np.any(np.diff(x) <= 0) or np.any(np.diff(y) < 0)
                    or y.min() < 0 or y.max() > 1):
                raise ValueError("a hypothesis calibration's thresholds must increase and its rates be "
                                 "non-decreasing in [0, 1], of equal lengths")
        if not np.isfinite(beta) or beta < 0:
            raise ValueError(f"margin_weight must be finite and >= 0; got {beta}")
        if any(not np.isnan(g) and not (np.isfinite(g) and g >= 0) for g in geds):
            raise ValueError(f"ged_first and ged_decoding must be finite and >= 0, or null; got {geds}")
        return cls(*arrays, beta, options, n_h, n_i, *geds)


class HypothesisModel(Protocol):
    """What :func:`calibrate_hypotheses` reads of a fitted estimator."""

    node_label: str
    edge_label: str | None

    def predict_hypotheses(self, X: ArrayLike, top_k: int = 10, formulas: Any = None, **options: Any) -> list:
        """Hypothesis lists per input."""
        ...


# --------------------------------------------------------------------------- scoring through ranking
class _FixedNeighbours(BaseEstimator):
    """A fitted model as :mod:`gwpred.ranking` reads it, with each input's neighbours given in
    advance: ``X`` holds row numbers, so ranking never recomputes the weights."""

    def __init__(self, model: Any, indices: NDArray[np.int64], weights: NDArray[np.float64]) -> None:
        self.model, self.indices, self.weights = model, indices, weights
        self.training_ = model.training_
        self.labels_ = model.labels_
        self.alpha = model.alpha
        self.node_label = model.node_label
        self.edge_label = model.edge_label
        self.progress = False
        self.n_jobs = 1
        self._indices, self._weights = indices, weights

    def __sklearn_is_fitted__(self) -> bool:
        return True

    def fit(self, X: Any = None, y: Any = None) -> _FixedNeighbours:
        """Nothing to fit: a view of a fitted model (scikit-learn's fitted check wants the method)."""
        return self

    def neighbors(self, X: ArrayLike) -> tuple[NDArray[np.int64], NDArray[np.float64]]:
        rows = np.asarray(X)[:, 0].astype(np.int64)
        return self._indices[rows], self._weights[rows]

    def predict_barycenters(self, X: ArrayLike, formulas: Any = None) -> list:  # pragma: no cover
        raise NotImplementedError("hypotheses score with the kernel scorer only")


def _kernel_scores(view: _FixedNeighbours, row: int, library: CandidateLibrary, members: list[int],
                   output_kernel: str) -> NDArray[np.float64]:
    """Kernel scores of library members for one input row, in the order of ``members``."""
    kernels = ("wl", "fingerprint") if output_kernel == "both" else (output_kernel,)
    total = np.zeros(len(members))
    where = {m: p for p, m in enumerate(members)}
    for kern in kernels:
        ranked = rank_candidates(view, [[float(row)]], library, top_k=len(members),
                                 filter=[np.asarray(members, dtype=np.int64)], output_kernel=kern)[0]
        for j, s in ranked:
            total[where[j]] += s / len(kernels)
    return total


# --------------------------------------------------------------------------- graphs as arrays
@dataclass(frozen=True)
class _Chem:
    """Valence facts of a fitted label space, for the local search."""

    valences: NDArray[np.int64]  # per node label
    order_class: dict[int, int]  # bond order -> edge label index
    class_order: NDArray[np.int64]  # edge label index -> bond order
    max_order: int


def _chem(settings: Settings) -> _Chem | None:
    if settings.valences is None or settings.orders is None:
        return None
    orders = np.asarray(settings.orders, dtype=np.int64)
    order_class = {int(o): c for c, o in enumerate(orders.tolist())}
    top = 0
    while top + 1 in order_class:  # bond orders 1..top all have an edge label
        top += 1
    return _Chem(np.asarray(settings.valences, dtype=np.int64), order_class, orders, top)


def _to_arrays(g: nx.Graph, labels: LabelSpace, chem: _Chem) -> tuple[NDArray[np.int64], NDArray[np.int64]]:
    """Node label indices ``(n,)`` and bond-order matrix ``(n, n)`` of a graph with nodes 0..n-1."""
    return graph_arrays(g, labels, chem.class_order)


@lru_cache(maxsize=64)
def _pairs(n: int) -> tuple[NDArray[np.int64], NDArray[np.int64]]:
    """Upper-triangle index pairs (i < j) of an n-node graph."""
    return np.triu_indices(n, 1)


def _bonds(O: NDArray[np.int64]) -> tuple[list[int], list[int], list[int]]:
    """Bonded pairs (i < j) of a bond-order matrix and their orders, as lists."""
    iu, ju = _pairs(len(O))
    o = O[iu, ju]
    on = np.flatnonzero(o)
    return iu[on].tolist(), ju[on].tolist(), o[on].tolist()


def _to_graph(cls: NDArray[np.int64], O: NDArray[np.int64], labels: LabelSpace, chem: _Chem) -> nx.Graph:
    iu, ju, orders = _bonds(O)
    return labels.build_graph(cls.tolist(), list(zip(iu, ju)), [chem.order_class[o] for o in orders])


def _connected(O: NDArray[np.int64]) -> bool:
    rows = (O > 0).tolist()
    seen = {0}
    stack = [0]
    while stack:
        for u, bonded in enumerate(rows[stack.pop()]):
            if bonded and u not in seen:
                seen.add(u)
                stack.append(u)
    return len(seen) == len(rows)


def _obeys_valence(cls: NDArray[np.int64], O: NDArray[np.int64], chem: _Chem) -> bool:
    return bool(np.all(O.sum(1) <= chem.valences[cls]) and np.all(O <= chem.max_order))


def single_edits(
    cls: NDArray[np.int64],
    O: NDArray[np.int64],
    valences: NDArray[np.int64],
    *,
    max_order: int = 3,
    n_labels: int | None = None,
    fixed_counts: bool = True,
    fixed_total: bool = True,
    connected: bool = True,
) -> list[tuple[NDArray[np.int64], NDArray[np.int64]]]:
    """Every valid graph one edit away from a valid one (the local search's moves).

    Parameters
    ----------
    cls : ndarray of int, shape (n,)
        Node label index per node.
    O : ndarray of int, shape (n, n)
        Symmetric bond-order matrix (0: no bond).
    valences : ndarray of int, shape (n_labels,)
        Largest total bond order per node label.
    max_order : int, default=3
        Largest bond order.
    n_labels : int, optional
        Node labels to relabel into when ``fixed_counts`` is False (default: ``len(valences)``).
    fixed_counts : bool, default=True
        Keep the number of nodes per label (a formula's heavy atoms): atoms are
        swapped, never relabelled.
    fixed_total : bool, default=True
        Keep the total bond order (a formula's hydrogens); otherwise single
        bond-order changes are also moves.
    connected : bool, default=True
        Keep the graph connected.

    Returns
    -------
    list of (ndarray, ndarray)
        ``(cls, O)`` of each edited graph, every one obeying valences (and
        connected if asked); no two equal as arrays.

    Examples
    --------
    >>> O = np.array([[0, 1, 0], [1, 0, 1], [0, 1, 0]])  # C-C-C
    >>> [int(M.sum()) // 2 for _, M in single_edits(np.zeros(3, dtype=np.int64), O, np.array([4]))]
    [2, 2]

    Keeping the hydrogens, only the bond moved (C1-C3-C2, C2-C1-C3: propane
    again, renumbered); without, also C=C-C, C-C=C and cyclopropane.
    """
    n = len(cls)
    free = (valences[cls] - O.sum(1)).tolist()

    def fits(down: tuple[int, int], up: tuple[int, int], amount: int) -> bool:
        """Whether every node keeps free valence >= 0 when the pair ``down`` gains
        ``amount`` bond order and the pair ``up`` gives it back."""
        change: dict[int, int] = {}
        for v in down:
            change[v] = change.get(v, 0) - amount
        for v in up:
            change[v] = change.get(v, 0) + amount
        return all(free[v] + d >= 0 for v, d in change.items())

    iu, ju = np.triu_indices(n, 1)
    pairs = list(zip(iu.tolist(), ju.tolist()))
    bonds = [(i, j) for i, j in pairs if O[i, j] > 0]
    out: dict[bytes, tuple[NDArray[np.int64], NDArray[np.int64]]] = {}

    def keep(c: NDArray[np.int64], M: NDArray[np.int64], removed: bool) -> None:
        if removed and connected and n > 1 and not _connected(M):
            return
        key = c.tobytes() + M.tobytes()
        if key not in out:
            out[key] = (c, M)

    # one bond order up at (a, b), another down at (c, d): ring closing/opening, bond shifts
    for a, b in pairs:
        if O[a, b] >= max_order:
            continue
        for c, d in bonds:
            if (c, d) == (a, b) or not fits((a, b), (c, d), 1):
                continue
            M = O.copy()
            M[a, b] += 1
            M[b, a] += 1
            M[c, d] -= 1
            M[d, c] -= 1
            keep(cls, M, M[c, d] == 0)
    # a whole bond of order >= 2 moved to an empty pair
    for c, d in bonds:
        o = int(O[c, d])
        if o < 2:
            continue  # order-1 moves are covered above
        for a, b in pairs:
            if O[a, b] or (a, b) == (c, d) or not fits((a, b), (c, d), o):
                continue
            M = O.copy()
            M[a, b] = M[b, a] = o
            M[c, d] = M[d, c] = 0
            keep(cls, M, True)
    if not fixed_total:  # one bond order up or down alone
        for a, b in pairs:
            if O[a, b] < max_order and free[a] > 0 and free[b] > 0:
                M = O.copy()
                M[a, b] += 1
                M[b, a] += 1
                keep(cls, M, False)
        for c, d in bonds:
            M = O.copy()
            M[c, d] -= 1
            M[d, c] -= 1
            keep(cls, M, M[c, d] == 0)
    load = O.sum(1)
    if fixed_counts:  # swap two atoms of different labels
        for a, b in pairs:
            if cls[a] == cls[b] or load[a] > valences[cls[b]] or load[b] > valences[cls[a]]:
                continue
            c = cls.copy()
            c[a], c[b] = cls[b], cls[a]
            keep(c, O, False)
    else:
        for a in range(n):
            for lab in range(len(valences) if n_labels is None else n_labels):
                if lab != cls[a] and load[a] <= valences[lab]:
                    c = cls.copy()
                    c[a] = lab
                    keep(c, O, False)
    return list(out.values())


# --------------------------------------------------------------------------- the pool
@dataclass(frozen=True)
class _Variant:
    row: int
    hood: Neighbourhood
    size: int | None  # None: the ordinary size rule (or the formula)
    source: str


def _reordered(hood: Neighbourhood, first: int) -> Neighbourhood:
    """The same neighbourhood with position ``first`` moved to the front (so it becomes the anchor)."""
    order = [first] + [p for p in range(len(hood.indices)) if p != first]
    return Neighbourhood(
        hood.indices[order], hood.weights[order], [hood.structures[p] for p in order],
        [hood.features[p] for p in order], [hood.channels[p] for p in order],
        hood.sizes[order], hood.n_edges[order],
    )


def _variants(row: int, hood: Neighbourhood, formula: Formula | None, settings: Settings,
              voted: int, n_anchors: int) -> list[_Variant]:
    out = [_Variant(row, hood, None, "decoding")]
    n = voted
    seen = {(n, int(np.flatnonzero(hood.sizes == n)[0]) if np.any(hood.sizes == n) else -1)}
    for p in range(len(hood.indices)):
        if sum(v.source == "anchor" for v in out) >= n_anchors:
            break
        size = int(hood.sizes[p])
        if formula is not None and size != n:
            continue
        if (size, p) in seen:
            continue
        seen.add((size, p))
        out.append(_Variant(row, _reordered(hood, p), size, "anchor"))
    if formula is None and not isinstance(settings.n_nodes, int):
        for size in (n - 1, n + 1):
            if size >= 1:
                out.append(_Variant(row, hood, size, "size"))
    return out


def _decode_all(variants: list[_Variant], formulas: Sequence[Formula | None], settings: Settings,
                counts: Sequence[NDArray[np.int64] | None]) -> list[list[tuple[nx.Graph, str]]]:
    """Solve every variant's barycenter (in one batch) and decode it; per row, (graph, source) pairs."""
    # a size-only "counts" array: solve_barycenters reads only its sum (the barycenter's size)
    sized = [counts[v.row] if v.size is None else np.array([v.size], dtype=np.int64) for v in variants]
    softs = solve_barycenters([v.hood for v in variants], settings, sized)
    free = replace(settings, decoding="free")
    out: list[list[tuple[nx.Graph, str]]] = [[] for _ in formulas]
    for v, soft in zip(variants, softs):
        f = formulas[v.row]
        tries = [(settings, v.source)]
        if v.source == "decoding" and f is None and settings.decoding != "free":
            tries.append((free, "free"))
        for s, source in tries:
            try:
                out[v.row].append((decode_query(soft, v.hood, s, f), source))
            except ValueError:  # no valid graph of that size: the variant adds nothing
                continue
    return out


def _neighbour_graphs(graphs: list[nx.Graph], formula: Formula | None,
                      chem: _Chem | None, labels: LabelSpace, need_valid: bool) -> list[nx.Graph]:
    """The input's kept training graphs that may join its pool (formula matched, valences obeyed)."""
    out = []
    for g in graphs:
        if formula is not None and not formula_matches(g, formula, node_label=labels.node_label,
                                                       edge_label=labels.edge_label):
            continue
        if need_valid and chem is not None and not _obeys_valence(*_to_arrays(g, labels, chem), chem):
            continue
        out.append(g)
    return out


# --------------------------------------------------------------------------- one input
def _certificate(g: nx.Graph, space: LabelIds) -> tuple:
    """The labeled adjacency in :func:`gwpred.wl.canonical_order`: equal certificates prove two
    graphs isomorphic (unequal ones are checked with networkx)."""
    return _ids_certificate(graph_ids(g, space, "hypothesis"))


def _ids_certificate(ids: IdGraph) -> tuple:
    order = canonical_order(ids.nodes, ids.adjacency)
    where = {v: i for i, v in enumerate(order)}
    edges = sorted((min(where[v], where[u]), max(where[v], where[u]), e)
                   for v, nbrs in enumerate(ids.adjacency) for u, e in nbrs if v < u)
    return tuple(ids.nodes[v] for v in order), tuple(edges)


def _edit_ids(cls: NDArray[np.int64], O: NDArray[np.int64], chem: _Chem) -> IdGraph:
    """An edited graph as label ids, equal to ``graph_ids(_to_graph(cls, O, ...))`` without the graph."""
    adjacency: list[list[tuple[int, int]]] = [[] for _ in range(len(cls))]
    for i, j, o in zip(*_bonds(O)):
        e = chem.order_class[o]
        adjacency[i].append((j, e))
        adjacency[j].append((i, e))
    return IdGraph(cls.tolist(), adjacency)


def _same(g: nx.Graph, h: nx.Graph, labels: LabelSpace) -> bool:
    """Label-preserving isomorphism (networkx VF2)."""
    nm = nx.isomorphism.categorical_node_match(labels.node_label, None)
    em = nx.isomorphism.categorical_edge_match(labels.edge_label, None) if labels.edge_label else None
    return nx.is_isomorphic(g, h, node_match=nm, edge_match=em)


def _drop_self_terms(score: float, own_weight: float) -> float:
    r"""The score of a candidate equal to training graphs of total weight ``own_weight``, without their terms.

    With :math:`S` the input's training graphs label-isomorphic to the
    candidate :math:`c` (so :math:`k(y_j, c) = 1` for :math:`j \in S`, for
    the normalised WL kernel and fingerprint Tanimoto alike),

    .. math::

        \frac{\sum_{i \notin S} w_i k(y_i, c)}{\sum_{i \notin S} w_i}
        = \frac{\text{score} - w_S}{1 - w_S},

    the agreement of the *other* training graphs with ``c``: a training graph
    no longer outranks new graphs merely for agreeing with itself (the usual
    leave-one-out correction of a kernel mean).  A candidate equal to every
    weighted graph keeps its score.
    """
    if own_weight <= 0.0 or own_weight >= 1.0 - 1e-12:
        return score
    return (score - own_weight) / (1.0 - own_weight)


class _Pool:
    """One input's distinct candidates, their scores and sources."""

    def __init__(self, view: _FixedNeighbours, row: int, labels: LabelSpace, output_kernel: str,
                 own: list[tuple[nx.Graph, float]] | None = None) -> None:
        self.view, self.row, self.labels, self.output_kernel = view, row, labels, output_kernel
        self.space = LabelIds.of(labels)
        # the input's weighted training graphs, by WL hash: a candidate equal to one of them
        # loses that graph's own term k(y_j, y_j) = 1 (see _drop_self_terms)
        self.own: dict[int, list[tuple[nx.Graph, float]]] = {}
        if own:
            hashes = wl_graph_hashes(CandidateLibrary([g for g, _ in own]), labels).tolist()
            for (g, w), h in zip(own, hashes):
                self.own.setdefault(h, []).append((g, w))
        self.graphs: list[nx.Graph] = []
        self.sources: list[str] = []
        self.scores: list[float] = []
        self.certs: list[tuple | None] = []
        self.groups: dict[int, list[int]] = {}  # WL hash -> pool positions
        self.expanded: set[int] = set()

    def _cert(self, m: int) -> tuple:
        if self.certs[m] is None:
            self.certs[m] = _certificate(self.graphs[m], self.space)
        return self.certs[m]  # type: ignore[return-value]

    def _seen(self, cert: tuple, graph: Callable[[], nx.Graph], group: list[int]) -> bool:
        """Whether a graph is one of the pool graphs of its WL hash: an equal canonical certificate
        proves it; with none equal, networkx decides (a certificate search may stop early)."""
        if any(self._cert(m) == cert for m in group):
            return True
        g = graph()
        return any(_same(g, self.graphs[m], self.labels) for m in group)

    def _keep(self, g: nx.Graph, source: str, h: int, cert: tuple | None) -> None:
        self.groups.setdefault(h, []).append(len(self.graphs))
        self.graphs.append(g)
        self.sources.append(source)
        self.scores.append(np.nan)
        self.certs.append(cert)

    def add(self, items: list[tuple[nx.Graph, str]]) -> None:
        """Score the graphs among ``items`` that are new (WL hash, then isomorphism) and keep them."""
        if not items:
            return
        library = CandidateLibrary([g for g, _ in items])
        hashes = wl_graph_hashes(library, self.labels).tolist()  # also caches the WL encodings scoring uses
        fresh: list[int] = []
        for j, ((g, source), h) in enumerate(zip(items, hashes)):
            group = self.groups.get(h)
            if group and self._seen(_certificate(g, self.space), lambda g=g: g, group):
                continue
            self._keep(g, source, h, None)
            fresh.append(j)
        self._score(library, fresh, [hashes[j] for j in fresh])

    def add_edits(self, edits: list[tuple[NDArray[np.int64], NDArray[np.int64]]], chem: _Chem,
                  source: str = "edit") -> None:
        """As :meth:`add`, for graphs given as arrays ``(cls, O)`` (the local search's moves): hashes,
        certificates and fingerprints come from the arrays, and only new graphs are built."""
        graphs: list[nx.Graph] = []
        encodings: dict[int, tuple[NDArray[np.int64], NDArray[np.float64]]] = {}
        arrays: list[tuple[list[str], NDArray[np.int64]]] = []
        hashes: list[int] = []
        symbols = [str(v) for v in self.labels.node_labels_]
        for cls, O in edits:
            ids = _edit_ids(cls, O, chem)
            enc = wl_encoding(ids, 3)
            h = wl_hash(enc)
            group = self.groups.get(h)
            cert = None
            if group:
                cert = _ids_certificate(ids)
                if self._seen(cert, lambda: _to_graph(cls, O, self.labels, chem), group):
                    continue
            g = _to_graph(cls, O, self.labels, chem)
            self._keep(g, source, h, cert)
            encodings[len(graphs)] = enc
            arrays.append(([symbols[c] for c in ids.nodes], O))
            graphs.append(g)
            hashes.append(h)
        if not graphs:
            return
        library = CandidateLibrary(graphs)
        remember_wl_encodings(library, self.space, encodings, 3)
        if self.output_kernel in ("fingerprint", "both"):
            bits = morgan_bits_of_arrays(arrays)
            remember_fingerprints(library, {j: b for j, b in enumerate(bits) if b is not None})
        self._score(library, list(range(len(graphs))), hashes)

    def _score(self, library: CandidateLibrary, fresh: list[int], hashes: list[int]) -> None:
        """Kernel scores of ``library`` members ``fresh``, the pool's last ``len(fresh)`` graphs."""
        if not fresh:
            return
        scores = _kernel_scores(self.view, self.row, library, fresh, self.output_kernel)
        for pos, (j, h) in enumerate(zip(fresh, hashes)):
            same = [w for g, w in self.own.get(h, []) if _same(library.graphs[j], g, self.labels)]
            scores[pos] = _drop_self_terms(float(scores[pos]), float(sum(same)))
        self.scores[len(self.scores) - len(fresh) :] = scores.tolist()

    def order(self) -> list[int]:
        """Positions by decreasing score (ties: first found first)."""
        return sorted(range(len(self.scores)), key=lambda m: (-round(self.scores[m], 10), m))


def _search(pool: _Pool, chem: _Chem, labels: LabelSpace, settings: Settings, formula: Formula | None,
            n_expand: int, n_rounds: int) -> None:
    for _ in range(n_rounds):
        todo = [m for m in pool.order() if m not in pool.expanded][:n_expand]
        if not todo:
            return
        items: list[tuple[NDArray[np.int64], NDArray[np.int64]]] = []
        for m in todo:
            pool.expanded.add(m)
            cls, O = _to_arrays(pool.graphs[m], labels, chem)
            if not _obeys_valence(cls, O, chem):
                continue
            edits = single_edits(
                cls, O, chem.valences, max_order=chem.max_order, fixed_counts=formula is not None,
                fixed_total=formula is not None and formula.hydrogens is not None, connected=settings.connect,
            )
            items.extend(edits)
        pool.add_edits(items, chem)


# --------------------------------------------------------------------------- entry points
def generate_hypotheses(
    model: Any,
    indices: NDArray[np.int64],
    weights: NDArray[np.float64],
    formulas: Sequence[Formula | None],
    settings: Settings,
    *,
    k: int = 10,
    output_kernel: str = "auto",
    n_anchors: int = 3,
    n_expand: int = 3,
    n_rounds: int = 2,
    calibration: HypothesisCalibration | dict[str, HypothesisCalibration] | None = None,
    keep_self_terms: bool = False,
    batch_size: int = 64,
    progress: bool = False,
) -> list[HypothesisList]:
    """The ``k`` best distinct hypotheses per input (see the module notes).

    Called by ``BarycenterGraphPredictor.predict_hypotheses``, which resolves
    the inputs into neighbours, formulas and settings.

    Parameters
    ----------
    model : BarycenterGraphPredictor
        Fitted; read for its training set, labels and FGW trade-off.
    indices, weights : ndarray of shape (n_queries, n_neighbors)
        Kept training graphs of each input and their weights (``model.neighbors(X)``).
    formulas : sequence of (Formula or None)
        Per input, a parsed formula.
    settings : Settings
        The model's settings, with valence tables when molecules are decoded.
    k : int, default=10
        Hypotheses per input.
    output_kernel : {"auto", "wl", "fingerprint", "both"}, default="auto"
        Output kernel of the score; ``auto`` is ``fingerprint`` for molecules
        (valence rules on or a formula given) when RDKit is installed, else
        ``wl`` (see ``predict_hypotheses`` for the validation numbers: better
        for fingerprint inputs, mixed for spectra).
    n_anchors : int, default=3
        Extra barycenters started from the best-weighted neighbours.
    n_expand, n_rounds : int, default=3 and 2
        Local search: members expanded per round, rounds (0: none).
    calibration : HypothesisCalibration or dict, optional
        Score -> confidence map for every input, or one per case:
        ``{"plain": ..., "formula": ...}`` (inputs without / with a formula; a
        missing key leaves those inputs uncalibrated).  None gives
        uncalibrated confidences (the raw score).
    keep_self_terms : bool, default=False
        Score a candidate equal to one of the input's weighted training
        graphs with that graph's own term :math:`w_j k(y_j, y_j) = w_j`
        included (True), or without it (False, see ``_drop_self_terms``): on a
        QM9 validation split without formulas the own terms put a training
        molecule first for nearly every input.
    batch_size : int, default=64
        Inputs whose barycenters are solved together.
    progress : bool, default=False
        Progress bar over the inputs.

    Returns
    -------
    list of HypothesisList

    Raises
    ------
    ValueError
        For ``k`` < 1, an unknown ``output_kernel`` or negative search sizes.
    """
    _check_options(k, output_kernel, n_anchors, n_expand, n_rounds)
    training: TrainingSet = model.training_
    labels: LabelSpace = model.labels_
    view = _FixedNeighbours(model, np.asarray(indices), np.asarray(weights))
    chem = _chem(settings)
    molecules = chem is not None and (settings.valence or any(f is not None for f in formulas))
    if output_kernel == "auto":
        output_kernel = "fingerprint" if molecules and has_extra("rdkit") else "wl"
    out: list[HypothesisList] = []
    rows = list(range(len(indices)))
    bar = progress_bar(None, progress=progress, total=len(rows), desc="hypotheses", unit="input")
    for start in range(0, len(rows), batch_size):
        batch = rows[start : start + batch_size]
        hoods = [neighbourhood(training, indices[r], weights[r]) for r in batch]
        fs = [formulas[r] for r in batch]
        counts = [formula_counts(f, labels) for f in fs]
        variants: list[_Variant] = []
        for b, (hood, f, c) in enumerate(zip(hoods, fs, counts)):
            voted = choose_size(hood, settings.n_nodes, c)
            variants.extend(_variants(b, hood, f, settings, voted, n_anchors))
        decoded = _decode_all(variants, fs, settings, counts)
        for b, r in enumerate(batch):
            kept = [(training.graph(int(i)), float(w)) for i, w in zip(
                hoods[b].indices.tolist(), hoods[b].weights.tolist()) if w > 0]
            pool = _Pool(view, r, labels, output_kernel, None if keep_self_terms else kept)
            items = decoded[b] + [(g, "neighbour") for g in _neighbour_graphs(
                [g for g, _ in kept], fs[b], chem, labels, need_valid=molecules)]
            pool.add(items)
            if molecules and chem is not None and chem.max_order >= 1:
                _search(pool, chem, labels, settings, fs[b], n_expand, n_rounds)
            cal = calibration.get("formula" if fs[b] is not None else "plain") if isinstance(
                calibration, dict) else calibration
            out.append(_finish(pool, k, cal))
            bar.update(1)
    bar.close()
    short = sum(bool(h.note) for h in out)
    if short:
        warnings.warn(
            f"{short} of {len(out)} inputs have fewer than top_k={k} distinct hypotheses (their pools were "
            "smaller); see each list's .note.", UserWarning, stacklevel=3,
        )
    return out


def _finish(pool: _Pool, k: int, calibration: HypothesisCalibration | None) -> HypothesisList:
    order = pool.order()[:k]
    scores = np.array([pool.scores[m] for m in order])
    if calibration is not None and len(order):
        conf, near = calibration(scores), calibration.near(scores)
    else:
        conf = near = np.clip(scores, 0.0, 1.0)
    items = [Hypothesis(pool.graphs[m], float(s), float(c), pool.sources[m], float(c2))
             for m, s, c, c2 in zip(order, scores.tolist(), conf.tolist(), near.tolist())]
    note = "" if len(items) >= k else (
        f"only {len(items)} distinct hypotheses were reachable (top_k={k} asked): the pool held no more"
    )
    return HypothesisList(items, k, note, calibration is not None)


def _check_options(k: Any, output_kernel: Any, n_anchors: Any, n_expand: Any, n_rounds: Any) -> None:
    if isinstance(k, bool) or not isinstance(k, (int, np.integer)) or k < 1:
        raise ValueError(f"top_k must be an integer >= 1 (hypotheses per input); got {k!r}.")
    if output_kernel not in OUTPUT_KERNELS:
        raise ValueError(f"output_kernel must be one of {list(OUTPUT_KERNELS)}; got {output_kernel!r}.")
    for name, value in (("n_anchors", n_anchors), ("n_expand", n_expand), ("n_rounds", n_rounds)):
        if isinstance(value, bool) or not isinstance(value, (int, np.integer)) or value < 0:
            raise ValueError(f"{name} must be an integer >= 0; got {value!r}.")


# --------------------------------------------------------------------------- calibration
def _hits(lists: Sequence[Sequence[Hypothesis]], truth: Sequence[nx.Graph], labels: LabelSpace) -> list[list[bool]]:
    return [[_same(h.graph, t, labels) for h in hyps] for hyps, t in zip(lists, truth)]


def within_one(g: nx.Graph, truth: nx.Graph, labels: LabelSpace, time_limit: float = 1.0) -> bool:
    """Whether ``g`` is within graph edit distance 1 of ``truth`` (uniform costs).

    Counts and cheap bounds settle most pairs; the rest go to
    :func:`gwpred.ged.edit_distance` with ``time_limit`` seconds, and a pair
    it cannot settle counts as not near (its upper bound is above 1).
    """
    if (abs(g.number_of_nodes() - truth.number_of_nodes()) + abs(g.number_of_edges() - truth.number_of_edges())) > 2:
        return False
    keys = {"node_label": labels.node_label, "edge_label": labels.edge_label}
    lower, upper = edit_distance_bounds(g, truth, **keys)
    if lower > 1 or upper <= 1:
        return upper <= 1
    return edit_distance(g, truth, time_limit=time_limit, **keys).upper <= 1


def _brier(features: list[NDArray[np.float64]], hits: list[NDArray[np.float64]], beta: float) -> float:
    """Two-fold (even / odd inputs) Brier score of the isotonic exact-match map at margin weight ``beta``."""
    u = [f[:, 0] + beta * f[:, 1] for f in features]
    total, count = 0.0, 0
    for fold in (0, 1):
        fit = [i for i in range(len(u)) if i % 2 != fold and len(u[i])]
        test = [i for i in range(len(u)) if i % 2 == fold and len(u[i])]
        if not fit or not test:
            return np.inf
        x, y = _step_map(np.concatenate([u[i] for i in fit]), np.concatenate([hits[i] for i in fit]))
        for i in test:
            p = np.interp(u[i], x, y)
            total += float(np.sum((p - hits[i]) ** 2))
            count += len(p)
    return total / max(count, 1)


#: Margin weights tried by :func:`calibration_from`.
MARGIN_WEIGHTS = (0.0, 0.25, 0.5, 1.0, 2.0, 4.0, 8.0)


def calibrate_hypotheses(
    model: Any,
    X: ArrayLike,
    graphs: Sequence[nx.Graph],
    formulas: Any = None,
    *,
    top_k: int = 10,
    decoded: Sequence[nx.Graph] | None = None,
    **options: Any,
) -> HypothesisCalibration:
    """Fit the hypothesis confidences on held-out inputs whose graphs are known.

    Use inputs the model was **not** fitted on (a validation part held out
    from ``fit``): on training inputs every score would look better than it
    is.  See :class:`HypothesisCalibration` for the map and
    :func:`calibration_from` for the labels.  Fit one calibration for lists
    made with formulas and another for lists made without:
    their scores differ (``BarycenterGraphPredictor.calibrate`` does both).

    Parameters
    ----------
    model : BarycenterGraphPredictor
        Fitted.
    X : array-like of shape (n_inputs, n_features)
    graphs : sequence of networkx.Graph
        The true graph of each input.
    formulas : list of (str or None), optional
        As in ``predict_hypotheses``.
    top_k : int, default=10
    decoded : sequence of networkx.Graph, optional
        The ordinary decoding of each input, to measure it against the first
        hypothesis (see :func:`calibration_from`).
    **options
        Passed to ``predict_hypotheses`` (``output_kernel``, ``n_anchors``, ...).

    Returns
    -------
    HypothesisCalibration

    Raises
    ------
    ValueError
        For mismatched lengths or fewer than 2 hypotheses in all.
    """
    graphs = list(graphs)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UserWarning)  # short pools are fine here
        lists = model.predict_hypotheses(X, top_k=top_k, formulas=formulas, calibration=False, **options)
    given = formulas is not None and any(f is not None for f in formulas)
    return calibration_from(lists, graphs, model.labels_, {"top_k": top_k, "formulas": given, **options},
                            decoded=decoded)


def calibrate_cases(
    model: Any, X: ArrayLike, graphs: Sequence[nx.Graph], settings: Settings | None, *, top_k: int = 10,
    decode: Callable[[list | None], list[nx.Graph]] | None = None, **options: Any,
) -> dict[str, HypothesisCalibration]:
    """``BarycenterGraphPredictor.calibrate``: one calibration without formulas and, for molecules
    (``settings`` with valence tables), one with each true graph's own formula.

    ``decode(formulas)``, when given, is the ordinary decoding of ``X`` (with
    those formulas, or None), measured against the first hypothesis.

    Returns
    -------
    dict
        ``{"plain": ...}``, plus ``"formula"`` for molecules.
    """
    graphs = list(graphs)
    out = {"plain": calibrate_hypotheses(model, X, graphs, None, top_k=top_k,
                                         decoded=None if decode is None else decode(None), **options)}
    if settings is not None and settings.valences is not None:
        labels: LabelSpace = model.labels_
        valences = dict(zip(labels.node_labels_, settings.valences))
        formulas = [graph_formula(g, node_label=labels.node_label, edge_label=labels.edge_label, valences=valences)
                    for g in graphs]
        out["formula"] = calibrate_hypotheses(model, X, graphs, formulas, top_k=top_k,
                                              decoded=None if decode is None else decode(formulas), **options)
    return out


def calibration_from(
    lists: Sequence[Sequence[Hypothesis]],
    graphs: Sequence[nx.Graph],
    labels: LabelSpace,
    options: dict | None = None,
    *,
    time_limit: float = 1.0,
    decoded: Sequence[nx.Graph] | None = None,
) -> HypothesisCalibration:
    """:func:`calibrate_hypotheses` from hypothesis lists already computed for held-out inputs.

    Every hypothesis of every input counts once: 1 when it is
    label-isomorphic to the true graph (networkx), else 0; and, for the
    second map, 1 when it is within edit distance 1 (:func:`within_one`).

    Parameters
    ----------
    lists : sequence of sequences of Hypothesis
        One list per held-out input, best first.
    graphs : sequence of networkx.Graph
        Their true graphs.
    labels : LabelSpace
        The model's fitted labels (``model.labels_``: attribute names).
    options : dict, optional
        Options the lists were made with (kept in the calibration).
    time_limit : float, default=1.0
        Seconds per edit distance (the "within 1" labels and the mean GEDs).
    decoded : sequence of networkx.Graph, optional
        The ordinary decoding of each input (``predict`` with
        ``predict_with="decoding"``): then the mean GED to the truth of it and
        of the first hypothesis (the decoding where a list is empty) are
        measured, each pair exact within ``time_limit`` or else its upper bound.

    Returns
    -------
    HypothesisCalibration

    Raises
    ------
    ValueError
        For mismatched lengths or fewer than 2 hypotheses in all.
    """
    graphs = list(graphs)
    if decoded is not None and len(decoded) != len(graphs):
        raise ValueError(f"there are {len(decoded)} decoded graphs but {len(graphs)} graphs; pass one per input.")
    if len(lists) != len(graphs):
        raise ValueError(f"there are {len(lists)} hypothesis lists but {len(graphs)} graphs; pass one graph per input.")
    if sum(len(h) for h in lists) < 2:
        raise ValueError("calibration needs at least 2 hypotheses; pass more inputs.")
    features = [list_features([h.score for h in hyps]) for hyps in lists]
    hits = [np.array(row, dtype=np.float64) for row in _hits(lists, graphs, labels)]
    near = [np.array([bool(e) or within_one(h.graph, t, labels, time_limit) for h, e in zip(hyps, row)],
                     dtype=np.float64) for hyps, row, t in zip(lists, hits, graphs)]
    beta = min(MARGIN_WEIGHTS, key=lambda b: (round(_brier(features, hits, b), 12), b))
    u = np.concatenate([f[:, 0] + beta * f[:, 1] for f in features])
    x, y = _step_map(u, np.concatenate(hits))
    xn, yn = _step_map(u, np.concatenate(near))
    geds = [np.nan, np.nan]
    if decoded is not None:
        firsts = [hyps[0].graph if len(hyps) else d for hyps, d in zip(lists, decoded)]
        keys = {"node_label": labels.node_label, "edge_label": labels.edge_label, "time_limit": time_limit}
        geds = [summarize(firsts, graphs, **keys)["mean_ged"], summarize(list(decoded), graphs, **keys)["mean_ged"]]
    return HypothesisCalibration(x, y, xn, yn, float(beta), dict(options or {}), len(u), len(lists), *geds)


def recalibrated(lists: Sequence[HypothesisList], calibration: HypothesisCalibration) -> list[HypothesisList]:
    """The same lists with confidences from ``calibration`` (scores and order unchanged)."""
    out = []
    for hyps in lists:
        scores = [h.score for h in hyps]
        conf = calibration(scores).tolist() if hyps else []
        near = calibration.near(scores).tolist() if hyps else []
        out.append(HypothesisList([replace(h, confidence=float(c), confidence_near=float(c2))
                                   for h, c, c2 in zip(hyps, conf, near)], hyps.requested, hyps.note, True))
    return out

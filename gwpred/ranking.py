r"""Rank candidate graphs for new inputs (retrieval decoding).

When the answer is known to be one of a list of graphs (every known isomer
of a measured formula, a compound library), a fitted
:class:`~gwpred.BarycenterGraphPredictor` can rank that list instead of
generating a graph.  Three scorers, all built on the model's weights
:math:`w_i(x)` over its training graphs :math:`y_i` (the ``top_k`` kernel
ridge weights, clipped and normalised, as for the barycenter):

``"kernel"``
    :math:`\sum_i w_i(x)\, k(y_i, c)`, an output-kernel score as in
    input-output kernel regression, with ``k`` the normalised
    Weisfeiler-Lehman subtree kernel (``output_kernel="wl"``, node and edge
    labels, ``wl_iterations`` rounds) or, for molecules, the Tanimoto
    similarity of Morgan fingerprints (``output_kernel="fingerprint"``,
    needs RDKit).  Higher is better.
``"fgw"``
    FGW discrepancy between the model's soft barycenter for ``x`` and the
    candidate.  Lower is better.
``"objective"``
    :math:`\sum_i w_i(x)\, \mathrm{FGW}(y_i, c)`, the barycenter objective:
    how well the candidate plays the barycenter's role.  Lower is better.

FGW values here use the model's ``alpha`` and uniform node masses; the plan
is the one of the model's own geometry (adjacency and one-hot node labels,
:func:`gwpred.fgw.fgw_to_many`, the better of two starts, see
:func:`fgw_candidate_values`), and the structure term is then evaluated on
the edge-label channels, so that two
candidates with the same skeleton but different edge labels (bond orders)
get different values: with one-hot channels :math:`E`, pairs cost 0 when
both are non-edges or edges of the same label, 1 for an edge against a
non-edge and 2 for edges of different labels.

Labels unseen in training
-------------------------
Candidates are never refused for their labels, whatever the model's
``handle_unknown``: an unseen node or edge label is a category of its own
that matches nothing the model knows.  For FGW it gets a one-hot column
(channel) of its own, so that at any transport plan it costs as much as a
wrong known label; for the WL kernel its subtree patterns occur in no
training graph, so they add to the candidate's norm but not to its
similarity (a candidate made of unseen labels only scores 0).

Candidate sets and filters
--------------------------
Candidates are a single list shared by all inputs (or a
:class:`CandidateLibrary`, whose encodings are kept between calls), or one
list per input.  A per-input ``filter`` restricts each input's set: a
molecular formula (candidates with the same heavy atoms; hydrogens are not
compared), a node count, or explicit candidate indices.  Candidate indices
returned are positions in the shared list, or in the input's own list.

Node order
----------
Candidate encodings are put in a canonical node order (:func:`gwpred.wl.canonical_order`:
colour refinement of labels and edge labels, then a search that
individualises each node of a tied class in turn and keeps the smallest
labeled adjacency), so FGW values do not depend on how the candidate's nodes
were numbered (``tests/test_ranking.py`` renumbers each of the 3000 bundled
QM9 molecules at random and gets identical arrays).  Only graphs so symmetric that the search exceeds
its budget could keep a dependence on numbering.  WL kernel values never
depend on node order.  FGW values are local optima of a non-convex problem:
two candidates that differ slightly can be scored from different optima.

Fitted models
-------------
A model is read only through :class:`FittedModel` (its encoded training
set, its neighbours and weights, its soft barycenters); encodings of the
training graphs are cached in ``model.training_.derived``, so a refitted
model starts afresh.  Scorers and output kernels are tables
(name -> functions): a new one is a new entry.
"""

from __future__ import annotations

import numbers
from collections import Counter
from collections.abc import Callable, Iterator, Sequence
from dataclasses import dataclass
from typing import Any, Protocol

import networkx as nx
import numpy as np
import scipy.sparse as sp
from numpy.typing import ArrayLike, NDArray
from sklearn.utils.validation import check_is_fitted

from . import wl
from ._utils import check_inputs, progress_bar, renamed_keyword, require_extra
from .chem import graph_to_mol, morgan_fingerprints, rdkit_modules
from .codec import LabelSpace, TrainingSet
from .fgw import feature_costs, fgw_to_many, pad_graphs
from .formula import Formula, node_atom, parse_formula
from .parallel import parallel_map
from .wl import (
    IdGraph,
    LabelIds,
    array_ids,
    canonical_order,
    wl_encodings,
    wl_feature_counts,
    wl_graph_hashes,
)

__all__ = [
    "OUTPUT_KERNELS",
    "SCORERS",
    "CandidateLibrary",
    "FGWArrays",
    "FittedModel",
    "candidate_fgw_arrays",
    "canonical_order",
    "count_candidates",
    "fgw_arrays",
    "fgw_candidate_values",
    "prepare_candidates",
    "rank_candidates",
    "remember_fingerprints",
    "training_output_features",
    "wl_feature_counts",
    "wl_graph_hashes",
]

# scores are rounded so that equal values tie exactly (ties -> lower index)
_DECIMALS = 10

Ranked = list[list[tuple[int, float]]]


class FittedModel(Protocol):
    """What ranking reads of a fitted :class:`~gwpred.BarycenterGraphPredictor`."""

    training_: TrainingSet
    labels_: LabelSpace
    alpha: float
    node_label: str
    edge_label: str | None
    progress: bool
    n_jobs: int

    def neighbors(self, X: ArrayLike) -> tuple[NDArray[np.int64], NDArray[np.float64]]:
        """Kept training graphs of each input and their weights (validates ``X``)."""
        ...

    def predict_barycenters(self, X: ArrayLike, formulas: Any = None) -> list[Any]:
        """Soft barycenters (``structure``, ``node_scores``, ``edge_scores``, ...) per input."""
        ...


# --------------------------------------------------------------------------- FGW arrays
@dataclass(frozen=True)
class FGWArrays:
    """A candidate as FGW sees it, in canonical node order.

    Attributes
    ----------
    structure : ndarray of shape (n, n)
        Adjacency.
    features : ndarray of shape (n, n_node + 1)
        One-hot node labels; the last column is any label unseen in training.
    channels : ndarray of shape (n, n, n_edge + 1)
        One-hot edge labels; the last channel is any label unseen in training.
    """

    structure: NDArray[np.float64]
    features: NDArray[np.float64]
    channels: NDArray[np.float64]


def fgw_arrays(ids: IdGraph, n_node: int, n_edge: int, canonical: bool = True) -> FGWArrays:
    """FGW arrays of a graph written as label ids (:func:`gwpred.wl.graph_ids`).

    Parameters
    ----------
    ids : IdGraph
    n_node, n_edge : int
        Known node and edge categories; larger ids share the last column.
    canonical : bool, default=True
        Put the nodes in :func:`gwpred.wl.canonical_order` (else keep their order).

    Returns
    -------
    FGWArrays

    Examples
    --------
    >>> a = fgw_arrays(IdGraph([5, 0], [[(1, 0)], [(0, 0)]]), 1, 1)
    >>> a.features.tolist(), a.structure.tolist()
    ([[1.0, 0.0], [0.0, 1.0]], [[0.0, 1.0], [1.0, 0.0]])
    """
    n = len(ids.nodes)
    order = canonical_order(ids.nodes, ids.adjacency) if canonical else list(range(n))
    where = {v: i for i, v in enumerate(order)}
    F = np.zeros((n, n_node + 1))
    C = np.zeros((n, n))
    E = np.zeros((n, n, n_edge + 1))
    for v, lab in enumerate(ids.nodes):
        F[where[v], min(lab, n_node)] = 1.0
    for v, nbrs in enumerate(ids.adjacency):
        for u, e in nbrs:
            C[where[v], where[u]] = 1.0
            E[where[v], where[u], min(e, n_edge)] = 1.0
    return FGWArrays(C, F, E)


# --------------------------------------------------------------------------- candidates
class CandidateLibrary:
    """Candidate graphs whose encodings are computed once, when first needed.

    Pass the same library to several :func:`rank_candidates` (or
    ``BarycenterGraphPredictor.rank``) calls to reuse the encodings; a plain
    list is wrapped in a new library on every call.

    Parameters
    ----------
    graphs : sequence of networkx.Graph
        The candidates (undirected, simple, at least one node, labeled like
        the training graphs).  They are not copied: do not change them while
        the library is in use.

    Examples
    --------
    >>> g = nx.path_graph(3); nx.set_node_attributes(g, "C", "label")
    >>> lib = CandidateLibrary([g, g])
    >>> len(lib), lib.sizes().tolist()
    (2, [3, 3])
    """

    def __init__(self, graphs: Sequence[nx.Graph]) -> None:
        if isinstance(graphs, nx.Graph):
            raise TypeError("graphs must be a list of networkx graphs, not one graph; wrap it: [graph].")
        self.graphs = list(graphs)
        for i, g in enumerate(self.graphs):
            if not isinstance(g, nx.Graph):
                raise TypeError(
                    f"candidates[{i}] is a {type(g).__name__}; candidates must be networkx graphs "
                    "(read files with gwpred.io.read_graphs)."
                )
        self._memo: dict[tuple, dict[int, Any]] = {}
        self._whole: dict[tuple, Any] = {}

    def __len__(self) -> int:
        return len(self.graphs)

    def cached(self, key: tuple, indices: Sequence[int], compute: Callable[[int], Any]) -> list[Any]:
        """Values of ``compute(i)`` for ``indices``, computing each at most once per ``key``."""
        memo = self._memo.setdefault(key, {})
        out = []
        for i in indices:
            i = int(i)
            if i not in memo:
                memo[i] = compute(i)
            out.append(memo[i])
        return out

    def sizes(self) -> NDArray[np.int64]:
        """Node count of every candidate."""
        if "sizes" not in self._whole:
            self._whole["sizes"] = np.array([g.number_of_nodes() for g in self.graphs], dtype=np.int64)
        return self._whole["sizes"]

    def compositions(self, node_label: str) -> list[tuple]:
        """Every candidate's composition: (element, count) pairs, sorted, then ``("+/-", net charge)``
        when charged (:func:`composition`)."""
        key = ("composition", node_label)
        if key not in self._whole:
            self._whole[key] = [composition(g, node_label) for g in self.graphs]
        return self._whole[key]


def composition(graph: nx.Graph, node_label: str = "label") -> tuple:
    """Heavy atoms per element (``"N+"`` counts as N; other labels as they are) as sorted
    ``(str, count)`` pairs, followed by ``("+/-", net charge)`` when the charges do not cancel."""
    counts: Counter = Counter()
    charge = 0
    for _, d in graph.nodes(data=True):
        try:
            symbol, q = node_atom(d, node_label)
        except (TypeError, ValueError):
            symbol, q = str(d.get(node_label)), 0
        counts[symbol] += 1
        charge += q
    return tuple(sorted(counts.items())) + ((("+/-", charge),) if charge else ())


def formula_composition(formula: Formula) -> tuple:
    """A formula's heavy atoms and net charge in the form of :func:`composition`."""
    return tuple(sorted((str(k), v) for k, v in formula.heavy.items())) + (
        (("+/-", formula.charge),) if formula.charge else ()
    )


@dataclass(frozen=True)
class _Problem:
    library: CandidateLibrary
    rows: list[NDArray[np.int64]]  # per input: library indices
    positions: list[NDArray[np.int64]]  # per input: the index reported back


def _candidate_sets(candidates: Any, n_rows: int) -> _Problem:
    """Normalise the ``candidates`` argument into one library and per-row index arrays."""
    if isinstance(candidates, CandidateLibrary):
        everyone = np.arange(len(candidates), dtype=np.int64)
        return _Problem(candidates, [everyone] * n_rows, [everyone] * n_rows)
    if isinstance(candidates, nx.Graph):
        raise TypeError("candidates must be a list of graphs (or one list per input), not a single graph.")
    if isinstance(candidates, (str, bytes)) or not isinstance(candidates, Sequence):
        raise TypeError(
            "candidates must be a list of networkx graphs shared by all inputs, one such list per "
            f"input, or a CandidateLibrary; got {type(candidates).__name__}."
        )
    if len(candidates) == 0:
        raise ValueError("candidates is empty: there is nothing to rank. Pass at least one candidate graph.")
    if all(isinstance(g, nx.Graph) for g in candidates):
        library = CandidateLibrary(candidates)
        everyone = np.arange(len(library), dtype=np.int64)
        return _Problem(library, [everyone] * n_rows, [everyone] * n_rows)
    if len(candidates) != n_rows:
        raise ValueError(
            f"candidates holds {len(candidates)} lists but X has {n_rows} rows; pass one list of "
            "candidate graphs per input row, or a single list of graphs shared by all rows."
        )
    graphs: list[nx.Graph] = []
    seen: dict[int, int] = {}
    rows = []
    for r, row in enumerate(candidates):
        if isinstance(row, (nx.Graph, str, bytes)) or not isinstance(row, Sequence):
            raise TypeError(
                f"candidates[{r}] must be a list of networkx graphs (the candidates of input row {r}); "
                f"got {type(row).__name__}."
            )
        idx = []
        for j, g in enumerate(row):
            if not isinstance(g, nx.Graph):
                raise TypeError(f"candidates[{r}][{j}] is a {type(g).__name__}; expected a networkx graph.")
            if id(g) not in seen:  # the same graph object in several lists is encoded once
                seen[id(g)] = len(graphs)
                graphs.append(g)
            idx.append(seen[id(g)])
        rows.append(np.asarray(idx, dtype=np.int64))
    positions = [np.arange(len(r), dtype=np.int64) for r in rows]
    return _Problem(CandidateLibrary(graphs), rows, positions)


def _apply_filter(problem: _Problem, filter: Any, node_label: str) -> tuple[_Problem, list[str]]:
    """Restrict each row's candidates; also return a description of each row's filter."""
    n_rows = len(problem.rows)
    if filter is None:
        return problem, [""] * n_rows
    if isinstance(filter, (str, Formula)) or not isinstance(filter, Sequence):
        raise TypeError(
            "filter must be a list with one entry per input row (a formula such as 'C4H6O2', a node "
            "count, an array of candidate indices, or None); got "
            f"{type(filter).__name__}."
        )
    if len(filter) != n_rows:
        raise ValueError(
            f"filter has {len(filter)} entries but X has {n_rows} rows; give one entry (or None) per row."
        )
    lib = problem.library
    rows, positions, notes = [], [], []
    for r, (f, idx, pos) in enumerate(zip(filter, problem.rows, problem.positions)):
        if f is None or (isinstance(f, str) and not f.strip()):
            keep = np.ones(len(idx), dtype=bool)
            notes.append("")
        elif isinstance(f, (str, Formula)):
            try:
                parsed = f if isinstance(f, Formula) else parse_formula(f)
            except (TypeError, ValueError) as exc:
                raise ValueError(f"filter[{r}]: {exc}") from None
            want = formula_composition(parsed)
            comps = lib.compositions(node_label)
            keep = np.array([comps[i] == want for i in idx.tolist()], dtype=bool)
            notes.append(f"formula {parsed.text} (heavy atoms" + (", net charge)" if parsed.charge else ")"))
        elif isinstance(f, numbers.Integral) and not isinstance(f, (bool, np.bool_)):
            keep = lib.sizes()[idx] == int(f)
            notes.append(f"{int(f)} nodes")
        else:
            arr = np.asarray(f)
            if arr.ndim != 1 or not (arr.size == 0 or np.issubdtype(arr.dtype, np.integer)):
                raise TypeError(
                    f"filter[{r}] must be a formula (str), a node count (int), an array of candidate "
                    f"indices or None; got {f!r}."
                )
            arr = np.unique(arr.astype(np.int64))
            if arr.size and (arr[0] < 0 or arr[-1] >= len(idx)):
                raise ValueError(
                    f"filter[{r}] holds candidate index {int(arr[0] if arr[0] < 0 else arr[-1])}, outside "
                    f"0..{len(idx) - 1} (the candidates of row {r})."
                )
            keep = np.zeros(len(idx), dtype=bool)
            keep[arr] = True
            notes.append(f"{arr.size} listed indices")
        rows.append(idx[keep])
        positions.append(pos[keep])
    return _Problem(lib, rows, positions), notes


def _check_nonempty(problem: _Problem, notes: list[str], n_given: list[int]) -> None:
    empty = [r for r, idx in enumerate(problem.rows) if idx.size == 0]
    if not empty:
        return
    shown = ", ".join(
        f"row {r} ({'filter ' + notes[r] + ' keeps none of ' + str(n_given[r]) if notes[r] else 'empty list'})"
        for r in empty[:5]
    )
    more = f" and {len(empty) - 5} more" if len(empty) > 5 else ""
    raise ValueError(
        f"no candidates to rank for {len(empty)} input row(s): {shown}{more}. Give every row at "
        "least one candidate (widen the candidate list or loosen the filter), or leave such rows out."
    )


# --------------------------------------------------------------------------- scoring: FGW
def fgw_candidate_values(
    structure: ArrayLike,
    features: ArrayLike,
    channels: ArrayLike,
    cand_structures: Sequence[ArrayLike],
    cand_features: Sequence[ArrayLike],
    cand_channels: Sequence[ArrayLike],
    *,
    alpha: float,
    starts: Sequence[str] = ("product", "features"),
    max_iter: int = 20,
    batch_size: int = 1024,
) -> NDArray[np.float64]:
    r"""FGW values from one graph to many, with edge-label channels in the structure term.

    The plans are those of :func:`gwpred.fgw.fgw_to_many` on the adjacency
    matrices, from each of ``starts``; the value at plan :math:`T` is

    .. math::

        (1-\alpha) \langle M, T\rangle + \alpha \sum_{ijkl}
        \lVert E_{ik} - E'_{jl} \rVert^2 T_{ij} T_{kl}

    with :math:`E, E'` the edge-label channels (one-hot, or soft for a
    barycenter), and the lowest value over the starts is returned.  With a
    single channel equal to the adjacency, this is the FGW objective (square
    loss) at the plan.

    Parameters
    ----------
    structure : array-like of shape (n, n)
        Adjacency (or soft adjacency) of the common first graph.
    features : array-like of shape (n, d)
        Its node features.
    channels : array-like of shape (n, n, L)
        Its edge-label channels.
    cand_structures, cand_features, cand_channels : sequences of arrays
        Shapes ``(m_s, m_s)``, ``(m_s, d)`` and ``(m_s, m_s, L)`` per candidate.
    alpha : float
        FGW trade-off in ``[0, 1]``.
    starts : sequence of {"product", "features"}, default=("product", "features")
        First plans: the product coupling and the optimal plan of the
        feature costs alone.  FGW is not convex; on QM9 candidate sets
        either start gives the lower value for a good share of the pairs
        (``benchmarks/bench_ranking.py``), so both are tried.
    max_iter : int, default=20
        Conditional-gradient steps per start.  Ranking needs many values; a
        few problems creep towards their optimum for hundreds of steps, and
        20 steps change values little (``benchmarks/bench_ranking.py``).
    batch_size : int, default=1024
        Candidates solved together.

    Returns
    -------
    ndarray of shape (S,)

    Examples
    --------
    >>> import numpy as np
    >>> C = np.array([[0.0, 1.0], [1.0, 0.0]]); F = np.eye(2); E = C[:, :, None]
    >>> fgw_candidate_values(C, F, E, [C], [F], [E], alpha=0.5).round(6).tolist()
    [0.0]
    """
    C = np.asarray(structure, dtype=np.float64)
    F = np.asarray(features, dtype=np.float64)
    A = np.moveaxis(np.asarray(channels, dtype=np.float64), 2, 0)  # (L, n, n)
    n = C.shape[0]
    p = np.full(n, 1.0 / n)
    a_term = float(p @ (A * A).sum(0) @ p)
    out = np.full(len(cand_structures), np.inf)
    for start in range(0, len(cand_structures), batch_size):
        stop = min(start + batch_size, len(cand_structures))
        Cs, Fs = list(cand_structures[start:stop]), list(cand_features[start:stop])
        _, Fp, q, sizes = pad_graphs(Cs, Fs)
        m = Fp.shape[1]
        B = np.zeros((stop - start, A.shape[0], m, m))
        for s, E in enumerate(cand_channels[start:stop]):
            B[s, :, : sizes[s], : sizes[s]] = np.moveaxis(np.asarray(E, dtype=np.float64), 2, 0)
        M = feature_costs(F, Fp)
        b_term = np.einsum("sj,sjl,sl->s", q, (B * B).sum(1), q)
        for init in starts:
            _, T = fgw_to_many(C, F, Cs, Fs, alpha=alpha, init_plans=init, max_iter=max_iter)
            cross = ((A[None] @ T[:, None] @ B) * T[:, None]).sum((1, 2, 3))
            value = (1.0 - alpha) * (M * T).sum((1, 2)) + alpha * (a_term + b_term - 2.0 * cross)
            out[start:stop] = np.minimum(out[start:stop], value)
    return np.maximum(out, 0.0)


# --------------------------------------------------------------------------- candidate encodings
def _fgw_encoder(graphs: Sequence[nx.Graph], space: LabelIds) -> Callable[[int], FGWArrays]:
    def encode(i: int) -> FGWArrays:
        ids = wl.graph_ids(graphs[i], space, f"candidates[{i}]")
        return fgw_arrays(ids, space.n_node, space.n_edge)

    return encode


def candidate_fgw_arrays(library: CandidateLibrary, space: LabelIds, indices: Sequence[int]) -> list[FGWArrays]:
    """FGW arrays of library candidates (cached in the library per label space).

    Parameters
    ----------
    library : CandidateLibrary
    space : LabelIds
        Label ids of the fitted model (``LabelIds.of(model.labels_)``).
    indices : sequence of int
        Candidates to encode, in the order returned.

    Returns
    -------
    list of FGWArrays
    """
    return library.cached(("fgw", space.key), indices, _fgw_encoder(library.graphs, space))


def _bits_matrix(graphs: Sequence[nx.Graph], n_bits: int) -> list[NDArray[np.int32]]:
    """On-bit positions of each graph's Morgan fingerprint (radius 2), computed in chunks."""
    out: list[NDArray[np.int32]] = []
    for start in range(0, len(graphs), 2048):
        bits = _fingerprint_bits(graphs[start : start + 2048], 2, n_bits)
        out.extend(np.flatnonzero(b).astype(np.int32) for b in bits)
    return out


def _sparse_bits(on: list[NDArray[np.int32]], n_bits: int) -> sp.csr_matrix:
    indptr = np.concatenate([[0], np.cumsum([len(x) for x in on])]).astype(np.int64)
    cols = np.concatenate(on) if on else np.zeros(0, dtype=np.int32)
    return sp.csr_matrix((np.ones(len(cols)), cols, indptr), shape=(len(on), n_bits))


def _library_fingerprints(lib: CandidateLibrary, indices: NDArray[np.int64], n_bits: int) -> sp.csr_matrix:
    """Cached Morgan bits (radius 2) of library graphs, as sparse 0/1 rows in ``indices`` order."""
    memo = lib._memo.setdefault(("fingerprint", 2, n_bits), {})
    idx = np.asarray(indices).tolist()
    missing = [i for i in dict.fromkeys(idx) if i not in memo]
    if missing:
        memo.update(zip(missing, _bits_matrix([lib.graphs[i] for i in missing], n_bits)))
    return _sparse_bits([memo[i] for i in idx], n_bits)


def remember_fingerprints(library: CandidateLibrary, bits: dict[int, NDArray[np.int32]], n_bits: int = 2048) -> None:
    """Store Morgan bits computed elsewhere (radius 2, on-bit positions, e.g. from
    :func:`gwpred.chem.morgan_bits_of_arrays`) as the library's cached fingerprints.

    The caller guarantees that ``bits[i]`` is the fingerprint of ``library.graphs[i]``.
    """
    library.cached(("fingerprint", 2, n_bits), list(bits), bits.__getitem__)


def _wl_rows(encoded: list[tuple], vocabulary: NDArray[np.int64]) -> sp.csr_matrix:
    """Candidate WL rows over the training vocabulary (features unseen in training dropped;
    rows were normalised with all their features)."""
    lengths = [len(f) for f, _ in encoded]
    feats = np.concatenate([f for f, _ in encoded])
    vals = np.concatenate([v for _, v in encoded])
    rows = np.repeat(np.arange(len(encoded)), lengths)
    pos = np.minimum(np.searchsorted(vocabulary, feats), len(vocabulary) - 1)
    hit = vocabulary[pos] == feats
    return sp.csr_matrix((vals[hit], (rows[hit], pos[hit])), shape=(len(encoded), len(vocabulary)))


# --------------------------------------------------------------------------- training side
# Encodings of the training graphs live in ``training.derived`` under these keys, so they
# are computed once per fitted model (a refit builds a new training set).
_DERIVED = "ranking"


def _training_ids(training: TrainingSet) -> list[IdGraph]:
    key = (_DERIVED, "ids")
    if key not in training.derived:
        k = training.labels.n_node_labels
        training.derived[key] = [
            array_ids(C, F, E, k) for C, F, E in zip(training.structures, training.features, training.channels)
        ]
    return training.derived[key]


@dataclass(frozen=True)
class _TrainWL:
    vocabulary: NDArray[np.int64]  # sorted feature hashes seen in training
    matrix: sp.csr_matrix  # (n_train, n_vocab), rows normalised to unit norm


def _training_wl(training: TrainingSet, iterations: int) -> _TrainWL:
    key = (_DERIVED, "wl", iterations)
    if key not in training.derived:
        per = [wl_feature_counts(ids.nodes, ids.adjacency, iterations) for ids in _training_ids(training)]
        vocab = np.unique(np.concatenate([f for f, _ in per]))
        rows = np.repeat(np.arange(len(per)), [len(f) for f, _ in per])
        cols = np.searchsorted(vocab, np.concatenate([f for f, _ in per]))
        vals = np.concatenate([c / np.linalg.norm(c) for _, c in per])
        M = sp.csr_matrix((vals, (rows, cols)), shape=(len(per), len(vocab)))
        training.derived[key] = _TrainWL(vocab, M)
    return training.derived[key]


def _fingerprint_bits(graphs: Sequence[nx.Graph], radius: int, n_bits: int) -> NDArray[np.float64]:
    """Morgan bits via :func:`gwpred.chem.morgan_fingerprints`; graphs RDKit rejects
    (for example charged atoms whose charge is not stored) get the bits of the
    literal, unsanitised molecule."""
    try:
        return morgan_fingerprints(graphs, radius=radius, n_bits=n_bits)
    except ValueError:
        pass
    Chem, _ = rdkit_modules(_FINGERPRINT_PURPOSE)
    rdFingerprintGenerator = require_extra("rdkit.Chem.rdFingerprintGenerator", _FINGERPRINT_PURPOSE)
    generator = rdFingerprintGenerator.GetMorganGenerator(radius=radius, fpSize=n_bits)
    out = np.zeros((len(graphs), n_bits))
    for i, g in enumerate(graphs):
        try:
            out[i] = morgan_fingerprints([g], radius=radius, n_bits=n_bits)[0]
        except ValueError:
            mol = graph_to_mol(g, sanitize=False)
            Chem.FastFindRings(mol)
            out[i] = generator.GetFingerprintAsNumPy(mol)
    return out


def _training_fingerprints(training: TrainingSet, radius: int, n_bits: int) -> sp.csr_matrix:
    key = (_DERIVED, "fingerprint", radius, n_bits)
    if key not in training.derived:
        graphs = [training.graph(i) for i in range(len(training))]
        training.derived[key] = _sparse_bits(_bits_matrix(graphs, n_bits), n_bits)
    return training.derived[key]


def training_output_features(
    training: TrainingSet, output_kernel: str = "wl", *, wl_iterations: int = 3, fingerprint_bits: int = 2048
) -> tuple[sp.csr_matrix, str]:
    """Rows whose similarity is an output kernel between the training graphs (cached per model).

    Parameters
    ----------
    training : TrainingSet
        A fitted model's training graphs (``model.training_``).
    output_kernel : {"wl", "fingerprint"}, default="wl"
        ``wl``: unit-norm Weisfeiler-Lehman feature counts, whose dot products
        are the normalised WL kernel; ``fingerprint``: Morgan bits (radius 2,
        needs RDKit), whose Tanimoto similarity is the kernel.

    Returns
    -------
    rows : scipy.sparse.csr_matrix of shape (n_train, n_features)
    kind : {"cosine", "tanimoto"}
        How rows compare.
    """
    if output_kernel == "wl":
        return _training_wl(training, wl_iterations).matrix, "cosine"
    if output_kernel == "fingerprint":
        return _training_fingerprints(training, 2, fingerprint_bits), "tanimoto"
    raise ValueError(f"output_kernel must be 'wl' or 'fingerprint'; got {output_kernel!r}.")


def _training_fgw(training: TrainingSet, i: int) -> FGWArrays:
    store = training.derived.setdefault((_DERIVED, "fgw"), {})
    if i not in store:
        k = training.labels.n_node_labels
        C, F, E = training.structures[i], training.features[i][:, :k], training.channels[i]
        store[i] = FGWArrays(
            C,
            np.concatenate([F, np.zeros((len(F), 1))], 1),
            np.concatenate([E, np.zeros(E.shape[:2] + (1,))], 2),
        )
    return store[i]


# --------------------------------------------------------------------------- scorers
@dataclass(frozen=True)
class _Options:
    """Settings of one ranking call that scorers read."""

    output_kernel: str
    wl_iterations: int
    fingerprint_bits: int


@dataclass(frozen=True)
class _Job:
    """One ranking call: the model, its inputs and each row's candidates."""

    model: FittedModel
    X: NDArray[np.float64]
    problem: _Problem
    space: LabelIds
    filter: Any
    options: _Options


def _union(rows: list[NDArray[np.int64]]) -> tuple[NDArray[np.int64], list[NDArray[np.int64]]]:
    """Sorted union of the rows' library indices, and each row's positions in it."""
    union = np.unique(np.concatenate(rows))
    return union, [np.searchsorted(union, r) for r in rows]


# ---- output kernels of the "kernel" scorer: sum_i w_i(x) k(y_i, c)
def _wl_scores(
    job: _Job, idx: NDArray[np.int64], w: NDArray[np.float64], union: NDArray[np.int64], local: list
) -> Iterator[NDArray[np.float64]]:
    train = _training_wl(job.model.training_, job.options.wl_iterations)
    W = sp.csr_matrix(
        (w.ravel(), (np.repeat(np.arange(len(idx)), idx.shape[1]), idx.ravel())),
        shape=(len(idx), train.matrix.shape[0]),
    )
    H = (W @ train.matrix).T.tocsc()  # (n_vocab, n_rows): weighted training features
    encoded = wl_encodings(job.problem.library, job.space, union, job.options.wl_iterations)
    Phi = _wl_rows(encoded, train.vocabulary)  # (n_union, n_vocab), built once
    for r, pos in enumerate(local):
        yield (Phi[pos] @ H[:, r]).toarray().ravel()


def _fingerprint_scores(
    job: _Job, idx: NDArray[np.int64], w: NDArray[np.float64], union: NDArray[np.int64], local: list
) -> Iterator[NDArray[np.float64]]:
    # Tanimoto on bits, |a & b| / (|a| + |b| - |a & b|), with sparse candidate bits
    n_bits = job.options.fingerprint_bits
    train_fp = _training_fingerprints(job.model.training_, 2, n_bits)
    cand = _library_fingerprints(job.problem.library, union, n_bits)
    cand_bits = np.asarray(cand.sum(1)).ravel()
    train_bits = np.asarray(train_fp.sum(1)).ravel()
    for r, pos in enumerate(local):
        keep = w[r] > 0
        t = idx[r][keep]
        inter = (cand[pos] @ train_fp[t].T).toarray()  # (m, k)
        union_bits = cand_bits[pos][:, None] + train_bits[t][None, :] - inter
        K = np.where(union_bits > 0, inter / np.where(union_bits > 0, union_bits, 1.0), 1.0)
        yield K @ w[r][keep]


def _prepare_wl(
    model: FittedModel, library: CandidateLibrary, idx: NDArray[np.int64], space: LabelIds, options: _Options
) -> None:
    _training_wl(model.training_, options.wl_iterations)
    wl_encodings(library, space, idx, options.wl_iterations)


def _prepare_fingerprints(
    model: FittedModel, library: CandidateLibrary, idx: NDArray[np.int64], space: LabelIds, options: _Options
) -> None:
    _training_fingerprints(model.training_, 2, options.fingerprint_bits)
    _library_fingerprints(library, idx, options.fingerprint_bits)


_FINGERPRINT_PURPOSE = "output_kernel='fingerprint'"


def _no_extra() -> None:
    return None


def _needs_rdkit() -> None:
    rdkit_modules(_FINGERPRINT_PURPOSE)


@dataclass(frozen=True)
class _OutputKernel:
    """One output kernel: its scores per row, the encodings it caches, the extras it needs."""

    scores: Callable[..., Iterator[NDArray[np.float64]]]
    prepare: Callable[[FittedModel, CandidateLibrary, NDArray[np.int64], LabelIds, _Options], None]
    check: Callable[[], None]


_OUTPUT_KERNEL_TABLE: dict[str, _OutputKernel] = {
    "wl": _OutputKernel(_wl_scores, _prepare_wl, _no_extra),
    "fingerprint": _OutputKernel(_fingerprint_scores, _prepare_fingerprints, _needs_rdkit),
}

OUTPUT_KERNELS = tuple(_OUTPUT_KERNEL_TABLE)
"""Output kernels of the ``kernel`` scorer."""


# ---- scorers
def _kernel_scores(job: _Job) -> Iterator[NDArray[np.float64]]:
    idx, w = job.model.neighbors(job.X)
    union, local = _union(job.problem.rows)
    yield from _OUTPUT_KERNEL_TABLE[job.options.output_kernel].scores(job, idx, w, union, local)


def _barycenter_formulas(model: FittedModel, filter: Any, n_rows: int) -> list[Any] | None:
    """Formulas of a formula filter, to size the barycenters (rows with unseen elements: None)."""
    if filter is None or isinstance(filter, (str, Formula)) or not isinstance(filter, Sequence):
        return None
    known = {str(v) for v in model.labels_.node_labels_}
    out: list[Any] = []
    for f in filter:
        if isinstance(f, (str, Formula)) and (not isinstance(f, str) or f.strip()):
            parsed = f if isinstance(f, Formula) else parse_formula(f)
            out.append(parsed if set(parsed.heavy) <= known else None)
        else:
            out.append(None)
    return out if any(f is not None for f in out) else None


def _values(C: NDArray, F: NDArray, E: NDArray, cands: list[FGWArrays], alpha: float) -> NDArray[np.float64]:
    return fgw_candidate_values(
        C,
        F,
        E,
        [c.structure for c in cands],
        [c.features for c in cands],
        [c.channels for c in cands],
        alpha=alpha,
    )


def _fgw_scores(job: _Job) -> Iterator[NDArray[np.float64]]:
    """FGW from the model's soft barycenter of each input."""
    model, lib = job.model, job.problem.library
    softs = model.predict_barycenters(job.X, _barycenter_formulas(model, job.filter, len(job.X)))
    k = model.labels_.n_node_labels
    tasks = []
    for soft, rows in zip(softs, job.problem.rows):
        F = np.concatenate([soft.node_scores[:, :k], np.zeros((len(soft.node_scores), 1))], 1)
        E = np.concatenate([soft.edge_scores, np.zeros(soft.edge_scores.shape[:2] + (1,))], 2)
        tasks.append((soft.structure, F, E, candidate_fgw_arrays(lib, job.space, rows), model.alpha))
    if model.n_jobs == 1:  # one row at a time, so that the caller's progress bar moves
        yield from (_values(*t) for t in tasks)
    else:
        yield from parallel_map(_values, tasks, n_jobs=model.n_jobs)


def _objective_scores(job: _Job) -> Iterator[NDArray[np.float64]]:
    """The barycenter objective: sum_i w_i(x) FGW(y_i, c)."""
    model, lib = job.model, job.problem.library
    idx, w = model.neighbors(job.X)
    memo: dict[int, dict[int, float]] = {}  # FGW(training graph, candidate), shared by the rows
    for r, rows in enumerate(job.problem.rows):
        total = np.zeros(len(rows))
        for i, wi in zip(idx[r].tolist(), w[r].tolist()):
            if wi <= 0:
                continue
            done = memo.setdefault(i, {})
            todo = [c for c in rows.tolist() if c not in done]
            if todo:
                y = _training_fgw(model.training_, i)
                vals = _values(
                    y.structure, y.features, y.channels, candidate_fgw_arrays(lib, job.space, todo), model.alpha
                )
                done.update(zip(todo, vals.tolist()))
            total += wi * np.array([done[c] for c in rows.tolist()])
        yield total


def _prepare_kernel(
    model: FittedModel, library: CandidateLibrary, idx: NDArray[np.int64], space: LabelIds, options: _Options
) -> None:
    _OUTPUT_KERNEL_TABLE[options.output_kernel].prepare(model, library, idx, space, options)


def _prepare_fgw(
    model: FittedModel, library: CandidateLibrary, idx: NDArray[np.int64], space: LabelIds, options: _Options
) -> None:
    candidate_fgw_arrays(library, space, idx)


def _check_kernel(options: _Options) -> None:
    _OUTPUT_KERNEL_TABLE[options.output_kernel].check()


def _check_nothing(options: _Options) -> None:
    return None


@dataclass(frozen=True)
class _Scorer:
    """One scorer: its scores per row (a generator), the encodings it caches, its checks."""

    scores: Callable[[_Job], Iterator[NDArray[np.float64]]]
    prepare: Callable[[FittedModel, CandidateLibrary, NDArray[np.int64], LabelIds, _Options], None]
    check: Callable[[_Options], None]
    higher_is_better: bool


_SCORER_TABLE: dict[str, _Scorer] = {
    "kernel": _Scorer(_kernel_scores, _prepare_kernel, _check_kernel, higher_is_better=True),
    "fgw": _Scorer(_fgw_scores, _prepare_fgw, _check_nothing, higher_is_better=False),
    "objective": _Scorer(_objective_scores, _prepare_fgw, _check_nothing, higher_is_better=False),
}

SCORERS = tuple(_SCORER_TABLE)
"""Scorer names of :func:`rank_candidates`."""


def _check_names(scorer: Any, output_kernel: Any) -> None:
    if scorer not in SCORERS:
        raise ValueError(f"scorer must be one of {list(SCORERS)}; got {scorer!r}.")
    if output_kernel not in OUTPUT_KERNELS:
        raise ValueError(f"output_kernel must be one of {list(OUTPUT_KERNELS)}; got {output_kernel!r}.")


# --------------------------------------------------------------------------- helpers
def prepare_candidates(
    model: FittedModel,
    library: CandidateLibrary,
    indices: ArrayLike | None = None,
    *,
    scorer: str = "kernel",
    output_kernel: str = "wl",
    wl_iterations: int = 3,
    fingerprint_bits: int = 2048,
) -> None:
    """Compute and cache the encodings a scorer needs, before ranking.

    Ranking computes missing encodings itself; call this to do it ahead (for
    example so that a timing measures scoring alone).

    Parameters
    ----------
    model : BarycenterGraphPredictor
        A fitted model (its label space and training graphs).
    library : CandidateLibrary
    indices : array-like of int, default=None
        Candidates to encode; None encodes all.
    scorer, output_kernel, wl_iterations, fingerprint_bits
        As in :func:`rank_candidates`.
    """
    _check_names(scorer, output_kernel)
    idx = np.arange(len(library)) if indices is None else np.unique(np.asarray(indices, dtype=np.int64))
    space = LabelIds.of(model.labels_)
    options = _Options(output_kernel, wl_iterations, fingerprint_bits)
    _SCORER_TABLE[scorer].prepare(model, library, idx, space, options)


# --------------------------------------------------------------------------- entry point
def _top(
    scores: NDArray[np.float64], positions: NDArray[np.int64], k: int, higher: bool
) -> list[tuple[int, float]]:
    """Best ``k`` (position, score) pairs; equal rounded scores -> lower position first."""
    s = np.round(scores, _DECIMALS) + 0.0  # + 0.0 turns -0.0 into 0.0
    order = np.lexsort((positions, -s if higher else s))[:k]
    return [(int(positions[j]), float(s[j])) for j in order]


def rank_candidates(
    model: FittedModel,
    X: ArrayLike,
    candidates: Any,
    *,
    top_k: int = 10,
    scorer: str = "kernel",
    filter: Sequence[Any] | None = None,
    output_kernel: str = "wl",
    wl_iterations: int = 3,
    fingerprint_bits: int = 2048,
    progress: bool = False,
    k: int | None = None,
) -> Ranked:
    """Rank candidate graphs for each input of a fitted model (see the module notes).

    Parameters
    ----------
    model : BarycenterGraphPredictor
        A fitted model (anything that follows :class:`FittedModel`).
    X : array-like of shape (n_queries, n_features)
        Inputs, as for ``predict``.
    candidates : list of networkx.Graph, CandidateLibrary, or list of lists
        One set shared by all inputs, or one list per input row.
    top_k : int, default=10
        Length of each ranked list (shorter when a row has fewer candidates).
    scorer : {"kernel", "fgw", "objective"}, default="kernel"
    filter : list or None, default=None
        One entry per input row restricting its candidates: a molecular
        formula (str, e.g. ``"C4H6O2"``: same heavy atoms; hydrogens are not
        compared), a node count (int), an array of candidate indices, or
        None (no restriction).  With ``fgw``, a formula also fixes the size
        and composition of the row's barycenter (as ``predict(formulas=)``).
    output_kernel : {"wl", "fingerprint"}, default="wl"
        Output kernel of the ``kernel`` scorer: normalised Weisfeiler-Lehman
        subtree kernel over node and edge labels, or Tanimoto similarity of
        Morgan fingerprints (radius 2; molecules only, needs RDKit).
    wl_iterations : int, default=3
        Refinement rounds of the WL kernel.
    fingerprint_bits : int, default=2048
        Fingerprint length of the ``fingerprint`` kernel.
    progress : bool, default=False
        Progress bar over the inputs.
    k : int, optional
        Old name of ``top_k`` (works for one more release, with a FutureWarning).

    Returns
    -------
    list of list of (int, float)
        Per input, up to ``top_k`` (candidate index, score) pairs, best first:
        highest score for ``kernel``, lowest for ``fgw`` and ``objective``.
        Scores are rounded to 10 decimals; equal scores are ordered by
        candidate index.

    Raises
    ------
    ValueError
        For an unknown scorer or output kernel, a bad ``k``, mismatched
        lengths, a row left without candidates, an unreadable formula, or a
        candidate that is empty, has self-loops or an unlabeled node.
    TypeError
        For candidates that are not networkx graphs, or a malformed filter.
    ImportError
        For ``output_kernel="fingerprint"`` without RDKit.
    """
    check_is_fitted(model, "training_")
    top_k = renamed_keyword("k", "top_k", k, top_k, 10)
    _check_names(scorer, output_kernel)
    for name, value, lo in (
        ("top_k", top_k, 1),
        ("wl_iterations", wl_iterations, 0),
        ("fingerprint_bits", fingerprint_bits, 1),
    ):
        if isinstance(value, (bool, np.bool_)) or not isinstance(value, numbers.Integral) or value < lo:
            raise ValueError(f"{name} must be an integer >= {lo}; got {value!r}.")
    X = check_inputs(X)
    if isinstance(filter, np.ndarray):
        filter = list(filter)
    problem = _candidate_sets(candidates, len(X))
    n_given = [len(r) for r in problem.rows]
    space = LabelIds.of(model.labels_)
    problem, notes = _apply_filter(problem, filter, space.node_label)
    _check_nonempty(problem, notes, n_given)
    options = _Options(output_kernel, int(wl_iterations), int(fingerprint_bits))
    method = _SCORER_TABLE[scorer]
    method.check(options)
    job = _Job(model, X, problem, space, filter, options)
    scores = list(
        progress_bar(method.scores(job), progress=progress, total=len(X), desc=f"ranking ({scorer})", unit="input")
    )
    return [_top(s, pos, int(top_k), method.higher_is_better) for s, pos in zip(scores, problem.positions)]


def count_candidates(
    candidates: Any, n_inputs: int, filter: Sequence[Any] | None = None, node_label: str = "label"
) -> NDArray[np.int64]:
    """How many candidates each input row has after ``filter`` (as :func:`rank_candidates` applies it).

    Parameters
    ----------
    candidates : list of networkx.Graph, CandidateLibrary, or list of lists
    n_inputs : int
    filter : list or None, default=None
        As in :func:`rank_candidates`.
    node_label : str, default="label"

    Returns
    -------
    ndarray of shape (n_inputs,)
    """
    problem = _candidate_sets(candidates, n_inputs)
    problem, _ = _apply_filter(problem, filter, node_label)
    return np.asarray([len(r) for r in problem.rows], dtype=np.int64)

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
Candidate encodings are put in a canonical node order (:func:`canonical_order`:
colour refinement of labels and edge labels, then a search that
individualises each node of a tied class in turn and keeps the smallest
labeled adjacency), so FGW values do not depend on how the candidate's nodes
were numbered (``tests/test_ranking.py`` renumbers each of the 3000 bundled
QM9 molecules at random and gets identical arrays).  Only graphs so symmetric that the search exceeds
its budget could keep a dependence on numbering.  WL kernel values never
depend on node order.  FGW values are local optima of a non-convex problem:
two candidates that differ slightly can be scored from different optima.
"""

from __future__ import annotations

import hashlib
import numbers
import os
from collections import Counter
from collections.abc import Callable, Hashable, Sequence
from dataclasses import dataclass
from typing import Any

import networkx as nx
import numpy as np
import scipy.sparse as sp
from numpy.typing import ArrayLike, NDArray

from .codec import LabelSpace, check_graph
from .fgw import feature_costs, fgw_to_many, pad_graphs
from .formula import Formula, parse_formula

__all__ = [
    "OUTPUT_KERNELS",
    "SCORERS",
    "CandidateLibrary",
    "canonical_order",
    "fgw_candidate_values",
    "prepare_candidates",
    "rank_candidates",
    "wl_feature_counts",
    "wl_graph_hashes",
    "write_ranked",
]

SCORERS = ("kernel", "fgw", "objective")
"""Scorer names of :func:`rank_candidates`."""

OUTPUT_KERNELS = ("wl", "fingerprint")
"""Output kernels of the ``kernel`` scorer."""

_HIGHER_IS_BETTER = {"kernel": True, "fgw": False, "objective": False}
# scores are rounded so that equal values tie exactly (ties -> lower index)
_DECIMALS = 10

Ranked = list[list[tuple[int, float]]]
Adjacency = list[list[tuple[int, int]]]


# --------------------------------------------------------------------------- label ids
def _stable_id(value: Hashable) -> int:
    """Process-independent integer for a label value (48 bits)."""
    text = repr((type(value).__name__, str(value))).encode()
    return int.from_bytes(hashlib.blake2b(text, digest_size=6).digest(), "big")


@dataclass(frozen=True)
class _Space:
    """Label categories of a fitted model, as the ranking code needs them."""

    node_label: str
    edge_label: str | None
    node_index: dict
    edge_index: dict
    n_node: int
    n_edge: int
    key: tuple

    @classmethod
    def of(cls, labels: LabelSpace) -> _Space:
        key = (
            labels.node_label,
            labels.edge_label,
            tuple(repr(v) for v in labels.node_labels_),
            tuple(repr(v) for v in labels.edge_labels_),
        )
        return cls(
            labels.node_label,
            labels.edge_label,
            {v: i for i, v in enumerate(labels.node_labels_)},
            {v: i for i, v in enumerate(labels.edge_labels_)},
            labels.n_node_labels,
            labels.n_edge_labels,
            key,
        )

    def node_id(self, value: Hashable) -> int:
        """Category index, or ``n_node + stable id`` for an unseen label."""
        try:
            j = self.node_index.get(value)
        except TypeError:  # unhashable label
            j = None
        return j if j is not None else self.n_node + _stable_id(value)

    def edge_id(self, value: Hashable) -> int:
        try:
            j = self.edge_index.get(value)
        except TypeError:
            j = None
        return j if j is not None else self.n_edge + _stable_id(value)


@dataclass(frozen=True)
class _Ids:
    """A graph as label ids: node ids, and per node a list of (neighbour, edge id)."""

    nodes: list[int]
    adjacency: Adjacency


def _graph_ids(graph: Any, space: _Space, where: str) -> _Ids:
    check_graph(graph, where)
    order = list(graph.nodes)
    pos = {v: i for i, v in enumerate(order)}
    nodes = []
    for v, data in graph.nodes(data=True):
        if space.node_label not in data:
            raise ValueError(
                f"node {v!r} of {where} has no {space.node_label!r} attribute; every candidate "
                "node needs a label, like the training graphs."
            )
        nodes.append(space.node_id(data[space.node_label]))
    adjacency: Adjacency = [[] for _ in order]
    for u, v, data in graph.edges(data=True):
        e = space.edge_id(data.get(space.edge_label) if space.edge_label is not None else None)
        adjacency[pos[u]].append((pos[v], e))
        adjacency[pos[v]].append((pos[u], e))
    return _Ids(nodes, adjacency)


def _array_ids(structure: NDArray, features: NDArray, channels: NDArray, n_node: int) -> _Ids:
    """The same for a training graph stored as arrays by the estimator."""
    nodes = features[:, :n_node].argmax(1).tolist()
    adjacency: Adjacency = [[] for _ in nodes]
    iu, ju = np.nonzero(np.triu(structure, 1))
    for i, j, e in zip(iu.tolist(), ju.tolist(), channels[iu, ju].argmax(-1).tolist()):
        adjacency[i].append((j, e))
        adjacency[j].append((i, e))
    return _Ids(nodes, adjacency)


# --------------------------------------------------------------------------- WL features
def wl_feature_counts(
    nodes: Sequence[int], adjacency: Adjacency, iterations: int = 3
) -> tuple[NDArray[np.int64], NDArray[np.float64]]:
    """Weisfeiler-Lehman subtree patterns of a labeled graph, with their counts.

    Round 0 colours each node by its label; round ``t`` by its colour and the
    sorted multiset of (edge label, neighbour colour) pairs of round
    ``t - 1`` (Shervashidze et al., JMLR 2011, with edge labels).  Every
    (round, colour) is one feature, identified by a 64-bit hash.

    Parameters
    ----------
    nodes : sequence of int
        Node label ids.
    adjacency : list of list of (int, int)
        Per node, its (neighbour, edge label id) pairs.
    iterations : int, default=3
        Refinement rounds after round 0.

    Returns
    -------
    features : ndarray of int64
        Sorted feature hashes.
    counts : ndarray of float64
        How many nodes carry each feature (over all rounds).

    Examples
    --------
    >>> f, c = wl_feature_counts([0, 0], [[(1, 0)], [(0, 0)]], iterations=1)
    >>> len(f), c.tolist()
    (2, [2.0, 2.0])
    """
    colours = [hash((0, x)) for x in nodes]
    every = list(colours)
    for t in range(1, iterations + 1):
        colours = [
            hash((t, colours[v], tuple(sorted((e, colours[u]) for u, e in nbrs))))
            for v, nbrs in enumerate(adjacency)
        ]
        every.extend(colours)
    feats, counts = np.unique(np.asarray(every, dtype=np.int64), return_counts=True)
    return feats, counts.astype(np.float64)


# --------------------------------------------------------------------------- canonical order
def _ranks(values: Sequence[Any]) -> list[int]:
    index = {v: i for i, v in enumerate(sorted(set(values)))}
    return [index[v] for v in values]


def _refine(colours: list[int], adjacency: Adjacency) -> list[int]:
    """Colour refinement to a stable partition; colours are canonical ranks."""
    n_classes = len(set(colours))
    while True:
        sig = [
            (colours[v], tuple(sorted((e, colours[u]) for u, e in nbrs))) for v, nbrs in enumerate(adjacency)
        ]
        new = _ranks(sig)
        k = max(new) + 1 if new else 0
        if k == n_classes:
            return new
        colours, n_classes = new, k


def _certificate(order: list[int], nodes: Sequence[int], adjacency: Adjacency) -> tuple:
    """The labeled graph written in ``order``: node ids, then sorted (i, j, edge id) triples."""
    where = {v: i for i, v in enumerate(order)}
    edges = sorted(
        (where[v], where[u], e) for v, nbrs in enumerate(adjacency) for u, e in nbrs if where[v] < where[u]
    )
    return (tuple(nodes[v] for v in order), tuple(edges))


def canonical_order(nodes: Sequence[int], adjacency: Adjacency, max_leaves: int = 4096) -> list[int]:
    """A node order that does not depend on the input numbering.

    Colour refinement (node labels, then the multisets of (edge label,
    neighbour colour)) with canonical colour names; while colours are tied,
    each node of the first tied class is individualised in turn and refined
    again, and of all the discrete orders reached the one whose labeled
    adjacency is lexicographically smallest is returned (the individualise
    and refine scheme of canonical labeling, McKay & Piperno 2014, without
    automorphism pruning).

    Parameters
    ----------
    nodes : sequence of int
        Node label ids.
    adjacency : list of list of (int, int)
        Per node, its (neighbour, edge label id) pairs.
    max_leaves : int, default=4096
        Search budget; beyond it (only very symmetric graphs get there) the
        best order found so far is returned, which may depend on numbering.

    Returns
    -------
    list of int
        Node positions in canonical order.

    Examples
    --------
    >>> canonical_order([1, 0, 1], [[(1, 0)], [(0, 0), (2, 0)], [(1, 0)]])[0]
    1
    """
    n = len(nodes)
    best: list[Any] = [None, None]
    leaves = 0

    def search(colours: list[int]) -> None:
        nonlocal leaves
        if len(set(colours)) == n:
            leaves += 1
            order = sorted(range(n), key=colours.__getitem__)
            cert = _certificate(order, nodes, adjacency)
            if best[0] is None or cert < best[0]:
                best[0], best[1] = cert, order
            return
        counts = Counter(colours)
        tied = min(c for c, k in counts.items() if k > 1)
        for v in [u for u in range(n) if colours[u] == tied]:
            if leaves >= max_leaves:
                return
            split = [2 * c + 1 for c in colours]
            split[v] -= 1
            search(_refine(split, adjacency))

    search(_refine(_ranks(list(nodes)), adjacency))
    return best[1]


@dataclass(frozen=True)
class _FGWArrays:
    structure: NDArray[np.float64]  # (n, n) adjacency
    features: NDArray[np.float64]  # (n, n_node + 1): one-hot, last column = unseen label
    channels: NDArray[np.float64]  # (n, n, n_edge + 1): one-hot edge labels, last = unseen


def _fgw_arrays(ids: _Ids, n_node: int, n_edge: int, canonical: bool = True) -> _FGWArrays:
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
    return _FGWArrays(C, F, E)


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
        """Every candidate's node-label counts as a sorted tuple of (str(label), count)."""
        key = ("composition", node_label)
        if key not in self._whole:
            self._whole[key] = [
                tuple(sorted(Counter(str(d.get(node_label)) for _, d in g.nodes(data=True)).items()))
                for g in self.graphs
            ]
        return self._whole[key]


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
            want = tuple(sorted((str(k), v) for k, v in parsed.heavy.items()))
            comps = lib.compositions(node_label)
            keep = np.array([comps[i] == want for i in idx.tolist()], dtype=bool)
            notes.append(f"formula {parsed.text} (heavy atoms)")
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


# --------------------------------------------------------------------------- model side
def _model_cache(model: Any) -> dict:
    """Per-model cache of training encodings, reset when the model is refitted."""
    cache = getattr(model, "_ranking_cache", None)
    if cache is None or cache.get("token") is not model._structures:
        cache = {"token": model._structures}
        model._ranking_cache = cache
    return cache


def _training_ids(model: Any) -> list[_Ids]:
    cache = _model_cache(model)
    if "ids" not in cache:
        k = model.labels_.n_node_labels
        cache["ids"] = [
            _array_ids(C, F, E, k) for C, F, E in zip(model._structures, model._features, model._channels)
        ]
    return cache["ids"]


@dataclass(frozen=True)
class _TrainWL:
    vocabulary: NDArray[np.int64]  # sorted feature hashes seen in training
    matrix: sp.csr_matrix  # (n_train, n_vocab), rows normalised to unit norm


def _training_wl(model: Any, iterations: int) -> _TrainWL:
    cache = _model_cache(model)
    key = ("wl", iterations)
    if key not in cache:
        per = [wl_feature_counts(ids.nodes, ids.adjacency, iterations) for ids in _training_ids(model)]
        vocab = np.unique(np.concatenate([f for f, _ in per]))
        rows = np.repeat(np.arange(len(per)), [len(f) for f, _ in per])
        cols = np.searchsorted(vocab, np.concatenate([f for f, _ in per]))
        vals = np.concatenate([c / np.linalg.norm(c) for _, c in per])
        M = sp.csr_matrix((vals, (rows, cols)), shape=(len(per), len(vocab)))
        cache[key] = _TrainWL(vocab, M)
    return cache[key]


def _fingerprint_bits(graphs: Sequence[nx.Graph], radius: int, n_bits: int) -> NDArray[np.float64]:
    """Morgan bits via :func:`gwpred.chem.morgan_fingerprints`; graphs RDKit rejects
    (for example charged atoms whose charge is not stored) get the bits of the
    literal, unsanitised molecule."""
    from .chem import graph_to_mol, morgan_fingerprints

    try:
        return morgan_fingerprints(graphs, radius=radius, n_bits=n_bits)
    except ValueError:
        pass
    from rdkit import Chem
    from rdkit.Chem import rdFingerprintGenerator

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


def _training_fingerprints(model: Any, radius: int, n_bits: int) -> sp.csr_matrix:
    cache = _model_cache(model)
    key = ("fingerprint", radius, n_bits)
    if key not in cache:
        labels = model.labels_
        graphs = [labels.build_graph(ids.nodes, *_edge_lists(ids)) for ids in _training_ids(model)]
        cache[key] = _sparse_bits(_bits_matrix(graphs, n_bits), n_bits)
    return cache[key]


def _edge_lists(ids: _Ids) -> tuple[list[tuple[int, int]], list[int]]:
    edges, classes = [], []
    for v, nbrs in enumerate(ids.adjacency):
        for u, e in nbrs:
            if v < u:
                edges.append((v, u))
                classes.append(e)
    return edges, classes


def _training_fgw(model: Any, i: int) -> _FGWArrays:
    cache = _model_cache(model)
    store = cache.setdefault("fgw", {})
    if i not in store:
        k = model.labels_.n_node_labels
        C, F, E = model._structures[i], model._features[i][:, :k], model._channels[i]
        store[i] = _FGWArrays(
            C,
            np.concatenate([F, np.zeros((len(F), 1))], 1),
            np.concatenate([E, np.zeros(E.shape[:2] + (1,))], 2),
        )
    return store[i]


# --------------------------------------------------------------------------- scorers
def _union(rows: list[NDArray[np.int64]]) -> tuple[NDArray[np.int64], list[NDArray[np.int64]]]:
    """Sorted union of the rows' library indices, and each row's positions in it."""
    union = np.unique(np.concatenate(rows))
    return union, [np.searchsorted(union, r) for r in rows]


def _kernel_scores(
    model: Any,
    X: NDArray,
    problem: _Problem,
    space: _Space,
    output_kernel: str,
    wl_iterations: int,
    fingerprint_bits: int,
    bar: Any,
) -> list[NDArray[np.float64]]:
    idx, w = model._neighbors(X)
    lib = problem.library
    union, local = _union(problem.rows)
    out = []
    if output_kernel == "wl":
        train = _training_wl(model, wl_iterations)
        W = sp.csr_matrix(
            (w.ravel(), (np.repeat(np.arange(len(idx)), idx.shape[1]), idx.ravel())),
            shape=(len(idx), train.matrix.shape[0]),
        )
        H = (W @ train.matrix).T.tocsc()  # (n_vocab, n_rows): weighted training features
        encoded = lib.cached(("wl", space.key, wl_iterations), union, _wl_encoder(lib, space, wl_iterations))
        Phi = _wl_rows(encoded, train.vocabulary)  # (n_union, n_vocab), built once
        for r, pos in enumerate(local):
            out.append((Phi[pos] @ H[:, r]).toarray().ravel())
            bar.update(1)
        return out
    # Tanimoto on bits, |a & b| / (|a| + |b| - |a & b|), with sparse candidate bits
    train_fp = _training_fingerprints(model, 2, fingerprint_bits)
    cand = _library_fingerprints(lib, union, fingerprint_bits)
    cand_bits = np.asarray(cand.sum(1)).ravel()
    train_bits = np.asarray(train_fp.sum(1)).ravel()
    for r, pos in enumerate(local):
        keep = w[r] > 0
        t = idx[r][keep]
        inter = (cand[pos] @ train_fp[t].T).toarray()  # (m, k)
        union_bits = cand_bits[pos][:, None] + train_bits[t][None, :] - inter
        K = np.where(union_bits > 0, inter / np.where(union_bits > 0, union_bits, 1.0), 1.0)
        out.append(K @ w[r][keep])
        bar.update(1)
    return out


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


def _wl_encoder(lib: CandidateLibrary, space: _Space, iterations: int) -> Callable[[int], tuple]:
    def encode(i: int) -> tuple:
        ids = _graph_ids(lib.graphs[i], space, f"candidates[{i}]")
        feats, counts = wl_feature_counts(ids.nodes, ids.adjacency, iterations)
        return feats, counts / np.linalg.norm(counts)

    return encode


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


def _fgw_encoder(lib: CandidateLibrary, space: _Space) -> Callable[[int], _FGWArrays]:
    def encode(i: int) -> _FGWArrays:
        ids = _graph_ids(lib.graphs[i], space, f"candidates[{i}]")
        return _fgw_arrays(ids, space.n_node, space.n_edge)

    return encode


def _barycenter_formulas(model: Any, filter: Any, n_rows: int) -> list[Any] | None:
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


def _fgw_scores(
    model: Any, X: NDArray, problem: _Problem, space: _Space, filter: Any, bar: Any, objective: bool
) -> list[NDArray[np.float64]]:
    lib = problem.library
    key = ("fgw", space.key)
    encode = _fgw_encoder(lib, space)
    out = []
    if not objective:
        softs = model.predict_barycenters(X, _barycenter_formulas(model, filter, len(X)))
        for soft, rows in zip(softs, problem.rows):
            cands = lib.cached(key, rows, encode)
            k = model.labels_.n_node_labels
            F = np.concatenate([soft.node_scores[:, :k], np.zeros((len(soft.node_scores), 1))], 1)
            E = np.concatenate([soft.edge_scores, np.zeros(soft.edge_scores.shape[:2] + (1,))], 2)
            out.append(_values(soft.structure, F, E, cands, model.alpha))
            bar.update(1)
        return out
    idx, w = model._neighbors(X)
    memo: dict[int, dict[int, float]] = {}  # FGW(training graph, candidate), shared by the rows
    for r, rows in enumerate(problem.rows):
        total = np.zeros(len(rows))
        for i, wi in zip(idx[r].tolist(), w[r].tolist()):
            if wi <= 0:
                continue
            done = memo.setdefault(i, {})
            todo = [c for c in rows.tolist() if c not in done]
            if todo:
                y = _training_fgw(model, i)
                vals = _values(
                    y.structure, y.features, y.channels, lib.cached(key, todo, encode), model.alpha
                )
                done.update(zip(todo, vals.tolist()))
            total += wi * np.array([done[c] for c in rows.tolist()])
        out.append(total)
        bar.update(1)
    return out


def _values(C: NDArray, F: NDArray, E: NDArray, cands: list[_FGWArrays], alpha: float) -> NDArray[np.float64]:
    return fgw_candidate_values(
        C,
        F,
        E,
        [c.structure for c in cands],
        [c.features for c in cands],
        [c.channels for c in cands],
        alpha=alpha,
    )


# --------------------------------------------------------------------------- helpers
def prepare_candidates(
    model: Any,
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
    if scorer not in SCORERS:
        raise ValueError(f"scorer must be one of {list(SCORERS)}; got {scorer!r}.")
    if output_kernel not in OUTPUT_KERNELS:
        raise ValueError(f"output_kernel must be one of {list(OUTPUT_KERNELS)}; got {output_kernel!r}.")
    idx = np.arange(len(library)) if indices is None else np.unique(np.asarray(indices, dtype=np.int64))
    space = _Space.of(model.labels_)
    if scorer != "kernel":
        library.cached(("fgw", space.key), idx, _fgw_encoder(library, space))
    elif output_kernel == "wl":
        _training_wl(model, wl_iterations)
        library.cached(("wl", space.key, wl_iterations), idx, _wl_encoder(library, space, wl_iterations))
    else:
        _training_fingerprints(model, 2, fingerprint_bits)
        _library_fingerprints(library, idx, fingerprint_bits)


def wl_graph_hashes(
    library: CandidateLibrary, labels: LabelSpace, indices: ArrayLike | None = None, iterations: int = 3
) -> NDArray[np.int64]:
    """One 64-bit Weisfeiler-Lehman hash per candidate (cached with the WL encodings).

    Label-isomorphic graphs get equal hashes; unequal hashes prove two graphs
    different (equal ones do not prove them the same: check with
    :func:`gwpred.metrics.exact_match`).

    Parameters
    ----------
    library : CandidateLibrary
    labels : LabelSpace
        Fitted label space (``model.labels_``).
    indices : array-like of int, default=None
        Candidates to hash; None hashes all.
    iterations : int, default=3

    Returns
    -------
    ndarray of int64 of shape (len(indices),)
    """
    idx = np.arange(len(library)) if indices is None else np.asarray(indices, dtype=np.int64)
    space = _Space.of(labels)
    encoded = library.cached(("wl", space.key, iterations), idx, _wl_encoder(library, space, iterations))
    digests = b"".join(hashlib.blake2b(f.tobytes() + v.tobytes(), digest_size=8).digest() for f, v in encoded)
    return np.frombuffer(digests, dtype=np.int64).copy()


def write_ranked(path: str | os.PathLike[str], ranked: Ranked, candidates: Sequence[Any]) -> None:
    """Write ranked lists as JSON Lines, one object per input row.

    Each line is ``{"row": i, "ranked": [{"candidate": j, "score": s,
    "graph": <node-link record>}, ...]}``, best first; the graph is the
    candidate in networkx's node-link form with the edge list under
    ``"edges"``.  The file is replaced atomically.

    Parameters
    ----------
    path : str or os.PathLike
        Target ``.jsonl`` file.
    ranked : list of list of (int, float)
        As returned by :func:`rank_candidates`.
    candidates : list of networkx.Graph, CandidateLibrary, or list of lists
        The candidates that were ranked (indices refer to them).

    Raises
    ------
    ValueError
        For a path that does not end in ``.jsonl``, or a graph whose
        attributes JSON cannot hold.
    """
    import json
    from pathlib import Path

    from .io import _atomic_open, _graph_to_json_line

    target = Path(path)
    if target.suffix.lower() != ".jsonl":
        raise ValueError(f"ranked lists are written as JSON Lines: give a .jsonl path; got {str(path)!r}.")
    shared = candidates.graphs if isinstance(candidates, CandidateLibrary) else candidates
    per_row = not all(isinstance(g, nx.Graph) for g in shared)
    lines = []
    for r, row in enumerate(ranked):
        pool = shared[r] if per_row else shared
        items = [
            {"candidate": j, "score": score, "graph": json.loads(_graph_to_json_line(pool[j], j))}
            for j, score in row
        ]
        lines.append(json.dumps({"row": r, "ranked": items}, allow_nan=False, ensure_ascii=False))
    with _atomic_open(target, binary=False) as fh:
        for line in lines:
            fh.write(line + "\n")


# --------------------------------------------------------------------------- entry point
def _top(
    scores: NDArray[np.float64], positions: NDArray[np.int64], k: int, higher: bool
) -> list[tuple[int, float]]:
    """Best ``k`` (position, score) pairs; equal rounded scores -> lower position first."""
    s = np.round(scores, _DECIMALS) + 0.0  # + 0.0 turns -0.0 into 0.0
    order = np.lexsort((positions, -s if higher else s))[:k]
    return [(int(positions[j]), float(s[j])) for j in order]


def rank_candidates(
    model: Any,
    X: ArrayLike,
    candidates: Any,
    *,
    k: int = 10,
    scorer: str = "kernel",
    filter: Sequence[Any] | None = None,
    output_kernel: str = "wl",
    wl_iterations: int = 3,
    fingerprint_bits: int = 2048,
    progress: bool | None = None,
) -> Ranked:
    """Rank candidate graphs for each input of a fitted model (see the module notes).

    Parameters
    ----------
    model : BarycenterGraphPredictor
        A fitted model.
    X : array-like of shape (n_queries, n_features)
        Inputs, as for ``predict``.
    candidates : list of networkx.Graph, CandidateLibrary, or list of lists
        One set shared by all inputs, or one list per input row.
    k : int, default=10
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
    progress : bool or None, default=None
        Progress bar over the inputs; None follows ``model.verbose``.

    Returns
    -------
    list of list of (int, float)
        Per input, up to ``k`` (candidate index, score) pairs, best first:
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
    from sklearn.utils.validation import check_is_fitted

    check_is_fitted(model, "weights_")
    if scorer not in SCORERS:
        raise ValueError(f"scorer must be one of {list(SCORERS)}; got {scorer!r}.")
    if output_kernel not in OUTPUT_KERNELS:
        raise ValueError(f"output_kernel must be one of {list(OUTPUT_KERNELS)}; got {output_kernel!r}.")
    for name, value, lo in (
        ("k", k, 1),
        ("wl_iterations", wl_iterations, 0),
        ("fingerprint_bits", fingerprint_bits, 1),
    ):
        if isinstance(value, (bool, np.bool_)) or not isinstance(value, numbers.Integral) or value < lo:
            raise ValueError(f"{name} must be an integer >= {lo}; got {value!r}.")
    from .estimator import _check_X

    X = _check_X(X)
    if isinstance(filter, np.ndarray):
        filter = list(filter)
    problem = _candidate_sets(candidates, len(X))
    n_given = [len(r) for r in problem.rows]
    space = _Space.of(model.labels_)
    problem, notes = _apply_filter(problem, filter, space.node_label)
    _check_nonempty(problem, notes, n_given)
    if scorer == "kernel" and output_kernel == "fingerprint":
        from .chem import _rdkit

        _rdkit()
    from tqdm.auto import tqdm

    show = model.verbose if progress is None else progress
    with tqdm(total=len(X), disable=not show, desc=f"ranking ({scorer})", unit="input") as bar:
        if scorer == "kernel":
            scores = _kernel_scores(
                model, X, problem, space, output_kernel, int(wl_iterations), int(fingerprint_bits), bar
            )
        else:
            scores = _fgw_scores(model, X, problem, space, filter, bar, objective=scorer == "objective")
    higher = _HIGHER_IS_BETTER[scorer]
    return [_top(s, pos, int(k), higher) for s, pos in zip(scores, problem.positions)]

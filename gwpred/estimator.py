"""The scikit-learn estimator: vectors in, labeled graphs out.

Thin glue over :mod:`gwpred.weights` (x -> weights over training graphs),
:mod:`gwpred.fgw` (weighted FGW barycenter), :mod:`gwpred.decode` (soft ->
discrete) and :mod:`gwpred.codec` (graphs <-> arrays).
"""

from __future__ import annotations

import numbers
from dataclasses import dataclass
from typing import Any

import networkx as nx
import numpy as np
from numpy.typing import ArrayLike, NDArray
from sklearn.base import BaseEstimator
from sklearn.utils import check_random_state
from sklearn.utils.validation import check_is_fitted

from .codec import LabelSpace
from .decode import (
    DecodedGraph,
    decode_anchored,
    decode_barycenter,
    decode_valence,
    edge_budget,
    weighted_median,
)
from .fgw import fgw_barycenter, transport_average
from .formula import Formula, parse_formula, valence_table
from .weights import KERNELS, KernelRidgeWeights, sparsify

__all__ = ["BarycenterGraphPredictor", "SoftGraph"]


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


def _check_X(X: ArrayLike, name: str = "X") -> NDArray[np.float64]:
    try:
        arr = np.asarray(X, dtype=np.float64)
    except (TypeError, ValueError):
        raise ValueError(f"{name} must be a numeric array of shape (n_samples, n_features).") from None
    if arr.ndim != 2:
        raise ValueError(
            f"{name} must be 2-D (n_samples, n_features); got {arr.ndim}-D with shape "
            f"{arr.shape}. Reshape a single sample with X.reshape(1, -1)."
        )
    if arr.shape[0] == 0:
        raise ValueError(f"{name} has no rows; pass at least one sample.")
    bad = ~np.isfinite(arr)
    if bad.any():
        r, c = np.argwhere(bad)[0]
        raise ValueError(
            f"{name} has {int(bad.sum())} NaN or infinite value(s), the first at row {r}, "
            f"column {c}; impute or drop them before fitting or predicting."
        )
    return arr


class BarycenterGraphPredictor(BaseEstimator):
    r"""Predict labeled graphs as FGW barycenters of kernel-weighted training graphs.

    For an input ``x`` the training graphs get kernel ridge weights
    :math:`\alpha(x) = (K + n\lambda I)^{-1} k(x)` (Brogat-Motte et al., ICML
    2022); the ``top_k`` largest, clipped at zero and normalised, weight an FGW
    barycenter (Vayer et al. 2019) that is decoded into a discrete graph.

    Parameters
    ----------
    kernel : {"rbf", "laplacian", "tanimoto", "cosine", "linear", "precomputed"}, default="rbf"
        Input kernel. With ``precomputed``, ``fit`` takes the (n, n) training
        kernel and ``predict`` the (n_queries, n) kernel to the training items.
    gamma : float or None, default=None
        Bandwidth for ``rbf``/``laplacian``; ``None`` is the median heuristic.
    ridge : float, default=1e-3
        Kernel ridge regularisation :math:`\lambda`.
    weighting : {"ridge", "knn"}, default="ridge"
        ``ridge``: kernel ridge coefficients; ``knn``: the ``top_k`` most
        similar training inputs weighted by kernel value.
    top_k : int, default=10
        Training graphs kept per prediction.
    alpha : float, default=0.9
        FGW trade-off between node features (0) and structure (1).
    n_nodes : "vote" or int, default="vote"
        Size of the predicted graph: the weighted median size of the kept
        training graphs, or a fixed number.
    max_outer : int, default=5
        Barycenter iterations (plans, then closed-form updates).
    max_inner : int, default=100
        Conditional-gradient iterations per FGW plan.
    tol : float, default=1e-6
        Relative tolerance of both loops.
    edges : {"budget", "threshold"}, default="budget"
        Edge policy of ``free`` decoding: ``budget`` keeps as many edges as the weighted training graphs vote
        for (their cycle rank); ``threshold`` keeps pairs scoring >= 0.5.
    connect : "auto" or bool, default="auto"
        Decode connected graphs; ``auto`` does so when all training graphs are.
    decoding : {"anchored", "free"}, default="anchored"
        ``anchored``: the barycenter starts from a real training graph (the
        anchor: the highest-weight kept graph of the chosen size) and is decoded
        as edits of it: node labels from the barycenter, anchor edges kept
        unless the weighted graphs disagree (pair score <= 1 - consensus),
        pairs added where they agree (score >= consensus).  ``free``: decode
        the barycenter alone, with the ``edges`` policy.  Measured on the demo
        data (``benchmarks/bench_decoding.py``), anchored decoding has the
        lower mean GED.
    consensus : float, default=0.8
        Agreement needed for ``anchored`` decoding to change an anchor edge.
    valence : bool or dict, default=False
        Molecules: decode graphs whose atoms keep their valences (node labels
        are element symbols, edge labels bond orders 1/2/3; neutral atoms:
        C 4, N 3, O 2, F 1, other elements from RDKit), connected, and as close
        as possible to the ordinary decoding (an integer program, see
        :func:`~gwpred.decode.decode_valence`): a valid decoding stays as it
        is, an invalid one is repaired with as few edits as possible.  A dict
        maps labels to valences of your own.  Always on for inputs given a
        formula; those are decoded as the composition's graph that agrees
        best with the barycenter.
    node_label, edge_label : str, default="label"
        Graph attributes that hold node and edge labels (``edge_label=None``
        ignores edge labels).
    handle_unknown : {"error", "ignore"}, default="error"
        Policy for labels unseen in training (see :class:`~gwpred.codec.LabelSpace`).
    random_state : int, RandomState or None, default=None
        Seeds the subsample of the bandwidth heuristic (used with more than
        1000 training inputs); ``None`` uses seed 0, so results are repeatable.
        Everything else is deterministic (ties are broken by index).
    verbose : bool, default=False
        Show progress bars for long loops.

    Attributes
    ----------
    labels_ : LabelSpace
        Fitted node and edge label categories.
    weights_ : KernelRidgeWeights
        Fitted weight model.
    n_train_ : int
    sizes_, n_edges_ : ndarray of shape (n_train,)
        Node and edge counts of the training graphs.
    max_degree_ : ndarray of shape (n_node_labels,)
        Largest degree seen per node label.
    connected_ : bool
        Whether every training graph is connected.

    Examples
    --------
    >>> import networkx as nx, numpy as np
    >>> def chain(n):
    ...     g = nx.path_graph(n); nx.set_node_attributes(g, "C", "label"); return g
    >>> X = np.arange(6.0).reshape(-1, 1); graphs = [chain(k + 2) for k in range(6)]
    >>> model = BarycenterGraphPredictor(top_k=1).fit(X, graphs)
    >>> model.predict([[2.0]])[0].number_of_nodes()
    4
    """

    def __init__(
        self,
        kernel: str = "rbf",
        gamma: float | None = None,
        ridge: float = 1e-3,
        weighting: str = "ridge",
        top_k: int = 10,
        alpha: float = 0.9,
        n_nodes: str | int = "vote",
        max_outer: int = 5,
        max_inner: int = 100,
        tol: float = 1e-6,
        edges: str = "budget",
        connect: str | bool = "auto",
        decoding: str = "anchored",
        consensus: float = 0.8,
        valence: bool | dict = False,
        node_label: str = "label",
        edge_label: str | None = "label",
        handle_unknown: str = "error",
        random_state: Any = None,
        verbose: bool = False,
    ) -> None:
        self.kernel = kernel
        self.gamma = gamma
        self.ridge = ridge
        self.weighting = weighting
        self.top_k = top_k
        self.alpha = alpha
        self.n_nodes = n_nodes
        self.max_outer = max_outer
        self.max_inner = max_inner
        self.tol = tol
        self.edges = edges
        self.connect = connect
        self.decoding = decoding
        self.consensus = consensus
        self.valence = valence
        self.node_label = node_label
        self.edge_label = edge_label
        self.handle_unknown = handle_unknown
        self.random_state = random_state
        self.verbose = verbose

    # ------------------------------------------------------------ checking
    def _check_params(self) -> None:
        def choice(name: str, allowed: tuple) -> None:
            if getattr(self, name) not in allowed:
                raise ValueError(f"{name} must be one of {list(allowed)}; got {getattr(self, name)!r}.")

        def positive_int(name: str) -> None:
            v = getattr(self, name)
            if not isinstance(v, numbers.Integral) or isinstance(v, bool) or v < 1:
                raise ValueError(f"{name} must be a positive integer; got {v!r}.")

        def real(name: str, lo: float, hi: float = np.inf, what: str = "") -> None:
            v = getattr(self, name)
            ok = isinstance(v, numbers.Real) and not isinstance(v, bool) and np.isfinite(v)
            if not (ok and lo <= v <= hi):
                what = what or (f"a number in [{lo:g}, {hi:g}]" if np.isfinite(hi) else "a non-negative number")
                raise ValueError(f"{name} must be {what}; got {v!r}.")

        choice("kernel", tuple(KERNELS) + ("precomputed",))
        choice("weighting", ("ridge", "knn"))
        choice("edges", ("budget", "threshold"))
        if not (self.connect == "auto" or isinstance(self.connect, bool)):
            raise ValueError(f"connect must be one of ['auto', True, False]; got {self.connect!r}.")
        choice("decoding", ("anchored", "free"))
        choice("handle_unknown", ("error", "ignore"))
        if not isinstance(self.valence, (bool, dict)):
            raise TypeError(
                f"valence must be True, False or a dict of label -> valence; got {self.valence!r}."
            )
        for name in ("top_k", "max_outer", "max_inner"):
            positive_int(name)
        real("alpha", 0.0, 1.0)
        real("ridge", 0.0)
        real("tol", 0.0)
        real("consensus", 0.5, 1.0)
        if self.gamma is not None:
            real("gamma", np.finfo(float).tiny, what="a positive number or None")
        if self.n_nodes != "vote" and not (
            isinstance(self.n_nodes, numbers.Integral) and not isinstance(self.n_nodes, bool) and self.n_nodes >= 1
        ):
            raise ValueError(f"n_nodes must be 'vote' or a positive integer; got {self.n_nodes!r}.")

    # ----------------------------------------------------------------- fit
    def fit(self, X: ArrayLike, graphs: list[nx.Graph]) -> BarycenterGraphPredictor:
        """Learn label categories, encode the training graphs and fit the weights.

        Parameters
        ----------
        X : array-like of shape (n_samples, n_features), or (n_samples, n_samples) with ``kernel="precomputed"``
            Training inputs.
        graphs : list of networkx.Graph of length n_samples
            Training graphs (undirected, simple, at least one node, every node labeled).

        Returns
        -------
        BarycenterGraphPredictor
            ``self``.

        Raises
        ------
        ValueError
            For invalid parameters, non-finite inputs, mismatched lengths,
            empty graphs, self-loops or unlabeled nodes.
        TypeError
            For graphs that are not simple undirected networkx graphs.
        """
        return self._fit(X, graphs)

    def _fit(
        self,
        X: ArrayLike,
        graphs: list[nx.Graph],
        labels: LabelSpace | None = None,
        gamma: float | None = None,
    ) -> BarycenterGraphPredictor:
        """``fit``, optionally with a stored label space and bandwidth (model loading)."""
        self._check_params()
        X = _check_X(X)
        graphs = list(graphs) if not isinstance(graphs, nx.Graph) else [graphs]
        if len(graphs) != X.shape[0]:
            raise ValueError(
                f"X has {X.shape[0]} rows but {len(graphs)} graphs were given; "
                "pass one graph per input row."
            )
        self.labels_ = labels or LabelSpace(
            self.node_label, self.edge_label, handle_unknown=self.handle_unknown
        ).fit(graphs)
        encoded = [self.labels_.encode(g, f"graphs[{k}]") for k, g in enumerate(graphs)]
        self._structures = [e.structure for e in encoded]
        self._features = [e.features for e in encoded]
        self._channels = [e.edge_channels for e in encoded]
        self.sizes_ = np.array([len(e.nodes) for e in encoded], dtype=np.int64)
        self.n_edges_ = np.array([g.number_of_edges() for g in graphs], dtype=np.int64)
        deg = np.zeros(self.labels_.n_node_labels, dtype=np.int64)
        for e in encoded:
            cls = e.features[:, : self.labels_.n_node_labels].argmax(1)
            np.maximum.at(deg, cls, e.structure.sum(1).astype(np.int64))
        self.max_degree_ = deg
        self.connected_ = all(nx.is_connected(g) for g in graphs)
        seed = 0 if self.random_state is None else check_random_state(self.random_state).randint(2**31 - 1)
        self.weights_ = KernelRidgeWeights(
            self.kernel, self.gamma if gamma is None else gamma, self.ridge, self.weighting, random_state=seed
        )
        self.weights_.fit(X)
        self.n_train_ = X.shape[0]
        self.n_features_in_ = X.shape[1]
        return self

    # ------------------------------------------------------------- predict
    def _neighbors(self, X: ArrayLike) -> tuple[NDArray[np.int64], NDArray[np.float64]]:
        check_is_fitted(self, "weights_")
        X = _check_X(X)
        expected = self.n_train_ if self.kernel == "precomputed" else self.n_features_in_
        if X.shape[1] != expected:
            raise ValueError(
                f"X has {X.shape[1]} columns but the model was fitted with {expected}; "
                "use the same features (or the kernel to the training items) as in fit."
            )
        return sparsify(self.weights_.raw_weights(X), self.top_k)

    def _solve_one(
        self,
        idx: NDArray[np.int64],
        w: NDArray[np.float64],
        counts: NDArray[np.int64] | None = None,
    ) -> SoftGraph:
        sizes = self.sizes_[idx]
        if counts is not None:  # a formula fixes the size
            n = int(counts.sum())
        else:
            n = (
                int(weighted_median(sizes, w))
                if self.n_nodes == "vote"
                else int(self.n_nodes)
            )
        same = np.flatnonzero(sizes == n)
        # start from the highest-weight graph of the chosen size (a real graph:
        # a constant start leaves all plans uniform); else the closest in size
        pos = same[0] if same.size else int(np.argmin(np.abs(sizes - n)))
        anchor = idx[pos]
        C0, F0 = self._structures[anchor], self._features[anchor]
        L0 = self._channels[anchor].argmax(-1)
        if C0.shape[0] != n:  # fixed size without a training graph of that size
            reps = np.resize(np.arange(C0.shape[0]), n)
            C0, F0, L0 = C0[np.ix_(reps, reps)], F0[reps], L0[np.ix_(reps, reps)]
            np.fill_diagonal(C0, 0.0)
        res = fgw_barycenter(
            [self._structures[i] for i in idx],
            [self._features[i] for i in idx],
            w,
            C0,
            F0,
            alpha=self.alpha,
            init_plans="features",
            init_from=int(pos) if self.sizes_[anchor] == n else None,
            # anchored decoding needs the barycenter's nodes to stay the anchor's
            # nodes: warm starts only (benchmarks/bench_decoding.py)
            restarts=0 if self.decoding == "anchored" else 2,
            max_outer=self.max_outer,
            tol_outer=self.tol,
            max_inner=self.max_inner,
            tol_inner=self.tol,
        )
        m = max(self.sizes_[i] for i in idx)
        chans = np.zeros((len(idx), m, m, self.labels_.n_edge_labels))
        for s, i in enumerate(idx):
            k = self.sizes_[i]
            chans[s, :k, :k] = self._channels[i]
        E = transport_average(res.plans, chans, w, np.full(n, 1.0 / n))
        return SoftGraph(res.structure, res.features, E, idx, w, res.objective, int(anchor), C0, L0)

    def _progress(self, items: Any, total: int, desc: str) -> Any:
        if not self.verbose:
            return items
        from tqdm.auto import tqdm

        return tqdm(items, total=total, desc=desc, unit="graph")

    def _check_formulas(self, formulas: Any, n_rows: int) -> list[Formula | None]:
        """Parse per-row formulas; check length and that every element was seen in training."""
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
        known = set(self.labels_.node_labels_)
        out: list[Formula | None] = []
        for r, f in enumerate(formulas):
            if f is None or (isinstance(f, str) and not f.strip()):
                out.append(None)
                continue
            try:
                parsed = f if isinstance(f, Formula) else parse_formula(f)
            except (TypeError, ValueError) as exc:
                raise ValueError(f"formulas[{r}]: {exc}") from None
            unknown = sorted(set(parsed.heavy) - known)
            if unknown:
                raise ValueError(
                    f"formulas[{r}] ({parsed.text}) holds {unknown}, never seen as a node label in "
                    f"training (known: {sorted(map(str, known))}); the model cannot place them."
                )
            out.append(parsed)
        return out

    def _formula_counts(self, f: Formula | None) -> NDArray[np.int64] | None:
        if f is None:
            return None
        return np.array(
            [f.heavy.get(lab, 0) for lab in self.labels_.node_labels_], dtype=np.int64
        )

    def predict_barycenters(
        self, X: ArrayLike, formulas: Any = None
    ) -> list[SoftGraph]:
        """Soft barycenters for new inputs, before decoding (for inspection).

        Parameters
        ----------
        X : array-like of shape (n_queries, n_features)
        formulas : list of (str or None), default=None
            Per row, a molecular formula (see :meth:`predict`); it fixes the
            barycenter's size to the formula's number of heavy atoms.

        Returns
        -------
        list of SoftGraph
        """
        return self._barycenters(X, formulas)[0]

    def _barycenters(self, X: ArrayLike, formulas: Any) -> tuple[list[SoftGraph], list[Formula | None]]:
        """Soft barycenters and the parsed formulas (parsed once for predict)."""
        idx, w = self._neighbors(X)
        parsed = self._check_formulas(formulas, len(idx))
        rows = self._progress(zip(idx, w, parsed), len(idx), "barycenters")
        softs = [self._solve_one(i[ww > 0], ww[ww > 0], self._formula_counts(f)) for i, ww, f in rows]
        return softs, parsed

    def _valence_arrays(self) -> tuple[list[int], list[int]]:
        """Valence per node label and bond order per edge label, for valence decoding."""
        table = self.valence if isinstance(self.valence, dict) else None
        valences = valence_table(self.labels_.node_labels_, table)
        orders = []
        for lab in self.labels_.edge_labels_:
            if lab is None:
                orders.append(1)
            elif (
                isinstance(lab, numbers.Integral)
                and not isinstance(lab, bool)
                and 1 <= lab <= 3
            ):
                orders.append(int(lab))
            else:
                raise ValueError(
                    f"valence decoding needs bond orders 1, 2 or 3 as edge labels; the training graphs "
                    f"have edge label {lab!r} (attribute {self.edge_label!r})."
                )
        return valences, orders

    def _decode(self, soft: SoftGraph, formula: Formula | None = None) -> nx.Graph:
        out = self._decode_plain(soft)
        if not (self.valence or formula is not None):
            return self.labels_.build_graph(
                out.node_classes, out.edges, out.edge_classes
            )
        valences, orders = self._valence_arrays()
        counts = self._formula_counts(formula)
        total = None
        if formula is not None and formula.hydrogens is not None:
            free = int(np.dot(counts, valences)) - formula.hydrogens
            if free < 0 or free % 2:
                raise ValueError(
                    f"formula {formula.text}: {formula.hydrogens} hydrogens leave "
                    f"{free} valences for bonds between heavy atoms, which is "
                    + ("negative" if free < 0 else "odd (a radical or an ion)")
                    + "; gwpred decodes neutral closed-shell molecules."
                )
            total = free // 2
        connect = self.connected_ if self.connect == "auto" else bool(self.connect)
        k = self.labels_.n_node_labels
        try:
            out = decode_valence(
                soft.structure,
                soft.node_scores[:, :k],
                soft.edge_scores,
                valences,
                orders,
                # a formula: the barycenter's own best graph of that composition
                # (measured better than staying close to the ordinary decoding,
                # benchmarks/bench_qm9.py); else: repair the ordinary decoding
                reference=None if formula is not None else out,
                connected=connect,
                label_counts=counts,
                total_bond_order=total,
            )
        except ValueError as exc:
            where = f"formula {formula.text}: " if formula is not None else ""
            raise ValueError(f"{where}{exc}") from None
        return self.labels_.build_graph(out.node_classes, out.edges, out.edge_classes)

    def _decode_plain(self, soft: SoftGraph) -> DecodedGraph:
        n = soft.structure.shape[0]
        connect = self.connected_ if self.connect == "auto" else bool(self.connect)
        k = self.labels_.n_node_labels
        if self.decoding == "anchored":
            return decode_anchored(
                soft.structure,
                soft.node_scores[:, :k],
                soft.edge_scores,
                soft.anchor_structure,
                soft.anchor_edge_classes,
                consensus=self.consensus,
                connected=connect,
                max_degree=self.max_degree_,
            )
        budget = None
        if self.edges == "budget":
            budget = edge_budget(
                n,
                self.sizes_[soft.neighbors],
                self.n_edges_[soft.neighbors],
                soft.weights,
            )
        return decode_barycenter(
            soft.structure,
            soft.node_scores[:, :k],
            soft.edge_scores,
            n_edges=budget,
            connected=connect,
            max_degree=self.max_degree_,
        )

    def predict(self, X: ArrayLike, formulas: Any = None) -> list[nx.Graph]:
        """Predict one labeled graph per input row.

        Parameters
        ----------
        X : array-like of shape (n_queries, n_features)
        formulas : list of (str or None), default=None
            Molecules: per row, the molecular formula of the unknown (e.g.
            ``"C4H6O2"``, as from a mass measurement) or None.  The predicted
            graph then has exactly the formula's heavy atoms, obeys valences
            and, when the formula gives hydrogens, has the matching number of
            implicit hydrogens (hence degree of unsaturation).

        Returns
        -------
        list of networkx.Graph
            Nodes ``0..n-1`` labeled with ``node_label``; edges labeled with
            ``edge_label`` (when edge labels are used).

        Raises
        ------
        sklearn.exceptions.NotFittedError
            Before ``fit``.
        ValueError
            For non-finite inputs, a wrong number of columns, or a formula
            that cannot be read, holds elements unseen in training, or that
            no connected molecule of its atoms can have.
        """
        softs, parsed = self._barycenters(X, formulas)
        return [self._decode(soft, f) for soft, f in zip(softs, parsed)]

    def score(self, X: ArrayLike, graphs: list[nx.Graph]) -> float:
        """Negative mean graph edit distance to the true graphs (higher is better).

        Uniform edit costs (1 per node or edge insertion, deletion or label
        substitution), exact values; used by ``GridSearchCV``.

        Parameters
        ----------
        X : array-like of shape (n_queries, n_features)
        graphs : list of networkx.Graph of length n_queries

        Returns
        -------
        float
        """
        from .metrics import edit_distance

        pred = self.predict(X)
        if len(pred) != len(graphs):
            raise ValueError(
                f"X has {len(pred)} rows but {len(graphs)} graphs were given; pass one graph per row."
            )
        ged = [
            edit_distance(p, t, node_label=self.node_label, edge_label=self.edge_label).value
            for p, t in zip(pred, graphs)
        ]
        return -float(np.mean(ged))

    def rank(
        self,
        X: ArrayLike,
        candidates: Any,
        k: int = 10,
        scorer: str = "kernel",
        filter: Any = None,
        *,
        output_kernel: str = "wl",
    ) -> list[list[tuple[int, float]]]:
        """Rank given candidate graphs for each input instead of generating one.

        Thin wrapper of :func:`gwpred.ranking.rank_candidates`, which documents
        the scorers, filters, node-order invariance and how labels unseen in
        training are handled (they never match; such candidates are still ranked).

        Parameters
        ----------
        X : array-like of shape (n_queries, n_features)
        candidates : list of networkx.Graph, CandidateLibrary, or list of lists
            One candidate set shared by all inputs (a
            :class:`~gwpred.ranking.CandidateLibrary` keeps its encodings
            between calls), or one list of graphs per input row.
        k : int, default=10
            Candidates returned per input.
        scorer : {"kernel", "fgw", "objective"}, default="kernel"
            ``kernel``: sum_i w_i(x) k(y_i, c) over the training graphs (higher
            is better); ``fgw``: FGW distance from the predicted barycenter;
            ``objective``: sum_i w_i(x) FGW(y_i, c) (both lower is better).
        filter : list or None, default=None
            Per input row: a molecular formula (same heavy atoms), a node
            count, an array of candidate indices, or None.
        output_kernel : {"wl", "fingerprint"}, default="wl"
            Output kernel of the ``kernel`` scorer: Weisfeiler-Lehman subtree
            kernel, or Tanimoto on Morgan fingerprints (molecules, needs RDKit).

        Returns
        -------
        list of list of (int, float)
            Per input, up to ``k`` (candidate index, score) pairs, best first;
            equal scores are ordered by candidate index.

        Raises
        ------
        ValueError
            For an unknown scorer, a row without candidates, mismatched lengths
            or invalid candidate graphs (see :func:`~gwpred.ranking.rank_candidates`).

        Examples
        --------
        >>> import networkx as nx, numpy as np
        >>> def chain(n):
        ...     g = nx.path_graph(n); nx.set_node_attributes(g, "C", "label"); return g
        >>> model = BarycenterGraphPredictor(top_k=1).fit(np.arange(4.0).reshape(-1, 1), [chain(n + 2) for n in range(4)])
        >>> [j for j, _ in model.rank([[1.0]], [chain(5), chain(3), chain(2)], k=2)[0]]
        [1, 0]
        """
        from .ranking import rank_candidates

        return rank_candidates(
            self, X, candidates, k=k, scorer=scorer, filter=filter, output_kernel=output_kernel
        )

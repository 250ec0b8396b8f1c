"""The scikit-learn estimator: vectors in, labeled graphs out.

Glue only: parameters are checked against a declarative table
(:data:`BarycenterGraphPredictor._parameter_rules`), ``fit`` builds a
:class:`~gwpred.codec.TrainingSet` and a weight model
(:mod:`gwpred.weights`), and ``predict`` maps the pure per-query steps of
:mod:`gwpred.model.steps` over the inputs through
:func:`gwpred.parallel.parallel_map`.
"""

from __future__ import annotations

import warnings
from typing import Any

import networkx as nx
import numpy as np
from numpy.typing import ArrayLike, NDArray
from sklearn.base import BaseEstimator, clone
from sklearn.utils import check_random_state
from sklearn.utils.validation import check_is_fitted

from .._utils import (
    Interval,
    Options,
    Rule,
    Types,
    check_inputs,
    has_extra,
    renamed_keyword,
    require_extra,
    validate_params,
)
from ..codec import LabelSpace, TrainingSet
from ..embedding import InputEmbedding, OutputSimilarity, train_embedding
from ..ged import edit_distance
from ..parallel import N_JOBS_RULE, batch_slices, parallel_map
from ..ranking import rank_candidates, training_output_features
from ..weights import KERNELS, KernelRidgeWeights, LocalRidgeWeights, kernel_matrix
from .fingerprint_search import MorganSpec, find_morgan_spec, result_graph, search_rows, search_starts, training_arrays
from .hypotheses import HypothesisCalibration, HypothesisList, calibrate_cases, generate_hypotheses
from .steps import (
    DECODERS,
    Settings,
    SoftGraph,
    barycenter_batch,
    bond_orders,
    make_settings,
    molecular_labels,
    neighbourhood,
    on_rows,
    padded_graphs,
    parse_formulas,
    predict_batch,
    uses_valence,
)

__all__ = ["BarycenterGraphPredictor"]

#: Values of ``predict_with``.
PREDICT_WITH = ("auto", "decoding", "hypotheses")

_POSITIVE_INT = Rule(Interval(1, np.inf, integer=True))
_NON_NEGATIVE = Rule(Interval(0.0))

#: Start molecules of the fingerprint search besides the prediction: the highest-weight training graphs.
SEARCH_STARTS = 3

#: Seconds of exact GED search per pair in :meth:`BarycenterGraphPredictor.score`.
SCORE_TIME_LIMIT = 10.0

#: Largest training set for which ``weight_model="auto"`` solves densely;
#: above it, local solves (see ``benchmarks/bench_weight_models.py``).
AUTO_DENSE_MAX = 5000
#: Choices of ``weight_model``.
WEIGHT_MODELS = ("auto", "dense", "local")


class BarycenterGraphPredictor(BaseEstimator):
    r"""Predict labeled graphs as FGW barycenters of kernel-weighted training graphs.

    For an input ``x`` the training graphs get kernel ridge weights
    :math:`\alpha(x) = (K + n\lambda I)^{-1} k(x)` (Brogat-Motte et al., ICML
    2022); the ``n_neighbors`` largest, clipped at zero and normalised, weight an FGW
    barycenter (Vayer et al. 2019) that is decoded into a discrete graph.

    Parameters
    ----------
    kernel : {"rbf", "laplacian", "tanimoto", "cosine", "linear", "precomputed", "learned"}, default="rbf"
        Input kernel. With ``precomputed``, ``fit`` takes the (n, n) training
        kernel and ``predict`` the (n_queries, n) kernel to the training items.
        With ``learned``, ``fit`` first trains an embedding of the inputs
        whose similarities follow the output kernel of the training graphs
        (:mod:`gwpred.embedding`, PyTorch on the CPU: the ``neural`` extra),
        then uses the RBF kernel on the embeddings.
    gamma : float or None, default=None
        Bandwidth for ``rbf``/``laplacian``; ``None`` is the median heuristic.
    ridge : float, default=1e-3
        Kernel ridge regularisation :math:`\lambda`.
    weighting : {"ridge", "knn"}, default="ridge"
        ``ridge``: kernel ridge coefficients; ``knn``: the ``n_neighbors`` most
        similar training inputs weighted by kernel value.
    n_neighbors : int, default=10
        Training graphs kept per prediction (the largest weights).
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
        A key of :data:`gwpred.model.steps.DECODERS`. ``anchored``: the
        barycenter starts from a real training graph (the anchor: the
        highest-weight kept graph of the chosen size) and is decoded as edits
        of it: node labels from the barycenter, anchor edges kept unless the
        weighted graphs disagree (pair score <= 1 - consensus), pairs added
        where they agree (score >= consensus).  ``free``: decode the
        barycenter alone, with the ``edges`` policy.  Measured on the demo
        data (``benchmarks/bench_decoding.py``), anchored decoding has the
        lower mean GED.
    consensus : float, default=0.8
        Agreement needed for ``anchored`` decoding to change an anchor edge.
    valence : "auto", bool or dict, default="auto"
        Molecules: decode graphs whose atoms keep their valences (node labels
        are element symbols, edge labels bond orders 1/2/3; neutral atoms:
        C 4, N 3, O 2, F 1, other elements from RDKit), connected, and as close
        as possible to the ordinary decoding (an integer program, see
        :func:`~gwpred.decode.decode_valence`): a valid decoding stays as it
        is, an invalid one is repaired with as few edits as possible.  A dict
        maps labels to valences of your own.  ``"auto"`` turns the rules on
        when every training node label is an element symbol and every edge
        label a bond order (or edge labels are ignored), and off for other
        graphs; :attr:`valence_` tells which.  Always on for inputs given a
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
    progress : bool, default=False
        Show progress bars for long loops.
    n_jobs : int, default=1
        Worker processes for the queries of ``predict`` (-1: one per
        processor); results do not depend on it.  With workers, the training
        graphs are sent once as zero-padded arrays (built on the first such
        call and kept with the model: about 8 (m^2 (1 + L) + m d) bytes per
        training graph, m its largest size, L edge labels, d node features).
    weight_model : {"auto", "dense", "local"}, default="auto"
        How the kernel ridge weights are solved.  ``dense``: one solve over
        all training inputs (:class:`~gwpred.weights.KernelRidgeWeights`;
        about ``16 n^2`` bytes, refused beyond half the physical memory).
        ``local``: per query, a ridge solve on its ``local_size`` most similar
        training inputs (:class:`~gwpred.weights.LocalRidgeWeights`; memory
        linear in n, for large training sets such as all of QM9).  ``auto``:
        ``dense`` up to 5,000 training inputs (and always with
        ``kernel="precomputed"``), ``local`` above.  The choice is in
        ``weight_model_``.
    local_size : int, default=500
        Training inputs per local solve (``weight_model="local"``).
    batch_size : int, default=256
        Queries whose barycenters are solved together
        (:func:`gwpred.fgw.fgw_barycenter_batch`): the per-step Python cost is
        paid once per batch.  A batch is also the unit of work of ``n_jobs``
        workers.  ``1`` solves one query at a time; the predictions are the
        same (``benchmarks/bench_batch.py``).
    predict_with : {"auto", "decoding", "hypotheses"}, default="auto"
        What :meth:`predict` returns: the decoded barycenter (``"decoding"``),
        or the first of :meth:`predict_hypotheses` (``"hypotheses"``: scored
        over a generated pool; on QM9 exact several times as often, but tens
        of times slower per input and one process, no ``n_jobs``:
        ``benchmarks/bench_hypotheses.py``).  ``"auto"`` decides per input
        from the model's calibration (:meth:`calibrate` or
        ``fit(calibration_share=...)``): the first hypothesis where, for
        inputs of that case (with / without a formula), it had the lower mean
        GED on the held-out pairs, else the decoding; an uncalibrated model
        decodes.
    embedding : dict or InputEmbedding, optional
        With ``kernel="learned"``: training options (``output_kernel``:
        ``"auto"``, ``"wl"`` or ``"fingerprint"``, and those of
        :func:`gwpred.embedding.train_embedding`: ``dim``, ``hidden``,
        ``conv``, ``loss``, ``epochs``, ``raw_weight``, ``neighbours``, ...),
        or an embedding already trained,
        used as it is (no torch needed).  A loaded model holds its trained
        embedding here.
    fingerprint_search : "auto" or bool, default=False
        Molecules from Morgan fingerprints: when every input row is the
        Morgan fingerprint of its molecule (bits or counts, radius 1-3, as
        :func:`gwpred.chem.morgan_fingerprints` computes them), :meth:`predict`
        edits each prediction until its own fingerprint matches the input as
        closely as a beam search finds (:mod:`gwpred.model.fingerprint_search`;
        RDKit, the ``chem`` extra).  Seconds per molecule instead of
        milliseconds; on the drug-like benchmark the mean GED fell from 8.45
        to 4.76 and 59% of the molecules came out exact
        (``benchmarks/bench_druglike.py``).  ``True`` checks at ``fit`` that
        the training rows are such fingerprints of their graphs (at least 90
        of 100 rows exactly; a warning names the others) and stops with the
        reason when not; ``"auto"`` turns the
        search on when they are and off otherwise; ``fingerprint_spec_`` tells
        which.  For inputs given a formula, the search starts from the
        formula's decoding and keeps the formula (heavy atoms, hydrogens).  Each
        searched prediction carries ``graph.graph["fingerprint_similarity"]``
        (Tanimoto to the input; 1.0: equal fingerprints, still a hypothesis).
    search_width : int, default=5
        Molecules kept per round of the fingerprint search; it computes at most
        4,000 fingerprints per kept molecule and input.
    top_k : int, optional
        Old name of ``n_neighbors``; works for one more release, with a
        FutureWarning.

    Attributes
    ----------
    training_ : TrainingSet
        The encoded training graphs.
    labels_ : LabelSpace
        Fitted node and edge label categories (``training_.labels``).
    weights_ : KernelRidgeWeights or LocalRidgeWeights
        Fitted weight model.
    weight_model_ : {"dense", "local"}
        The weight model used (``weight_model`` with ``auto`` resolved).
    n_train_ : int
    sizes_, n_edges_ : ndarray of shape (n_train,)
        Node and edge counts of the training graphs.
    max_degree_ : ndarray of shape (n_node_labels,)
        Largest degree seen per node label.
    connected_ : bool
        Whether every training graph is connected.
    training_ids_ : list of str or None
        The training graphs' ids (``graph.graph["id"]``) when every one had an id.
    valence_ : bool
        Whether predictions obey valence rules (``valence`` resolved).
    fingerprint_spec_ : MorganSpec or None
        How the inputs are made from the molecules (radius, length, bits or
        counts) when the fingerprint search is on, else None.

    Examples
    --------
    >>> import networkx as nx, numpy as np
    >>> def chain(n):
    ...     g = nx.path_graph(n); nx.set_node_attributes(g, "C", "label"); return g
    >>> X = np.arange(6.0).reshape(-1, 1); graphs = [chain(k + 2) for k in range(6)]
    >>> model = BarycenterGraphPredictor(n_neighbors=1).fit(X, graphs)
    >>> model.predict([[2.0]])[0].number_of_nodes()
    4
    """

    #: Allowed values of every constructor parameter, checked when ``fit`` starts.
    _parameter_rules: dict[str, Rule] = {
        "kernel": Rule(Options((*KERNELS, "precomputed", "learned"))),
        "embedding": Rule(None, Types((dict, InputEmbedding)),
                          what="None, a dict of training options or an InputEmbedding", error=TypeError),
        "gamma": Rule(None, Interval(np.finfo(float).tiny), what="a positive number or None"),
        "ridge": _NON_NEGATIVE,
        "weighting": Rule(Options(("ridge", "knn"))),
        "n_neighbors": _POSITIVE_INT,
        "top_k": Rule(Options(("deprecated",)), Interval(1, np.inf, integer=True),
                      what="a positive integer (it is now called n_neighbors)"),
        "weight_model": Rule(Options(WEIGHT_MODELS)),
        "local_size": _POSITIVE_INT,
        "batch_size": _POSITIVE_INT,
        "predict_with": Rule(Options(PREDICT_WITH)),
        "alpha": Rule(Interval(0.0, 1.0)),
        "n_nodes": Rule(Options(("vote",)), Interval(1, np.inf, integer=True)),
        "max_outer": _POSITIVE_INT,
        "max_inner": _POSITIVE_INT,
        "tol": _NON_NEGATIVE,
        "edges": Rule(Options(("budget", "threshold"))),
        "connect": Rule(Options(("auto", True, False))),
        "decoding": Rule(Options(tuple(DECODERS))),
        "consensus": Rule(Interval(0.5, 1.0)),
        "valence": Rule(Options(("auto",)), Types((bool, dict)),
                        what="'auto', True, False or a dict of label -> valence", error=TypeError),
        "handle_unknown": Rule(Options(("error", "ignore"))),
        "fingerprint_search": Rule(Options(("auto", True, False))),
        "search_width": _POSITIVE_INT,
        "progress": Rule(Types((bool,))),
        "n_jobs": N_JOBS_RULE,
    }

    def __init__(
        self,
        kernel: str = "rbf",
        gamma: float | None = None,
        ridge: float = 1e-3,
        weighting: str = "ridge",
        n_neighbors: int = 10,
        alpha: float = 0.9,
        n_nodes: str | int = "vote",
        max_outer: int = 5,
        max_inner: int = 100,
        tol: float = 1e-6,
        edges: str = "budget",
        connect: str | bool = "auto",
        decoding: str = "anchored",
        consensus: float = 0.8,
        valence: str | bool | dict = "auto",
        node_label: str = "label",
        edge_label: str | None = "label",
        handle_unknown: str = "error",
        random_state: Any = None,
        progress: bool = False,
        n_jobs: int = 1,
        weight_model: str = "auto",
        local_size: int = 500,
        batch_size: int = 256,
        predict_with: str = "auto",
        embedding: dict | InputEmbedding | None = None,
        fingerprint_search: str | bool = False,
        search_width: int = 5,
        top_k: int | str = "deprecated",
    ) -> None:
        self.kernel = kernel
        self.gamma = gamma
        self.ridge = ridge
        self.weighting = weighting
        self.n_neighbors = n_neighbors
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
        self.progress = progress
        self.n_jobs = n_jobs
        self.weight_model = weight_model
        self.local_size = local_size
        self.batch_size = batch_size
        self.predict_with = predict_with
        self.embedding = embedding
        self.fingerprint_search = fingerprint_search
        self.search_width = search_width
        self.top_k = top_k

    # ----------------------------------------------------------------- fit
    def fit(self, X: ArrayLike, y: list[nx.Graph], *, calibration_share: float = 0.0) -> BarycenterGraphPredictor:
        """Learn label categories, encode the training graphs and fit the weights.

        Parameters
        ----------
        X : array-like of shape (n_samples, n_features), or (n_samples, n_samples) with ``kernel="precomputed"``
            Training inputs.  Bool and integer arrays are not copied to
            float64: ``uint8`` 0/1 fingerprints with ``weight_model="local"``
            and ``kernel="tanimoto"`` are held as sparse rows.
        y : list of networkx.Graph of length n_samples
            Training graphs (undirected, simple, at least one node, every node labeled).
            Named ``y`` as scikit-learn names the target: pipelines and metadata
            routing read the second argument of ``fit`` and ``score`` by that name.
            When every graph carries an id (``graph.graph["id"]``, as the graph
            files and ``gwpred fit`` set it), the ids are kept as
            ``training_ids_`` (saved with the model; reports name the training
            graphs a prediction leaned on by them).
        calibration_share : float, default=0.0
            When in ``(0, 0.5]``, also calibrate the confidences of
            :meth:`predict_hypotheses`: that share of the training pairs
            (drawn with ``random_state``) is held out, a copy of the model is
            fitted on the rest and calibrated on them (:meth:`calibrate`), then the model
            is fitted on all pairs and keeps that calibration.  The held-out
            copy is a little weaker than the final model, so confidences lean
            low.  Costs one :meth:`predict_hypotheses` call per held-out pair,
            twice for molecules (with and without formulas).

        Returns
        -------
        BarycenterGraphPredictor
            ``self``.

        Raises
        ------
        ValueError
            For a ``calibration_share`` outside ``[0, 0.5]`` or leaving fewer
            than 2 pairs on either side; for invalid parameters, non-finite inputs, mismatched lengths,
            empty graphs, self-loops or unlabeled nodes; for
            ``weight_model="local"`` with ``kernel="precomputed"``; for a dense
            solve whose (n, n) kernel and factor would exceed half the
            physical memory (use ``weight_model="local"``).
        TypeError
            For graphs that are not simple undirected networkx graphs.
        """
        validate_params(self.get_params(deep=False), self._parameter_rules)
        X = check_inputs(X, compact=True)  # bool/integer inputs (e.g. uint8 fingerprints) stay compact
        if y is None:
            raise ValueError(
                f"{type(self).__name__} requires y to be passed, but the target y is None; "
                "pass one networkx graph per input row."
            )
        graphs = list(y) if not isinstance(y, nx.Graph) else [y]
        if len(graphs) != X.shape[0]:
            raise ValueError(
                f"X has {X.shape[0]} rows but {len(graphs)} graphs were given; "
                "pass one graph per input row."
            )
        share = calibration_share
        if isinstance(share, bool) or not isinstance(share, (int, float, np.floating)) or not 0.0 <= share <= 0.5:
            raise ValueError(f"calibration_share must be a number in [0, 0.5]; got {share!r}.")
        labels = LabelSpace(self.node_label, self.edge_label, handle_unknown=self.handle_unknown).fit(graphs)
        ids = [g.graph.get("id") if isinstance(g, nx.Graph) else None for g in graphs]
        training_ids = [str(i) for i in ids] if all(i is not None for i in ids) else None
        calibration = self._held_out_calibration(X, graphs, float(share)) if share > 0 else None
        self.fit_encoded(X, TrainingSet.encode(graphs, labels), training_ids=training_ids)
        if calibration is not None:
            self.hypothesis_calibration_ = calibration
        return self

    def _held_out_calibration(self, X: Any, graphs: list[nx.Graph], share: float) -> dict:
        """``fit(calibration_share=share)``: calibrate a copy fitted without a held-out share."""
        n = len(graphs)
        n_val = int(round(share * n))
        if n_val < 2 or n - n_val < 2:
            raise ValueError(
                f"calibration_share={share} of {n} training pairs holds out {n_val}; hold out at least 2 and "
                "keep at least 2 (a larger share or more pairs)."
            )
        val = np.sort(check_random_state(self.random_state).permutation(n)[:n_val])
        rest = np.setdiff1d(np.arange(n), val)
        part = clone(self).fit(X[rest], [graphs[i] for i in rest.tolist()])
        return part.calibrate(X[val], [graphs[i] for i in val.tolist()]).hypothesis_calibration_

    def fit_encoded(
        self,
        X: ArrayLike,
        training: TrainingSet,
        gamma: float | None = None,
        training_ids: list[str] | None = None,
    ) -> BarycenterGraphPredictor:
        """Fit on training graphs already encoded (model files restore a model through it).

        Parameters
        ----------
        X : array-like of shape (n_samples, n_features), or (n_samples, n_samples) with ``kernel="precomputed"``
            Training inputs.  Bool and integer arrays are not copied to
            float64: ``uint8`` 0/1 fingerprints with ``weight_model="local"``
            and ``kernel="tanimoto"`` are held as sparse rows.
        training : TrainingSet
            The encoded training graphs, one per row of ``X``; its label space
            is kept as it is.
        gamma : float or None, default=None
            Bandwidth to use instead of ``self.gamma`` (a stored, already
            resolved median heuristic); the parameter itself is unchanged.
        training_ids : list of str, default=None
            An id per training graph, kept as ``training_ids_``.

        Returns
        -------
        BarycenterGraphPredictor
            ``self``.
        """
        validate_params(self.get_params(deep=False), self._parameter_rules)
        self._n_neighbors()  # the old name top_k: warn now, at fit
        X = check_inputs(X, compact=True)  # bool/integer inputs (e.g. uint8 fingerprints) stay compact
        if len(training) != X.shape[0]:
            raise ValueError(
                f"X has {X.shape[0]} rows but the training set holds {len(training)} graphs; "
                "pass one graph per input row."
            )
        if training_ids is not None and len(training_ids) != len(training):
            raise ValueError(
                f"training_ids has {len(training_ids)} entries but there are {len(training)} training graphs"
            )
        weight_model = self._resolve_weight_model(X.shape[0])
        self.training_ = training
        self.__dict__.pop("hypothesis_calibration_", None)  # made for the previous training set
        self.training_ids_ = None if training_ids is None else [str(i) for i in training_ids]
        self.labels_ = training.labels
        self.sizes_ = training.sizes
        self.n_edges_ = training.n_edges
        self.max_degree_ = training.max_degree
        self.connected_ = training.connected
        seed = 0 if self.random_state is None else check_random_state(self.random_state).randint(2**31 - 1)
        gamma = self.gamma if gamma is None else gamma
        self.weight_model_ = weight_model
        kernel, inputs = self.kernel, X
        if self.kernel == "learned":  # kernel ridge with an RBF kernel on learned embeddings
            self.embedding_ = self._input_embedding(X, training, seed)
            self.inputs_ = X
            kernel, inputs = "rbf", self.embedding_.transform(X)
        else:
            self.__dict__.pop("embedding_", None)
            self.__dict__.pop("inputs_", None)
        if self.weight_model_ == "local":
            self.weights_ = LocalRidgeWeights(
                kernel, gamma, self.ridge, self.weighting, local_size=self.local_size, random_state=seed
            )
        else:
            self.weights_ = KernelRidgeWeights(kernel, gamma, self.ridge, self.weighting, random_state=seed)
        self.weights_.fit(inputs)
        self.n_train_ = X.shape[0]
        self.n_features_in_ = X.shape[1]
        self.fingerprint_spec_ = self._fingerprint_spec(X, training)
        return self

    def _fingerprint_spec(self, X: NDArray, training: TrainingSet) -> MorganSpec | None:
        """``fingerprint_search`` resolved: how X is made from the graphs, or None (off)."""
        if self.fingerprint_search is False:
            return None
        spec, why = None, ""
        if self.kernel == "precomputed":
            why = "with kernel='precomputed' the inputs are kernel values, not fingerprints"
        elif not has_extra("rdkit"):  # first: the valences of heavier elements come from RDKit
            if self.fingerprint_search is True:
                require_extra("rdkit.Chem", "fingerprint_search")
            return None
        elif not molecular_labels(training.labels):
            why = ("the training graphs are not molecules (node labels element symbols, edge labels bond "
                   "orders 1-3)")
        else:
            symbols = [str(v) for v in training.labels.node_labels_]
            orders = bond_orders(training.labels.edge_labels_, training.labels.edge_label) or [1]

            def molecule(i: int) -> tuple[list[str], NDArray[np.int64]]:
                cls, O = training_arrays(training, i, orders)
                return [symbols[c] for c in cls.tolist()], O

            spec, why = find_morgan_spec(X, molecule)
        if spec is None and self.fingerprint_search is True:
            raise ValueError(
                f"fingerprint_search=True needs the rows of X to be the Morgan fingerprints of their training "
                f"graphs, as gwpred.chem.morgan_fingerprints computes them (radius 1, 2 or 3; bits or counts), "
                f"but {why}. Compute X that way, or set fingerprint_search=False."
            )
        if spec is not None and why:
            warnings.warn(
                f"fingerprint_search: {why}. The search runs (inputs like those rows cannot reach their "
                "fingerprint exactly); to avoid this, give graphs whose node labels hold what the fingerprint "
                "sees (charges as in 'N+').", UserWarning, stacklevel=3,
            )
        return spec

    def _input_embedding(self, X: NDArray, training: TrainingSet, seed: int) -> InputEmbedding:
        """``kernel="learned"``: the given embedding, or one trained on ``X`` against the output kernel."""
        if isinstance(self.embedding, InputEmbedding):
            if self.embedding.n_features_in != X.shape[1]:
                raise ValueError(
                    f"the embedding takes {self.embedding.n_features_in} input columns but X has {X.shape[1]}"
                )
            return self.embedding
        options = dict(self.embedding or {})
        output_kernel = options.pop("output_kernel", "auto")
        if output_kernel == "auto":
            output_kernel = "fingerprint" if molecular_labels(training.labels) and has_extra("rdkit") else "wl"
        rows, kind = training_output_features(training, output_kernel)
        similarity = OutputSimilarity.cosine(rows) if kind == "cosine" else OutputSimilarity.tanimoto(rows)
        options.setdefault("random_state", seed)
        try:
            return train_embedding(X, similarity, progress=self.progress, **options)
        except TypeError as err:
            raise ValueError(
                f"embedding options: {err}; the options are output_kernel and those of "
                "gwpred.embedding.train_embedding (dim, hidden, conv, loss, epochs, ...)"
            ) from err

    def __sklearn_tags__(self) -> Any:
        """scikit-learn >= 1.6 tags: y is required; with ``kernel="precomputed"`` X is pairwise.

        ``pairwise`` makes scikit-learn's cross-validation split a precomputed
        kernel's columns as well as its rows (``K[test][:, train]``).
        """
        tags = super().__sklearn_tags__()
        tags.target_tags.required = True
        tags.input_tags.pairwise = self.kernel == "precomputed"
        return tags

    def _more_tags(self) -> dict[str, Any]:
        """The same tags for scikit-learn < 1.6."""
        return {"requires_y": True, "pairwise": self.kernel == "precomputed"}

    def _resolve_weight_model(self, n_train: int) -> str:
        """``weight_model`` with ``auto`` resolved for ``n_train`` training inputs."""
        if self.kernel == "precomputed":
            if self.weight_model == "local":
                raise ValueError(
                    "weight_model='local' needs a kernel function to find each query's most similar "
                    "training inputs; with kernel='precomputed' use weight_model='dense' or 'auto' "
                    "(dense), or pass the features with a named kernel."
                )
            return "dense"
        if self.weight_model == "auto":
            return "dense" if n_train <= AUTO_DENSE_MAX else "local"
        return self.weight_model

    # ------------------------------------------------------------- predict
    def _queries(self, X: ArrayLike, name: str) -> NDArray:
        """``X`` checked as new inputs of this fitted model: finite, 2-D, as many columns as in fit."""
        X = check_inputs(X, name)
        expected = self.n_train_ if self.kernel == "precomputed" else self.n_features_in_
        if X.shape[1] != expected:
            raise ValueError(
                f"{name} has {X.shape[1]} columns but the model was fitted with {expected}; "
                "use the same features (or the kernel to the training items) as in fit."
            )
        return X

    def input_kernel(self, X: ArrayLike, Y: ArrayLike) -> NDArray[np.float64]:
        """The fitted input kernel between two sets of inputs (e.g. for 1-NN retrieval).

        The model's kernel and bandwidth; with ``kernel="learned"``, the RBF
        kernel on the trained embeddings of ``X`` and ``Y``.

        Parameters
        ----------
        X : array-like of shape (n_x, n_features)
        Y : array-like of shape (n_y, n_features)

        Returns
        -------
        ndarray of shape (n_x, n_y)

        Raises
        ------
        ValueError
            With ``kernel="precomputed"`` (there is no kernel function), or
            for inputs of the wrong width.
        """
        check_is_fitted(self, "weights_")
        if self.kernel == "precomputed":
            raise ValueError(
                "kernel='precomputed' has no kernel function to apply to new inputs; compute the "
                "kernel between them yourself"
            )
        X, Y = self._queries(X, "X"), self._queries(Y, "Y")
        if self.kernel == "learned":
            return kernel_matrix(self.embedding_.transform(X), self.embedding_.transform(Y), "rbf",
                                 self.weights_.gamma_)
        return kernel_matrix(X, Y, self.kernel, self.weights_.gamma_)

    def neighbors(self, X: ArrayLike) -> tuple[NDArray[np.int64], NDArray[np.float64]]:
        """The kept training graphs of each input and their barycentric weights.

        Parameters
        ----------
        X : array-like of shape (n_queries, n_features)

        Returns
        -------
        indices : ndarray of shape (n_queries, n_neighbors)
            Training indices by decreasing weight.
        weights : ndarray of shape (n_queries, n_neighbors)
            Non-negative, each row sums to one (zeros where fewer were kept).
        """
        check_is_fitted(self, "weights_")
        X = self._queries(X, "X")
        if self.kernel == "learned":
            X = self.embedding_.transform(X)
        # an input unlike every training input (all kernel values 0) is an error, not graph 0
        if self.weight_model_ == "local":  # the slow part at scale: show it
            return self.weights_.top_weights(X, self._n_neighbors(), progress=self.progress, empty="error",
                                             n_jobs=self.n_jobs)
        return self.weights_.top_weights(X, self._n_neighbors(), empty="error")

    def _n_neighbors(self) -> int:
        """``n_neighbors``, or the value given under its old name ``top_k`` (with a FutureWarning)."""
        if isinstance(self.top_k, str):  # "deprecated": not given
            return int(self.n_neighbors)
        return int(renamed_keyword("top_k", "n_neighbors", self.top_k, self.n_neighbors, 10))

    @property
    def valence_(self) -> bool:
        """Whether predictions obey valence rules: ``valence`` resolved against the training labels.

        ``valence="auto"`` is True when every training node label is an element
        symbol with a known valence and every edge label a bond order 1, 2 or 3
        (or edge labels are ignored).
        """
        check_is_fitted(self, "labels_")
        return uses_valence(self.valence, self.labels_)

    def _settings(self, need_valences: bool) -> Settings:
        check_is_fitted(self, "labels_")
        return make_settings(
            self.labels_, self.max_degree_, self.connected_, self.valence, need_valences,
            alpha=self.alpha, max_outer=self.max_outer, max_inner=self.max_inner, tol=self.tol,
            n_nodes=self.n_nodes, decoding=self.decoding, edges=self.edges, consensus=self.consensus,
            connect=self.connect,
        )

    def _map(self, step: Any, X: ArrayLike, formulas: Any, decode: bool) -> list:
        """Run one batched step over the inputs' neighbourhoods (see :meth:`_map_weighted`)."""
        idx, w = self.neighbors(X)
        return self._map_weighted(step, idx, w, formulas, decode)

    def _map_weighted(
        self, step: Any, idx: NDArray[np.int64], w: NDArray[np.float64], formulas: Any, decode: bool
    ) -> list:
        """Run one batched step, ``batch_size`` queries per task, in order.

        On one process the tasks carry the queries' neighbourhoods; on workers
        they carry only training indices and weights, and the padded training
        graphs go to each worker once (``shared``: memory-mapped by joblib,
        scattered on a Dask cluster).
        """
        parsed = parse_formulas(formulas, len(idx), self.labels_.node_labels_, 4 * int(self.sizes_.max()))
        # valence tables are needed (and checked) only to decode molecules
        settings = self._settings(decode and (self.valence_ or any(f is not None for f in parsed)))
        slices = batch_slices(len(idx), self.batch_size, self.n_jobs)
        padded = padded_graphs(self.training_, files=True) if len(slices) > 1 and self.n_jobs != 1 else None
        if padded is None:
            hoods = [neighbourhood(self.training_, i, ww) for i, ww in zip(idx, w)]
            tasks = [(hoods[b], parsed[b]) for b in slices]
            shared: dict[str, Any] = {"settings": settings}
        else:
            tasks = [(step, idx[b], w[b], parsed[b]) for b in slices]
            step, shared = on_rows, {"settings": settings, "padded": padded}
        done = parallel_map(
            step, tasks, n_jobs=self.n_jobs, progress=self.progress, desc="barycenters", unit="graph",
            shared=shared, weights=[b.stop - b.start for b in slices],
        )
        return [item for batch in done for item in batch]

    def predict_barycenters(self, X: ArrayLike, formulas: Any = None) -> list[SoftGraph]:
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
        return self._map(barycenter_batch, X, formulas, decode=False)

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
        if self.predict_with not in PREDICT_WITH:
            raise ValueError(f"predict_with must be one of {list(PREDICT_WITH)}; got {self.predict_with!r}.")
        cal = getattr(self, "hypothesis_calibration_", None) or {}
        if self.predict_with == "decoding" or (self.predict_with == "auto" and not any(
                c.prefers_hypotheses for c in cal.values())):
            idx, w = self.neighbors(X)
            return self._searched(X, self._map_weighted(predict_batch, idx, w, formulas, True), formulas, idx, w)
        rows = check_inputs(X, compact=True)
        forms = None if formulas is None else list(formulas)
        if forms is not None and len(forms) != len(rows):
            raise ValueError(f"formulas has {len(forms)} entries for {len(rows)} inputs; give one (or None) per row.")
        by_hypotheses = self._predicts_by_hypotheses(forms, len(rows))
        out: list[nx.Graph | None] = [None] * len(rows)
        if by_hypotheses.any():
            chosen = np.flatnonzero(by_hypotheses)
            with warnings.catch_warnings():
                warnings.simplefilter("ignore", UserWarning)  # one hypothesis is all that is asked
                lists = self.predict_hypotheses(rows[chosen], top_k=1, calibration=False,
                                                formulas=None if forms is None else [forms[r] for r in chosen])
            for r, hyps in zip(chosen.tolist(), lists):
                out[r] = hyps[0].graph if hyps else None
        rest = [r for r, g in enumerate(out) if g is None]  # decoding, or no valid pool member
        if rest:  # (then the ordinary path says why, or decodes)
            parsed = None if forms is None else [forms[r] for r in rest]
            for r, g in zip(rest, self._map(predict_batch, rows[rest], parsed, decode=True)):
                out[r] = g
        return self._searched(rows, out, forms)  # type: ignore[arg-type]

    def _searched(
        self, X: ArrayLike, graphs: list[nx.Graph], formulas: Any,
        idx: NDArray[np.int64] | None = None, w: NDArray[np.float64] | None = None,
    ) -> list[nx.Graph]:
        """``fingerprint_search``: each prediction edited towards its input's fingerprint (keeping its
        formula); a prediction stays as it is where no start is a molecule RDKit accepts."""
        spec = getattr(self, "fingerprint_spec_", None)
        if spec is None:
            return graphs
        rows = check_inputs(X, compact=True)
        parsed = parse_formulas(formulas, len(rows), self.labels_.node_labels_, 4 * int(self.sizes_.max()))
        if idx is None or w is None:
            idx, w = self.neighbors(rows)
        settings = self._settings(True)
        orders = list(settings.orders or []) or [1]
        starts, kinds = search_starts(graphs, parsed, idx, w, self.training_, orders, SEARCH_STARTS)
        slices = batch_slices(len(rows), max(1, self.batch_size // 16), self.n_jobs)
        found = parallel_map(
            search_rows, [(starts[b], np.asarray(rows[b]), kinds[b]) for b in slices],
            n_jobs=self.n_jobs, progress=self.progress, desc="fingerprint search", unit="graph",
            weights=[b.stop - b.start for b in slices],
            shared={"symbols": [str(v) for v in self.labels_.node_labels_], "valences": settings.valences,
                    "spec": spec, "width": self.search_width, "max_evaluations": 4000 * self.search_width},
        )
        return [g if res is None else result_graph(res, g, self.labels_, orders)
                for g, res in zip(graphs, (x for batch in found for x in batch))]

    def _predicts_by_hypotheses(self, formulas: list | None, n: int) -> NDArray[np.bool_]:
        """Per input, whether :meth:`predict` returns the first hypothesis (see ``predict_with``)."""
        if self.predict_with != "auto":
            return np.full(n, self.predict_with == "hypotheses")
        cal = getattr(self, "hypothesis_calibration_", None) or {}
        prefers = {case: c.prefers_hypotheses for case, c in cal.items()}
        cases = ["plain" if formulas is None or formulas[r] is None else "formula" for r in range(n)]
        return np.array([prefers.get(case, False) for case in cases], dtype=bool)

    def predict_hypotheses(
        self,
        X: ArrayLike,
        top_k: int = 10,
        formulas: Any = None,
        *,
        calibration: HypothesisCalibration | bool | None = None,
        output_kernel: str = "auto",
        n_anchors: int = 3,
        n_expand: int = 3,
        n_rounds: int = 2,
        keep_self_terms: bool = False,
    ) -> list[HypothesisList]:
        """Up to ``k`` distinct graphs per input, best first, each with a score and a confidence.

        A pool of generated graphs (the ordinary decoding, barycenters from
        other anchors and at neighbouring sizes, the neighbours themselves, and
        a local search of valid single edits) scored by the output-kernel score
        of ranking; see :mod:`gwpred.model.hypotheses`.  Predicted molecules
        are hypotheses to be checked, not results.

        Parameters
        ----------
        X : array-like of shape (n_queries, n_features)
        top_k : int, default=10
            Hypotheses per input (the length of a ranked list, as everywhere);
            fewer (with a note and a warning) when the pool holds fewer
            distinct graphs.
        formulas : list of (str or None), default=None
            As in :meth:`predict`: every hypothesis then has the formula's
            heavy atoms (and hydrogens when given).
        calibration : HypothesisCalibration or False, optional
            None (default): the model's own calibration when it has one
            (:meth:`calibrate`, or ``fit(calibration_share=...)``; its map for
            inputs with a formula or without, as each input has); a
            :class:`~gwpred.model.hypotheses.HypothesisCalibration` from
            :func:`~gwpred.model.hypotheses.calibrate_hypotheses`: used for
            every input; False: none.  Calibrated confidences are
            probabilities of the exact graph (``.confidence``) and of a graph
            within edit distance 1 (``.confidence_near``); uncalibrated ones
            are the raw score (``calibrated=False`` on each list).
        output_kernel : {"auto", "wl", "fingerprint", "both"}, default="auto"
            Output kernel of the score: ``auto`` is ``fingerprint`` for
            molecules when RDKit is installed, else ``wl``.  On a QM9
            validation split (10,000 fitted, 200 held-out molecules;
            ``benchmarks/bench_hypotheses.py``), top-1 exact with the
            fingerprint vs the WL output kernel: fingerprint inputs 68.0% vs
            52.0% with formulas, 14.5% vs 5.5% without; spectrum inputs 26.0%
            vs 19.5% and 2.5% vs 1.5%.
        n_anchors, n_expand, n_rounds : int, default=3, 3 and 2
            Extra anchors; members expanded per round and rounds of the local search.
        keep_self_terms : bool, default=False
            Whether a hypothesis equal to one of the input's training graphs
            keeps that graph's own term in its score (see
            :func:`~gwpred.model.hypotheses.generate_hypotheses`).

        Returns
        -------
        list of HypothesisList
            One list of :class:`~gwpred.model.hypotheses.Hypothesis`
            (``.graph``, ``.score``, ``.confidence``, ``.source``) per input.

        Raises
        ------
        ValueError
            As :meth:`predict`, and for ``top_k`` < 1 or an unknown ``output_kernel``.
        """
        idx, w = self.neighbors(X)
        parsed = parse_formulas(formulas, len(idx), self.labels_.node_labels_, 4 * int(self.sizes_.max()))
        settings = self._settings(self.valence_ or any(f is not None for f in parsed))
        return generate_hypotheses(
            self, idx, w, parsed, settings, k=top_k, output_kernel=output_kernel, n_anchors=n_anchors,
            n_expand=n_expand, n_rounds=n_rounds, keep_self_terms=keep_self_terms, batch_size=self.batch_size,
            progress=self.progress,
            calibration=getattr(self, "hypothesis_calibration_", None) if calibration is None else (
                calibration or None),
        )

    def calibrate(
        self, X: ArrayLike, y: list[nx.Graph], *, top_k: int = 10, **options: Any
    ) -> BarycenterGraphPredictor:
        """Calibrate the confidences of :meth:`predict_hypotheses` on held-out pairs.

        Fits :func:`~gwpred.model.hypotheses.calibrate_hypotheses` on inputs
        the model was not fitted on, once without formulas and, for molecules
        (``valence_`` on), once with each true graph's own formula (heavy atoms
        and hydrogens, :func:`gwpred.formula.graph_formula`), and keeps both as
        ``hypothesis_calibration_`` (``{"plain": ..., "formula": ...}``, saved
        with the model).  Refitting the model drops it.

        Parameters
        ----------
        X : array-like of shape (n_inputs, n_features)
            Held-out inputs (never the training inputs: their scores look
            better than new inputs' would).
        y : list of networkx.Graph
            Their true graphs.
        top_k : int, default=10
            Hypotheses per input, as you will ask for them.
        **options
            Passed to :meth:`predict_hypotheses` (``output_kernel``, ...).

        Returns
        -------
        BarycenterGraphPredictor
            ``self``.

        Raises
        ------
        ValueError
            For mismatched lengths or fewer than 2 hypotheses in all.
        """
        check_is_fitted(self, "weights_")
        graphs = [y] if isinstance(y, nx.Graph) else list(y)
        settings = self._settings(True) if self.valence_ else None
        out = calibrate_cases(self, X, graphs, settings, top_k=top_k,
                              decode=lambda forms: self._map(predict_batch, X, forms, decode=True), **options)
        self.hypothesis_calibration_ = out
        return self

    def predict_weighted(
        self, indices: ArrayLike, weights: ArrayLike, formulas: Any = None
    ) -> list[nx.Graph]:
        """Predict from given training indices and barycentric weights instead of inputs.

        The step after :meth:`neighbors`: ``predict(X)`` is
        ``predict_weighted(*neighbors(X))`` (without ``fingerprint_search``,
        which needs the inputs themselves).  Use it with weights of your own
        (another similarity, a hand-picked set of training graphs).

        Parameters
        ----------
        indices : array-like of int, shape (n_queries, k)
            Training indices per query.
        weights : array-like of shape (n_queries, k)
            Non-negative weights; zero entries are ignored, each row is
            normalised to sum one and needs a positive entry.
        formulas : list of (str or None), default=None
            As in :meth:`predict`.

        Returns
        -------
        list of networkx.Graph

        Raises
        ------
        ValueError
            For mismatched shapes, indices outside the training set, or
            weights that are negative, not finite, or all zero in a row.
        """
        check_is_fitted(self, "weights_")
        idx = np.asarray(indices)
        w = np.asarray(weights, dtype=np.float64)
        if idx.ndim != 2 or idx.shape != w.shape or idx.shape[0] == 0 or not np.issubdtype(idx.dtype, np.integer):
            raise ValueError(
                f"indices must be integers and weights numbers, both of shape (n_queries, k); got "
                f"{idx.dtype} {idx.shape} and {w.shape}."
            )
        if idx.size and (idx.min() < 0 or idx.max() >= self.n_train_):
            raise ValueError(f"indices must lie in 0..{self.n_train_ - 1} (the training graphs).")
        if not np.all(np.isfinite(w)) or np.any(w < 0) or np.any(w.sum(1) <= 0):
            raise ValueError("weights must be finite and non-negative with a positive entry in every row.")
        order = np.argsort(-w, axis=1, kind="stable")  # by decreasing weight, as neighbors() gives them
        idx = np.take_along_axis(idx.astype(np.int64), order, 1)
        w = np.take_along_axis(w, order, 1)
        sums = w.sum(1, keepdims=True)  # rows that already sum to one (as from neighbors) stay as they are
        w = np.where(np.abs(sums - 1.0) <= 1e-12, w, w / sums)
        return self._map_weighted(predict_batch, idx, w, formulas, decode=True)

    def score(self, X: ArrayLike, y: list[nx.Graph]) -> float:
        """Negative mean graph edit distance to the true graphs (higher is better).

        Uniform edit costs (1 per node or edge insertion, deletion or label
        substitution), exact when proven within ``SCORE_TIME_LIMIT`` (10) seconds
        per pair, else the best upper bound found (a large pair never hangs a
        grid search); used by ``GridSearchCV``.

        Parameters
        ----------
        X : array-like of shape (n_queries, n_features)
        y : list of networkx.Graph of length n_queries
            The true graphs.

        Returns
        -------
        float
        """
        graphs = [y] if isinstance(y, nx.Graph) else list(y)
        n_rows = len(check_inputs(X, compact=True))
        if len(graphs) != n_rows:
            raise ValueError(f"X has {n_rows} rows but {len(graphs)} graphs were given; pass one graph per row.")
        pred = self.predict(X)
        ged = [
            edit_distance(p, t, node_label=self.node_label, edge_label=self.edge_label,
                          time_limit=SCORE_TIME_LIMIT).value
            for p, t in zip(pred, graphs)
        ]
        return -float(np.mean(ged))

    def rank(
        self,
        X: ArrayLike,
        candidates: Any,
        top_k: int = 10,
        scorer: str = "kernel",
        filter: Any = None,
        *,
        output_kernel: str = "wl",
        k: int | None = None,
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
        top_k : int, default=10
            Candidates returned per input (the old name ``k`` works for one
            more release, with a FutureWarning).
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
            Per input, up to ``top_k`` (candidate index, score) pairs, best first;
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
        >>> model = BarycenterGraphPredictor(n_neighbors=1).fit(np.arange(4.0).reshape(-1, 1), [chain(n + 2) for n in range(4)])
        >>> [j for j, _ in model.rank([[1.0]], [chain(5), chain(3), chain(2)], top_k=2)[0]]
        [1, 0]
        """
        return rank_candidates(
            self, X, candidates, top_k=renamed_keyword("k", "top_k", k, top_k, 10), scorer=scorer,
            filter=filter, output_kernel=output_kernel,
            progress=self.progress,
        )

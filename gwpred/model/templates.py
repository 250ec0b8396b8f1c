"""The scikit-learn estimator over learned template graphs (the parametric FGW-barycenter predictor).

Glue only: :class:`TemplateGraphPredictor` checks its parameters, starts the
templates (:func:`~gwpred.model.template_steps.initial_templates`), trains them
with the network (:func:`~gwpred.model.template_steps.train_templates`, torch
on the CPU) and, to predict, runs the numpy forward pass, then the barycenter
and decoders of :mod:`gwpred.model.steps` with the templates in place of
training graphs.  After ``fit`` the model holds no training graph: a small
network and ``n_templates`` small graphs.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

import networkx as nx
import numpy as np
from numpy.typing import ArrayLike, NDArray
from sklearn.base import BaseEstimator
from sklearn.utils import check_random_state
from sklearn.utils.validation import check_is_fitted

from .._utils import Interval, Options, Rule, Types, check_inputs, validate_params
from ..codec import LabelSpace, TrainingSet
from ..decode import weighted_median
from ..formula import Formula
from ..ged import edit_distance
from ..parallel import N_JOBS_RULE, batch_slices, parallel_map
from .steps import (
    DECODERS,
    Neighbourhood,
    Settings,
    decode_query,
    formula_counts,
    make_settings,
    parse_formulas,
    solve_barycenters,
    uses_valence,
)
from .template_steps import (
    TrainingOptions,
    initial_templates,
    softmax,
    top_weights,
    train_templates,
)

__all__ = ["TemplateGraphPredictor", "predict_on_templates"]

_POSITIVE_INT = Rule(Interval(1, np.inf, integer=True))

#: Seconds of exact GED search per pair in :meth:`TemplateGraphPredictor.score`.
SCORE_TIME_LIMIT = 10.0


def predict_on_templates(
    hoods: Sequence[Neighbourhood], sizes: Sequence[int], formulas: Sequence[Formula | None], settings: Settings
) -> list[nx.Graph]:
    """Barycenters of weighted templates, solved together, then decoded one by one.

    A query's size is its formula's heavy atoms when it has one, else ``sizes[q]``
    (passed to :func:`~gwpred.model.steps.solve_barycenters` as a one-entry
    count, whose sum fixes the size).
    """
    counts = [formula_counts(f, settings.labels) if f is not None else np.array([int(s)], dtype=np.int64)
              for f, s in zip(formulas, sizes)]
    softs = solve_barycenters(hoods, settings, counts)
    return [decode_query(soft, hood, settings, f) for soft, hood, f in zip(softs, hoods, formulas)]


class TemplateGraphPredictor(BaseEstimator):
    r"""Predict labeled graphs as FGW barycenters of learned template graphs.

    A network maps an input ``x`` to weights :math:`\lambda(x)` on the simplex
    over ``n_templates`` template graphs, each of its own size, with a
    structure matrix in ``[0, 1]`` and node- and edge-label scores; the
    prediction is the FGW barycenter (Vayer et al. 2019) of the ``n_mixed``
    most weighted templates, decoded as by
    :class:`~gwpred.BarycenterGraphPredictor`.  Network and templates are
    trained end to end through the FGW loss to the training graphs, the
    parametric variant of Brogat-Motte et al. (ICML 2022).  Training needs
    PyTorch (the ``neural`` extra); predicting, saving and loading do not.
    The model keeps no training data.

    Parameters
    ----------
    n_templates : int, default=32
        Number of templates; started as FGW medoids of k-means clusters of the inputs.
    cluster_on : {"inputs", "graphs"}, default="inputs"
        What the start's k-means clusters: the inputs, or the training graphs
        (their Weisfeiler-Lehman features); a cluster's FGW medoid starts a
        template, and the network is warm-started to give each training input
        its cluster's template.
    n_mixed : int, default=4
        Templates mixed per prediction (the largest weights, renormalised; top-k).
    hidden : tuple of int, default=(256,)
        Hidden layer widths of the network (ReLU).
    alpha : float, default=0.9
        FGW trade-off between node labels (0) and structure (1), in training and prediction.
    n_nodes : {"head", "vote"} or int, default="head"
        Size of a predicted graph: ``head``, a size classifier trained with the
        network (cross-entropy beside the FGW loss); ``vote``, the weighted
        median size of the mixed templates; or a fixed number.  A formula
        given to :meth:`predict` fixes the size in any case.
    epochs : int, default=50
        Most passes over the training part.
    batch_size : int, default=64
        Training pairs per step; also queries solved together when predicting.
    learning_rate : float, default=3e-3
        Adam's step size (network and templates).
    validation_share : float, default=0.1
        Share of the training pairs held out for early stopping.
    patience : int, default=5
        Epochs without a lower validation loss before stopping (the best epoch is kept).
    size_weight : float, default=0.1
        Weight of the size classifier's cross-entropy in the loss.
    max_outer, max_inner : int, default=5 and 100
        Barycenter iterations when predicting (see :class:`~gwpred.BarycenterGraphPredictor`).
    tol : float, default=1e-6
        Relative tolerance of the barycenter loops when predicting.
    decoding : {"anchored", "free"}, default="anchored"
        A key of :data:`gwpred.model.steps.DECODERS`.  ``anchored``: the
        barycenter starts from the most weighted template of the chosen size
        and is decoded as edits of that template rounded at 0.5; ``free``:
        the barycenter alone, with the ``edges`` policy.  Both decode the same
        fitted model in ``benchmarks/bench_templates.py``; on QM9 anchored
        decoding had the lower mean GED (README, "Learned templates").
    edges : {"budget", "threshold"}, default="budget"
        Edge policy of ``free`` decoding (the budget is voted by the mixed templates' expected edge counts).
    consensus : float, default=0.8
        Agreement needed by ``anchored`` decoding to change an anchor edge.
    connect : "auto" or bool, default="auto"
        Decode connected graphs; ``auto`` does so when all training graphs are.
    valence : "auto", bool or dict, default="auto"
        Valence rules for molecules, as in :class:`~gwpred.BarycenterGraphPredictor`.
    node_label, edge_label : str, default="label"
        Graph attributes holding node and edge labels (``edge_label=None`` ignores edge labels).
    handle_unknown : {"error", "ignore"}, default="error"
        Policy for labels unseen in training.
    random_state : int, RandomState or None, default=None
        Seeds clustering, medoid samples, the split, the batches and torch's
        initialisation (None: seed 0); equal seeds give equal models.
    progress : bool, default=False
        A progress bar over epochs (losses) and over predictions.
    n_jobs : int, default=1
        Worker processes for the queries of ``predict``.
    n_threads : int, default=1
        torch threads while training (restored after).

    Attributes
    ----------
    templates_ : TemplateSet
        The trained templates.
    network_ : TemplateNetwork
        The trained network (numpy).
    labels_ : LabelSpace
    max_degree_ : ndarray of shape (n_node_labels,)
    connected_ : bool
    history_ : dict
        Training losses per epoch, best epoch, seconds.
    n_features_in_ : int

    Examples
    --------
    >>> import networkx as nx, numpy as np
    >>> def chain(n):
    ...     g = nx.path_graph(n); nx.set_node_attributes(g, "C", "label"); return g
    >>> X = np.repeat(np.arange(3.0), 4)[:, None]; graphs = [chain(int(x) + 2) for x in X[:, 0]]
    >>> model = TemplateGraphPredictor(n_templates=3, epochs=5, random_state=0)
    >>> model.fit(X, graphs)  # doctest: +SKIP
    >>> [g.number_of_nodes() for g in model.predict([[0.0], [1.0], [2.0]])]  # doctest: +SKIP
    [2, 3, 4]

    (Skipped as a doctest because ``fit`` needs the optional torch; run by hand it prints
    ``[2, 3, 4]``, and ``tests/test_templates.py`` checks such a task.)
    """

    _parameter_rules: dict[str, Rule] = {
        "n_templates": _POSITIVE_INT,
        "n_mixed": _POSITIVE_INT,
        "cluster_on": Rule(Options(("inputs", "graphs"))),
        "hidden": Rule(Types((tuple, list)), what="a tuple of positive layer widths", error=TypeError),
        "alpha": Rule(Interval(0.0, 1.0)),
        "n_nodes": Rule(Options(("head", "vote")), Interval(1, np.inf, integer=True)),
        "epochs": Rule(Interval(0, np.inf, integer=True)),
        "batch_size": _POSITIVE_INT,
        "learning_rate": Rule(Interval(np.finfo(float).tiny)),
        "validation_share": Rule(Interval(0.01, 0.5)),
        "patience": _POSITIVE_INT,
        "size_weight": Rule(Interval(0.0)),
        "max_outer": _POSITIVE_INT,
        "max_inner": _POSITIVE_INT,
        "tol": Rule(Interval(0.0)),
        "decoding": Rule(Options(tuple(DECODERS))),
        "edges": Rule(Options(("budget", "threshold"))),
        "consensus": Rule(Interval(0.5, 1.0)),
        "connect": Rule(Options(("auto", True, False))),
        "valence": Rule(Options(("auto",)), Types((bool, dict)),
                        what="'auto', True, False or a dict of label -> valence", error=TypeError),
        "handle_unknown": Rule(Options(("error", "ignore"))),
        "progress": Rule(Types((bool,))),
        "n_jobs": N_JOBS_RULE,
        "n_threads": _POSITIVE_INT,
    }

    def __init__(
        self,
        n_templates: int = 32,
        cluster_on: str = "inputs",
        n_mixed: int = 4,
        hidden: tuple[int, ...] = (256,),
        alpha: float = 0.9,
        n_nodes: str | int = "head",
        epochs: int = 50,
        batch_size: int = 64,
        learning_rate: float = 3e-3,
        validation_share: float = 0.1,
        patience: int = 5,
        size_weight: float = 0.1,
        max_outer: int = 5,
        max_inner: int = 100,
        tol: float = 1e-6,
        decoding: str = "anchored",
        edges: str = "budget",
        consensus: float = 0.8,
        connect: str | bool = "auto",
        valence: str | bool | dict = "auto",
        node_label: str = "label",
        edge_label: str | None = "label",
        handle_unknown: str = "error",
        random_state: Any = None,
        progress: bool = False,
        n_jobs: int = 1,
        n_threads: int = 1,
    ) -> None:
        self.n_templates = n_templates
        self.cluster_on = cluster_on
        self.n_mixed = n_mixed
        self.hidden = hidden
        self.alpha = alpha
        self.n_nodes = n_nodes
        self.epochs = epochs
        self.batch_size = batch_size
        self.learning_rate = learning_rate
        self.validation_share = validation_share
        self.patience = patience
        self.size_weight = size_weight
        self.max_outer = max_outer
        self.max_inner = max_inner
        self.tol = tol
        self.decoding = decoding
        self.edges = edges
        self.consensus = consensus
        self.connect = connect
        self.valence = valence
        self.node_label = node_label
        self.edge_label = edge_label
        self.handle_unknown = handle_unknown
        self.random_state = random_state
        self.progress = progress
        self.n_jobs = n_jobs
        self.n_threads = n_threads

    # ----------------------------------------------------------------- fit
    def fit(self, X: ArrayLike, y: list[nx.Graph]) -> TemplateGraphPredictor:
        """Start the templates from the training graphs, then train network and templates.

        Parameters
        ----------
        X : array-like of shape (n_samples, n_features)
        y : list of networkx.Graph of length n_samples
            Training graphs (undirected, simple, at least one node, every node labeled).

        Returns
        -------
        TemplateGraphPredictor
            ``self``.

        Raises
        ------
        ValueError
            For invalid parameters, non-finite inputs, mismatched lengths,
            fewer than 4 training pairs, more templates than training pairs,
            empty graphs or unlabeled nodes.
        ImportError
            Without PyTorch (the ``neural`` extra).
        """
        validate_params(self.get_params(deep=False), self._parameter_rules)
        if not self.hidden or not all(isinstance(h, (int, np.integer)) and h >= 1 for h in self.hidden):
            raise ValueError(f"hidden must be a tuple of positive integer layer widths; got {self.hidden!r}.")
        X = check_inputs(X)
        if y is None:
            raise ValueError(
                f"{type(self).__name__} requires y to be passed, but the target y is None; "
                "pass one networkx graph per input row."
            )
        graphs = [y] if isinstance(y, nx.Graph) else list(y)
        if len(graphs) != X.shape[0]:
            raise ValueError(f"X has {X.shape[0]} rows but {len(graphs)} graphs were given; pass one graph per row.")
        # every y a graph first (its error names the entry), then the counts
        labels = LabelSpace(self.node_label, self.edge_label, handle_unknown=self.handle_unknown).fit(graphs)
        training = TrainingSet.encode(graphs, labels, "y")
        if len(graphs) < 4:
            raise ValueError(f"training templates needs at least 4 pairs (2 to fit, 1 to validate); got {len(graphs)}.")
        if self.n_templates > len(graphs):
            raise ValueError(
                f"n_templates={self.n_templates} is more than the {len(graphs)} training graphs it starts from; "
                "lower n_templates."
            )
        seed = 0 if self.random_state is None else int(check_random_state(self.random_state).randint(2**31 - 1))
        init, assignment = initial_templates(X, training, int(self.n_templates), seed, alpha=self.alpha,
                                             cluster_on=self.cluster_on)
        options = TrainingOptions(
            alpha=self.alpha, n_mixed=int(self.n_mixed), hidden=tuple(int(h) for h in self.hidden),
            epochs=int(self.epochs), batch_size=int(self.batch_size), learning_rate=float(self.learning_rate),
            validation_share=float(self.validation_share), patience=int(self.patience),
            size_weight=float(self.size_weight), n_threads=int(self.n_threads), seed=seed, progress=self.progress,
        )
        self.network_, self.templates_, self.history_ = train_templates(X, training, init, assignment, options)
        self.labels_ = labels
        self.max_degree_ = training.max_degree
        self.connected_ = training.connected
        self.n_features_in_ = X.shape[1]
        return self

    def __sklearn_tags__(self) -> Any:
        tags = super().__sklearn_tags__()
        tags.target_tags.required = True
        return tags

    def _more_tags(self) -> dict[str, Any]:
        return {"requires_y": True}

    # ------------------------------------------------------------- predict
    @property
    def valence_(self) -> bool:
        """Whether predictions obey valence rules (``valence`` resolved against the training labels)."""
        check_is_fitted(self, "labels_")
        return uses_valence(self.valence, self.labels_)

    def _settings(self, need_valences: bool) -> Settings:
        check_is_fitted(self, "labels_")
        return make_settings(
            self.labels_, self.max_degree_, self.connected_, self.valence, need_valences,
            alpha=self.alpha, max_outer=self.max_outer, max_inner=self.max_inner, tol=self.tol,
            n_nodes="vote" if self.n_nodes == "head" else self.n_nodes, decoding=self.decoding, edges=self.edges,
            consensus=self.consensus, connect=self.connect,
        )

    def template_weights(self, X: ArrayLike) -> NDArray[np.float64]:
        """Weights of every template for each input (softmax of the network; rows sum to one).

        Parameters
        ----------
        X : array-like of shape (n_queries, n_features)

        Returns
        -------
        ndarray of shape (n_queries, n_templates)
        """
        return softmax(self.network_.forward(self._queries(X))[0])

    def _queries(self, X: ArrayLike) -> NDArray[np.float64]:
        check_is_fitted(self, "network_")
        X = check_inputs(X)
        if X.shape[1] != self.n_features_in_:
            raise ValueError(
                f"X has {X.shape[1]} columns but the model was fitted with {self.n_features_in_}; "
                "use the same features as in fit."
            )
        return X

    def _sizes(self, logits: NDArray, size_logits: NDArray, idx: NDArray, w: NDArray) -> NDArray[np.int64]:
        if self.n_nodes == "head":
            return self.network_.size_values[size_logits.argmax(1)]
        if self.n_nodes == "vote":  # the weighted median size of the mixed templates
            return np.array([int(weighted_median(self.templates_.sizes[i], ww)) for i, ww in zip(idx, w)],
                            dtype=np.int64)
        return np.full(len(idx), int(self.n_nodes), dtype=np.int64)

    def predict(self, X: ArrayLike, formulas: Any = None) -> list[nx.Graph]:
        """Predict one labeled graph per input row (numpy only; no torch needed).

        Parameters
        ----------
        X : array-like of shape (n_queries, n_features)
        formulas : list of (str or None), default=None
            Molecules: per row, the molecular formula of the unknown or None
            (as in :meth:`gwpred.BarycenterGraphPredictor.predict`).  Predicted
            molecules are hypotheses to be checked, not results.

        Returns
        -------
        list of networkx.Graph

        Raises
        ------
        sklearn.exceptions.NotFittedError
            Before ``fit``.
        ValueError
            For non-finite inputs, a wrong number of columns, or a formula
            that cannot be read or holds elements unseen in training.
        """
        X = self._queries(X)
        logits, size_logits = self.network_.forward(X)
        idx, w = top_weights(logits, int(self.n_mixed))
        sizes = self._sizes(logits, size_logits, idx, w)
        parsed = parse_formulas(formulas, len(X), self.labels_.node_labels_, 4 * int(self.templates_.sizes.max()))
        settings = self._settings(self.valence_ or any(f is not None for f in parsed))
        hoods = [self.templates_.hood(i, ww) for i, ww in zip(idx, w)]
        slices = batch_slices(len(X), self.batch_size, self.n_jobs)
        done = parallel_map(
            predict_on_templates, [(hoods[b], sizes[b].tolist(), parsed[b]) for b in slices], n_jobs=self.n_jobs,
            progress=self.progress, desc="barycenters", unit="graph", shared={"settings": settings},
            weights=[b.stop - b.start for b in slices],
        )
        return [g for batch in done for g in batch]

    def score(self, X: ArrayLike, y: list[nx.Graph]) -> float:
        """Negative mean graph edit distance to the true graphs (higher is better; uniform costs).

        Parameters
        ----------
        X : array-like of shape (n_queries, n_features)
        y : list of networkx.Graph of length n_queries

        Returns
        -------
        float
        """
        graphs = [y] if isinstance(y, nx.Graph) else list(y)
        pred = self.predict(X)
        if len(graphs) != len(pred):
            raise ValueError(f"X has {len(pred)} rows but {len(graphs)} graphs were given; pass one graph per row.")
        ged = [edit_distance(p, t, node_label=self.node_label, edge_label=self.edge_label,
                             time_limit=SCORE_TIME_LIMIT).value for p, t in zip(pred, graphs)]
        return -float(np.mean(ged))

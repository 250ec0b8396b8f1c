"""The public edit distance functions: they run the steps cheapest first.

:func:`edit_distance` (exact, with :class:`EditDistance` as result) and
:func:`edit_distance_bounds` (the cheap bounds only); :func:`prepare` and
:func:`mapping_dict` are the way in and out of the index form the steps work on.
"""

from __future__ import annotations

import math
import time
from collections.abc import Hashable
from dataclasses import dataclass, field
from typing import Any

import networkx as nx
import numpy as np
from numpy.typing import NDArray

from ._bounds import cheap_bounds, closed, label_bound, linear_bounds, round_lower, stop_at
from ._costs import CostSpec, Costs, Labeled, check_costs, labeled, pair_costs
from ._isomorphism import isomorphism
from ._lagrangian import lagrangian, star_decomposition
from ._programs import program, program_pairs, relaxation, solve_milp
from ._search import MAX_SEARCH_NODES, PathCost, local_search, padded

__all__ = ["EditDistance", "edit_distance", "edit_distance_bounds", "mapping_dict", "prepare"]


@dataclass(frozen=True)
class EditDistance:
    """Result of :func:`edit_distance`.

    Attributes
    ----------
    value : float
        The graph edit distance when ``exact`` is true, otherwise the best upper bound
        found (the cost of the edit path described by ``mapping``).
    lower : float
        A proven lower bound on the graph edit distance.
    upper : float
        The cost of the best edit path found; equal to ``value``.
    exact : bool
        True when ``value`` is proven optimal (``lower == upper``).
    mapping : dict
        Node of the first graph -> node of the second graph it is substituted by, or
        ``None`` when it is deleted. Nodes of the second graph that are not values of this
        dict are inserted. Edges follow the nodes: an edge whose two end nodes are mapped
        onto an edge is substituted, every other edge is deleted or inserted.
    """

    value: float
    lower: float
    upper: float
    exact: bool
    mapping: dict = field(default_factory=dict)


# Random starts of the local search tried before the linear relaxation, and after it
# (before the integer program). None before: on QM9 pairs they rarely close the gap
# that the relaxation closes, and cost more time than they save (measured).
_RESTARTS_FIRST = 0
_RESTARTS_SECOND = 16

# Size limits (see "Large graphs" in the Notes of edit_distance). The times are from one
# 2-core machine; benchmarks/bench_ged_limits.py measures the whole calls.
#: Most nodes (n1 + n2) for every step: above it the Lagrangian bound and the programs
#: are skipped (the program alone would have n1 * n2 > 250,000 node variables), and the
#: cheap bounds of linear_bounds come first.
DENSE_NODES = 1000
#: Most nodes (n1 + n2) for the cheap bounds' (n1 + n2)**2 assignments above DENSE_NODES
#: (128 MB per matrix at 4000), when the time left allows them (see _dense_fits).
MAX_DENSE_BOUND_NODES = 4000
#: Seconds assumed for those assignments at 1000 nodes, growing as the cube of the size
#: (their worst case): twice the 0.1 s measured on random graphs at 1000 nodes (0.5 s
#: at 2050, 2.5 s at 4100: the cube over-estimates there, which is the safe side).
_DENSE_SECONDS_AT_1000 = 0.2
#: Most edge pairs (y variables / 2) of the binary program: building it takes about
#: 1.8 s and 0.9 GB per million pairs before HiGHS starts, so larger programs are not built.
MAX_PROGRAM_PAIRS = 500_000
#: Seconds per program entry (n1 * n2 + edge pairs), about twice the measured ones, for
#: building the program (0.6-1.3 microseconds) and for handing it to HiGHS and back
#: (about 3 microseconds, outside HiGHS's own clock).
_PROGRAM_BUILD_SECONDS = 2e-6
_PROGRAM_HANDOFF_SECONDS = 6e-6
#: Most nodes plus edges of one graph: the linear-size bounds take about 270 bytes per
#: node or edge of both graphs (986 MB for two graphs of 600,000 nodes and 1.2 million
#: edges, 19 s, mostly reading them), besides the networkx graphs themselves, which take
#: several times that.
MAX_GRAPH_ITEMS = 2_000_000


def _check_time_limit(time_limit: float | None) -> float | None:
    if time_limit is None:
        return None
    if isinstance(time_limit, bool) or not isinstance(
        time_limit, (int, float, np.integer, np.floating)
    ):
        raise TypeError(
            f"time_limit must be a number of seconds or None, got {time_limit!r} of type "
            f"{type(time_limit).__name__}"
        )
    if not float(time_limit) > 0 or math.isnan(float(time_limit)):
        raise ValueError(
            f"time_limit must be > 0 seconds (or None for no limit), got {time_limit!r}"
        )
    return float(time_limit)


def mapping_dict(a: Labeled, b: Labeled, image: NDArray[np.intp]) -> dict:
    """A node map in index form (image or -1 per node of ``a``) as a dict of graph nodes."""
    return {
        u: (b.nodes[int(image[i])] if int(image[i]) >= 0 else None)
        for i, u in enumerate(a.nodes)
    }


def prepare(
    g1: Any,
    g2: Any,
    node_label: Hashable,
    edge_label: Hashable,
    cost_kwargs: dict[str, float],
) -> tuple[Labeled, Labeled, Costs]:
    """Validate both graphs and the cost arguments; their index forms and cost tables."""
    spec = check_costs(**cost_kwargs)
    for g, name in ((g1, "g1"), (g2, "g2")):
        if isinstance(g, nx.Graph):
            size = g.number_of_nodes() + g.number_of_edges()
            if size > MAX_GRAPH_ITEMS:
                raise ValueError(
                    f"{name} has {g.number_of_nodes()} nodes and {g.number_of_edges()} edges "
                    f"({size} in all); edit distances and bounds support at most "
                    f"{MAX_GRAPH_ITEMS} nodes plus edges per graph (beyond that even the "
                    "cheap bounds need more than 1 GB besides the graphs); compare smaller "
                    "graphs, e.g. subgraphs or graphs coarsened by merging nodes"
                )
    a = labeled(g1, "g1", node_label, edge_label)
    b = labeled(g2, "g2", node_label, edge_label)
    return a, b, pair_costs(spec, a, b)


def edit_distance_bounds(
    g1: nx.Graph,
    g2: nx.Graph,
    *,
    node_label: Hashable = "label",
    edge_label: Hashable = "label",
    node_del_cost: CostSpec = 1.0,
    node_ins_cost: CostSpec = 1.0,
    node_sub_cost: CostSpec = 1.0,
    edge_del_cost: CostSpec = 1.0,
    edge_ins_cost: CostSpec = 1.0,
    edge_sub_cost: CostSpec = 1.0,
) -> tuple[float, float]:
    r"""Cheap lower and upper bounds on the graph edit distance.

    Parameters
    ----------
    g1, g2 : networkx.Graph
        Undirected simple graphs with a label on every node.
    node_label : hashable, default="label"
        Name of the node attribute holding the categorical node label.
    edge_label : hashable, default="label"
        Name of the edge attribute holding the categorical edge label; an edge without it
        has label ``None``.
    node_del_cost, node_ins_cost : float, mapping or callable, default=1.0
        Cost of deleting a node of ``g1`` and of inserting a node of ``g2``: one number
        for every label, a mapping from label to cost, or a callable ``f(label)``.
    node_sub_cost : float, mapping or callable, default=1.0
        Cost of substituting a node by one with a different label (equal labels cost 0):
        one number, a mapping from label pairs ``(a, b)`` to costs (``(b, a)`` is looked
        up when ``(a, b)`` is missing), or a callable ``f(a, b)``.
    edge_del_cost, edge_ins_cost, edge_sub_cost : float, mapping or callable, default=1.0
        The same for edges; an edge without the label attribute has label ``None``.

    Returns
    -------
    lower : float
        The larger of the label-multiset bound and the branch bound (node labels plus half
        of the incident edge-label multiset cost, optimally assigned).
    upper : float
        Cost of the edit path induced by the bipartite node assignment of Riesen & Bunke [1]_
        (node cost plus the full incident edge-label cost); above 150 nodes in all, or of
        the anchored node map of :func:`edit_distance` if that is cheaper.

    Raises
    ------
    TypeError
        If a graph is not an undirected simple ``networkx.Graph``, a label is not hashable or
        a cost is not a number, a mapping or a callable (or gives no number).
    ValueError
        If a node has no label, a graph has a self-loop, a cost is negative or not finite,
        a cost mapping has no entry for a label (pair) of the graphs, or a graph has more
        than ``MAX_GRAPH_ITEMS`` (2,000,000) nodes plus edges.

    See Also
    --------
    edit_distance : exact value, with these bounds as a first step.

    Notes
    -----
    Both bounds cost one or two linear sum assignments of size
    :math:`(n_1 + n_2) \times (n_1 + n_2)`. The branch bound is described in [2]_. When all
    costs are integers, the lower bound is rounded up to an integer.

    Pairs of more than 1000 nodes in all first get the linear-size bounds of
    :func:`edit_distance` (see "Large graphs" there), then, up to 4000 nodes, the bounds
    above as well (the better of each is returned); larger pairs get the linear-size
    bounds only. A graph of more than 2,000,000 nodes plus edges raises ValueError.

    References
    ----------
    .. [1] K. Riesen and H. Bunke, "Approximate graph edit distance computation by means of
       bipartite graph matching", Image and Vision Computing 27(7), 950-959, 2009.
    .. [2] D. B. Blumenthal and J. Gamper, "Improved lower bounds for graph edit distance",
       IEEE Transactions on Knowledge and Data Engineering 30(3), 503-516, 2018.

    Examples
    --------
    >>> import networkx as nx
    >>> g = nx.path_graph(3)
    >>> nx.set_node_attributes(g, "C", "label")
    >>> edit_distance_bounds(g, nx.Graph())
    (5.0, 5.0)
    """
    a, b, costs = prepare(
        g1,
        g2,
        node_label,
        edge_label,
        dict(
            node_del_cost=node_del_cost,
            node_ins_cost=node_ins_cost,
            node_sub_cost=node_sub_cost,
            edge_del_cost=edge_del_cost,
            edge_ins_cost=edge_ins_cost,
            edge_sub_cost=edge_sub_cost,
        ),
    )
    if len(a.nodes) + len(b.nodes) > DENSE_NODES:
        lower, upper, _ = _large_bounds(a, b, costs, PathCost(a, b, costs), None)
    else:
        lower, upper, _ = cheap_bounds(a, b, costs)
    return float(lower), float(upper)


def edit_distance(
    g1: nx.Graph,
    g2: nx.Graph,
    *,
    node_label: Hashable = "label",
    edge_label: Hashable = "label",
    node_del_cost: CostSpec = 1.0,
    node_ins_cost: CostSpec = 1.0,
    node_sub_cost: CostSpec = 1.0,
    edge_del_cost: CostSpec = 1.0,
    edge_ins_cost: CostSpec = 1.0,
    edge_sub_cost: CostSpec = 1.0,
    time_limit: float | None = None,
) -> EditDistance:
    r"""Exact graph edit distance between two labeled graphs.

    The edit distance is the least total cost of node and edge deletions, insertions and
    label substitutions that turn ``g1`` into a graph label-isomorphic to ``g2``:

    .. math::
        \mathrm{GED}(G_1, G_2) = \min_{\varphi} \sum_{i} c_n(i, \varphi(i))
            + \sum_{e} c_e(e, \varphi(e)) + \text{insertions}

    where :math:`\varphi` is a partial injective map from the nodes of :math:`G_1` to those of
    :math:`G_2` (unmapped nodes are deleted), edges follow their end nodes, and a
    substitution costs 0 between equal labels.

    Parameters
    ----------
    g1, g2 : networkx.Graph
        Undirected simple graphs with a label on every node.
    node_label : hashable, default="label"
        Name of the node attribute holding the categorical node label.
    edge_label : hashable, default="label"
        Name of the edge attribute holding the categorical edge label; an edge without it
        has label ``None``.
    node_del_cost, node_ins_cost : float, mapping or callable, default=1.0
        Cost of deleting a node of ``g1`` and of inserting a node of ``g2``: one number
        for every label, a mapping from label to cost, or a callable ``f(label)``.
    node_sub_cost : float, mapping or callable, default=1.0
        Cost of substituting a node by one with a different label (equal labels cost 0):
        one number, a mapping from label pairs ``(a, b)`` to costs (``(b, a)`` is looked
        up when ``(a, b)`` is missing), or a callable ``f(a, b)``.
    edge_del_cost, edge_ins_cost, edge_sub_cost : float, mapping or callable, default=1.0
        The same for edges; an edge without the label attribute has label ``None``.
    time_limit : float or None, default=None
        Seconds for the whole call, counted from its start. Steps look at the clock
        between (and inside) their stages and skip what they cannot finish in the time
        left; the rest is a fixed overhead that grows with the graphs: reading them
        (1 to 5 microseconds per node or edge) and steps that cannot be interrupted
        (under 0.3 s up to 1000 nodes in all, see "Large graphs" below). When time runs
        out the result has ``exact=False`` and brackets the distance with ``lower`` and
        ``upper``. None means no limit; the integer program may then take long on large
        unrelated graphs, and large graphs still get bounds only.

    Returns
    -------
    EditDistance
        ``value``, ``lower``, ``upper``, ``exact`` and the node ``mapping`` of the best edit
        path found (``value == upper`` is that path's cost).

    Raises
    ------
    TypeError
        If a graph is directed, a multigraph or not a ``networkx.Graph``, a label is not
        hashable, a cost is not a number, a mapping or a callable (or gives no number), or
        ``time_limit`` is not a number.
    ValueError
        If a node has no label, a graph has a self-loop, a cost is negative or not finite,
        a cost mapping has no entry for a label (pair) of the graphs, ``time_limit`` is
        not positive, or a graph has more than ``MAX_GRAPH_ITEMS`` (2,000,000) nodes plus
        edges.

    See Also
    --------
    edit_distance_bounds : the cheap bounds only.
    gwpred.metrics.exact_match : label isomorphism test.

    Notes
    -----
    Steps, cheapest first; each stops as soon as the lower bound meets the cost of the
    best edit path found:

    1. Label isomorphism (count, degree and label checks, Weisfeiler-Lehman hash [4]_, then
       VF2 from networkx): distance 0.
    2. A lower bound (label multisets; branch bound of [3]_) and the upper bound of the
       bipartite node assignment of Riesen & Bunke [2]_ (see :func:`edit_distance_bounds`).
    3. Local search on node maps (best swap of two images, from the bipartite map) for a
       cheaper edit path. When the costs have a unit q (below) and no node has more than
       five edges, steps 2 and 3 are replaced by a Lagrangian bound of the program of
       step 4 (Lagrangian decomposition [5]_): the cost of every edge substitution is
       split between its two end-node pairs, each node pair matches its edges at those
       costs, and one linear sum assignment over the node pairs gives a lower bound for
       any split. Its first step is a bound of the branch kind; up to 60 subgradient
       steps with Polyak's step size [6]_ improve the split, and every assignment is an
       edit path whose cost (after a local search when it is within 2 q of the best)
       improves the upper bound. Its best value is the linear relaxation of step 4, so
       on most molecule pairs it proves the distance without a linear program.
    4. The linear relaxation of the binary linear program F2 of Lerouge et al. [1]_
       (HiGHS's dual simplex through ``scipy.optimize.milp``, or its interior point method
       through ``scipy.optimize.linprog`` for large programs): a lower bound, and a node
       map rounded from its solution as a start for the local search; then local search
       from a few seeded random maps. With a cost unit q the dual simplex stops as soon as
       its objective (a proven bound) reaches the best path's cost minus 0.9 q, which
       proves that path optimal.
    5. The binary linear program itself with ``scipy.optimize.milp`` (HiGHS), restricted
       to edit paths cheaper than the best one found. Edge variables exist only for edge
       pairs whose substitution is cheaper than deletion plus insertion, and are
       continuous: integral node variables force them to 0 or 1.

    Label-dependent costs (mappings or callables) are evaluated once per call for the
    labels present. The cheap lower bound then pairs labels by assignment problems
    instead of counting them, and edge substitution costs at most deletion plus
    insertion, label by label.

    When every cost is a whole multiple of one unit q (e.g. unit costs, or 0.25 and 1.5),
    every edit distance is a multiple of q, so lower bounds are rounded up to a multiple of
    q, and the integer program only has to rule out paths cheaper by q or more. Other costs
    (e.g. 0.1, which floats do not hold exactly) rely on HiGHS's optimality, up to its
    tolerances (about 1e-6).

    An edge substitution costs ``min(edge_sub_cost, edge_del_cost + edge_ins_cost)``, since
    an edit path may delete and re-insert an edge instead (networkx does the same).

    **Large graphs.** The steps above need matrices of :math:`(n_1 + n_2)^2` entries, and
    the program of step 4 has :math:`n_1 n_2` node variables and one edge variable pair per
    pair of edges, so their time and memory grow much faster than the graphs. The limits,
    with what happens beyond them:

    - More than 1000 nodes in all (``DENSE_NODES``): steps 3-5 are skipped and the result
      is a pair of bounds (``exact=False`` unless they meet). The lower bound is the label
      multiset bound, with the edge part raised to a degree bound (each edge deletion or
      insertion changes two degrees; sorted degree sequences pair at least cost); the
      upper bound is the edit path of an anchored node map: nodes of equal colour after
      three rounds of Weisfeiler-Lehman refinement [4]_ are paired, starting from colours
      unique in both graphs and growing along the edges. Both take time and memory in
      O((n + m) log(n + m)); on two 5000-node graphs about 0.15 s and 15 MB. Up to 4000
      nodes in all, the bounds of step 2 are added when the time left allows their
      assignments (estimated as 0.2 s at 1000 nodes, growing as the cube: 1.7 s at 2000).
    - Label isomorphism of graphs of more than 50 nodes is tested by colour refinement and
      individualisation (a candidate node map checked edge by edge) instead of VF2, which
      took over 3 minutes on two copies of a 5000-node graph (0.1 s now); with a time
      limit it gets half of it, the bounds the rest.
    - Programs with more than 500,000 edge pairs (``MAX_PROGRAM_PAIRS``, about 0.5 GB to
      build) are never built; with a time limit, a program is built only when building it
      and handing it to HiGHS (measured at about 4 microseconds per entry, assumed 8) fit
      in the time left.
    - A graph of more than 2,000,000 nodes plus edges (``MAX_GRAPH_ITEMS``) is refused
      with a ValueError: the linear-size bounds alone would need more than 1 GB (about
      270 bytes per node or edge), besides the networkx graphs.

    Graphs of up to 50 nodes each (sparse ones, such as molecules) are below every limit:
    they take steps 1-5 as described.

    References
    ----------
    .. [1] J. Lerouge, Z. Abu-Aisheh, R. Raveaux, P. Héroux and S. Adam, "New binary linear
       programming formulation to compute the graph edit distance", Pattern Recognition 72,
       254-265, 2017.
    .. [2] K. Riesen and H. Bunke, "Approximate graph edit distance computation by means of
       bipartite graph matching", Image and Vision Computing 27(7), 950-959, 2009.
    .. [3] D. B. Blumenthal and J. Gamper, "Improved lower bounds for graph edit distance",
       IEEE Transactions on Knowledge and Data Engineering 30(3), 503-516, 2018.
    .. [4] N. Shervashidze, P. Schweitzer, E. J. van Leeuwen, K. Mehlhorn and
       K. M. Borgwardt, "Weisfeiler-Lehman graph kernels", Journal of Machine Learning
       Research 12, 2539-2561, 2011.
    .. [5] M. Guignard and S. Kim, "Lagrangean decomposition: a model yielding stronger
       Lagrangean bounds", Mathematical Programming 39, 215-228, 1987.
    .. [6] B. T. Polyak, "Minimization of unsmooth functionals", USSR Computational
       Mathematics and Mathematical Physics 9(3), 14-29, 1969.

    Examples
    --------
    >>> import networkx as nx
    >>> p, c = nx.path_graph(4), nx.cycle_graph(4)
    >>> nx.set_node_attributes(p, "C", "label")
    >>> nx.set_node_attributes(c, "C", "label")
    >>> r = edit_distance(p, c)
    >>> r.value, r.exact
    (1.0, True)
    """
    time_limit = _check_time_limit(time_limit)
    t0 = time.perf_counter()
    a, b, costs = prepare(
        g1,
        g2,
        node_label,
        edge_label,
        dict(
            node_del_cost=node_del_cost,
            node_ins_cost=node_ins_cost,
            node_sub_cost=node_sub_cost,
            edge_del_cost=edge_del_cost,
            edge_ins_cost=edge_ins_cost,
            edge_sub_cost=edge_sub_cost,
        ),
    )
    deadline = None if time_limit is None else t0 + time_limit

    def remaining() -> float | None:
        return None if deadline is None else deadline - time.perf_counter()

    # Large graphs that look alike may need a long isomorphism search: it gets half of
    # the time, the bounds the rest (graphs of up to SMALL_NODES nodes ignore it).
    iso = isomorphism(a, b, None if time_limit is None else t0 + 0.5 * time_limit)
    if iso is not None:
        image = np.array([iso[i] for i in range(len(a.nodes))], dtype=np.intp)
        return EditDistance(0.0, 0.0, 0.0, True, mapping_dict(a, b, image))

    n1, n2 = len(a.nodes), len(b.nodes)
    path_cost = PathCost(a, b, costs)
    if n1 + n2 > DENSE_NODES:
        return _result(*_large_bounds(a, b, costs, path_cost, deadline), a, b)
    # With a cost unit and small stars, the Lagrangian step replaces the cheap bounds: its
    # first step is a bound of the same kind, and it goes on from there.
    stars = star_decomposition(a, b, costs) if costs.unit is not None else None
    if stars is None:
        lower, upper, image = cheap_bounds(a, b, costs, path_cost, deadline)
    else:
        lower, upper, image = round_lower(label_bound(a, b, costs), costs, False), math.inf, None
    if stars is not None or not closed(lower, upper):
        # the local search's padded graphs only where it runs (3 (n1 + n2)**2 entries)
        pad = padded(a, b, costs) if n1 + n2 <= MAX_SEARCH_NODES else None

        def consider(candidate: NDArray[np.intp] | None) -> None:
            nonlocal upper, image
            if candidate is None:
                return
            candidate = local_search(pad, candidate, deadline=deadline)
            cost = path_cost(candidate)
            if cost < upper:
                upper, image = cost, candidate

        # Random starts of the local search, seeded so that results are reproducible.
        rng = np.random.default_rng(0)

        def restarts(count: int) -> None:
            for _ in range(count):
                left = remaining()
                if closed(lower, upper) or (left is not None and left <= 0):
                    return
                start = rng.permutation(n1 + n2)[:n1]
                consider(np.where(start < n2, start, -1).astype(np.intp))

        if stars is not None:
            lower, upper, image, _ = lagrangian(
                stars, pad, path_cost, costs, lower, upper, image, deadline
            )
        else:
            consider(image)
        restarts(_RESTARTS_FIRST)
        entries = _program_entries(a, b, costs)
        if not closed(lower, upper) and entries is not None and _program_fits(entries, remaining()):
            prog = program(a, b, costs)
            left = remaining()
            if left is not None:
                left -= entries * _PROGRAM_HANDOFF_SECONDS  # spent outside HiGHS's clock
            lp_seconds = 0.0
            if left is None or left > 0:
                started = time.perf_counter()
                bound, candidate = relaxation(prog, n1, n2, left, stop_at(upper, costs))
                lp_seconds = time.perf_counter() - started
                lower = max(lower, round_lower(bound, costs))
                consider(candidate)
            restarts(_RESTARTS_SECOND)
            left = remaining()
            if left is not None:
                # HiGHS checks its clock between the steps of the integer program, and its
                # first step re-solves the relaxation: keep 1.5 times the time of one
                # relaxation in reserve (overruns of up to 1.15 times it were measured on
                # 25-35-node graphs), and the hand-off time.
                left -= 1.5 * lp_seconds + entries * _PROGRAM_HANDOFF_SECONDS
            if not closed(lower, upper) and (left is None or left > 0):
                outcome = solve_milp(prog, n1, n2, costs, upper, left)
                if outcome.image is not None:
                    cost = path_cost(outcome.image)
                    if cost < upper:
                        upper, image = cost, outcome.image
                    # Without a cost unit, trust HiGHS's zero-gap optimum up to its
                    # feasibility tolerances when its path costs what it reported.
                    if cost <= outcome.optimal + 1e-6 * max(1.0, abs(outcome.optimal)):
                        lower = upper
                lower = max(lower, round_lower(outcome.lower, costs))
    return _result(lower, upper, image, a, b)


def _large_bounds(
    a: Labeled, b: Labeled, costs: Costs, path_cost: PathCost, deadline: float | None
) -> tuple[float, float, NDArray[np.intp]]:
    """Bounds of a pair of more than ``DENSE_NODES`` nodes, and the best node map found.

    The linear-size bounds first; then, when they do not meet and the pair is small
    enough for the time left (see :func:`_dense_fits`), the cheap bounds as well.
    """
    lower, upper, image = linear_bounds(a, b, costs, path_cost, deadline)
    left = None if deadline is None else deadline - time.perf_counter()
    if not closed(lower, upper) and _dense_fits(len(a.nodes) + len(b.nodes), left):
        low, up, other = cheap_bounds(a, b, costs, path_cost, deadline, anchor=image)
        lower = max(lower, low)
        if up < upper:
            upper, image = up, other
    return lower, upper, image


def _dense_fits(nodes: int, left: float | None) -> bool:
    """Whether the cheap bounds' assignments of ``nodes`` (n1 + n2) nodes fit memory and time."""
    if nodes > MAX_DENSE_BOUND_NODES:
        return False
    return left is None or _DENSE_SECONDS_AT_1000 * (nodes / 1000) ** 3 <= left


def _program_entries(a: Labeled, b: Labeled, costs: Costs) -> int | None:
    """n1 * n2 + edge pairs of the binary program, or None above ``MAX_PROGRAM_PAIRS`` pairs."""
    pairs = program_pairs(a, b, costs)
    return None if pairs > MAX_PROGRAM_PAIRS else len(a.nodes) * len(b.nodes) + pairs


def _program_fits(entries: int, left: float | None) -> bool:
    """Whether to build the binary program: it fits memory and, likely, the time left.

    With a time limit, building it and handing it to HiGHS and back must take (at the
    per-entry times above) less than the time left.
    """
    setup = entries * (_PROGRAM_BUILD_SECONDS + _PROGRAM_HANDOFF_SECONDS)
    return left is None or setup < left


def _result(
    lower: float, upper: float, image: NDArray[np.intp] | None, a: Labeled, b: Labeled
) -> EditDistance:
    """The EditDistance of the bounds and the best node map found."""
    exact = closed(lower, upper)
    lower = upper if exact else min(lower, upper)
    return EditDistance(
        value=float(upper),
        lower=float(lower),
        upper=float(upper),
        exact=bool(exact),
        mapping=mapping_dict(a, b, image),
    )

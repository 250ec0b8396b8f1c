"""The binary linear program F2 of the edit distance: its linear relaxation and its solution.

:func:`program` builds it (:class:`Program`), :func:`relaxation` solves its linear
relaxation and :func:`solve_milp` the integer program itself, both with HiGHS through
scipy.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass
from typing import Any

import numpy as np
from numpy.typing import NDArray
from scipy.optimize import Bounds, LinearConstraint, linprog, milp
from scipy.sparse import csc_array

from ._bounds import assign
from ._costs import Costs, Labeled, delete_all, edge_saving, node_saving

__all__ = [
    "MilpOutcome",
    "Program",
    "program",
    "program_pairs",
    "relaxation",
    "solve_milp",
    "variable_bounds",
]


@dataclass(frozen=True)
class Program:
    r"""The binary linear program F2 of Lerouge et al. (2017), for undirected graphs.

    Variables: :math:`x_{ik} \in \{0,1\}` (node i of the first graph substituted by node k
    of the second) and :math:`y_{ef}^o \in [0,1]` (edge e = (i, j) substituted by edge
    f = (k, l) in orientation o: o = 0 sends i to k and j to l, o = 1 sends i to l and j to
    k). With :math:`C_0 = n_1 c_{nd} + n_2 c_{ni} + m_1 c_{ed} + m_2 c_{ei}` (delete and
    insert everything), minimise

    .. math::
        C_0 + \sum_{ik} (c_{ik} - c_{nd} - c_{ni}) x_{ik}
            + \sum_{efo} (c_{ef} - c_{ed} - c_{ei}) y_{ef}^o

    subject to :math:`\sum_k x_{ik} \le 1`, :math:`\sum_i x_{ik} \le 1`, and, for every end
    node u of an edge e of the first graph and every node v of the second graph,
    :math:`\sum_{(f, o) : u \to v} y_{ef}^o \le x_{uv}` (the edge moves with its end
    node), and the same for every end node v of an edge f of the second graph and every
    node u of the first graph: :math:`\sum_{(e, o) : u \to v} y_{ef}^o \le x_{uv}`. For
    integral x these rows allow :math:`y_{ef}^o = 1` only when both end nodes of e are sent
    onto those of f in orientation o, so y needs no integrality. Only pairs (e, f) whose
    substitution is cheaper than deletion plus insertion get y variables; the last variable
    is fixed to 1 and carries :math:`C_0`, so that the objective equals the edit cost.
    """

    c: NDArray[np.float64]
    matrix: Any  # scipy.sparse.csc_array of the rows above (HiGHS takes columns)
    ub: NDArray[np.float64]
    n_x: int
    n_vars: int


def program_pairs(a: Labeled, b: Labeled, costs: Costs) -> int:
    """Number of edge pairs (e, f) that get y variables in :func:`program`, counted by label.

    O(m1 + m2 + E**2) for E edge labels, without building the (m1, m2) matrix.
    """
    k = len(costs.edge_del_t)
    count_a = np.bincount(costs.edge_a, minlength=k).astype(np.int64)
    count_b = np.bincount(costs.edge_b, minlength=k).astype(np.int64)
    saves = costs.edge_sub_t - costs.edge_del_t[:, None] - costs.edge_ins_t[None, :] < 0
    return int(count_a @ saves.astype(np.int64) @ count_b)


def program(a: Labeled, b: Labeled, costs: Costs) -> Program:
    n1, n2 = len(a.nodes), len(b.nodes)
    m1, m2 = len(a.edges), len(b.edges)
    const = delete_all(costs)
    c_x = node_saving(costs).ravel()
    n_x = n1 * n2
    # y variables: edge pairs (e, f) whose substitution saves cost, two orientations each.
    saving = edge_saving(costs)
    e_idx, f_idx = np.nonzero(saving < 0)
    n_pairs = len(e_idx)
    ea = np.asarray(a.edges, dtype=np.intp).reshape(m1, 2)
    eb = np.asarray(b.edges, dtype=np.intp).reshape(m2, 2)
    i_e, j_e = ea[e_idx, 0], ea[e_idx, 1]
    k_f, l_f = eb[f_idx, 0], eb[f_idx, 1]
    var0 = n_x + 2 * np.arange(n_pairs)  # orientation 0: i -> k, j -> l
    var1 = var0 + 1  # orientation 1: i -> l, j -> k
    y_var = np.concatenate([var0, var0, var1, var1])
    y_u = np.concatenate([i_e, j_e, i_e, j_e])
    y_v = np.concatenate([k_f, l_f, l_f, k_f])
    y_e = np.tile(e_idx, 4)
    y_f = np.tile(f_idx, 4)
    c_y = np.repeat(saving[e_idx, f_idx], 2)
    n_vars = n_x + 2 * n_pairs + 1

    # Rows 0..n1-1: a node of the first graph has at most one image; rows n1..n1+n2-1: a
    # node of the second graph has at most one preimage.
    grid = np.arange(n_x)
    rows = [grid // n2, n1 + grid % n2]
    cols = [grid, grid]
    vals = [np.ones(n_x), np.ones(n_x)]
    n_rows = n1 + n2
    # Then one row per (edge of one graph, u, v): the y's that send u to v along that edge
    # are at most x_uv (an edge moves with its end nodes).
    for owner in (y_e, y_f):
        keys, inverse = np.unique(owner * n_x + y_u * n2 + y_v, return_inverse=True)
        rows += [n_rows + inverse.ravel(), n_rows + np.arange(len(keys))]
        cols += [y_var, keys % n_x]
        vals += [np.ones(len(y_var)), -np.ones(len(keys))]
        n_rows += len(keys)
    ub = np.zeros(n_rows)
    ub[: n1 + n2] = 1.0
    matrix = csc_array(
        (np.concatenate(vals), (np.concatenate(rows), np.concatenate(cols))),
        shape=(n_rows, n_vars),
    )
    c = np.concatenate([c_x, c_y, [const]])
    return Program(c, matrix, ub, n_x, n_vars)


def variable_bounds(prog: Program) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """Lower and upper bounds of the program's variables (0 and 1; the constant fixed to 1)."""
    lo = np.zeros(prog.n_vars)
    lo[-1] = 1.0  # the constant C0
    return lo, np.ones(prog.n_vars)


def _round_x(x: NDArray[np.float64], n1: int, n2: int) -> NDArray[np.intp]:
    """Node map that keeps the most of a (fractional) solution's x mass."""
    x = np.clip(x.reshape(n1, n2), 0.0, 1.0)
    return assign(-x, -(1.0 - x.sum(axis=1)), -(1.0 - x.sum(axis=0)))


def relaxation(
    prog: Program,
    n1: int,
    n2: int,
    time_limit: float | None,
    stop_at: float | None = None,
) -> tuple[float, NDArray[np.intp] | None]:
    """Lower bound from the linear relaxation and a node map rounded from its solution.

    With ``stop_at``, HiGHS's dual simplex may stop as soon as its objective (a proven
    lower bound on the relaxation's optimum) reaches ``stop_at``: the bound returned is
    then ``stop_at`` and there is no node map. Otherwise the bound is the optimum.
    """
    lo, hi = variable_bounds(prog)
    # Presolve costs more than it saves on these small programs (measured on QM9 pairs).
    options: dict[str, Any] = {"presolve": False}
    if time_limit is not None:
        options["time_limit"] = time_limit
    if prog.n_vars <= 1000:
        if stop_at is not None and math.isfinite(stop_at):
            # HiGHS option: "objective bound for termination of the dual simplex".
            options["objective_bound"] = stop_at
        # Small programs: HiGHS's simplex through milp without integer variables, whose
        # input checks cost less than linprog's (about 0.5 ms against 1.3 ms per call,
        # measured), which matters when the whole edit distance takes a few ms.
        with warnings.catch_warnings():
            # scipy passes options it does not know (objective_bound) on to HiGHS
            # verbatim, with a RuntimeWarning saying so.
            warnings.filterwarnings("ignore", "Unrecognized options", RuntimeWarning)
            res = milp(
                prog.c,
                bounds=Bounds(lo, hi),
                constraints=[LinearConstraint(prog.matrix, -np.inf, prog.ub)],
                options=options,
            )
        if "objective_bound" in options and "Bound on objective reached" in str(res.message):
            return float(stop_at), None
    else:
        # interior point is faster than the simplex on larger programs
        res = linprog(
            prog.c,
            A_ub=prog.matrix,
            b_ub=prog.ub,
            bounds=np.column_stack([lo, hi]),
            method="highs-ipm",
            options=options,
        )
    if res.status != 0 or res.x is None:
        return -math.inf, None
    return float(res.fun), _round_x(np.asarray(res.x[: prog.n_x]), n1, n2)


@dataclass(frozen=True)
class MilpOutcome:
    image: NDArray[np.intp] | None  # a node map cheaper than the cutoff, or None
    lower: float  # proven lower bound on the edit distance (may be -inf)
    optimal: float  # objective of a solution proven optimal (gap 0), else nan


def solve_milp(
    prog: Program,
    n1: int,
    n2: int,
    costs: Costs,
    upper: float,
    time_limit: float | None,
) -> MilpOutcome:
    """Search for an edit path cheaper than ``upper`` with HiGHS.

    With a cost unit q the objective is capped at ``upper - q`` (only strictly better
    paths are sought; infeasibility proves ``upper`` optimal) and the relative gap
    tolerance is set so that the absolute gap at stop is below q. Without a unit the cap
    is ``upper`` and the gap tolerance is 0.
    """
    q = costs.unit
    cutoff = upper - q if q is not None else upper
    cutoff += 1e-7 * max(1.0, abs(upper))
    gap = 0.999 * q / max(1.0, upper) if q is not None else 0.0
    # Presolve and primal heuristics cost more than they save on these small programs
    # whose good solutions the local search has already found (measured on QM9 pairs).
    options: dict[str, Any] = {
        "disp": False,
        "mip_rel_gap": gap,
        "presolve": False,
        "mip_heuristic_effort": 0.0,
    }
    if time_limit is not None:
        options["time_limit"] = time_limit
    integrality = np.zeros(prog.n_vars)
    integrality[: prog.n_x] = 1
    lo, hi = variable_bounds(prog)
    with warnings.catch_warnings():
        # scipy passes options it does not know (mip_heuristic_effort) on to HiGHS
        # verbatim, with a RuntimeWarning saying so.
        warnings.filterwarnings("ignore", "Unrecognized options", RuntimeWarning)
        res = milp(
            prog.c,
            integrality=integrality,
            bounds=Bounds(lo, hi),
            constraints=[
                LinearConstraint(prog.matrix, -np.inf, prog.ub),
                LinearConstraint(prog.c.reshape(1, -1), -np.inf, cutoff),
            ],
            options=options,
        )
    if res.status == 2:
        # No path cheaper than the cap: with a unit, `upper` is optimal.
        return MilpOutcome(None, upper if q is not None else -math.inf, math.nan)
    image = None
    if res.x is not None:
        image = _round_x(np.asarray(res.x[: prog.n_x]), n1, n2)
    dual = getattr(res, "mip_dual_bound", None)
    lower = float(dual) if dual is not None and math.isfinite(float(dual)) else -math.inf
    optimal = math.nan
    if res.status == 0 and res.x is not None and q is None:
        optimal = float(res.fun)  # optimal with zero gap tolerance
    # Bounds of the capped program hold for the edit distance only below the cap.
    return MilpOutcome(image, min(lower, upper), optimal)

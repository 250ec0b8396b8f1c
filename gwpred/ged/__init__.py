r"""The exact graph edit distance (GED) between two labeled graphs.

A labeled graph here is an undirected, simple :class:`networkx.Graph` whose nodes carry a
categorical label (any hashable value, e.g. an element symbol) and whose edges may carry a
categorical label (e.g. a bond order 1/2/3). An edge without the label attribute counts as
one more edge type, ``None``.

The graph edit distance is NP-hard. :func:`edit_distance` first tries cheap answers
(label isomorphism, lower bound equal to upper bound) and only then solves a binary linear
program with HiGHS; pass ``time_limit`` to bound the cost of a call. Pairs of more than
1000 nodes in all get bounds only (see "Large graphs" in :func:`edit_distance`).
:func:`edit_distance_bounds` returns only the cheap bounds.

The solver proceeds by steps, cheapest first, each in its own module, and stops as soon
as a proven lower bound meets the cost of the best edit path found (see the Notes of
:func:`edit_distance`):

- ``_costs``: validated cost arguments, cost tables and cost unit, graphs in index form;
- ``_colors``: joint colour refinement (Weisfeiler-Lehman) of both graphs;
- ``_isomorphism``: label isomorphism (distance 0);
- ``_anchor``: a node map grown from anchors along edges, for large graphs;
- ``_bounds``: cheap lower bounds and the bipartite upper bound (linear sum assignments),
  and bounds whose cost grows with n + m only, for large graphs;
- ``_search``: cost of the edit path of a node map, and a local search over node maps;
- ``_lagrangian``: a Lagrangian lower bound by star problems per node pair;
- ``_programs``: the binary linear program, its linear relaxation and its solution;
- ``_solve``: the public functions that run these steps.
"""

from __future__ import annotations

from ._solve import EditDistance, edit_distance, edit_distance_bounds

__all__ = ["EditDistance", "edit_distance", "edit_distance_bounds"]

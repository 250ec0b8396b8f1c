r"""Fingerprint search: edit a prediction until its Morgan fingerprint matches the input.

When every input row is the Morgan fingerprint of its molecule (bits or counts,
as :func:`gwpred.chem.morgan_fingerprints` computes them), a predicted molecule
can be checked against its own input, and improved.  The search starts from the
ordinary prediction and the ``n_starts`` highest-weight training molecules of the
input and keeps a beam of the ``width`` molecules whose fingerprints are most
similar to the input (Tanimoto on bits; on counts, :math:`\sum\min/\sum\max`).
Each round expands the beam by every valid single edit of its members:

* an atom relabelled (element and charge, among the training labels);
* a bond order raised or lowered by one (a bond made or broken);
* an atom added as a leaf, with a bond of order 1-3;
* a leaf atom removed; a chain atom removed and its two neighbours joined;
* an atom inserted into a bond.

With a formula, the moves keep its atoms and, when it gives hydrogens, the total
bond order: two atoms of different labels swapped; one bond order up and one
down at a bond of the same atoms (ring closing and opening, bond shifts); one
bond order up or down when the hydrogens are free.  The search then starts from
the formula's decoding alone.

Edits touch only the atoms behind the bits the molecule sets and the input does
not (all atoms when there are none), so a round stays small at 50 atoms.  Every
member is sanitized by RDKit, so every result is a valid molecule; graphs stay
connected.  Ties in similarity go to the size closer to the ordinary
prediction's (the voted size: Morgan bits do not count repeated groups), then to
the member found first.  The search is deterministic: it stops when a round adds
nothing to the beam, when a member's fingerprint equals the input, after
``MAX_ROUNDS`` rounds, or after ``max_evaluations`` fingerprints.

A molecule whose fingerprint equals the input's is still a hypothesis: Morgan
fingerprints can collide, and bits do not count repeats.
"""

from __future__ import annotations

import hashlib
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from typing import Any

import networkx as nx
import numpy as np
from numpy.typing import NDArray
from scipy.sparse.csgraph import connected_components

from ..chem import mol_from_arrays, morgan_of_mol, rdkit_modules
from ..codec import LabelSpace, TrainingSet

__all__ = [
    "MAX_ROUNDS",
    "MIN_SHARE",
    "MorganSpec",
    "SearchResult",
    "find_morgan_spec",
    "fingerprint_search",
    "graph_arrays",
    "result_graph",
    "search_rows",
    "search_starts",
    "training_arrays",
]

#: Rounds of beam expansion at most per input.
MAX_ROUNDS = 40

#: Share of the checked training rows that must equal the fingerprints of their graphs.
MIN_SHARE = 0.9

#: Radii tried, in this order, to explain the training inputs as Morgan fingerprints.
RADII = (2, 1, 3)


@dataclass(frozen=True)
class MorganSpec:
    """How the inputs were made from the molecules (``gwpred.chem.morgan_fingerprints``'s arguments)."""

    radius: int
    n_bits: int
    counts: bool


@dataclass(frozen=True)
class SearchResult:
    """The best molecule a search found, as arrays.

    Attributes
    ----------
    classes : ndarray of int, shape (n,)
        Node label index per atom.
    orders : ndarray of int, shape (n, n)
        Symmetric bond-order matrix.
    similarity : float
        Tanimoto similarity of its fingerprint to the input (1: equal).
    start_similarity : float
        The same for the ordinary prediction (the first start).
    evaluations : int
        Fingerprints computed.
    """

    classes: NDArray[np.int64]
    orders: NDArray[np.int64]
    similarity: float
    start_similarity: float
    evaluations: int


def find_morgan_spec(
    X: NDArray[Any], molecule: Callable[[int], tuple[Sequence[str], NDArray[np.int64]]], n_check: int = 100
) -> tuple[MorganSpec | None, str]:
    """Whether the rows of ``X`` are the Morgan fingerprints of their molecules, and with which radius.

    Parameters
    ----------
    X : ndarray of shape (n, n_bits)
        Training inputs.
    molecule : callable
        ``molecule(i)`` gives training molecule ``i`` as (atom labels, bond-order
        matrix), the labels as :func:`gwpred.chem.mol_from_arrays` reads them.
    n_check : int, default=100
        Rows checked (evenly spaced over ``X``).

    Returns
    -------
    spec : MorganSpec or None
        The radius of 2, 1, 3 (bits or counts, ``n_bits = X.shape[1]``) that
        reproduces the most checked rows exactly, the first on ties, if it
        reproduces at least :data:`MIN_SHARE` of them; else None.  (On very
        small molecules two radii can give the same fingerprints.)
    why : str
        Empty when every checked row matches; else how many differ and the
        first of them (in how many positions, or that its graph is no
        molecule RDKit accepts: charges kept outside the node labels, say),
        for a warning or an error message.

    Examples
    --------
    >>> from gwpred.chem import morgan_fingerprints
    >>> O = np.zeros((6, 6), dtype=int)  # butanoic acid, C-C-C-C(=O)-O
    >>> for i, j, o in [(0, 1, 1), (1, 2, 1), (2, 3, 1), (3, 4, 2), (3, 5, 1)]:
    ...     O[i, j] = O[j, i] = o
    >>> X = morgan_fingerprints(["CCCC(=O)O"], radius=1, n_bits=256)
    >>> find_morgan_spec(X, lambda i: (["C", "C", "C", "C", "O", "O"], O))
    (MorganSpec(radius=1, n_bits=256, counts=False), '')
    """
    rows = np.unique(np.linspace(0, len(X) - 1, min(n_check, len(X))).round().astype(np.int64))
    sample = np.asarray(X[rows], dtype=np.float64)
    if sample.size == 0 or not np.all(np.isfinite(sample)) or sample.min() < 0 or not np.all(sample == np.round(sample)):
        return None, "X holds negative, fractional or non-finite values"
    counts = bool(sample.max() > 1)
    _, rdBase = rdkit_modules("find_morgan_spec")
    with rdBase.BlockLogs():
        mols = [mol_from_arrays(*molecule(r)) for r in rows.tolist()]  # None: RDKit refuses it
    best: tuple[int, int, NDArray[np.bool_]] | None = None
    for radius in RADII:
        same = np.array([m is not None and bool(np.array_equal(
            morgan_of_mol(m, radius=radius, n_bits=X.shape[1], counts=counts)[0], x)) for m, x in zip(mols, sample)])
        if best is None or same.sum() > best[1]:
            best = (radius, int(same.sum()), same)
    radius, n_same, same = best  # type: ignore[misc]
    kind = "counts" if counts else "bits"
    why = ""
    if n_same < len(rows):
        d = int(np.flatnonzero(~same)[0])
        r = int(rows[d])
        if mols[d] is None:
            first = f"training graph {r}, as the model reads it, is not a molecule RDKit accepts"
        else:
            got = morgan_of_mol(mols[d], radius=radius, n_bits=X.shape[1], counts=counts)[0]
            first = (f"row {r} of X differs from the radius-{radius} Morgan {kind} of its graph in "
                     f"{int((got != sample[d]).sum())} of {X.shape[1]} positions")
        why = f"{len(rows) - n_same} of {len(rows)} checked rows differ; the first: {first}"
    if n_same < MIN_SHARE * len(rows):
        return None, why
    return MorganSpec(radius, int(X.shape[1]), counts), why


def graph_arrays(
    g: nx.Graph, labels: LabelSpace, orders: Sequence[int] | NDArray[np.int64]
) -> tuple[NDArray[np.int64], NDArray[np.int64]]:
    """Node label indices and bond-order matrix (``orders``: bond order per edge label) of a graph
    with nodes ``0..n-1``, labeled as ``labels`` (a prediction)."""
    index = {v: i for i, v in enumerate(labels.node_labels_)}
    edge_index = {v: i for i, v in enumerate(labels.edge_labels_)}
    n = g.number_of_nodes()
    cls = np.array([index[g.nodes[v][labels.node_label]] for v in range(n)], dtype=np.int64)
    O = np.zeros((n, n), dtype=np.int64)
    for u, v, d in g.edges(data=True):
        lab = d.get(labels.edge_label) if labels.edge_label is not None else None
        O[u, v] = O[v, u] = orders[edge_index.get(lab, 0)]
    return cls, O


def training_arrays(training: TrainingSet, i: int, orders: Sequence[int]) -> tuple[NDArray[np.int64], NDArray[np.int64]]:
    """Node label indices and bond-order matrix of training graph ``i``."""
    edges, classes = training.edge_list(i)
    n = int(training.sizes[i])
    O = np.zeros((n, n), dtype=np.int64)
    if len(edges):
        O[edges[:, 0], edges[:, 1]] = np.asarray(orders, dtype=np.int64)[classes]
        O[edges[:, 1], edges[:, 0]] = O[edges[:, 0], edges[:, 1]]
    return training.node_classes(i).astype(np.int64), O


def search_starts(
    graphs: Sequence[nx.Graph],
    formulas: Sequence[Any],
    indices: NDArray[np.int64],
    weights: NDArray[np.float64],
    training: TrainingSet,
    orders: Sequence[int],
    n_starts: int,
) -> tuple[list[list[tuple[NDArray[np.int64], NDArray[np.int64]]]], list[str]]:
    """Per input, the search's starts and its ``formula`` mode (see :func:`fingerprint_search`).

    Without a formula: the prediction and the ``n_starts`` highest-weight kept
    training graphs.  With one (a :class:`~gwpred.formula.Formula`): the
    formula's decoding alone, searched with moves that keep the heavy atoms
    and, when it gives them, the hydrogens.
    """
    starts, kinds = [], []
    for r, g in enumerate(graphs):
        start = [graph_arrays(g, training.labels, orders)]
        f = formulas[r]
        if f is None:
            by_weight = indices[r][np.argsort(-weights[r], kind="stable")[:n_starts]]
            start += [training_arrays(training, int(i), orders) for i in by_weight]
            kinds.append("")
        else:
            kinds.append("atoms" if f.hydrogens is None else "atoms+hydrogens")
        starts.append(start)
    return starts, kinds


def result_graph(result: SearchResult, prediction: nx.Graph, labels: LabelSpace, orders: Sequence[int]) -> nx.Graph:
    """The search's molecule as a graph with ``graph["fingerprint_similarity"]``; the prediction
    itself (with its notes) when the search kept it."""
    cls, O = graph_arrays(prediction, labels, orders)
    if np.array_equal(cls, result.classes) and np.array_equal(O, result.orders):
        g = prediction
    else:
        order_class = {int(o): c for c, o in enumerate(orders)}
        iu, ju = np.nonzero(np.triu(result.orders, 1))
        g = labels.build_graph(result.classes.tolist(), list(zip(iu.tolist(), ju.tolist())),
                               [order_class[int(o)] for o in result.orders[iu, ju]])
    g.graph["fingerprint_similarity"] = float(result.similarity)
    return g


def _similarity(a: NDArray[np.int64], b: NDArray[np.int64]) -> float:
    top = np.maximum(a, b).sum()
    return float(np.minimum(a, b).sum() / top) if top else 1.0


def _digest(*parts: bytes) -> bytes:
    """16 bytes standing for ``parts`` (the search remembers up to tens of thousands of molecules)."""
    h = hashlib.blake2b(digest_size=16)
    for part in parts:
        h.update(len(part).to_bytes(8, "little"))
        h.update(part)
    return h.digest()


def _hydrogens(mol: Any) -> int:
    return sum(atom.GetTotalNumHs() for atom in mol.GetAtoms())


def _connected(O: NDArray[np.int64]) -> bool:
    return len(O) <= 1 or connected_components(O > 0, directed=False)[0] == 1


def _edits(
    cls: NDArray[np.int64], O: NDArray[np.int64], focus: list[int], valences: NDArray[np.int64]
) -> list[tuple[NDArray[np.int64], NDArray[np.int64]]]:
    """Single edits touching the ``focus`` atoms (see the module text), valences capped by ``valences``."""
    n = len(cls)
    load = O.sum(1)
    free = valences[cls] - load
    labels = range(len(valences))
    out: list[tuple[NDArray[np.int64], NDArray[np.int64]]] = []
    inside = set(focus)
    for a in focus:
        for lab in labels:  # relabel
            if lab != cls[a] and load[a] <= valences[lab]:
                c = cls.copy()
                c[a] = lab
                out.append((c, O))
        for b in range(n):  # one bond order up or down
            if b == a or (b in inside and b < a):
                continue
            if O[a, b] < 3 and free[a] > 0 and free[b] > 0:
                M = O.copy()
                M[a, b] += 1
                M[b, a] += 1
                out.append((cls, M))
            if O[a, b] > 0:
                M = O.copy()
                M[a, b] -= 1
                M[b, a] -= 1
                if M[a, b] or _connected(M):
                    out.append((cls, M))
        for lab in labels:  # a new leaf atom
            for o in range(1, min(3, int(free[a]), int(valences[lab])) + 1):
                M = np.zeros((n + 1, n + 1), dtype=np.int64)
                M[:n, :n] = O
                M[a, n] = M[n, a] = o
                out.append((np.append(cls, lab), M))
        nb = np.flatnonzero(O[a])
        keep = np.array([v for v in range(n) if v != a], dtype=np.int64)
        if len(nb) == 1 and n > 1:  # remove a leaf
            out.append((cls[keep], O[np.ix_(keep, keep)]))
        if len(nb) == 2 and O[nb[0], nb[1]] == 0:  # remove a chain atom, join its neighbours
            M = O.copy()
            M[nb[0], nb[1]] = M[nb[1], nb[0]] = 1
            out.append((cls[keep], M[np.ix_(keep, keep)]))
        for b in nb.tolist():  # insert an atom into the bond a-b
            if b in inside and b < a:
                continue
            for lab in labels:
                if valences[lab] < 2:
                    continue
                M = np.zeros((n + 1, n + 1), dtype=np.int64)
                M[:n, :n] = O
                M[a, b] = M[b, a] = 0
                M[a, n] = M[n, a] = M[b, n] = M[n, b] = 1
                out.append((np.append(cls, lab), M))
    return out


def _formula_edits(
    cls: NDArray[np.int64], O: NDArray[np.int64], focus: list[int], valences: NDArray[np.int64], fixed_total: bool
) -> list[tuple[NDArray[np.int64], NDArray[np.int64]]]:
    """Single edits touching the ``focus`` atoms that keep the atoms (a formula's heavy atoms) and,
    when ``fixed_total``, the total bond order (its hydrogens)."""
    n = len(cls)
    load = O.sum(1)
    free = valences[cls] - load
    out: list[tuple[NDArray[np.int64], NDArray[np.int64]]] = []
    inside = set(focus)
    for a in focus:
        for b in range(n):  # two atoms of different labels swapped
            if cls[a] != cls[b] and not (b in inside and b < a) and load[a] <= valences[cls[b]] \
                    and load[b] <= valences[cls[a]]:
                c = cls.copy()
                c[a], c[b] = cls[b], cls[a]
                out.append((c, O))
        for b in range(n):  # one bond order up at (a, b) ...
            if b == a or O[a, b] >= 3:
                continue
            if not fixed_total:
                if free[a] > 0 and free[b] > 0 and not (b in inside and b < a):
                    M = O.copy()
                    M[a, b] += 1
                    M[b, a] += 1
                    out.append((cls, M))
                continue
            near = sorted({(min(u, v), max(u, v)) for u in (a, b) for v in np.flatnonzero(O[u]).tolist()})
            for c, d in near:  # ... and one down at a bond of a or b (ring closing, opening, bond shifts)
                if (c, d) == (min(a, b), max(a, b)):
                    continue
                change = {a: -1, b: -1}
                for v in (c, d):
                    change[v] = change.get(v, 0) + 1
                if any(free[v] + dv < 0 for v, dv in change.items()):
                    continue
                M = O.copy()
                M[a, b] += 1
                M[b, a] += 1
                M[c, d] -= 1
                M[d, c] -= 1
                if M[c, d] or _connected(M):
                    out.append((cls, M))
        if not fixed_total:
            for b in np.flatnonzero(O[a]).tolist():  # one bond order down
                M = O.copy()
                M[a, b] -= 1
                M[b, a] -= 1
                if M[a, b] or _connected(M):
                    out.append((cls, M))
    return out


@dataclass
class _Member:
    cls: NDArray[np.int64]
    O: NDArray[np.int64]
    fp: NDArray[np.int64]
    similarity: float
    rank: tuple[float, int, int]
    mol: Any
    atoms: dict[int, set[int]] | None = None


def fingerprint_search(
    starts: Sequence[tuple[NDArray[np.int64], NDArray[np.int64]]],
    target: NDArray[np.int64],
    symbols: Sequence[str],
    valences: Sequence[int],
    spec: MorganSpec,
    *,
    width: int = 5,
    max_evaluations: int = 20000,
    formula: str = "",
) -> SearchResult | None:
    """Beam search for the molecule whose Morgan fingerprint is most similar to ``target``.

    Parameters
    ----------
    starts : sequence of (ndarray, ndarray)
        Start molecules as (node label indices, bond-order matrix); the first
        is the ordinary prediction, whose size breaks ties.
    target : ndarray of int, shape (n_bits,)
        The input's fingerprint (bits or counts, as ``spec`` says).
    symbols : sequence of str
        Atom label of each node label index (``"C"``, ``"N+"``).
    valences : sequence of int
        Largest total bond order of each node label (a cheap filter before
        RDKit's sanitization, which decides).
    spec : MorganSpec
        Radius, length and kind of the fingerprint.
    width : int, default=5
        Molecules kept per round.
    max_evaluations : int, default=20000
        Fingerprints computed at most.
    formula : {"", "atoms", "atoms+hydrogens"}, default=""
        Keep the starts' atoms (a formula's heavy atoms: atoms are swapped,
        never added, removed or relabelled) and, with ``"atoms+hydrogens"``,
        their total bond order (its hydrogens: one bond order up, another
        down).  The starts must have the formula already.

    Returns
    -------
    SearchResult or None
        None when no start is a molecule RDKit accepts.
    """
    _, rdBase = rdkit_modules("fingerprint_search")
    target = np.asarray(target).astype(np.int64)
    caps = np.asarray(valences, dtype=np.int64)
    hint = len(starts[0][0]) if starts else 0
    seen: set[bytes] = set()  # digests of the arrays tried
    kinds: set[bytes] = set()  # digests of the molecules kept, by atom labels and fingerprint
    found = 0

    def member(cls: NDArray[np.int64], O: NDArray[np.int64]) -> _Member | None:
        nonlocal found
        key = _digest(cls.tobytes(), O.tobytes())
        if key in seen:
            return None
        seen.add(key)
        mol = mol_from_arrays([symbols[c] for c in cls.tolist()], O)
        if mol is None:
            return None
        if formula == "atoms+hydrogens" and hydrogens and _hydrogens(mol) != hydrogens[0]:
            return None  # a swap of atoms with several valences (S, P) can change the hydrogens
        found += 1
        fp, _ = morgan_of_mol(mol, radius=spec.radius, n_bits=spec.n_bits, counts=spec.counts)
        kind = _digest(np.sort(cls).tobytes(), fp.tobytes())  # renumberings of one molecule count once
        if kind in kinds:
            return None
        kinds.add(kind)
        s = _similarity(fp, target)
        return _Member(cls, O, fp, s, (-s, abs(len(cls) - hint), found), mol)

    hydrogens: list[int] = []  # of the first start, which has the formula
    with rdBase.BlockLogs():
        if formula == "atoms+hydrogens" and starts:
            first_mol = mol_from_arrays([symbols[c] for c in np.asarray(starts[0][0]).tolist()], np.asarray(starts[0][1]))
            hydrogens = [] if first_mol is None else [_hydrogens(first_mol)]
        members = [member(np.asarray(c, dtype=np.int64), np.asarray(O, dtype=np.int64)) for c, O in starts]
        first = members[0].similarity if members and members[0] is not None else float("nan")
        beam = [m for m in members if m is not None]
        if not beam:
            return None
        beam = sorted(beam, key=lambda m: m.rank)[:width]
        expanded: set[int] = set()
        for _ in range(MAX_ROUNDS):
            if beam[0].similarity >= 1.0 or found >= max_evaluations:
                break
            children: list[_Member] = []
            for m in beam:
                if m.rank[2] in expanded:
                    continue
                expanded.add(m.rank[2])
                _, m.atoms = morgan_of_mol(m.mol, radius=spec.radius, n_bits=spec.n_bits, counts=spec.counts,
                                           with_atoms=True)
                excess = np.flatnonzero(m.fp > target)
                focus = sorted({a for b in excess.tolist() for a in m.atoms.get(b, ())}) or list(range(len(m.cls)))
                moves = (_edits(m.cls, m.O, focus, caps) if not formula
                         else _formula_edits(m.cls, m.O, focus, caps, formula == "atoms+hydrogens"))
                for cls, O in moves:
                    if found >= max_evaluations:
                        break
                    child = member(cls, O)
                    if child is not None:
                        children.append(child)
            new = sorted(beam + children, key=lambda m: m.rank)[:width]
            if [m.rank for m in new] == [m.rank for m in beam]:
                break
            beam = new
    best = beam[0]
    return SearchResult(best.cls, best.O, best.similarity, first, found)


def search_rows(
    starts: Sequence[Sequence[tuple[NDArray[np.int64], NDArray[np.int64]]]],
    targets: NDArray[np.int64],
    formulas: Sequence[str],
    *,
    symbols: Sequence[str],
    valences: Sequence[int],
    spec: MorganSpec,
    width: int,
    max_evaluations: int,
) -> list[SearchResult | None]:
    """:func:`fingerprint_search` for a batch of inputs (one task of ``parallel_map``)."""
    return [
        fingerprint_search(s, t, symbols, valences, spec, width=width, max_evaluations=max_evaluations, formula=f)
        for s, t, f in zip(starts, targets, formulas)
    ]

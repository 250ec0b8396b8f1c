"""Molecular formulas and valences of heavy-atom graphs.

A formula such as ``"C4H6O2"`` is what a mass measurement tells about an
unknown molecule.  gwpred uses it to fix the heavy atoms of a prediction
(their elements and number) and, when the hydrogen count is given, the total
bond order (through the degree of unsaturation).

Pure Python: RDKit is needed only for the default valence of elements
outside the built-in table (C, N, O, F, ...).
"""

from __future__ import annotations

import re
from collections.abc import Hashable, Mapping, Sequence
from dataclasses import dataclass
from typing import Any

import networkx as nx

from ._utils import require_extra

__all__ = [
    "MAX_FORMULA_ATOMS",
    "ELEMENTS",
    "Formula",
    "SYMBOLS",
    "atomic_number",
    "bond_total",
    "default_valence",
    "label_counts",
    "formula_matches",
    "graph_formula",
    "hill_formula",
    "hydrogen_counts",
    "parse_formula",
    "valence_table",
]

#: Most atoms a formula may hold (hydrogens included): far beyond any molecule whose graph
#: gwpred can predict, and small enough that counts never overflow an array.
MAX_FORMULA_ATOMS = 10_000

# Periodic table symbols, Z = 1..118 (IUPAC).
#: Element symbols in order of atomic number: ``SYMBOLS[Z - 1]``.
SYMBOLS = (
    "H",
    "He",
    "Li",
    "Be",
    "B",
    "C",
    "N",
    "O",
    "F",
    "Ne",
    "Na",
    "Mg",
    "Al",
    "Si",
    "P",
    "S",
    "Cl",
    "Ar",
    "K",
    "Ca",
    "Sc",
    "Ti",
    "V",
    "Cr",
    "Mn",
    "Fe",
    "Co",
    "Ni",
    "Cu",
    "Zn",
    "Ga",
    "Ge",
    "As",
    "Se",
    "Br",
    "Kr",
    "Rb",
    "Sr",
    "Y",
    "Zr",
    "Nb",
    "Mo",
    "Tc",
    "Ru",
    "Rh",
    "Pd",
    "Ag",
    "Cd",
    "In",
    "Sn",
    "Sb",
    "Te",
    "I",
    "Xe",
    "Cs",
    "Ba",
    "La",
    "Ce",
    "Pr",
    "Nd",
    "Pm",
    "Sm",
    "Eu",
    "Gd",
    "Tb",
    "Dy",
    "Ho",
    "Er",
    "Tm",
    "Yb",
    "Lu",
    "Hf",
    "Ta",
    "W",
    "Re",
    "Os",
    "Ir",
    "Pt",
    "Au",
    "Hg",
    "Tl",
    "Pb",
    "Bi",
    "Po",
    "At",
    "Rn",
    "Fr",
    "Ra",
    "Ac",
    "Th",
    "Pa",
    "U",
    "Np",
    "Pu",
    "Am",
    "Cm",
    "Bk",
    "Cf",
    "Es",
    "Fm",
    "Md",
    "No",
    "Lr",
    "Rf",
    "Db",
    "Sg",
    "Bh",
    "Hs",
    "Mt",
    "Ds",
    "Rg",
    "Cn",
    "Nh",
    "Fl",
    "Mc",
    "Lv",
    "Ts",
    "Og",
)
#: The element table of gwpred: every symbol of Z = 1..118.
ELEMENTS = frozenset(SYMBOLS)


def atomic_number(symbol: str) -> int:
    """Atomic number of an element symbol (IUPAC periodic table).

    >>> atomic_number("C"), atomic_number("Og")
    (6, 118)
    """
    if symbol not in ELEMENTS:
        raise ValueError(f"{symbol!r} is not an element symbol (e.g. 'C', 'Cl').")
    return SYMBOLS.index(symbol) + 1

# Valence of neutral atoms in organic molecules (common practice: the
# lowest "normal" valence; RDKit's default valences agree for these).
_VALENCE = {
    "H": 1,
    "B": 3,
    "C": 4,
    "N": 3,
    "O": 2,
    "F": 1,
    "Si": 4,
    "P": 3,
    "S": 2,
    "Cl": 1,
    "Br": 1,
    "I": 1,
}

_TOKEN = re.compile(r"([A-Z][a-z]?)(\d*)")


@dataclass(frozen=True)
class Formula:
    """A parsed molecular formula.

    Attributes
    ----------
    heavy : dict of str to int
        Heavy-atom (non-hydrogen) counts by element symbol, all positive.
    hydrogens : int or None
        Hydrogen count, or None when the formula does not state it.
    text : str
        The formula as given.
    """

    heavy: dict[str, int]
    hydrogens: int | None
    text: str

    @property
    def n_heavy(self) -> int:
        """Number of heavy atoms."""
        return sum(self.heavy.values())

    def __str__(self) -> str:
        return hill_formula(self.heavy, self.hydrogens)


def label_counts(formula: Formula, labels: Sequence[Hashable]) -> list[int]:
    """Heavy atoms of ``formula`` counted per label, in the order of ``labels``.

    >>> label_counts(parse_formula("C2H6O"), ["C", "N", "O"])
    [2, 0, 1]
    """
    return [formula.heavy.get(lab, 0) for lab in labels]


def bond_total(formula: Formula, counts: Sequence[int], valences: Sequence[int]) -> int | None:
    """Total bond order between the heavy atoms that the formula's hydrogens leave.

    Each heavy atom of valence :math:`v` carries :math:`v` bond ends; the
    hydrogens take :math:`H` of them and the rest pair up into bonds between
    heavy atoms: :math:`(\\sum_a n_a v_a - H) / 2` (a neutral, closed-shell
    molecule; common practice, e.g. the degree-of-unsaturation count).

    Parameters
    ----------
    formula : Formula
    counts : sequence of int
        Heavy atoms per label (see :func:`label_counts`).
    valences : sequence of int
        Valence per label, same order.

    Returns
    -------
    int or None
        None when the formula states no hydrogens.

    Raises
    ------
    ValueError
        When the free valences are negative or odd.

    Examples
    --------
    >>> bond_total(parse_formula("C2H4O2"), [2, 2], [4, 2])  # acetic acid: 3 bonds + 1 double
    4
    """
    if formula.hydrogens is None:
        return None
    free = int(sum(c * v for c, v in zip(counts, valences))) - formula.hydrogens
    if free < 0 or free % 2:
        raise ValueError(
            f"formula {formula.text}: {formula.hydrogens} hydrogens leave "
            f"{free} valences for bonds between heavy atoms, which is "
            + ("negative" if free < 0 else "odd (a radical or an ion)")
            + "; gwpred decodes neutral closed-shell molecules."
        )
    return free // 2


def parse_formula(text: str) -> Formula:
    """Parse a molecular formula such as ``"C4H6O2"`` or ``"CH4"``.

    Elements may come in any order and repeat (counts add up); a missing
    count means one.  Hydrogens may be omitted: then only the heavy atoms
    are constrained.

    Parameters
    ----------
    text : str

    Returns
    -------
    Formula

    Raises
    ------
    ValueError
        For an empty formula, an unknown element symbol, a zero count,
        characters that are not element symbols and counts (charges, dots,
        brackets), or a formula with no heavy atom.

    Examples
    --------
    >>> f = parse_formula("C4H6O2")
    >>> f.heavy, f.hydrogens, f.n_heavy
    ({'C': 4, 'O': 2}, 6, 6)
    >>> parse_formula("OC2").heavy
    {'C': 2, 'O': 1}
    """
    if not isinstance(text, str):
        raise TypeError(
            f"a formula must be a string such as 'C4H6O2'; got {type(text).__name__}."
        )
    s = text.strip()
    if not s:
        raise ValueError(
            "empty formula; give element symbols with counts, e.g. 'C4H6O2'."
        )
    counts: dict[str, int] = {}
    pos = 0
    for m in _TOKEN.finditer(s):
        if m.start() != pos:
            break
        sym, num = m.group(1), m.group(2)
        if sym not in ELEMENTS:
            raise ValueError(f"formula {text!r}: unknown element symbol {sym!r}.")
        n = int(num) if num else 1
        if n == 0:
            raise ValueError(
                f"formula {text!r}: count 0 for {sym}; leave the element out instead."
            )
        counts[sym] = counts.get(sym, 0) + n
        pos = m.end()
    if pos != len(s):
        raise ValueError(
            f"formula {text!r}: cannot read {s[pos:]!r}; write element symbols with counts only "
            "(e.g. 'C4H6O2'), without charges, dots or brackets."
        )
    total = sum(counts.values())
    if total > MAX_FORMULA_ATOMS:
        raise ValueError(
            f"formula {text!r} has {total:,} atoms; gwpred reads formulas of at most "
            f"{MAX_FORMULA_ATOMS:,} atoms."
        )
    hydrogens = counts.pop("H", None)
    if not counts:
        raise ValueError(
            f"formula {text!r} has no heavy atom; gwpred predicts heavy-atom graphs."
        )
    heavy = {k: counts[k] for k in sorted(counts, key=_hill_key)}
    return Formula(heavy, hydrogens, text)


def _hill_key(symbol: str) -> tuple[int, str]:
    return ({"C": 0, "H": 1}.get(symbol, 2), symbol)


def hill_formula(heavy: Mapping[str, int], hydrogens: int | None = None) -> str:
    """Write a formula in Hill order.

    Hill order (common practice, used by Chemical Abstracts): C first, then
    H, then the other elements alphabetically; without carbon, all elements
    alphabetically, H included.

    Parameters
    ----------
    heavy : mapping of str to int
        Heavy-atom counts.
    hydrogens : int or None, default=None
        Hydrogen count; None leaves hydrogens out.

    Returns
    -------
    str

    Examples
    --------
    >>> hill_formula({"O": 1, "C": 2}, 6)
    'C2H6O'
    >>> hill_formula({"N": 1}, 3)
    'H3N'
    """
    counts = {k: int(v) for k, v in heavy.items() if int(v) > 0}
    if hydrogens:
        counts["H"] = int(hydrogens)
    if "C" in counts:
        order = sorted(counts, key=_hill_key)
    else:
        order = sorted(counts)
    return "".join(k + (str(counts[k]) if counts[k] != 1 else "") for k in order)


def default_valence(symbol: str) -> int:
    """Valence of a neutral atom of ``symbol``.

    C 4, N 3, O 2, F 1 and the other common organic elements from a
    built-in table (common practice); other elements from RDKit's periodic
    table (needs the ``chem`` extra).

    Parameters
    ----------
    symbol : str

    Returns
    -------
    int

    Raises
    ------
    ValueError
        For a label that is not an element symbol, or an element without a
        default valence.
    ImportError
        When RDKit is needed but not installed.

    Examples
    --------
    >>> default_valence("N")
    3
    """
    if not isinstance(symbol, str) or symbol not in ELEMENTS:
        raise ValueError(
            f"node label {symbol!r} is not an element symbol; valence rules need element labels "
            "(e.g. 'C', 'N'), or pass a valence table of your own."
        )
    if symbol in _VALENCE:
        return _VALENCE[symbol]
    Chem = require_extra(
        "rdkit.Chem", f"the default valence of {symbol!r} (or pass a valence table of your own)"
    )
    v = int(Chem.GetPeriodicTable().GetDefaultValence(symbol))
    if v < 0:
        raise ValueError(
            f"element {symbol!r} has no default valence; pass a valence table of your own."
        )
    return v


def valence_table(
    labels: Any, valences: Mapping[Hashable, int] | None = None
) -> list[int]:
    """Valence of each label, from ``valences`` or :func:`default_valence`.

    Parameters
    ----------
    labels : iterable of hashable
        Node labels (element symbols unless ``valences`` covers them).
    valences : mapping, default=None
        Valences that override the defaults.

    Returns
    -------
    list of int

    Examples
    --------
    >>> valence_table(["C", "O", "X"], {"X": 2})
    [4, 2, 2]
    """
    out = []
    for lab in labels:
        if valences is not None and lab in valences:
            v = valences[lab]
            if isinstance(v, bool) or not isinstance(v, int) or v < 0:
                raise ValueError(
                    f"valence of {lab!r} must be a non-negative integer; got {v!r}."
                )
            out.append(int(v))
        else:
            out.append(default_valence(lab))
    return out


def _bond_order(value: Any, where: str) -> int:
    if value is None:
        return 1
    try:
        order = int(value)
    except (TypeError, ValueError):
        raise ValueError(
            f"{where}: edge label {value!r} is not a bond order (1, 2 or 3)."
        ) from None
    if order != value or order < 1:
        raise ValueError(
            f"{where}: edge label {value!r} is not a bond order (1, 2 or 3)."
        )
    return order


def hydrogen_counts(
    graph: nx.Graph,
    *,
    node_label: str = "label",
    edge_label: str | None = "label",
    valences: Mapping[Hashable, int] | None = None,
) -> dict[Any, int]:
    """Implicit hydrogens per node: valence minus the bond orders at the node.

    Parameters
    ----------
    graph : networkx.Graph
        Heavy-atom graph; node labels are element symbols, edge labels bond
        orders (missing edge labels count as single bonds).
    node_label, edge_label : str
        Attributes holding them (``edge_label=None``: all bonds single).
    valences : mapping, default=None
        Valences overriding :func:`default_valence`.

    Returns
    -------
    dict
        Node -> hydrogen count; negative where the valence is exceeded.

    Examples
    --------
    >>> g = nx.Graph(); g.add_nodes_from([(0, {"label": "C"}), (1, {"label": "O"})])
    >>> g.add_edge(0, 1, label=2)
    >>> hydrogen_counts(g)
    {0: 2, 1: 0}
    """
    out = {}
    for v, data in graph.nodes(data=True):
        if node_label not in data:
            raise ValueError(f"node {v!r} has no {node_label!r} attribute.")
        val = valence_table([data[node_label]], valences)[0]
        used = sum(
            _bond_order(d.get(edge_label) if edge_label else None, f"edge {v!r}-{u!r}")
            for u, d in graph.adj[v].items()
        )
        out[v] = val - used
    return out


def _heavy_counts(graph: nx.Graph, node_label: str) -> dict[str, int]:
    heavy: dict[str, int] = {}
    for _, data in graph.nodes(data=True):
        lab = str(data.get(node_label))
        heavy[lab] = heavy.get(lab, 0) + 1
    return heavy


def graph_formula(
    graph: nx.Graph,
    *,
    node_label: str = "label",
    edge_label: str | None = "label",
    valences: Mapping[Hashable, int] | None = None,
    hydrogens: bool = True,
) -> str:
    """Hill formula of a heavy-atom graph, hydrogens from valences.

    Parameters
    ----------
    graph : networkx.Graph
    node_label, edge_label, valences
        As in :func:`hydrogen_counts`.
    hydrogens : bool, default=True
        Include the implicit hydrogens.

    Returns
    -------
    str

    Raises
    ------
    ValueError
        When an atom exceeds its valence (no hydrogen count exists).

    Examples
    --------
    >>> g = nx.Graph(); g.add_nodes_from([(0, {"label": "C"}), (1, {"label": "O"})])
    >>> g.add_edge(0, 1, label=1)
    >>> graph_formula(g)
    'CH4O'
    """
    heavy = _heavy_counts(graph, node_label)
    if not hydrogens:
        return hill_formula(heavy)
    h = hydrogen_counts(
        graph, node_label=node_label, edge_label=edge_label, valences=valences
    )
    over = [v for v, k in h.items() if k < 0]
    if over:
        raise ValueError(
            f"atoms {over} exceed their valence; the graph has no molecular formula."
        )
    return hill_formula(heavy, sum(h.values()))


def formula_matches(
    graph: nx.Graph,
    formula: str | Formula,
    *,
    node_label: str = "label",
    edge_label: str | None = "label",
    valences: Mapping[Hashable, int] | None = None,
) -> bool:
    """Whether a heavy-atom graph has the given formula.

    Heavy atoms must match; hydrogens are compared only when the formula
    states them.  A graph over valence never matches.

    Examples
    --------
    >>> g = nx.Graph(); g.add_nodes_from([(0, {"label": "C"}), (1, {"label": "O"})])
    >>> g.add_edge(0, 1, label=1)
    >>> formula_matches(g, "CH4O"), formula_matches(g, "CO"), formula_matches(g, "CH2O")
    (True, True, False)
    """
    f = parse_formula(formula) if isinstance(formula, str) else formula
    heavy = _heavy_counts(graph, node_label)
    if heavy != f.heavy:
        return False
    try:
        h = hydrogen_counts(
            graph, node_label=node_label, edge_label=edge_label, valences=valences
        )
    except ValueError:
        return False
    if any(k < 0 for k in h.values()):
        return False
    return f.hydrogens is None or sum(h.values()) == f.hydrogens

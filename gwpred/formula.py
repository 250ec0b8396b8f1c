"""Molecular formulas and valences of heavy-atom graphs.

A formula such as ``"C4H6O2"`` (or an ion's, ``"C2H3O2-"``) is what a mass
measurement tells about an unknown molecule.  gwpred uses it to fix the heavy atoms of a prediction
(their elements and number) and, when the hydrogen count is given, the total
bond order (through the degree of unsaturation).

Atoms are written as node labels that keep what valence needs: the element
symbol and the formal charge, as in SMILES brackets (``"C"``, ``"N+"``,
``"O-"``).  Each label has a set of allowed valences (S 2, 4 or 6; ``"N+"`` 4;
``"O-"`` 1), RDKit's; an atom takes the smallest allowed valence at or above
its bonds, and the difference is its implicit hydrogens.

Pure Python: RDKit is needed only for the valences of charged atoms and of
elements outside the built-in table (C, N, O, F, S, P, halogens, ...).
"""

from __future__ import annotations

import re
from collections.abc import Hashable, Mapping, Sequence
from dataclasses import dataclass
from functools import lru_cache
from typing import Any, Union

import networkx as nx
import numpy as np

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
    "ANY_VALENCE_CAP",
    "atom_label",
    "element_of",
    "implicit_hydrogens",
    "is_atom_label",
    "node_atom",
    "split_atom_label",
    "valence_set",
    "valence_sets",
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

#: A node label that carries what valence needs: an element symbol and an optional formal
#: charge written as in SMILES brackets (``"N+"``, ``"O-"``, ``"Fe+2"``).
_ATOM_LABEL = re.compile(r"([A-Z][a-z]?)(?:([+-])(\d*))?")

#: Most bonds gwpred lets an atom carry when RDKit gives its element no valence rule
#: (metals: RDKit accepts any valence and adds no hydrogens).
ANY_VALENCE_CAP = 8

# Allowed valences of neutral atoms of the common organic elements, so that the core runs
# without RDKit.  A copy of RDKit's valence lists (rdkit.Chem.GetPeriodicTable().GetValenceList),
# checked against RDKit in tests/test_druglike.py; every other label is asked of RDKit.
_VALENCE: dict[str, tuple[int, ...]] = {
    "H": (1,),
    "B": (3,),
    "C": (4,),
    "N": (3,),
    "O": (2,),
    "F": (1,),
    "Si": (4,),
    "P": (3, 5),
    "S": (2, 4, 6),
    "Cl": (1,),
    "Br": (1,),
    "I": (1, 3, 5),
}


def split_atom_label(label: Any) -> tuple[str, int]:
    """Element symbol and formal charge of an atom label such as ``"N+"``.

    The charge follows the symbol as in SMILES brackets: ``+`` or ``-``,
    then an optional magnitude (``"Fe+2"``, ``"O-"``); no sign means neutral.

    Raises
    ------
    ValueError
        When the label is not an element symbol with an optional charge.

    Examples
    --------
    >>> split_atom_label("N+"), split_atom_label("O-"), split_atom_label("Fe+2"), split_atom_label("C")
    (('N', 1), ('O', -1), ('Fe', 2), ('C', 0))
    """
    m = _ATOM_LABEL.fullmatch(label) if isinstance(label, str) else None
    digits = m.group(3) if m is not None else None
    if m is None or m.group(1) not in ELEMENTS or (digits and (digits == "1" or digits[0] == "0")):
        # one written form per charge ("N+", never "N+1"), so that labels compare as atoms do
        raise ValueError(
            f"node label {label!r} is not an element symbol with an optional formal charge "
            "(e.g. 'C', 'Cl', 'N+', 'O-', 'Fe+2'; a charge of one without the 1); valence rules need such labels, or pass a "
            "valence table of your own."
        )
    sign = {"+": 1, "-": -1, None: 0}[m.group(2)]
    return m.group(1), sign * int(m.group(3) or 1)


def element_of(label: Any) -> Any:
    """The element of an atom label (``"N+"`` -> ``"N"``); a label that is not one comes back as it is.

    >>> element_of("N+"), element_of("Cl"), element_of("X")
    ('N', 'Cl', 'X')
    """
    try:
        return split_atom_label(label)[0]
    except ValueError:
        return label


def is_atom_label(label: Any) -> bool:
    """Whether a label is an element symbol with an optional charge (:func:`split_atom_label`).

    >>> is_atom_label("O-"), is_atom_label("c")
    (True, False)
    """
    try:
        split_atom_label(label)
    except ValueError:
        return False
    return True


def atom_label(symbol: str, charge: int = 0) -> str:
    """The atom label of an element and a formal charge (inverse of :func:`split_atom_label`).

    Examples
    --------
    >>> atom_label("N", 1), atom_label("O", -1), atom_label("Fe", 2), atom_label("C")
    ('N+', 'O-', 'Fe+2', 'C')
    """
    if symbol not in ELEMENTS:
        raise ValueError(f"{symbol!r} is not an element symbol (e.g. 'C', 'Cl').")
    if isinstance(charge, bool) or not isinstance(charge, int):
        raise TypeError(f"a formal charge must be an int; got {charge!r}.")
    if charge == 0:
        return symbol
    return symbol + ("+" if charge > 0 else "-") + (str(abs(charge)) if abs(charge) > 1 else "")


@lru_cache(maxsize=None)
def _rdkit_valences(symbol: str, charge: int) -> tuple[int, ...] | None:
    """Allowed valences of an atom as RDKit computes them, or None for any valence.

    RDKit is asked directly: an atom with ``k`` explicit hydrogens and RDKit's
    implicit ones is sanitized for ``k = 0..ANY_VALENCE_CAP + 1``; the allowed
    valences are the totals it reaches (RDKit fills the smallest allowed valence
    at or above the bonds, the rule gwpred's hydrogen counts follow).
    """
    purpose = f"the valences of {atom_label(symbol, charge)!r} (or pass a valence table of your own)"
    Chem = require_extra("rdkit.Chem", purpose)
    RDLogger = require_extra("rdkit.RDLogger", purpose)

    totals: set[int] = set()
    RDLogger.DisableLog("rdApp.*")
    try:
        for k in range(ANY_VALENCE_CAP + 2):
            mol = Chem.RWMol()
            atom = Chem.Atom(symbol)
            atom.SetFormalCharge(charge)
            atom.SetNumExplicitHs(k)
            mol.AddAtom(atom)
            m = mol.GetMol()
            try:
                Chem.SanitizeMol(m)
            except Exception:  # noqa: BLE001 - RDKit raises several kinds for a bad valence
                break
            a = m.GetAtomWithIdx(0)
            if a.GetNumRadicalElectrons():
                totals.clear()
                break
            totals.add(k + a.GetNumImplicitHs())
    finally:
        RDLogger.EnableLog("rdApp.*")
    if ANY_VALENCE_CAP + 1 in totals:  # no rule: every count is accepted as it is
        if -1 in tuple(Chem.GetPeriodicTable().GetValenceList(symbol)):  # RDKit's mark of "any valence"
            return None
        raise ValueError(
            f"RDKit has no valence rule for {atom_label(symbol, charge)!r} (charge {charge:+d} on "
            f"{symbol}) and would accept any bonds; check the formal charge, or pass a valence table "
            "of your own."
        )
    if not totals:
        raise ValueError(
            f"RDKit allows no valence for {atom_label(symbol, charge)!r} (charge {charge:+d} on {symbol}); "
            "check the formal charge, or pass a valence table of your own."
        )
    return tuple(sorted(totals))


def valence_set(label: Any) -> tuple[int, ...] | None:
    """Allowed valences (total bond orders, hydrogens included) of an atom label.

    Neutral C, N, O, F and the other common organic elements come from a
    built-in copy of RDKit's table; charged atoms (``"N+"`` 4, ``"O-"`` 1,
    ``"S+"`` 3 or 5) and other elements are computed by RDKit (needs the
    ``chem`` extra).  None means any valence: RDKit has no rule for the element
    (metals such as Fe); gwpred then allows up to :data:`ANY_VALENCE_CAP`
    bonds and no implicit hydrogens, as RDKit does.

    Raises
    ------
    ValueError
        For a label that is not an element with an optional charge, or a
        charge that no valence allows.
    ImportError
        When RDKit is needed but not installed.

    Examples
    --------
    >>> valence_set("S"), valence_set("N")
    ((2, 4, 6), (3,))
    """
    symbol, charge = split_atom_label(label)
    if charge == 0 and symbol in _VALENCE:
        return _VALENCE[symbol]
    return _rdkit_valences(symbol, charge)


def implicit_hydrogens(allowed: tuple[int, ...] | None, bonds: int) -> int:
    """Hydrogens an atom with allowed valences ``allowed`` and ``bonds`` bond orders carries.

    The smallest allowed valence at or above ``bonds`` fills up with
    hydrogens (RDKit's rule); negative when ``bonds`` exceeds every allowed
    valence; 0 for any-valence atoms (None).

    >>> implicit_hydrogens((2, 4, 6), 3), implicit_hydrogens((3,), 4)
    (1, -1)
    """
    if allowed is None:
        return 0 if bonds <= ANY_VALENCE_CAP else ANY_VALENCE_CAP - bonds
    for v in allowed:
        if v >= bonds:
            return v - bonds
    return allowed[-1] - bonds


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
    charge : int
        Net charge (0 when the formula states none: a neutral molecule).
    """

    heavy: dict[str, int]
    hydrogens: int | None
    text: str
    charge: int = 0

    @property
    def n_heavy(self) -> int:
        """Number of heavy atoms."""
        return sum(self.heavy.values())

    def __str__(self) -> str:
        return hill_formula(self.heavy, self.hydrogens, self.charge)


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
    s, charge = _split_charge(s, text)
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
            f"formula {text!r}: cannot read {s[pos:]!r}; write element symbols with counts "
            "(e.g. 'C4H6O2') and at most a net charge at the end ('C2H3O2-', '[C4H12N]+', "
            "'O4S-2'), without dots or other brackets."
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
    return Formula(heavy, hydrogens, text, charge)


_CHARGE_AFTER = re.compile(r"([+-])(\d*)")  # 'C2H3O2-', 'O4S-2' (as RDKit's CalcMolFormula writes)
_BRACKETED = re.compile(r"\[([^\[\]]*)\](?:([+-])(\d*)|(\d*)([+-]))")  # '[C4H12N]+', '[SO4]2-'


def _split_charge(s: str, text: str) -> tuple[str, int]:
    """A formula's element part and its net charge (0 when none is written)."""
    m = _BRACKETED.fullmatch(s)
    if m is not None:
        sign, digits = (m.group(2), m.group(3)) if m.group(2) else (m.group(5), m.group(4))
        body = m.group(1)
    else:
        m = None
        for m in _CHARGE_AFTER.finditer(s):  # the last sign, if it ends the text
            pass
        if m is None or m.end() != len(s):
            return s, 0
        sign, digits, body = m.group(1), m.group(2), s[: m.start()]
    if digits and (digits[0] == "0" or int(digits) > MAX_FORMULA_ATOMS):
        raise ValueError(f"formula {text!r}: charge {sign}{digits} is not a charge gwpred reads.")
    return body.strip(), (1 if sign == "+" else -1) * int(digits or 1)


def _hill_key(symbol: str) -> tuple[int, str]:
    return ({"C": 0, "H": 1}.get(symbol, 2), symbol)


def hill_formula(heavy: Mapping[str, int], hydrogens: int | None = None, charge: int = 0) -> str:
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
    charge : int, default=0
        Net charge, written after the elements as RDKit's ``CalcMolFormula``
        does (``"C2H3O2-"``, ``"O4S-2"``); nothing when 0.

    Returns
    -------
    str

    Examples
    --------
    >>> hill_formula({"O": 1, "C": 2}, 6)
    'C2H6O'
    >>> hill_formula({"N": 1}, 3)
    'H3N'
    >>> hill_formula({"C": 2, "O": 2}, 3, -1)
    'C2H3O2-'
    """
    counts = {k: int(v) for k, v in heavy.items() if int(v) > 0}
    if hydrogens:
        counts["H"] = int(hydrogens)
    if "C" in counts:
        order = sorted(counts, key=_hill_key)
    else:
        order = sorted(counts)
    text = "".join(k + (str(counts[k]) if counts[k] != 1 else "") for k in order)
    if charge:
        text += ("+" if charge > 0 else "-") + (str(abs(charge)) if abs(charge) > 1 else "")
    return text


def default_valence(symbol: str) -> int:
    """Default (smallest) valence of an atom label: an element, optionally charged.

    C 4, N 3, O 2, F 1 and the other common organic elements from a
    built-in table (a copy of RDKit's); charged atoms (``"N+"`` 4) and other
    elements from RDKit (needs the ``chem`` extra), see :func:`valence_set`.

    Parameters
    ----------
    symbol : str
        Element symbol, optionally with a formal charge (``"N+"``).

    Returns
    -------
    int

    Raises
    ------
    ValueError
        For a label that is not an element symbol, or an element without a
        default valence (RDKit gives metals none).
    ImportError
        When RDKit is needed but not installed.

    Examples
    --------
    >>> default_valence("N")
    3
    """
    allowed = valence_set(symbol)
    if allowed is None:
        raise ValueError(
            f"element {symbol!r} has no default valence (RDKit accepts any); pass a valence table of "
            "your own."
        )
    return allowed[0]


ValenceRule = Union[int, Sequence[int]]


def node_atom(data: Mapping[str, Any], node_label: str = "label", charge: str = "charge") -> tuple[str, int]:
    """Element and formal charge of a node from its attributes.

    The charge is the label's (``"N+"``); a label without one takes the
    ``charge`` attribute (graphs that store the charge apart), 0 if missing.

    Raises
    ------
    ValueError
        When the label is not an atom label, or label and attribute disagree.
    TypeError
        When the charge attribute is not an integer.

    Examples
    --------
    >>> node_atom({"label": "N+"}), node_atom({"label": "N", "charge": 1}), node_atom({"label": "O"})
    (('N', 1), ('N', 1), ('O', 0))
    """
    label = data.get(node_label)
    symbol, q = split_atom_label(label)
    extra = data.get(charge)
    if extra is None:
        return symbol, q
    if isinstance(extra, bool) or not isinstance(extra, (int, np.integer)):
        raise TypeError(f"charge={extra!r} of type {type(extra).__name__} is not an int.")
    if q and int(extra) != q:
        raise ValueError(
            f"node label {label!r} says charge {q:+d} but its {charge!r} attribute says {int(extra):+d}; "
            "make them agree (or drop the attribute)."
        )
    return symbol, q or int(extra)


def _own_rule(label: Hashable, rule: Any) -> tuple[int, ...]:
    values = [rule] if isinstance(rule, (int, bool)) else rule
    try:
        out = tuple(sorted(set(values)))
    except TypeError:
        out = ()
    if not out or any(isinstance(v, bool) or not isinstance(v, int) or v < 0 for v in out):
        raise ValueError(
            f"valence of {label!r} must be a non-negative integer or a list of them; got {rule!r}."
        )
    return out


def valence_sets(
    labels: Any, valences: Mapping[Hashable, ValenceRule] | None = None
) -> list[tuple[int, ...] | None]:
    """Allowed valences of each label, from ``valences`` or :func:`valence_set`.

    Parameters
    ----------
    labels : iterable of hashable
        Node labels (atom labels unless ``valences`` covers them).
    valences : mapping, default=None
        Valences that override the defaults: one integer or a list of
        allowed integers per label.

    Returns
    -------
    list of (tuple of int or None)
        Sorted allowed valences; None for any valence (see :func:`valence_set`).

    Examples
    --------
    >>> valence_sets(["C", "S", "X"], {"X": [1, 3]})
    [(4,), (2, 4, 6), (1, 3)]
    """
    out: list[tuple[int, ...] | None] = []
    for lab in labels:
        if valences is not None and lab in valences:
            out.append(_own_rule(lab, valences[lab]))
        else:
            out.append(valence_set(lab))
    return out


def valence_table(
    labels: Any, valences: Mapping[Hashable, ValenceRule] | None = None
) -> list[int]:
    """Largest total bond order of each label, from ``valences`` or :func:`valence_set`.

    An atom whose bonds stay at or below it is valid: implicit hydrogens fill
    the smallest allowed valence at or above its bonds.  Labels of any valence
    (metals) get :data:`ANY_VALENCE_CAP`.

    Parameters
    ----------
    labels : iterable of hashable
        Node labels (atom labels unless ``valences`` covers them).
    valences : mapping, default=None
        Valences that override the defaults (an integer or a list per label).

    Returns
    -------
    list of int

    Examples
    --------
    >>> valence_table(["C", "O", "X", "S"], {"X": 2})
    [4, 2, 2, 6]
    """
    return [ANY_VALENCE_CAP if v is None else v[-1] for v in valence_sets(labels, valences)]


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
    valences: Mapping[Hashable, ValenceRule] | None = None,
) -> dict[Any, int]:
    """Implicit hydrogens per node: the smallest allowed valence at or above its bonds, minus them.

    Parameters
    ----------
    graph : networkx.Graph
        Heavy-atom graph; node labels are atom labels (element symbols,
        optionally charged: ``"N+"``), edge labels bond orders (missing edge
        labels count as single bonds).
    node_label, edge_label : str
        Attributes holding them (``edge_label=None``: all bonds single).
    valences : mapping, default=None
        Valences overriding :func:`valence_set` (an integer or a list per label).

    Returns
    -------
    dict
        Node -> hydrogen count; negative where every allowed valence is exceeded.

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
        lab = data[node_label]
        if valences is not None and lab in valences:
            allowed = _own_rule(lab, valences[lab])
        else:
            allowed = valence_set(atom_label(*node_atom(data, node_label)))
        used = sum(
            _bond_order(d.get(edge_label) if edge_label else None, f"edge {v!r}-{u!r}")
            for u, d in graph.adj[v].items()
        )
        out[v] = implicit_hydrogens(allowed, used)
    return out


def _heavy_counts(graph: nx.Graph, node_label: str, own: Mapping[Hashable, Any] | None = None) -> tuple[dict[str, int], int]:
    """Heavy atoms per element and net charge; labels of a valence table of one's own count as they are."""
    heavy: dict[str, int] = {}
    total = 0
    for _, data in graph.nodes(data=True):
        lab = data.get(node_label)
        if own is not None and lab in own:
            symbol, q = str(lab), 0
        else:
            try:
                symbol, q = node_atom(data, node_label)
            except ValueError:
                symbol, q = str(lab), 0  # not an atom: counted under its own name, never matches
        heavy[symbol] = heavy.get(symbol, 0) + 1
        total += q
    return heavy, total


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
    heavy, charge = _heavy_counts(graph, node_label, valences)
    if not hydrogens:
        return hill_formula(heavy, None, charge)
    h = hydrogen_counts(
        graph, node_label=node_label, edge_label=edge_label, valences=valences
    )
    over = [v for v, k in h.items() if k < 0]
    if over:
        raise ValueError(
            f"atoms {over} exceed their valence; the graph has no molecular formula."
        )
    return hill_formula(heavy, sum(h.values()), charge)


def formula_matches(
    graph: nx.Graph,
    formula: str | Formula,
    *,
    node_label: str = "label",
    edge_label: str | None = "label",
    valences: Mapping[Hashable, int] | None = None,
) -> bool:
    """Whether a heavy-atom graph has the given formula.

    Heavy atoms (by element) and the net charge must match (a formula
    without a charge is neutral); hydrogens are compared only when the
    formula states them.  A graph over valence never matches.

    Examples
    --------
    >>> g = nx.Graph(); g.add_nodes_from([(0, {"label": "C"}), (1, {"label": "O"})])
    >>> g.add_edge(0, 1, label=1)
    >>> formula_matches(g, "CH4O"), formula_matches(g, "CO"), formula_matches(g, "CH2O")
    (True, True, False)
    """
    f = parse_formula(formula) if isinstance(formula, str) else formula
    heavy, charge = _heavy_counts(graph, node_label, valences)
    if heavy != f.heavy or charge != f.charge:
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

"""RDKit bridge: SMILES and SDF <-> heavy-atom graphs, validity checks, Morgan fingerprints.

RDKit is the optional extra ``chem`` (``pip install 'gwpred[chem]'``). It is
imported inside the functions of this module, never when gwpred is imported,
so the rest of gwpred works without it.

Graph convention (the one of :func:`gwpred.datasets.load_demo`): an undirected
:class:`networkx.Graph` whose nodes are the heavy (non-hydrogen) atoms, node
attribute ``"label"`` the atom label: element symbol and formal charge as in
SMILES brackets (``"C"``, ``"Cl"``, ``"N+"``, ``"O-"``, so that a predictor
learns charged atoms as atoms of their own), node attribute ``"charge"`` the
formal charge again (int; a missing ``"charge"`` is read as the label's, or 0;
graphs whose labels are plain element symbols may keep the charge there
alone) and edge attribute ``"label"`` the bond order 1, 2 or 3 of a kekulé
structure. Hydrogens are implicit: each atom carries as many as its element's
default valence leaves free, as RDKit computes them. The attribute names can
be changed with the ``node_label``, ``edge_label`` and ``charge`` options.

What such a graph does not hold, and what is therefore dropped when a molecule
becomes a graph: stereochemistry, isotopes (``[2H]`` becomes an implicit
hydrogen), atom maps, 2D/3D coordinates and the choice among equivalent kekulé
structures written in a SMILES (SMILES input gets RDKit's kekulé structure;
SDF input keeps the bond orders of the file). Hydrogen counts that default
valences cannot reproduce (radicals, unusual valences such as ``[SiH2]``) are
refused with a :class:`ValueError` unless ``check_hydrogens=False`` is passed.

Graphs are turned into molecules literally: a graph that is only a molecule
after RDKit's clean-up rewrites (a neutral ``N(=O)=O``, which RDKit would turn
into a charged nitro group) is reported invalid, never silently changed.
"""

from __future__ import annotations

import numbers
import os
import re
import sys
from collections.abc import Callable, Iterable, Sequence
from dataclasses import dataclass
from functools import lru_cache
from pathlib import Path
from typing import Any, TypeVar, Union

import networkx as nx
import numpy as np
from numpy.typing import NDArray

from ._utils import atomic_write_text, install_hint, require_extra
from .formula import atom_label, split_atom_label

__all__ = [
    "MoleculeCheck",
    "check_molecule",
    "graph_from_smiles",
    "graph_to_mol",
    "graph_to_smiles",
    "mol_from_arrays",
    "morgan_bits_of_arrays",
    "morgan_fingerprints",
    "morgan_of_mol",
    "read_sdf",
    "read_smiles_file",
    "write_sdf",
    "write_smiles_file",
]

StrPath = Union[str, "os.PathLike[str]"]
T = TypeVar("T")

#: How to get RDKit when it is missing.
INSTALL_HINT = f"install with {install_hint('chem')}"

_LOG_PREFIX = re.compile(r"^\[\d\d:\d\d:\d\d\] ")
_ERROR_PREFIX = re.compile(r"error: ", re.IGNORECASE)


# --------------------------------------------------------------------------- RDKit access


def rdkit_modules(purpose: str = "this function") -> tuple[Any, Any]:
    """Return the ``rdkit.Chem`` and ``rdkit.rdBase`` modules, or raise naming the extra.

    The one RDKit check of gwpred: every other module that needs RDKit calls
    this (or a function of this module) first.
    """
    loaded = sys.modules.get("rdkit"), sys.modules.get("rdkit.Chem"), sys.modules.get("rdkit.rdBase")
    if all(m is not None for m in loaded):  # the common case, called per molecule: no import machinery
        return loaded[1], loaded[2]
    return require_extra("rdkit.Chem", purpose), require_extra("rdkit.rdBase", purpose)


def _clean_log(text: str) -> str:
    """Keep the error lines of an RDKit log, without time stamps, joined by '; '."""
    lines = [_LOG_PREFIX.sub("", line).strip() for line in text.splitlines()]
    lines = [line for line in lines if line and "moving to the beginning of the next" not in line]
    keep = [_ERROR_PREFIX.split(line, 1)[-1] for line in lines if _ERROR_PREFIX.search(line)]
    return "; ".join(keep or lines)


def _quiet(fn: Callable[..., T], *args: Any, **kwargs: Any) -> tuple[T, str]:
    """Call an RDKit function with its error log captured instead of printed.

    Returns the function's result and the captured log text (empty when this
    RDKit cannot capture its log; the log is then only silenced).
    """
    _, rdBase = rdkit_modules()
    capture = getattr(rdBase, "CaptureErrorLog", None)
    if capture is None:  # pragma: no cover - RDKit releases before CaptureErrorLog
        with rdBase.BlockLogs():
            return fn(*args, **kwargs), ""
    with capture() as log:
        result = fn(*args, **kwargs)
    return result, _clean_log(log.messages)


@lru_cache(maxsize=1)
def _atomic_numbers() -> dict[str, int]:
    """Element symbol -> atomic number for elements 1..118 (RDKit's periodic table)."""
    Chem, _ = rdkit_modules()
    table = Chem.GetPeriodicTable()
    return {table.GetElementSymbol(z): z for z in range(1, 119)}


def _bond_types() -> dict[int, Any]:
    Chem, _ = rdkit_modules()
    B = Chem.BondType
    return {1: B.SINGLE, 2: B.DOUBLE, 3: B.TRIPLE}


# --------------------------------------------------------------------------- molecule -> graph


def _fold_hydrogens(mol: Any, where: str) -> Any:
    """Remove hydrogen atoms, adding them to their heavy neighbour's hydrogen count."""
    Chem, _ = rdkit_modules()
    params = Chem.RemoveHsParameters()
    params.removeIsotopes = True  # [2H] -> implicit H: isotopes are not kept
    params.removeMapped = True
    params.removeWithWedgedBond = True
    params.removeDefiningBondStereo = True
    params.removeInSGroups = True
    params.removeHydrides = True
    params.showWarnings = False
    mol, _ = _quiet(Chem.RemoveHs, mol, params, sanitize=False)
    mol.UpdatePropertyCache(strict=False)  # recount the implicit hydrogens
    left = [a.GetIdx() for a in mol.GetAtoms() if a.GetAtomicNum() == 1]
    if left:
        raise ValueError(
            f"{where}: hydrogen atom(s) {left} are not bound to exactly one heavy atom "
            "(e.g. H2, a bare proton [H+] or a bridging hydrogen) and cannot become implicit "
            "hydrogens; gwpred graphs hold heavy atoms only: remove them from the input"
        )
    return mol


def _graph_from_mol(mol: Any, where: str, node_label: str, edge_label: str) -> nx.Graph:
    """Heavy-atom graph of a kekulized molecule whose hydrogens are folded in."""
    orders = {v: k for k, v in _bond_types().items()}
    G = nx.Graph()
    for atom in mol.GetAtoms():
        q = atom.GetFormalCharge()
        G.add_node(atom.GetIdx(), **{node_label: atom_label(atom.GetSymbol(), q), "charge": q})
    for bond in mol.GetBonds():
        order = orders.get(bond.GetBondType())
        if order is None:
            i, j = bond.GetBeginAtomIdx(), bond.GetEndAtomIdx()
            raise ValueError(
                f"{where}: bond between atoms {i} and {j} has type {bond.GetBondType()}, but gwpred "
                "graphs hold single, double and triple bonds only: write it as one of these"
            )
        G.add_edge(bond.GetBeginAtomIdx(), bond.GetEndAtomIdx(), **{edge_label: order})
    return G


def _check_hydrogens(mol: Any, G: nx.Graph, where: str, node_label: str, edge_label: str) -> None:
    """Raise unless default valences give every atom of ``G`` the hydrogens it has in ``mol``."""
    rebuilt = _sanitized(_mol_from_graph(G, node_label, edge_label, "charge"), where)
    for atom, again in zip(mol.GetAtoms(), rebuilt.GetAtoms()):
        h, h_graph = atom.GetTotalNumHs(), again.GetTotalNumHs()
        if h != h_graph or atom.GetNumRadicalElectrons():
            raise ValueError(
                f"{where}: atom {atom.GetIdx()} ({atom.GetSymbol()}) has {h} hydrogen(s) and "
                f"{atom.GetNumRadicalElectrons()} radical electron(s), but its heavy-atom graph "
                f"implies {h_graph} hydrogen(s) from default valences, so the graph would be a "
                "different molecule; write the molecule with usual valences (or formal charges), "
                "or pass check_hydrogens=False to accept the change"
            )


def _parse_smiles(smiles: str) -> Any:
    """Parse and fully sanitize a SMILES with RDKit (hydrogens still explicit if written)."""
    Chem, _ = rdkit_modules()
    if not isinstance(smiles, str):
        raise TypeError(f"SMILES must be a str, got {smiles!r} of type {type(smiles).__name__}")
    if not smiles.strip():
        raise ValueError(f"SMILES {smiles!r} is empty; pass a SMILES string such as 'CCO'")
    mol, log = _quiet(Chem.MolFromSmiles, smiles, sanitize=False)
    if mol is None:
        raise ValueError(
            f"RDKit cannot parse SMILES {smiles!r} ({log or 'syntax error'}); check its syntax: "
            "element symbols, brackets, branches and ring-closure digits"
        )
    try:
        _quiet(Chem.SanitizeMol, mol)
    except Chem.rdchem.KekulizeException as err:
        raise ValueError(
            f"RDKit cannot kekulize SMILES {smiles!r} ({err}); an aromatic ring needs an "
            "alternating single/double bond pattern: write it in kekulé form or mark "
            "pyrrole-type nitrogens as [nH]"
        ) from err
    except (ValueError, RuntimeError) as err:
        raise ValueError(
            f"RDKit rejects SMILES {smiles!r} ({err}); fix the valences or formal charges"
        ) from err
    return mol


def _graph_from_parsed(
    mol: Any,
    where: str,
    node_label: str,
    edge_label: str,
    check_hydrogens: bool,
) -> nx.Graph:
    Chem, _ = rdkit_modules()
    mol = _fold_hydrogens(mol, where)
    mol = Chem.Mol(mol)
    try:
        _quiet(Chem.Kekulize, mol, clearAromaticFlags=True)
    except (ValueError, RuntimeError) as err:  # pragma: no cover - sanitized input kekulizes
        raise ValueError(f"{where}: RDKit cannot kekulize it ({err})") from err
    G = _graph_from_mol(mol, where, node_label, edge_label)
    if check_hydrogens:
        _check_hydrogens(mol, G, where, node_label, edge_label)
    return G


def graph_from_smiles(
    smiles: str,
    *,
    node_label: str = "label",
    edge_label: str = "label",
    check_hydrogens: bool = True,
) -> nx.Graph:
    """Heavy-atom graph of a molecule given as SMILES.

    Parameters
    ----------
    smiles : str
        The molecule. Several fragments separated by ``.`` are allowed; they
        become the connected components of the graph.
    node_label : str, default="label"
        Node attribute that receives the element symbol.
    edge_label : str, default="label"
        Edge attribute that receives the bond order (1, 2 or 3).
    check_hydrogens : bool, default=True
        Refuse molecules whose hydrogen counts the graph cannot reproduce
        (radicals such as ``[CH3]``, unusual valences such as ``[SiH2]``). With
        False such hydrogens are silently replaced by default-valence ones.

    Returns
    -------
    networkx.Graph
        Nodes ``0 .. n - 1`` in RDKit's atom order of the heavy atoms, with
        the element symbol under ``node_label`` and the formal charge (int)
        under ``"charge"``; edges with the bond order under ``edge_label``.
        ``graph.graph["smiles"]`` holds the input string.

    Raises
    ------
    TypeError
        If ``smiles`` is not a str.
    ValueError
        If ``smiles`` is empty, RDKit cannot parse, sanitize or kekulize it,
        it has a bond other than single, double or triple, hydrogen atoms that
        are not bound to one heavy atom (``[H][H]``), or (``check_hydrogens``)
        hydrogen counts that default valences do not give.
    ImportError
        If RDKit is not installed.

    Notes
    -----
    The SMILES is parsed and sanitized by RDKit as :func:`rdkit.Chem.MolFromSmiles`
    does (aromaticity is perceived), explicit ``[H]`` atoms are folded into
    their neighbours' hydrogen counts, and the molecule is kekulized with
    :func:`rdkit.Chem.Kekulize`. Aromatic input (``c1ccccc1``) therefore gets
    single and double bonds, and a kekulé input gets RDKit's kekulé structure,
    which may place the double bonds of a ring differently from the input.
    Stereochemistry (``@``, ``/``, ``\\``), isotopes and atom maps are dropped.

    Examples
    --------
    >>> G = graph_from_smiles("C=CC#N")
    >>> [G.nodes[v]["label"] for v in G], sorted(G.edges(data="label"))
    (['C', 'C', 'C', 'N'], [(0, 1, 2), (1, 2, 1), (2, 3, 3)])
    >>> sorted(d for _, _, d in graph_from_smiles("c1ccccc1").edges(data="label"))
    [1, 1, 1, 2, 2, 2]
    """
    mol = _parse_smiles(smiles)
    G = _graph_from_parsed(mol, f"SMILES {smiles!r}", node_label, edge_label, check_hydrogens)
    G.graph["smiles"] = smiles
    return G


# --------------------------------------------------------------------------- graph -> molecule


def _element(value: Any, node: Any, node_label: str) -> tuple[int, int]:
    """Atomic number and the label's formal charge (0 when the label has none)."""
    if not isinstance(value, str):
        raise TypeError(
            f"node {node!r} has {node_label}={value!r} of type {type(value).__name__}; "
            "it must be an element symbol str such as 'C' or 'Cl'"
        )
    try:
        symbol, q = split_atom_label(value)
    except ValueError:
        symbol, q = value, 0
    z = _atomic_numbers().get(symbol)
    if z is None:
        raise ValueError(
            f"node {node!r} has {node_label}={value!r}, which is not an element symbol; "
            "use symbols such as 'C', 'N', 'O', 'Cl' (capitalised, no aromatic lower case), "
            "optionally with a formal charge ('N+', 'O-', 'Fe+2')"
        )
    return z, q


def _formal_charge(value: Any, node: Any, charge: str) -> int:
    if isinstance(value, bool) or not isinstance(value, numbers.Integral):
        raise TypeError(
            f"node {node!r} has {charge}={value!r} of type {type(value).__name__}; "
            "a formal charge must be an int such as -1, 0 or 1"
        )
    return int(value)


def _bond_order(value: Any, edge: tuple[Any, Any], edge_label: str) -> int:
    ok = (
        not isinstance(value, bool)
        and isinstance(value, numbers.Real)
        and float(value) in (1.0, 2.0, 3.0)
    )
    if not ok:
        raise ValueError(
            f"edge {edge!r} has {edge_label}={value!r}; a bond order must be 1, 2 or 3 "
            "(kekulé form: write aromatic bonds as alternating 1 and 2)"
        )
    return int(value)


def _check_graph_type(graph: Any) -> None:
    if not isinstance(graph, nx.Graph):
        raise TypeError(
            f"expected a networkx graph, got {type(graph).__name__}; build one with "
            "graph_from_smiles or networkx.Graph"
        )


def _mol_from_graph(graph: nx.Graph, node_label: str, edge_label: str, charge: str) -> Any:
    """Unsanitized RDKit molecule with one atom per node, in ``graph.nodes`` order."""
    Chem, _ = rdkit_modules()
    _check_graph_type(graph)
    if graph.is_directed():
        raise ValueError("a molecular graph must be undirected; pass graph.to_undirected()")
    if graph.is_multigraph():
        raise ValueError(
            "a molecular graph must not be a multigraph; store one edge per bonded atom pair "
            "with the bond order as its label"
        )
    index = {node: i for i, node in enumerate(graph.nodes)}
    rw = Chem.RWMol()
    for node, data in graph.nodes(data=True):
        if node_label not in data:
            raise ValueError(
                f"node {node!r} has no {node_label!r} attribute; every node needs its element "
                f"symbol there (or pass node_label=<attribute name>)"
            )
        z, q = _element(data[node_label], node, node_label)
        extra = _formal_charge(data.get(charge, q), node, charge)
        if q and extra != q:
            raise ValueError(
                f"node {node!r} has {node_label}={data[node_label]!r} (charge {q:+d}) but "
                f"{charge}={extra!r}; make the label and the charge attribute agree (or drop one)"
            )
        atom = Chem.Atom(z)
        atom.SetFormalCharge(extra)
        rw.AddAtom(atom)
    types = _bond_types()
    for u, v, data in graph.edges(data=True):
        if u == v:
            raise ValueError(f"node {u!r} has an edge to itself; an atom cannot bond to itself")
        if edge_label not in data:
            raise ValueError(
                f"edge {(u, v)!r} has no {edge_label!r} attribute; every edge needs its bond "
                "order 1, 2 or 3 there (or pass edge_label=<attribute name>)"
            )
        rw.AddBond(index[u], index[v], types[_bond_order(data[edge_label], (u, v), edge_label)])
    mol = rw.GetMol()
    mol.UpdatePropertyCache(strict=False)
    return mol


def _sanitize_ops(aromaticity: bool = True, cleanup: bool = False) -> Any:
    """RDKit sanitisation flags: everything, less aromaticity perception and/or the clean-up steps."""
    Chem, _ = rdkit_modules()
    flags = Chem.SanitizeFlags
    ops = flags.SANITIZE_ALL
    if not aromaticity:
        ops ^= flags.SANITIZE_SETAROMATICITY
    if not cleanup:
        ops &= ~flags.SANITIZE_CLEANUP
        ops &= ~getattr(flags, "SANITIZE_CLEANUP_ORGANOMETALLICS", 0)
    return ops


def _sanitized(mol: Any, where: str, aromaticity: bool = True, cleanup: bool = False) -> Any:
    """Sanitized copy of ``mol``; ValueError with RDKit's reason when it is not a valid molecule.

    Without ``cleanup`` the molecule is taken literally: RDKit's clean-up steps,
    which rewrite e.g. a neutral N(=O)=O into a charged nitro group or bonds to
    metals into dative bonds, are skipped, so such input is reported invalid
    instead of being silently changed.
    """
    Chem, _ = rdkit_modules()
    out = Chem.Mol(mol)
    try:
        _quiet(Chem.SanitizeMol, out, sanitizeOps=_sanitize_ops(aromaticity, cleanup))
    except (ValueError, RuntimeError) as err:
        raise ValueError(f"{where} is not a valid molecule: RDKit reports: {err}") from err
    return out


def graph_to_mol(
    graph: nx.Graph,
    *,
    node_label: str = "label",
    edge_label: str = "label",
    charge: str = "charge",
    sanitize: bool = True,
) -> Any:
    """RDKit molecule of a heavy-atom graph.

    Parameters
    ----------
    graph : networkx.Graph
        Heavy-atom graph (see the module docstring for the convention).
    node_label, edge_label, charge : str
        Attribute names of the element symbol, the bond order and the formal
        charge (a node without ``charge`` is neutral).
    sanitize : bool, default=True
        Sanitize with RDKit (valences, implicit hydrogens, aromaticity).
        The graph is taken literally: RDKit's clean-up step, which would turn
        a neutral ``N(=O)=O`` into a charged nitro group, is skipped, so such
        a graph is rejected rather than silently changed. With False the
        molecule is returned as built, with its property cache updated
        leniently so that it can be drawn or written even when it is
        chemically invalid.

    Returns
    -------
    rdkit.Chem.Mol
        Atom ``i`` is the ``i``-th node of ``graph.nodes``; hydrogens are
        implicit, from default valences.

    Raises
    ------
    TypeError
        If ``graph`` is not a networkx graph, or an element symbol is not a
        str or a charge not an int.
    ValueError
        If the graph is directed or a multigraph, a node lacks an element
        symbol or has an unknown one, an edge is a self-loop or lacks a bond
        order 1, 2 or 3, or (``sanitize``) RDKit
        rejects the molecule; the message gives RDKit's reason, whose atom
        numbers are positions in ``graph.nodes``.
    ImportError
        If RDKit is not installed.

    Examples
    --------
    >>> mol = graph_to_mol(graph_from_smiles("OC=O"))
    >>> mol.GetNumAtoms(), [a.GetTotalNumHs() for a in mol.GetAtoms()]
    (3, [1, 1, 0])
    """
    mol = _mol_from_graph(graph, node_label, edge_label, charge)
    return _sanitized(mol, "graph") if sanitize else mol


def graph_to_smiles(
    graph: nx.Graph,
    *,
    node_label: str = "label",
    edge_label: str = "label",
    charge: str = "charge",
) -> str:
    """RDKit canonical SMILES (without stereochemistry) of a heavy-atom graph.

    Parameters
    ----------
    graph : networkx.Graph
        Heavy-atom graph; hydrogens are added from default valences.
    node_label, edge_label, charge : str
        Attribute names of the element symbol, the bond order and the formal
        charge (a node without ``charge`` is neutral).

    Returns
    -------
    str
        ``rdkit.Chem.MolToSmiles(mol, isomericSmiles=False)`` of the sanitized
        molecule (aromatic rings in lower case); disconnected graphs give
        ``.``-separated fragments.

    Raises
    ------
    TypeError
        If ``graph`` is not a networkx graph, or a label or charge has the
        wrong type (see :func:`graph_to_mol`).
    ValueError
        If the graph has no nodes, is not a valid molecule (the message gives
        RDKit's reason) or breaks the graph convention (see :func:`graph_to_mol`).
    ImportError
        If RDKit is not installed.

    Examples
    --------
    >>> graph_to_smiles(graph_from_smiles("C1=CC=CC=C1O"))
    'Oc1ccccc1'
    """
    Chem, _ = rdkit_modules()
    _check_graph_type(graph)
    if graph.number_of_nodes() == 0:
        raise ValueError("graph has no nodes; a molecule needs at least one atom")
    mol = graph_to_mol(graph, node_label=node_label, edge_label=edge_label, charge=charge)
    return str(Chem.MolToSmiles(mol, isomericSmiles=False))


@dataclass(frozen=True)
class MoleculeCheck:
    """Outcome of :func:`check_molecule`.

    Attributes
    ----------
    valid : bool
        True when RDKit accepts the graph as a molecule.
    smiles : str or None
        Canonical SMILES when valid; otherwise a SMILES of the unsanitized
        molecule when RDKit can write one, else None.
    message : str or None
        Why the graph is not a valid molecule (None when valid).
    """

    valid: bool
    smiles: str | None
    message: str | None


def _raw_smiles(mol: Any) -> str | None:
    Chem, _ = rdkit_modules()
    try:
        text, _ = _quiet(Chem.MolToSmiles, mol, isomericSmiles=False)
    except (ValueError, RuntimeError):  # pragma: no cover - RDKit writes most molecules
        return None
    return str(text) or None


def check_molecule(
    graph: nx.Graph,
    *,
    node_label: str = "label",
    edge_label: str = "label",
    charge: str = "charge",
) -> MoleculeCheck:
    """Check whether a heavy-atom graph is a valid molecule, without raising.

    Meant for validity rates of predicted graphs: every chemical problem is
    reported in the result, never raised.

    Parameters
    ----------
    graph : networkx.Graph
        Heavy-atom graph (see :func:`graph_to_mol`).
    node_label, edge_label, charge : str
        Attribute names of the element symbol, the bond order and the formal
        charge (a node without ``charge`` is neutral).

    Returns
    -------
    MoleculeCheck
        ``valid``, the SMILES and, when invalid, the reason. A graph without
        nodes, with unknown element symbols, bad bond orders or atoms beyond
        their allowed valence is invalid.

    Raises
    ------
    TypeError
        If ``graph`` is not a networkx graph.
    ImportError
        If RDKit is not installed.

    Examples
    --------
    >>> import networkx as nx
    >>> check_molecule(graph_from_smiles("CC(=O)O"))
    MoleculeCheck(valid=True, smiles='CC(=O)O', message=None)
    >>> star = nx.star_graph(5)  # a carbon with five carbon neighbours
    >>> nx.set_node_attributes(star, "C", "label"); nx.set_edge_attributes(star, 1, "label")
    >>> check_molecule(star).valid
    False
    """
    Chem, _ = rdkit_modules()
    _check_graph_type(graph)
    if graph.number_of_nodes() == 0:
        return MoleculeCheck(False, None, "graph has no nodes; a molecule needs at least one atom")
    try:
        mol = _mol_from_graph(graph, node_label, edge_label, charge)
    except (ValueError, TypeError) as err:  # bad labels or structure; not a graph was checked above
        return MoleculeCheck(False, None, str(err))
    try:
        clean = _sanitized(mol, "graph")
    except ValueError as err:
        return MoleculeCheck(False, _raw_smiles(mol), str(err))
    return MoleculeCheck(True, str(Chem.MolToSmiles(clean, isomericSmiles=False)), None)


# --------------------------------------------------------------------------- SMILES files


def _check_path_exists(path: Path, what: str) -> None:
    if not path.exists():
        raise FileNotFoundError(f"{what} file not found: {str(path)!r}")


def read_smiles_file(
    path: StrPath,
    *,
    node_label: str = "label",
    edge_label: str = "label",
    check_hydrogens: bool = True,
) -> list[nx.Graph]:
    """Read a SMILES file (``.smi``): one molecule per line.

    Parameters
    ----------
    path : str or os.PathLike
        UTF-8 text file. Each line holds a SMILES, optionally followed by
        whitespace and a name (the rest of the line). Blank lines and lines
        starting with ``#`` are skipped.
    node_label, edge_label, check_hydrogens
        As in :func:`graph_from_smiles`.

    Returns
    -------
    list of networkx.Graph
        One graph per molecule line, as :func:`graph_from_smiles` builds it,
        with ``graph.graph["id"]`` set to the line's name when it has one.

    Raises
    ------
    ValueError
        If a line is not UTF-8 or its SMILES is rejected; the message gives
        the file and line number.
    FileNotFoundError
        If ``path`` does not exist.
    ImportError
        If RDKit is not installed.
    """
    p = Path(path)
    _check_path_exists(p, "SMILES")
    graphs: list[nx.Graph] = []
    with open(p, "rb") as fh:
        for lineno, raw in enumerate(fh, start=1):
            where = f"{str(p)!r} line {lineno}"
            try:
                line = raw.decode("utf-8").strip()
            except UnicodeDecodeError as err:
                raise ValueError(f"{where} is not UTF-8 text ({err}); save the file as UTF-8") from err
            if not line or line.startswith("#"):
                continue
            fields = line.split(maxsplit=1)
            try:
                mol = _parse_smiles(fields[0])
            except ValueError as err:
                hint = " (a header line must start with '#')" if lineno == 1 else ""
                raise ValueError(f"{where}{hint}: {err}") from err
            G = _graph_from_parsed(
                mol, f"{where}: SMILES {fields[0]!r}", node_label, edge_label, check_hydrogens
            )
            G.graph["smiles"] = fields[0]
            if len(fields) == 2:
                G.graph["id"] = fields[1]
            graphs.append(G)
    return graphs


def _record_name(G: nx.Graph, index: int) -> str | None:
    """The graph's id (or, from older code, its ``name``), checked to fit on one line; None if absent."""
    key = "id" if "id" in G.graph else "name"
    if key not in G.graph:
        return None
    name = G.graph[key]
    if isinstance(name, numbers.Integral) and not isinstance(name, bool):
        name = str(name)  # GraphML and JSON ids may be numbers; names are text
    if not isinstance(name, str):
        raise TypeError(
            f"graphs[{index}] has {key}={name!r} of type {type(name).__name__}; molecule names "
            "are text in SMILES and SDF files: convert it with str() first"
        )
    if not name or name != name.strip() or "\n" in name or "\r" in name:
        raise ValueError(
            f"graphs[{index}] has {key}={name!r}; a molecule name must be non-empty, on one line "
            "and without leading or trailing whitespace (it would not read back unchanged)"
        )
    return name


def _graph_smiles(G: Any, index: int, node_label: str, edge_label: str, charge: str) -> str:
    _check_graph_type_at(G, index)
    try:
        return graph_to_smiles(G, node_label=node_label, edge_label=edge_label, charge=charge)
    except (ValueError, TypeError) as err:
        raise type(err)(f"graphs[{index}] cannot be written as SMILES: {err}") from err


def _check_graph_type_at(G: Any, index: int) -> None:
    if not isinstance(G, nx.Graph):
        raise TypeError(
            f"graphs[{index}] is a {type(G).__name__}, not a networkx graph; pass a list of "
            "networkx graphs"
        )


def write_smiles_file(
    path: StrPath,
    graphs: Iterable[nx.Graph],
    *,
    node_label: str = "label",
    edge_label: str = "label",
    charge: str = "charge",
) -> None:
    """Write heavy-atom graphs as a SMILES file (``.smi``), one molecule per line.

    Parameters
    ----------
    path : str or os.PathLike
        Target file (replaced if it exists).
    graphs : iterable of networkx.Graph
        Heavy-atom graphs. ``graph.graph["id"]`` (or else ``graph.graph["name"]``),
        when present, is written after the SMILES, separated by a space.
    node_label, edge_label, charge : str
        As in :func:`graph_to_smiles`.

    Raises
    ------
    TypeError
        If an item is not a networkx graph, a name is not a str, or a label
        or charge has the wrong type (see :func:`graph_to_mol`).
    ValueError
        If a graph is not a valid molecule (the message names ``graphs[i]``
        and RDKit's reason) or a name is empty, spans lines or has leading or
        trailing whitespace.
    FileNotFoundError
        If the target directory does not exist.
    ImportError
        If RDKit is not installed.

    Notes
    -----
    Each line holds the canonical SMILES of :func:`graph_to_smiles`, so
    reading the file back gives the same molecules, but with RDKit's atom
    order and kekulé structure, and without node, edge and graph attributes
    other than the element, charge, bond order and name. Use
    :func:`write_sdf` to keep atom order and bond orders exactly.
    """
    graphs = list(graphs)
    lines = []
    for i, G in enumerate(graphs):
        smiles = _graph_smiles(G, i, node_label, edge_label, charge)
        name = _record_name(G, i)
        lines.append(smiles if name is None else f"{smiles} {name}")
    atomic_write_text(path, "".join(line + "\n" for line in lines))


# --------------------------------------------------------------------------- SDF files


def _sd_fields(mol: Any) -> dict[str, str]:
    return {name: mol.GetProp(name) for name in mol.GetPropNames()}


def _graph_from_record(
    mol: Any, where: str, node_label: str, edge_label: str, check_hydrogens: bool
) -> nx.Graph:
    # Keep the bonds as written: no aromaticity perception, only kekulization of
    # aromatic (type 4) bonds.
    clean = _sanitized(mol, where, aromaticity=False, cleanup=True)
    G = _graph_from_parsed(clean, where, node_label, edge_label, check_hydrogens)
    fields = _sd_fields(mol)
    title = mol.GetProp("_Name").strip() if mol.HasProp("_Name") else ""
    if title and "id" in fields and fields["id"] != title:
        raise ValueError(
            f"{where}: has the title {title!r} and a data field 'id' = {fields['id']!r}; both "
            "would become graph.graph['id']: rename the data field"
        )
    G.graph.update(fields)
    if title:
        G.graph["id"] = title
    return G


def read_sdf(
    path: StrPath,
    *,
    node_label: str = "label",
    edge_label: str = "label",
    check_hydrogens: bool = True,
) -> list[nx.Graph]:
    """Read an SDF file (``.sdf``) or a single-record MOL file (``.mol``).

    Parameters
    ----------
    path : str or os.PathLike
        File to read.
    node_label, edge_label, check_hydrogens
        As in :func:`graph_from_smiles`.

    Returns
    -------
    list of networkx.Graph
        One heavy-atom graph per record, nodes ``0 .. n - 1`` in the file's
        atom order (hydrogen atoms folded into their neighbours), bond orders
        as written in the file (aromatic bonds, type 4, are kekulized), the
        record title as ``graph.graph["id"]`` when not blank and each SD
        data field as a str graph attribute.

    Raises
    ------
    ValueError
        If RDKit cannot read a record or rejects its molecule; the message
        gives the file and the record number (1-based). No record is skipped.
    FileNotFoundError
        If ``path`` does not exist.
    ImportError
        If RDKit is not installed.

    Notes
    -----
    Coordinates, stereochemistry and isotopes are dropped.
    """
    Chem, _ = rdkit_modules()
    p = Path(path)
    _check_path_exists(p, "SDF")
    if not p.read_bytes().strip():
        return []  # RDKit refuses empty files; an empty file holds no molecule
    supplier, _ = _quiet(Chem.SDMolSupplier, str(p), sanitize=False, removeHs=False)
    if len(supplier) == 0:  # text too short to hold a MOL block
        raise ValueError(
            f"{str(p)!r} record 1: not a MOL record (a MOL block has three header lines, a "
            "counts line, atom and bond lines and 'M  END'); check that this is an SDF/MOL file"
        )
    graphs: list[nx.Graph] = []
    for k in range(len(supplier)):
        where = f"{str(p)!r} record {k + 1}"
        mol, log = _quiet(supplier.__getitem__, k)
        if mol is None:
            raise ValueError(
                f"{where}: RDKit cannot read this record ({log or 'malformed MOL block'}); "
                "fix or remove it"
            )
        graphs.append(_graph_from_record(mol, where, node_label, edge_label, check_hydrogens))
    return graphs


def _sd_value(G: nx.Graph, index: int, key: Any, value: Any) -> str:
    if not isinstance(key, str) or not key or any(c in key for c in "<>\r\n"):
        raise ValueError(
            f"graphs[{index}] has graph attribute {key!r}; SDF data field names must be "
            "non-empty str without '<', '>' or line breaks: rename it"
        )
    if isinstance(value, bool) or not isinstance(value, (str, numbers.Integral, numbers.Real)):
        raise TypeError(
            f"graphs[{index}] has graph attribute {key}={value!r} of type {type(value).__name__}; "
            "SDF data fields hold text, int or float values only: convert or remove it"
        )
    text = str(value)
    lines = text.split("\n")
    if "\r" in text or any(not line.strip() or line.startswith("$$$$") for line in lines):
        raise ValueError(
            f"graphs[{index}] has graph attribute {key}={value!r}; an SDF data field value "
            "cannot be empty, hold blank lines, carriage returns or lines starting with '$$$$'"
        )
    return text


def _sdf_block(G: Any, index: int, node_label: str, edge_label: str, charge: str) -> str:
    Chem, _ = rdkit_modules()
    _check_graph_type_at(G, index)
    where = f"graphs[{index}]"
    if G.number_of_nodes() == 0:
        raise ValueError(f"{where} has no nodes; a molecule needs at least one atom")
    try:
        mol = _sanitized(_mol_from_graph(G, node_label, edge_label, charge), where, aromaticity=False)
    except (ValueError, TypeError) as err:
        raise type(err)(f"{where} cannot be written as SDF: {err}") from err
    name = _record_name(G, index)
    mol.SetProp("_Name", name or "")
    rdDepictor = require_extra("rdkit.Chem.rdDepictor")

    rdDepictor.Compute2DCoords(mol)
    lines = [Chem.MolToMolBlock(mol, kekulize=False)]
    title_key = "id" if "id" in G.graph else "name"
    for key, value in G.graph.items():
        if key == title_key:
            continue
        lines.append(f">  <{key}>\n{_sd_value(G, index, key, value)}\n\n")
    lines.append("$$$$\n")
    return "".join(lines)


def write_sdf(
    path: StrPath,
    graphs: Iterable[nx.Graph],
    *,
    node_label: str = "label",
    edge_label: str = "label",
    charge: str = "charge",
) -> None:
    """Write heavy-atom graphs as an SDF file (``.sdf``) with 2D coordinates.

    Parameters
    ----------
    path : str or os.PathLike
        Target file (replaced if it exists).
    graphs : iterable of networkx.Graph
        Heavy-atom graphs. ``graph.graph["id"]`` (or else ``graph.graph["name"]``)
        becomes the record title; every other graph attribute (str, int or float) becomes an SD data
        field.
    node_label, edge_label, charge : str
        As in :func:`graph_to_mol`.

    Raises
    ------
    TypeError
        If an item is not a networkx graph, a name is not a str, a graph
        attribute is not a str, int or float, or a label or charge has the
        wrong type (see :func:`graph_to_mol`).
    ValueError
        If a graph has no nodes or is not a valid molecule (the message names
        ``graphs[i]`` and RDKit's reason), or a name or attribute cannot be
        stored in SDF (line breaks, blank values).
    FileNotFoundError
        If the target directory does not exist.
    ImportError
        If RDKit is not installed.

    Notes
    -----
    Atoms are written in ``graph.nodes`` order with the graph's bond orders
    (V2000 MOL blocks, coordinates from :func:`rdkit.Chem.rdDepictor.Compute2DCoords`),
    so :func:`read_sdf` gives back the same graph with nodes ``0 .. n - 1``.
    Data fields are text in SDF and read back as str.
    """
    graphs = list(graphs)
    blocks = [_sdf_block(G, i, node_label, edge_label, charge) for i, G in enumerate(graphs)]
    atomic_write_text(path, "".join(blocks))


# --------------------------------------------------------------------------- fingerprints


def _positive_int(name: str, value: Any, minimum: int) -> int:
    if isinstance(value, bool) or not isinstance(value, numbers.Integral):
        raise TypeError(f"{name} must be an int, got {value!r} of type {type(value).__name__}")
    if value < minimum:
        raise ValueError(f"{name} must be >= {minimum}, got {value}; e.g. radius=2, n_bits=2048")
    return int(value)


def _fingerprint_dtype(dtype: Any) -> tuple[np.dtype[Any], float]:
    """The dtype of a fingerprint array and the largest value it holds exactly."""
    try:
        dt = np.dtype(dtype)
    except TypeError:
        raise TypeError(f"dtype must be a numpy number dtype (e.g. np.uint8), got {dtype!r}") from None
    if dt == np.bool_:
        return dt, 1.0
    if np.issubdtype(dt, np.integer):
        return dt, float(np.iinfo(dt).max)
    if np.issubdtype(dt, np.floating):
        return dt, float(2 ** (np.finfo(dt).nmant + 1))  # integers are exact up to here
    raise TypeError(f"dtype must be a bool, integer or float dtype (e.g. np.uint8), got {dt}")


def _as_mol(item: Any, index: int) -> Any:
    if isinstance(item, str):
        Chem, _ = rdkit_modules()
        try:
            mol = _parse_smiles(item)
        except ValueError as err:
            raise ValueError(f"molecules[{index}]: {err}") from err
        return _quiet(Chem.RemoveHs, mol)[0]  # as Chem.MolFromSmiles does
    if isinstance(item, nx.Graph):
        try:
            return graph_to_mol(item)
        except (ValueError, TypeError) as err:
            raise type(err)(f"molecules[{index}]: {err}") from err
    raise TypeError(
        f"molecules[{index}] is a {type(item).__name__}; pass SMILES strings or heavy-atom "
        "networkx graphs"
    )


def morgan_fingerprints(
    molecules: Sequence[str | nx.Graph],
    *,
    radius: int = 2,
    n_bits: int = 2048,
    counts: bool = False,
    dtype: Any = np.float64,
) -> NDArray[Any]:
    """Morgan (circular) fingerprints of molecules, one row per molecule.

    Parameters
    ----------
    molecules : sequence of str or networkx.Graph
        SMILES strings and/or heavy-atom graphs (mixed allowed). SMILES are
        read as :func:`rdkit.Chem.MolFromSmiles` reads them; graphs are built
        as in :func:`graph_to_mol`.
    radius : int, default=2
        Radius of the atom environments (>= 0).
    n_bits : int, default=2048
        Length of the folded fingerprint (>= 1).
    counts : bool, default=False
        Count how often each bit is hit instead of setting it to 1.
    dtype : numpy dtype, default=np.float64
        Of the result: ``np.uint8`` (or ``bool``) holds bits in an eighth of
        the memory of float64, ``np.uint16`` counts in a quarter.

    Returns
    -------
    ndarray of shape (n_molecules, n_bits), of ``dtype``
        Bits (0/1) or counts, as RDKit's Morgan generator
        (:func:`rdkit.Chem.rdFingerprintGenerator.GetMorganGenerator`) gives
        them with default atom invariants, no chirality.

    Raises
    ------
    TypeError
        If ``molecules`` is a single str, an item is neither a str nor a
        networkx graph, ``radius`` / ``n_bits`` is not an int, or ``dtype``
        is not a bool, integer or float dtype.
    ValueError
        If ``radius < 0``, ``n_bits < 1``, a molecule is rejected (the
        message gives its index), or a count does not fit ``dtype``.
    ImportError
        If RDKit is not installed.

    Examples
    --------
    >>> X = morgan_fingerprints(["CCO", graph_from_smiles("CCO")], n_bits=64)
    >>> X.shape, bool((X[0] == X[1]).all())
    ((2, 64), True)
    >>> morgan_fingerprints(["CCO"], n_bits=64, dtype=np.uint8).dtype
    dtype('uint8')
    """
    if isinstance(molecules, str):
        raise TypeError("molecules must be a sequence of SMILES or graphs, not one str; wrap it: [smiles]")
    radius = _positive_int("radius", radius, 0)
    n_bits = _positive_int("n_bits", n_bits, 1)
    dt, top = _fingerprint_dtype(dtype)
    rdFingerprintGenerator = require_extra("rdkit.Chem.rdFingerprintGenerator", "morgan_fingerprints")

    generator = rdFingerprintGenerator.GetMorganGenerator(radius=radius, fpSize=n_bits)
    fingerprint = generator.GetCountFingerprintAsNumPy if counts else generator.GetFingerprintAsNumPy
    check = counts and top < 2**32  # bits always fit; RDKit's counts are 32-bit
    out = np.zeros((len(molecules), n_bits), dtype=dt)
    for i, item in enumerate(molecules):
        row = fingerprint(_as_mol(item, i))
        if check and row.max() > top:
            raise ValueError(
                f"molecules[{i}] has a fingerprint count of {int(row.max())}, more than dtype {dt} "
                "holds; use a wider dtype (e.g. np.uint16 or np.float64)"
            )
        out[i] = row
    return out


def morgan_bits_of_arrays(
    molecules: Sequence[tuple[Sequence[str], NDArray[np.int64]]], *, radius: int = 2, n_bits: int = 2048
) -> list[NDArray[np.int32] | None]:
    """On-bit positions of the Morgan fingerprints of molecules given as arrays.

    The fast path of :func:`morgan_fingerprints` for molecules built in
    memory (the hypothesis search scores hundreds per input): no networkx
    graph is built, and each molecule is sanitized as :func:`graph_to_mol`
    sanitizes (no clean-up; formal charges from the labels).

    Parameters
    ----------
    molecules : sequence of (sequence of str, ndarray)
        Per molecule, the label of each atom (its element symbol, with the formal
        charge when there is one: ``"N+"``, ``"O-"``, as :func:`graph_from_smiles`
        writes them) and the symmetric bond-order matrix of shape (n, n) (0: no
        bond, else 1, 2 or 3).
    radius, n_bits : int
        As in :func:`morgan_fingerprints`.

    Returns
    -------
    list of (ndarray of int32 or None)
        Per molecule, the sorted positions of its set bits, equal to
        ``np.flatnonzero(morgan_fingerprints([graph])[0])`` for the same
        molecule as a graph; None where RDKit rejects the molecule (use the
        graph path there, which reports why).

    Examples
    --------
    >>> O = np.array([[0, 1, 0], [1, 0, 1], [0, 1, 0]])
    >>> bits, bad = morgan_bits_of_arrays([(["C", "C", "O"], O), (["F", "F", "F"], O)], n_bits=64)
    >>> bool((np.flatnonzero(morgan_fingerprints(["CCO"], n_bits=64)[0]) == bits).all()), bad
    (True, None)
    """
    _, rdBase = rdkit_modules("morgan_bits_of_arrays")
    generator = _morgan_generator(radius, n_bits)
    out: list[NDArray[np.int32] | None] = []
    with rdBase.BlockLogs():
        for elements, orders in molecules:
            mol = mol_from_arrays(elements, orders)
            out.append(None if mol is None else np.flatnonzero(generator.GetFingerprintAsNumPy(mol)).astype(np.int32))
    return out


def mol_from_arrays(labels: Sequence[str], orders: NDArray[np.int64]) -> Any | None:
    """A sanitized RDKit molecule from atom labels and a bond-order matrix, or None.

    Sanitized as :func:`graph_to_mol` sanitizes (no clean-up), without its
    checks and messages: the fast path for molecules built in memory by a
    search.  RDKit's log is not silenced here; wrap calls in
    ``rdkit.rdBase.BlockLogs()``.

    Parameters
    ----------
    labels : sequence of str
        Per atom, its element symbol with the formal charge when there is one
        (``"N+"``, ``"O-"``, as :func:`graph_from_smiles` writes them).
    orders : ndarray of int, shape (n, n)
        Symmetric bond-order matrix (0: no bond, else 1, 2 or 3).

    Returns
    -------
    rdkit.Chem.Mol or None
        None where a label is not an atom, an order is not 1-3, or RDKit's
        sanitization rejects the molecule (e.g. a valence no rule allows).

    Examples
    --------
    >>> O = np.array([[0, 2], [2, 0]])
    >>> mol_from_arrays(["C", "O"], O).GetNumAtoms(), mol_from_arrays(["F", "F"], O)
    (2, None)
    """
    Chem, _ = rdkit_modules("mol_from_arrays")
    types = _bond_types()
    rw = Chem.RWMol()
    try:
        atoms = [split_atom_label(label) for label in labels]  # "N+": N with charge +1
    except ValueError:
        return None
    for symbol, q in atoms:
        try:
            atom = Chem.Atom(symbol)
        except RuntimeError:  # not an element RDKit knows
            return None
        atom.SetFormalCharge(q)
        rw.AddAtom(atom)
    iu, ju = np.nonzero(np.triu(orders, 1))
    bonds = orders[iu, ju].tolist()
    if any(o not in types for o in bonds):
        return None
    for i, j, o in zip(iu.tolist(), ju.tolist(), bonds):
        rw.AddBond(i, j, types[o])
    mol = rw.GetMol()
    mol.UpdatePropertyCache(strict=False)
    try:
        Chem.SanitizeMol(mol, sanitizeOps=_sanitize_ops())
    except (ValueError, RuntimeError):
        return None
    return mol


def morgan_of_mol(
    mol: Any, *, radius: int = 2, n_bits: int = 2048, counts: bool = False, with_atoms: bool = False
) -> tuple[NDArray[np.int64], dict[int, set[int]] | None]:
    """The Morgan fingerprint of one RDKit molecule and, if asked, the atoms behind each bit.

    Parameters
    ----------
    mol : rdkit.Chem.Mol
        A sanitized molecule (e.g. from :func:`mol_from_arrays`).
    radius, n_bits, counts : int, int, bool
        As in :func:`morgan_fingerprints` (the same generator and invariants).
    with_atoms : bool, default=False
        Also return, per set bit, the atoms of every environment that sets it
        (its centre and the atoms within ``radius`` bonds that RDKit's bit
        information lists).

    Returns
    -------
    fingerprint : ndarray of int64, shape (n_bits,)
        Bits (0/1) or counts, equal to the row :func:`morgan_fingerprints`
        gives for the same molecule.
    atoms : dict of int to set of int, or None
        Bit -> atom indices (None unless ``with_atoms``).

    Examples
    --------
    >>> from rdkit import Chem
    >>> fp, atoms = morgan_of_mol(Chem.MolFromSmiles("CCO"), n_bits=64, with_atoms=True)
    >>> int(fp.sum()) == len(atoms)
    True
    """
    Chem, _ = rdkit_modules("morgan_of_mol")
    generator = _morgan_generator(radius, n_bits)
    if not with_atoms:
        get = generator.GetCountFingerprintAsNumPy if counts else generator.GetFingerprintAsNumPy
        return get(mol).astype(np.int64), None
    rdFingerprintGenerator = require_extra("rdkit.Chem.rdFingerprintGenerator", "Morgan fingerprints")
    extra = rdFingerprintGenerator.AdditionalOutput()
    extra.AllocateBitInfoMap()
    get = generator.GetCountFingerprintAsNumPy if counts else generator.GetFingerprintAsNumPy
    fp = get(mol, additionalOutput=extra).astype(np.int64)
    atoms: dict[int, set[int]] = {}
    for bit, environments in extra.GetBitInfoMap().items():
        found = atoms.setdefault(int(bit), set())
        for centre, r in environments:
            found.add(int(centre))
            for b in Chem.FindAtomEnvironmentOfRadiusN(mol, int(r), int(centre)) if r else ():
                bond = mol.GetBondWithIdx(b)
                found.update((bond.GetBeginAtomIdx(), bond.GetEndAtomIdx()))
    return fp, atoms


@lru_cache(maxsize=8)
def _morgan_generator(radius: int, n_bits: int) -> Any:
    rdFingerprintGenerator = require_extra("rdkit.Chem.rdFingerprintGenerator", "Morgan fingerprints")
    return rdFingerprintGenerator.GetMorganGenerator(radius=radius, fpSize=n_bits)

"""Drug-like molecules of 10-50 heavy atoms from the NCI sample that RDKit's wheel ships.

RDKit's PyPI package (BSD-3-Clause licence) carries ``Data/NCI/first_5K.smi``: the first
5,000 structures of the NCI open database (public data of the US National Cancer
Institute), drug-like and screening molecules with S, P, halogens and charged groups
(nitro, quaternary ammonium, N-oxides).  :func:`load_druglike` reads it through
RDKit, keeps the largest fragment of each record (salts lose their counter-ions), and
returns the molecules whose atoms all have a valence rule (no metals, no radicals)
and whose size is in range, as canonical SMILES and heavy-atom graphs with charged
atom labels (:mod:`gwpred.chem`).  Needs the ``chem`` extra; nothing is downloaded.
"""

from __future__ import annotations

import os
from dataclasses import dataclass
from pathlib import Path

import networkx as nx

from .._utils import require_extra
from ..chem import graph_from_smiles

__all__ = ["DruglikeSet", "ORGANIC", "load_druglike"]

#: Elements kept by default: the organic subset of SMILES plus Si and Se.
ORGANIC = ("B", "C", "N", "O", "P", "S", "F", "Cl", "Br", "I", "Si", "Se")


@dataclass(frozen=True)
class DruglikeSet:
    """Molecules of :func:`load_druglike`.

    Attributes
    ----------
    smiles : list of str
        RDKit canonical SMILES of the kept fragment, one per molecule.
    graphs : list of networkx.Graph
        Heavy-atom graphs (labels such as ``"C"``, ``"N+"``, ``"O-"``; bond orders 1-3).
    ids : list of str
        The record's number in the file (its second column).
    rejected : dict of str to int
        Records left out, by reason.
    """

    smiles: list[str]
    graphs: list[nx.Graph]
    ids: list[str]
    rejected: dict[str, int]


def _sample_path() -> Path:
    RDConfig = require_extra("rdkit.RDConfig", "the NCI sample shipped with RDKit")
    return Path(os.path.join(RDConfig.RDDataDir, "NCI", "first_5K.smi"))


def load_druglike(min_atoms: int = 10, max_atoms: int = 50, elements: tuple[str, ...] = ORGANIC) -> DruglikeSet:
    """Read the NCI sample shipped with RDKit into SMILES and charged-label graphs.

    Parameters
    ----------
    min_atoms, max_atoms : int, default=10, 50
        Heavy atoms of the kept fragment, inclusive.
    elements : tuple of str, default=ORGANIC
        Elements allowed in a kept molecule.

    Returns
    -------
    DruglikeSet
        In file order; duplicates (same canonical SMILES) kept once.

    Raises
    ------
    ImportError
        Without RDKit (the ``chem`` extra).
    FileNotFoundError
        When the installed RDKit does not ship the sample.
    """
    Chem = require_extra("rdkit.Chem", "the NCI sample shipped with RDKit")
    RDLogger = require_extra("rdkit.RDLogger", "the NCI sample shipped with RDKit")
    path = _sample_path()
    if not path.is_file():
        raise FileNotFoundError(
            f"{path} not found: this RDKit build does not ship the NCI sample; install RDKit from PyPI "
            "(pip install rdkit)."
        )
    allowed = set(elements)
    smiles: list[str] = []
    graphs: list[nx.Graph] = []
    ids: list[str] = []
    rejected: dict[str, int] = {}
    seen: set[str] = set()

    def reject(reason: str) -> None:
        rejected[reason] = rejected.get(reason, 0) + 1

    RDLogger.DisableLog("rdApp.*")
    try:
        with open(path, encoding="utf-8") as fh:
            for line in fh:
                fields = line.split()
                if not fields:
                    continue
                mol = Chem.MolFromSmiles(fields[0])
                if mol is None:
                    reject("RDKit cannot parse the SMILES")
                    continue
                frags = Chem.GetMolFrags(mol, asMols=True)
                mol = max(frags, key=lambda m: m.GetNumHeavyAtoms())
                if not min_atoms <= mol.GetNumHeavyAtoms() <= max_atoms:
                    reject("size out of range")
                    continue
                if any(a.GetSymbol() not in allowed for a in mol.GetAtoms()):
                    reject("element out of range")
                    continue
                if any(a.GetNumRadicalElectrons() for a in mol.GetAtoms()):
                    reject("radical")
                    continue
                key = Chem.MolToSmiles(mol)
                if key in seen:
                    reject("duplicate")
                    continue
                try:
                    g = graph_from_smiles(key)
                except ValueError:
                    reject("gwpred.chem.graph_from_smiles refuses it")
                    continue
                seen.add(key)
                smiles.append(key)
                graphs.append(g)
                ids.append(fields[1] if len(fields) > 1 else str(len(ids)))
    finally:
        RDLogger.EnableLog("rdApp.*")
    return DruglikeSet(smiles, graphs, ids, rejected)

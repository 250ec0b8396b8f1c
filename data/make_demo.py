"""Build ``data/qm9_demo.npz``, the small QM9 subset bundled with gwpred.

Run from anywhere with the project's Python (needs RDKit and the PyPI package
``qm9pack``, i.e. ``pip install "gwpred[all]"``)::

    python data/make_demo.py                 # writes data/qm9_demo.npz
    python data/make_demo.py --out /tmp/x.npz

What it does (see ``data/README.md`` for the full description):

1. Reads the QM9 CSV files shipped inside the ``qm9pack`` package
   (``qm9_part1.csv`` .. ``qm9_part3.csv``) with the ``csv`` module only; no
   ``qm9pack`` code is imported.
2. Keeps rows whose ``Stoichiometry`` column gives 2..9 heavy atoms, sorted
   by QM9 ``Index``, shuffles them with ``numpy.random.default_rng(20261202)``
   and walks the shuffled list, accepting a molecule when every check in
   :func:`heavy_atom_graph` passes, until 3000 are accepted.
3. Writes the accepted molecules, sorted by QM9 index, as plain numeric and
   fixed-width unicode arrays into a deterministic ``.npz`` archive (fixed
   member order, fixed time stamps), so two runs give byte-identical files.
"""

from __future__ import annotations

import argparse
import csv
import importlib.util
import io
import math
import os
import sys
import zipfile
from collections import Counter
from dataclasses import dataclass
from pathlib import Path

import numpy as np

SEED = 20261202
N_MOLECULES = 3000
MIN_HEAVY = 2  # at least one bond in every graph
MAX_HEAVY = 9  # QM9 holds molecules with at most 9 heavy atoms
FORMAT_VERSION = 1
ELEMENTS = ("C", "N", "O", "F")
STOICHIOMETRY_ORDER = ("H", "C", "N", "O", "F")  # order of the QM9 CSV column
CSV_FILES = ("qm9_part1.csv", "qm9_part2.csv", "qm9_part3.csv")
ZIP_DATE_TIME = (1980, 1, 1, 0, 0, 0)  # earliest date a zip file can hold


@dataclass(frozen=True)
class Row:
    """The columns of one QM9 CSV row that the demo needs."""

    index: int
    smiles: str
    inchi: str
    counts: dict[str, int]  # element symbol -> number of atoms, H included
    frequencies: str  # raw text of Harmonic_Freq_cmi


@dataclass(frozen=True)
class Molecule:
    """One accepted molecule, ready to be packed into arrays."""

    index: int
    smiles: str
    n_hydrogens: int
    elements: tuple[str, ...]
    edges: tuple[tuple[int, int, int], ...]  # (src, dst, bond order), src < dst
    frequencies: tuple[float, ...]


def qm9_data_dir() -> Path:
    """Return the folder holding the QM9 CSV files of the ``qm9pack`` package."""
    spec = importlib.util.find_spec("qm9pack")
    if spec is None or not spec.submodule_search_locations:
        raise SystemExit(
            "make_demo.py: the PyPI package 'qm9pack' is not installed; "
            "install it with: pip install 'qm9pack>=1.0.3'"
        )
    data_dir = Path(list(spec.submodule_search_locations)[0]) / "data"
    missing = [name for name in CSV_FILES if not (data_dir / name).is_file()]
    if missing:
        raise SystemExit(f"make_demo.py: {data_dir} lacks {missing}; reinstall qm9pack")
    return data_dir


def parse_stoichiometry(text: str) -> dict[str, int]:
    """Parse the QM9 ``Stoichiometry`` column, ``"[H,C,N,O,F]"`` atom counts."""
    values = [int(v) for v in text.strip().strip("[]").split(",")]
    if len(values) != len(STOICHIOMETRY_ORDER):
        raise ValueError(f"unexpected Stoichiometry value {text!r}")
    return dict(zip(STOICHIOMETRY_ORDER, values))


def parse_frequencies(text: str) -> list[float]:
    """Parse the ``Harmonic_Freq_cmi`` column, a bracketed list of numbers."""
    body = text.strip().strip("[]").strip()
    return [float(v) for v in body.split(",")] if body else []


def read_rows(data_dir: Path) -> list[Row]:
    """Read the needed columns of every row of the three QM9 CSV files."""
    csv.field_size_limit(sys.maxsize)
    rows: list[Row] = []
    for name in CSV_FILES:
        with open(data_dir / name, newline="", encoding="utf-8") as handle:
            for record in csv.DictReader(handle):
                rows.append(
                    Row(
                        index=int(record["Index"]),
                        smiles=record["SMILES"].strip(),
                        inchi=record["InChi"].strip(),
                        counts=parse_stoichiometry(record["Stoichiometry"]),
                        frequencies=record["Harmonic_Freq_cmi"],
                    )
                )
    rows.sort(key=lambda row: row.index)
    return rows


def _inchi_without_stereo(inchi: str) -> str:
    """Drop the stereo layers (/b /t /m /s) of a standard InChI."""
    return "/".join(p for p in inchi.split("/") if p[:1] not in ("b", "t", "m", "s"))


def heavy_atom_graph(row: Row) -> Molecule | str:
    """Check one row and build its heavy-atom graph.

    Returns the :class:`Molecule`, or a short reason string when the row is
    rejected.
    """
    from rdkit import Chem

    mol = Chem.MolFromSmiles(row.smiles)
    if mol is None:
        return "RDKit cannot parse SMILES"
    if len(Chem.GetMolFrags(mol)) != 1:
        return "more than one fragment"
    heavy = [atom for atom in mol.GetAtoms() if atom.GetAtomicNum() > 1]
    if any(atom.GetFormalCharge() != 0 for atom in mol.GetAtoms()):
        return "formal charge"
    if any(atom.GetNumRadicalElectrons() != 0 for atom in mol.GetAtoms()):
        return "radical"
    symbols = tuple(atom.GetSymbol() for atom in heavy)
    if any(s not in ELEMENTS for s in symbols):
        return "element outside C N O F"
    if not MIN_HEAVY <= len(symbols) <= MAX_HEAVY:
        return "heavy-atom count outside 2..9"
    # The graph must agree with QM9's own composition and identifier.
    n_h = sum(atom.GetTotalNumHs() for atom in mol.GetAtoms())
    counts = Counter(symbols)
    if any(counts.get(e, 0) != row.counts[e] for e in ELEMENTS) or n_h != row.counts["H"]:
        return "SMILES disagrees with Stoichiometry"
    if _inchi_without_stereo(Chem.MolToInchi(mol)) != _inchi_without_stereo(row.inchi):
        return "SMILES disagrees with InChI"
    freqs = parse_frequencies(row.frequencies)
    n_atoms = len(symbols) + n_h
    if len(freqs) not in (3 * n_atoms - 6, 3 * n_atoms - 5):
        return "number of frequencies is not 3N-6 or 3N-5"
    if not all(math.isfinite(f) and f > 0 for f in freqs):
        return "non-positive (imaginary) or non-finite frequency"

    Chem.Kekulize(mol, clearAromaticFlags=True)
    position = {atom.GetIdx(): k for k, atom in enumerate(heavy)}
    edges = []
    for bond in mol.GetBonds():
        a, b = bond.GetBeginAtomIdx(), bond.GetEndAtomIdx()
        if a not in position or b not in position:
            continue  # bond to an explicit hydrogen
        order = bond.GetBondTypeAsDouble()
        if order not in (1.0, 2.0, 3.0):
            return "bond order other than 1, 2 or 3 after kekulization"
        i, j = sorted((position[a], position[b]))
        edges.append((i, j, int(order)))
    edges.sort()
    return Molecule(
        index=row.index,
        smiles=row.smiles,
        n_hydrogens=n_h,
        elements=symbols,
        edges=tuple(edges),
        frequencies=tuple(freqs),
    )


def select(rows: list[Row], n: int, seed: int) -> tuple[list[Molecule], Counter[str]]:
    """Pick ``n`` molecules at random (fixed seed) among the rows that pass."""
    candidates = [
        row for row in rows if MIN_HEAVY <= sum(row.counts[e] for e in ELEMENTS) <= MAX_HEAVY
    ]
    order = np.random.default_rng(seed).permutation(len(candidates))
    chosen: list[Molecule] = []
    rejected: Counter[str] = Counter()
    for k in order:
        result = heavy_atom_graph(candidates[int(k)])
        if isinstance(result, str):
            rejected[result] += 1
            continue
        chosen.append(result)
        if len(chosen) == n:
            break
    if len(chosen) < n:
        raise SystemExit(f"make_demo.py: only {len(chosen)} molecules passed the checks")
    chosen.sort(key=lambda m: m.index)
    return chosen, rejected


def pack(molecules: list[Molecule]) -> dict[str, np.ndarray]:
    """Turn the molecules into the arrays stored in the archive."""
    code = {e: k for k, e in enumerate(ELEMENTS)}
    n_nodes = np.array([len(m.elements) for m in molecules], dtype=np.int8)
    n_edges = np.array([len(m.edges) for m in molecules], dtype=np.int64)
    n_freqs = np.array([len(m.frequencies) for m in molecules], dtype=np.int64)
    width = max(len(m.smiles) for m in molecules)
    edges = [e for m in molecules for e in m.edges]
    return {
        "format_version": np.array(FORMAT_VERSION, dtype=np.int64),
        "elements": np.array(ELEMENTS, dtype="<U2"),
        "qm9_index": np.array([m.index for m in molecules], dtype=np.int32),
        "smiles": np.array([m.smiles for m in molecules], dtype=f"<U{width}"),
        "n_hydrogens": np.array([m.n_hydrogens for m in molecules], dtype=np.int8),
        "n_nodes": n_nodes,
        "node_element": np.array([code[e] for m in molecules for e in m.elements], dtype=np.int8),
        "edge_offsets": np.concatenate([[0], np.cumsum(n_edges)]).astype(np.int32),
        "edge_src": np.array([e[0] for e in edges], dtype=np.int8),
        "edge_dst": np.array([e[1] for e in edges], dtype=np.int8),
        "edge_order": np.array([e[2] for e in edges], dtype=np.int8),
        "freq_offsets": np.concatenate([[0], np.cumsum(n_freqs)]).astype(np.int32),
        "frequencies": np.array([f for m in molecules for f in m.frequencies], dtype=np.float32),
    }


def write_npz(path: Path, arrays: dict[str, np.ndarray]) -> None:
    """Write a byte-reproducible ``.npz`` (a zip of ``.npy`` members).

    ``numpy.savez_compressed`` stamps each member with the current time, so
    two runs would differ; here every member gets the same fixed stamp.
    """
    tmp = path.with_name(path.name + ".tmp")
    with zipfile.ZipFile(tmp, "w", compression=zipfile.ZIP_DEFLATED, compresslevel=9) as zf:
        for name, array in arrays.items():
            buffer = io.BytesIO()
            np.lib.format.write_array(buffer, np.asarray(array, order="C"), allow_pickle=False)
            info = zipfile.ZipInfo(name + ".npy", date_time=ZIP_DATE_TIME)
            info.compress_type = zipfile.ZIP_DEFLATED
            info.external_attr = 0o644 << 16
            zf.writestr(info, buffer.getvalue(), compresslevel=9)
    os.replace(tmp, path)


def summary(molecules: list[Molecule], rejected: Counter[str], path: Path) -> str:
    """Human-readable summary of what was written."""
    sizes = Counter(len(m.elements) for m in molecules)
    elements = Counter(e for m in molecules for e in m.elements)
    orders = Counter(e[2] for m in molecules for e in m.edges)
    n_freqs = [len(m.frequencies) for m in molecules]
    lines = [
        f"wrote {path} ({path.stat().st_size:,} bytes)",
        f"molecules: {len(molecules)} (QM9 index {molecules[0].index}..{molecules[-1].index})",
        "heavy atoms per molecule:",
        *(f"  {k}: {sizes[k]:5d} {'#' * (sizes[k] // 40)}" for k in sorted(sizes)),
        "atoms: " + ", ".join(f"{e} {elements[e]}" for e in ELEMENTS),
        "bonds: " + ", ".join(f"order {k} {orders[k]}" for k in sorted(orders)),
        f"frequencies: {sum(n_freqs)} in total, {min(n_freqs)}..{max(n_freqs)} per molecule",
        "rows examined and rejected: "
        + (", ".join(f"{reason} {n}" for reason, n in rejected.most_common()) or "none"),
    ]
    return "\n".join(lines)


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument(
        "--out",
        type=Path,
        default=Path(__file__).resolve().parent / "qm9_demo.npz",
        help="output file (default: qm9_demo.npz next to this script)",
    )
    args = parser.parse_args(argv)
    from rdkit import RDLogger

    RDLogger.DisableLog("rdApp.*")
    rows = read_rows(qm9_data_dir())
    print(f"read {len(rows)} QM9 rows")
    molecules, rejected = select(rows, N_MOLECULES, SEED)
    write_npz(args.out, pack(molecules))
    print(summary(molecules, rejected, args.out))
    return 0


if __name__ == "__main__":
    raise SystemExit(main())

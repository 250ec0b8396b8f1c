r"""The whole QM9 set, read from the data files of the ``qm9pack`` package.

:func:`load_qm9` reads all of QM9 from the CSV files that the PyPI package
``qm9pack`` installs (extras ``data`` and ``chem``), checks every row, and
caches the parsed molecules as plain arrays (the layout of the demo file of
:mod:`gwpred.datasets.demo`, plus charges). Nothing here downloads anything
at run time.
"""

from __future__ import annotations

import contextlib
import csv
import functools
import hashlib
import importlib.util
import json
import math
import os
import sys
import warnings
import zipfile
from collections.abc import Callable, Iterator, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import networkx as nx
import numpy as np
from numpy.typing import ArrayLike, NDArray

from .._utils import atomic_open, has_extra, install_hint, progress_bar, require_extra
from ..chem import graph_from_smiles, morgan_fingerprints
from ..formula import atomic_number, default_valence, element_of, hill_formula
from ._checks import check_bool, check_half_width, check_offsets, count, int_vector
from .demo import check_graph_arrays, gc_paused, graphs_from_arrays
from .spectra import LINE_SHAPES, broaden, resolve_grid

__all__ = ["Qm9Data", "load_qm9"]

_QM9_CSV_FILES = ("qm9_part1.csv", "qm9_part2.csv", "qm9_part3.csv")
_QM9_COLUMNS = ("Index", "SMILES", "Stoichiometry", "Harmonic_Freq_cmi")
_QM9_STOICHIOMETRY = ("H", "C", "N", "O", "F")  # order of the Stoichiometry column
_QM9_ELEMENTS = ("C", "N", "O", "F")
_QM9_CACHE_FILE = "qm9_full.npz"
_QM9_CACHE_VERSION = 1
_QM9_CACHE_KEYS = (
    "format_version",
    "source_key",
    "n_rows",
    "elements",
    "qm9_index",
    "smiles",
    "stoichiometry",
    "n_nodes",
    "node_element",
    "node_charge",
    "edge_offsets",
    "edge_src",
    "edge_dst",
    "edge_order",
    "freq_offsets",
    "frequencies",
    "reasons",
    "rejected_index",
    "rejected_reason",
)
_HASHED_BYTES = 1 << 20  # bytes hashed at each end of a source file
_FEATURES = ("spectrum", "fingerprint", None)


@dataclass(frozen=True, eq=False)
class Qm9Data:
    """Molecules of QM9 read by :func:`load_qm9`; entry ``i`` of every list
    or array describes the same molecule.

    Attributes
    ----------
    X : ndarray of shape (n, d) or None
        Input features: broadened spectra (float64) or Morgan fingerprints
        (``uint8`` bits or ``uint16`` counts), or None when
        ``load_qm9(features=None)``.
    graphs : list of networkx.Graph
        Heavy-atom graphs: node ``label`` element symbol (str), node
        ``charge`` formal charge (int), edge ``label`` bond order 1, 2 or 3
        (int) of the Kekulé form.
    smiles : list of str
        The QM9 ``SMILES`` column, unchanged.
    formulas : list of str
        Molecular formula with hydrogens in Hill notation (e.g. ``"C2H6O"``),
        from the QM9 ``Stoichiometry`` column.
    index : ndarray of int64 of shape (n,)
        QM9 index of each molecule (``dsgdb9nsd_<index>.xyz``), ascending.
    frequencies : list of ndarray of float64
        Harmonic frequencies in cm^-1, as in the ``Harmonic_Freq_cmi`` column.
    rejected : dict of str to int
        Number of source rows that failed each check (over the whole file
        set, whatever ``min_heavy``/``max_heavy``).
    rejected_index : dict of str to ndarray of int64
        The QM9 indices behind each count of ``rejected``.
    n_rows : int
        Number of rows in the source CSV files.
    """

    X: NDArray[Any] | None
    graphs: list[nx.Graph]
    smiles: list[str]
    formulas: list[str]
    index: NDArray[np.int64]
    frequencies: list[NDArray[np.float64]]
    rejected: dict[str, int]
    rejected_index: dict[str, NDArray[np.int64]]
    n_rows: int

    def __len__(self) -> int:
        return len(self.graphs)


def _qm9_csv_dir() -> Path:
    """Folder holding the QM9 CSV files installed by ``qm9pack`` (not imported)."""
    spec = importlib.util.find_spec("qm9pack")
    if spec is None or not spec.submodule_search_locations:
        raise ImportError(
            "load_qm9 reads the QM9 files of the package 'qm9pack', which is not installed; "
            f"install it with: {install_hint('data')}"
        )
    data_dir = Path(next(iter(spec.submodule_search_locations))) / "data"
    missing = [name for name in _QM9_CSV_FILES if not (data_dir / name).is_file()]
    if missing:
        raise FileNotFoundError(
            f"the qm9pack data folder {data_dir} lacks {missing}; reinstall it with "
            "pip install --force-reinstall 'qm9pack>=1.0.3'"
        )
    return data_dir


def _require_rdkit() -> str:
    """Return RDKit's version, or raise an ImportError naming the extra."""
    if not has_extra("rdkit"):
        raise ImportError(
            "load_qm9 needs RDKit to turn SMILES into graphs; install it with: "
            f"{install_hint('chem')}"
        )
    rdkit = require_extra("rdkit", "load_qm9")
    return str(getattr(rdkit, "__version__", "unknown"))


def _qm9_source_key(data_dir: Path, rdkit_version: str) -> str:
    """Describe the source files and the parser, so that a change rebuilds the cache.

    Each file contributes its name, size and the SHA-256 of its first and
    last MiB.
    """
    files = []
    for name in _QM9_CSV_FILES:
        path = data_dir / name
        size = path.stat().st_size
        digest = hashlib.sha256()
        with open(path, "rb") as handle:
            digest.update(handle.read(_HASHED_BYTES))
            if size > _HASHED_BYTES:
                handle.seek(max(_HASHED_BYTES, size - _HASHED_BYTES))
                digest.update(handle.read(_HASHED_BYTES))
        files.append({"name": name, "size": size, "sha256_ends": digest.hexdigest()})
    key = {"format_version": _QM9_CACHE_VERSION, "files": files, "rdkit": rdkit_version}
    return json.dumps(key, sort_keys=True)


def _qm9_cache_path(cache_dir: str | os.PathLike[str] | None) -> Path:
    """Cache file: ``cache_dir``, else ``$GWPRED_CACHE``, else ``~/.cache/gwpred``."""
    if cache_dir is not None:
        if not isinstance(cache_dir, (str, os.PathLike)):
            raise TypeError(
                f"cache_dir must be a path (str or os.PathLike) or None, got {cache_dir!r}"
            )
        folder = Path(cache_dir)
    elif os.environ.get("GWPRED_CACHE"):
        folder = Path(os.environ["GWPRED_CACHE"])
    else:
        folder = Path.home() / ".cache" / "gwpred"
    folder = folder.expanduser()
    if folder.exists() and not folder.is_dir():
        raise NotADirectoryError(
            f"the QM9 cache folder {folder} exists but is not a folder; pass cache_dir= a "
            "folder or set GWPRED_CACHE"
        )
    return folder / _QM9_CACHE_FILE


# ---- reading the CSV files ------------------------------------------------
def _read_qm9_rows(data_dir: Path) -> list[tuple[str, str, str, str]]:
    """The raw (Index, SMILES, Stoichiometry, Harmonic_Freq_cmi) text of every row."""
    csv.field_size_limit(sys.maxsize)
    rows: list[tuple[str, str, str, str]] = []
    for name in _QM9_CSV_FILES:
        path = data_dir / name
        with open(path, newline="", encoding="utf-8") as handle:
            reader = csv.reader(handle)
            header = next(reader, [])
            missing = [c for c in _QM9_COLUMNS if c not in header]
            if missing:
                raise ValueError(
                    f"{path} lacks the columns {missing}; it is not a QM9 file of qm9pack "
                    "(reinstall qm9pack)"
                )
            cols = [header.index(c) for c in _QM9_COLUMNS]
            width = len(header)
            for line, record in enumerate(reader, start=2):
                if len(record) != width:
                    raise ValueError(
                        f"{path}, row {line}: {len(record)} fields where the header has "
                        f"{width}; the file is damaged (reinstall qm9pack)"
                    )
                rows.append((record[cols[0]], record[cols[1]], record[cols[2]], record[cols[3]]))
    return rows


def _numbers(text: str, kind: type) -> list:
    """Parse a bracketed, comma-separated list such as ``"[4,1,0,0,0]"``."""
    body = text.strip().strip("[]").strip()
    return [kind(v) for v in body.split(",")] if body else []


@dataclass(frozen=True)
class _Molecule:
    """One accepted QM9 row."""

    index: int
    smiles: str
    counts: tuple[int, ...]  # Stoichiometry: H, C, N, O, F
    elements: tuple[int, ...]  # element code per node
    charges: tuple[int, ...]
    edges: tuple[tuple[int, int, int], ...]  # (src, dst, order), src < dst
    frequencies: tuple[float, ...]


# Common practice (isoelectronic rule, as RDKit's default valences): an atom of
# atomic number Z and formal charge q has the default valence of the neutral
# element Z - q (N+ like C: 4; O- like F: 1; C- like N: 3). The valences are
# gwpred.formula.default_valence's, read once at import time into a table keyed
# by Z (a dict look-up per atom in the loop over 130k molecules).
_Z_OF = {e: atomic_number(e) for e in ("B", "C", "N", "O", "F")}
_ATOMIC_NUMBER = {e: _Z_OF[e] for e in _QM9_ELEMENTS}
_VALENCE_OF_Z = {z: default_valence(e) for e, z in _Z_OF.items()}
_ELEMENT_CODE = {e: k for k, e in enumerate(_QM9_ELEMENTS)}


def _qm9_fields(stoichiometry: str, freq_text: str) -> tuple[tuple[int, ...], list[float]] | str:
    """Stoichiometry counts (H, C, N, O, F) and frequencies, or a rejection reason."""
    try:
        counts = tuple(_numbers(stoichiometry, int))
    except ValueError:
        return "unreadable Stoichiometry"
    if len(counts) != len(_QM9_STOICHIOMETRY) or min(counts) < 0:
        return "unreadable Stoichiometry"
    try:
        return counts, _numbers(freq_text, float)
    except ValueError:
        return "unreadable Harmonic_Freq_cmi"


def _graph_parts(g: nx.Graph) -> tuple[list[str], list[int], list[tuple[int, int, int]]] | str:
    """Node labels and charges in node order 0..n-1, and edges (a < b, order); or a reason."""
    n = g.number_of_nodes()
    if sorted(g.nodes) != list(range(n)):
        return "graph nodes are not numbered 0..n-1"
    node = g.nodes
    # QM9's graphs keep plain element labels and the charge apart (its tables were made so):
    # the element of a charged atom label ("N+" -> "N"), the charge from the attribute
    labels = [element_of(node[v]["label"]) for v in range(n)]  # others: refused later, out of range
    charges = [node[v].get("charge", 0) for v in range(n)]
    edges = sorted((min(a, b), max(a, b), o) for a, b, o in g.edges(data="label"))
    return labels, charges, edges


def _connected(n: int, edges: list[tuple[int, int, int]]) -> bool:
    """Whether nodes 0..n-1 with these edges form one piece (n >= 1)."""
    root = list(range(n))

    def find(v: int) -> int:
        while root[v] != v:
            root[v] = root[root[v]]
            v = root[v]
        return v

    pieces = n
    for a, b, _ in edges:
        ra, rb = find(a), find(b)
        if ra != rb:
            root[ra] = rb
            pieces -= 1
    return pieces == 1


def _implied_hydrogens(
    labels: list[str], charges: list[int], edges: list[tuple[int, int, int]]
) -> int | None:
    """Hydrogens that default valences give the graph; None if a valence is exceeded."""
    free = []
    for lab, q in zip(labels, charges):
        valence = _VALENCE_OF_Z.get(_ATOMIC_NUMBER[lab] - q)
        if valence is None:
            return None
        free.append(valence)
    for a, b, order in edges:
        free[a] -= order
        free[b] -= order
    return None if min(free) < 0 else sum(free)


def _graph_problem(
    labels: list[str],
    charges: list[int],
    edges: list[tuple[int, int, int]],
    counts: tuple[int, ...],
) -> str | None:
    """Why the heavy-atom graph does not fit the Stoichiometry counts, or None."""
    if not labels or not _connected(len(labels), edges):
        return "more than one fragment"
    if any(lab not in _QM9_ELEMENTS for lab in labels):
        return "element outside C N O F"
    if [labels.count(e) for e in _QM9_ELEMENTS] != list(counts[1:]):
        return "SMILES disagrees with Stoichiometry (heavy atoms)"
    if any(order not in (1, 2, 3) for _, _, order in edges):
        return "bond order other than 1, 2 or 3"
    if any(type(q) is not int for q in charges):
        return "formal charge is not an integer"
    if _implied_hydrogens(labels, charges, edges) != counts[0]:
        return "SMILES disagrees with Stoichiometry (hydrogens)"
    return None


def _frequency_problem(freqs: list[float], n_atoms: int) -> str | None:
    """Why the harmonic frequencies do not fit a molecule of ``n_atoms``, or None."""
    # Common practice: N atoms have 3N - 6 vibrational modes (3N - 5 if linear).
    if len(freqs) not in (3 * n_atoms - 6, 3 * n_atoms - 5):
        return "number of frequencies is not 3N-6 or 3N-5"
    if not all(math.isfinite(f) and f > 0 for f in freqs):
        return "non-positive (imaginary) or non-finite frequency"
    return None


def _qm9_molecule(
    index: int, smiles: str, stoichiometry: str, freq_text: str, to_graph: Callable
) -> _Molecule | str:
    """Check one row and build its heavy-atom graph; a reason string on rejection."""
    fields = _qm9_fields(stoichiometry, freq_text)
    if isinstance(fields, str):
        return fields
    counts, freqs = fields
    try:
        g = to_graph(smiles)
    except ValueError as exc:
        if str(exc).startswith("RDKit"):  # cannot parse, sanitize or kekulize it
            return "RDKit cannot parse SMILES"
        return "gwpred.chem.graph_from_smiles refuses the SMILES"
    parts = _graph_parts(g)
    if isinstance(parts, str):
        return parts
    labels, charges, edges = parts
    reason = _graph_problem(labels, charges, edges, counts)
    reason = reason or _frequency_problem(freqs, sum(counts))
    if reason is not None:
        return reason
    return _Molecule(
        index=index,
        smiles=smiles,
        counts=counts,
        elements=tuple(_ELEMENT_CODE[lab] for lab in labels),
        charges=tuple(charges),
        edges=tuple(edges),
        frequencies=tuple(freqs),
    )


def _parse_qm9(data_dir: Path, progress: bool) -> dict[str, np.ndarray]:
    """Read and check every row of the QM9 files; return the cache arrays."""
    # graph_from_smiles's own hydrogen check is skipped: it costs as much as the
    # conversion, and _graph_problem compares the hydrogens that the graph implies
    # with the Stoichiometry column instead.
    to_graph = functools.partial(graph_from_smiles, check_hydrogens=False)
    rows = _read_qm9_rows(data_dir)
    accepted: list[_Molecule] = []
    rejected: list[tuple[int, str]] = []
    seen: set[int] = set()
    with _rdkit_quiet(), gc_paused():
        for raw_index, smiles, stoichiometry, freq_text in progress_bar(
            rows, progress=progress, desc="parsing QM9", unit="mol", mininterval=0.5
        ):
            try:
                index = int(raw_index)
            except ValueError:
                raise ValueError(
                    f"QM9 file row with Index {raw_index!r}: not an integer; the files in "
                    f"{data_dir} are damaged (reinstall qm9pack)"
                ) from None
            if index in seen:
                raise ValueError(
                    f"QM9 Index {index} appears twice in {data_dir}; the files are damaged "
                    "(reinstall qm9pack)"
                )
            seen.add(index)
            result = _qm9_molecule(index, smiles.strip(), stoichiometry, freq_text, to_graph)
            if isinstance(result, str):
                rejected.append((index, result))
            else:
                accepted.append(result)
    accepted.sort(key=lambda m: m.index)
    rejected.sort()
    return _pack_qm9(accepted, rejected, len(rows))


@contextlib.contextmanager
def _rdkit_quiet() -> Iterator[None]:
    """Silence RDKit's error log (rejections are counted instead)."""
    RDLogger = require_extra("rdkit.RDLogger", "load_qm9")
    RDLogger.DisableLog("rdApp.*")
    try:
        yield
    finally:
        RDLogger.EnableLog("rdApp.*")


def _offsets_of(lengths: list[int]) -> NDArray[np.int64]:
    return np.concatenate([[0], np.cumsum(np.asarray(lengths, dtype=np.int64))]).astype(np.int64)


def _pack_qm9(
    molecules: list[_Molecule], rejected: list[tuple[int, str]], n_rows: int
) -> dict[str, np.ndarray]:
    """Flat arrays of the accepted molecules (layout of ``qm9_demo.npz`` plus charges)."""
    reasons = sorted({reason for _, reason in rejected})
    reason_code = {r: k for k, r in enumerate(reasons)}
    edges = [e for m in molecules for e in m.edges]
    width = max([len(m.smiles) for m in molecules], default=1)
    return {
        "format_version": np.array(_QM9_CACHE_VERSION, dtype=np.int64),
        "source_key": np.array(""),
        "n_rows": np.array(n_rows, dtype=np.int64),
        "elements": np.array(_QM9_ELEMENTS, dtype="<U2"),
        "qm9_index": np.array([m.index for m in molecules], dtype=np.int64),
        "smiles": np.array([m.smiles for m in molecules], dtype=f"<U{width}"),
        "stoichiometry": np.array([m.counts for m in molecules], dtype=np.int16).reshape(-1, 5),
        "n_nodes": np.array([len(m.elements) for m in molecules], dtype=np.int16),
        "node_element": np.array([c for m in molecules for c in m.elements], dtype=np.int8),
        "node_charge": np.array([q for m in molecules for q in m.charges], dtype=np.int8),
        "edge_offsets": _offsets_of([len(m.edges) for m in molecules]),
        "edge_src": np.array([e[0] for e in edges], dtype=np.int16),
        "edge_dst": np.array([e[1] for e in edges], dtype=np.int16),
        "edge_order": np.array([e[2] for e in edges], dtype=np.int8),
        "freq_offsets": _offsets_of([len(m.frequencies) for m in molecules]),
        "frequencies": np.array([f for m in molecules for f in m.frequencies], dtype=np.float64),
        "reasons": np.array(reasons, dtype=str),
        "rejected_index": np.array([i for i, _ in rejected], dtype=np.int64),
        "rejected_reason": np.array([reason_code[r] for _, r in rejected], dtype=np.int64),
    }


# ---- the cache file -------------------------------------------------------
def _write_qm9_cache(path: Path, arrays: dict[str, np.ndarray]) -> None:
    """Write the cache atomically (temporary file in the same folder, then rename)."""
    path.parent.mkdir(parents=True, exist_ok=True)
    with atomic_open(path, binary=True) as handle:
        np.savez(handle, **arrays)
        os.chmod(handle.name, 0o644)  # whatever the umask: the cache holds public data


class _StaleCache(Exception):
    """The cache was written for other source files or another format."""


def _read_qm9_cache(path: Path, key: str) -> dict[str, np.ndarray]:
    """Read and check the cache arrays.

    Raises ``_StaleCache`` when it belongs to other sources or another
    format, and ``ValueError`` when it is damaged.
    """
    try:
        loaded = np.load(path, allow_pickle=False)
        if not hasattr(loaded, "files"):  # np.load gave one array: a .npy file
            raise ValueError("it holds a single array, not an .npz archive")
        with loaded as archive:
            names = set(archive.files)
            if "format_version" in names and "source_key" in names:
                version = archive["format_version"]
                if version.shape != () or int(version) != _QM9_CACHE_VERSION:
                    raise _StaleCache(f"format version {version.tolist()!r}")
                if str(archive["source_key"]) != key:
                    raise _StaleCache("other source files or RDKit version")
            missing = [k for k in _QM9_CACHE_KEYS if k not in names]
            if missing:
                raise ValueError(f"it lacks the arrays {missing}")
            arrays = {k: archive[k] for k in _QM9_CACHE_KEYS}
    except (OSError, EOFError, zipfile.BadZipFile, zipfile.LargeZipFile) as exc:
        raise ValueError(f"it is not a readable .npz archive ({exc})") from None
    _check_qm9_arrays(arrays)
    return arrays


def _check_qm9_arrays(arrays: dict[str, np.ndarray]) -> None:
    """Check lengths and offsets of the cache arrays (ValueError if inconsistent)."""
    n = arrays["qm9_index"].shape[0] if arrays["qm9_index"].ndim == 1 else -1
    if n < 0 or arrays["smiles"].dtype.kind != "U":
        raise ValueError("qm9_index or smiles has the wrong shape or type")
    for name in ("smiles", "n_nodes"):
        if arrays[name].shape != (n,):
            raise ValueError(f"{name} has shape {arrays[name].shape}, expected ({n},)")
    if arrays["stoichiometry"].shape != (n, len(_QM9_STOICHIOMETRY)):
        raise ValueError(f"stoichiometry has shape {arrays['stoichiometry'].shape}")
    if np.any(arrays["stoichiometry"][:, 1:].sum(axis=1) != arrays["n_nodes"]):
        raise ValueError("node counts disagree with the stored Stoichiometry")
    if np.any(np.diff(arrays["qm9_index"]) <= 0):
        raise ValueError("qm9_index is not strictly increasing")
    check_graph_arrays(
        *(arrays[k] for k in ("n_nodes", "node_element", "elements", "edge_offsets")),
        *(arrays[k] for k in ("edge_src", "edge_dst", "edge_order", "node_charge")),
    )
    freqs = arrays["frequencies"]
    if freqs.ndim != 1 or freqs.dtype != np.float64 or not np.all(np.isfinite(freqs)):
        raise ValueError("frequencies must be a 1-D finite float64 array")
    check_offsets(
        "freq_offsets",
        int_vector("freq_offsets", arrays["freq_offsets"]),
        n,
        freqs.size,
        "frequencies",
    )
    if arrays["rejected_index"].shape != arrays["rejected_reason"].shape:
        raise ValueError("rejected_index and rejected_reason differ in shape")
    codes = arrays["rejected_reason"]
    if codes.size and (codes.min() < 0 or codes.max() >= arrays["reasons"].size):
        raise ValueError("rejected_reason codes outside the reasons list")


def _load_or_build_qm9(
    data_dir: Path, path: Path, key: str, progress: bool
) -> tuple[dict[str, np.ndarray], str]:
    """Cache arrays from ``path`` if valid, else parsed from the CSV files (and cached).

    Returns the arrays and where they came from (for the progress message).
    """
    if path.is_file():
        try:
            return _read_qm9_cache(path, key), f"cache {path}"
        except _StaleCache as exc:
            _note(progress, f"QM9 cache {path} is out of date ({exc}); rebuilding it")
        except ValueError as exc:
            warnings.warn(
                f"the QM9 cache file {path} is damaged ({exc}); it is rebuilt from the "
                "qm9pack CSV files",
                RuntimeWarning,
                stacklevel=3,
            )
    arrays = _parse_qm9(data_dir, progress)
    arrays["source_key"] = np.array(key)
    try:
        _write_qm9_cache(path, arrays)
    except OSError as exc:
        warnings.warn(
            f"could not write the QM9 cache file {path} ({exc}); the data are returned but "
            "will be parsed again next time; pass cache_dir= a writable folder or set "
            "GWPRED_CACHE",
            RuntimeWarning,
            stacklevel=3,
        )
        return arrays, f"{data_dir} (not cached)"
    return arrays, f"{data_dir} (cached in {path})"


def _note(progress: bool, message: str) -> None:
    if progress:
        print(message, file=sys.stderr, flush=True)


# ---- assembling the result --------------------------------------------------
def _hill_formula(counts: Sequence[int]) -> str:
    """Hill notation for counts in Stoichiometry order (H, C, N, O, F)."""
    n = dict(zip(_QM9_STOICHIOMETRY, (int(c) for c in counts)))
    return hill_formula({e: k for e, k in n.items() if e != "H"}, n["H"])


def _select_qm9(
    arrays: dict[str, np.ndarray], keep: NDArray[np.bool_]
) -> tuple[list[nx.Graph], list[str], list[str], NDArray[np.int64], list[NDArray[np.float64]]]:
    """Graphs, SMILES, formulas, indices and frequencies of the kept molecules."""
    n_nodes = arrays["n_nodes"].astype(np.int64)
    n_edges = np.diff(arrays["edge_offsets"])
    n_freqs = np.diff(arrays["freq_offsets"])
    node_keep = np.repeat(keep, n_nodes)
    edge_keep = np.repeat(keep, n_edges)
    graphs = graphs_from_arrays(
        n_nodes[keep],
        arrays["node_element"][node_keep],
        arrays["elements"],
        _offsets_of(n_edges[keep].tolist()),
        arrays["edge_src"][edge_keep],
        arrays["edge_dst"][edge_keep],
        arrays["edge_order"][edge_keep],
        node_charge=arrays["node_charge"][node_keep],
    )
    smiles = [str(s) for s in arrays["smiles"][keep].tolist()]
    for g, s, index in zip(graphs, smiles, arrays["qm9_index"][keep].tolist()):
        g.graph["smiles"] = s  # as gwpred.chem.graph_from_smiles sets it
        g.graph["id"] = f"dsgdb9nsd_{index:06d}"  # QM9's own name of the molecule (its .xyz file)
    freqs = arrays["frequencies"][np.repeat(keep, n_freqs)]
    freq_lists = np.split(freqs, np.cumsum(n_freqs[keep])[:-1]) if keep.any() else []
    memo: dict[tuple[int, ...], str] = {}
    formulas = [
        memo.get(c) or memo.setdefault(c, _hill_formula(c))
        for c in map(tuple, arrays["stoichiometry"][keep].tolist())
    ]
    return graphs, smiles, formulas, arrays["qm9_index"][keep].astype(np.int64), freq_lists


def _rejections(
    arrays: dict[str, np.ndarray],
) -> tuple[dict[str, int], dict[str, NDArray[np.int64]]]:
    reasons = [str(r) for r in arrays["reasons"].tolist()]
    codes, index = arrays["rejected_reason"], arrays["rejected_index"].astype(np.int64)
    which = {r: index[codes == k] for k, r in enumerate(reasons)}
    return {r: int(v.size) for r, v in which.items()}, which


def _check_heavy_range(min_heavy: object, max_heavy: object) -> tuple[int, int]:
    lo = count("min_heavy", min_heavy)
    hi = count("max_heavy", max_heavy)
    if lo < 1:
        raise ValueError(f"min_heavy must be >= 1, got {min_heavy!r}")
    if hi < lo:
        raise ValueError(
            f"max_heavy must be >= min_heavy, got min_heavy={min_heavy!r} and "
            f"max_heavy={max_heavy!r}"
        )
    return lo, hi


def _check_fingerprint_options(radius: object, n_bits: object, counts: object) -> None:
    count("fingerprint_radius", radius)
    if count("fingerprint_bits", n_bits) < 1:
        raise ValueError(f"fingerprint_bits must be >= 1, got {n_bits!r}; use e.g. 2048")
    check_bool("fingerprint_counts", counts)


def load_qm9(
    *,
    features: str | None = "spectrum",
    max_heavy: int = 9,
    min_heavy: int = 1,
    cache_dir: str | os.PathLike[str] | None = None,
    progress: bool = True,
    fingerprint_radius: int = 2,
    fingerprint_bits: int = 2048,
    fingerprint_counts: bool = False,
    half_width: float = 20.0,
    grid: ArrayLike | None = None,
    line_shape: str = "lorentzian",
) -> Qm9Data:
    r"""Load the whole QM9 set from the data files of the ``qm9pack`` package.

    Every row of the QM9 CSV files installed by ``qm9pack``
    (``qm9_part1.csv`` .. ``qm9_part3.csv``; read with the ``csv`` module, no
    ``qm9pack`` code is imported) is turned into a heavy-atom graph with
    :func:`gwpred.chem.graph_from_smiles` and checked. Rows that fail a check
    are not returned but counted by reason in ``rejected`` (and printed when
    ``progress`` is True):

    - the SMILES cannot be parsed by RDKit ("RDKit cannot parse SMILES");
    - the heavy atoms form more than one connected piece ("more than one
      fragment");
    - an element other than C, N, O, F, or heavy-atom counts per element
      that differ from the ``Stoichiometry`` column;
    - a number of harmonic frequencies other than 3N-6 or 3N-5 (N atoms,
      hydrogens included), or a frequency that is not finite and > 0;
    - a bond order other than 1, 2 or 3 in the Kekulé form;
    - an unreadable ``Stoichiometry`` or ``Harmonic_Freq_cmi`` field.

    Unlike ``qm9_demo.npz``, charged molecules (zwitterions) are kept: the
    formal charge is the node attribute ``charge``. The InChI cross-check of
    ``data/make_demo.py`` is not applied (it would double the parse time).

    Parsing takes about a minute; the result is cached (see Notes), so later
    calls take seconds.

    Parameters
    ----------
    features : {"spectrum", "fingerprint", None}, default="spectrum"
        What ``X`` holds: ``"spectrum"``, the harmonic frequencies broadened
        by :func:`broadened_spectra` (unit-height lines, L2-normalised rows;
        same defaults as :func:`load_demo`); ``"fingerprint"``, Morgan
        fingerprints from :func:`gwpred.chem.morgan_fingerprints` of the
        QM9 SMILES, ``np.uint8`` bits (0/1) or ``np.uint16`` counts (about
        20 s; bits of all molecules take about 270 MB at 2048 bits, counts
        twice that; ``X.astype(float)`` would take 2.1 GB: gwpred's
        estimator and kernels accept the integer array as it is); None, no
        features (``X`` is None).
        Spectra of all molecules take about 380 MB.
    max_heavy, min_heavy : int, default=9 and 1
        Keep molecules with ``min_heavy <= heavy atoms <= max_heavy``
        (QM9 has 1 to 9).
    cache_dir : str or os.PathLike, default=None
        Folder of the cache file ``qm9_full.npz``; None means the environment
        variable ``GWPRED_CACHE`` if set, else ``~/.cache/gwpred``.
    progress : bool, default=True
        Show a progress bar while parsing and print a summary (to stderr).
    fingerprint_radius, fingerprint_bits, fingerprint_counts : int, int, bool
        Morgan radius, fingerprint length, and counts instead of bits, for
        ``features="fingerprint"``.
    half_width : float, default=20.0
        Half width at half maximum of each line, cm^-1, for
        ``features="spectrum"``.
    grid : array-like of shape (n_grid,), default=None
        Wavenumbers of the spectrum; None means 400, 410, ..., 4000 cm^-1.
    line_shape : {"lorentzian", "gaussian"}, default="lorentzian"
        Line shape of the spectrum (see :func:`broadened_spectra`).

    Returns
    -------
    data : Qm9Data
        ``X``, ``graphs``, ``smiles``, ``formulas``, ``index``,
        ``frequencies`` (one entry per molecule, ascending QM9 index) and the
        rejection counts.

    Raises
    ------
    ImportError
        If ``qm9pack`` (extra ``data``) or RDKit (extra ``chem``) is missing.
    FileNotFoundError
        If the ``qm9pack`` installation lacks its CSV files.
    NotADirectoryError
        If the cache location exists and is not a folder.
    TypeError, ValueError
        If a parameter is invalid, or the source files are damaged.

    Warns
    -----
    RuntimeWarning
        If the cache file is damaged (it is then rebuilt), or cannot be
        written (the data are still returned).

    Notes
    -----
    The cache file holds the parsed molecules (all of them, whatever
    ``min_heavy``, ``max_heavy`` and ``features``) as plain arrays in the
    layout of ``qm9_demo.npz`` (see ``data/README.md``) plus node charges,
    the Stoichiometry counts and the rejections; it is read with
    ``allow_pickle=False`` and written atomically (temporary file, then
    rename). It records a format version and a key made of each source
    file's name, size and SHA-256 of its first and last MiB, and RDKit's
    version: if any differs, the cache is rebuilt.

    References
    ----------
    .. [1] R. Ramakrishnan, P. O. Dral, M. Rupp, O. A. von Lilienfeld,
       "Quantum chemistry structures and properties of 134 kilo molecules",
       Scientific Data 1, 140022 (2014).

    Examples
    --------
    >>> from gwpred.datasets import load_qm9
    >>> data = load_qm9(features=None, max_heavy=4)  # doctest: +SKIP
    >>> data.formulas[:3], data.smiles[:3]  # doctest: +SKIP
    (['CH4', 'H3N', 'H2O'], ['C', 'N', 'O'])
    """
    if features not in _FEATURES:
        raise ValueError(f"features must be 'spectrum', 'fingerprint' or None, got {features!r}")
    lo, hi = _check_heavy_range(min_heavy, max_heavy)
    show = check_bool("progress", progress)
    if features == "spectrum":
        if not isinstance(line_shape, str) or line_shape not in LINE_SHAPES:
            raise ValueError(f"line_shape must be 'lorentzian' or 'gaussian', got {line_shape!r}")
        hw = check_half_width(half_width)
        nu = resolve_grid(grid, None, None, None)
    elif features == "fingerprint":
        _check_fingerprint_options(fingerprint_radius, fingerprint_bits, fingerprint_counts)
    path = _qm9_cache_path(cache_dir)
    data_dir = _qm9_csv_dir()
    key = _qm9_source_key(data_dir, _require_rdkit())

    arrays, where = _load_or_build_qm9(data_dir, path, key, show)
    n_nodes = arrays["n_nodes"]
    keep = (n_nodes >= lo) & (n_nodes <= hi)
    with gc_paused():
        graphs, smiles, formulas, index, freqs = _select_qm9(arrays, keep)
    rejected, rejected_index = _rejections(arrays)
    n_rows = int(arrays["n_rows"])
    if features == "spectrum":
        X = broaden(list(freqs), nu, hw, True, line_shape)
    elif features == "fingerprint":
        # From the SMILES: four times faster than from the graphs, same values (checked
        # on every 5th QM9 molecule, count fingerprints of radius 2).
        X = morgan_fingerprints(
            smiles,
            radius=fingerprint_radius,
            n_bits=fingerprint_bits,
            counts=fingerprint_counts,
            dtype=np.uint16 if fingerprint_counts else np.uint8,
        )
    else:
        X = None
    _note(show, _qm9_summary(where, n_rows, int(keep.size), rejected, len(graphs), lo, hi))
    return Qm9Data(
        X=X,
        graphs=graphs,
        smiles=smiles,
        formulas=formulas,
        index=index,
        frequencies=freqs,
        rejected=rejected,
        rejected_index=rejected_index,
        n_rows=n_rows,
    )


def _qm9_summary(
    where: str, n_rows: int, n_ok: int, rejected: dict[str, int], n_kept: int, lo: int, hi: int
) -> str:
    detail = ", ".join(f"{r}: {c}" for r, c in sorted(rejected.items(), key=lambda t: -t[1]))
    return (
        f"QM9 from {where}: {n_rows:,} rows, {n_ok:,} passed the checks, "
        f"{sum(rejected.values()):,} rejected ({detail or 'none'}); "
        f"{n_kept:,} molecules with {lo}..{hi} heavy atoms returned"
    )

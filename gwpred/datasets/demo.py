r"""The bundled QM9 demo, and labelled graphs from flat (CSR-like) arrays.

The demo task: propose a small molecule's heavy-atom skeleton from its
computed vibrational spectrum. :func:`load_demo` returns, for 3000 QM9
molecules, a broadened harmonic spectrum per molecule (the inputs) and the
heavy-atom graph (the targets). The data file ``qm9_demo.npz`` is read with
numpy alone (no pickle, no RDKit); ``data/README.md`` gives its source,
licence, layout and the command that rebuilds it.

:func:`graphs_from_arrays` turns the flat graph arrays of that file (also
the layout of the QM9 cache of :mod:`gwpred.datasets.qm9`) into networkx
graphs.
"""

from __future__ import annotations

import contextlib
import gc
import importlib.resources
import io
import os
import zipfile
from collections.abc import Iterator
from pathlib import Path
from typing import Literal, overload

import networkx as nx
import numpy as np
from numpy.typing import ArrayLike, NDArray

from ._checks import check_bool, check_half_width, check_offsets, int_vector
from .spectra import broaden, resolve_grid

__all__ = ["graphs_from_arrays", "load_demo"]

_DEMO_FILE = "qm9_demo.npz"
_DEMO_PACKAGE = "gwpred._demo_data"
_DEMO_FORMAT_VERSION = 1
_REGENERATE = (
    "regenerate it from a source checkout with `python data/make_demo.py` "
    "(needs the extras: pip install 'gwpred[all]')"
)
_DEMO_KEYS = (
    "format_version",
    "elements",
    "qm9_index",
    "smiles",
    "n_hydrogens",
    "n_nodes",
    "node_element",
    "edge_offsets",
    "edge_src",
    "edge_dst",
    "edge_order",
    "freq_offsets",
    "frequencies",
)


# --------------------------------------------------------------------------
# graphs from flat arrays
# --------------------------------------------------------------------------
def graphs_from_arrays(
    n_nodes: ArrayLike,
    node_element: ArrayLike,
    elements: ArrayLike,
    edge_offsets: ArrayLike,
    edge_src: ArrayLike,
    edge_dst: ArrayLike,
    edge_order: ArrayLike,
    *,
    node_charge: ArrayLike | None = None,
) -> list[nx.Graph]:
    """Build labelled graphs from flat (CSR-like) arrays.

    Molecule ``i`` has nodes ``0 .. n_nodes[i] - 1``; their element codes are
    the next ``n_nodes[i]`` entries of ``node_element``. Its edges are
    positions ``edge_offsets[i]:edge_offsets[i + 1]`` of ``edge_src``,
    ``edge_dst`` and ``edge_order`` (node numbers local to the molecule).

    Parameters
    ----------
    n_nodes : array-like of int of shape (n_molecules,)
        Number of nodes of each graph (>= 0).
    node_element : array-like of int of shape (sum(n_nodes),)
        Index into ``elements`` of each node, molecules one after another.
    elements : array-like of str of shape (n_elements,)
        Node label of each code, e.g. ``["C", "N", "O", "F"]``.
    edge_offsets : array-like of int of shape (n_molecules + 1,)
        Start of each molecule's edges; ``edge_offsets[-1]`` is the number of
        edges.
    edge_src, edge_dst : array-like of int of shape (n_edges,)
        End nodes of each edge, local to its molecule.
    edge_order : array-like of int of shape (n_edges,)
        Edge label (bond order) of each edge.
    node_charge : array-like of int of shape (sum(n_nodes),), default=None
        Formal charge of each node, stored as the node attribute ``charge``
        (int). None adds no ``charge`` attribute.

    Returns
    -------
    graphs : list of networkx.Graph
        Nodes carry ``label`` (str) and, if ``node_charge`` is given,
        ``charge`` (int); edges carry ``label`` (int).

    Raises
    ------
    TypeError
        If an index array does not hold integers.
    ValueError
        If the arrays disagree in length, the offsets are not a valid
        partition, a code or node number is out of range, or an edge is a
        self loop or repeated.

    Examples
    --------
    >>> from gwpred.datasets import graphs_from_arrays
    >>> (g,) = graphs_from_arrays([3], [0, 0, 2], ["C", "N", "O"], [0, 2], [0, 1], [1, 2], [1, 2])
    >>> sorted(g.nodes(data="label")), sorted(g.edges(data="label"))
    ([(0, 'C'), (1, 'C'), (2, 'O')], [(0, 1, 1), (1, 2, 2)])
    """
    checked = check_graph_arrays(
        n_nodes, node_element, elements, edge_offsets, edge_src, edge_dst, edge_order, node_charge
    )
    with gc_paused():
        return _build_graphs(*checked)


_GraphArrays = tuple[
    list[str],
    NDArray[np.int64],
    NDArray[np.int64],
    "NDArray[np.int64] | None",
    NDArray[np.int64],
    NDArray[np.int64],
    NDArray[np.int64],
    NDArray[np.int64],
]


def check_graph_arrays(
    n_nodes: ArrayLike,
    node_element: ArrayLike,
    elements: ArrayLike,
    edge_offsets: ArrayLike,
    edge_src: ArrayLike,
    edge_dst: ArrayLike,
    edge_order: ArrayLike,
    node_charge: ArrayLike | None,
) -> _GraphArrays:
    """Validate the arrays of :func:`graphs_from_arrays` (vectorised); return them as int64.

    Returns labels, sizes, codes, charges, offsets, src, dst and order.
    """
    sizes = int_vector("n_nodes", n_nodes)
    codes = int_vector("node_element", node_element)
    labels = [str(e) for e in np.asarray(elements).ravel()]
    offsets = int_vector("edge_offsets", edge_offsets)
    src = int_vector("edge_src", edge_src)
    dst = int_vector("edge_dst", edge_dst)
    order = int_vector("edge_order", edge_order)

    if np.any(sizes < 0):
        raise ValueError(f"n_nodes must be >= 0, got {sizes[sizes < 0][:3].tolist()}")
    if codes.size != sizes.sum():
        raise ValueError(
            f"node_element must have length sum(n_nodes) = {sizes.sum()}, got {codes.size}"
        )
    charges = None if node_charge is None else int_vector("node_charge", node_charge)
    if charges is not None and charges.size != codes.size:
        raise ValueError(
            f"node_charge must have length sum(n_nodes) = {sizes.sum()}, got {charges.size}"
        )
    if codes.size and (codes.min() < 0 or codes.max() >= len(labels)):
        raise ValueError(
            f"node_element codes must lie in 0..{len(labels) - 1} (len(elements) = {len(labels)}), "
            f"got values from {codes.min()} to {codes.max()}"
        )
    if not (src.size == dst.size == order.size):
        raise ValueError(
            "edge_src, edge_dst and edge_order must have equal lengths, got "
            f"{src.size}, {dst.size} and {order.size}"
        )
    check_offsets("edge_offsets", offsets, sizes.size, src.size, "edges")
    edge_size = np.repeat(sizes, np.diff(offsets))  # size of the owning graph, per edge
    bad = (src < 0) | (dst < 0) | (src >= edge_size) | (dst >= edge_size)
    if np.any(bad):
        k = int(np.flatnonzero(bad)[0])
        raise ValueError(
            f"edge {k} joins nodes ({src[k]}, {dst[k]}) outside its graph of {edge_size[k]} nodes; "
            "edge_src/edge_dst must be local node numbers"
        )
    if np.any(src == dst):
        k = int(np.flatnonzero(src == dst)[0])
        raise ValueError(f"edge {k} is a self loop on node {src[k]}; self loops are not allowed")

    _check_repeated_edges(src, dst, np.diff(offsets))
    return labels, sizes, codes, charges, offsets, src, dst, order


def _build_graphs(
    labels: list[str],
    sizes: NDArray[np.int64],
    codes: NDArray[np.int64],
    charges: NDArray[np.int64] | None,
    offsets: NDArray[np.int64],
    src: NDArray[np.int64],
    dst: NDArray[np.int64],
    order: NDArray[np.int64],
) -> list[nx.Graph]:
    """networkx graphs from checked flat arrays (see :func:`graphs_from_arrays`)."""
    # Python objects are made in bulk, then each graph takes its slices.
    node_start = np.concatenate([[0], np.cumsum(sizes)]).tolist()
    local = (np.arange(codes.size) - np.repeat(node_start[:-1], sizes)).tolist()
    if charges is None:
        node_items = [(v, {"label": labels[c]}) for v, c in zip(local, codes.tolist())]
    else:
        node_items = [
            (v, {"label": labels[c], "charge": q})
            for v, c, q in zip(local, codes.tolist(), charges.tolist())
        ]
    edge_items = [
        (a, b, {"label": o}) for a, b, o in zip(src.tolist(), dst.tolist(), order.tolist())
    ]
    edge_start = offsets.tolist()
    graphs: list[nx.Graph] = []
    for i in range(sizes.size):
        g = nx.Graph()
        g.add_nodes_from(node_items[node_start[i] : node_start[i + 1]])
        g.add_edges_from(edge_items[edge_start[i] : edge_start[i + 1]])
        graphs.append(g)
    return graphs


@contextlib.contextmanager
def gc_paused() -> Iterator[None]:
    """Pause Python's cyclic garbage collector while many objects are created.

    Building ~10^5 graphs makes millions of small dicts; each allocation
    burst would trigger collections that scan everything built so far,
    which doubles the run time. Nothing built here forms cycles that need
    collecting early; the collector is restored afterwards.
    """
    was_enabled = gc.isenabled()
    gc.disable()
    try:
        yield
    finally:
        if was_enabled:
            gc.enable()


def _check_repeated_edges(
    src: NDArray[np.int64], dst: NDArray[np.int64], n_edges: NDArray[np.int64]
) -> None:
    """Raise if a graph lists the same (undirected) edge twice."""
    owner = np.repeat(np.arange(n_edges.size), n_edges)
    lo, hi = np.minimum(src, dst), np.maximum(src, dst)
    order = np.lexsort((hi, lo, owner))
    triple = np.stack([owner[order], lo[order], hi[order]])
    same = np.all(triple[:, 1:] == triple[:, :-1], axis=0)
    if np.any(same):
        i = int(triple[0, 1:][same][0])
        raise ValueError(
            f"graph {i} lists the same edge more than once; each edge must appear once"
        )



# --------------------------------------------------------------------------
# demo file
# --------------------------------------------------------------------------
def _read_demo_bytes(path: str | os.PathLike[str] | None) -> tuple[bytes, str]:
    """Return the demo file's bytes and a description of where they came from."""
    if path is not None:
        p = Path(path)
        if not p.is_file():
            raise FileNotFoundError(
                f"path={str(path)!r} is not a file; pass the path of a qm9_demo.npz file"
            )
        return p.read_bytes(), str(p)
    try:
        resource = importlib.resources.files(_DEMO_PACKAGE) / _DEMO_FILE
        if resource.is_file():
            return resource.read_bytes(), f"{_DEMO_PACKAGE}/{_DEMO_FILE}"
    except (ImportError, TypeError, ValueError, AttributeError, NotImplementedError, OSError):
        pass  # not installed with the data mapped in; try the source tree
    # gwpred/datasets/demo.py -> the checkout holding gwpred/ and data/
    fallback = Path(__file__).resolve().parents[2] / "data" / _DEMO_FILE
    if fallback.is_file():
        return fallback.read_bytes(), str(fallback)
    raise FileNotFoundError(
        f"the demo data file {_DEMO_FILE} was found neither in the package {_DEMO_PACKAGE} "
        f"nor at {fallback}; {_REGENERATE}"
    )


def _read_demo_arrays(raw: bytes, where: str) -> dict[str, np.ndarray]:
    """Load and check the arrays of a demo archive."""
    try:
        with np.load(io.BytesIO(raw), allow_pickle=False) as archive:
            names = set(archive.files)
            arrays = {k: archive[k] for k in _DEMO_KEYS if k in names}
    except (OSError, EOFError, ValueError, zipfile.BadZipFile, zipfile.LargeZipFile) as exc:
        raise ValueError(
            f"demo data file {where} is not a readable .npz archive ({exc}); {_REGENERATE}"
        ) from None
    missing = [k for k in _DEMO_KEYS if k not in arrays]
    if missing:
        raise ValueError(
            f"demo data file {where} lacks the arrays {missing}; it is not a gwpred demo "
            f"file or is damaged: {_REGENERATE}"
        )
    version = arrays["format_version"]
    if (
        version.shape != ()
        or not np.issubdtype(version.dtype, np.integer)
        or int(version) != _DEMO_FORMAT_VERSION
    ):
        raise ValueError(
            f"demo data file {where} has format_version {version.tolist()!r}, this gwpred reads "
            f"version {_DEMO_FORMAT_VERSION}; {_REGENERATE}"
        )
    n = arrays["n_nodes"].size
    if arrays["smiles"].dtype.kind != "U":
        raise ValueError(
            f"demo data file {where}: smiles must be a unicode array, got dtype "
            f"{arrays['smiles'].dtype}; {_REGENERATE}"
        )
    for key in ("qm9_index", "smiles", "n_hydrogens"):
        if arrays[key].shape != (n,):
            raise ValueError(
                f"demo data file {where}: {key} has shape {arrays[key].shape}, "
                f"expected ({n},); {_REGENERATE}"
            )
    freqs = arrays["frequencies"]
    if (
        freqs.ndim != 1
        or not np.issubdtype(freqs.dtype, np.floating)
        or not np.all(np.isfinite(freqs))
    ):
        raise ValueError(
            f"demo data file {where}: frequencies must be a 1-D finite float array; {_REGENERATE}"
        )
    try:
        offsets = int_vector("freq_offsets", arrays["freq_offsets"])
        check_offsets("freq_offsets", offsets, n, freqs.size, "frequencies")
    except (TypeError, ValueError) as exc:
        raise ValueError(f"demo data file {where}: {exc}; {_REGENERATE}") from None
    return arrays


@overload
def load_demo(
    *,
    return_smiles: Literal[False] = ...,
    half_width: float = ...,
    grid: ArrayLike | None = ...,
    start: float | None = ...,
    stop: float | None = ...,
    step: float | None = ...,
    normalize: bool = ...,
    path: str | os.PathLike[str] | None = ...,
) -> tuple[NDArray[np.float64], list[nx.Graph]]: ...


@overload
def load_demo(
    *,
    return_smiles: Literal[True],
    half_width: float = ...,
    grid: ArrayLike | None = ...,
    start: float | None = ...,
    stop: float | None = ...,
    step: float | None = ...,
    normalize: bool = ...,
    path: str | os.PathLike[str] | None = ...,
) -> tuple[NDArray[np.float64], list[nx.Graph], list[str]]: ...


def load_demo(
    *,
    return_smiles: bool = False,
    half_width: float = 20.0,
    grid: ArrayLike | None = None,
    start: float | None = None,
    stop: float | None = None,
    step: float | None = None,
    normalize: bool = True,
    path: str | os.PathLike[str] | None = None,
) -> (
    tuple[NDArray[np.float64], list[nx.Graph]]
    | tuple[NDArray[np.float64], list[nx.Graph], list[str]]
):
    r"""Load the bundled QM9 demo: broadened spectra and heavy-atom graphs.

    3000 molecules of QM9 [1]_ with 2 to 9 heavy atoms (C, N, O, F), chosen
    at random with a fixed seed (see ``data/README.md``). The input of each
    molecule is its computed harmonic vibrational spectrum, broadened on a
    grid; the target is its heavy-atom graph.

    Broadening: each harmonic frequency :math:`\nu_k` (cm^-1, B3LYP as
    computed for QM9) becomes a unit-height Lorentzian
    :math:`1 / (1 + ((\nu - \nu_k)/\gamma)^2)` with half width at half maximum
    :math:`\gamma` = ``half_width``; the lines are summed on the grid (by
    default 400 to 4000 cm^-1 in steps of 10, 361 points) and each spectrum
    is divided by its L2 norm. Intensities are not used: every mode counts
    the same. See :func:`lorentzian_spectra`.

    Parameters
    ----------
    return_smiles : bool, default=False
        Also return the QM9 SMILES of each molecule.
    half_width : float, default=20.0
        Lorentzian half width at half maximum, in cm^-1.
    grid : array-like of shape (n_grid,), default=None
        Wavenumbers at which to evaluate; cannot be combined with ``start``,
        ``stop`` or ``step``.
    start, stop, step : float, default=None
        Grid bounds and spacing when ``grid`` is None; None means 400.0,
        4000.0 and 10.0.
    normalize : bool, default=True
        Divide each spectrum by its L2 norm.
    path : str or os.PathLike, default=None
        Read this file instead of the bundled one (same format).

    Returns
    -------
    X : ndarray of shape (3000, n_grid)
        Broadened spectra, float64; ``n_grid`` is 361 by default.
    graphs : list of networkx.Graph
        Heavy-atom graphs, nodes ``0 .. n - 1`` with ``label`` the element
        symbol (str), edges with ``label`` the bond order 1, 2 or 3 (int) of
        RDKit's Kekulé form; ``graph.graph["id"]`` is QM9's name of the
        molecule (``dsgdb9nsd_<index>``, its file name in QM9).
    smiles : list of str
        Only if ``return_smiles`` is True: the SMILES of each molecule as
        given in QM9.

    Raises
    ------
    FileNotFoundError
        If the data file is missing (the message says how to rebuild it), or
        ``path`` is not a file.
    ValueError
        If the file is not a valid demo archive or has another
        ``format_version``, or a broadening parameter is invalid.
    TypeError
        If a parameter has the wrong type.

    Notes
    -----
    The file is looked up first as the resource ``qm9_demo.npz`` of the
    package ``gwpred._demo_data`` (an installed copy of the top-level
    ``data/`` folder), then at ``data/qm9_demo.npz`` next to the ``gwpred``
    source folder. It is read with ``allow_pickle=False``; RDKit is not
    needed.

    References
    ----------
    .. [1] R. Ramakrishnan, P. O. Dral, M. Rupp, O. A. von Lilienfeld,
       "Quantum chemistry structures and properties of 134 kilo molecules",
       Scientific Data 1, 140022 (2014).

    Examples
    --------
    >>> from gwpred.datasets import load_demo
    >>> X, graphs, smiles = load_demo(return_smiles=True)
    >>> X.shape, len(graphs), len(smiles)
    ((3000, 361), 3000, 3000)
    """
    want_smiles = check_bool("return_smiles", return_smiles)
    hw = check_half_width(half_width)
    nu = resolve_grid(grid, start, stop, step)
    norm = check_bool("normalize", normalize)
    raw, where = _read_demo_bytes(path)
    arrays = _read_demo_arrays(raw, where)
    try:
        graphs = graphs_from_arrays(
            arrays["n_nodes"],
            arrays["node_element"],
            arrays["elements"],
            arrays["edge_offsets"],
            arrays["edge_src"],
            arrays["edge_dst"],
            arrays["edge_order"],
        )
    except (TypeError, ValueError) as exc:
        raise ValueError(
            f"demo data file {where} holds inconsistent graph arrays ({exc}); {_REGENERATE}"
        ) from None
    for g, index in zip(graphs, arrays["qm9_index"].tolist()):
        g.graph["id"] = f"dsgdb9nsd_{index:06d}"  # QM9's own name of the molecule (its .xyz file)
    offsets = arrays["freq_offsets"].astype(np.int64)
    freqs = arrays["frequencies"].astype(np.float64)
    lines = [freqs[offsets[i] : offsets[i + 1]] for i in range(offsets.size - 1)]
    X = broaden(lines, nu, hw, norm)
    if want_smiles:
        return X, graphs, [str(s) for s in arrays["smiles"].tolist()]
    return X, graphs

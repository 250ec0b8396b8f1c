r"""Bundled demo data and broadened vibrational spectra.

The demo task: propose a small molecule's heavy-atom skeleton from its
computed vibrational spectrum. :func:`load_demo` returns, for 3000 QM9
molecules, a broadened harmonic spectrum per molecule (the inputs) and the
heavy-atom graph (the targets). The data file ``qm9_demo.npz`` is read with
numpy alone (no pickle, no RDKit); ``data/README.md`` gives its source,
licence, layout and the command that rebuilds it.

Nothing here downloads anything at run time.
"""

from __future__ import annotations

import importlib.resources
import io
import numbers
import os
import zipfile
from collections.abc import Sequence
from pathlib import Path
from typing import Literal, overload

import networkx as nx
import numpy as np
from numpy.typing import ArrayLike, NDArray

__all__ = [
    "wavenumber_grid",
    "lorentzian_spectrum",
    "lorentzian_spectra",
    "graphs_from_arrays",
    "load_demo",
]

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
# Upper bound on the (lines x grid points) block evaluated at once.
_BLOCK_ELEMENTS = 2_000_000


# --------------------------------------------------------------------------
# validation helpers
# --------------------------------------------------------------------------
def _real(name: str, value: object) -> float:
    """Return ``value`` as a finite float, or raise naming ``name``."""
    if isinstance(value, bool) or not isinstance(value, numbers.Real):
        raise TypeError(
            f"{name} must be a real number, got {value!r} of type {type(value).__name__}"
        )
    out = float(value)
    if not np.isfinite(out):
        raise ValueError(f"{name} must be finite, got {value!r}; pass a finite number")
    return out


def _float_vector(name: str, value: ArrayLike, hint: str = "") -> NDArray[np.float64]:
    """Return ``value`` as a 1-D finite float64 array, or raise naming ``name``."""
    try:
        arr = np.asarray(value, dtype=np.float64)
    except (TypeError, ValueError) as exc:
        raise TypeError(
            f"{name} must be a 1-D array of real numbers, got {value!r} "
            f"({type(value).__name__}): {exc}"
        ) from None
    if arr.ndim != 1:
        raise ValueError(f"{name} must be 1-D, got an array of shape {arr.shape}{hint}")
    if not np.all(np.isfinite(arr)):
        bad = arr[~np.isfinite(arr)][:3]
        raise ValueError(
            f"{name} must hold finite values only, got {bad.tolist()}; remove NaN/inf entries"
        )
    return arr


def _resolve_grid(
    grid: ArrayLike | None,
    start: float | None,
    stop: float | None,
    step: float | None,
) -> NDArray[np.float64]:
    """Return the evaluation grid from ``grid`` or from ``start/stop/step``."""
    if grid is None:
        return wavenumber_grid(
            400.0 if start is None else start,
            4000.0 if stop is None else stop,
            10.0 if step is None else step,
        )
    given = [n for n, v in (("start", start), ("stop", stop), ("step", step)) if v is not None]
    if given:
        raise ValueError(
            f"grid was given together with {', '.join(given)}; pass either grid "
            "or start/stop/step, not both"
        )
    arr = _float_vector("grid", grid)
    if arr.size == 0:
        raise ValueError("grid must hold at least one wavenumber, got an empty array")
    return arr


def _check_half_width(half_width: float) -> float:
    hw = _real("half_width", half_width)
    if hw <= 0:
        raise ValueError(f"half_width must be > 0 (cm^-1), got {half_width!r}; use e.g. 20.0")
    return hw


def _check_bool(name: str, value: object) -> bool:
    if not isinstance(value, (bool, np.bool_)):
        raise TypeError(f"{name} must be True or False, got {value!r}")
    return bool(value)


# --------------------------------------------------------------------------
# spectra
# --------------------------------------------------------------------------
def wavenumber_grid(
    start: float = 400.0, stop: float = 4000.0, step: float = 10.0
) -> NDArray[np.float64]:
    """Evenly spaced wavenumbers from ``start`` to ``stop`` inclusive.

    Parameters
    ----------
    start : float, default=400.0
        First grid value, in cm^-1.
    stop : float, default=4000.0
        Last grid value, in cm^-1 (included when ``stop - start`` is a
        multiple of ``step``).
    step : float, default=10.0
        Spacing, in cm^-1; must be > 0.

    Returns
    -------
    grid : ndarray of shape (n_grid,)
        ``np.arange(start, stop + step / 2, step)``; 361 points by default.

    Raises
    ------
    TypeError
        If an argument is not a real number.
    ValueError
        If an argument is not finite, ``step <= 0`` or ``stop < start``.

    Examples
    --------
    >>> from gwpred.datasets import wavenumber_grid
    >>> g = wavenumber_grid()
    >>> g.shape, float(g[0]), float(g[-1])
    ((361,), 400.0, 4000.0)
    """
    lo = _real("start", start)
    hi = _real("stop", stop)
    dv = _real("step", step)
    if dv <= 0:
        raise ValueError(f"step must be > 0 (cm^-1), got {step!r}; use e.g. 10.0")
    if hi < lo:
        raise ValueError(f"stop must be >= start, got start={start!r} and stop={stop!r}; swap them")
    return np.arange(lo, hi + dv / 2, dv, dtype=np.float64)


def lorentzian_spectra(
    frequencies: Sequence[ArrayLike],
    *,
    grid: ArrayLike | None = None,
    half_width: float = 20.0,
    start: float | None = None,
    stop: float | None = None,
    step: float | None = None,
    normalize: bool = True,
) -> NDArray[np.float64]:
    r"""Broaden several line lists into spectra on one common grid.

    Row ``i`` of the result is :func:`lorentzian_spectrum` of
    ``frequencies[i]``; the work is done in blocks of lines, not per molecule.

    .. math::

        S_i(\nu) = \sum_{k} \frac{1}{1 + \left((\nu - \nu_{ik}) / \gamma\right)^2}

    Where:

    - :math:`\nu` runs over the grid (cm^-1),
    - :math:`\nu_{ik}` are the line positions of item :math:`i` (cm^-1),
    - :math:`\gamma` is ``half_width``, the half width at half maximum.

    Parameters
    ----------
    frequencies : sequence of array-like of shape (n_lines_i,)
        One 1-D array of line positions (cm^-1) per item; lengths may
        differ, and an empty array is allowed.
    grid : array-like of shape (n_grid,), default=None
        Wavenumbers at which to evaluate. If None, the grid is
        ``wavenumber_grid(start, stop, step)``. Cannot be combined with
        ``start``, ``stop`` or ``step``.
    half_width : float, default=20.0
        Half width at half maximum :math:`\gamma` of every line, in cm^-1.
    start, stop, step : float, default=None
        Grid bounds and spacing when ``grid`` is None; None means 400.0,
        4000.0 and 10.0.
    normalize : bool, default=True
        Divide each row by its Euclidean (L2) norm.

    Returns
    -------
    spectra : ndarray of shape (n_items, n_grid)
        Broadened spectra, float64.

    Raises
    ------
    TypeError
        If ``frequencies`` is not a sequence of arrays of numbers, or a scalar
        parameter has the wrong type.
    ValueError
        If a line position or grid value is NaN/inf, an item is not 1-D,
        ``half_width <= 0``, the grid is empty, or ``grid`` is combined with
        ``start``/``stop``/``step``.

    See Also
    --------
    lorentzian_spectrum : the same for a single line list.

    Notes
    -----
    Every line has unit height, so before normalisation the value at a line's
    own position is 1 plus the tails of the other lines. A row whose lines
    are all absent (empty array) is all zeros and stays all zeros after
    normalisation; no NaN is produced. Line positions may lie outside the grid
    (their tails still count) and may be negative.

    Examples
    --------
    >>> from gwpred.datasets import lorentzian_spectra
    >>> s = lorentzian_spectra([[1000.0], [1000.0, 3000.0], []])
    >>> s.shape
    (3, 361)
    >>> [round(float(v), 6) for v in (s ** 2).sum(axis=1)]
    [1.0, 1.0, 0.0]
    """
    if isinstance(frequencies, (str, bytes)) or not isinstance(frequencies, (Sequence, np.ndarray)):
        raise TypeError(
            "frequencies must be a list of 1-D arrays (one per item), got "
            f"{type(frequencies).__name__}; for one line list use lorentzian_spectrum"
        )
    hw = _check_half_width(half_width)
    nu = _resolve_grid(grid, start, stop, step)
    norm = _check_bool("normalize", normalize)
    hint = "; pass a list of 1-D arrays, or lorentzian_spectrum(array) for a single line list"
    lines = [_float_vector(f"frequencies[{i}]", f, hint) for i, f in enumerate(frequencies)]
    return _broaden(lines, nu, hw, norm)


def lorentzian_spectrum(
    frequencies: ArrayLike,
    *,
    grid: ArrayLike | None = None,
    half_width: float = 20.0,
    start: float | None = None,
    stop: float | None = None,
    step: float | None = None,
    normalize: bool = True,
) -> NDArray[np.float64]:
    r"""Broaden one list of line positions into a spectrum.

    .. math::

        S(\nu) = \sum_{k} \frac{1}{1 + \left((\nu - \nu_k) / \gamma\right)^2}

    Where :math:`\nu_k` are the line positions and :math:`\gamma` is
    ``half_width``; :math:`S` is then divided by its L2 norm if
    ``normalize`` is True.

    Parameters
    ----------
    frequencies : array-like of shape (n_lines,)
        Line positions in cm^-1 (e.g. harmonic frequencies). May be empty.
    grid : array-like of shape (n_grid,), default=None
        Wavenumbers at which to evaluate. If None, the grid is
        ``wavenumber_grid(start, stop, step)`` (361 points from 400 to 4000
        cm^-1 by default). Cannot be combined with ``start``, ``stop`` or
        ``step``.
    half_width : float, default=20.0
        Half width at half maximum of every line, in cm^-1.
    start, stop, step : float, default=None
        Grid bounds and spacing when ``grid`` is None; None means 400.0,
        4000.0 and 10.0.
    normalize : bool, default=True
        Divide by the Euclidean (L2) norm.

    Returns
    -------
    spectrum : ndarray of shape (n_grid,)
        The broadened spectrum, float64.

    Raises
    ------
    TypeError
        If ``frequencies`` is not numeric, or a scalar parameter has the wrong
        type.
    ValueError
        If ``frequencies`` is not 1-D or holds NaN/inf, ``half_width <= 0``,
        the grid is empty or non-finite, or ``grid`` is combined with
        ``start``/``stop``/``step``.

    See Also
    --------
    lorentzian_spectra : the batched version, one row per line list.

    Notes
    -----
    Lines have unit height and ``half_width`` is the half width at half
    maximum: before normalisation a single line at :math:`\nu_0` gives 1 at
    :math:`\nu_0` and 1/2 at :math:`\nu_0 \pm \gamma`. An empty line list gives
    an all-zero spectrum, also when ``normalize`` is True (no NaN).

    References
    ----------
    .. [1] Any spectroscopy text: the Lorentzian (Cauchy) line shape with half
       width at half maximum :math:`\gamma` is
       :math:`1 / (1 + ((\nu - \nu_0)/\gamma)^2)` at unit height.

    Examples
    --------
    >>> from gwpred.datasets import lorentzian_spectrum
    >>> s = lorentzian_spectrum([1000.0], normalize=False)
    >>> float(s[60]), float(s[58]), float(s[62])   # grid values 1000, 980, 1020
    (1.0, 0.5, 0.5)
    """
    hw = _check_half_width(half_width)
    nu = _resolve_grid(grid, start, stop, step)
    norm = _check_bool("normalize", normalize)
    hint = "; for several line lists use lorentzian_spectra(list_of_arrays)"
    lines = _float_vector("frequencies", frequencies, hint)
    return _broaden([lines], nu, hw, norm)[0]


def _broaden(
    lines: list[NDArray[np.float64]],
    grid: NDArray[np.float64],
    half_width: float,
    normalize: bool,
) -> NDArray[np.float64]:
    """Sum unit-height Lorentzians per item, in blocks of lines (no validation)."""
    n_items, n_grid = len(lines), grid.size
    out = np.zeros((n_items, n_grid), dtype=np.float64)
    counts = np.fromiter((a.size for a in lines), dtype=np.int64, count=n_items)
    if counts.sum() == 0:
        return out
    positions = np.concatenate(lines)
    owner = np.repeat(np.arange(n_items), counts)  # item of each line, sorted
    block = max(1, _BLOCK_ELEMENTS // n_grid)
    for lo in range(0, positions.size, block):
        pos = positions[lo : lo + block]
        own = owner[lo : lo + block]
        shape = 1.0 / (1.0 + ((grid[None, :] - pos[:, None]) / half_width) ** 2)
        # first line of each item within the block; segments are contiguous
        first = np.flatnonzero(np.r_[True, own[1:] != own[:-1]])
        out[own[first]] += np.add.reduceat(shape, first, axis=0)
    if normalize:
        norms = np.linalg.norm(out, axis=1)
        nonzero = norms > 0
        out[nonzero] /= norms[nonzero, None]
    return out


# --------------------------------------------------------------------------
# graphs
# --------------------------------------------------------------------------
def _int_vector(name: str, value: ArrayLike) -> NDArray[np.int64]:
    arr = np.asarray(value)
    if arr.ndim != 1:
        raise ValueError(f"{name} must be 1-D, got shape {arr.shape}")
    if arr.size and not np.issubdtype(arr.dtype, np.integer):
        raise TypeError(f"{name} must hold integers, got dtype {arr.dtype}")
    return arr.astype(np.int64)


def _offsets(name: str, offsets: NDArray[np.int64], n_items: int, total: int, what: str) -> None:
    if offsets.size != n_items + 1:
        raise ValueError(
            f"{name} must have length n_molecules + 1 = {n_items + 1}, got {offsets.size}"
        )
    if offsets[0] != 0 or offsets[-1] != total or np.any(np.diff(offsets) < 0):
        raise ValueError(
            f"{name} must start at 0, never decrease and end at the number of {what} "
            f"({total}), got {offsets[:3].tolist()}...{offsets[-2:].tolist()}"
        )


def graphs_from_arrays(
    n_nodes: ArrayLike,
    node_element: ArrayLike,
    elements: ArrayLike,
    edge_offsets: ArrayLike,
    edge_src: ArrayLike,
    edge_dst: ArrayLike,
    edge_order: ArrayLike,
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

    Returns
    -------
    graphs : list of networkx.Graph
        Nodes carry ``label`` (str), edges carry ``label`` (int).

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
    sizes = _int_vector("n_nodes", n_nodes)
    codes = _int_vector("node_element", node_element)
    labels = [str(e) for e in np.asarray(elements).ravel()]
    offsets = _int_vector("edge_offsets", edge_offsets)
    src = _int_vector("edge_src", edge_src)
    dst = _int_vector("edge_dst", edge_dst)
    order = _int_vector("edge_order", edge_order)

    if np.any(sizes < 0):
        raise ValueError(f"n_nodes must be >= 0, got {sizes[sizes < 0][:3].tolist()}")
    if codes.size != sizes.sum():
        raise ValueError(
            f"node_element must have length sum(n_nodes) = {sizes.sum()}, got {codes.size}"
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
    _offsets("edge_offsets", offsets, sizes.size, src.size, "edges")
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

    node_start = np.concatenate([[0], np.cumsum(sizes)])
    graphs: list[nx.Graph] = []
    for i in range(sizes.size):
        g = nx.Graph()
        node_codes = codes[node_start[i] : node_start[i + 1]].tolist()
        g.add_nodes_from((v, {"label": labels[c]}) for v, c in enumerate(node_codes))
        lo, hi = offsets[i], offsets[i + 1]
        triples = zip(src[lo:hi].tolist(), dst[lo:hi].tolist(), order[lo:hi].tolist())
        g.add_edges_from((a, b, {"label": o}) for a, b, o in triples)
        if g.number_of_edges() != hi - lo:
            raise ValueError(
                f"graph {i} lists the same edge more than once; each edge must appear once"
            )
        graphs.append(g)
    return graphs


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
    fallback = Path(__file__).resolve().parents[1] / "data" / _DEMO_FILE
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
        offsets = _int_vector("freq_offsets", arrays["freq_offsets"])
        _offsets("freq_offsets", offsets, n, freqs.size, "frequencies")
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
        RDKit's Kekulé form.
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
    want_smiles = _check_bool("return_smiles", return_smiles)
    hw = _check_half_width(half_width)
    nu = _resolve_grid(grid, start, stop, step)
    norm = _check_bool("normalize", normalize)
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
    offsets = arrays["freq_offsets"].astype(np.int64)
    freqs = arrays["frequencies"].astype(np.float64)
    lines = [freqs[offsets[i] : offsets[i + 1]] for i in range(offsets.size - 1)]
    X = _broaden(lines, nu, hw, norm)
    if want_smiles:
        return X, graphs, [str(s) for s in arrays["smiles"].tolist()]
    return X, graphs

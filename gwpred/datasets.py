r"""Bundled demo data, the full QM9 set, broadened vibrational spectra and splits.

The demo task: propose a small molecule's heavy-atom skeleton from its
computed vibrational spectrum. :func:`load_demo` returns, for 3000 QM9
molecules, a broadened harmonic spectrum per molecule (the inputs) and the
heavy-atom graph (the targets). The data file ``qm9_demo.npz`` is read with
numpy alone (no pickle, no RDKit); ``data/README.md`` gives its source,
licence, layout and the command that rebuilds it.

:func:`load_qm9` reads all of QM9 from the CSV files that the PyPI package
``qm9pack`` installs (extras ``data`` and ``chem``), checks every row, and
caches the parsed molecules as plain arrays. :func:`split_indices` draws
reproducible train/test splits; :func:`broadened_spectra` offers Lorentzian
and Gaussian line shapes.

Nothing here downloads anything at run time.
"""

from __future__ import annotations

import contextlib
import csv
import functools
import gc
import hashlib
import importlib.resources
import importlib.util
import io
import json
import math
import numbers
import os
import sys
import tempfile
import warnings
import zipfile
from collections.abc import Callable, Iterator, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Literal, overload

import networkx as nx
import numpy as np
from numpy.typing import ArrayLike, NDArray

from .formula import hill_formula

__all__ = [
    "Qm9Data",
    "broadened_spectra",
    "graphs_from_arrays",
    "load_demo",
    "load_qm9",
    "lorentzian_spectra",
    "lorentzian_spectrum",
    "split_indices",
    "wavenumber_grid",
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
_BLOCK_ELEMENTS = 262_144  # 2 MiB of float64; ~1.7x less CPU than 16 MiB blocks (cache)
_LN2 = float(np.log(2.0))
_LINE_SHAPES = ("lorentzian", "gaussian")


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


def _check_intensities(
    intensities: Sequence[ArrayLike], lines: list[NDArray[np.float64]]
) -> list[NDArray[np.float64]]:
    """Return the intensities as float arrays aligned with ``lines``, or raise."""
    if isinstance(intensities, (str, bytes)) or not isinstance(intensities, (Sequence, np.ndarray)):
        raise TypeError(
            "intensities must be a list of 1-D arrays (one per line list) or None, got "
            f"{type(intensities).__name__}"
        )
    if len(intensities) != len(lines):
        raise ValueError(
            f"intensities must hold one array per line list ({len(lines)}), got {len(intensities)}"
        )
    out = []
    for i, (w, f) in enumerate(zip(intensities, lines)):
        arr = _float_vector(f"intensities[{i}]", w)
        if arr.size != f.size:
            raise ValueError(
                f"intensities[{i}] must have one value per line of frequency_lists[{i}] "
                f"({f.size}), got {arr.size}"
            )
        if np.any(arr < 0):
            raise ValueError(
                f"intensities[{i}] must be >= 0, got {arr[arr < 0][:3].tolist()}; "
                "pass non-negative line heights"
            )
        out.append(arr)
    return out


def broadened_spectra(
    frequency_lists: Sequence[ArrayLike],
    *,
    shape: str = "lorentzian",
    half_width: float = 20.0,
    grid: ArrayLike | None = None,
    intensities: Sequence[ArrayLike] | None = None,
    start: float | None = None,
    stop: float | None = None,
    step: float | None = None,
    normalize: bool = True,
) -> NDArray[np.float64]:
    r"""Broaden line lists into spectra with a Lorentzian or Gaussian line shape.

    Row ``i`` of the result is

    .. math::

        S_i(\nu) = \sum_k I_{ik} \, L\!\left(\frac{\nu - \nu_{ik}}{h}\right),
        \qquad
        L(z) = \frac{1}{1 + z^2} \ \text{(lorentzian)}, \quad
        L(z) = \exp\left(-z^2 \ln 2\right) \ \text{(gaussian)}

    Where:

    - :math:`\nu` runs over the grid (cm^-1),
    - :math:`\nu_{ik}` are the line positions of item :math:`i` (cm^-1),
    - :math:`I_{ik}` are the line heights (``intensities``; 1 when None),
    - :math:`h` is ``half_width``, the half width at half maximum of both
      shapes: :math:`L(0) = 1` and :math:`L(\pm 1) = 1/2`.

    The Gaussian with half width at half maximum :math:`h` has standard
    deviation :math:`\sigma = h / \sqrt{2 \ln 2}`; a unit-height line has
    area :math:`h \sqrt{\pi / \ln 2}` (Lorentzian: :math:`\pi h`).

    Parameters
    ----------
    frequency_lists : sequence of array-like of shape (n_lines_i,)
        One 1-D array of line positions (cm^-1) per item; lengths may
        differ, and an empty array is allowed.
    shape : {"lorentzian", "gaussian"}, default="lorentzian"
        Line shape.
    half_width : float, default=20.0
        Half width at half maximum :math:`h` of every line, in cm^-1.
    grid : array-like of shape (n_grid,), default=None
        Wavenumbers at which to evaluate. If None, the grid is
        ``wavenumber_grid(start, stop, step)`` (361 points from 400 to 4000
        cm^-1 by default). Cannot be combined with ``start``, ``stop`` or
        ``step``.
    intensities : sequence of array-like of shape (n_lines_i,), default=None
        Height of each line (>= 0), aligned with ``frequency_lists``. None
        gives every line height 1.
    start, stop, step : float, default=None
        Grid bounds and spacing when ``grid`` is None; None means 400.0,
        4000.0 and 10.0.
    normalize : bool, default=True
        Divide each row by its Euclidean (L2) norm (all-zero rows stay zero).

    Returns
    -------
    spectra : ndarray of shape (n_items, n_grid)
        Broadened spectra, float64.

    Raises
    ------
    TypeError
        If ``frequency_lists`` or ``intensities`` is not a sequence of arrays
        of numbers, or a scalar parameter has the wrong type.
    ValueError
        If ``shape`` is unknown, an array is not 1-D or holds NaN/inf, an
        intensity is negative or its array length differs from its line
        list, ``half_width <= 0``, or the grid is invalid.

    See Also
    --------
    lorentzian_spectra : the Lorentzian case with unit heights (same values).

    References
    ----------
    .. [1] Common practice (any spectroscopy text): the Lorentzian
       :math:`1/(1 + z^2)` and the Gaussian :math:`\exp(-z^2 \ln 2)`, with
       :math:`z = (\nu - \nu_0)/h`, are the unit-height line shapes of half
       width at half maximum :math:`h`.

    Examples
    --------
    >>> from gwpred.datasets import broadened_spectra
    >>> s = broadened_spectra([[1000.0]], shape="gaussian", grid=[980.0, 1000.0, 1020.0],
    ...                       normalize=False)
    >>> [round(float(v), 12) for v in s[0]]
    [0.5, 1.0, 0.5]
    """
    if isinstance(frequency_lists, (str, bytes)) or not isinstance(
        frequency_lists, (Sequence, np.ndarray)
    ):
        raise TypeError(
            "frequency_lists must be a list of 1-D arrays (one per item), got "
            f"{type(frequency_lists).__name__}; wrap a single line list in a list"
        )
    if not isinstance(shape, str) or shape not in _LINE_SHAPES:
        raise ValueError(f"shape must be 'lorentzian' or 'gaussian', got {shape!r}")
    hw = _check_half_width(half_width)
    nu = _resolve_grid(grid, start, stop, step)
    norm = _check_bool("normalize", normalize)
    hint = "; pass a list of 1-D arrays, one per item"
    lines = [_float_vector(f"frequency_lists[{i}]", f, hint) for i, f in enumerate(frequency_lists)]
    weights = None if intensities is None else _check_intensities(intensities, lines)
    return _broaden(lines, nu, hw, norm, shape, weights)


def _line_shape(
    shape: str, positions: NDArray[np.float64], grid: NDArray[np.float64], half_width: float
) -> NDArray[np.float64]:
    """Unit-height lines, one row per position, evaluated on the grid (in place)."""
    z = np.subtract(grid[None, :], positions[:, None])
    z /= half_width
    np.multiply(z, z, out=z)
    if shape == "gaussian":
        z *= -_LN2
        return np.exp(z, out=z)
    z += 1.0
    return np.reciprocal(z, out=z)


def _broaden(
    lines: list[NDArray[np.float64]],
    grid: NDArray[np.float64],
    half_width: float,
    normalize: bool,
    shape: str = "lorentzian",
    weights: list[NDArray[np.float64]] | None = None,
) -> NDArray[np.float64]:
    """Sum unit-height lines per item, in blocks of lines (no validation).

    ``weights`` (one array per item, aligned with ``lines``) scale each line.
    """
    n_items, n_grid = len(lines), grid.size
    out = np.zeros((n_items, n_grid), dtype=np.float64)
    counts = np.fromiter((a.size for a in lines), dtype=np.int64, count=n_items)
    if counts.sum() == 0:
        return out
    positions = np.concatenate(lines)
    scale = None if weights is None else np.concatenate(weights)
    owner = np.repeat(np.arange(n_items), counts)  # item of each line, sorted
    block = max(1, _BLOCK_ELEMENTS // n_grid)
    for lo in range(0, positions.size, block):
        pos = positions[lo : lo + block]
        own = owner[lo : lo + block]
        values = _line_shape(shape, pos, grid, half_width)
        if scale is not None:
            values *= scale[lo : lo + block, None]
        # first line of each item within the block; segments are contiguous
        first = np.flatnonzero(np.r_[True, own[1:] != own[:-1]])
        out[own[first]] += np.add.reduceat(values, first, axis=0)
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
    checked = _check_graph_arrays(
        n_nodes, node_element, elements, edge_offsets, edge_src, edge_dst, edge_order, node_charge
    )
    with _gc_paused():
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


def _check_graph_arrays(
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
    charges = None if node_charge is None else _int_vector("node_charge", node_charge)
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
def _gc_paused() -> Iterator[None]:
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


# --------------------------------------------------------------------------
# train/test splits
# --------------------------------------------------------------------------
def _count(name: str, value: object) -> int:
    """Return ``value`` as a non-negative int, or raise naming ``name``."""
    if isinstance(value, (bool, np.bool_)) or not isinstance(value, numbers.Integral):
        raise TypeError(f"{name} must be an integer, got {value!r} of type {type(value).__name__}")
    if value < 0:
        raise ValueError(f"{name} must be >= 0, got {value!r}")
    return int(value)


def split_indices(
    n_items: int,
    *,
    n_train: int,
    n_test: int,
    random_state: int | np.random.Generator = 0,
    exclude: ArrayLike | None = None,
) -> tuple[NDArray[np.int64], NDArray[np.int64]]:
    """Draw disjoint, reproducible train and test positions from ``range(n_items)``.

    The positions not in ``exclude`` are shuffled once with
    ``numpy.random.default_rng(random_state)``; the first ``n_test`` of the
    shuffled order form the test set and the next ``n_train`` the training
    set. So for a fixed ``random_state`` the test set does not depend on
    ``n_train``, and a larger ``n_train`` extends a smaller one (nested
    training sets, e.g. for learning curves).

    Parameters
    ----------
    n_items : int
        Number of items (e.g. ``len(data.graphs)``).
    n_train, n_test : int
        Sizes of the two sets (>= 0); together at most the number of items
        left after ``exclude``.
    random_state : int or numpy.random.Generator, default=0
        Seed (int >= 0) or generator; the same seed gives the same split.
    exclude : array-like of int, default=None
        Positions that go into neither set (e.g. molecules kept for a
        separate check). Repeats are allowed.

    Returns
    -------
    train, test : ndarray of int64
        Sorted positions, of lengths ``n_train`` and ``n_test``, disjoint
        from each other and from ``exclude``.

    Raises
    ------
    TypeError
        If a count is not an integer, ``random_state`` is neither an int nor
        a Generator, or ``exclude`` does not hold integers.
    ValueError
        If a count is negative, ``n_train + n_test`` exceeds the available
        items, or ``exclude`` holds positions outside ``0 .. n_items - 1``.

    Examples
    --------
    >>> from gwpred.datasets import split_indices
    >>> train, test = split_indices(10, n_train=6, n_test=3, random_state=0)
    >>> len(train), len(test), set(train) & set(test)
    (6, 3, set())
    """
    n = _count("n_items", n_items)
    k_train = _count("n_train", n_train)
    k_test = _count("n_test", n_test)
    if isinstance(random_state, (bool, np.bool_)) or not isinstance(
        random_state, (numbers.Integral, np.random.Generator)
    ):
        raise TypeError(
            "random_state must be an int or a numpy.random.Generator, got "
            f"{random_state!r}; pass e.g. random_state=0"
        )
    available = np.arange(n, dtype=np.int64)
    if exclude is not None:
        drop = _int_vector("exclude", np.asarray(exclude).ravel())
        if drop.size and (drop.min() < 0 or drop.max() >= n):
            raise ValueError(
                f"exclude must hold positions in 0..{n - 1}, got values from {drop.min()} "
                f"to {drop.max()}"
            )
        available = np.setdiff1d(available, drop)
    if k_train + k_test > available.size:
        excluded = n - available.size
        raise ValueError(
            f"n_train + n_test = {k_train} + {k_test} = {k_train + k_test} exceeds the "
            f"{available.size} available items ({n} items, {excluded} excluded); "
            "ask for fewer"
        )
    order = np.random.default_rng(random_state).permutation(available)
    test = np.sort(order[:k_test])
    train = np.sort(order[k_test : k_test + k_train])
    return train, test


# --------------------------------------------------------------------------
# full QM9 from the data files of the qm9pack package
# --------------------------------------------------------------------------
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
_INSTALL_DATA = "pip install 'gwpred[data]' (or 'gwpred[all]')"
_INSTALL_CHEM = "pip install 'gwpred[chem]' (or 'gwpred[all]')"


@dataclass(frozen=True, eq=False)
class Qm9Data:
    """Molecules of QM9 read by :func:`load_qm9`; entry ``i`` of every list
    or array describes the same molecule.

    Attributes
    ----------
    X : ndarray of shape (n, d) or None
        Input features (broadened spectra or Morgan fingerprints), or None
        when ``load_qm9(features=None)``.
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

    X: NDArray[np.float64] | None
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
            f"install it with: {_INSTALL_DATA}"
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
    if importlib.util.find_spec("rdkit") is None:
        raise ImportError(
            f"load_qm9 needs RDKit to turn SMILES into graphs; install it with: {_INSTALL_CHEM}"
        )
    import rdkit

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
# element Z - q (N+ like C: 4; O- like F: 1; C- like N: 3).
_ATOMIC_NUMBER = {"C": 6, "N": 7, "O": 8, "F": 9}
_VALENCE_OF_Z = {5: 3, 6: 4, 7: 3, 8: 2, 9: 1}  # B, C, N, O, F
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
    labels = [node[v]["label"] for v in range(n)]
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
    from tqdm.auto import tqdm

    from gwpred.chem import graph_from_smiles

    # graph_from_smiles's own hydrogen check is skipped: it costs as much as the
    # conversion, and _graph_problem compares the hydrogens that the graph implies
    # with the Stoichiometry column instead.
    to_graph = functools.partial(graph_from_smiles, check_hydrogens=False)
    rows = _read_qm9_rows(data_dir)
    accepted: list[_Molecule] = []
    rejected: list[tuple[int, str]] = []
    seen: set[int] = set()
    with _rdkit_quiet(), _gc_paused():
        for raw_index, smiles, stoichiometry, freq_text in tqdm(
            rows, desc="parsing QM9", unit="mol", disable=not progress, mininterval=0.5
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
    from rdkit import RDLogger

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
    fd, tmp = tempfile.mkstemp(dir=path.parent, prefix=f".{path.stem}.", suffix=".tmp")
    try:
        with os.fdopen(fd, "wb") as handle:
            np.savez(handle, **arrays)
            handle.flush()
            os.fsync(handle.fileno())
        os.chmod(tmp, 0o644)  # mkstemp makes it private; the cache holds public data
        os.replace(tmp, path)
    except BaseException:
        with contextlib.suppress(OSError):
            os.unlink(tmp)
        raise


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
    _check_graph_arrays(
        *(arrays[k] for k in ("n_nodes", "node_element", "elements", "edge_offsets")),
        *(arrays[k] for k in ("edge_src", "edge_dst", "edge_order", "node_charge")),
    )
    freqs = arrays["frequencies"]
    if freqs.ndim != 1 or freqs.dtype != np.float64 or not np.all(np.isfinite(freqs)):
        raise ValueError("frequencies must be a 1-D finite float64 array")
    _offsets(
        "freq_offsets",
        _int_vector("freq_offsets", arrays["freq_offsets"]),
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
    for g, s in zip(graphs, smiles):
        g.graph["smiles"] = s  # as gwpred.chem.graph_from_smiles sets it
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
    lo = _count("min_heavy", min_heavy)
    hi = _count("max_heavy", max_heavy)
    if lo < 1:
        raise ValueError(f"min_heavy must be >= 1, got {min_heavy!r}")
    if hi < lo:
        raise ValueError(
            f"max_heavy must be >= min_heavy, got min_heavy={min_heavy!r} and "
            f"max_heavy={max_heavy!r}"
        )
    return lo, hi


def _check_fingerprint_options(radius: object, n_bits: object, counts: object) -> None:
    _count("fingerprint_radius", radius)
    if _count("fingerprint_bits", n_bits) < 1:
        raise ValueError(f"fingerprint_bits must be >= 1, got {n_bits!r}; use e.g. 2048")
    _check_bool("fingerprint_counts", counts)


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
        QM9 SMILES (about 20 s and, as float64, 2.1 GB for all molecules
        with 2048 bits: narrow ``max_heavy`` or load ``features=None`` and
        compute them for a subset); None, no features (``X`` is None).
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
    show = _check_bool("progress", progress)
    if features == "spectrum":
        if not isinstance(line_shape, str) or line_shape not in _LINE_SHAPES:
            raise ValueError(f"line_shape must be 'lorentzian' or 'gaussian', got {line_shape!r}")
        hw = _check_half_width(half_width)
        nu = _resolve_grid(grid, None, None, None)
    elif features == "fingerprint":
        _check_fingerprint_options(fingerprint_radius, fingerprint_bits, fingerprint_counts)
    path = _qm9_cache_path(cache_dir)
    data_dir = _qm9_csv_dir()
    key = _qm9_source_key(data_dir, _require_rdkit())

    arrays, where = _load_or_build_qm9(data_dir, path, key, show)
    n_nodes = arrays["n_nodes"]
    keep = (n_nodes >= lo) & (n_nodes <= hi)
    with _gc_paused():
        graphs, smiles, formulas, index, freqs = _select_qm9(arrays, keep)
    rejected, rejected_index = _rejections(arrays)
    n_rows = int(arrays["n_rows"])
    if features == "spectrum":
        X = _broaden(list(freqs), nu, hw, True, line_shape)
    elif features == "fingerprint":
        from gwpred.chem import morgan_fingerprints

        # From the SMILES: four times faster than from the graphs, same values (checked
        # on every 5th QM9 molecule, count fingerprints of radius 2).
        X = morgan_fingerprints(
            smiles, radius=fingerprint_radius, n_bits=fingerprint_bits, counts=fingerprint_counts
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

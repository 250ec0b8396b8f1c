r"""Broadened vibrational spectra: the wavenumber grid and Lorentzian/Gaussian line shapes.

A line list (e.g. the harmonic frequencies of a molecule, in cm^-1) becomes a
spectrum on a grid by summing one unit-height line per position;
:func:`broadened_spectra` offers Lorentzian and Gaussian shapes and line
heights, :func:`lorentzian_spectra` / :func:`lorentzian_spectrum` the
Lorentzian case with unit heights.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
from numpy.typing import ArrayLike, NDArray

from ._checks import check_bool, check_half_width, float_vector, real

__all__ = [
    "broadened_spectra",
    "lorentzian_spectra",
    "lorentzian_spectrum",
    "wavenumber_grid",
]

#: Line shapes that :func:`broadened_spectra` and :func:`broaden` know.
LINE_SHAPES = ("lorentzian", "gaussian")
# Upper bound on the (lines x grid points) block evaluated at once.
_BLOCK_ELEMENTS = 262_144  # 2 MiB of float64; ~1.7x less CPU than 16 MiB blocks (cache)
_LN2 = float(np.log(2.0))


def resolve_grid(
    grid: ArrayLike | None,
    start: float | None,
    stop: float | None,
    step: float | None,
) -> NDArray[np.float64]:
    """Return the evaluation grid from ``grid`` or from ``start/stop/step`` (checked).

    Shared with the loaders of this package; None for all four means
    :func:`wavenumber_grid`'s defaults.
    """
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
    arr = float_vector("grid", grid)
    if arr.size == 0:
        raise ValueError("grid must hold at least one wavenumber, got an empty array")
    return arr


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
    lo = real("start", start)
    hi = real("stop", stop)
    dv = real("step", step)
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
    hw = check_half_width(half_width)
    nu = resolve_grid(grid, start, stop, step)
    norm = check_bool("normalize", normalize)
    hint = "; pass a list of 1-D arrays, or lorentzian_spectrum(array) for a single line list"
    lines = [float_vector(f"frequencies[{i}]", f, hint) for i, f in enumerate(frequencies)]
    return broaden(lines, nu, hw, norm)


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
    hw = check_half_width(half_width)
    nu = resolve_grid(grid, start, stop, step)
    norm = check_bool("normalize", normalize)
    hint = "; for several line lists use lorentzian_spectra(list_of_arrays)"
    lines = float_vector("frequencies", frequencies, hint)
    return broaden([lines], nu, hw, norm)[0]


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
        arr = float_vector(f"intensities[{i}]", w)
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
    if not isinstance(shape, str) or shape not in LINE_SHAPES:
        raise ValueError(f"shape must be 'lorentzian' or 'gaussian', got {shape!r}")
    hw = check_half_width(half_width)
    nu = resolve_grid(grid, start, stop, step)
    norm = check_bool("normalize", normalize)
    hint = "; pass a list of 1-D arrays, one per item"
    lines = [float_vector(f"frequency_lists[{i}]", f, hint) for i, f in enumerate(frequency_lists)]
    weights = None if intensities is None else _check_intensities(intensities, lines)
    return broaden(lines, nu, hw, norm, shape, weights)


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


def broaden(
    lines: list[NDArray[np.float64]],
    grid: NDArray[np.float64],
    half_width: float,
    normalize: bool,
    shape: str = "lorentzian",
    weights: list[NDArray[np.float64]] | None = None,
) -> NDArray[np.float64]:
    """Sum unit-height lines per item, in blocks of lines (no validation).

    The kernel behind every spectrum of this package (the loaders call it
    with arguments they have checked). ``weights`` (one array per item,
    aligned with ``lines``) scale each line.
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


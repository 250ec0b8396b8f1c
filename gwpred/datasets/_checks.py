"""Argument checks shared by the modules of :mod:`gwpred.datasets`.

Each check returns the value in the form the caller computes with, or raises
a ``TypeError``/``ValueError`` naming the argument and what to pass instead.
"""

from __future__ import annotations

import numbers

import numpy as np
from numpy.typing import ArrayLike, NDArray

__all__ = [
    "check_bool",
    "check_half_width",
    "check_offsets",
    "count",
    "float_vector",
    "int_vector",
    "real",
]


def real(name: str, value: object) -> float:
    """Return ``value`` as a finite float, or raise naming ``name``."""
    if isinstance(value, bool) or not isinstance(value, numbers.Real):
        raise TypeError(
            f"{name} must be a real number, got {value!r} of type {type(value).__name__}"
        )
    out = float(value)
    if not np.isfinite(out):
        raise ValueError(f"{name} must be finite, got {value!r}; pass a finite number")
    return out


def float_vector(name: str, value: ArrayLike, hint: str = "") -> NDArray[np.float64]:
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


def check_half_width(half_width: float) -> float:
    """Return the line half width as a float > 0, or raise."""
    hw = real("half_width", half_width)
    if hw <= 0:
        raise ValueError(f"half_width must be > 0 (cm^-1), got {half_width!r}; use e.g. 20.0")
    return hw


def check_bool(name: str, value: object) -> bool:
    """Return ``value`` as a bool (Python or numpy), or raise naming ``name``."""
    if not isinstance(value, (bool, np.bool_)):
        raise TypeError(f"{name} must be True or False, got {value!r}")
    return bool(value)


def count(name: str, value: object) -> int:
    """Return ``value`` as a non-negative int, or raise naming ``name``."""
    if isinstance(value, (bool, np.bool_)) or not isinstance(value, numbers.Integral):
        raise TypeError(f"{name} must be an integer, got {value!r} of type {type(value).__name__}")
    if value < 0:
        raise ValueError(f"{name} must be >= 0, got {value!r}")
    return int(value)


def int_vector(name: str, value: ArrayLike) -> NDArray[np.int64]:
    """Return ``value`` as a 1-D int64 array, or raise naming ``name``."""
    arr = np.asarray(value)
    if arr.ndim != 1:
        raise ValueError(f"{name} must be 1-D, got shape {arr.shape}")
    if arr.size and not np.issubdtype(arr.dtype, np.integer):
        raise TypeError(f"{name} must hold integers, got dtype {arr.dtype}")
    return arr.astype(np.int64)


def check_offsets(
    name: str, offsets: NDArray[np.int64], n_items: int, total: int, what: str
) -> None:
    """Raise unless ``offsets`` partitions ``total`` entries into ``n_items`` runs."""
    if offsets.size != n_items + 1:
        raise ValueError(
            f"{name} must have length n_molecules + 1 = {n_items + 1}, got {offsets.size}"
        )
    if offsets[0] != 0 or offsets[-1] != total or np.any(np.diff(offsets) < 0):
        raise ValueError(
            f"{name} must start at 0, never decrease and end at the number of {what} "
            f"({total}), got {offsets[:3].tolist()}...{offsets[-2:].tolist()}"
        )

"""What every other module may use, and nothing that knows about graphs.

- input checks with fix hints (:func:`check_inputs`) and a declarative table of
  parameter constraints checked by one validator (:class:`Rule`,
  :func:`validate_params`);
- atomic file writes (:func:`atomic_open`, :func:`atomic_write_text`): a killed
  process never leaves a user's file truncated;
- the one way to reach an optional extra (:func:`require_extra`,
  :func:`has_extra`), whose error names the extra to install;
- the one progress bar (:func:`progress_bar`);
- the caution shown beside predicted molecules (:data:`CAUTION`).

It imports nothing from gwpred.
"""

from __future__ import annotations

import importlib
import importlib.util
import numbers
import os
import secrets
import stat
import sys
import warnings
from collections.abc import Iterable, Iterator, Mapping, Sequence
from contextlib import contextmanager
from dataclasses import dataclass
from pathlib import Path
from types import ModuleType
from typing import IO, Any, Union

import numpy as np
import scipy.sparse as sp
from numpy.typing import ArrayLike, NDArray
from tqdm.auto import tqdm

__all__ = [
    "CAUTION",
    "EXTRAS",
    "Options",
    "Interval",
    "Rule",
    "StrPath",
    "atomic_open",
    "atomic_write_text",
    "check_inputs",
    "has_extra",
    "install_hint",
    "progress_bar",
    "require_extra",
    "validate_params",
    "torch_settings",
]

StrPath = Union[str, "os.PathLike[str]"]

#: Shown wherever predicted molecules are shown (command line, report, README).
CAUTION = (
    "Predicted molecules are hypotheses: confirm any structure by analytical methods before "
    "acting on it, and handle chemicals only under local lab-safety rules and their safety data sheets."
)

# --------------------------------------------------------------------------- optional extras

#: Importable module -> (pip extra of gwpred that installs it, name shown to users).
EXTRAS: dict[str, tuple[str, str]] = {
    "rdkit": ("chem", "RDKit"),
    "qm9pack": ("data", "qm9pack"),
    "torch": ("neural", "PyTorch"),
    "distributed": ("distributed", "Dask distributed"),
}


def install_hint(extra: str) -> str:
    """The pip command that installs one extra of gwpred.

    ``neural`` (PyTorch) is not part of ``all``, and a plain ``pip install
    torch`` can fetch a CUDA build of several GB: its hint takes a CPU build first.

    >>> install_hint("chem")
    "pip install 'gwpred[chem]' (or 'gwpred[all]')"
    """
    if extra == "neural":
        return ("a CPU build of PyTorch first (pip install torch --index-url https://download.pytorch.org/whl/cpu), "
                "then pip install 'gwpred[neural]'")
    return f"pip install 'gwpred[{extra}]' (or 'gwpred[all]')"


def has_extra(module: str) -> bool:
    """Whether an optional module can be imported, without importing it.

    >>> has_extra("numpy"), has_extra("no_such_module_here")
    (True, False)
    """
    top = module.split(".", 1)[0]
    try:
        return importlib.util.find_spec(top) is not None
    except (ImportError, ValueError):
        return False


def require_extra(module: str, purpose: str = "this function") -> ModuleType:
    """Import an optional module (``"rdkit.Chem"``, ``"torch"``) or raise naming its extra.

    Parameters
    ----------
    module : str
        Dotted module name; its first part must be a key of :data:`EXTRAS`.
    purpose : str, default="this function"
        What needs it, to start the error message (e.g. ``"load_qm9"``).

    Returns
    -------
    module

    Raises
    ------
    ImportError
        Naming the extra and the pip command that installs it.
    """
    top = module.split(".", 1)[0]
    extra, shown = EXTRAS[top]
    try:
        importlib.import_module(top)  # the package itself first, as a plain `import` would
        return importlib.import_module(module)
    except ImportError as err:
        raise ImportError(
            f"{purpose} needs {shown} (the optional extra '{extra}' of gwpred); "
            f"install it with: {install_hint(extra)}"
        ) from err


@contextmanager
def torch_settings(n_threads: int | None, seed: int, purpose: str) -> Iterator[None]:
    """Seeded, deterministic torch with ``n_threads`` threads; the previous settings come back after.

    For the two torch users (learned embeddings, learned templates); ``purpose``
    names the caller in the error when torch (the ``neural`` extra) is missing.
    """
    torch = require_extra("torch", purpose)
    threads, deterministic = torch.get_num_threads(), torch.are_deterministic_algorithms_enabled()
    try:
        if n_threads is not None:
            torch.set_num_threads(int(n_threads))
        torch.use_deterministic_algorithms(True)
        torch.manual_seed(seed)
        yield
    finally:
        torch.set_num_threads(threads)
        torch.use_deterministic_algorithms(deterministic)


# --------------------------------------------------------------------------- progress


def progress_bar(
    items: Iterable[Any] | None,
    *,
    progress: bool,
    total: int | None = None,
    desc: str = "",
    unit: str = "it",
    mininterval: float = 0.1,
) -> Any:
    """Wrap ``items`` in a progress bar on standard error when ``progress`` is true.

    The one spelling of progress in gwpred: functions and estimators take
    ``progress: bool`` and pass it here.  ``mininterval`` is the least time
    in seconds between redraws.
    """
    return tqdm(
        items, total=total, desc=desc, unit=unit, disable=not progress, file=sys.stderr, mininterval=mininterval
    )


# --------------------------------------------------------------------------- input checks


class _ComplexInput(Exception):
    """Raised inside :func:`check_inputs` for complex arrays (reported as a ValueError)."""


def check_inputs(X: ArrayLike, name: str = "X", *, compact: bool = False) -> NDArray[Any]:
    """Return ``X`` as a finite 2-D float array, or raise saying what to fix.

    Parameters
    ----------
    X : array-like of shape (n_samples, n_features)
    name : str, default="X"
        How messages call the array.
    compact : bool, default=False
        Return bool and integer arrays as they are (no float64 copy, eight
        times smaller for ``uint8`` fingerprints); they cannot hold NaN.
        Other inputs are converted to float64 either way.

    Returns
    -------
    ndarray of shape (n_samples, n_features)
        float64, or with ``compact=True`` the bool or integer array itself.

    Raises
    ------
    ValueError
        If ``X`` is not numeric, not 2-D, has no rows or no columns, or holds
        NaN or infinite values.
    TypeError
        If ``X`` is a scipy sparse matrix, or holds objects that are neither
        numbers nor strings.

    Examples
    --------
    >>> check_inputs([[1, 2], [3, 4]]).dtype
    dtype('float64')
    >>> check_inputs(np.array([[0, 1]], dtype=np.uint8), compact=True).dtype
    dtype('uint8')
    """
    if sp.issparse(X):  # np.asarray would wrap it in a 0-d object array
        raise TypeError(
            f"{name} is a scipy sparse matrix ({type(X).__name__}); sparse input is not supported: "
            f"pass a dense array, e.g. {name}.toarray()."
        )
    try:
        arr = np.asarray(X)
        if np.iscomplexobj(arr):
            raise _ComplexInput
        keep = compact and (arr.dtype == np.bool_ or np.issubdtype(arr.dtype, np.integer))
        if not keep:
            arr = np.asarray(arr, dtype=np.float64)
    except _ComplexInput:
        raise ValueError(
            f"Complex data not supported: {name} holds complex numbers; pass real features (e.g. "
            "magnitudes with np.abs, or real and imaginary parts as separate columns)."
        ) from None
    except TypeError as err:  # an element that is neither a number nor a string: numpy's message
        raise TypeError(f"{name} must be a numeric array of shape (n_samples, n_features); {err}.") from None
    except ValueError:
        raise ValueError(f"{name} must be a numeric array of shape (n_samples, n_features).") from None
    if arr.ndim != 2:
        raise ValueError(
            f"{name} must be 2-D (n_samples, n_features); got {arr.ndim}-D with shape "
            f"{arr.shape}. Reshape a single sample with X.reshape(1, -1)."
        )
    if arr.shape[0] == 0:
        raise ValueError(f"{name} has no rows; pass at least one sample.")
    if arr.shape[1] == 0:
        raise ValueError(
            f"{name} has 0 feature(s) (shape={arr.shape}) while a minimum of 1 is required; "
            "pass at least one column."
        )
    if keep:
        return arr
    bad = ~np.isfinite(arr)
    if bad.any():
        r, c = np.argwhere(bad)[0]
        raise ValueError(
            f"{name} has {int(bad.sum())} NaN or infinite value(s), the first at row {r}, "
            f"column {c}; impute or drop them before fitting or predicting."
        )
    return arr


# --------------------------------------------------------------------------- parameter constraints


@dataclass(frozen=True)
class Options:
    """One of a few fixed values; ``True`` and ``1`` are different values here."""

    values: tuple[Any, ...]

    def accepts(self, value: Any) -> bool:
        return any(isinstance(value, type(v)) and value == v for v in self.values)

    def describe(self) -> str:
        if len(self.values) == 1:
            return repr(self.values[0])
        return f"one of {list(self.values)}"


@dataclass(frozen=True)
class Interval:
    """A finite real (or, with ``integer=True``, integral) number in ``[low, high]``.

    Booleans are never numbers here.
    """

    low: float = -np.inf
    high: float = np.inf
    integer: bool = False

    def accepts(self, value: Any) -> bool:
        kind = numbers.Integral if self.integer else numbers.Real
        if isinstance(value, bool) or not isinstance(value, kind) or not np.isfinite(value):
            return False
        return bool(self.low <= value <= self.high)

    def describe(self) -> str:
        if self.integer:
            return "a positive integer" if self.low == 1 and self.high == np.inf else (
                f"an integer in [{self.low:g}, {self.high:g}]"
            )
        if self.high == np.inf:
            return "a non-negative number" if self.low == 0 else "a positive number"
        return f"a number in [{self.low:g}, {self.high:g}]"


@dataclass(frozen=True)
class Types:
    """An instance of one of ``types`` (booleans only where ``bool`` is listed)."""

    types: tuple[type, ...]

    def accepts(self, value: Any) -> bool:
        if isinstance(value, bool) and bool not in self.types:
            return False
        return isinstance(value, self.types)

    def describe(self) -> str:
        return " or ".join(t.__name__ for t in self.types)


class Rule:
    """Allowed values of one parameter: any of ``alternatives`` (``None`` allows None).

    Parameters
    ----------
    *alternatives : Options, Interval, Types or None
    what : str, optional
        Description used in the message instead of the alternatives' own.
    error : type, default=ValueError
        Exception raised on a value that no alternative accepts.
    """

    def __init__(self, *alternatives: Any, what: str | None = None, error: type[Exception] = ValueError):
        self.alternatives = alternatives
        self.what = what
        self.error = error

    def accepts(self, value: Any) -> bool:
        return any(value is None if a is None else a.accepts(value) for a in self.alternatives)

    def describe(self) -> str:
        if self.what:
            return self.what
        return " or ".join("None" if a is None else a.describe() for a in self.alternatives)


def validate_params(params: Mapping[str, Any], constraints: Mapping[str, Rule]) -> None:
    """Check every constrained parameter; raise naming the first bad one, what it takes and what came.

    Parameters
    ----------
    params : mapping
        Parameter name -> value (e.g. an estimator's ``get_params(deep=False)``).
    constraints : mapping of str to Rule

    Raises
    ------
    ValueError or TypeError
        ``"<name> must be <allowed>; got <value>."`` (the rule's error type).

    Examples
    --------
    >>> validate_params({"alpha": 2}, {"alpha": Rule(Interval(0, 1))})
    Traceback (most recent call last):
    ...
    ValueError: alpha must be a number in [0, 1]; got 2.
    """
    for name, rule in constraints.items():
        value = params[name]
        if not rule.accepts(value):
            raise rule.error(f"{name} must be {rule.describe()}; got {value!r}.")


# --------------------------------------------------------------------------- files


@contextmanager
def atomic_open(path: Path, binary: bool) -> Iterator[IO[Any]]:
    """Open a temporary sibling of ``path`` for writing; move it into place on success.

    A failure (or a killed process) leaves any existing file at ``path`` as it
    was, and removes the temporary file. A symbolic link is written through
    (its target is replaced, the link stays), and an existing file keeps its
    permission bits.
    """
    path = Path(path)
    if path.is_symlink():
        path = path.resolve()  # replace what the link points to, not the link itself
    parent = path.parent
    if not parent.is_dir():
        raise FileNotFoundError(
            f"cannot write {str(path)!r}: directory {str(parent)!r} does not exist; create it first"
        )
    tmp = parent / f".{path.name}.{os.getpid()}.{secrets.token_hex(4)}.tmp"
    try:
        if binary:
            fh: IO[Any] = open(tmp, "xb")
        else:
            fh = open(tmp, "x", encoding="utf-8", newline="")
        with fh:
            yield fh
            fh.flush()
            os.fsync(fh.fileno())
        if path.exists():  # the new content takes the old file's permissions
            os.chmod(tmp, stat.S_IMODE(os.stat(path).st_mode))
        os.replace(tmp, path)
    except BaseException:
        try:
            os.unlink(tmp)
        except FileNotFoundError:
            pass
        raise


def atomic_write_text(path: StrPath, text: str) -> None:
    """Write ``text`` (UTF-8) to ``path`` through :func:`atomic_open`."""
    with atomic_open(Path(path), binary=False) as fh:
        fh.write(text)


def atomic_write_bytes(path: StrPath, data: bytes) -> None:
    """Write ``data`` to ``path`` through :func:`atomic_open`."""
    with atomic_open(Path(path), binary=True) as fh:
        fh.write(data)



def renamed_keyword(old: str, new: str, old_value: Any, new_value: Any, default: Any) -> Any:
    """The value of a renamed keyword argument; the old spelling works for one more release.

    Parameters
    ----------
    old, new : str
        The old and the new keyword names.
    old_value : Any
        What was passed under the old name (None when not passed).
    new_value, default : Any
        What was passed under the new name, and its default.

    Returns
    -------
    Any
        ``new_value``, or ``old_value`` (with a FutureWarning) when the old name was used.

    Raises
    ------
    TypeError
        When both names were given.
    """
    if old_value is None:
        return new_value
    if new_value != default:
        raise TypeError(f"{old}= and {new}= are the same option ({old}= is its old name); pass {new}= only")
    warnings.warn(f"{old}= is now called {new}=; the old name will be removed in the next release",
                  FutureWarning, stacklevel=3)
    return old_value


def half_physical_memory() -> int:
    """Half of the machine's physical memory in bytes (8 GB where it cannot be read).

    Returns
    -------
    int
    """
    try:
        total = os.sysconf("SC_PAGE_SIZE") * os.sysconf("SC_PHYS_PAGES")
    except (AttributeError, ValueError, OSError):
        total = -1
    return int(total // 2) if total > 0 else 8 * 2**30

"""gwpred: predict labeled graphs from vectors with fused Gromov-Wasserstein barycenters.

The public face: :class:`BarycenterGraphPredictor`, :class:`TemplateGraphPredictor`, :class:`SoftGraph`,
:func:`save_model` / :func:`load_model` (all from :mod:`gwpred.model`), the
:class:`~gwpred.codec.TrainingSet` a fitted model holds, and ``__version__``.
They are loaded on first use (PEP 562), so that ``import gwpred`` and the
command line start without importing scikit-learn and POT; the layers below are
listed in DEVELOPERS.md.
"""

from __future__ import annotations

import importlib
from typing import Any

from ._version import __version__

# public name -> module that defines it
_EXPORTS = {
    "BarycenterGraphPredictor": "gwpred.model",
    "SoftGraph": "gwpred.model",
    "TemplateGraphPredictor": "gwpred.model",
    "save_model": "gwpred.model",
    "load_model": "gwpred.model",
    "TrainingSet": "gwpred.codec",
}

__all__ = ["BarycenterGraphPredictor", "SoftGraph", "TemplateGraphPredictor", "TrainingSet", "load_model", "save_model", "__version__"]


def __getattr__(name: str) -> Any:
    if name in _EXPORTS:
        value = getattr(importlib.import_module(_EXPORTS[name]), name)
        globals()[name] = value
        return value
    raise AttributeError(f"module 'gwpred' has no attribute {name!r}")


def __dir__() -> list[str]:
    return sorted(set(globals()) | set(__all__))

r"""Bundled demo data, the full QM9 set, broadened vibrational spectra and splits.

The demo task: propose a small molecule's heavy-atom skeleton from its
computed vibrational spectrum. :func:`load_demo` returns, for 3000 QM9
molecules, a broadened harmonic spectrum per molecule (the inputs) and the
heavy-atom graph (the targets); :func:`load_qm9` reads all of QM9 from the
files of the PyPI package ``qm9pack``. Nothing here downloads anything at run
time.

Submodules:

- :mod:`gwpred.datasets.spectra`: the wavenumber grid and Lorentzian/Gaussian
  line broadening (:func:`wavenumber_grid`, :func:`broadened_spectra`,
  :func:`lorentzian_spectra`, :func:`lorentzian_spectrum`);
- :mod:`gwpred.datasets.demo`: the bundled demo file ``qm9_demo.npz``
  (:func:`load_demo`) and graphs from its flat arrays
  (:func:`graphs_from_arrays`);
- :mod:`gwpred.datasets.splits`: reproducible train/test splits
  (:func:`split_indices`);
- :mod:`gwpred.datasets.qm9`: the full QM9 loader, its checks and cache
  (:func:`load_qm9`, :class:`Qm9Data`);
- :mod:`gwpred.datasets.druglike`: drug-like molecules of 10-50 heavy atoms with
  charged groups, from the NCI sample shipped inside RDKit's wheel
  (:func:`load_druglike`).
"""

from __future__ import annotations

from .demo import graphs_from_arrays, load_demo
from .druglike import DruglikeSet, load_druglike
from .qm9 import Qm9Data, load_qm9
from .spectra import broadened_spectra, lorentzian_spectra, lorentzian_spectrum, wavenumber_grid
from .splits import split_indices

__all__ = [
    "DruglikeSet",
    "Qm9Data",
    "broadened_spectra",
    "graphs_from_arrays",
    "load_demo",
    "load_druglike",
    "load_qm9",
    "lorentzian_spectra",
    "lorentzian_spectrum",
    "split_indices",
    "wavenumber_grid",
]

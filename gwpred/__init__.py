"""gwpred: predict labeled graphs from vectors with fused Gromov-Wasserstein barycenters."""

__version__ = "0.1.0"

from .estimator import BarycenterGraphPredictor, SoftGraph  # noqa: E402

__all__ = ["BarycenterGraphPredictor", "SoftGraph", "__version__"]

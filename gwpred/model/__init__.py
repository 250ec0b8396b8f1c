"""The predictor: scikit-learn glue, pure per-query steps and model files.

- :mod:`gwpred.model.estimator`: :class:`BarycenterGraphPredictor` (parameters,
  ``fit`` -> :class:`~gwpred.codec.TrainingSet`, ``predict`` over the queries);
- :mod:`gwpred.model.steps`: size vote, start graph, barycenter and decoder
  table for one query, on plain arrays;
- :mod:`gwpred.model.files`: :func:`save_model` / :func:`load_model`;
- :mod:`gwpred.model.templates`: :class:`TemplateGraphPredictor`, barycenters
  of learned template graphs (trained with torch: :mod:`gwpred.model.template_steps`,
  :mod:`gwpred.model.fgw_torch`).
"""

from .estimator import BarycenterGraphPredictor
from .files import load_model, save_model
from .hypotheses import Hypothesis, HypothesisCalibration, HypothesisList, calibrate_hypotheses
from .steps import SoftGraph
from .templates import TemplateGraphPredictor

__all__ = [
    "BarycenterGraphPredictor",
    "Hypothesis",
    "HypothesisCalibration",
    "HypothesisList",
    "SoftGraph",
    "TemplateGraphPredictor",
    "calibrate_hypotheses",
    "load_model",
    "save_model",
]

"""Model files of a fitted :class:`~gwpred.model.templates.TemplateGraphPredictor`: arrays + JSON.

The archive (written and checked by :func:`gwpred.io.save_archive` /
:func:`gwpred.io.load_archive`: checksums, no pickle, atomic writes) holds the
network's layers and the templates as arrays, and the parameters, label
categories and training facts in the manifest, under the kind
``"TemplateGraphPredictor"``; :func:`gwpred.model.load_model` reads the kind
and comes here.  No training data is stored.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from ..codec import LabelSpace
from .template_steps import TemplateNetwork, TemplateSet
from .templates import TemplateGraphPredictor

__all__ = ["TEMPLATE_KIND", "template_archive", "template_model"]

#: ``kind`` of the manifest of a saved TemplateGraphPredictor.
TEMPLATE_KIND = "TemplateGraphPredictor"


def _plain(value: Any) -> Any:
    """numpy scalars -> Python scalars, tuples -> lists, so that JSON can hold them."""
    if isinstance(value, np.generic):
        return value.item()
    if isinstance(value, tuple):
        return [_plain(v) for v in value]
    return value


def template_archive(model: TemplateGraphPredictor) -> tuple[dict[str, np.ndarray], dict]:
    """Arrays and manifest of a fitted model (for :func:`gwpred.io.save_archive`).

    Raises
    ------
    ValueError
        If the model is not fitted, or holds a valence table with non-text labels.
    """
    if not isinstance(model, TemplateGraphPredictor) or not hasattr(model, "network_"):
        raise ValueError("save_model needs a fitted TemplateGraphPredictor; call fit first.")
    valence = model.valence
    if isinstance(valence, dict) and not all(isinstance(k, str) for k in valence):
        raise ValueError("valence tables with non-text labels cannot be stored in a model file (JSON keys are text)")
    net_arrays, net_description = model.network_.to_arrays()
    arrays = {**net_arrays, **model.templates_.to_arrays(), "max_degree": np.asarray(model.max_degree_)}
    history = {k: v for k, v in model.history_.items() if k != "seconds"}
    manifest = {
        "kind": TEMPLATE_KIND,
        "params": {k: _plain(v) for k, v in model.get_params().items()},
        "node_labels": [_plain(v) for v in model.labels_.node_labels_],
        "edge_labels": [_plain(v) for v in model.labels_.edge_labels_],
        "connected": bool(model.connected_),
        "n_features_in": int(model.n_features_in_),
        "network": net_description,
        "history": {k: _plain(v) for k, v in history.items()},
    }
    return arrays, manifest


def template_model(arrays: dict[str, np.ndarray], manifest: dict, where: str) -> TemplateGraphPredictor:
    """The fitted model from a loaded archive of kind ``"TemplateGraphPredictor"``.

    Raises
    ------
    ValueError
        For parameters unknown to this gwpred or contents that do not fit together.
    """
    try:
        params = dict(manifest["params"])
        unknown = sorted(set(params) - set(TemplateGraphPredictor().get_params()))
        if unknown:
            raise ValueError(
                f"parameters {unknown} are unknown to this gwpred; the file may come from a newer release: upgrade gwpred"
            )
        if isinstance(params.get("hidden"), list):
            params["hidden"] = tuple(params["hidden"])
        model = TemplateGraphPredictor(**params)
        model.labels_ = LabelSpace.from_categories(
            manifest["node_labels"], manifest["edge_labels"], node_label=model.node_label,
            edge_label=model.edge_label, handle_unknown=model.handle_unknown,
        )
        model.network_ = TemplateNetwork.from_arrays(arrays, manifest["network"])
        model.templates_ = TemplateSet.from_arrays(arrays)
        model.max_degree_ = np.asarray(arrays["max_degree"], dtype=np.int64)
        model.connected_ = bool(manifest["connected"])
        model.n_features_in_ = int(manifest["n_features_in"])
        model.history_ = dict(manifest.get("history", {}))
        if model.network_.n_templates != len(model.templates_) or len(model.network_.mean) != model.n_features_in_:
            raise ValueError("the network does not match the templates or the input width")
        if model.templates_.features.shape[2] != model.labels_.n_node_labels or \
                model.max_degree_.shape != (model.labels_.n_node_labels,):
            raise ValueError("the templates' node labels do not match the label categories")
    except (KeyError, IndexError, TypeError, ValueError) as err:
        raise ValueError(f"{where} has inconsistent contents ({err}); it may be corrupted.") from err
    return model

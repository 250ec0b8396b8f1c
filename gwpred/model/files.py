"""Model files: a fitted :class:`~gwpred.model.BarycenterGraphPredictor` as arrays + JSON.

What is stored is decided here; how an archive is written and checked
(checksums, no pickle, atomic writes) is :func:`gwpred.io.save_archive` /
:func:`gwpred.io.load_archive`.  Files written by every earlier gwpred layout
load unchanged (the format never named a module); a file whose parameters
use the older name ``verbose`` for ``progress`` is read as such, and a file
written before ``weight_model`` existed keeps the dense solve it was made with.
"""

from __future__ import annotations

import os
from typing import Any

import numpy as np

from .._utils import StrPath
from ..codec import LabelSpace, TrainingSet
from ..embedding import InputEmbedding
from ..io import load_archive, save_archive
from .estimator import BarycenterGraphPredictor
from .hypotheses import HypothesisCalibration
from .template_files import TEMPLATE_KIND, template_archive, template_model
from .templates import TemplateGraphPredictor

__all__ = ["load_model", "save_model"]

_MODEL_KIND = "BarycenterGraphPredictor"
# parameter names of earlier releases -> today's
_RENAMED_PARAMS = {"verbose": "progress", "top_k": "n_neighbors"}
# parameters absent from earlier files -> the behaviour those files were written with
_EARLIER_DEFAULTS = {"weight_model": "dense"}


def _plain(value: Any) -> Any:
    """numpy scalars -> Python scalars, so that JSON can hold them."""
    return value.item() if isinstance(value, np.generic) else value


def save_model(model: BarycenterGraphPredictor | TemplateGraphPredictor, path: StrPath) -> None:
    """Save a fitted :class:`~gwpred.BarycenterGraphPredictor` as a model archive.

    A fitted :class:`~gwpred.TemplateGraphPredictor` is saved too, as its
    network and templates (:mod:`gwpred.model.template_files`; no training data).

    The archive holds the constructor parameters, label categories, training
    ids and the hypothesis calibration when there is one (JSON manifest), the training graphs as flat integer arrays, and the training
    inputs (or the training kernel matrix with ``kernel="precomputed"``);
    kernel factorisations are recomputed on loading.  Inputs are stored as
    the weight model holds them: float64, or, for 0/1 inputs of a local
    Tanimoto model, in the dtype given to ``fit`` (``uint8`` fingerprints
    stay ``uint8``, an eighth of the size).

    Parameters
    ----------
    model : BarycenterGraphPredictor
        A fitted model.
    path : str or os.PathLike
        Target ``.npz`` file.

    Raises
    ------
    ValueError
        If the model is not fitted.
    """
    if isinstance(model, TemplateGraphPredictor):
        save_archive(path, *template_archive(model))
        return
    if not isinstance(model, BarycenterGraphPredictor) or not hasattr(model, "training_"):
        raise ValueError("save_model needs a fitted BarycenterGraphPredictor; call fit first.")
    training = model.training_
    labels = training.labels
    nodes, edges, edge_cls = [], [], []
    for i in range(len(training)):
        e, c = training.edge_list(i)
        nodes.append(training.node_classes(i))
        edges.append(e)
        edge_cls.append(c)
    weights = model.weights_
    arrays = {
        "node_classes": np.concatenate(nodes).astype(np.int32),
        "edges": np.concatenate(edges).astype(np.int32).reshape(-1, 2),
        "edge_classes": np.concatenate(edge_cls).astype(np.int32),
        "n_nodes": training.sizes.astype(np.int32),
        "n_edges": np.asarray([len(e) for e in edges], dtype=np.int32),
        "inputs": weights.K_fit_ if model.kernel == "precomputed" else getattr(model, "inputs_", weights.X_fit_),
    }
    embedding = getattr(model, "embedding_", None)
    if embedding is not None:  # kernel="learned": the trained network, as arrays
        emb_arrays, emb_description = embedding.to_arrays()
        arrays.update({f"embedding_{k}": v for k, v in emb_arrays.items()})
    gamma = float(weights.gamma_)
    valence = model.get_params().get("valence")
    if isinstance(valence, dict) and not all(isinstance(k, str) for k in valence):
        raise ValueError(
            "valence tables with non-text labels cannot be stored in a model file (JSON keys are "
            "text); use text node labels, or refit after loading"
        )
    params = {k: _plain(v) for k, v in model.get_params().items() if k not in ("top_k", "embedding")}
    # training options are kept; a trained embedding given as the parameter is stored below, as arrays
    params["embedding"] = model.embedding if isinstance(model.embedding, dict) else None
    if not isinstance(model.top_k, str):  # given under its old name: store the value it stands for
        params["n_neighbors"] = int(model.top_k)
    manifest = {
        "kind": _MODEL_KIND,
        "params": params,
        "node_labels": [_plain(v) for v in labels.node_labels_],
        "edge_labels": [_plain(v) for v in labels.edge_labels_],
        "gamma": gamma if np.isfinite(gamma) else None,
        "training_ids": getattr(model, "training_ids_", None),
    }
    if embedding is not None:
        manifest["embedding"] = emb_description
    calibration = getattr(model, "hypothesis_calibration_", None)
    if calibration:  # confidences of predict_hypotheses (absent from files of earlier releases)
        manifest["hypothesis_calibration"] = {case: cal.to_dict() for case, cal in calibration.items()}
    save_archive(path, arrays, manifest)


def load_model(path: StrPath) -> BarycenterGraphPredictor | TemplateGraphPredictor:
    """Load a model saved by :func:`save_model` (by this or any earlier gwpred 0.1 layout).

    The file says which estimator it holds (its manifest's ``kind``); a
    :class:`~gwpred.TemplateGraphPredictor` comes back as one.

    Parameters
    ----------
    path : str or os.PathLike

    Returns
    -------
    BarycenterGraphPredictor or TemplateGraphPredictor
        A fitted model that predicts exactly as the saved one.

    Raises
    ------
    ValueError
        If the file is not a gwpred model, is corrupted or truncated, or was
        written by a newer gwpred (see :func:`~gwpred.io.load_archive`), or its
        contents are inconsistent.
    """
    arrays, manifest = load_archive(path)
    where = f"model file {os.fspath(path)!r}"
    if manifest.get("kind") == TEMPLATE_KIND:
        return template_model(arrays, manifest, where)
    need = ("node_classes", "edges", "edge_classes", "n_nodes", "n_edges", "inputs")
    missing = [k for k in need if k not in arrays]
    if manifest.get("kind") != _MODEL_KIND or missing:
        raise ValueError(
            f"{where} is a gwpred archive but not a saved BarycenterGraphPredictor "
            f"(kind={manifest.get('kind')!r}, missing arrays: {missing})."
        )
    try:
        params = {_RENAMED_PARAMS.get(k, k): v for k, v in manifest["params"].items()}
        params = {**_EARLIER_DEFAULTS, **params}
        known = BarycenterGraphPredictor().get_params()
        unknown = sorted(set(params) - set(known))
        if unknown:
            raise ValueError(
                f"parameters {unknown} are unknown to this gwpred; the file may come from a newer "
                "release: upgrade gwpred"
            )
        if "embedding" in manifest:  # kernel="learned": the trained embedding is the parameter (no retraining)
            stored_arrays = {k[len("embedding_"):]: v for k, v in arrays.items() if k.startswith("embedding_")}
            params["embedding"] = InputEmbedding.from_arrays(stored_arrays, manifest["embedding"])
        elif params.get("kernel") == "learned":
            raise ValueError("kernel='learned' but the file holds no embedding")
        model = BarycenterGraphPredictor(**params)
        n_nodes, n_edges = arrays["n_nodes"], arrays["n_edges"]
        node_off = np.concatenate([[0], np.cumsum(n_nodes)])
        edge_off = np.concatenate([[0], np.cumsum(n_edges)])
        if node_off[-1] != len(arrays["node_classes"]) or edge_off[-1] != len(arrays["edges"]):
            raise ValueError("graph arrays do not add up")
        labels = LabelSpace.from_categories(
            manifest["node_labels"],
            manifest["edge_labels"],
            node_label=model.node_label,
            edge_label=model.edge_label,
            handle_unknown=model.handle_unknown,
        )
        graphs = [
            labels.build_graph(
                arrays["node_classes"][node_off[k] : node_off[k + 1]],
                arrays["edges"][edge_off[k] : edge_off[k + 1]],
                arrays["edge_classes"][edge_off[k] : edge_off[k + 1]],
            )
            for k in range(len(n_nodes))
        ]
        ids = manifest.get("training_ids")  # absent from files of earlier releases
        if ids is not None and not (isinstance(ids, list) and all(isinstance(i, str) for i in ids)):
            raise ValueError("training_ids must be a list of text ids")
        model.fit_encoded(arrays["inputs"], TrainingSet.encode(graphs, labels), gamma=manifest["gamma"],
                          training_ids=ids)
        stored = manifest.get("hypothesis_calibration")
        if stored is not None:
            if not isinstance(stored, dict) or not stored or set(stored) - {"plain", "formula"}:
                raise ValueError("hypothesis_calibration must map 'plain' and/or 'formula' to a calibration")
            model.hypothesis_calibration_ = {case: HypothesisCalibration.from_dict(d) for case, d in stored.items()}
    except (KeyError, IndexError, TypeError, ValueError) as err:
        raise ValueError(f"{where} has inconsistent contents ({err}); it may be corrupted.") from err
    return model

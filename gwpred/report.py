"""One self-contained static HTML page to look at predicted graphs.

:func:`build_report` turns predicted graphs (with the true graphs when known, ranked
candidate lists, soft barycenters, the training graphs and inputs each prediction
leaned on when available) into one HTML string: summary scores at the top, then a
table of items with a small depiction, formula, SMILES and scores per row, which
sorts by any numeric column, filters by text, edit distance or validity, and
downloads as CSV or SDF (a few dozen lines of inline JavaScript); then a panel with
full drawings for the first items. The page loads nothing from anywhere: no network,
no external scripts or styles.

This module draws and scores what it is given; it never computes predictions.
"""

from __future__ import annotations

import html
import io
import json
import math
import os
import re
from collections.abc import Callable, Hashable, Mapping, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import matplotlib
import networkx as nx
import numpy as np
from matplotlib.figure import Figure
from numpy.typing import NDArray

from ._utils import CAUTION, atomic_write_text, has_extra, progress_bar, renamed_keyword, require_extra
from .chem import check_molecule, graph_to_mol
from .formula import graph_formula, is_atom_label, node_atom
from .io import RankedCandidate, read_ranked, write_ranked
from .metrics import TOP_K, edit_distance, exact_match, expected_calibration_error, hit_rank, summarize
from .plot import (
    EDIT_COLOURS,
    alignment_edits,
    draw_alignment,
    draw_graph,
    draw_inputs,
    draw_node_scores,
    draw_structure,
    draw_templates,
    graph_thumbnail_svg,
)
from .wl import LabelIds, graph_ids, wl_feature_counts

__all__ = [
    "RankedCandidate",
    "build_report",
    "is_molecular",
    "read_ranked",
    "write_ranked",
    "write_report",
]

# candidates whose match with the truth is checked (as in gwpred.metrics' top-k accuracy)
_HIT_DEPTH = max(TOP_K)
# refinement rounds of the Weisfeiler-Lehman kernel behind the confidence (as gwpred.ranking's default)
_WL_ITERATIONS = 3
# training inputs drawn under an item's own input
_OVERLAY = 3
# side of the table's depictions, in pixels, and the size of their atom symbols (in their
# viewBox units: graph_thumbnail_svg draws them 0.18 of its box of twice the side)
_THUMB = 56
_THUMB_FONT = 20

Pair = tuple[NDArray[np.int64], NDArray[np.float64]]


# --------------------------------------------------------------------------- inputs


def is_molecular(graphs: Sequence[nx.Graph], node_label: Hashable = "label") -> bool:
    """Whether every node label is an element symbol, optionally charged ("N+"), and there is a node.

    Examples
    --------
    >>> g = nx.Graph([(0, 1)]); nx.set_node_attributes(g, {0: "C", 1: "Cl"}, "label")
    >>> is_molecular([g]), is_molecular([nx.relabel_nodes(g, {0: 5})], node_label="x")
    (True, False)
    """
    seen = False
    for g in graphs:
        for _, lab in g.nodes(data=node_label):
            if not is_atom_label(lab):  # an element symbol, optionally charged ("N+")
                return False
            seen = True
    return seen


def _check_graphs(graphs: Any, name: str) -> list[nx.Graph]:
    if isinstance(graphs, (nx.Graph, str, bytes)) or not isinstance(graphs, Sequence):
        raise TypeError(
            f"{name} must be a list of networkx.Graph, got {type(graphs).__name__}; wrap a single graph in a list"
        )
    for k, g in enumerate(graphs):
        if not isinstance(g, nx.Graph):
            raise TypeError(
                f"{name}[{k}] must be a networkx.Graph, got {type(g).__name__}"
            )
    return list(graphs)


def _check_count(value: Any, name: str, minimum: int) -> int:
    if (
        isinstance(value, bool)
        or not isinstance(value, (int, np.integer))
        or value < minimum
    ):
        raise ValueError(f"{name} must be an int >= {minimum}, got {value!r}")
    return int(value)


def _normalise_ranked(
    ranked: Any, n_all: int, n: int
) -> dict[int, list[RankedCandidate]]:
    """Row -> candidates for rows < n; rows past ``n_all`` are an error."""
    if ranked is None:
        return {}
    if isinstance(ranked, Mapping):
        rows = dict(ranked)
    elif isinstance(ranked, Sequence) and not isinstance(
        ranked, (str, bytes, nx.Graph)
    ):
        if len(ranked) != n_all:
            raise ValueError(
                f"ranked holds {len(ranked)} lists for {n_all} predictions; give one list per prediction "
                "(None or [] where there is none) or a dict row -> list"
            )
        rows = {i: lst for i, lst in enumerate(ranked) if lst}
    else:
        raise TypeError(
            f"ranked must be a dict row -> list of candidates or a list of lists, got {type(ranked).__name__}"
        )
    out: dict[int, list[RankedCandidate]] = {}
    for row, lst in rows.items():
        if (
            isinstance(row, bool)
            or not isinstance(row, (int, np.integer))
            or not 0 <= row < n_all
        ):
            raise ValueError(
                f"ranked has a list for row {row!r}, but there are {n_all} predictions (rows 0..{n_all - 1}); "
                "check that the candidate file belongs to these predictions"
            )
        if row >= n:
            continue
        cands = []
        for k, c in enumerate(lst or []):
            if isinstance(c, RankedCandidate):
                cands.append(c)
            elif isinstance(c, nx.Graph):
                cands.append(RankedCandidate(c))
            else:
                raise TypeError(
                    f"ranked[{row}][{k}] must be a networkx.Graph or RankedCandidate, got {type(c).__name__}"
                )
        out[int(row)] = cands
    return out


def _check_barycenters(
    barycenters: Any, n_all: int, training_graphs: Any
) -> dict[int, Any]:
    if barycenters is None:
        return {}
    bary = list(barycenters)
    if len(bary) > n_all:
        raise ValueError(
            f"barycenters has {len(bary)} entries for {n_all} predictions; give at most one per item"
        )
    for k, soft in enumerate(bary):
        if soft is None:
            continue
        if not all(
            hasattr(soft, a)
            for a in ("structure", "node_scores", "neighbors", "weights")
        ):
            raise TypeError(
                f"barycenters[{k}] must be a SoftGraph (from predict_barycenters), got {type(soft).__name__}"
            )
        if training_graphs is not None:
            bad = [
                int(j) for j in soft.neighbors if not 0 <= int(j) < len(training_graphs)
            ]
            if bad:
                raise ValueError(
                    f"barycenters[{k}] points to training graph {bad[0]}, but training_graphs has "
                    f"{len(training_graphs)}; pass the training graphs in the order the model was fitted on"
                )
    return {k: soft for k, soft in enumerate(bary) if soft is not None}


def _check_pair(entry: Any, k: int, training_graphs: Any) -> Pair:
    """One item's (training indices, weights), by decreasing weight, zero weights dropped."""
    where = f"leaned_on[{k}]"
    if (
        isinstance(entry, (str, bytes))
        or not isinstance(entry, Sequence)
        or len(entry) != 2
    ):
        raise ValueError(
            f"{where} must be a pair (indices, weights) of 1-D arrays, got {type(entry).__name__}; "
            "pass model.neighbors(X) as is, or one (indices, weights) pair per item"
        )
    idx, w = np.asarray(entry[0]), np.asarray(entry[1])
    if idx.ndim != 1 or w.shape != idx.shape:
        raise ValueError(
            f"{where} must be a pair (indices, weights) of 1-D arrays of the same length, got shapes "
            f"{idx.shape} and {w.shape}"
        )
    if idx.size and not np.issubdtype(idx.dtype, np.integer):
        raise ValueError(
            f"{where} holds indices of dtype {idx.dtype}; the training indices must be integers "
            "(as model.neighbors returns them)"
        )
    if not np.issubdtype(w.dtype, np.number) or not (
        np.isfinite(w).all() and (w >= 0).all()
    ):
        raise ValueError(
            f"{where} has weights that are not finite non-negative numbers; pass the barycentric "
            "weights model.neighbors returns"
        )
    if training_graphs is not None:
        bad = idx[(idx < 0) | (idx >= len(training_graphs))]
        if bad.size:
            raise ValueError(
                f"{where} points to training graph {int(bad[0])}, but training_graphs has "
                f"{len(training_graphs)}; pass the training graphs in the order the model was fitted on"
            )
    keep = w > 0
    idx, w = idx[keep].astype(np.int64), w[keep].astype(np.float64)
    order = np.argsort(-w, kind="stable")
    return idx[order], w[order]


def _check_leaned_on(
    leaned_on: Any, bary: Mapping[int, Any], n_all: int, training_graphs: Any
) -> dict[int, Pair]:
    """Item -> (training indices, weights), from ``leaned_on`` or else the barycenters."""
    if leaned_on is None:
        return {
            k: _check_pair((soft.neighbors, soft.weights), k, None)
            for k, soft in bary.items()
        }
    if (
        isinstance(leaned_on, tuple)
        and len(leaned_on) == 2
        and all(isinstance(a, np.ndarray) and a.ndim == 2 for a in leaned_on)
    ):
        leaned_on = list(zip(*leaned_on))  # model.neighbors(X) as returned
    if isinstance(leaned_on, (str, bytes, np.ndarray)) or not isinstance(
        leaned_on, Sequence
    ):
        raise TypeError(
            "leaned_on must be a list of (indices, weights) pairs, one per item, or model.neighbors(X) "
            f"as is; got {type(leaned_on).__name__}"
        )
    if len(leaned_on) > n_all:
        raise ValueError(
            f"leaned_on has {len(leaned_on)} entries for {n_all} predictions; give at most one per item"
        )
    return {
        k: _check_pair(entry, k, training_graphs)
        for k, entry in enumerate(leaned_on)
        if entry is not None
    }


@dataclass
class _Inputs:
    """The items' input vectors and the training inputs to overlay."""

    items: Any
    training: Any
    grid: NDArray[np.float64] | None
    name: str
    width: int


def _check_inputs(
    inputs: Any, training_inputs: Any, grid: Any, name: Any, n_all: int
) -> _Inputs | None:
    if not isinstance(name, str):
        raise TypeError(
            f"input_name must be a str (e.g. 'IR spectrum'), got {type(name).__name__}"
        )
    if inputs is None:
        return None
    if not hasattr(inputs, "shape"):
        inputs = np.asarray(inputs)
    shape = tuple(inputs.shape)
    if len(shape) != 2:
        raise ValueError(
            f"inputs must be a 2-D array of shape (n_items, n_features), got shape {shape}"
        )
    if shape[0] > n_all:
        raise ValueError(
            f"inputs has {shape[0]} rows for {n_all} predictions; give the inputs of the items, in order"
        )
    if training_inputs is not None and not hasattr(training_inputs, "__getitem__"):
        raise TypeError(
            "training_inputs must be indexable by training index (an (n_train, n_features) array), "
            f"got {type(training_inputs).__name__}"
        )
    x = None
    if grid is not None:
        x = np.asarray(grid, dtype=float) if _numeric(grid) else None
        if x is None or x.shape != (shape[1],) or not np.isfinite(x).all():
            got = "non-numbers" if x is None else f"shape {x.shape}"
            raise ValueError(
                f"input_grid must hold {shape[1]} finite numbers, one per input column, got {got}"
            )
    return _Inputs(inputs, training_inputs, x, name, shape[1])


def _numeric(values: Any) -> bool:
    try:
        np.asarray(values, dtype=float)
    except (TypeError, ValueError):
        return False
    return True


def _input_row(source: Any, i: int, width: int, name: str) -> NDArray[np.float64]:
    """Row ``i`` of an array, sparse matrix or sequence of vectors, as a float vector."""
    try:
        row = source[i]
    except (IndexError, KeyError):
        raise ValueError(
            f"{name} has no row {i}; pass the inputs in the order the model was fitted on"
        ) from None
    if hasattr(row, "toarray"):
        row = row.toarray()
    if not _numeric(row):
        raise ValueError(f"{name}[{i}] is not a vector of numbers")
    vec = np.asarray(row, dtype=float).ravel()
    if vec.shape != (width,) or not np.isfinite(vec).all():
        raise ValueError(
            f"{name}[{i}] must hold {width} finite numbers (as many as the inputs have columns), "
            f"got {vec.size} values"
        )
    return vec


# --------------------------------------------------------------------------- SVG helpers

_ID = re.compile(r'\bid="([^"]+)"')
_GID = re.compile(r' id="gwpred-[^"]*"')
_TAG = re.compile(r"<[a-zA-Z][^>]*>")
_ATTR = re.compile(r'([\w:-]+)=(["\'])(.*?)\2', re.S)
_DECIMALS = re.compile(r"(-?\d+\.\d)\d+")
_REF = re.compile(r'#([\w.:-]+)(?=["\')])')
# attributes whose numbers are positions or lengths (rounded to 0.1 of a point or pixel)
_ROUNDED = frozenset("x y x1 x2 y1 y2 cx cy r rx ry width height viewBox".split())
# style declarations that restate SVG's defaults, and miter joins (the page draws every
# join round, as matplotlib's own per-file rule does: see _CSS)
_DEFAULT_STYLE = re.compile(
    r"(?:fill-rule:evenodd|stroke-linecap:butt|stroke-linejoin:miter|stroke-opacity:1|fill-opacity:1|"
    r"stroke-miterlimit:10|font-style:normal|font-weight:normal|text-anchor:start)(?:;|(?=$))"
)
_HEX = re.compile(r"#([0-9a-fA-F])\1([0-9a-fA-F])\2([0-9a-fA-F])\3\b")
_FONTS = re.compile(r"font-family:[^;\"']*(?:'[^']*'[^;\"']*)*;?")


def _round(match: re.Match) -> str:
    text = f"{float(match.group(0)):.1f}"
    return "0.0" if text == "-0.0" else text


def _implicit_lineto(d: str) -> str:
    """Drop the ``L`` of a lineto that follows a moveto or lineto (its coordinates continue it)."""
    parts = re.split(r"([A-Za-z])", d)  # [before, letter, args, letter, args, ...]
    out, previous = [parts[0]], ""
    for k in range(1, len(parts), 2):
        letter, args = parts[k], parts[k + 1]
        if letter == "L" and previous in ("M", "L") and out[-1] and args[:1] not in ("", " "):
            out.append(" " + args)
        else:
            out.append(letter + args)
        previous = letter
    return "".join(out)


def _attribute(match: re.Match) -> str:
    name, quote, value = match.group(1), match.group(2), match.group(3)
    if name in ("version", "baseProfile", "xml:space") or name.startswith("xmlns"):
        return ""  # inside HTML, the parser puts <svg> in the SVG namespace
    if name == "d" or name == "points":
        value = _DECIMALS.sub(_round, " ".join(value.split()).replace(",", " "))
        value = re.sub(r"(\d)\.0(?!\d)", r"\1", value)
        value = re.sub(r" ?([A-Za-z]) ?", r"\1", value)
        value = _implicit_lineto(value)
    elif name == "style":
        value = re.sub(r"\s*([:;])\s*", r"\1", value.strip())
        value = _FONTS.sub("", _DEFAULT_STYLE.sub("", value)).rstrip(";")
        value = _HEX.sub(r"#\1\2\3", _DECIMALS.sub(_round, value))
        if not value:
            return ""
    elif name in _ROUNDED or (
        name == "transform" and not re.search("matrix|scale", value)
    ):
        value = _DECIMALS.sub(_round, value)
        if name == "transform" and re.fullmatch(r"rotate\(-?0(?:\.0)? [-\d. ]+\)", value):
            return ""
    elif name.endswith("href") and value.startswith("data:"):
        value = "".join(value.split())
    elif name == "class" and re.fullmatch(r"(?:bond|atom)-[\d a-z-]*", value):
        return ""  # RDKit's per-atom classes: nothing on the page uses them
    return f"{name}={quote}{value}{quote}"


def _tag(match: re.Match) -> str:
    tag = _ATTR.sub(_attribute, match.group(0))
    return re.sub(r"\s*(/?>)$", r"\1", re.sub(r"\s+", " ", tag))


def _unwrap_groups(svg: str) -> str:
    """Drop ``<g>`` elements without attributes (they group nothing that needs a group)."""
    out, stack, last = [], [], 0
    for m in re.finditer(r"<g(?:\s[^>]*)?>|</g>", svg):
        tag = m.group(0)
        if tag == "</g>":
            keep = stack.pop() if stack else True
        else:
            keep = tag != "<g>"
            stack.append(keep)
        out.append(svg[last : m.start()] + (tag if keep else ""))
        last = m.end()
    out.append(svg[last:])
    return "".join(out)


def _drop_repeated_styles(svg: str) -> str:
    """Drop a ``<use>``'s style when it repeats the style of the element it shows."""
    styles = dict(re.findall(r'<path id="([^"]+)"[^>]*?style="([^"]*)"', svg))
    if not styles:
        return svg

    def use(m: re.Match) -> str:
        tag = m.group(0)
        ref = re.search(r'href="#([^"]+)"', tag)
        style = re.search(r' style="([^"]*)"', tag)
        if ref and style and styles.get(ref.group(1)) == style.group(1):
            return tag.replace(style.group(0), "")
        return tag

    return re.sub(r"<use\b[^>]*>", use, svg)


def _minify(svg: str) -> str:
    """A smaller SVG that draws the same: numbers to 0.1 of a unit, defaults and metadata dropped.

    Only tags change, never text between tags (numbers written in heat-map cells stay
    as drawn); identifiers no reference points to, empty groups and the namespace
    declarations an SVG inside HTML does not need are removed.
    """
    svg = re.sub(r"<metadata>.*?</metadata>", "", svg, flags=re.S)
    # drawings stay inside their axes: clipping to them changes nothing but costs bytes
    svg = re.sub(r"<clipPath\b.*?</clipPath>", "", svg, flags=re.S)
    svg = re.sub(r'\s+clip-path="url\(#[^)]*\)"', "", svg)
    svg = _drop_repeated_styles(svg)
    # matplotlib's per-file rule (round joins) is the page's svg rule (see _CSS)
    svg = re.sub(r"<defs>\s*<style[^>]*>[^<]*</style>\s*</defs>", "", svg)
    svg = re.sub(r">\s*\n\s*<", "><", svg)
    used = set(_REF.findall(svg))
    svg = _ID.sub(lambda m: m.group(0) if m.group(1) in used else "", svg)
    svg = _TAG.sub(_tag, svg)
    return _unwrap_groups(svg)


def _unique_ids(svg: str, prefix: str) -> str:
    """Rename every id of an SVG (and the references to it) to ``prefix`` and a number, so
    that many SVGs can share a page."""
    ids = list(dict.fromkeys(_ID.findall(svg)))
    if not ids:
        return svg
    new = {name: f"{prefix}{k}" for k, name in enumerate(ids)}
    names = "|".join(re.escape(i) for i in sorted(ids, key=len, reverse=True))
    pattern = re.compile(r'(\bid="|#)(' + names + r')(?=["\)])')
    return pattern.sub(lambda m: m.group(1) + new[m.group(2)], svg)


_STYLE_ATTR = re.compile(r"""\sstyle=(["'])([^"']*)\1""")


def _style_classes(svg: str, prefix: str) -> str:
    """Styles that several elements repeat become classes of one ``<style>`` rule each.

    Elements with an id (definitions that ``<use>`` shows) and elements that already
    have a class keep their style attribute.
    """
    tags = [m.group(0) for m in _TAG.finditer(svg)]
    free = [t for t in tags if " id=" not in t and " class=" not in t]
    counts: dict[str, int] = {}
    for t in free:
        m = _STYLE_ATTR.search(t)
        if m:
            counts[m.group(2)] = counts.get(m.group(2), 0) + 1
    names = {
        s: f"{prefix}{k}"
        for k, s in enumerate(s for s, c in counts.items() if c * len(s) > 40)
    }
    if not names:
        return svg

    def tag(m: re.Match) -> str:
        t = m.group(0)
        if " id=" in t or " class=" in t:
            return t
        return _STYLE_ATTR.sub(
            lambda a: f' class="{names[a.group(2)]}"' if a.group(2) in names else a.group(0), t
        )

    svg = _TAG.sub(tag, svg)
    rules = "".join(f".{c}{{{s}}}" for s, c in names.items())
    head = svg.index(">") + 1
    return svg[:head] + f"<style>{rules}</style>" + svg[head:]


def _strip_prolog(svg: str) -> str:
    start = svg.find("<svg")
    return svg[start:] if start >= 0 else svg


class _Svgs:
    """Turns figures into small inline SVG with page-unique ids."""

    def __init__(self) -> None:
        self.count = 0

    def inline(self, svg: str) -> str:
        self.count += 1
        # the plot module's element tags repeat within a drawing; ids must not
        svg = _minify(_GID.sub("", _strip_prolog(svg)))
        return _style_classes(_unique_ids(svg, f"s{self.count}_"), f"c{self.count}_")

    def figure(self, fig: Any, tight: bool = True) -> str:
        """Inline SVG of a figure; ``tight=False`` keeps the figure's own margins (one
        drawing pass instead of two: for figures laid out with :func:`_figure`'s margins)."""
        buf = io.StringIO()
        # text as text (small files, selectable), stable ids, no date: reproducible pages
        with matplotlib.rc_context({"svg.fonttype": "none", "svg.hashsalt": "gwpred"}):
            fig.savefig(
                buf,
                format="svg",
                bbox_inches="tight" if tight else None,
                pad_inches=0.05,
                metadata={"Date": None},
            )
        return self.inline(buf.getvalue())


def _figure(
    width: float,
    height: float,
    margins: tuple[float, float, float, float] | None = None,
    wspace: float = 0.2,
) -> Any:
    """A figure (outside pyplot); ``margins`` = (left, bottom, right, top) in inches."""
    fig = Figure(figsize=(width, height))
    if margins is not None:
        left, bottom, right, top = margins
        fig.subplots_adjust(
            left=left / width,
            bottom=bottom / height,
            right=1 - right / width,
            top=1 - top / height,
            wspace=wspace,
        )
    return fig


# --------------------------------------------------------------------------- RDKit depictions


def _rgb(colour: str) -> tuple[float, float, float]:
    c = colour.lstrip("#")
    return (int(c[0:2], 16) / 255, int(c[2:4], 16) / 255, int(c[4:6], 16) / 255)


def _mol_2d(graph: nx.Graph, node_label: Hashable, edge_label: Hashable | None) -> Any:
    """RDKit molecule of a heavy-atom graph, as built (not sanitized), with 2D coordinates;
    None when there is none (no bond orders, no atoms, labels RDKit cannot read)."""
    if edge_label is None or graph.number_of_nodes() == 0:
        return None
    rdDepictor = require_extra("rdkit.Chem.rdDepictor", "molecule depictions")
    try:
        mol = graph_to_mol(
            graph, node_label=str(node_label), edge_label=str(edge_label), sanitize=False
        )
        rdDepictor.Compute2DCoords(mol)
    except (ValueError, TypeError, RuntimeError):
        return None
    return mol


def _mol_svg(
    graph: nx.Graph,
    *,
    node_label: Hashable,
    edge_label: Hashable | None,
    atoms: Mapping[Hashable, str] | None = None,
    bonds: Mapping[tuple, str] | None = None,
    size: tuple[int, int] = (260, 200),
) -> str | None:
    """RDKit depiction of a heavy-atom graph as SVG, with highlighted atoms and bonds; None if impossible.

    Atom symbols are SVG text (not glyph outlines): a third of the size.
    """
    mol = _mol_2d(graph, node_label, edge_label)
    if mol is None:
        return None
    rdMolDraw2D = require_extra("rdkit.Chem.Draw.rdMolDraw2D", "molecule depictions")
    index = {v: i for i, v in enumerate(graph.nodes)}
    atom_cols = {index[v]: _rgb(c) for v, c in (atoms or {}).items()}
    bond_cols = {}
    for (u, v), c in (bonds or {}).items():
        b = mol.GetBondBetweenAtoms(index[u], index[v])
        if b is not None:
            bond_cols[b.GetIdx()] = _rgb(c)
    drawer = rdMolDraw2D.MolDraw2DSVG(size[0], size[1], -1, -1, True)  # True: text, no FreeType
    drawer.drawOptions().clearBackground = False
    drawer.DrawMolecule(
        mol,
        highlightAtoms=list(atom_cols),
        highlightAtomColors=atom_cols,
        highlightBonds=list(bond_cols),
        highlightBondColors=bond_cols,
    )
    drawer.FinishDrawing()
    return str(drawer.GetDrawingText())


def _coordinates(graph: nx.Graph, opts: _Options) -> str:
    """RDKit's 2D coordinates of the atoms, ``"x y x y ..."`` in integer 0.1 Angstrom;
    '' without RDKit or when RDKit cannot read the graph."""
    mol = _mol_2d(graph, opts.node_label, opts.edge_label) if opts.rdkit else None
    if mol is None:
        return ""
    xy = np.rint(10 * mol.GetConformer().GetPositions()[:, :2]).astype(int)
    return " ".join(str(v) for v in xy.ravel().tolist())


# --------------------------------------------------------------------------- per item


@dataclass
class _Item:
    index: int
    predicted: nx.Graph
    true: nx.Graph | None
    scores: dict | None
    candidates: list[RankedCandidate] | None
    hit_rank: int | None = None
    valid: bool | None = None
    smiles: str | None = None
    problem: str | None = None
    true_smiles: str | None = None
    name: str | None = None
    formula: str | None = None
    true_formula: str | None = None
    confidence: float | None = None
    leaned: Pair | None = None


@dataclass
class _Options:
    node_label: Hashable
    edge_label: Hashable | None
    time_limit: float | None
    top: int
    molecules: bool
    rdkit: bool
    barycenters: Mapping[int, Any]
    training_graphs: Sequence[nx.Graph] | None
    label_names: Sequence[Any] | None
    neighbours: int
    inputs: _Inputs | None = None
    templates: Any = None  # a fitted TemplateGraphPredictor: its templates are drawn
    # item -> (its input, the inputs of its training items with the largest weights)
    overlays: dict[int, tuple[NDArray[np.float64], list[NDArray[np.float64]]]] = field(
        default_factory=dict
    )

    @property
    def edge_name(self) -> str:
        return "bond order" if self.molecules else "edge"


def _graph_name(graph: nx.Graph | None) -> str | None:
    """A graph's id (``graph["id"]``, or ``graph["name"]`` as older files have it)."""
    if graph is None:
        return None
    for key in ("id", "name"):
        value = graph.graph.get(key)
        if value is not None and str(value).strip():
            return str(value)
    return None


def _hit_rank(item: _Item, opts: _Options) -> int | None:
    """Rank of the truth among the first candidates (:func:`gwpred.metrics.hit_rank`)."""
    head = [c.graph for c in (item.candidates or [])[:_HIT_DEPTH]]
    return hit_rank(head, item.true, item.index, opts.node_label, opts.edge_label)


def _chem_fields(item: _Item, opts: _Options) -> None:
    kw = {"node_label": str(opts.node_label), "edge_label": str(opts.edge_label)}
    try:
        check = check_molecule(item.predicted, **kw)
        item.valid, item.smiles, item.problem = check.valid, check.smiles, check.message
    except (TypeError, ValueError) as err:  # edge labels that are not bond orders, ...
        item.valid, item.problem = False, str(err)
    if item.true is not None:
        item.true_smiles = item.true.graph.get("smiles")
        if not item.true_smiles:
            try:
                item.true_smiles = check_molecule(item.true, **kw).smiles
            except (TypeError, ValueError):
                item.true_smiles = None


def _formula(graph: nx.Graph, opts: _Options) -> str:
    """Hill formula with implicit hydrogens when bond orders are known, else of the heavy atoms.

    A graph whose hydrogens cannot be counted (an atom beyond its valence, an element
    without a default valence) gets its heavy atoms and ``+ ?H``.
    """
    kw = {"node_label": str(opts.node_label), "edge_label": opts.edge_label}
    heavy = graph_formula(graph, hydrogens=False, **kw)
    if opts.edge_label is None:
        return heavy
    try:
        return graph_formula(graph, **kw)
    except (ValueError, TypeError, ImportError):
        return f"{heavy} + ?H" if heavy else heavy


def _wl_vector(
    graph: nx.Graph, space: LabelIds, where: str
) -> tuple[NDArray[np.int64], NDArray[np.float64]] | None:
    """Weisfeiler-Lehman subtree features of a graph, counts scaled to unit norm (None if empty)."""
    try:
        ids = graph_ids(graph, space, where)
    except (TypeError, ValueError):
        return None
    feats, counts = wl_feature_counts(ids.nodes, ids.adjacency, _WL_ITERATIONS)
    return feats, counts / np.linalg.norm(counts)


def _wl_kernel(
    a: tuple[NDArray[np.int64], NDArray[np.float64]],
    b: tuple[NDArray[np.int64], NDArray[np.float64]],
) -> float:
    """Normalised WL subtree kernel: cosine of the two feature-count vectors."""
    _, ia, ib = np.intersect1d(a[0], b[0], assume_unique=True, return_indices=True)
    return float(np.clip(a[1][ia] @ b[1][ib], 0.0, 1.0))


def _confidences(items: list[_Item], opts: _Options) -> None:
    r"""Each item's agreement of the training graphs it leaned on with its prediction.

    .. math:: c(x) = \sum_j w_j\, k(\hat y, y_j) / \sum_j w_j

    with :math:`k` the normalised Weisfeiler-Lehman subtree kernel (node and edge labels,
    3 rounds; the output kernel of :mod:`gwpred.ranking`'s ``kernel`` scorer) and
    :math:`w_j` the barycentric weights of the training graphs :math:`y_j`.
    """
    train = opts.training_graphs
    if train is None:
        return
    # every label gets its own process-independent id: no fitted label space is needed
    space = LabelIds(opts.node_label, opts.edge_label, {}, {}, 0, 0, ("report",))  # type: ignore[arg-type]
    cache: dict[int, Any] = {}
    for it in items:
        if it.leaned is None or not len(it.leaned[0]):
            continue
        pred = _wl_vector(it.predicted, space, f"predicted[{it.index}]")
        if pred is None:
            continue
        idx, w = it.leaned
        ks = []
        for j in idx.tolist():
            if j not in cache:
                cache[j] = _wl_vector(train[j], space, f"training_graphs[{j}]")
            ks.append(0.0 if cache[j] is None else _wl_kernel(pred, cache[j]))
        it.confidence = float(np.dot(w, ks) / w.sum())


def _fmt(value: float | None, digits: int = 2) -> str:
    if value is None or (isinstance(value, float) and math.isnan(value)):
        return "–"
    return f"{value:.{digits}f}".rstrip("0").rstrip(".") if digits else f"{value:.0f}"


def _pct(value: float) -> str:
    return f"{100 * value:.1f}%"


def _e(text: Any) -> str:
    return html.escape(str(text), quote=True)


# --------------------------------------------------------------------------- page parts

_CSS = """
:root { --ink: #1b1b1b; --muted: #5a5a5a; --line: #d7d7d7; --bg: #ffffff; --band: #f4f4f4;
        --del: #D55E00; --ins: #0072B2; --sub: #CC79A7; }
* { box-sizing: border-box; }
body { font: 14px/1.45 system-ui, -apple-system, "Segoe UI", Roboto, Helvetica, Arial, sans-serif;
       color: var(--ink); background: var(--bg); margin: 0 auto; padding: 16px 24px 48px; max-width: 1280px; }
h1 { font-size: 22px; margin: 4px 0 2px; }
h2 { font-size: 17px; margin: 28px 0 8px; border-bottom: 1px solid var(--line); padding-bottom: 4px; }
h3 { font-size: 15px; margin: 0 0 6px; }
.meta { color: var(--muted); margin: 0 0 10px; }
.caution { border-left: 5px solid var(--del); background: #fdf1ea; padding: 8px 12px; margin: 10px 0; }
.cards { display: flex; flex-wrap: wrap; gap: 10px; margin: 8px 0; }
.card { border: 1px solid var(--line); border-radius: 6px; padding: 8px 12px; min-width: 140px; background: var(--band); }
.card .v { font-size: 20px; font-weight: 600; }
.card .k { color: var(--muted); font-size: 12px; }
.tools { display: flex; flex-wrap: wrap; gap: 8px 18px; align-items: center; margin: 8px 0; }
.tools input[type=search] { width: 20em; max-width: 100%; font: inherit; }
.tools input[type=number] { width: 5em; font: inherit; }
.tools button { font: inherit; }
.tools .caution { margin: 0; padding: 4px 10px; font-size: 12px; flex: 1 1 24em; }
.tablewrap { max-height: 75vh; overflow: auto; border: 1px solid var(--line); }
table.items { border-collapse: collapse; width: 100%; font-size: 13px; }
table.items th, table.items td { border-bottom: 1px solid var(--line); padding: 3px 8px; text-align: right; white-space: nowrap; }
table.items td > svg { display: block; width: 56px; height: 56px; max-width: none; margin: -2px -4px; }
td > svg path:not([stroke]), .nbrs path:not([stroke]) { fill: none; stroke: #000; stroke-width: 2; }
td > svg text, .nbrs text { text-anchor: middle; font-family: sans-serif; }
td > svg > text { font-size: 20px; }  /* _THUMB_FONT */
.smiles { font-family: ui-monospace, Menlo, Consolas, monospace; }
table.items thead th { position: sticky; top: 0; background: #e9e9e9; z-index: 1; }
table.items th button { font: inherit; font-weight: 600; border: 0; background: none; cursor: pointer; padding: 0; text-align: inherit; }
table.items th[aria-sort=ascending] button::after { content: " \\25B2"; }
table.items th[aria-sort=descending] button::after { content: " \\25BC"; }
table.items tbody tr:nth-child(even) { background: #fafafa; }
td.y { color: #006d4f; font-weight: 600; }
.item { border: 1px solid var(--line); border-radius: 6px; padding: 10px 14px; margin: 14px 0; }
.item:target { outline: 3px solid var(--ins); }
.figs { display: flex; flex-wrap: wrap; gap: 10px; align-items: flex-start; margin-top: 6px; }
.figs figure { margin: 0; min-width: 0; max-width: 100%; }
.figs figcaption { color: var(--muted); font-size: 12px; max-width: 520px; }
.pair { display: flex; flex-wrap: wrap; gap: 4px; }
.pair span, .nbrs span { display: inline-block; text-align: center; font-size: 12px; color: var(--muted); }
.nbrs { display: flex; flex-wrap: wrap; gap: 6px; }
.nbrs span { width: 130px; overflow-wrap: anywhere; }
.nbrs svg { display: block; width: 120px; height: 120px; margin: 0 auto; }
.bar { display: block; height: 4px; background: var(--ins); margin: 2px 0; }
svg { max-width: 100%; height: auto; stroke-linejoin: round; stroke-linecap: butt; }
svg text { font-family: "DejaVu Sans", Verdana, Arial, sans-serif; }
.smiles { word-break: break-all; }
.note { color: var(--muted); font-size: 12px; }
.key span { display: inline-block; margin-right: 14px; }
.sw { display: inline-block; width: 12px; height: 12px; border: 2px solid; vertical-align: -1px; margin-right: 4px; }
@media (max-width: 700px) { body { padding: 10px 10px 32px; } }
"""

# Sorting: click a column heading; numbers from data-v (else the cell's text), ties by item number.
# Filtering: the search box (words in the id, SMILES, formula or item number, all of them),
# a largest GED and "invalid only". Downloads: the rows shown, in the order shown, as CSV
# (columns with a data-key heading) or SDF (V2000, molecules from the JSON block).
_JS = """
(function () {
  var table = document.getElementById("items");
  if (!table) return;
  var body = table.tBodies[0], rows = Array.prototype.slice.call(body.rows);
  var heads = Array.prototype.slice.call(table.tHead.rows[0].cells), col = {};
  heads.forEach(function (h, k) { if (h.dataset.key) col[h.dataset.key] = k; });
  var FLAGS = { yes: "1", no: "0" };
  // a cell's value: its data-v, else its text ("yes"/"no" -> 1/0 in flag columns); "" when unknown
  function cellValue(c, k) {
    var v = c.getAttribute("data-v");
    if (v === null) v = c.textContent.trim();
    if (heads[k].dataset.kind === "flag" && FLAGS.hasOwnProperty(v)) v = FLAGS[v];
    return v === "–" ? "" : v;
  }
  function raw(row, key) {
    var k = col[key];
    return k === undefined ? "" : cellValue(row.cells[k], k);
  }
  function num(v) {
    if (v === "") return -Infinity;
    if (v === "inf") return Infinity;
    var f = parseFloat(v);
    return isNaN(f) ? v : f;
  }
  heads.forEach(function (th, k) {
    var btn = th.querySelector("button");
    if (!btn) return;
    btn.addEventListener("click", function () {
      var asc = th.getAttribute("aria-sort") !== "ascending";
      var order = Array.prototype.slice.call(body.rows);
      order.sort(function (a, b) {
        var x = num(cellValue(a.cells[k], k)), y = num(cellValue(b.cells[k], k));
        var d = x < y ? -1 : x > y ? 1 : 0;
        return (asc ? d : -d) || (parseInt(a.dataset.index, 10) - parseInt(b.dataset.index, 10));
      });
      order.forEach(function (r) { body.appendChild(r); });
      heads.forEach(function (h) { h.removeAttribute("aria-sort"); });
      th.setAttribute("aria-sort", asc ? "ascending" : "descending");
    });
  });

  var text = document.getElementById("filter-text"), most = document.getElementById("filter-ged");
  var invalid = document.getElementById("filter-invalid"), count = document.getElementById("filter-count");
  var words = ["index", "id", "formula", "true_formula", "smiles", "true_smiles", "top_candidate"];
  rows.forEach(function (r) {
    r.gwSearch = words.map(function (w) { return raw(r, w); }).join(" ").toLowerCase();
  });
  function filter() {
    var want = text ? text.value.trim().toLowerCase().split(/\\s+/).filter(Boolean) : [];
    var limit = most && most.value !== "" ? parseFloat(most.value) : NaN, bad = invalid && invalid.checked;
    var shown = 0;
    rows.forEach(function (r) {
      var ok = want.every(function (w) { return r.gwSearch.indexOf(w) >= 0; })
        && (isNaN(limit) || parseFloat(raw(r, "ged")) <= limit)
        && (!bad || raw(r, "valid") === "0");
      r.hidden = !ok;
      if (ok) shown += 1;
    });
    if (count) count.textContent = shown + " of " + rows.length + " items shown";
  }
  [text, most, invalid].forEach(function (el) {
    if (el) { el.addEventListener("input", filter); el.addEventListener("change", filter); }
  });

  function visible() {
    return Array.prototype.filter.call(body.rows, function (r) { return !r.hidden; });
  }
  function field(v) { return /[",\\r\\n]/.test(v) ? '"' + v.replace(/"/g, '""') + '"' : v; }
  function value(r, key) { var v = raw(r, key); return v === "inf" ? "" : v; }
  function csv() {
    var keys = Object.keys(col).sort(function (a, b) { return col[a] - col[b]; });
    var lines = [keys.join(",")];
    visible().forEach(function (r) {
      lines.push(keys.map(function (k) { return field(value(r, k)); }).join(","));
    });
    return lines.join("\\r\\n") + "\\r\\n";
  }
  var data = JSON.parse((document.getElementById("gwpred-data") || {}).textContent || "{}"), mols = {};
  (data.mols || []).forEach(function (m) { mols[m[0]] = m; });
  function pad(v, n) { v = String(v); while (v.length < n) v = " " + v; return v; }
  function line(v) { return v.replace(/[\\r\\n]+/g, " "); }
  function block(r) {
    var i = r.dataset.index, m = mols[i];
    if (!m) return "";
    var atoms = m[1].match(/[A-Z][a-z]?(?:[+-]\\d+)?/g);
    var bonds = m[2] ? m[2].split(",").map(function (b) { return b.split(" ").map(Number); }) : [];
    var xy = m[3] ? m[3].split(" ").map(Number) : [], charges = [];
    var title = raw(r, "id") || "item " + i;
    var out = [line(title).slice(0, 80), "  gwpred            2D", "",
               pad(atoms.length, 3) + pad(bonds.length, 3) + "  0  0  0  0  0  0  0  0999 V2000"];
    atoms.forEach(function (a, k) {
      var s = /^([A-Za-z]+)([+-]\\d+)?$/.exec(a);
      if (s[2]) charges.push(pad(k + 1, 4) + pad(parseInt(s[2], 10), 4));
      out.push(pad(((xy[2 * k] || 0) / 10).toFixed(4), 10) + pad(((xy[2 * k + 1] || 0) / 10).toFixed(4), 10)
               + "    0.0000 " + (s[1] + "   ").slice(0, 3) + " 0  0  0  0  0  0  0  0  0  0  0  0");
    });
    bonds.forEach(function (b) {
      out.push(pad(b[0] + 1, 3) + pad(b[1] + 1, 3) + pad(b[2] || 1, 3) + "  0  0  0  0");
    });
    charges.forEach(function (c) { out.push("M  CHG  1" + c); });
    out.push("M  END");
    ["id", "index", "smiles", "formula", "ged", "confidence", "true_smiles"].forEach(function (key) {
      if (col[key] === undefined) return;
      var v = value(r, key);
      if (v !== "") out.push("> <" + key + ">", line(v), "");
    });
    out.push("$$$$");
    return out.join("\\n") + "\\n";
  }
  function sdf() { return visible().map(block).join(""); }
  function save(content, name, type) {
    var url = URL.createObjectURL(new Blob([content], { type: type }));
    var a = document.createElement("a");
    a.href = url; a.download = name; document.body.appendChild(a); a.click(); a.remove();
    setTimeout(function () { URL.revokeObjectURL(url); }, 10000);
  }
  var csvButton = document.getElementById("download-csv"), sdfButton = document.getElementById("download-sdf");
  if (csvButton) csvButton.addEventListener("click", function () {
    save(csv(), "predictions.csv", "text/csv");
  });
  if (sdfButton) sdfButton.addEventListener("click", function () {
    save(sdf(), "predictions.sdf", "chemical/x-mdl-sdfile");
  });
  filter();
})();
"""


def _card(value: str, key: str) -> str:
    return f'<div class="card"><div class="v">{_e(value)}</div><div class="k">{_e(key)}</div></div>'


def _summary_cards(summary: dict | None, items: list[_Item], opts: _Options) -> str:
    cards = [_card(str(len(items)), "items")]
    if summary is not None:
        cards += [
            _card(_fmt(summary["mean_ged"]), "mean graph edit distance"),
            _card(_fmt(summary["median_ged"], 1), "median graph edit distance"),
            _card(_pct(summary["exact_match_rate"]), "exact match (GED 0)"),
            _card(_pct(summary["right_size_rate"]), "right number of nodes"),
            _card(_pct(summary["connected_rate"]), "predictions connected"),
            _card(_pct(summary["node_label_accuracy"]), "node label accuracy"),
            _card(
                f"{_pct(summary['edge_f1'])}",
                f"edge F1 (precision {_pct(summary['edge_precision'])}, recall {_pct(summary['edge_recall'])})",
            ),
            _card(_pct(summary["exact_share"]), "edit distances proven exact"),
        ]
    else:
        sizes = [it.predicted.number_of_nodes() for it in items]
        conn = [
            it.predicted.number_of_nodes() > 0 and nx.is_connected(it.predicted)
            for it in items
        ]
        cards += [
            _card(_fmt(float(np.mean(sizes)), 1), "mean predicted nodes"),
            _card(_pct(float(np.mean(conn))), "predictions connected"),
        ]
    checked = [it.valid for it in items if it.valid is not None]
    if checked:
        cards.append(_card(_pct(float(np.mean(checked))), "valid molecules (RDKit)"))
    confident = [it.confidence for it in items if it.confidence is not None]
    if confident:
        cards.append(_card(_fmt(float(np.mean(confident))), "mean confidence"))
    ranked = [it for it in items if it.candidates]
    if ranked and summary is not None:
        for k in TOP_K:
            share = np.mean(
                [it.hit_rank is not None and it.hit_rank <= k for it in ranked]
            )
            cards.append(
                _card(_pct(float(share)), f"truth in top {k} ({len(ranked)} lists)")
            )
    return '<div class="cards">' + "".join(cards) + "</div>"


def _ged_histogram(summary: dict, svgs: _Svgs) -> str:
    geds = np.array([it["ged"] for it in summary["items"]], dtype=float)
    fig = _figure(4.6, 1.9)
    ax = fig.subplots()
    values = np.round(geds).astype(int)
    counts = np.bincount(values - values.min()) if len(values) else np.array([0])
    ax.bar(
        np.arange(values.min(), values.min() + len(counts)),
        counts,
        color="#0072B2",
        width=0.8,
    )
    ax.set_xlabel("graph edit distance (rounded)", fontsize=8)
    ax.set_ylabel("items", fontsize=8)
    ax.tick_params(labelsize=7)
    for side in ("top", "right"):
        ax.spines[side].set_visible(False)
    return svgs.figure(fig)


def _top_confidences(items: list[_Item]) -> tuple[NDArray[np.float64], NDArray[np.float64]] | None:
    """Confidence of each item's first hypothesis and whether it is the truth (items with both)."""
    pairs = [
        (float(it.candidates[0].confidence), it.hit_rank == 1)
        for it in items
        if it.true is not None and it.candidates and getattr(it.candidates[0], "confidence", None) is not None
    ]
    if len(pairs) < 2:
        return None
    return np.array([c for c, _ in pairs]), np.array([h for _, h in pairs], dtype=np.float64)


def _reliability(conf: NDArray[np.float64], hit: NDArray[np.float64], svgs: _Svgs) -> str:
    """Accuracy-coverage curve and reliability diagram of the first hypotheses."""
    n = len(conf)
    order = np.argsort(-conf, kind="stable")
    coverage = np.arange(1, n + 1) / n
    fig = _figure(7.0, 2.3, (0.55, 0.5, 0.15, 0.25), wspace=0.45)
    left, right = fig.subplots(1, 2)
    left.plot(coverage, np.cumsum(hit[order]) / np.arange(1, n + 1), color="#0072B2", label="exact, observed")
    left.plot(coverage, np.cumsum(conf[order]) / np.arange(1, n + 1), color="#D55E00", linestyle="--",
              label="mean confidence")
    left.set_xlabel("share of items kept (most confident first)", fontsize=8)
    left.set_ylabel("first hypothesis exact", fontsize=8)
    left.legend(fontsize=7, frameon=False)
    bins = np.minimum((conf * 10).astype(int), 9)
    used = np.unique(bins)
    right.plot([0, 1], [0, 1], color="#999999", linewidth=0.8)
    right.scatter([conf[bins == b].mean() for b in used], [hit[bins == b].mean() for b in used],
                  s=[12 + 4 * np.sum(bins == b) for b in used], color="#0072B2")
    right.set_xlabel("confidence (10 bins; area: items)", fontsize=8)
    right.set_ylabel("observed rate", fontsize=8)
    for ax in (left, right):
        ax.set_xlim(0, 1)
        ax.set_ylim(0, 1.02)
        ax.tick_params(labelsize=7)
        for side in ("top", "right"):
            ax.spines[side].set_visible(False)
    return svgs.figure(fig)


def _cell(text: str, value: Any = None, cls: str = "") -> str:
    attr = f' data-v="{value!r}"' if value is not None else ""
    klass = f' class="{cls}"' if cls else ""
    return f"<td{klass}{attr}>{text}</td>"


def _flag_cell(flag: bool | None) -> str:
    """yes (highlighted) / no / – (unknown); the page's script reads them as 1 / 0 / unknown."""
    if flag is None:
        return _cell("–")
    return _cell("yes", cls="y") if flag else _cell("no")


@dataclass
class _Column:
    """One column of the items table: heading, CSV key and how a row's cell is made."""

    name: str
    key: str | None  # CSV column name (None: not exported)
    cell: Callable[[_Item], str]  # item -> its <td> element
    sortable: bool = True
    kind: str = ""  # "flag": yes / no / – cells
    cls: str = ""


_STROKE = re.compile(r"M(-?\d+) (-?\d+)((?: -?\d+ -?\d+)+)")
_STROKES = re.compile(r"(?:M-?\d+ -?\d+(?: -?\d+ -?\d+)+)+")
# attributes every thumbnail repeats, set once by the page's CSS (the td > svg and .nbrs rules)
_THUMB_SHARED = (
    ('<path fill="none" stroke="#000" stroke-width="2" d=', "<path d="),
    ('<g font-family="sans-serif" ', "<g "),
    (' text-anchor="middle"', ""),
)


def _thumbnail(graph: nx.Graph | None, opts: _Options, svgs: _Svgs, size: int = _THUMB) -> str:
    """:func:`gwpred.plot.graph_thumbnail_svg`, '' for an empty graph or one it cannot draw."""
    if graph is None or graph.number_of_nodes() == 0:
        return ""
    try:
        svg = graph_thumbnail_svg(
            graph, node_label=opts.node_label, edge_label=opts.edge_label, size=size
        )
    except (TypeError, ValueError):
        return ""
    svg = svgs.inline(svg)
    for old, new in _THUMB_SHARED:
        svg = svg.replace(old, new)
    if size == _THUMB:  # the table's: its CSS gives the size and (td > svg > text) the font size
        svg = svg.replace(f' width="{size}" height="{size}"', "", 1)
        svg = re.sub(rf'<g font-size="{_THUMB_FONT}">(.*?)</g>', r"\1", svg)
    # a stroke that starts where the last one ended continues it (one join instead of two caps)
    return re.sub(r'(?<= d=")[^"]*', lambda m: _join_strokes(m.group(0)), svg)


def _join_strokes(d: str) -> str:
    """``M a b c d M c d e f`` -> ``M a b c d e f`` in a path of straight strokes (integers);
    any other path is returned as is."""
    if not _STROKES.fullmatch(d):
        return d
    out, end = [], None
    for m in _STROKE.finditer(d):
        out.append(m.group(3) if (m.group(1), m.group(2)) == end else m.group(0))
        end = tuple(m.group(3).split()[-2:])
    return "".join(out)


def _text(value: str | None) -> str:
    return _cell(_e(value or ""))


def _columns(
    items: list[_Item], opts: _Options, with_truth: bool, drawings: int, svgs: _Svgs
) -> list[_Column]:
    """The table's columns for these items (only those with something to show)."""

    def index(it: _Item) -> str:
        link = it.index < drawings  # drawn items link to their panel
        return _cell(f'<a href="#item-{it.index}">{it.index}</a>' if link else str(it.index))

    cols = [_Column("#", "index", index)]
    if any(it.name for it in items):
        cols.append(_Column("id", "id", lambda it: _text(it.name), False, cls="n"))
    cols.append(
        _Column("predicted", None, lambda it: _cell(_thumbnail(it.predicted, opts, svgs)), False)
    )
    if with_truth:
        cols.append(
            _Column("true", None, lambda it: _cell(_thumbnail(it.true, opts, svgs)), False)
        )
    if any(it.confidence is not None for it in items):
        cols.append(
            _Column(
                "confidence",
                "confidence",
                lambda it: _cell("–" if it.confidence is None else f"{it.confidence:.3f}"),
            )
        )
    if with_truth:

        def ged(it: _Item) -> str:
            s = it.scores or {}
            value = float(s["ged"])
            if s.get("ged_proven", True):
                return _cell(_fmt(value))
            return _cell(_fmt(value) + " ≤", value)

        cols += [
            _Column("GED", "ged", ged),
            _Column(
                "exact match",
                "exact_match",
                lambda it: _flag_cell(bool(it.scores["exact_match"])),
                kind="flag",
            ),
        ]
    if opts.molecules and opts.rdkit:
        cols.append(
            _Column("valid molecule", "valid", lambda it: _flag_cell(it.valid), kind="flag")
        )
    if opts.molecules:
        cols.append(_Column("predicted formula", "formula", lambda it: _text(it.formula), False))
        if with_truth:
            cols.append(
                _Column("true formula", "true_formula", lambda it: _text(it.true_formula), False)
            )
    if opts.molecules and opts.rdkit:
        cols.append(
            _Column("predicted SMILES", "smiles", lambda it: _text(it.smiles), False, cls="t")
        )
        if with_truth:
            cols.append(
                _Column("true SMILES", "true_smiles", lambda it: _text(it.true_smiles), False, cls="t")
            )
    if with_truth:
        cols += [
            _Column("predicted nodes", "n_pred", lambda it: _cell(str(it.scores["n_pred"]))),
            _Column("true nodes", "n_true", lambda it: _cell(str(it.scores["n_true"]))),
            _Column(
                "node label acc.",
                "node_label_accuracy",
                lambda it: _cell(f"{it.scores['node_label_accuracy']:.2f}"),
            ),
            _Column("edge F1", "edge_f1", lambda it: _cell(f"{it.scores['edge_f1']:.2f}")),
        ]
    else:

        def connected(it: _Item) -> str:
            g = it.predicted
            conn = g.number_of_nodes() > 0 and nx.is_connected(g)
            return _flag_cell(conn)

        cols += [
            _Column(
                "predicted nodes",
                "n_pred",
                lambda it: _cell(str(it.predicted.number_of_nodes())),
            ),
            _Column(
                "predicted edges",
                "n_edges",
                lambda it: _cell(str(it.predicted.number_of_edges())),
            ),
            _Column("connected", "connected", connected, kind="flag"),
        ]
    if any(it.candidates for it in items) and with_truth:

        def rank(it: _Item) -> str:
            r = it.hit_rank
            text = str(r) if r else ("not in list" if it.candidates else "–")
            return _cell(text) if r else _cell(text, math.inf)

        cols.append(_Column("truth at rank", "truth_rank", rank))
    if any(_graph_name(c.graph) for it in items for c in (it.candidates or [])[:1]):
        cols.append(
            _Column(
                "top candidate",
                "top_candidate",
                lambda it: _text(_graph_name(it.candidates[0].graph) if it.candidates else None),
                False,
                cls="n",
            )
        )
    return cols


# column kinds: (for heading and cells, for cells only); "t": SMILES, "n": names
_COLUMN_CSS = {
    "t": (
        "text-align:left;white-space:normal;min-width:10em",
        "word-break:break-all;font-family:ui-monospace,Menlo,Consolas,monospace",
    ),
    "n": ("text-align:left;white-space:normal;min-width:13em", "overflow-wrap:anywhere"),
}


def _table(items: list[_Item], opts: _Options, with_truth: bool, drawings: int, svgs: _Svgs) -> str:
    cols = _columns(items, opts, with_truth, drawings, svgs)
    heads = []
    for c in cols:
        attrs = ' scope="col"' + (f' data-key="{c.key}"' if c.key else "")
        attrs += f' data-kind="{c.kind}"' if c.kind else ""
        label = f'<button type="button">{_e(c.name)}</button>' if c.sortable else _e(c.name)
        heads.append(f"<th{attrs}>{label}</th>")
    rows = [
        f'<tr data-index="{it.index}">' + "".join(c.cell(it) for c in cols) + "</tr>"
        for it in items
    ]
    # per-column layout by position (no class on every cell)
    style = "".join(
        f"#items tr>:nth-child({k}){{{_COLUMN_CSS[c.cls][0]}}}"
        f"#items td:nth-child({k}){{{_COLUMN_CSS[c.cls][1]}}}"
        for k, c in enumerate(cols, start=1)
        if c.cls
    )
    return (
        f'<div class="tablewrap"><style>{style}</style><table class="items" id="items"><thead><tr>'
        + "".join(heads)
        + "</tr></thead><tbody>"
        + "\n".join(rows)
        + "</tbody></table></div>"
    )


def _tools(items: list[_Item], opts: _Options, with_truth: bool, sdf: bool) -> str:
    """The filter controls and download buttons above the table."""
    what = ["id", "SMILES" if opts.rdkit else "", "formula" if opts.molecules else "", "item number"]
    what = ", ".join(w for w in what if w).replace(", item", " or item")
    parts = [
        f'<label>Filter <input type="search" id="filter-text" placeholder="{_e(what)}" '
        f'title="rows holding every word typed, in their {_e(what)}"></label>'
    ]
    if with_truth:
        parts.append('<label>GED ≤ <input type="number" id="filter-ged" min="0" step="1"></label>')
    if opts.molecules and opts.rdkit:
        parts.append('<label><input type="checkbox" id="filter-invalid"> invalid molecules only</label>')
    parts.append('<span class="note" id="filter-count"></span>')
    buttons = '<button type="button" id="download-csv">Download CSV</button>'
    if sdf:
        buttons += ' <button type="button" id="download-sdf">Download SDF</button>'
    parts.append(f"<span>{buttons} <span class=\"note\">(the rows shown, in their order)</span></span>")
    if opts.molecules:
        parts.append(f'<span class="caution">{_e(CAUTION)}</span>')
    return '<div class="tools">' + "".join(parts) + "</div>"


def _table_key(items: list[_Item], opts: _Options) -> str:
    lines = []
    if any(it.confidence is not None for it in items):
        lines.append(
            "<b>confidence</b>: how much the training graphs a prediction leaned on agree with it, "
            "Σ<sub>j</sub> w<sub>j</sub> k(prediction, training graph j) with the barycentric weights "
            "w<sub>j</sub> and k the normalised Weisfeiler-Lehman subtree kernel (node and edge labels, "
            f"{_WL_ITERATIONS} rounds): 1 when every neighbour shares all the prediction's WL features. "
            "It sorts items by how settled their neighbourhood is; it is not a calibrated probability "
            "of being right."
        )
    if opts.molecules:
        lines.append(
            "<b>formula</b>: Hill formula"
            + (
                " with implicit hydrogens from default valences (<i>+ ?H</i>: an atom exceeds its "
                "valence, heavy atoms only)"
                if opts.edge_label is not None
                else " of the heavy atoms (bond orders unknown)"
            )
            + "."
        )
    return "".join(f'<p class="note">{line}</p>' for line in lines)


_BOND_TYPES = {1: 1, 2: 2, 3: 3, 1.5: 4}


def _sdf_record(graph: nx.Graph, opts: _Options) -> list[str] | None:
    """A molecule for the page's SDF writer: atoms, bonds and 2D coordinates as short strings.

    Atoms: element symbols with a signed charge where not neutral (``"CCN+1O"``). Bonds:
    ``"i j"`` (0-based atoms) with `` t`` added for a V2000 bond type other than single,
    comma separated. Coordinates: ``"x y x y ..."`` in 0.1 Angstrom (RDKit's 2D layout;
    empty without RDKit: the writer then puts every atom at 0, 0). None when the graph
    is not a molecule with bond orders.
    """
    if graph.number_of_nodes() == 0 or opts.edge_label is None:
        return None
    pos = {v: k for k, v in enumerate(graph.nodes)}
    atoms = []
    for _, data in graph.nodes(data=True):
        try:  # the element and the charge, from the label ("N+") or the charge attribute
            symbol, charge = node_atom(data, opts.node_label)
        except (TypeError, ValueError):
            return None
        atoms.append(symbol + (f"{int(charge):+d}" if charge else ""))
    bonds = []
    for u, v, data in graph.edges(data=True):
        order = data.get(opts.edge_label)
        if isinstance(order, bool) or not isinstance(order, (int, float, np.number)):
            return None
        if order not in _BOND_TYPES:
            return None
        kind = _BOND_TYPES[order]
        bonds.append(f"{pos[u]} {pos[v]}" + (f" {kind}" if kind != 1 else ""))
    return ["".join(atoms), ",".join(bonds), _coordinates(graph, opts)]


def _data_block(items: list[_Item], opts: _Options) -> tuple[str, bool]:
    """The JSON the page's script reads, and whether it holds any molecule.

    ``{"mols": [[item, atoms, bonds, coordinates], ...]}`` (see :func:`_sdf_record`).
    """
    mols = []
    if opts.molecules:
        for it in items:
            rec = _sdf_record(it.predicted, opts)
            if rec is not None:
                mols.append([it.index, *rec])
    text = json.dumps({"mols": mols}, separators=(",", ":"), ensure_ascii=False)
    text = text.replace("<", "\\u003c")  # never closes the script element
    return f'<script type="application/json" id="gwpred-data">{text}</script>', bool(mols)


def _key() -> str:
    return (
        '<p class="key note">In the drawings: '
        '<span><i class="sw" style="border-color:var(--sub);border-radius:50%"></i>circle: node label substituted '
        "(both sides)</span>"
        '<span><i class="sw" style="border-color:var(--del)"></i>square / vermillion: in the prediction, not in the '
        "truth (deleted)</span>"
        '<span><i class="sw" style="border-color:var(--ins);transform:rotate(45deg)"></i>diamond / blue: in the '
        "truth, missing from the prediction (inserted)</span>"
        "<span>purple edge: wrong edge label. Matched nodes sit at the same place in both drawings.</span></p>"
    )


def _figure_html(svg: str, caption: str) -> str:
    return f"<figure>{svg}<figcaption>{_e(caption)}</figcaption></figure>"


def _depictions(svgs_and_names: list[tuple[str, str]], caption: str) -> str:
    inner = "".join(f"<span>{svg}<br>{_e(name)}</span>" for svg, name in svgs_and_names)
    return f'<figure><div class="pair">{inner}</div><figcaption>{_e(caption)}</figcaption></figure>'


def _alignment_figs(item: _Item, opts: _Options, svgs: _Svgs) -> list[str]:
    r = edit_distance(
        item.predicted,
        item.true,
        node_label=opts.node_label,
        edge_label=opts.edge_label,
        time_limit=opts.time_limit,
    )
    edits = alignment_edits(
        item.predicted,
        item.true,
        r.mapping,
        node_label=opts.node_label,
        edge_label=opts.edge_label,
    )
    n = max(item.predicted.number_of_nodes(), item.true.number_of_nodes())
    fig = _figure(6.4 + 0.08 * max(n - 12, 0), 3.5 + 0.05 * max(n - 12, 0))
    draw_alignment(
        item.predicted,
        item.true,
        fig.subplots(),
        mapping=r.mapping,
        node_label=opts.node_label,
        edge_label=opts.edge_label,
        edge_name=opts.edge_name,
        numbers=True,  # the predicted nodes' numbers are the heat maps' row numbers
    )
    caption = "A least-cost edit path from the prediction to the truth (predicted nodes numbered as the heat-map rows)"
    if not r.exact:
        caption = f"The best edit path found (not proven optimal; lower bound {_fmt(r.lower)})"
    if item.scores is not None and abs(float(item.scores["ged"]) - r.value) > 1e-9:
        caption += f"; the table's GED, {_fmt(float(item.scores['ged']))}, came from another time-limited search"
    out = [_figure_html(svgs.figure(fig), caption)]
    if opts.molecules and opts.rdkit:
        pred_atoms = {
            u: EDIT_COLOURS["substituted"] for u, _ in edits.nodes_substituted
        }
        pred_atoms |= {u: EDIT_COLOURS["deleted"] for u in edits.nodes_deleted}
        pred_bonds = {e: EDIT_COLOURS["deleted"] for e in edits.edges_deleted}
        pred_bonds |= {
            e: EDIT_COLOURS["substituted"] for e, _ in edits.edges_substituted
        }
        true_atoms = {
            v: EDIT_COLOURS["substituted"] for _, v in edits.nodes_substituted
        }
        true_atoms |= {v: EDIT_COLOURS["inserted"] for v in edits.nodes_inserted}
        true_bonds = {e: EDIT_COLOURS["inserted"] for e in edits.edges_inserted}
        true_bonds |= {
            f: EDIT_COLOURS["substituted"] for _, f in edits.edges_substituted
        }
        kw = {"node_label": opts.node_label, "edge_label": opts.edge_label}
        a = _mol_svg(item.predicted, atoms=pred_atoms, bonds=pred_bonds, **kw)
        b = _mol_svg(item.true, atoms=true_atoms, bonds=true_bonds, **kw)
        if a and b:
            out.append(
                _depictions(
                    [(svgs.inline(a), "predicted"), (svgs.inline(b), "true")],
                    "RDKit depictions, edits highlighted in the same colours",
                )
            )
    return out


def _predicted_figs(item: _Item, opts: _Options, svgs: _Svgs) -> list[str]:
    if opts.molecules and opts.rdkit:
        svg = _mol_svg(
            item.predicted, node_label=opts.node_label, edge_label=opts.edge_label
        )
        if svg:
            return [_depictions([(svgs.inline(svg), "predicted")], "RDKit depiction")]
    fig = _figure(3.4, 3.4)
    draw_graph(
        item.predicted,
        fig.subplots(),
        node_label=opts.node_label,
        edge_label=opts.edge_label,
        title="predicted",
        edge_name=opts.edge_name,
    )
    return [_figure_html(svgs.figure(fig), "predicted graph")]


def _training_name(j: int, opts: _Options) -> str:
    name = _graph_name(opts.training_graphs[j]) if opts.training_graphs is not None else None
    return f"training #{j}" + (f" · {name}" if name else "")


def _input_figs(item: _Item, opts: _Options, svgs: _Svgs) -> list[str]:
    overlay = opts.overlays.get(item.index)
    if overlay is None:
        return []
    x, rows = overlay
    idx, w = item.leaned if item.leaned is not None else (np.zeros(0, int), np.zeros(0))
    k = len(rows)
    labels = [_training_name(int(j), opts) for j in idx[:k]]
    # smooth lines (spectra) keep their look with half as many points (deviations < 0.75 pt)
    with matplotlib.rc_context({"path.simplify_threshold": 0.75}):
        fig = _figure(6.2, 2.3)
        draw_inputs(
            x,
            rows,
            w[:k],
            grid=opts.inputs.grid if opts.inputs is not None else None,
            labels=labels,
            ax=fig.subplots(),
        )
    name = opts.inputs.name if opts.inputs is not None else "input"
    caption = f"The {name} of item {item.index}"
    if k:
        caption += (
            f" over those of the {k} training items with the largest weights, "
            "the evidence the prediction rests on"
        )
    return [_figure_html(svgs.figure(fig), caption)]


def _neighbour_figs(item: _Item, opts: _Options, svgs: _Svgs) -> list[str]:
    if opts.training_graphs is None or item.leaned is None or not len(item.leaned[0]):
        return []
    idx, w = item.leaned
    top = float(w[0])
    cells = []
    for j, wj in zip(idx[: opts.neighbours].tolist(), w[: opts.neighbours].tolist()):
        g = opts.training_graphs[j]
        smiles = g.graph.get("smiles")
        if not smiles and opts.molecules and opts.rdkit:
            try:
                smiles = check_molecule(
                    g, node_label=str(opts.node_label), edge_label=str(opts.edge_label)
                ).smiles
            except (TypeError, ValueError):
                smiles = None
        lines = [f"training #{j}"]
        name = _graph_name(g)
        if name:
            lines.append(_e(name))
        if smiles:
            lines.append(f'<span class="smiles">{_e(smiles)}</span>')
        lines.append(f"weight {wj:.2f}")
        bar = f'<i class="bar" style="width:{100 * wj / top:.0f}%"></i>'
        cells.append(f"<span>{_thumbnail(g, opts, svgs, 120)}{bar}{'<br>'.join(lines)}</span>")
    return [
        f'<figure><div class="nbrs">{"".join(cells)}</div><figcaption>The training graphs this '
        "prediction leaned on, with their barycentric weights</figcaption></figure>"
    ]


def _barycenter_figs(item: _Item, opts: _Options, svgs: _Svgs) -> list[str]:
    soft = opts.barycenters.get(item.index)
    if soft is None:
        return []
    names = opts.label_names
    best = (
        [str(names[k]) for k in np.asarray(soft.node_scores).argmax(1)]
        if names is not None
        else None
    )
    n = np.asarray(soft.structure).shape[0]
    # fixed margins for the tick labels, titles and colour bars: drawn once (no tight box)
    fig = _figure(
        3.2 + 0.12 * n + (2.6 if names is not None else 0),
        2.6 + 0.1 * n,
        (0.45, 0.45, 0.4, 0.3),
        0.7,
    )
    if names is not None:
        axes = fig.subplots(
            1, 2, gridspec_kw={"width_ratios": [max(n, 1), max(len(names) * 1.6, 3)]}
        )
        # both maps run from 0 to 1 in one colour map: one colour bar, no numbers in cells
        shared = max(np.max(soft.structure), np.max(soft.node_scores)) <= 1.0
        draw_structure(soft.structure, axes[0], labels=best, colorbar=not shared)
        draw_node_scores(soft.node_scores, list(names), axes[1], annotate=False)
    else:
        draw_structure(soft.structure, fig.subplots())
    return [
        _figure_html(
            svgs.figure(fig, tight=False),
            "Soft barycenter before decoding: how strongly the weighted training "
            "graphs link each pair of nodes, and the label votes per node (one colour scale)",
        )
    ]


#: Templates drawn on the page (the first ones) and in each item's panel (its largest weights).
_PAGE_TEMPLATES, _ITEM_TEMPLATES = 6, 3


def _templates_svg(model: Any, x: NDArray[np.float64] | None, top: int, svgs: _Svgs) -> str:
    """Inline SVG of :func:`gwpred.plot.draw_templates` (outside pyplot)."""
    shown = min(top, len(model.templates_)) + (x is not None)
    return svgs.figure(draw_templates(model, x, top=top, fig=_figure(6.4, 2.4 * shown)))


def _template_figs(item: _Item, opts: _Options, svgs: _Svgs) -> list[str]:
    if opts.templates is None or item.index not in opts.overlays:
        return []
    x = opts.overlays[item.index][0]
    m = len(opts.templates.templates_)
    return [
        _figure_html(
            _templates_svg(opts.templates, x, _ITEM_TEMPLATES, svgs),
            f"The weights this input puts on each of the {m} learned templates (top), and the "
            f"{min(_ITEM_TEMPLATES, m)} it weighs most: structure (how strongly each pair of nodes is "
            "linked) and node-label scores",
        )
    ]


def _candidate_figs(item: _Item, opts: _Options, svgs: _Svgs) -> list[str]:
    shown = (item.candidates or [])[: opts.top]
    if not shown:
        return []
    heads = []
    for k, c in enumerate(shown):
        name = _graph_name(c.graph)
        confidence = getattr(c, "confidence", None)  # generated hypotheses carry one
        head = ("hypothesis" if confidence is not None else "candidate") + f" #{k + 1}" + (f" {name}" if name else "")
        head += f", score {c.score:.3g}" if c.score is not None else ""
        head += f", confidence {100 * confidence:.0f}%" if confidence is not None else ""
        if item.true is not None and exact_match(
            c.graph, item.true, node_label=opts.node_label, edge_label=opts.edge_label
        ):
            head += " = truth"
        heads.append(head)
    if opts.molecules and opts.rdkit:
        parts = []
        for c, head in zip(shown, heads):
            svg = _mol_svg(
                c.graph,
                node_label=opts.node_label,
                edge_label=opts.edge_label,
                size=(180, 150),
            )
            if svg is None:
                break
            parts.append(_figure_html(svgs.inline(svg), head))
        else:
            return parts
    fig = _figure(2.0 * len(shown), 2.3)
    axes = np.atleast_1d(fig.subplots(1, len(shown)))
    for ax, c, head in zip(axes, shown, heads):
        draw_graph(
            c.graph,
            ax,
            node_label=opts.node_label,
            edge_label=opts.edge_label,
            title=head,
            legend=False,
            edge_name=opts.edge_name,
        )
    return [_figure_html(svgs.figure(fig), f"Top {len(shown)} ranked candidates")]


def _panel(item: _Item, opts: _Options, svgs: _Svgs) -> str:
    head = f"Item {item.index}" + (f" ({item.name})" if item.name else "")
    facts = []
    if item.scores is not None:
        s = item.scores
        exact = "" if s.get("ged_proven", True) else " (best found, not proven optimal)"
        facts.append(f"GED {_fmt(float(s['ged']))}{exact}")
        facts.append(f"{s['n_pred']} predicted / {s['n_true']} true nodes")
        facts.append("exact match" if s["exact_match"] else "not an exact match")
    else:
        facts.append(
            f"{item.predicted.number_of_nodes()} nodes, {item.predicted.number_of_edges()} edges"
        )
    if item.confidence is not None:
        facts.append(f"confidence {_fmt(item.confidence)}")
    if item.candidates:
        if item.true is not None:
            facts.append(
                f"truth at rank {item.hit_rank}"
                if item.hit_rank
                else f"truth not among the first {min(len(item.candidates), _HIT_DEPTH)} candidates"
            )
        else:
            facts.append(f"{len(item.candidates)} ranked candidates")
    lines = [
        f'<section class="item" id="item-{item.index}"><h3>{_e(head)}: {_e(" · ".join(facts))}</h3>'
    ]
    if opts.molecules and opts.rdkit:
        valid = (
            "valid molecule" if item.valid else f"not a valid molecule ({item.problem})"
        )
        lines.append(
            f'<div>predicted: <span class="smiles">{_e(item.smiles or "–")}</span> '
            f"{_e(item.formula or '')} · {_e(valid)}</div>"
        )
        if item.true is not None:
            lines.append(
                f'<div>true: <span class="smiles">{_e(item.true_smiles or "–")}</span> '
                f"{_e(item.true_formula or '')}</div>"
            )
    figs = (
        _alignment_figs(item, opts, svgs)
        if item.true is not None
        else _predicted_figs(item, opts, svgs)
    )
    figs += _input_figs(item, opts, svgs)
    figs += _neighbour_figs(item, opts, svgs)
    figs += _barycenter_figs(item, opts, svgs)
    figs += _template_figs(item, opts, svgs)
    figs += _candidate_figs(item, opts, svgs)
    lines.append('<div class="figs">' + "".join(figs) + "</div>")
    lines.append("</section>")
    return "\n".join(lines)


# --------------------------------------------------------------------------- public API


def build_report(
    predicted: Sequence[nx.Graph],
    true: Sequence[nx.Graph] | None = None,
    *,
    ranked: Mapping[int, Sequence[Any]] | Sequence[Sequence[Any] | None] | None = None,
    summary: dict | None = None,
    barycenters: Sequence[Any] | None = None,
    training_graphs: Sequence[nx.Graph] | None = None,
    label_names: Sequence[Any] | None = None,
    leaned_on: Sequence[tuple[NDArray, NDArray] | None] | tuple[NDArray, NDArray] | None = None,
    inputs: Any = None,
    training_inputs: Any = None,
    input_grid: Any = None,
    input_name: str = "input",
    templates: Any = None,
    title: str = "gwpred predictions",
    notes: Sequence[str] = (),
    time_limit: float | None = 10.0,
    limit: int | None = None,
    drawings: int = 30,
    top_k: int = 5,
    neighbours: int = 6,
    node_label: Hashable = "label",
    edge_label: Hashable | None = "label",
    molecules: bool | None = None,
    progress: bool = False,
    top: int | None = None,
) -> str:
    r"""A self-contained HTML page (inline SVG, inline CSS, a little inline JavaScript).

    The items table has one row per item: its id, small depictions of the predicted
    and true graphs, confidence, scores and (for molecules) formulas and SMILES. It
    sorts by any numeric column, filters by words (id, SMILES, formula), largest
    edit distance and invalid molecules, and downloads the rows shown as CSV or, for
    molecules, SDF (V2000; the id as title, properties ``id``, ``index``, ``smiles``,
    ``formula``, ``ged``, ``confidence``, ``true_smiles``). The first ``drawings``
    items get a panel with full drawings: the edit path to the truth, RDKit
    depictions, the item's input over those of the training items it leaned on most,
    those training graphs with their weights, the soft barycenter and ranked
    candidates. Wide tables scroll inside their own box, so the page fits narrow
    windows.

    Parameters
    ----------
    predicted : sequence of networkx.Graph
        Predicted graphs, one per item. ``graph.graph["id"]`` (of the predicted or the
        true graph) is shown as the item's id.
    true : sequence of networkx.Graph, default=None
        True graphs in the same order. Without them the page shows the predictions only.
    ranked : dict or sequence, default=None
        Ranked candidates per item, best first: a dict row -> list, or one list (or None)
        per prediction; entries are graphs or :class:`RankedCandidate` (see
        :func:`read_ranked`). Each panel shows the first ``top_k`` and whether the truth is
        among them (:func:`gwpred.metrics.exact_match`); the summary gives the share of
        items whose truth is among the first 1, 5, 10 candidates, over the items that
        have a list. A candidate's name is its graph's ``"id"`` (or ``"name"``).
    summary : dict, default=None
        The result of :func:`gwpred.metrics.summarize` for these pairs, to skip scoring
        them again; by default it is computed here.
    barycenters : sequence of SoftGraph or None, default=None
        Per item (a prefix of the items is enough), the soft barycenter of the prediction
        (:meth:`gwpred.BarycenterGraphPredictor.predict_barycenters`); drawn as heat maps.
        Their ``neighbors`` and ``weights`` stand in for ``leaned_on`` when it is None.
    training_graphs : sequence of networkx.Graph, default=None
        The training graphs, in the order the model was fitted on: drawn under each
        panel (with their ``graph["id"]`` and ``graph["smiles"]`` when set) and
        compared with the prediction for the confidence.
    label_names : sequence, default=None
        Node label of each column of ``SoftGraph.node_scores`` (``model.labels_.node_labels_``).
    leaned_on : sequence of (ndarray, ndarray) or None, default=None
        Per item (a prefix of the items is enough), the training indices (int) and
        barycentric weights the prediction was made from; ``model.neighbors(X)`` as
        returned (two arrays of shape (n_items, top_k)) is accepted too. Zero weights
        are ignored. With ``training_graphs`` each such item gets a confidence,

        .. math:: c = \sum_j w_j\, k(\hat y, y_j) \big/ \sum_j w_j \in [0, 1],

        with :math:`k` the normalised Weisfeiler-Lehman subtree kernel (node and edge
        labels, 3 rounds, as :mod:`gwpred.ranking`'s kernel scorer): how much the
        training graphs :math:`y_j` agree with the prediction :math:`\hat y`. It is a
        sort key, not a calibrated probability.
    inputs : array-like of shape (n_items, n_features), default=None
        The input vectors of the items (a prefix of the items is enough); the panels
        draw each one (:func:`gwpred.plot.draw_inputs`) over the ``training_inputs`` of
        its 3 training items with the largest weights.
    training_inputs : array-like of shape (n_train, n_features), default=None
        Anything whose ``[j]`` is training item ``j``'s input vector (a dense or sparse
        matrix, a list of vectors).
    input_grid : array-like of shape (n_features,), default=None
        The x value of each input column (e.g. wavenumbers in cm-1); None: column index.
    input_name : str, default="input"
        What the inputs are, for captions (e.g. ``"IR spectrum"``).
    templates : TemplateGraphPredictor, default=None
        The fitted :class:`~gwpred.TemplateGraphPredictor` that made the predictions:
        the page draws its first templates (structure heat map and node-label scores),
        and each drawn item with an entry in ``inputs`` gets the weights its input puts
        on every template and the templates it weighs most.
    title : str, default="gwpred predictions"
    notes : sequence of str, default=()
        Lines shown under the title (for example how the predictions were made).
    time_limit : float or None, default=10.0
        Seconds per graph edit distance (see :func:`gwpred.metrics.edit_distance`).
    limit : int, default=None
        Report only the first ``limit`` items.
    drawings : int, default=30
        Items (the first ones) that get a panel of drawings; the others are table rows.
    top_k : int, default=5
        Ranked candidates drawn per item (the old name ``top`` works for one
        more release, with a FutureWarning).
    neighbours : int, default=6
        Training graphs drawn per item.
    node_label, edge_label : hashable, default="label"
        Attributes holding node and edge labels; ``edge_label=None`` ignores edge labels.
    molecules : bool, default=None
        Treat the graphs as molecules (caution line; formulas; RDKit depictions, SMILES,
        validity and the SDF download when RDKit is installed). None: when every node
        label is an element symbol.
    progress : bool, default=False
        Progress bars on standard error while scoring and drawing.

    Returns
    -------
    str
        The HTML document.

    Raises
    ------
    TypeError
        If ``predicted``, ``true``, ``ranked``, ``barycenters``, ``leaned_on``,
        ``training_inputs`` or ``input_name`` have the wrong types.
    ValueError
        If the numbers of predicted and true graphs differ, there are no items, ``limit``,
        ``drawings``, ``top_k`` or ``neighbours`` are out of range, ``ranked`` names rows
        that do not exist, ``summary`` does not cover the items, ``barycenters``,
        ``leaned_on`` or ``inputs`` are longer than the items, ``leaned_on`` is not made
        of (integer indices, non-negative weights) pairs, ``barycenters`` or
        ``leaned_on`` point to graphs outside ``training_graphs``, or the inputs, grid
        and training inputs do not have matching numbers of columns.

    Examples
    --------
    >>> from gwpred.datasets import load_demo
    >>> X, graphs = load_demo()
    >>> page = build_report(graphs[10:12], graphs[:2], molecules=False, drawings=0)
    >>> page.startswith("<!DOCTYPE html>"), 'id="items"' in page
    (True, True)
    """
    predicted = _check_graphs(predicted, "predicted")
    truth = None if true is None else _check_graphs(true, "true")
    if truth is not None and len(truth) != len(predicted):
        raise ValueError(
            f"there are {len(predicted)} predicted graphs but {len(truth)} true graphs; they must be in "
            "the same order, one prediction per true graph"
        )
    if not predicted:
        raise ValueError(
            "there are no predicted graphs; a report needs at least one item"
        )
    n_all = len(predicted)
    n = n_all if limit is None else min(_check_count(limit, "limit", 1), n_all)
    drawings = _check_count(drawings, "drawings", 0)
    top = _check_count(renamed_keyword("top", "top_k", top, top_k, 5), "top_k", 0)
    neighbours = _check_count(neighbours, "neighbours", 1)
    cands = _normalise_ranked(ranked, n_all, n)
    bary = _check_barycenters(barycenters, n_all, training_graphs)
    leaned = _check_leaned_on(leaned_on, bary, n_all, training_graphs)
    vectors = _check_inputs(inputs, training_inputs, input_grid, input_name, n_all)
    if templates is not None and not (hasattr(templates, "templates_") and hasattr(templates, "template_weights")):
        raise ValueError(
            f"templates must be a fitted TemplateGraphPredictor, got {type(templates).__name__}; "
            "fit it first, or leave templates out"
        )
    predicted, truth = predicted[:n], None if truth is None else truth[:n]
    molecular = (
        is_molecular(predicted + (truth or []), node_label)
        if molecules is None
        else bool(molecules)
    )
    # depictions, SMILES and validity need bond orders, so edge labels must be read
    rdkit = molecular and edge_label is not None and has_extra("rdkit")
    opts = _Options(
        node_label,
        edge_label,
        time_limit,
        top,
        molecular,
        rdkit,
        bary,
        training_graphs,
        label_names,
        neighbours,
        vectors,
        templates,
    )
    drawn = min(drawings, n)
    if vectors is not None:  # read the drawn items' inputs now: a bad row fails before any scoring
        for i in range(min(drawn, vectors.items.shape[0])):
            rows = []
            if vectors.training is not None and i in leaned:
                rows = [
                    _input_row(vectors.training, j, vectors.width, "training_inputs")
                    for j in leaned[i][0][:_OVERLAY].tolist()
                ]
            opts.overlays[i] = (_input_row(vectors.items, i, vectors.width, "inputs"), rows)

    if truth is not None:
        if summary is None:
            summary = summarize(
                predicted,
                truth,
                node_label=node_label,
                edge_label=edge_label,
                time_limit=time_limit,
                progress=progress,
            )
        elif not isinstance(summary, dict) or len(summary.get("items", ())) != n:
            got = (
                len(summary.get("items", ()))
                if isinstance(summary, dict)
                else type(summary).__name__
            )
            raise ValueError(
                f"summary must be gwpred.metrics.summarize's result for these {n} items, got {got} items; "
                "pass summary=None to score them here"
            )
    items = [
        _Item(
            i,
            predicted[i],
            None if truth is None else truth[i],
            None if summary is None else summary["items"][i],
            cands.get(i),
            name=_graph_name(predicted[i]) or _graph_name(None if truth is None else truth[i]),
            leaned=leaned.get(i),
        )
        for i in range(n)
    ]
    for it in items:
        if it.candidates and it.true is not None:
            it.hit_rank = _hit_rank(it, opts)
        if rdkit:
            _chem_fields(it, opts)
        if molecular:
            it.formula = _formula(it.predicted, opts)
            it.true_formula = None if it.true is None else _formula(it.true, opts)
    _confidences(items, opts)

    svgs = _Svgs()
    parts = [f"<h1>{_e(title)}</h1>"]
    meta = f"{n} items" + (f" (first {n} of {n_all})" if n < n_all else "")
    meta += "; with true graphs" if truth is not None else "; no true graphs given"
    if cands:
        meta += f"; ranked candidate lists for {len(cands)} items"
    parts.append(f'<p class="meta">{_e(meta)}</p>')
    parts += [f'<p class="meta">{_e(line)}</p>' for line in notes]
    if molecular:
        parts.append(f'<p class="caution"><strong>Caution.</strong> {_e(CAUTION)}</p>')
        if edge_label is None:
            parts.append(
                '<p class="note">Edge labels are ignored, so bond orders are unknown: no molecule '
                "depictions, SMILES or validity checks.</p>"
            )
        elif not rdkit:
            parts.append(
                '<p class="note">Node labels are element symbols; install RDKit '
                "(pip install 'gwpred[chem]') for molecule depictions, SMILES and validity checks.</p>"
            )
    parts.append("<h2>Summary</h2>")
    parts.append(_summary_cards(summary, items, opts))
    if summary is not None:
        parts.append(
            _figure_html(
                _ged_histogram(summary, svgs),
                "How many items have each graph edit distance "
                "(uniform costs: each node or edge inserted, deleted or relabeled costs 1)",
            )
        )
    reliable = _top_confidences(items)
    if reliable is not None:
        conf, hit = reliable
        parts.append(
            _figure_html(
                _reliability(conf, hit, svgs),
                f"Can the confidence be trusted? First hypotheses of {len(conf)} items: expected calibration "
                f"error {expected_calibration_error(conf, hit):.3f} (0 is perfect). Left: how often the first "
                "hypothesis is exact among the items with the highest confidence; right: observed rate per "
                "confidence bin (on the grey line when calibrated)",
            )
        )
    if templates is not None:
        m = len(templates.templates_)
        parts.append("<h2>Learned templates</h2>")
        parts.append(
            _figure_html(
                _templates_svg(templates, None, _PAGE_TEMPLATES, svgs),
                f"The first {min(_PAGE_TEMPLATES, m)} of the model's {m} templates: each prediction is the "
                "FGW barycenter of the templates its input weighs most. Structure: how strongly each "
                "pair of nodes is linked (0 to 1); node labels: the label scores of each node",
            )
        )
    parts.append("<h2>Items</h2>")
    hint = "Click a column heading to sort (again to reverse)"
    hint += "; click an item number to jump to its drawings." if drawn else "."
    parts.append(f'<p class="note">{hint}</p>')
    data, has_mols = _data_block(items, opts)
    parts.append(_tools(items, opts, truth is not None, has_mols))
    parts.append(_table(items, opts, truth is not None, drawings, svgs))
    parts.append(_table_key(items, opts))
    parts.append(data)
    parts.append("<h2>Drawings</h2>")
    if drawn < n:
        parts.append(
            f'<p class="note">No drawings: only the first {drawn} items are drawn (raise <code>--drawings</code> '
            f"to draw more); the other {n - drawn} are rows of the table above.</p>"
        )
    if truth is not None and drawn:
        parts.append(_key())
    for it in progress_bar(items[:drawn], progress=progress, desc="report panels"):
        parts.append(_panel(it, opts, svgs))
    return _page(title, "\n".join(parts))


def _page(title: str, body: str) -> str:
    return (
        '<!DOCTYPE html>\n<html lang="en"><head><meta charset="utf-8">'
        '<meta name="viewport" content="width=device-width, initial-scale=1">'
        # nothing may be fetched: this policy blocks any request the page could make
        '<meta http-equiv="Content-Security-Policy" content="default-src \'none\'; '
        "style-src 'unsafe-inline'; script-src 'unsafe-inline'; img-src data:\">"
        f"<title>{_e(title)}</title><style>{_CSS}</style></head>\n<body>\n{body}\n"
        f"<script>{_JS}</script>\n</body></html>\n"
    )


def write_report(
    path: str | os.PathLike,
    predicted: Sequence[nx.Graph],
    true: Sequence[nx.Graph] | None = None,
    **kwargs: Any,
) -> Path:
    """Write :func:`build_report`'s page to ``path`` (UTF-8) and return the path.

    The file is written next to its final place and then moved there, so an existing
    report is never left half-written.

    Parameters
    ----------
    path : str or os.PathLike
        Target ``.html`` file; its folder must exist.
    predicted, true, **kwargs
        As for :func:`build_report`.

    Returns
    -------
    pathlib.Path

    Raises
    ------
    ValueError
        If ``path`` does not end in ``.html`` or ``.htm``; see also :func:`build_report`.
    FileNotFoundError
        If the folder of ``path`` does not exist.
    """
    path = Path(path)
    if path.suffix.lower() not in (".html", ".htm"):
        raise ValueError(
            f"the report is an HTML file; name it with .html (got {str(path)!r})"
        )
    if not path.parent.is_dir():
        raise FileNotFoundError(
            f"folder {str(path.parent)!r} does not exist; create it first"
        )
    text = build_report(predicted, true, **kwargs)
    atomic_write_text(path, text)
    return path

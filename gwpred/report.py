"""One self-contained static HTML page to look at predicted graphs.

:func:`build_report` turns predicted graphs (with the true graphs when known, ranked
candidate lists and soft barycenters when available) into one HTML string: summary
scores at the top, a table of items that sorts by edit distance, size or exact match
(a few lines of inline JavaScript), and a panel per item with its drawings as inline
SVG. The page loads nothing from anywhere: no network, no external scripts or styles.

This module draws and scores what it is given; it never computes predictions.
"""

from __future__ import annotations

import html
import io
import math
import os
import re
from collections.abc import Hashable, Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import matplotlib
import networkx as nx
import numpy as np
from matplotlib.figure import Figure

from ._utils import CAUTION, atomic_write_text, has_extra, progress_bar, require_extra
from .chem import check_molecule, graph_to_mol
from .formula import ELEMENTS
from .io import RankedCandidate, read_ranked, write_ranked
from .metrics import TOP_K, edit_distance, exact_match, hit_rank, summarize
from .plot import (
    EDIT_COLOURS,
    alignment_edits,
    draw_alignment,
    draw_graph,
    draw_neighbors,
    draw_node_scores,
    draw_structure,
)

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


# --------------------------------------------------------------------------- inputs


def is_molecular(graphs: Sequence[nx.Graph], node_label: Hashable = "label") -> bool:
    """Whether every node label is an element symbol (and there is at least one node).

    Examples
    --------
    >>> g = nx.Graph([(0, 1)]); nx.set_node_attributes(g, {0: "C", 1: "Cl"}, "label")
    >>> is_molecular([g]), is_molecular([nx.relabel_nodes(g, {0: 5})], node_label="x")
    (True, False)
    """
    seen = False
    for g in graphs:
        for _, lab in g.nodes(data=node_label):
            if not (isinstance(lab, str) and lab in ELEMENTS):
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


# --------------------------------------------------------------------------- SVG helpers

_ID = re.compile(r'\bid="([^"]+)"')
_GID = re.compile(r' id="gwpred-[^"]*"')


def _unique_ids(svg: str, prefix: str) -> str:
    """Prefix every id of an SVG (and the references to it), so that many SVGs can share a page."""
    ids = set(_ID.findall(svg))
    if not ids:
        return svg
    names = "|".join(re.escape(i) for i in sorted(ids, key=len, reverse=True))
    pattern = re.compile(r'(\bid="|#)(' + names + r')(?=["\)])')
    return pattern.sub(lambda m: m.group(1) + prefix + m.group(2), svg)


def _strip_prolog(svg: str) -> str:
    start = svg.find("<svg")
    return svg[start:] if start >= 0 else svg


class _Svgs:
    """Turns figures into inline SVG with page-unique ids."""

    def __init__(self) -> None:
        self.count = 0

    def inline(self, svg: str) -> str:
        self.count += 1
        # the plot module's element tags repeat within a drawing; ids must not
        svg = _GID.sub("", _strip_prolog(svg))
        return _unique_ids(svg, f"s{self.count}-")

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


def _mol_svg(
    graph: nx.Graph,
    *,
    node_label: Hashable,
    edge_label: Hashable | None,
    atoms: Mapping[Hashable, str] | None = None,
    bonds: Mapping[tuple, str] | None = None,
    size: tuple[int, int] = (260, 200),
    legend: str = "",
) -> str | None:
    """RDKit depiction of a heavy-atom graph as SVG, with highlighted atoms and bonds; None if impossible."""
    if edge_label is None or graph.number_of_nodes() == 0:
        return None
    rdDepictor = require_extra("rdkit.Chem.rdDepictor", "molecule depictions")
    rdMolDraw2D = require_extra("rdkit.Chem.Draw.rdMolDraw2D", "molecule depictions")
    try:
        mol = graph_to_mol(
            graph,
            node_label=str(node_label),
            edge_label=str(edge_label),
            sanitize=False,
        )
        rdDepictor.Compute2DCoords(mol)
    except (ValueError, TypeError, RuntimeError):
        return None
    index = {v: i for i, v in enumerate(graph.nodes)}
    atom_cols = {index[v]: _rgb(c) for v, c in (atoms or {}).items()}
    bond_cols = {}
    for (u, v), c in (bonds or {}).items():
        b = mol.GetBondBetweenAtoms(index[u], index[v])
        if b is not None:
            bond_cols[b.GetIdx()] = _rgb(c)
    drawer = rdMolDraw2D.MolDraw2DSVG(*size)
    opts = drawer.drawOptions()
    opts.legendFontSize = 14
    opts.clearBackground = False
    drawer.DrawMolecule(
        mol,
        highlightAtoms=list(atom_cols),
        highlightAtomColors=atom_cols,
        highlightBonds=list(bond_cols),
        highlightBondColors=bond_cols,
        legend=legend,
    )
    drawer.FinishDrawing()
    return str(drawer.GetDrawingText())


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

    @property
    def edge_name(self) -> str:
        return "bond order" if self.molecules else "edge"


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
.row { display: flex; flex-wrap: wrap; gap: 12px; align-items: flex-start; }
table.items { border-collapse: collapse; width: 100%; font-size: 13px; }
table.items th, table.items td { border-bottom: 1px solid var(--line); padding: 3px 8px; text-align: right; white-space: nowrap; }
table.items td.text, table.items th.text { text-align: left; white-space: normal; word-break: break-all; }
table.items thead th { position: sticky; top: 0; background: #e9e9e9; }
table.items th button { font: inherit; font-weight: 600; border: 0; background: none; cursor: pointer; padding: 0; }
table.items th[aria-sort=ascending] button::after { content: " \\25B2"; }
table.items th[aria-sort=descending] button::after { content: " \\25BC"; }
table.items tbody tr:nth-child(even) { background: #fafafa; }
.tablewrap { max-height: 520px; overflow: auto; border: 1px solid var(--line); }
.yes { color: #006d4f; font-weight: 600; }
.no { color: var(--muted); }
.item { border: 1px solid var(--line); border-radius: 6px; padding: 10px 14px; margin: 14px 0; }
.item:target { outline: 3px solid var(--ins); }
.figs { display: flex; flex-wrap: wrap; gap: 10px; align-items: flex-start; margin-top: 6px; }
.figs figure { margin: 0; }
.figs figcaption { color: var(--muted); font-size: 12px; max-width: 520px; }
svg { max-width: 100%; height: auto; }
.smiles { font-family: ui-monospace, Menlo, Consolas, monospace; word-break: break-all; }
.note { color: var(--muted); font-size: 12px; }
.key span { display: inline-block; margin-right: 14px; }
.sw { display: inline-block; width: 12px; height: 12px; border: 2px solid; vertical-align: -1px; margin-right: 4px; }
"""

# Sorting: click a column heading; numbers from data-value, ties by item number.
_JS = """
(function () {
  function val(row, col) {
    var v = row.cells[col].getAttribute("data-value");
    return v === null ? row.cells[col].textContent : parseFloat(v);
  }
  document.querySelectorAll("table.items th button").forEach(function (btn) {
    btn.addEventListener("click", function () {
      var th = btn.parentNode, table = th.closest("table"), body = table.tBodies[0];
      var col = Array.prototype.indexOf.call(th.parentNode.children, th);
      var asc = th.getAttribute("aria-sort") !== "ascending";
      var rows = Array.prototype.slice.call(body.rows);
      rows.sort(function (a, b) {
        var x = val(a, col), y = val(b, col), d = x < y ? -1 : x > y ? 1 : 0;
        return (asc ? d : -d) || (parseInt(a.dataset.index, 10) - parseInt(b.dataset.index, 10));
      });
      rows.forEach(function (r) { body.appendChild(r); });
      table.querySelectorAll("th").forEach(function (h) { h.removeAttribute("aria-sort"); });
      th.setAttribute("aria-sort", asc ? "ascending" : "descending");
    });
  });
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


def _cell(text: str, value: float | None = None, cls: str = "") -> str:
    attr = f' data-value="{value!r}"' if value is not None else ""
    klass = f' class="{cls}"' if cls else ""
    return f"<td{klass}{attr}>{text}</td>"


def _yes_no(flag: bool | None) -> str:
    if flag is None:
        return '<span class="no">–</span>'
    return '<span class="yes">yes</span>' if flag else '<span class="no">no</span>'


def _table(items: list[_Item], opts: _Options, with_truth: bool) -> str:
    cols: list[tuple[str, bool]] = [("#", True)]
    if with_truth:
        cols += [
            ("GED", True),
            ("predicted nodes", True),
            ("true nodes", True),
            ("exact match", True),
            ("node label acc.", True),
            ("edge F1", True),
        ]
    else:
        cols += [
            ("predicted nodes", True),
            ("predicted edges", True),
            ("connected", True),
        ]
    has_ranked = any(it.candidates for it in items)
    if has_ranked and with_truth:
        cols.append(("truth at rank", True))
    if opts.molecules and opts.rdkit:
        cols += [("valid molecule", True), ("predicted SMILES", False)]
        if with_truth:
            cols.append(("true SMILES", False))
    head = "".join(
        f'<th scope="col"><button type="button">{_e(name)}</button></th>'
        if sortable
        else f'<th scope="col" class="text">{_e(name)}</th>'
        for name, sortable in cols
    )
    rows = []
    for it in items:
        cells = [_cell(f'<a href="#item-{it.index}">{it.index}</a>', it.index)]
        if with_truth:
            s = it.scores or {}
            ged = float(s["ged"])
            ged_text = _fmt(ged) + ("" if s.get("ged_proven", True) else " ≤")
            cells += [
                _cell(ged_text, ged),
                _cell(str(s["n_pred"]), s["n_pred"]),
                _cell(str(s["n_true"]), s["n_true"]),
                _cell(_yes_no(bool(s["exact_match"])), int(bool(s["exact_match"]))),
                _cell(_pct(s["node_label_accuracy"]), s["node_label_accuracy"]),
                _cell(_pct(s["edge_f1"]), s["edge_f1"]),
            ]
        else:
            g = it.predicted
            conn = g.number_of_nodes() > 0 and nx.is_connected(g)
            cells += [
                _cell(str(g.number_of_nodes()), g.number_of_nodes()),
                _cell(str(g.number_of_edges()), g.number_of_edges()),
                _cell(_yes_no(conn), int(conn)),
            ]
        if has_ranked and with_truth:
            rank = it.hit_rank
            text = str(rank) if rank else ("not in list" if it.candidates else "–")
            cells.append(_cell(text, float(rank) if rank else math.inf))
        if opts.molecules and opts.rdkit:
            cells.append(
                _cell(_yes_no(it.valid), -1 if it.valid is None else int(it.valid))
            )
            cells.append(
                _cell(f'<span class="smiles">{_e(it.smiles or "")}</span>', cls="text")
            )
            if with_truth:
                cells.append(
                    _cell(
                        f'<span class="smiles">{_e(it.true_smiles or "")}</span>',
                        cls="text",
                    )
                )
        rows.append(f'<tr data-index="{it.index}">' + "".join(cells) + "</tr>")
    return (
        '<div class="tablewrap"><table class="items" id="items"><thead><tr>'
        + head
        + "</tr></thead><tbody>"
        + "\n".join(rows)
        + "</tbody></table></div>"
    )


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
    )
    caption = "A least-cost edit path from the prediction to the truth"
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
        a = _mol_svg(
            item.predicted, atoms=pred_atoms, bonds=pred_bonds, legend="predicted", **kw
        )
        b = _mol_svg(item.true, atoms=true_atoms, bonds=true_bonds, legend="true", **kw)
        if a and b:
            out.append(
                _figure_html(
                    svgs.inline(a) + svgs.inline(b),
                    "RDKit depictions, edits highlighted in the same colours",
                )
            )
    return out


def _predicted_figs(item: _Item, opts: _Options, svgs: _Svgs) -> list[str]:
    if opts.molecules and opts.rdkit:
        svg = _mol_svg(
            item.predicted,
            node_label=opts.node_label,
            edge_label=opts.edge_label,
            legend="predicted",
        )
        if svg:
            return [_figure_html(svgs.inline(svg), "RDKit depiction")]
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
        draw_structure(soft.structure, axes[0], labels=best)
        draw_node_scores(soft.node_scores, list(names), axes[1])
    else:
        draw_structure(soft.structure, fig.subplots())
    out = [
        _figure_html(
            svgs.figure(fig, tight=False),
            "Soft barycenter before decoding: how strongly the weighted training "
            "graphs link each pair of nodes, and the label votes per node",
        )
    ]
    if opts.training_graphs is not None and len(soft.neighbors):
        idx = [int(j) for j in soft.neighbors]
        graphs = [opts.training_graphs[j] for j in idx]
        k = min(opts.neighbours, len(idx))
        fig = _figure(1.55 * k + 0.3, 2.5, (0.02, 0.02, 0.02, 0.25))
        draw_neighbors(
            graphs,
            soft.weights,
            fig.subplots(),
            names=[f"training #{j}" for j in idx],
            max_graphs=opts.neighbours,
            node_label=opts.node_label,
            edge_label=opts.edge_label,
            edge_name=opts.edge_name,
        )
        out.append(
            _figure_html(
                svgs.figure(fig, tight=False),
                "The training graphs this prediction leaned on, with their "
                "barycentric weights",
            )
        )
    return out


def _candidate_figs(item: _Item, opts: _Options, svgs: _Svgs) -> list[str]:
    shown = (item.candidates or [])[: opts.top]
    if not shown:
        return []
    heads = []
    for k, c in enumerate(shown):
        head = f"candidate #{k + 1}" + (
            f", score {c.score:.3g}" if c.score is not None else ""
        )
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


def _panel(item: _Item, opts: _Options, svgs: _Svgs, draw: bool, drawings: int) -> str:
    head = f"Item {item.index}"
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
            f'<div>predicted: <span class="smiles">{_e(item.smiles or "–")}</span> · {_e(valid)}</div>'
        )
        if item.true is not None:
            lines.append(
                f'<div>true: <span class="smiles">{_e(item.true_smiles or "–")}</span></div>'
            )
    if draw:
        figs = (
            _alignment_figs(item, opts, svgs)
            if item.true is not None
            else _predicted_figs(item, opts, svgs)
        )
        figs += _barycenter_figs(item, opts, svgs)
        figs += _candidate_figs(item, opts, svgs)
        lines.append('<div class="figs">' + "".join(figs) + "</div>")
    else:
        lines.append(
            f'<p class="note">No drawings: only the first {drawings} items are drawn '
            "(raise <code>--drawings</code> to draw more).</p>"
        )
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
    title: str = "gwpred predictions",
    notes: Sequence[str] = (),
    time_limit: float | None = 10.0,
    limit: int | None = None,
    drawings: int = 30,
    top: int = 5,
    neighbours: int = 6,
    node_label: Hashable = "label",
    edge_label: Hashable | None = "label",
    molecules: bool | None = None,
    progress: bool = False,
) -> str:
    """A self-contained HTML page (inline SVG, inline CSS, a few lines of inline JavaScript).

    Parameters
    ----------
    predicted : sequence of networkx.Graph
        Predicted graphs, one per item.
    true : sequence of networkx.Graph, default=None
        True graphs in the same order. Without them the page shows the predictions only.
    ranked : dict or sequence, default=None
        Ranked candidates per item, best first: a dict row -> list, or one list (or None)
        per prediction; entries are graphs or :class:`RankedCandidate` (see
        :func:`read_ranked`). Each panel shows the first ``top`` and whether the truth is
        among them (:func:`gwpred.metrics.exact_match`); the summary gives the share of
        items whose truth is among the first 1, 5, 10 candidates, over the items that
        have a list.
    summary : dict, default=None
        The result of :func:`gwpred.metrics.summarize` for these pairs, to skip scoring
        them again; by default it is computed here.
    barycenters : sequence of SoftGraph or None, default=None
        Per item (a prefix of the items is enough), the soft barycenter of the prediction
        (:meth:`gwpred.BarycenterGraphPredictor.predict_barycenters`); drawn as heat maps.
    training_graphs : sequence of networkx.Graph, default=None
        The training graphs, to draw those each barycenter leaned on (``SoftGraph.neighbors``
        indexes this list).
    label_names : sequence, default=None
        Node label of each column of ``SoftGraph.node_scores`` (``model.labels_.node_labels_``).
    title : str, default="gwpred predictions"
    notes : sequence of str, default=()
        Lines shown under the title (for example how the predictions were made).
    time_limit : float or None, default=10.0
        Seconds per graph edit distance (see :func:`gwpred.metrics.edit_distance`).
    limit : int, default=None
        Report only the first ``limit`` items.
    drawings : int, default=30
        Items (the first ones) whose panel gets drawings; the others get their scores only.
    top : int, default=5
        Ranked candidates drawn per item.
    neighbours : int, default=6
        Training graphs drawn per barycenter.
    node_label, edge_label : hashable, default="label"
        Attributes holding node and edge labels; ``edge_label=None`` ignores edge labels.
    molecules : bool, default=None
        Treat the graphs as molecules (caution line; RDKit depictions, SMILES and validity
        when RDKit is installed). None: when every node label is an element symbol.
    progress : bool, default=False
        Progress bars on standard error while scoring and drawing.

    Returns
    -------
    str
        The HTML document.

    Raises
    ------
    TypeError
        If ``predicted``, ``true`` or ``ranked`` have the wrong types.
    ValueError
        If the numbers of predicted and true graphs differ, there are no items, ``limit``,
        ``drawings``, ``top`` or ``neighbours`` are out of range, ``ranked`` names rows
        that do not exist, ``summary`` does not cover the items, or ``barycenters`` is
        longer than the items or points to graphs outside ``training_graphs``.
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
    top = _check_count(top, "top", 0)
    neighbours = _check_count(neighbours, "neighbours", 1)
    cands = _normalise_ranked(ranked, n_all, n)
    bary = _check_barycenters(barycenters, n_all, training_graphs)
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
    )

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
        )
        for i in range(n)
    ]
    for it in items:
        if it.candidates and it.true is not None:
            it.hit_rank = _hit_rank(it, opts)
        if rdkit:
            _chem_fields(it, opts)

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
    parts.append("<h2>Items</h2>")
    parts.append(
        '<p class="note">Click a column heading to sort (again to reverse); click an item number to '
        "jump to its panel.</p>"
    )
    parts.append(_table(items, opts, truth is not None))
    parts.append("<h2>Panels</h2>")
    if truth is not None:
        parts.append(_key())
    for it in progress_bar(items, progress=progress, desc="report panels"):
        parts.append(_panel(it, opts, svgs, it.index < drawings, drawings))
    return _page(title, "\n".join(parts))


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

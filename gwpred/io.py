"""File formats used by gwpred: graph collections, feature matrices, model archives.

This module only moves data between files and Python objects; it does no
computation.

* Graph collections: JSON Lines of node-link records (``.jsonl``) or one
  GraphML document holding several ``<graph>`` elements (``.graphml``);
  molecules as SMILES files (``.smi``), SDF files (``.sdf``) or single MOL
  files (``.mol``, read only). The molecule formats go through
  :mod:`gwpred.chem` and need RDKit, the optional extra ``chem``
  (``pip install 'gwpred[chem]'``), which is imported only when such a file
  is read or written.
* Feature matrices: ``.npy`` (loaded without pickle) or delimited text
  (``.csv`` / ``.tsv``) with an optional header row and ``id`` column.
* Model archives: one ``.npz`` (zip of ``.npy`` members) with a JSON manifest
  stored as a ``uint8`` member named ``__manifest__``; never pickled.  What a
  fitted model stores in one is decided in :mod:`gwpred.model.files`.

All writers go through a temporary file in the target directory followed by
:func:`os.replace`, so an interrupted write does not leave a half-written file
under the target name.
"""

from __future__ import annotations

import csv
import hashlib
import inspect
import json
import math
import os
import re
import tokenize
import warnings
import zipfile
import zlib
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Literal, overload
from xml.etree import ElementTree

import networkx as nx
import numpy as np
from networkx.readwrite.graphml import GraphMLReader, GraphMLWriter

from . import _version, chem
from ._utils import StrPath, atomic_open, half_physical_memory

__all__ = [
    "ARCHIVE_FORMAT",
    "ARCHIVE_VERSION",
    "GRAPH_EXTENSIONS",
    "MOLECULE_EXTENSIONS",
    "FEATURE_EXTENSIONS",
    "read_graphs",
    "write_graphs",
    "read_features",
    "write_features",
    "read_formulas",
    "read_ids",
    "save_archive",
    "load_archive",
    "graph_from_record",
    "graph_to_json_line",
    "RankedCandidate",
    "read_ranked",
    "write_hypotheses",
    "write_ranked",
]

#: Value of the ``"format"`` manifest entry of every model archive.
ARCHIVE_FORMAT = "gwpred-model"
#: Newest archive layout this version of gwpred writes and reads.
ARCHIVE_VERSION = 1
#: Graph file extensions understood by :func:`read_graphs` / :func:`write_graphs`:
#: node-link JSON Lines, GraphML, and (with RDKit, extra ``chem``) SMILES files,
#: SDF files and MOL files. ``.mol`` is read only; write molecules as ``.sdf``.
GRAPH_EXTENSIONS = (".jsonl", ".graphml", ".smi", ".sdf", ".mol")
#: Molecule file extensions, handled by :mod:`gwpred.chem` (needs RDKit).
MOLECULE_EXTENSIONS = (".smi", ".sdf", ".mol")
#: Feature file extensions understood by :func:`read_features` / :func:`write_features`.
FEATURE_EXTENSIONS = (".npy", ".csv", ".tsv")

_MANIFEST_KEY = "__manifest__"
_RESERVED_MANIFEST_KEYS = ("format", "format_version", "gwpred_version", "checksums", "manifest_sha256")
_NODE_LINK_RESERVED = frozenset({"directed", "multigraph", "graph", "nodes", "edges", "links"})
_INT_LITERAL = re.compile(r"-?(?:0|[1-9][0-9]*)")
_ZIP_EPOCH = (1980, 1, 1, 0, 0, 0)


# --------------------------------------------------------------------------- helpers


def _extension(path: Path, supported: Sequence[str], what: str) -> str:
    ext = path.suffix.lower()
    if ext not in supported:
        raise ValueError(
            f"unsupported {what} file extension {path.suffix!r} for path {str(path)!r}; "
            f"supported extensions are: {', '.join(supported)}"
        )
    return ext


def _require_file(path: Path, what: str) -> None:
    if not path.exists():
        raise FileNotFoundError(f"{what} file not found: {str(path)!r}")


def _int_or_str(text: str) -> int | str:
    """Return ``int(text)`` when ``text`` is a canonical integer literal, else ``text``."""
    return int(text) if _INT_LITERAL.fullmatch(text) else text


# ------------------------------------------------------------------ graph files


def _node_link_keywords() -> dict[str, str]:
    # networkx >= 3.4 names the edge list with ``edges=``; older releases use ``link=``.
    if "edges" in inspect.signature(nx.node_link_data).parameters:
        return {"edges": "edges"}
    return {"link": "edges"}  # pragma: no cover - networkx < 3.4


def _json_default(obj: Any) -> Any:
    if isinstance(obj, np.generic) and not isinstance(obj, (np.void, np.object_)):
        return obj.item()
    raise TypeError(
        f"attribute value {obj!r} of type {type(obj).__name__} cannot be stored in JSON; "
        "use int, float, str, bool, None, lists or dicts"
    )


def _check_node_link_names(G: nx.Graph, index: int) -> None:
    for n, d in G.nodes(data=True):
        if "id" in d:
            raise ValueError(
                f"graphs[{index}]: node {n!r} has an attribute named 'id', which the "
                "node-link format uses for the node itself; rename that attribute"
            )
    clashing = ("source", "target", "key") if G.is_multigraph() else ("source", "target")
    for u, v, d in G.edges(data=True):
        for name in clashing:
            if name in d:
                raise ValueError(
                    f"graphs[{index}]: edge ({u!r}, {v!r}) has an attribute named {name!r}, "
                    "which the node-link format uses for the edge itself; rename that attribute"
                )


def graph_to_json_line(G: nx.Graph, index: int) -> str:
    _check_node_link_names(G, index)
    record = nx.node_link_data(G, **_node_link_keywords())
    try:
        return json.dumps(record, allow_nan=False, default=_json_default, ensure_ascii=False)
    except TypeError as err:
        raise TypeError(f"graphs[{index}] cannot be written as JSON: {err}") from err
    except ValueError as err:
        raise ValueError(
            f"graphs[{index}] holds a NaN or infinite float attribute ({err}); JSON cannot "
            "store it: replace or remove that value"
        ) from err


def _not_finite(value: Any) -> bool:
    return isinstance(value, float) and not math.isfinite(value)


def _check_node_link_lists(
    nodes: Any, edges: Any, edge_key: str, where: str, directed: bool = False, multigraph: bool = False
) -> None:
    """Refuse what networkx would silently rewrite: repeated nodes or edges, dangling edges, NaN values."""
    if not isinstance(nodes, list) or not isinstance(edges, list):
        raise ValueError(f"{where}: 'nodes' and '{edge_key}' must be JSON lists")
    seen: set = set()
    for k, node in enumerate(nodes):
        if not isinstance(node, dict) or "id" not in node:
            raise ValueError(f"{where}: nodes[{k}] must be a JSON object with an 'id'")
        nid = node["id"]
        try:
            if nid in seen:
                raise ValueError(f"{where}: node id {nid!r} appears twice (nodes[{k}]); node ids must be unique")
        except TypeError:
            raise ValueError(f"{where}: nodes[{k}] has id {nid!r}; ids must be numbers or strings") from None
        seen.add(nid)
        bad = [key for key, value in node.items() if _not_finite(value)]
        if bad:
            raise ValueError(f"{where}: node {nid!r} has a NaN or infinite {bad[0]!r}")
    pairs: set = set()
    for k, edge in enumerate(edges):
        if not isinstance(edge, dict) or "source" not in edge or "target" not in edge:
            raise ValueError(f"{where}: {edge_key}[{k}] must be a JSON object with 'source' and 'target'")
        u, v = edge["source"], edge["target"]
        try:
            missing = [x for x in (u, v) if x not in seen]
        except TypeError:
            raise ValueError(f"{where}: {edge_key}[{k}] has an endpoint that is not a number or string") from None
        if missing:
            raise ValueError(f"{where}: {edge_key}[{k}] refers to node {missing[0]!r}, which is not in 'nodes'")
        key = (u, v) if directed else frozenset((u, v))
        if key in pairs and not multigraph:
            raise ValueError(f"{where}: the edge between {u!r} and {v!r} appears twice ({edge_key}[{k}]); "
                             "a graph holds each pair once")
        pairs.add(key)
        bad = [key for key, value in edge.items() if _not_finite(value)]
        if bad:
            raise ValueError(f"{where}: the edge between {u!r} and {v!r} has a NaN or infinite {bad[0]!r}")


def graph_from_record(record: Any, where: str) -> nx.Graph:
    if not isinstance(record, dict):
        raise ValueError(f"{where}: expected a JSON object (node-link record), got {type(record).__name__}")
    if "nodes" not in record:
        raise ValueError(f"{where}: node-link record has no 'nodes' list")
    edge_key = "edges" if "edges" in record else "links" if "links" in record else None
    if edge_key is None:
        raise ValueError(
            f"{where}: node-link record has no 'edges' list (use \"edges\": [] for a graph without edges)"
        )
    graph_attrs = record.get("graph", {})
    if not isinstance(graph_attrs, dict):
        raise ValueError(f"{where}: 'graph' must be a JSON object, got {type(graph_attrs).__name__}")
    graph_attrs = dict(graph_attrs)
    for key, value in record.items():
        if key in _NODE_LINK_RESERVED:
            continue
        if key in graph_attrs and graph_attrs[key] != value:
            raise ValueError(
                f"{where}: top-level key {key!r}={value!r} conflicts with graph attribute "
                f"{key!r}={graph_attrs[key]!r}; keep only one of them"
            )
        graph_attrs[key] = value
    _check_node_link_lists(record["nodes"], record[edge_key], edge_key, where,
                           bool(record.get("directed")), bool(record.get("multigraph")))
    data = {k: v for k, v in record.items() if k in _NODE_LINK_RESERVED and k != edge_key}
    data["edges"] = record[edge_key]
    data["graph"] = graph_attrs
    try:
        # Records lacking the flags are read as simple undirected graphs.
        return nx.node_link_graph(data, directed=False, multigraph=False, **_node_link_keywords())
    except (TypeError, KeyError, AttributeError, ValueError, nx.NetworkXError) as err:
        raise ValueError(f"{where}: invalid node-link record ({type(err).__name__}: {err})") from err


def _read_jsonl(path: Path) -> list[nx.Graph]:
    graphs: list[nx.Graph] = []
    with open(path, "rb") as fh:
        for lineno, raw in enumerate(fh, start=1):
            where = f"{str(path)!r} line {lineno}"
            try:
                line = raw.decode("utf-8")
            except UnicodeDecodeError as err:
                raise ValueError(f"{where} is not UTF-8 text ({err}); save the file as UTF-8") from err
            if not line.strip():
                continue
            try:
                record = json.loads(line)
            except json.JSONDecodeError as err:
                raise ValueError(f"{where}: malformed JSON ({err.msg} at column {err.colno})") from err
            except RecursionError:
                raise ValueError(f"{where}: JSON nested too deeply to be a node-link record") from None
            graphs.append(graph_from_record(record, where))
    return graphs


def _write_jsonl(path: Path, graphs: Sequence[nx.Graph]) -> None:
    lines = [graph_to_json_line(G, i) for i, G in enumerate(graphs)]
    with atomic_open(path, binary=False) as fh:
        for line in lines:
            fh.write(line)
            fh.write("\n")


def _graphml_copy(G: nx.Graph, index: int) -> nx.Graph:
    """Copy ``G`` and check that GraphML can hold it without changing types."""
    kinds = set()
    for n in G.nodes:
        if isinstance(n, bool) or not isinstance(n, (int, str)):
            raise TypeError(
                f"graphs[{index}] has node id {n!r} of type {type(n).__name__}; GraphML stores "
                "node ids as text, so only int or str node ids read back unchanged: relabel the nodes"
            )
        kinds.add(isinstance(n, int))
    if len(kinds) > 1:
        raise TypeError(
            f"graphs[{index}] mixes int and str node ids; GraphML stores node ids as text, so "
            "they would not read back as written: relabel the nodes to one type"
        )
    if kinds == {False} and all(_INT_LITERAL.fullmatch(n) for n in G.nodes):
        raise TypeError(
            f"graphs[{index}] has str node ids that are all integer literals (e.g. "
            f"{next(iter(G.nodes))!r}); they would read back from GraphML as int: relabel them to int"
        )
    H = G.copy()
    if "id" in H.graph:
        gid = H.graph["id"]
        if isinstance(gid, bool) or not isinstance(gid, (int, str)):
            raise TypeError(
                f"graphs[{index}] has graph attribute id={gid!r} of type {type(gid).__name__}; "
                "GraphML stores a graph id as text: use an int or str id"
            )
        if isinstance(gid, str) and _INT_LITERAL.fullmatch(gid):
            raise TypeError(
                f"graphs[{index}] has graph attribute id={gid!r}, a str that would read back "
                "from GraphML as int: use int(id) or a non-numeric id"
            )
        H.graph["id"] = str(gid)
    return H


def _write_graphml(path: Path, graphs: Sequence[nx.Graph]) -> None:
    writer = GraphMLWriter()
    for i, G in enumerate(graphs):
        H = _graphml_copy(G, i)
        try:
            writer.add_graph_element(H)
        except (TypeError, nx.NetworkXError) as err:
            raise TypeError(
                f"graphs[{i}] cannot be written as GraphML: {err}; attribute values must be "
                "int, float, str or bool"
            ) from err
        # GraphMLWriter keeps the pending <data> items of earlier graphs and would
        # append them again for every later graph; drop them once they are written.
        writer.attributes.clear()
    with atomic_open(path, binary=True) as fh:
        writer.dump(fh)


def _read_graphml(path: Path) -> list[nx.Graph]:
    try:
        root = ElementTree.parse(path).getroot()
    except ElementTree.ParseError as err:
        raise ValueError(f"{str(path)!r} is not well-formed XML: {err}") from err
    except LookupError as err:  # the XML declaration names an encoding Python does not know
        raise ValueError(f"{str(path)!r}: its XML declaration names an unknown text encoding ({err}); "
                         "save the file as UTF-8") from err
    ns = GraphMLReader.NS_GRAPHML
    if root.tag != f"{{{ns}}}graphml":
        raise ValueError(
            f"{str(path)!r}: root element is <{root.tag}>, expected <graphml> in the GraphML "
            f"namespace; add xmlns=\"{ns}\" to the root element"
        )
    graphs: list[nx.Graph] = []
    try:
        keys, defaults = GraphMLReader().find_graphml_keys(root)
        for graph_xml in root.findall(f"{{{ns}}}graph"):
            # A fresh reader per graph: the reader's multigraph flag and edge-id table
            # would otherwise leak from one graph into the next.
            G = GraphMLReader(node_type=str).make_graph(graph_xml, keys, defaults)
            for name in ("node_default", "edge_default"):
                if G.graph.get(name) == {}:
                    del G.graph[name]
            gid = graph_xml.get("id")
            if gid is not None and "id" not in G.graph:
                G.graph["id"] = _int_or_str(gid)
            if all(_INT_LITERAL.fullmatch(n) for n in G.nodes):
                G = nx.relabel_nodes(G, {n: int(n) for n in G.nodes}, copy=True)
            graphs.append(G)
    except (nx.NetworkXError, ValueError, KeyError, TypeError) as err:
        raise ValueError(
            f"{str(path)!r}: invalid GraphML in graph #{len(graphs) + 1}: {err}"
        ) from err
    return graphs


def _chem(ext: str) -> Any:
    """Return :mod:`gwpred.chem` once RDKit is known to import; else an ImportError naming the extra."""
    chem.rdkit_modules(f"reading or writing {ext} graph files (or use .jsonl / .graphml files)")
    return chem


def read_graphs(path: StrPath) -> list[nx.Graph]:
    """Read a collection of labeled graphs from a graph or molecule file.

    Parameters
    ----------
    path : str or os.PathLike
        File to read. The extension selects the format: ``.jsonl`` (one
        node-link JSON record per line), ``.graphml`` (one GraphML document
        holding any number of ``<graph>`` elements), ``.smi`` (one SMILES per
        line, see :func:`gwpred.chem.read_smiles_file`), ``.sdf`` (any number
        of MOL records) or ``.mol`` (one MOL record; both see
        :func:`gwpred.chem.read_sdf`).

    Returns
    -------
    list of networkx.Graph
        The graphs in file order, with node, edge and graph attributes.

    Raises
    ------
    ValueError
        If the extension is not supported, a JSON line is malformed or not a
        node-link record (the message names the file and line number), the
        GraphML document is invalid, a SMILES line is rejected (file and line
        number) or an SDF/MOL record is rejected (file and record number).
    FileNotFoundError
        If ``path`` does not exist.
    ImportError
        If a ``.smi``, ``.sdf`` or ``.mol`` file is read without RDKit
        installed (``pip install 'gwpred[chem]'``).

    Notes
    -----
    Molecule files give heavy-atom graphs: node attribute ``"label"`` the
    atom label (element symbol, with the formal charge when charged:
    ``"N+"``, ``"O-"``), ``"charge"`` the formal charge, edge attribute
    ``"label"`` the kekulé bond order 1, 2 or 3, hydrogens implicit; the
    molecule's name becomes the graph attribute ``"name"`` (see
    :mod:`gwpred.chem` for what else is kept and what is dropped).

    JSON Lines: blank lines are skipped. Each record is what
    :func:`networkx.node_link_data` produces with ``edges="edges"``; records
    with a ``"links"`` list (older networkx default) are accepted too. Keys of a
    record other than ``directed``, ``multigraph``, ``graph``, ``nodes`` and
    ``edges`` are added to the graph attributes. A record without the
    ``directed`` / ``multigraph`` flags is read as a simple undirected graph.

    GraphML: node ids are text in GraphML; they are turned into ``int`` when
    every id of a graph is a canonical integer literal (``"0"``, ``"17"``,
    ``"-3"``) and kept as ``str`` otherwise. The standard ``<graph id="...">``
    attribute becomes the graph attribute ``"id"`` under the same rule.
    Attribute types follow the ``<key attr.type>`` declarations (``int``/
    ``long`` -> int, ``float``/``double`` -> float, ``boolean`` -> bool,
    ``string`` -> str). GraphML does not record whether a graph is a
    multigraph; as in networkx, a graph is returned as a multigraph only when
    it has parallel edges.

    Directed graphs and multigraphs are returned as such, never converted;
    callers that need simple undirected graphs must check for themselves.

    Examples
    --------
    >>> import os, tempfile, networkx as nx
    >>> G = nx.Graph(id=7)
    >>> G.add_node(0, label="C"); G.add_node(1, label="O"); G.add_edge(0, 1, order=2)
    >>> with tempfile.TemporaryDirectory() as d:
    ...     write_graphs(os.path.join(d, "g.graphml"), [G])
    ...     H, = read_graphs(os.path.join(d, "g.graphml"))
    >>> H.graph["id"], H.nodes[1]["label"], H.edges[0, 1]["order"]
    (7, 'O', 2)
    """
    p = Path(path)
    ext = _extension(p, GRAPH_EXTENSIONS, "graph")
    _require_file(p, "graph")
    if ext == ".jsonl":
        return _read_jsonl(p)
    if ext == ".smi":
        return _chem(ext).read_smiles_file(p)
    if ext in (".sdf", ".mol"):
        return _chem(ext).read_sdf(p)
    return _read_graphml(p)


def write_graphs(path: StrPath, graphs: Iterable[nx.Graph]) -> None:
    """Write a collection of labeled graphs to a graph or molecule file.

    Parameters
    ----------
    path : str or os.PathLike
        Target file; the extension selects the format (see :func:`read_graphs`):
        ``.jsonl``, ``.graphml``, ``.smi`` (canonical SMILES, see
        :func:`gwpred.chem.write_smiles_file`) or ``.sdf`` (MOL records with
        2D coordinates, see :func:`gwpred.chem.write_sdf`). ``.mol`` is read
        only. An existing file is replaced.
    graphs : iterable of networkx.Graph
        Graphs to write, with their node, edge and graph attributes. Directed
        graphs and multigraphs are written as such.

    Returns
    -------
    None

    Raises
    ------
    ValueError
        If the extension is not supported (or is ``.mol``), ``graphs`` holds
        something that is not a networkx graph, a node has an attribute named
        ``id`` or an edge one named ``source``/``target`` (JSON Lines: these
        names are taken by the node-link layout), an attribute is
        NaN/infinite (JSON Lines), or a graph is not a valid heavy-atom
        molecule (``.smi``/``.sdf``; the message names ``graphs[i]``).
    TypeError
        If an attribute value cannot be stored in the chosen format (JSON
        Lines: JSON types and numpy scalars; GraphML: int, float, str, bool),
        or, for GraphML, node ids / the graph ``id`` would not read back with
        the same type (they must be all int or all str, and str ids must not
        all be integer literals such as ``"7"``).
    FileNotFoundError
        If the target directory does not exist.
    ImportError
        If a ``.smi`` or ``.sdf`` file is written without RDKit installed
        (``pip install 'gwpred[chem]'``).

    Notes
    -----
    Molecule files hold heavy-atom graphs only (node ``"label"`` element
    symbol, optionally charged as ``"N+"``, optional node ``"charge"``, edge
    ``"label"`` bond order 1, 2 or 3). ``.smi`` keeps the molecule and its ``"name"`` but not the atom order,
    the kekulé structure or other attributes; ``.sdf`` keeps atom order and
    bond orders, and stores the other graph attributes as SD data fields
    (read back as text).

    The file is first written to a temporary file in the same directory and
    then moved into place with :func:`os.replace`. For GraphML the graph
    attribute ``"id"`` is stored as the standard ``<graph id="...">``
    attribute; the input graphs are not modified. networkx's GraphML writer
    leaves out graph attributes named ``node_default`` and ``edge_default``.

    Examples
    --------
    >>> import os, tempfile, networkx as nx
    >>> with tempfile.TemporaryDirectory() as d:
    ...     write_graphs(os.path.join(d, "g.jsonl"), [nx.path_graph(3), nx.Graph()])
    ...     [G.number_of_nodes() for G in read_graphs(os.path.join(d, "g.jsonl"))]
    [3, 0]
    """
    p = Path(path)
    ext = _extension(p, GRAPH_EXTENSIONS, "graph")
    if ext == ".mol":
        raise ValueError(
            f"cannot write {str(p)!r}: a .mol file holds one molecule and is read only in gwpred; "
            "write an .sdf file instead (it holds any number of molecules)"
        )
    graphs = list(graphs)
    for i, G in enumerate(graphs):
        if not isinstance(G, nx.Graph):
            raise ValueError(
                f"graphs[{i}] is a {type(G).__name__}, not a networkx graph; pass a list of networkx graphs"
            )
    if ext == ".jsonl":
        _write_jsonl(p, graphs)
    elif ext == ".smi":
        _chem(ext).write_smiles_file(p, graphs)
    elif ext == ".sdf":
        _chem(ext).write_sdf(p, graphs)
    else:
        _write_graphml(p, graphs)


# ---------------------------------------------------------------- feature files


def _check_finite(X: np.ndarray, where: str, locate: Any) -> None:
    bad = ~np.isfinite(X)
    if bad.any():
        r, c = (int(v) for v in np.argwhere(bad)[0])
        raise ValueError(
            f"{where} contains {int(bad.sum())} non-finite value(s) (NaN or inf); the first is "
            f"{float(X[r, c])!r} at {locate(r, c)}; impute or drop them before using gwpred"
        )


def _npy_size_claim(path: Path) -> str | None:
    """Why a .npy file cannot hold the array its header claims (None when it can, or is not a plain .npy)."""
    try:
        with open(path, "rb") as fh:
            version = np.lib.format.read_magic(fh)
            read_header = {(1, 0): np.lib.format.read_array_header_1_0,
                           (2, 0): np.lib.format.read_array_header_2_0}.get(version)
            if read_header is None:
                return None
            shape, _, dtype = read_header(fh)
            data_bytes = os.fstat(fh.fileno()).st_size - fh.tell()
    except (ValueError, OSError, EOFError, SyntaxError, tokenize.TokenError):
        return None  # np.load reports these itself
    claimed = int(np.prod(shape, dtype=object)) * dtype.itemsize
    if not dtype.hasobject and claimed > data_bytes:
        return (f"its header claims an array of shape {shape} ({claimed:,} bytes) but the file holds "
                f"{data_bytes:,} bytes of data; the file is truncated or damaged")
    return None


def _read_npy(path: Path) -> np.ndarray:
    where = repr(str(path))
    short = _npy_size_claim(path)  # before numpy allocates the claimed size
    if short is not None:
        raise ValueError(f"{where} could not be read as a .npy array: {short}")
    try:
        X = np.load(path, allow_pickle=False)
    except ValueError as err:
        if "allow_pickle" in str(err) or "pickled" in str(err):
            raise ValueError(
                f"{where} holds Python objects (pickled data), which gwpred never loads; "
                "save a numeric array instead"
            ) from err
        raise ValueError(f"{where} could not be read as a .npy array: {err}") from err
    except (OSError, EOFError, SyntaxError, tokenize.TokenError) as err:  # numpy's header parser, on damage
        raise ValueError(f"{where} could not be read as a .npy array: {err}") from err
    if not isinstance(X, np.ndarray):
        if hasattr(X, "close"):
            X.close()
        raise ValueError(f"{where} is an .npz archive, not a single .npy array; save one 2-D array with np.save")
    if X.dtype == np.bool_ or not (np.issubdtype(X.dtype, np.integer) or np.issubdtype(X.dtype, np.floating)):
        raise ValueError(
            f"{where} holds an array of dtype {X.dtype}; features must be integers or floats"
        )
    if X.ndim == 1:
        raise ValueError(
            f"{where} holds a 1-D array of shape {X.shape}, which is ambiguous; save "
            "X.reshape(-1, 1) for one feature per sample or X.reshape(1, -1) for a single sample"
        )
    if X.ndim != 2:
        raise ValueError(f"{where} holds a {X.ndim}-D array of shape {X.shape}; features must be a 2-D array (samples x features)")
    X = np.asarray(X, dtype=np.float64)
    if X.shape[0] == 0 or X.shape[1] == 0:
        raise ValueError(f"{where} holds an empty array of shape {X.shape}; it needs at least one row and one column")
    _check_finite(X, where, lambda r, c: f"row {r}, column {c} (0-based)")
    return X


def _parse_float(cell: str) -> float | None:
    try:
        return float(cell)
    except ValueError:
        return None


def _short(cell: str, limit: int = 60) -> str:
    """A cell for a message: quoted, and cut when long (a whole row read as one cell)."""
    return repr(cell) if len(cell) <= limit else f"{cell[:limit]!r}... ({len(cell):,} characters)"


def _cell_hint(cell: str, column: int, header: list[str] | None, delimiter: str) -> str:
    """What probably went wrong with a cell that is not a number."""
    others = [d for d in (";", "\t", ",", "|") if d != delimiter and d in cell]
    if others:
        name = {";": "semicolons", "\t": "tabs", ",": "commas", "|": "bars"}[others[0]]
        return (f"; the file seems separated by {name}, not {'tabs' if delimiter == chr(9) else 'commas'}: "
                "save it as comma-separated .csv or tab-separated .tsv")
    if column == 0:
        head = f" (headed {header[0]!r})" if header else ""
        name = header[0] if header else "1"
        return (f"; if the first column{head} holds sample ids, head it 'id' or name it with --id-column {name} "
                f"(id_column={name!r}): ids are kept, not read as features")
    return ""


def _id_column(first: list[str], has_header: bool, id_column: str | None, where: str) -> int | None:
    """0-based index of the id column, or None: the header's ``id`` column, or the one named."""
    if id_column is None:
        return 0 if has_header and first[0].lower() == "id" else None
    name = str(id_column).strip()
    if has_header:
        header = [c.lower() for c in first]
        if name.lower() in header:
            return header.index(name.lower())
        if not name.isdigit():
            raise ValueError(f"{where} has no column headed {name!r} for the ids (header: "
                             f"{_short(', '.join(first), 200)}); name one of its columns")
    if name.isdigit() and 1 <= int(name) <= len(first):
        return int(name) - 1
    if has_header:
        raise ValueError(f"{where} has {len(first)} columns; id column {name} does not exist")
    raise ValueError(f"{where} has no header row, so the id column cannot be found by the name {name!r}; "
                     f"give its number (1 for the first column) or add a header row")


def _looks_like_ids(X: np.ndarray) -> bool:
    """A first column of distinct integers counting up, e.g. 1, 2, 3, ... (more likely row ids than a feature)."""
    col = X[:, 0]
    if len(col) < 3 or not np.all(col == np.round(col)):
        return False
    return bool(np.all(np.diff(col) > 0)) and X.shape[1] > 1


def _read_delimited(
    path: Path, delimiter: str, id_column: str | None = None
) -> tuple[np.ndarray, list[str] | None]:
    where = repr(str(path))
    rows: list[list[str]] = []
    linenos: list[int] = []
    with open(path, encoding="utf-8", newline="") as fh:
        reader = csv.reader(fh, delimiter=delimiter)
        try:
            for row in reader:
                if not row or (len(row) == 1 and not row[0].strip()):
                    continue
                rows.append([cell.strip() for cell in row])
                linenos.append(reader.line_num)
        except UnicodeDecodeError as err:
            raise ValueError(
                f"{where} is not UTF-8 text ({err}) near line {reader.line_num + 1}; save the file as UTF-8"
            ) from err
        except csv.Error as err:
            raise ValueError(f"{where} line {reader.line_num}: {err}") from err
    if not rows:
        raise ValueError(f"{where} is empty; it needs at least one data row")
    first = rows[0]
    has_header = any(_parse_float(cell) is None for cell in first)
    if has_header and len(first) == 1:
        other = next((d for d in (";", "\t", ",", "|") if d != delimiter and d in first[0]), None)
        if other is not None:
            raise ValueError(f"{where} has one column on line {linenos[0]}" + _cell_hint(first[0], 1, None, delimiter))
    id_at = _id_column(first, has_header, id_column, where)
    ncols = len(first)
    start = 1 if has_header else 0
    if ncols - (id_at is not None) == 0:
        raise ValueError(f"{where} has no feature columns (only an id column)")
    if start >= len(rows):
        raise ValueError(f"{where} has a header row but no data rows")
    features = [j for j in range(ncols) if j != id_at]
    X = np.empty((len(rows) - start, len(features)), dtype=np.float64)
    ids: list[str] | None = [] if id_at is not None else None
    for i, (row, lineno) in enumerate(zip(rows[start:], linenos[start:])):
        if len(row) != ncols:
            raise ValueError(
                f"{where} line {lineno} has {len(row)} columns, expected {ncols} "
                f"(as on line {linenos[0]}); every row needs the same number of columns"
            )
        if ids is not None:
            if not row[id_at]:
                raise ValueError(f"{where} line {lineno}: the id cell (column {id_at + 1}) is empty; give "
                                 "every row an id")
            ids.append(row[id_at])
        for k, j in enumerate(features):
            value = _parse_float(row[j])
            if value is None:
                raise ValueError(
                    f"{where} line {lineno}, column {j + 1}: cell {_short(row[j])} is not a number"
                    + _cell_hint(row[j], j, first if has_header else None, delimiter)
                )
            X[i, k] = value
    data_lines = linenos[start:]
    _check_finite(X, where, lambda r, c: f"line {data_lines[r]}, column {features[c] + 1}")
    if ids is None and not has_header and _looks_like_ids(X):
        warnings.warn(
            f"{where}: the first column counts up ({X[0, 0]:g}, {X[1, 0]:g}, {X[2, 0]:g}, ...) like row ids, "
            "and it is read as a feature; if it holds ids, head it 'id' or pass --id-column 1 "
            "(id_column='1')",
            UserWarning,
            stacklevel=3,
        )
    return X, ids


@overload
def read_features(
    path: StrPath, return_ids: Literal[False] = ..., id_column: str | None = ...
) -> np.ndarray: ...


@overload
def read_features(
    path: StrPath, return_ids: Literal[True], id_column: str | None = ...
) -> tuple[np.ndarray, list[str] | None]: ...


def read_features(
    path: StrPath, return_ids: bool = False, id_column: str | None = None
) -> np.ndarray | tuple[np.ndarray, list[str] | None]:
    """Read a 2-D feature matrix (samples x features) from ``.npy``, ``.csv`` or ``.tsv``.

    Parameters
    ----------
    path : str or os.PathLike
        File to read. ``.npy`` is loaded with ``allow_pickle=False``. ``.csv``
        (comma) and ``.tsv`` (tab) are delimited UTF-8 text, one sample a row.
    return_ids : bool, default False
        Also return the sample ids (``None`` when the file has none, and
        always for ``.npy``: give ids in a file of their own, :func:`read_ids`).
    id_column : str, default=None
        The column holding sample ids: its header (any case), or its number
        counting from 1 (for files without a header). None: the first column
        when its header is ``id``. Ids are kept as text, never read as features.

    Returns
    -------
    X : numpy.ndarray of float64, shape (n_samples, n_features)
        The features.
    ids : list of str or None
        Only when ``return_ids`` is true.

    Raises
    ------
    ValueError
        If the extension is not supported; rows have different lengths (names
        the line); a cell is not a number (names line and column); there is
        any NaN or infinity (gives the count and the first position); the
        ``.npy`` array is not 2-D (a 1-D array is ambiguous), empty, not
        numeric, or holds pickled objects.
    FileNotFoundError
        If ``path`` does not exist.

    Notes
    -----
    Text files: blank lines are skipped and cells are stripped of spaces. The
    first row is a header when at least one of its cells is not a number; a
    header whose first cell is ``id`` (any case) marks the first column as
    sample ids, which are dropped from ``X``. Without a header every column is
    a feature. A header made only of numbers cannot be told apart from data;
    use non-numeric column names. Line numbers in messages count from 1 as
    in a text editor; columns count from 1 including the id column.

    Examples
    --------
    >>> import os, tempfile
    >>> with tempfile.TemporaryDirectory() as d:
    ...     p = os.path.join(d, "x.csv")
    ...     with open(p, "w") as fh:
    ...         _ = fh.write("id,a,b\\nm1,1,2\\nm2,3,4.5\\n")
    ...     X, ids = read_features(p, return_ids=True)
    >>> X
    array([[1. , 2. ],
           [3. , 4.5]])
    >>> ids
    ['m1', 'm2']
    """
    p = Path(path)
    ext = _extension(p, FEATURE_EXTENSIONS, "feature")
    _require_file(p, "feature")
    if ext == ".npy":
        if id_column is not None:
            raise ValueError(f"{str(p)!r} is a .npy array and has no columns of text; give the ids in a "
                             "file of their own (gwpred: --ids FILE) instead of an id column")
        X, ids = _read_npy(p), None
    else:
        X, ids = _read_delimited(p, "," if ext == ".csv" else "\t", id_column)
    return (X, ids) if return_ids else X


def _column_cells(path: StrPath, column: str, kind: str, option: str) -> tuple[list[tuple[int, str]], str]:
    """(line number, cell) of one column: every line of a ``.txt``, or the column headed
    ``column`` of a ``.csv``/``.tsv`` (blank rows skipped); also the file's name for messages."""
    p = Path(path)
    ext = _extension(p, (".txt", ".csv", ".tsv"), kind)
    _require_file(p, kind)
    where = repr(str(p))
    try:
        text = p.read_text(encoding="utf-8")
    except UnicodeDecodeError as err:
        raise ValueError(f"{where} is not UTF-8 text ({err}); save the file as UTF-8") from err
    lines = text.splitlines()
    if ext == ".txt":
        return list(enumerate(lines, start=1)), where
    rows = [(k, r) for k, r in enumerate(csv.reader(lines, delimiter="," if ext == ".csv" else "\t"), start=1) if r]
    if not rows:
        raise ValueError(f"{where} is empty; it needs a header row with a {column!r} column")
    header = [h.strip().lower() for h in rows[0][1]]
    if column.lower() not in header:
        raise ValueError(f"{where} has no {column!r} column (header: {rows[0][1]}); name the column or pass "
                         f"its header with {option}")
    j = header.index(column.lower())
    cells = []
    for k, r in rows[1:]:
        if len(r) != len(header):
            raise ValueError(f"{where} line {k} has {len(r)} columns, expected {len(header)}")
        cells.append((k, r[j]))
    return cells, where


def read_ids(path: StrPath, column: str = "id") -> list[str]:
    """Read sample ids, one per input row, from a file of their own.

    Parameters
    ----------
    path : str or os.PathLike
        ``.txt`` with one id per line, or ``.csv`` / ``.tsv`` with a header
        row holding ``column`` (other columns are ignored).
    column : str, default="id"
        Header of the id column in ``.csv`` / ``.tsv`` files (any case).

    Returns
    -------
    list of str

    Raises
    ------
    ValueError
        For an empty id (names the line), a missing column, ragged rows, or a
        file that is not UTF-8.

    Examples
    --------
    >>> import os, tempfile
    >>> with tempfile.TemporaryDirectory() as d:
    ...     p = os.path.join(d, "ids.txt")
    ...     _ = open(p, "w").write("mol-a\\nmol-b\\n")
    ...     read_ids(p)
    ['mol-a', 'mol-b']
    """
    pairs, where = _column_cells(path, column, "id", "the id column's header")
    while pairs and not pairs[-1][1].strip():
        pairs.pop()  # a trailing blank line is not an id
    ids = []
    for lineno, value in pairs:
        value = value.strip()
        if not value:
            raise ValueError(f"{where} line {lineno}: empty id; give every input row an id")
        ids.append(value)
    if not ids:
        raise ValueError(f"{where} holds no ids")
    return ids


def read_formulas(path: StrPath, column: str = "formula") -> list[str | None]:
    """Read one molecular formula per input row.

    Parameters
    ----------
    path : str or os.PathLike
        ``.csv`` / ``.tsv`` file with a header row holding ``column`` (other
        columns are ignored, so the features file itself can carry the
        formulas), or ``.txt`` with one formula per line.  An empty cell or
        line, or ``-``, means no formula for that row.
    column : str, default="formula"
        Header of the formula column (case-insensitive).

    Returns
    -------
    list of (str or None)

    Raises
    ------
    ValueError
        For a missing column, ragged rows, or a file that is not UTF-8.

    Examples
    --------
    >>> import os, tempfile
    >>> with tempfile.TemporaryDirectory() as d:
    ...     p = os.path.join(d, "x.csv")
    ...     _ = open(p, "w").write("id,formula,f1\\na,C2H6O,0.5\\nb,,0.1\\n")
    ...     read_formulas(p)
    ['C2H6O', None]
    """
    cells, _ = _column_cells(path, column, "formula", "--formula-column")
    return [None if v.strip() in ("", "-") else v.strip() for _, v in cells]


def write_features(path: StrPath, X: np.ndarray, ids: Sequence[str] | None = None) -> None:
    """Write a 2-D feature matrix to ``.npy``, ``.csv`` or ``.tsv``.

    Parameters
    ----------
    path : str or os.PathLike
        Target file; the extension selects the format. An existing file is
        replaced.
    X : array_like of shape (n_samples, n_features)
        Finite real numbers; stored as float64.
    ids : sequence of str, optional
        One id per row, written as a first column named ``id`` (text formats
        only). Values are converted with ``str``.

    Returns
    -------
    None

    Raises
    ------
    ValueError
        If the extension is not supported, ``X`` is not a non-empty 2-D
        numeric array, ``X`` holds NaN or infinity, ``ids`` has the wrong
        length or a blank id, or ``ids`` is given for ``.npy``.
    FileNotFoundError
        If the target directory does not exist.

    Notes
    -----
    Text files always get a header row (``id`` if ids are given, then
    ``x0, x1, ...``) and values in shortest round-trip form (``repr``), so
    :func:`read_features` gives back exactly the same float64 values.

    Examples
    --------
    >>> import os, tempfile, numpy as np
    >>> with tempfile.TemporaryDirectory() as d:
    ...     write_features(os.path.join(d, "x.tsv"), np.eye(2), ids=["a", "b"])
    ...     read_features(os.path.join(d, "x.tsv"), return_ids=True)
    (array([[1., 0.],
           [0., 1.]]), ['a', 'b'])
    """
    p = Path(path)
    ext = _extension(p, FEATURE_EXTENSIONS, "feature")
    arr = np.asarray(X)
    if arr.dtype == np.bool_ or not (np.issubdtype(arr.dtype, np.integer) or np.issubdtype(arr.dtype, np.floating)):
        raise ValueError(f"X must hold integers or floats, got dtype {arr.dtype}")
    if arr.ndim != 2 or arr.shape[0] == 0 or arr.shape[1] == 0:
        raise ValueError(
            f"X must be a non-empty 2-D array (samples x features), got shape {arr.shape}; "
            "reshape 1-D data with X.reshape(-1, 1) or X.reshape(1, -1)"
        )
    arr = arr.astype(np.float64)
    _check_finite(arr, "X", lambda r, c: f"X[{r}, {c}]")
    id_list: list[str] | None = None
    if ids is not None:
        if ext == ".npy":
            raise ValueError(f"ids cannot be stored in a .npy file ({str(p)!r}); write a .csv or .tsv file instead")
        id_list = [str(v) for v in ids]
        if len(id_list) != arr.shape[0]:
            raise ValueError(f"ids has {len(id_list)} entries but X has {arr.shape[0]} rows; give one id per row")
        blank = [r for r, v in enumerate(id_list) if not v.strip()]
        if blank:
            raise ValueError(f"ids[{blank[0]}] is blank ({len(blank)} blank in all); give every row an id")
    if ext == ".npy":
        with atomic_open(p, binary=True) as fh:
            np.save(fh, arr, allow_pickle=False)
        return
    with atomic_open(p, binary=False) as fh:
        writer = csv.writer(fh, delimiter="," if ext == ".csv" else "\t", lineterminator="\n")
        header = [f"x{j}" for j in range(arr.shape[1])]
        writer.writerow(header if id_list is None else ["id", *header])
        for i, row in enumerate(arr.tolist()):
            cells = [repr(v) for v in row]
            writer.writerow(cells if id_list is None else [id_list[i], *cells])


# --------------------------------------------------------------- model archives


def _manifest_digest(manifest: Mapping[str, Any]) -> str:
    """sha256 of the manifest's canonical JSON, without its own ``manifest_sha256`` entry.

    It covers the array checksums too, so one digest seals the whole archive.
    """
    body = {k: v for k, v in manifest.items() if k != "manifest_sha256"}
    text = json.dumps(body, allow_nan=False, ensure_ascii=False, sort_keys=True)
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


def _array_checksum(arr: np.ndarray) -> str:
    """sha256 over dtype, shape and C-order bytes of ``arr``."""
    h = hashlib.sha256()
    h.update(json.dumps([np.lib.format.dtype_to_descr(arr.dtype), list(arr.shape)]).encode())
    h.update(np.ascontiguousarray(arr).tobytes())
    return h.hexdigest()


def _gwpred_version() -> str:
    # read at call time, so that the recorded version is the running one
    return str(getattr(_version, "__version__", "unknown"))


def save_archive(path: StrPath, arrays: Mapping[str, np.ndarray], manifest: Mapping[str, Any]) -> None:
    """Save named arrays and a JSON manifest as one gwpred model archive (``.npz``).

    Parameters
    ----------
    path : str or os.PathLike
        Target file, used exactly as given (no extension is appended). An
        existing file is replaced.
    arrays : mapping of str to numpy.ndarray
        Arrays to store. Names must be non-empty strings other than
        ``"__manifest__"``; arrays must not have an object dtype.
    manifest : mapping
        JSON-serialisable metadata (numbers, strings, booleans, None, lists,
        dicts with string keys; no NaN or infinity).

    Returns
    -------
    None

    Raises
    ------
    TypeError
        If an entry of ``arrays`` is not a numpy array or has an object dtype
        (the message names it), or ``manifest`` is not JSON-serialisable.
    ValueError
        If an array name is empty or reserved, or ``manifest`` holds NaN or
        infinity.
    FileNotFoundError
        If the target directory does not exist.

    Notes
    -----
    The archive is a standard ``.npz`` (a zip of ``.npy`` members, readable by
    :func:`numpy.load` with ``allow_pickle=False``), deflate-compressed like
    :func:`numpy.savez_compressed`, with one extra member ``__manifest__``: the
    UTF-8 JSON manifest as a ``uint8`` array. The stored manifest gets the
    entries ``format`` (:data:`ARCHIVE_FORMAT`), ``format_version``
    (:data:`ARCHIVE_VERSION`), ``gwpred_version``, ``checksums`` (array name
    -> sha256 hex of dtype, shape and bytes) and ``manifest_sha256`` (sha256 of
    the rest of the manifest as canonical JSON: an edited manifest is refused
    at load); these five keys are always set
    by this function, replacing any values given in ``manifest``, so a
    manifest returned by :func:`load_archive` can be saved again. Members are
    written in name order with a fixed timestamp, so equal inputs give
    identical files.

    Examples
    --------
    >>> import os, tempfile, numpy as np
    >>> with tempfile.TemporaryDirectory() as d:
    ...     save_archive(os.path.join(d, "m.npz"), {"W": np.ones((2, 2))}, {"alpha": 0.5})
    ...     arrays, man = load_archive(os.path.join(d, "m.npz"))
    >>> arrays["W"].shape, man["alpha"], man["format"]
    ((2, 2), 0.5, 'gwpred-model')
    """
    p = Path(path)
    if not isinstance(arrays, Mapping):
        raise TypeError(f"arrays must be a dict of name -> numpy.ndarray, got {type(arrays).__name__}")
    if not isinstance(manifest, Mapping):
        raise TypeError(f"manifest must be a dict, got {type(manifest).__name__}")
    checksums: dict[str, str] = {}
    for name, arr in arrays.items():
        if not isinstance(name, str) or not name:
            raise ValueError(f"array names must be non-empty strings, got {name!r}")
        if name == _MANIFEST_KEY:
            raise ValueError(f"array name {_MANIFEST_KEY!r} is reserved for the manifest; rename the array")
        if not isinstance(arr, np.ndarray):
            raise TypeError(
                f"arrays[{name!r}] is a {type(arr).__name__}, not a numpy.ndarray; convert it with np.asarray"
            )
        if arr.dtype.hasobject:
            raise TypeError(
                f"arrays[{name!r}] has dtype {arr.dtype}, which holds Python objects; model archives "
                "never store pickled data: convert it to a numeric or fixed-width string array"
            )
        checksums[name] = _array_checksum(arr)
    full = dict(manifest)
    full.update(
        format=ARCHIVE_FORMAT,
        format_version=ARCHIVE_VERSION,
        gwpred_version=_gwpred_version(),
        checksums=checksums,
    )
    full.pop("manifest_sha256", None)
    try:
        full["manifest_sha256"] = _manifest_digest(full)
        text = json.dumps(full, allow_nan=False, ensure_ascii=False, sort_keys=True)
    except TypeError as err:
        raise TypeError(f"manifest is not JSON-serialisable: {err}; use numbers, strings, lists and dicts") from err
    except ValueError as err:
        raise ValueError(f"manifest holds NaN or infinity ({err}); JSON cannot store it") from err
    members = {_MANIFEST_KEY: np.frombuffer(text.encode("utf-8"), dtype=np.uint8)}
    members.update((name, arrays[name]) for name in sorted(arrays))
    with atomic_open(p, binary=True) as fh:
        with zipfile.ZipFile(fh, mode="w", compression=zipfile.ZIP_DEFLATED) as zf:
            for name, arr in members.items():
                info = zipfile.ZipInfo(name + ".npy", date_time=_ZIP_EPOCH)
                info.compress_type = zipfile.ZIP_DEFLATED
                with zf.open(info, "w", force_zip64=True) as member:
                    np.lib.format.write_array(member, np.asanyarray(arr), allow_pickle=False)


#: A member larger than this that expands more than _MAX_RATIO times is refused (a
#: decompression bomb: deflate tops out near 1032:1, reached only by constant data).
_BOMB_BYTES = 2**30
_MAX_RATIO = 500


def _check_member_sizes(p: Path, where: str, read_errors: tuple) -> None:
    """Refuse, before anything is allocated, members whose sizes cannot be true or cannot fit.

    Each member's ``.npy`` header declares a shape and dtype: their byte count must fit in
    the member's uncompressed size (else the file is damaged or forged), the archive's
    uncompressed total must fit in half of this machine's memory, and a large member may not
    expand like a decompression bomb.
    """
    try:
        with zipfile.ZipFile(p) as zf:
            infos = zf.infolist()
            total = sum(i.file_size for i in infos)
            limit = half_physical_memory()
            if total > limit:
                raise ValueError(
                    f"{where} would expand to {total / 2**30:.1f} GiB, more than half of this machine's memory "
                    f"({limit / 2**30:.1f} GiB); load it on a machine with more memory"
                )
            for info in infos:
                name = info.filename.removesuffix(".npy")
                if info.file_size > _BOMB_BYTES and info.file_size > _MAX_RATIO * max(info.compress_size, 1):
                    raise ValueError(
                        f"{where}: member {name!r} would expand from {info.compress_size:,} to {info.file_size:,} "
                        "bytes, more than any array gwpred writes; refused as a damaged file or a decompression bomb"
                    )
                try:
                    with zf.open(info) as fh:
                        version = np.lib.format.read_magic(fh)
                        if version == (1, 0):
                            shape, _, dtype = np.lib.format.read_array_header_1_0(fh)
                        else:
                            shape, _, dtype = np.lib.format.read_array_header_2_0(fh)
                except read_errors as err:
                    raise ValueError(
                        f"{where}: member {name!r} could not be read ({type(err).__name__}: {err}); "
                        "the file is corrupted or truncated: save the model again"
                    ) from err
                declared = math.prod(shape) * dtype.itemsize
                if declared > info.file_size:
                    raise ValueError(
                        f"{where}: member {name!r} declares {declared:,} bytes of data but holds at most "
                        f"{info.file_size:,}; the file is damaged or was not written by gwpred: save the model again"
                    )
    except ValueError:
        raise
    except read_errors as err:
        raise ValueError(
            f"{where} could not be opened as .npz ({err}); the file may be truncated or corrupted, "
            "or it is not a gwpred model"
        ) from err


def load_archive(path: StrPath) -> tuple[dict[str, np.ndarray], dict[str, Any]]:
    """Load a gwpred model archive written by :func:`save_archive`.

    Parameters
    ----------
    path : str or os.PathLike
        Archive file.

    Returns
    -------
    arrays : dict of str to numpy.ndarray
        The stored arrays, checksums verified.
    manifest : dict
        The stored manifest, including ``format``, ``format_version``,
        ``gwpred_version`` and ``checksums``.

    Raises
    ------
    FileNotFoundError
        If ``path`` does not exist.
    ValueError
        If the file is not a zip/npz (truncated or corrupted file, or not a
        gwpred model), a member cannot be read, the manifest is missing or
        invalid, the format name is wrong, the format version is newer than
        :data:`ARCHIVE_VERSION` (upgrade gwpred), an array listed in the
        manifest is missing, an array is not listed in the manifest, or an
        array does not match its checksum.

    Notes
    -----
    Nothing is unpickled: members are read with ``allow_pickle=False``.

    Examples
    --------
    >>> import os, tempfile, numpy as np
    >>> with tempfile.TemporaryDirectory() as d:
    ...     save_archive(os.path.join(d, "m.npz"), {"b": np.arange(3)}, {})
    ...     load_archive(os.path.join(d, "m.npz"))[0]["b"]
    array([0, 1, 2])
    """
    p = Path(path)
    _require_file(p, "model archive")
    where = repr(str(p))
    if not zipfile.is_zipfile(p):
        raise ValueError(
            f"{where} is not a valid .npz (zip) file; the file may be truncated or corrupted, "
            "or it is not a gwpred model"
        )
    # numpy parses each member's header with ast.literal_eval: a damaged header
    # can raise SyntaxError or tokenize.TokenError as well
    read_errors = (
        zipfile.BadZipFile, zlib.error, ValueError, EOFError, OSError, KeyError,
        SyntaxError, tokenize.TokenError,
    )
    _check_member_sizes(p, where, read_errors)
    try:
        npz = np.load(p, allow_pickle=False)
    except read_errors as err:
        raise ValueError(
            f"{where} could not be opened as .npz ({err}); the file may be truncated or corrupted, "
            "or it is not a gwpred model"
        ) from err
    if not isinstance(npz, np.lib.npyio.NpzFile):
        raise ValueError(f"{where} is not a gwpred model archive (not an .npz file)")
    with npz:

        def member(name: str) -> np.ndarray:
            try:
                return npz[name]
            except read_errors as err:
                if isinstance(err, ValueError) and "allow_pickle" in str(err):
                    raise ValueError(
                        f"{where}: member {name!r} holds Python objects (pickled data), which "
                        "gwpred never loads; the file was not written by gwpred.io.save_archive"
                    ) from err
                raise ValueError(
                    f"{where}: member {name!r} could not be read ({type(err).__name__}: {err}); "
                    "the file is corrupted or truncated: save the model again"
                ) from err

        names = list(npz.files)
        if _MANIFEST_KEY not in names:
            raise ValueError(
                f"{where} has no {_MANIFEST_KEY!r} entry; it is not a gwpred model archive "
                "(write models with gwpred.io.save_archive)"
            )
        raw = member(_MANIFEST_KEY)
        try:
            if raw.dtype != np.uint8 or raw.ndim != 1:
                raise ValueError(f"manifest entry has dtype {raw.dtype} and shape {raw.shape}, expected 1-D uint8")
            manifest = json.loads(raw.tobytes().decode("utf-8"))
            if not isinstance(manifest, dict):
                raise ValueError(f"manifest is a JSON {type(manifest).__name__}, expected an object")
        except (ValueError, UnicodeDecodeError) as err:
            raise ValueError(f"{where}: invalid manifest ({err}); the file is corrupted or not a gwpred model") from err
        fmt = manifest.get("format")
        if fmt != ARCHIVE_FORMAT:
            raise ValueError(
                f"{where} has manifest format {fmt!r}, expected {ARCHIVE_FORMAT!r}; it is not a gwpred model archive"
            )
        version = manifest.get("format_version")
        if isinstance(version, bool) or not isinstance(version, int) or version < 1:
            raise ValueError(f"{where} has an invalid format_version {version!r}; expected a positive integer")
        if version > ARCHIVE_VERSION:
            raise ValueError(
                f"{where} uses model format_version {version}, but this gwpred reads versions up to "
                f"{ARCHIVE_VERSION}; upgrade gwpred to load it (written by gwpred "
                f"{manifest.get('gwpred_version', 'unknown')})"
            )
        sealed = manifest.get("manifest_sha256")  # absent from files of gwpred before it: not checked
        if sealed is not None and sealed != _manifest_digest(manifest):
            raise ValueError(
                f"{where}: the manifest does not match its checksum; the file was edited or corrupted "
                "after it was saved: save the model again"
            )
        checksums = manifest.get("checksums")
        if not isinstance(checksums, dict) or not all(isinstance(v, str) for v in checksums.values()):
            raise ValueError(f"{where}: manifest 'checksums' must map array names to sha256 hex strings")
        stored = [n for n in names if n != _MANIFEST_KEY]
        missing = [n for n in checksums if n not in stored]
        if missing:
            raise ValueError(
                f"{where} lacks array(s) {missing} listed in its manifest; the file is incomplete or corrupted"
            )
        unlisted = [n for n in stored if n not in checksums]
        if unlisted:
            raise ValueError(
                f"{where} holds array(s) {unlisted} not listed in its manifest; the file was altered "
                "after it was saved"
            )
        arrays: dict[str, np.ndarray] = {}
        for name, expected in checksums.items():
            arr = member(name)
            if _array_checksum(arr) != expected:
                raise ValueError(
                    f"{where}: array {name!r} does not match its checksum; the file is corrupted: "
                    "save the model again"
                )
            arrays[name] = arr
    return arrays, manifest


def __getattr__(name: str) -> Any:
    # save_model / load_model moved up a layer, beside the estimator they build; an
    # ImportError (not AttributeError) so that `from gwpred.io import load_model` shows this
    if name in ("save_model", "load_model"):
        raise ImportError(
            f"gwpred.io.{name} moved: use gwpred.{name} (from gwpred import {name}); "
            "model files written before the move load unchanged"
        )
    raise AttributeError(f"module 'gwpred.io' has no attribute {name!r}")


# --------------------------------------------------------------------------- ranked candidate lists
# One JSON object per input row: {"row": i, "ranked": [{"candidate": j, "score": s,
# "graph": <node-link record>}, ...]}, best first.  ``gwpred rank`` writes them
# (:func:`write_ranked`), the HTML report reads them (:func:`read_ranked`).


@dataclass(frozen=True)
class RankedCandidate:
    """One entry of a ranked candidate list.

    Attributes
    ----------
    graph : networkx.Graph
    candidate : int or None
        The candidate's index in its source list, when known.
    score : float or None
        Its score (best first in the list), when known.
    confidence : float or None
        A generated hypothesis's confidence (:func:`write_hypotheses`), when known.
    """

    graph: nx.Graph
    candidate: int | None = None
    score: float | None = None
    confidence: float | None = None


def write_ranked(
    path: StrPath,
    ranked: Sequence[Sequence[tuple[int, float]]],
    candidates: Any,
    ids: Sequence[str] | None = None,
) -> None:
    """Write ranked lists as JSON Lines, one object per input row.

    Each line is ``{"row": i, "id": ..., "ranked": [{"candidate": j, "id": ...,
    "score": s, "graph": <node-link record>}, ...]}``, best first; the graph is
    the candidate in networkx's node-link form with the edge list under
    ``"edges"``.  The row's ``id`` (from ``ids``) and a candidate's ``id`` (its
    ``graph["id"]``, e.g. an SDF title) appear when known.  The file is
    replaced atomically.

    Parameters
    ----------
    path : str or os.PathLike
        Target ``.jsonl`` file.
    ranked : list of list of (int, float)
        As returned by :func:`gwpred.ranking.rank_candidates`.
    candidates : list of networkx.Graph, CandidateLibrary, or list of lists
        The candidates that were ranked (indices refer to them): one list
        shared by all rows, an object holding such a list as ``graphs``
        (:class:`gwpred.ranking.CandidateLibrary`), or one list per row.
    ids : sequence of str, optional
        The input rows' sample ids.

    Raises
    ------
    ValueError
        For a path that does not end in ``.jsonl``, ``ids`` of the wrong
        length, or a graph whose attributes JSON cannot hold.
    """
    target = Path(path)
    if target.suffix.lower() != ".jsonl":
        raise ValueError(f"ranked lists are written as JSON Lines: give a .jsonl path; got {str(path)!r}.")
    if ids is not None and len(ids) != len(ranked):
        raise ValueError(f"ids has {len(ids)} entries but there are {len(ranked)} ranked lists; give one id per row")
    shared = getattr(candidates, "graphs", candidates)
    per_row = not all(isinstance(g, nx.Graph) for g in shared)
    lines = []
    for r, row in enumerate(ranked):
        pool = shared[r] if per_row else shared
        items = []
        for j, score in row:
            item: dict[str, Any] = {"candidate": j}
            if pool[j].graph.get("id") is not None:
                item["id"] = pool[j].graph["id"]
            item.update(score=score, graph=json.loads(graph_to_json_line(pool[j], j)))
            items.append(item)
        record: dict[str, Any] = {"row": r}
        if ids is not None:
            record["id"] = str(ids[r])
        record["ranked"] = items
        lines.append(json.dumps(record, allow_nan=False, ensure_ascii=False))
    with atomic_open(target, binary=False) as fh:
        for line in lines:
            fh.write(line + "\n")


def write_hypotheses(
    path: StrPath,
    lists: Sequence[Sequence[Any]],
    ids: Sequence[str] | None = None,
    formulas: Sequence[str | None] | None = None,
) -> None:
    """Write generated hypotheses (``predict_hypotheses``), best first per input.

    ``.jsonl``: one object per input, in the layout of :func:`write_ranked`
    (so :func:`read_ranked` and ``gwpred report --ranked`` read it):
    ``{"row": i, "id": ..., "formula_given": ..., "calibrated": bool, "note": ...,
    "ranked": [{"rank": 1, "score": s, "confidence": p, "confidence_near": p1,
    "source": ..., "graph": <node-link record>}, ...]}``.
    ``.sdf``, ``.graphml`` and ``.smi``: one record per hypothesis, named
    ``<id>#<rank>`` (the row number when there are no ids), with the input's
    id, the rank, score, confidences and source as graph attributes (SD data
    fields in SDF; SMILES keeps only the name).  The file is replaced
    atomically.

    Parameters
    ----------
    path : str or os.PathLike
        Target file; the extension selects the format.
    lists : sequence of sequences of Hypothesis
        One list per input (items with ``graph``, ``score``, ``confidence``,
        ``confidence_near`` and ``source``; the list's ``calibrated`` and
        ``note`` attributes are written when present).
    ids : sequence of str, optional
        The inputs' sample ids.
    formulas : sequence of (str or None), optional
        Formulas given per input (written as ``formula_given``).

    Raises
    ------
    ValueError
        For an unsupported extension or ``ids``/``formulas`` of the wrong length;
        as :func:`write_graphs` for graphs the format cannot hold.
    """
    target = Path(path)
    ext = _extension(target, GRAPH_EXTENSIONS, "graph")
    for name, values in (("ids", ids), ("formulas", formulas)):
        if values is not None and len(values) != len(lists):
            raise ValueError(f"{name} has {len(values)} entries but there are {len(lists)} hypothesis lists; "
                             "give one per input")
    if ext == ".jsonl":
        lines = []
        for r, hyps in enumerate(lists):
            record: dict[str, Any] = {"row": r}
            if ids is not None:
                record["id"] = str(ids[r])
            if formulas is not None and formulas[r] is not None:
                record["formula_given"] = formulas[r]
            record["calibrated"] = bool(getattr(hyps, "calibrated", False))
            record["note"] = str(getattr(hyps, "note", ""))
            record["ranked"] = [
                {"rank": k, "score": float(h.score), "confidence": float(h.confidence),
                 "confidence_near": float(h.confidence_near), "source": str(h.source),
                 "graph": json.loads(graph_to_json_line(h.graph, k - 1))}
                for k, h in enumerate(hyps, start=1)
            ]
            lines.append(json.dumps(record, allow_nan=False, ensure_ascii=False))
        with atomic_open(target, binary=False) as fh:
            for line in lines:
                fh.write(line + "\n")
        return
    flat = []
    for r, hyps in enumerate(lists):
        name = str(ids[r]) if ids is not None else str(r)
        for k, h in enumerate(hyps, start=1):
            g = h.graph.copy()
            g.graph.clear()
            g.graph.update(id=f"{name}#{k}", input_id=name, row=r, rank=k, score=float(h.score),
                           confidence=float(h.confidence), confidence_near=float(h.confidence_near),
                           source=str(h.source), calibrated=int(bool(getattr(hyps, "calibrated", False))))
            if formulas is not None and formulas[r] is not None:
                g.graph["formula_given"] = formulas[r]
            flat.append(g)
    write_graphs(target, flat)


def read_ranked(path: StrPath) -> dict[int, list[RankedCandidate]]:
    """Read ranked candidate lists, one JSON object per line.

    Each line is ``{"row": i, "ranked": [{"candidate": j, "score": s, "graph": G}, ...]}``
    with the candidates best first and ``G`` a networkx node-link record (edge list under
    ``"edges"``, as ``gwpred.io`` writes graphs). ``candidate`` and ``score`` may be
    missing or null. Blank lines are skipped.

    Parameters
    ----------
    path : str or os.PathLike

    Returns
    -------
    dict
        Row -> list of :class:`RankedCandidate`, best first.

    Raises
    ------
    FileNotFoundError
        If the file does not exist.
    ValueError
        If a line is not valid JSON or lacks ``row``/``ranked``/``graph``, a row number
        is negative or repeated, a score is not a number, or a graph record is invalid.
    """
    path = Path(path)
    if not path.is_file():
        raise FileNotFoundError(f"ranked candidate file {str(path)!r} does not exist")
    out: dict[int, list[RankedCandidate]] = {}
    with open(path, encoding="utf-8") as fh:
        for lineno, line in enumerate(fh, start=1):
            if not line.strip():
                continue
            where = f"{str(path)!r} line {lineno}"
            try:
                record = json.loads(line)
            except json.JSONDecodeError as err:
                raise ValueError(f"{where}: malformed JSON ({err.msg} at column {err.colno})") from err
            except RecursionError:
                raise ValueError(f"{where}: JSON nested too deeply to be a node-link record") from None
            row, items = _ranked_record(record, where)
            if row in out:
                raise ValueError(f"{where}: row {row} appears twice; give one candidate list per row")
            out[row] = [_ranked_item(item, f"{where}, candidate {k}") for k, item in enumerate(items)]
    return out


def _ranked_record(record: Any, where: str) -> tuple[int, list]:
    if not isinstance(record, dict) or "row" not in record or "ranked" not in record:
        raise ValueError(f'{where}: expected an object {{"row": i, "ranked": [...]}}, got {str(record)[:80]}')
    row = record["row"]
    if isinstance(row, bool) or not isinstance(row, int) or row < 0:
        raise ValueError(f"{where}: row must be an int >= 0 (the item's position), got {row!r}")
    items = record["ranked"]
    if not isinstance(items, list):
        raise ValueError(  # noqa: TRY004 - a malformed file is a bad value, as the other errors here
            f"{where}: ranked must be a list of candidates, got {type(items).__name__}"
        )
    return row, items


def _ranked_item(item: Any, where: str) -> RankedCandidate:
    if not isinstance(item, dict) or "graph" not in item:
        raise ValueError(f'{where}: expected an object with a "graph" (node-link record), got {str(item)[:80]}')
    score = item.get("score")
    if score is not None and (isinstance(score, bool) or not isinstance(score, (int, float))):
        raise ValueError(f"{where}: score must be a number or null, got {score!r}")
    cand = item.get("candidate")
    if cand is not None and (isinstance(cand, bool) or not isinstance(cand, int)):
        raise ValueError(f"{where}: candidate must be an int or null, got {cand!r}")
    conf = item.get("confidence")
    if conf is not None and (isinstance(conf, bool) or not isinstance(conf, (int, float)) or not 0 <= conf <= 1):
        raise ValueError(f"{where}: confidence must be a number in [0, 1] or null, got {conf!r}")
    return RankedCandidate(graph_from_record(item["graph"], where), cand, None if score is None else float(score),
                           None if conf is None else float(conf))

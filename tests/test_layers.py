"""The package's import graph: layers that only look down, no cycles, no borrowed private names.

The graph is read from the source with :mod:`ast` (nothing is imported), so a
move that would break at import time fails here first.  The layer of each
module is the table below, kept in step with the module map in DEVELOPERS.md.
Cycle detection uses networkx (``networkx.find_cycle``), an outside reference.
"""

from __future__ import annotations

import ast
from dataclasses import dataclass
from pathlib import Path

import networkx as nx
import pytest

PACKAGE = Path(__file__).resolve().parents[1] / "gwpred"

#: module (or package) -> layer; imports must point to a strictly lower layer,
#: except between modules of one subpackage (which must stay acyclic).
LAYERS = {
    "gwpred._version": 0,
    "gwpred._utils": 0,
    "gwpred.parallel": 1,
    "gwpred.codec": 2,
    "gwpred.formula": 2,
    "gwpred.weights": 2,
    "gwpred.embedding": 2,
    "gwpred.fgw": 2,
    "gwpred.ged": 2,
    "gwpred.wl": 3,
    "gwpred.chem": 3,
    "gwpred.decode": 3,
    "gwpred.io": 4,
    "gwpred.datasets": 4,
    "gwpred.metrics": 4,
    "gwpred.ranking": 4,
    "gwpred.model": 5,
    "gwpred.plot": 6,
    "gwpred.report": 7,
    "gwpred.compare": 7,
    "gwpred.cli": 8,
    "gwpred": 8,  # the public face (__init__)
}

#: Modules allowed to import inside functions: the command line defers the
#: library so that `gwpred --help` starts fast.
DEFERRED_IMPORTS_ALLOWED = {"gwpred.cli"}


def module_name(path: Path) -> str:
    rel = path.relative_to(PACKAGE.parent).with_suffix("")
    parts = list(rel.parts)
    if parts[-1] == "__init__":
        parts = parts[:-1]
    return ".".join(parts)


def unit(module: str) -> str:
    """The entry of LAYERS a module belongs to (its subpackage, or itself)."""
    parts = module.split(".")
    for k in range(len(parts), 0, -1):
        name = ".".join(parts[:k])
        if name in LAYERS:
            return name
    raise KeyError(module)


@dataclass(frozen=True)
class Edge:
    source: str  # importing module
    target: str  # imported gwpred module
    names: tuple[str, ...]  # names taken with `from target import ...`
    line: int
    in_function: bool


def _resolve(module: str, is_package: bool, level: int, target: str | None) -> str:
    base = module.split(".")
    if not is_package:
        base = base[:-1]
    if level > 1:
        base = base[: len(base) - (level - 1)]
    return ".".join(base + ([target] if target else []))


def _modules() -> dict[str, Path]:
    return {module_name(p): p for p in sorted(PACKAGE.rglob("*.py"))}


def _edges(module: str, path: Path, known: set[str]) -> list[Edge]:
    tree = ast.parse(path.read_text(encoding="utf-8"), str(path))
    is_package = path.name == "__init__.py"
    edges: list[Edge] = []

    def visit(node: ast.AST, in_function: bool) -> None:
        for child in ast.iter_child_nodes(node):
            inner = in_function or isinstance(child, (ast.FunctionDef, ast.AsyncFunctionDef, ast.Lambda))
            if isinstance(child, ast.ImportFrom):
                base = _resolve(module, is_package, child.level, child.module) if child.level else child.module or ""
                if base == "gwpred" or base.startswith("gwpred."):
                    plain = []
                    for alias in child.names:
                        sub = f"{base}.{alias.name}"
                        if sub in known:  # `from . import chem`: an import of the module gwpred.chem
                            edges.append(Edge(module, sub, (), child.lineno, in_function))
                        else:
                            plain.append(alias.name)
                    if plain or not child.names:
                        edges.append(Edge(module, base, tuple(plain), child.lineno, in_function))
                elif in_function:
                    edges.append(Edge(module, base, (), child.lineno, True))
            elif isinstance(child, ast.Import):
                for alias in child.names:
                    edges.append(Edge(module, alias.name, (), child.lineno, in_function))
            visit(child, inner)

    visit(tree, False)
    return edges


MODULES = _modules()
EDGES = [e for m, p in MODULES.items() for e in _edges(m, p, set(MODULES))]
INTERNAL = [e for e in EDGES if e.target == "gwpred" or e.target.startswith("gwpred.")]


def test_every_module_has_a_layer():
    missing = [m for m in MODULES if not any(m == u or m.startswith(u + ".") for u in LAYERS)]
    assert not missing, f"add these modules to LAYERS (and to DEVELOPERS.md): {missing}"


def test_imports_point_down():
    upward = []
    for e in INTERNAL:
        src, dst = unit(e.source), unit(e.target)
        if src == dst and src != "gwpred":  # inside one subpackage (checked for cycles below)
            continue
        if LAYERS[dst] >= LAYERS[src]:
            upward.append(f"{e.source}:{e.line} imports {e.target} (layer {LAYERS[src]} -> {LAYERS[dst]})")
    assert not upward, "imports that do not point to a lower layer:\n" + "\n".join(upward)


def test_no_import_cycles():
    graph = nx.DiGraph()
    graph.add_nodes_from(MODULES)
    for e in INTERNAL:
        target = e.target if e.target in MODULES else unit(e.target)
        if target != e.source:
            graph.add_edge(e.source, target)
    try:
        cycle = nx.find_cycle(graph)
    except nx.NetworkXNoCycle:
        cycle = None
    assert cycle is None, f"import cycle: {cycle}"


def test_no_private_names_across_modules():
    borrowed = [
        f"{e.source}:{e.line} takes {name} from {e.target}"
        for e in INTERNAL
        for name in e.names
        if name.startswith("_") and not name.startswith("__") and e.target != e.source
    ]
    # attribute access on an imported gwpred module: `chem._rdkit()`
    for module, path in MODULES.items():
        tree = ast.parse(path.read_text(encoding="utf-8"))
        aliases = set()
        for node in ast.walk(tree):
            if isinstance(node, ast.ImportFrom) and node.level:
                base = _resolve(module, path.name == "__init__.py", node.level, node.module)
                aliases |= {a.asname or a.name for a in node.names if f"{base}.{a.name}" in MODULES}
        for node in ast.walk(tree):
            if (
                isinstance(node, ast.Attribute)
                and isinstance(node.value, ast.Name)
                and node.value.id in aliases
                and node.attr.startswith("_")
                and not node.attr.startswith("__")
            ):
                borrowed.append(f"{module}:{node.lineno} reads {node.value.id}.{node.attr}")
    assert not borrowed, "private names used across modules:\n" + "\n".join(borrowed)


def test_no_imports_inside_functions():
    deferred = [
        f"{e.source}:{e.line} imports {e.target} inside a function"
        for e in EDGES
        if e.in_function and e.source not in DEFERRED_IMPORTS_ALLOWED
    ]
    assert not deferred, (
        "imports inside functions (optional extras go through gwpred._utils.require_extra):\n"
        + "\n".join(deferred)
    )


def test_the_estimator_is_glue():
    # the estimator module may reach the steps, the weights, the parallel seam and checks,
    # never a solver, a decoder or formula arithmetic directly
    estimator = [e.target for e in INTERNAL if e.source == "gwpred.model.estimator"]
    forbidden = {"gwpred.fgw", "gwpred.decode", "gwpred.formula"}
    assert not forbidden & set(estimator), estimator


@pytest.mark.parametrize("source", ["gwpred._utils", "gwpred._version"])
def test_layer_zero_imports_nothing_of_gwpred(source):
    assert not [e for e in INTERNAL if e.source == source]


def test_every_subpackage_is_installed():
    # pyproject.toml lists the packages explicitly (the demo data is mapped in as a package);
    # a subpackage missing there would work in an editable install and vanish from a wheel
    tomllib = pytest.importorskip("tomllib")  # Python >= 3.11 (standard library)
    config = tomllib.loads((PACKAGE.parent / "pyproject.toml").read_text(encoding="utf-8"))
    listed = set(config["tool"]["setuptools"]["packages"])
    found = {module_name(p) for p in PACKAGE.rglob("__init__.py")}
    assert found <= listed, f"add to [tool.setuptools] packages in pyproject.toml: {sorted(found - listed)}"

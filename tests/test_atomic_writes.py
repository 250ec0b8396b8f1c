"""No write of gwpred can leave a truncated file: a killed writer keeps the user's old file.

Two checks: (1) a real ``kill -9`` (SIGKILL, POSIX) of a process in the middle of writing
through :func:`gwpred._utils.atomic_open` leaves the target as it was; (2) every call in
``gwpred/`` that writes a file (``open`` for writing, ``savefig``, ``np.save``/``np.savez``,
``write_text``/``write_bytes``, a zip archive for writing) sits inside a
``with atomic_open(...)`` block or writes to memory (``io.StringIO``/``io.BytesIO``), read
from the source with Python's ``ast`` module.
"""

from __future__ import annotations

import ast
import os
import signal
import subprocess
import sys
from pathlib import Path

import pytest

PACKAGE = Path(__file__).resolve().parents[1] / "gwpred"

WRITER = r"""
import sys, time
from pathlib import Path
from gwpred._utils import atomic_open
target = Path(sys.argv[1])
with atomic_open(target, binary=False) as fh:
    fh.write("new,half-written\n" * 1000)
    fh.flush()
    print("writing", flush=True)
    time.sleep(60)  # killed here, in the middle of the write
"""


@pytest.mark.skipif(not hasattr(signal, "SIGKILL"), reason="SIGKILL is POSIX")
def test_a_writer_killed_mid_write_leaves_the_old_file(tmp_path):
    target = tmp_path / "items.csv"
    target.write_text("id,ged\nprecious,1\n", encoding="utf-8")
    env = dict(os.environ, PYTHONPATH=os.pathsep.join([str(PACKAGE.parent), os.environ.get("PYTHONPATH", "")]))
    proc = subprocess.Popen([sys.executable, "-c", WRITER, str(target)], stdout=subprocess.PIPE, text=True, env=env)
    try:
        assert proc.stdout.readline().strip() == "writing"
        proc.send_signal(signal.SIGKILL)
        proc.wait(timeout=30)
    finally:
        if proc.poll() is None:
            proc.kill()
    assert proc.returncode == -signal.SIGKILL
    assert target.read_text(encoding="utf-8") == "id,ged\nprecious,1\n"  # the old file, whole


def _writes(node: ast.Call) -> str | None:
    """What kind of file write a call is, or None."""
    f = node.func
    name = f.attr if isinstance(f, ast.Attribute) else f.id if isinstance(f, ast.Name) else ""
    if name in ("savefig", "save", "savez", "savez_compressed", "write_text", "write_bytes", "tofile"):
        if name == "save" and not (isinstance(f, ast.Attribute) and isinstance(f.value, ast.Name)
                                   and f.value.id in ("np", "numpy")):
            return None
        return name
    mode = None
    if name in ("open", "ZipFile"):
        if len(node.args) >= 2 and isinstance(node.args[1], ast.Constant):
            mode = node.args[1].value
        for kw in node.keywords:
            if kw.arg == "mode" and isinstance(kw.value, ast.Constant):
                mode = kw.value.value
    if isinstance(mode, str) and any(c in mode for c in "wax") and name == "open" and isinstance(f, ast.Name):
        return "open"
    if isinstance(mode, str) and any(c in mode for c in "wax") and name == "ZipFile":
        return "ZipFile"
    return None


def _unsafe_writes(tree: ast.AST) -> list[tuple[int, str]]:
    """Writes not inside ``with atomic_open(...)`` and not to an in-memory buffer."""
    found: list[tuple[int, str]] = []

    def buffers(scope: ast.AST) -> set[str]:
        """Names a function (or module) binds to an in-memory buffer."""
        return {
            t.id
            for n in ast.walk(scope)
            if isinstance(n, ast.Assign) and isinstance(n.value, ast.Call)
            and getattr(n.value.func, "attr", getattr(n.value.func, "id", "")) in ("StringIO", "BytesIO")
            for t in n.targets
            if isinstance(t, ast.Name)
        }

    def visit(node: ast.AST, safe: bool, memory: set[str]) -> None:
        if isinstance(node, ast.With):
            calls = [i.context_expr for i in node.items if isinstance(i.context_expr, ast.Call)]
            safe = safe or any(getattr(c.func, "id", getattr(c.func, "attr", "")) == "atomic_open" for c in calls)
        if isinstance(node, (ast.FunctionDef, ast.AsyncFunctionDef, ast.Module)):
            memory = buffers(node)
        if isinstance(node, ast.Call):
            kind = _writes(node)
            to_memory = bool(node.args) and isinstance(node.args[0], ast.Name) and node.args[0].id in memory
            if kind and not safe and not to_memory:
                found.append((node.lineno, kind))
        for child in ast.iter_child_nodes(node):
            visit(child, safe, memory)

    visit(tree, False, set())
    return found


def test_every_file_write_in_the_package_is_atomic():
    bad = []
    for path in sorted(PACKAGE.rglob("*.py")):
        if path.name == "_utils.py":  # atomic_open itself: the one place that opens a file for writing
            continue
        tree = ast.parse(path.read_text(encoding="utf-8"))
        bad += [f"{path.relative_to(PACKAGE.parent)}:{line} {kind}" for line, kind in _unsafe_writes(tree)]
    assert not bad, "writes outside atomic_open (a killed process would leave a truncated file): " + ", ".join(bad)


def test_the_scan_finds_an_unsafe_write():
    # the checker itself, on code that writes in place and code that does not
    unsafe = ast.parse("def f(p, fig):\n    open(p, 'w').write('x')\n    fig.savefig(p)\n")
    assert [k for _, k in _unsafe_writes(unsafe)] == ["open", "savefig"]
    safe = ast.parse("def f(p, fig):\n    with atomic_open(p, binary=True) as fh:\n        fig.savefig(fh)\n"
                     "    buf = io.BytesIO()\n    fig.savefig(buf)\n")
    assert _unsafe_writes(safe) == []


@pytest.mark.skipif(os.name != "posix", reason="POSIX permission bits and symbolic links")
def test_overwriting_keeps_the_mode_and_writes_through_a_symlink(tmp_path):
    from gwpred._utils import atomic_write_text

    target = tmp_path / "summary.json"
    target.write_text("old", encoding="utf-8")
    os.chmod(target, 0o640)
    atomic_write_text(target, "new")
    assert target.read_text(encoding="utf-8") == "new" and (target.stat().st_mode & 0o777) == 0o640
    link = tmp_path / "latest.json"
    link.symlink_to(target)
    atomic_write_text(link, "newer")
    assert link.is_symlink() and target.read_text(encoding="utf-8") == "newer"

"""The architecture as a test: ``core`` never imports the GUI, views never import the main window, and
no module imports itself back through others (no import cycle, counting imports inside functions too).

The import graph is read from the source with :mod:`ast` (nothing is imported); cycles are the strongly
connected components of that graph with more than one module (R. Tarjan, SIAM J. Comput. 1, 146
(1972), through scipy.sparse.csgraph.connected_components).
"""
from __future__ import annotations

import ast
from pathlib import Path

import numpy as np
import pytest
import scipy.sparse as sp
from scipy.sparse.csgraph import connected_components

ROOT = Path(__file__).resolve().parents[1]
PACKAGES = ("core", "app")
GUI_MODULES = ("PySide6", "pyqtgraph", "OpenGL", "shiboken6")


def _module_name(path: Path) -> str:
    parts = list(path.relative_to(ROOT).with_suffix("").parts)
    if parts[-1] == "__init__":
        parts = parts[:-1]
    return ".".join(parts)


def _modules() -> dict:
    found = {}
    for pkg in PACKAGES:
        for path in sorted((ROOT / pkg).rglob("*.py")):
            found[_module_name(path)] = path
    return found


def _imports(name: str, path: Path, known: set) -> set:
    """Every module named by an import statement anywhere in the file (top level or in a function)."""
    is_package = path.name == "__init__.py"
    base = name.split(".") if is_package else name.split(".")[:-1]
    out = set()
    for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"), filename=str(path))):
        if isinstance(node, ast.Import):
            out.update(alias.name for alias in node.names)
        elif isinstance(node, ast.ImportFrom):
            if node.level:
                anchor = base[: len(base) - (node.level - 1)]
                mod = ".".join(anchor + ([node.module] if node.module else []))
            else:
                mod = node.module or ""
            for alias in node.names:
                sub = f"{mod}.{alias.name}"
                out.add(sub if sub in known else mod)
    return out


@pytest.fixture(scope="module")
def graph():
    mods = _modules()
    known = set(mods)
    return {name: _imports(name, path, known) for name, path in mods.items()}


def _inside(target: str, prefixes) -> bool:
    return any(target == p or target.startswith(p + ".") for p in prefixes)


def test_the_graph_is_read(graph):
    """A sanity check that the reader sees imports: the one-call solve API imports the eigensolver."""
    assert "core.eigensolve" in graph["core.solve"] or any(t.startswith("core.eigensolve") for t in graph["core.solve"])
    assert len(graph) > 50


def test_core_never_imports_the_gui_or_app(graph):
    bad = sorted(f"{m} imports {t}" for m, ts in graph.items() if m.startswith("core")
                 for t in ts if _inside(t, GUI_MODULES + ("app",)))
    assert bad == []


def test_views_and_editors_do_not_import_the_main_window(graph):
    bad = sorted(f"{m} imports {t}" for m, ts in graph.items()
                 if _inside(m, ("app.views", "app.editors")) for t in ts if _inside(t, ("app.main",)))
    assert bad == []


def test_command_line_modules_do_not_import_qt_at_module_level():
    """The Qt-free command line: the cli modules import no GUI module at their top level."""
    bad = []
    for path in sorted((ROOT / "app").glob("*cli*.py")):
        for node in ast.parse(path.read_text(encoding="utf-8")).body:
            names = ([a.name for a in node.names] if isinstance(node, ast.Import)
                     else [node.module or ""] if isinstance(node, ast.ImportFrom) else [])
            bad += [f"{path.name}: {n}" for n in names if _inside(n, GUI_MODULES)]
    assert bad == []


def test_no_import_cycles(graph):
    names = sorted(graph)
    index = {n: i for i, n in enumerate(names)}
    rows, cols = [], []
    for m, targets in graph.items():
        for t in targets:
            if t in index and t != m:
                rows.append(index[m])
                cols.append(index[t])
    adj = sp.coo_matrix((np.ones(len(rows)), (rows, cols)), shape=(len(names), len(names))).tocsr()
    _, labels = connected_components(adj, directed=True, connection="strong")
    cycles = [sorted(names[i] for i in np.flatnonzero(labels == lab))
              for lab in np.unique(labels) if np.count_nonzero(labels == lab) > 1]
    # a package's __init__ that re-exports its submodules is imported by them only through their
    # own package-relative imports; those are cycles too and must not exist
    assert cycles == []


#: the one module allowed to unpickle: it reads replies from the window's own child process over a
#: private pipe (app.checks.CountProcess), never a file or anything a user supplies
_PICKLE_READERS = {"app.count_server"}


def test_no_code_is_run_from_data():
    """Opening a project or a map never runs code: no eval/exec anywhere in core or app, and
    unpickling only in the count server's private pipe (common practice: the pickle documentation
    warns that unpickling can run arbitrary code)."""
    offenders = []
    for name, path in _modules().items():
        for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"), filename=str(path))):
            if not isinstance(node, ast.Call):
                continue
            fn = node.func
            called = fn.id if isinstance(fn, ast.Name) else fn.attr if isinstance(fn, ast.Attribute) else ""
            owner = fn.value.id if isinstance(fn, ast.Attribute) and isinstance(fn.value, ast.Name) else ""
            if called in ("eval", "exec") and not owner:
                offenders.append(f"{name}:{node.lineno} {called}()")
            if owner in ("pickle", "marshal", "dill", "cloudpickle") and called.startswith("load") \
                    and name not in _PICKLE_READERS:
                offenders.append(f"{name}:{node.lineno} {owner}.{called}()")
            if called == "load" and owner == "np":
                allow = [k for k in node.keywords if k.arg == "allow_pickle"]
                if not allow or not (isinstance(allow[0].value, ast.Constant) and allow[0].value.value is False):
                    offenders.append(f"{name}:{node.lineno} np.load without allow_pickle=False")
    assert offenders == []

"""The package's structure: a private name stays private to its module.

A module may read a ``_name`` attribute only if that same module defines it (a ``def`` or
``class``, an assignment ``x._name = ...``, or a class attribute). Everything a module needs
from another module goes through public, documented names; third-party internals are allowed
only where listed below, each pinned by a test that fails loudly when the library changes.
"""
import ast
from pathlib import Path

import pytest

PACKAGE = Path(__file__).resolve().parents[1] / "summarize_widgets"

#: Third-party internals we rely on, by module: attribute names read on third-party objects.
THIRD_PARTY = {
    # pygam's model matrix and penalty of a fitted LinearGAM (pinned: tests/test_additive.py
    # test_pygam_internals_we_use_are_present).
    "summaries/pygam_bridge.py": {"_modelmat", "_P"},
    # plotly's FigureWidget keeps the figure it sends to the browser in these (pinned:
    # tests/test_widgets.py test_plotly_widget_internals_we_use_are_present).
    "widgets/panels.py": {"_layout_obj", "_props", "_data", "_widget_layout", "_widget_data"},
}


def _private(name: str) -> bool:
    return name.startswith("_") and not (name.startswith("__") and name.endswith("__"))


def _defined_names(tree: ast.AST) -> set[str]:
    names = set()
    for node in ast.walk(tree):
        if isinstance(node, (ast.FunctionDef, ast.AsyncFunctionDef, ast.ClassDef)):
            names.add(node.name)
        elif isinstance(node, (ast.Assign, ast.AnnAssign, ast.AugAssign)):
            targets = node.targets if isinstance(node, ast.Assign) else [node.target]
            for t in targets:
                for sub in ast.walk(t):
                    if isinstance(sub, ast.Attribute):
                        names.add(sub.attr)
                    elif isinstance(sub, ast.Name):
                        names.add(sub.id)
        elif isinstance(node, ast.arg):
            names.add(node.arg)
    return names


def private_access_violations(source: str, rel: str) -> list[str]:
    """Every cross-module private read in ``source`` (the module at ``rel`` inside the package)."""
    tree = ast.parse(source, filename=rel)
    defined = _defined_names(tree)
    allowed = THIRD_PARTY.get(rel, set())
    out = []
    for node in ast.walk(tree):
        if isinstance(node, ast.Attribute) and _private(node.attr):
            if node.attr not in defined and node.attr not in allowed:
                out.append(f"{rel}:{node.lineno}: reads {node.attr} defined in another module")
        elif isinstance(node, ast.ImportFrom):
            for alias in node.names:
                if _private(alias.name):
                    out.append(f"{rel}:{node.lineno}: imports private {alias.name} from {node.module}")
    return sorted(out, key=lambda line: int(line.split(":")[1]))


MODULES = sorted(PACKAGE.rglob("*.py"))


@pytest.mark.parametrize("path", MODULES, ids=lambda p: p.relative_to(PACKAGE).as_posix())
def test_no_module_reads_another_modules_private_names(path):
    assert private_access_violations(path.read_text(), path.relative_to(PACKAGE).as_posix()) == []


def test_the_scan_catches_a_cross_module_private_read():
    # The scan must be able to fail: a module reading another object's private attribute.
    probe = "def f(draws):\n    return draws._weights\n\nfrom .core.draws import _as_matrix\n"
    assert private_access_violations(probe, "probe.py") == [
        "probe.py:2: reads _weights defined in another module",
        "probe.py:4: imports private _as_matrix from core.draws"]
    # ... and accept a module's own private names.
    assert private_access_violations("class A:\n    def f(self):\n        self._x = 1\n        return self._x\n",
                                     "own.py") == []


def test_every_role_has_its_folder():
    # A reader new to the code finds each role in its folder (DEVELOPERS.md, the layout).
    folders = {p.name for p in PACKAGE.iterdir() if p.is_dir() and not p.name.startswith("__")}
    assert {"core", "summaries", "io", "datasets", "figures", "export", "widgets"} <= folders
    top = {p.name for p in PACKAGE.glob("*.py")}
    assert top == {"__init__.py", "_version.py", "cli.py"}

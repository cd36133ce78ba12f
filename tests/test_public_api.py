"""Every public name resolves, and the core imports nothing from the layers above it."""
import importlib
from pathlib import Path
import subprocess
import sys

import pytest

import summarize_widgets as sw

PACKAGE = Path(sw.__file__).resolve().parent
#: Every module of the package, found on disk (a new module is checked without editing this test).
MODULES = sorted(
    "summarize_widgets" + ("." + ".".join(p.relative_to(PACKAGE).with_suffix("").parts)).removesuffix(".__init__")
    for p in PACKAGE.rglob("*.py") if p.name != "_version.py"
)


def test_the_module_list_is_complete():
    assert {"summarize_widgets", "summarize_widgets.core.draws", "summarize_widgets.export.report",
            "summarize_widgets.widgets.explorer", "summarize_widgets.cli"} <= set(MODULES)


@pytest.mark.parametrize("module", MODULES)
def test_every_name_in_all_resolves(module):
    mod = importlib.import_module(module)
    assert getattr(mod, "__all__", None), f"{module} has no __all__"
    missing = [name for name in mod.__all__ if not hasattr(mod, name)]
    assert missing == [], f"{module}.__all__ names what it does not define: {missing}"


def test_version_is_a_string():
    assert isinstance(sw.__version__, str) and sw.__version__.count(".") >= 1


def test_unknown_attribute_is_an_attribute_error():
    with pytest.raises(AttributeError, match="no attribute 'summarize_everything'"):
        sw.summarize_everything


def test_core_does_not_import_figures_widgets_or_plotly():
    # One-way layers (DEVELOPERS.md): importing the package and running a summary loads no plotly,
    # no ipywidgets and none of our figure, export or widget modules.
    code = (
        "import sys, numpy as np, pandas as pd, summarize_widgets as sw\n"
        "X = pd.DataFrame({'a': np.arange(50.0)})\n"
        "sw.summarize_tree(sw.EffectDraws(np.random.default_rng(0).normal(size=(10, 50)) + X.a.to_numpy(), X), max_depth=1)\n"
        "bad = [m for m in sys.modules if m.split('.')[0] in ('plotly', 'ipywidgets', 'anywidget')\n"
        "       or m.startswith(('summarize_widgets.figures', 'summarize_widgets.export', 'summarize_widgets.widgets'))]\n"
        "print(bad)\n"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout
    assert out.strip() == "[]"

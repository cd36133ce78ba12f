"""Every public name resolves, and the core imports nothing from the layers above it."""
import importlib
import subprocess
import sys

import pytest

import summarize_widgets as sw

MODULES = ["summarize_widgets", "summarize_widgets.core", "summarize_widgets.core.draws",
           "summarize_widgets.core.intervals", "summarize_widgets.io", "summarize_widgets.summaries",
           "summarize_widgets.summaries.tree", "summarize_widgets.summaries.groups",
           "summarize_widgets.summaries.linear", "summarize_widgets.summaries.additive",
           "summarize_widgets.summaries.compare",
           "summarize_widgets.summaries.evidence",
           "summarize_widgets.datasets", "summarize_widgets.figures", "summarize_widgets.export",
           "summarize_widgets.cli", "summarize_widgets.widgets"]


@pytest.mark.parametrize("module", MODULES)
def test_every_name_in_all_resolves(module):
    mod = importlib.import_module(module)
    assert mod.__all__, module
    for name in mod.__all__:
        assert getattr(mod, name) is not None, f"{module}.{name}"


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

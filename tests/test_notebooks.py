"""Every example notebook runs from top to bottom (nbclient), so the examples cannot rot.

The quickstart is also checked as a static export: executed with widget state
stored, its saved state must hold the tree view (with its nodes) and every
figure, and nbconvert's HTML must carry that state for the widget renderer.
"""
from __future__ import annotations

import json
from pathlib import Path

import nbformat
import pytest

REPO = Path(__file__).resolve().parents[1]
NOTEBOOKS = sorted((REPO / "example_notebooks").glob("*.ipynb"))
TREE_VIEW_ID = "summarize_widgets.widgets.tree_view.TreeView"
FIGURE_WIDGET_ID = "plotly.graph_objs._figurewidget.FigureWidget"

pytestmark = pytest.mark.slow


def _execute(path: Path, workdir: Path):
    from nbclient import NotebookClient

    nb = nbformat.read(path, as_version=4)
    client = NotebookClient(nb, timeout=600, kernel_name="python3", store_widget_state=True,
                            resources={"metadata": {"path": str(workdir)}})
    client.execute()
    return nb


@pytest.fixture(scope="module")
def executed(tmp_path_factory):
    """Notebook name -> executed notebook (each run once, in its own folder)."""
    cache = {}

    def run(name):
        if name not in cache:
            work = tmp_path_factory.mktemp(name.replace(".ipynb", ""))
            nb = nbformat.read(REPO / "example_notebooks" / name, as_version=4)
            # The linear and additive summaries fill in on a worker thread after the first view; a
            # headless run waits for them (Explorer.wait) so the widget state saved at the end holds them.
            names = [line.split("=")[0].strip() for c in nb.cells if c.cell_type == "code"
                     for line in c.source.splitlines() if "sw.Explorer(" in line and "=" in line.split("sw.Explorer(")[0]]
            if names:
                nb.cells.append(nbformat.v4.new_code_cell("".join(f"{n}.wait(600)\n" for n in names)))
            nbformat.write(nb, work / name)
            cache[name] = _execute(work / name, work)
        return cache[name]
    return run


def test_the_examples_are_there_and_stored_without_outputs():
    names = [p.name for p in NOTEBOOKS]
    assert names == ["complier_weighted.ipynb", "own_draws_from_file.ipynb", "quickstart.ipynb"]
    for path in NOTEBOOKS:
        nb = nbformat.read(path, as_version=4)
        nbformat.validate(nb)
        code = [c for c in nb.cells if c.cell_type == "code"]
        assert code, path.name
        # Outputs and widget state are produced by running; the repository keeps the clean source.
        assert all(not c.outputs and c.execution_count is None for c in code), path.name
        assert "widgets" not in nb.metadata, path.name


@pytest.mark.parametrize("name", [p.name for p in NOTEBOOKS])
def test_example_notebook_runs(executed, name):
    nb = executed(name)
    errors = [o for c in nb.cells if c.cell_type == "code" for o in c.outputs if o.output_type == "error"]
    assert not errors, "\n".join(f"{e.ename}: {e.evalue}" for e in errors)
    # Whatever the notebook displays last in a cell with the explorer is a widget view, not a traceback.
    views = [o for c in nb.cells if c.cell_type == "code" for o in c.outputs
             if "application/vnd.jupyter.widget-view+json" in o.get("data", {})]
    assert views, f"{name} displays no widget"
    stderr = "".join(o.get("text", "") for c in nb.cells if c.cell_type == "code" for o in c.outputs
                     if o.output_type == "stream" and o.name == "stderr")
    assert "Traceback" not in stderr


def _widget_state(nb) -> dict:
    return nb.metadata["widgets"]["application/vnd.jupyter.widget-state+json"]["state"]


def test_quickstart_saves_the_state_of_the_tree_view_and_every_figure(executed):
    nb = executed("quickstart.ipynb")
    state = _widget_state(nb)
    by_id = {}
    for model_id, model in state.items():
        kind = model["state"].get("_anywidget_id")
        by_id.setdefault(kind, []).append((model_id, model["state"]))

    trees = by_id.get(TREE_VIEW_ID, [])
    assert len(trees) == 1
    tree_state = trees[0][1]
    leaves = [n for n in tree_state["nodes"] if n["is_leaf"]]
    # The quickstart opens at the default depth (3, as on the command line); the demo's tree splits every level.
    assert len(leaves) == 8
    assert "export default { render }" in tree_state["_esm"]  # the module travels with the state
    assert tree_state["selected"] in [n["node"] for n in leaves]

    figures = [s for _, s in by_id.get(FIGURE_WIDGET_ID, [])]
    assert len(figures) == 5  # effects, fit by depth, trends, linear fit, contrasts
    for fig in figures:
        assert fig["_widget_data"], "a figure was saved without traces"
        assert fig["_widget_layout"].get("height")
    # The saved figures are the current ones: the effects panel marks the selected subgroup.
    highlighted = [t for f in figures for t in f["_widget_data"] if t.get("name") == "highlight"]
    assert len(highlighted) == 1

    # Every binary buffer the state lists has a place to go: the static renderer puts each one
    # back at its path and stops at the first path that runs into a missing or null field.
    for model_id, model in state.items():
        for buf in model.get("buffers", []):
            node = model["state"]
            for key in buf["path"][:-1]:
                node = node[key] if isinstance(node, dict) else node[int(key)]
                assert node is not None, (model_id, buf["path"])

    # The displayed explorer refers to a saved model, so a renderer can draw it without a kernel.
    view_ids = [o["data"]["application/vnd.jupyter.widget-view+json"]["model_id"]
                for c in nb.cells if c.cell_type == "code" for o in c.outputs
                if "application/vnd.jupyter.widget-view+json" in o.get("data", {})]
    assert view_ids and all(v in state for v in view_ids)


def test_quickstart_html_export_carries_the_widget_state(executed, tmp_path):
    from nbconvert import HTMLExporter

    nb = executed("quickstart.ipynb")
    body, _ = HTMLExporter().from_notebook_node(nb)
    marker = '<script type="application/vnd.jupyter.widget-state+json">'
    assert marker in body
    start = body.index(marker) + len(marker)
    saved = json.loads(body[start:body.index("</script>", start)])
    kinds = [m["state"].get("_anywidget_id") for m in saved["state"].values()]
    assert TREE_VIEW_ID in kinds and kinds.count(FIGURE_WIDGET_ID) == 5
    assert '<script type="application/vnd.jupyter.widget-view+json">' in body

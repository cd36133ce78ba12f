"""The explorer's first view before the linear and additive summaries are in, in JupyterLab in headless Chromium.

The notebook holds those summaries back (``summarize_extras`` waits for a button the test
clicks), so the page shows what a user sees at scale while they are computed: the tree and
the subgroup effects ready, the two tabs saying "(computing…)" with a progress bar. After the
click they fill in from the worker thread through the kernel's main loop, and the test checks
that their figures reach the page.
"""
from __future__ import annotations

import pytest

NOTEBOOK = "fill_in_browser.ipynb"
CELLS = [
    "import json, threading, ipywidgets as _w, summarize_widgets as sw\n"
    "from summarize_widgets.widgets import results as _results\n"
    "study = sw.simulate_retrofit_study(n_households=800, n_draws=300)\n"
    "draws = study.effect_draws()\n"
    "_gate, _real = threading.Event(), _results.summarize_extras\n"
    "def _held(*args, **kwargs):  # the linear and additive summaries wait for the test's click\n"
    "    assert _gate.wait(300)\n"
    "    return _real(*args, **kwargs)\n"
    "_results.summarize_extras = _held",
    "explorer = sw.Explorer(draws, max_depth=3, additive_options={'lam': 1.0})\n"
    "explorer",
    "_go = _w.Button(description='release the extras')\n"
    "_go.on_click(lambda _: _gate.set())\n"
    "print('EXPECTED ' + json.dumps({'leaves': len(explorer.tree.leaf_ids)}))\n"
    "_go",
]
VISIBLE_PLOT = ".widget-tab-contents > :not(.lm-mod-hidden) .js-plotly-plot"


@pytest.fixture(scope="module")
def fill_in_page(open_explorer):
    page, explorer, expected = open_explorer(NOTEBOOK, CELLS)
    yield page, explorer, expected
    page.close()


def _tab(explorer, title):
    return explorer.locator(".widget-tab .lm-TabBar-tab", has_text=title)


def test_the_first_view_is_usable_while_the_extras_compute_and_they_fill_in(fill_in_page, screenshot):
    from playwright.sync_api import expect

    page, explorer, expected = fill_in_page
    expect(explorer.locator(".swtv-leaf")).to_have_count(expected["leaves"])
    for title in ("Trends", "Linear fit"):
        expect(_tab(explorer, title)).to_contain_text("(computing\u2026)")
    # The first view: subgroup effects drawn, a click selects meanwhile.
    effects = explorer.locator(VISIBLE_PLOT)
    expect(effects.locator(".scatterlayer .trace").first).to_be_attached()
    leaves = explorer.locator(".swtv-leaf")
    target = leaves.nth(1).get_attribute("data-node")
    leaves.nth(1).click()
    expect(explorer.locator(".swtv-selected")).to_have_attribute("data-node", target)
    _tab(explorer, "Linear fit").click()
    waiting = explorer.locator(".widget-tab-contents > :not(.lm-mod-hidden) .swx-waiting")
    expect(waiting).to_be_visible()
    expect(waiting).to_contain_text("in the background")
    expect(waiting.locator(".widget-progress, .progress").first).to_be_visible()
    screenshot(explorer, "fill_in_computing.png")

    page.locator("button", has_text="release the extras").click()
    for title in ("Trends", "Linear fit"):
        expect(_tab(explorer, title)).not_to_contain_text("computing")
    expect(waiting).to_be_hidden()
    plot = explorer.locator(VISIBLE_PLOT)
    expect(plot.locator(".scatterlayer .trace").first).to_be_attached()
    page.wait_for_function("(el) => (el.data || []).length > 0", arg=plot.element_handle())
    drawn, room = plot.evaluate("el => [el._fullLayout.width, el.parentElement.clientWidth]")
    assert room - 80 <= drawn <= room, (drawn, room)
    screenshot(explorer.locator(".widget-tab"), "fill_in_linear_done.png")
    _tab(explorer, "Trends").click()
    choice = explorer.locator(".widget-tab-contents > :not(.lm-mod-hidden) select").first
    expect(choice).not_to_have_value("")  # a covariate is chosen, not a blank control
    trends = explorer.locator(VISIBLE_PLOT)
    expect(trends.locator(".scatterlayer .trace").first).to_be_attached()
    screenshot(explorer.locator(".widget-tab"), "fill_in_trends_done.png")
    # The selection made while the extras computed is still there.
    expect(explorer.locator(".swtv-selected")).to_have_attribute("data-node", target)
    assert page.locator(".jp-OutputArea-output[data-mime-type='application/vnd.jupyter.stderr']").count() == 0

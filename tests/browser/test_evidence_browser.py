"""The explorer's Evidence tab and its "Save this view" control, in JupyterLab in headless Chromium.

The notebook carries a kernelspec (``write_notebook``): without one JupyterLab opens its
kernel chooser, no kernel starts and the status bar stays at "No Kernel | Initializing",
which is why an earlier version of this test never ran.
"""
from __future__ import annotations


import pytest

NOTEBOOK = "evidence_browser.ipynb"
CELLS = [
    "import json, summarize_widgets as sw\n"
    "study = sw.simulate_retrofit_study(n_households=800, n_draws=300)\n"
    "draws = study.effect_draws()",
    "explorer = sw.Explorer(draws, max_depth=3, additive_options={'lam': 1.0})\n"
    "explorer",
    "explorer.wait(300)\n"
    "from summarize_widgets.summaries.evidence import heterogeneity_evidence\n"
    "_h = heterogeneity_evidence(draws, explorer.tree)\n"
    "print('EXPECTED ' + json.dumps({'verdict': _h.message}))",
]


@pytest.fixture(scope="module")
def evidence_page(open_explorer):
    page, explorer, expected = open_explorer(NOTEBOOK, CELLS)
    yield page, explorer, expected
    page.close()


def test_evidence_tab_shows_the_verdicts_and_the_precision_check(evidence_page, screenshot):
    from playwright.sync_api import expect

    page, explorer, expected = evidence_page
    explorer.locator(".lm-TabBar-tab", has_text="Evidence").click()
    panel = explorer.locator(".swx-evidence")
    expect(panel).to_be_visible()
    # The verdict the panel shows is the one computed from the summaries engine directly.
    expect(panel.locator(".swx-verdict", has_text="Heterogeneity")).to_contain_text(expected["verdict"])
    expect(panel).to_contain_text("Summary R\u00b2 of nested linear summaries")
    # 300 draws: fewer than 400 effective draws, so the Monte Carlo precision verdict must say so.
    expect(panel.locator(".swx-verdict", has_text="Monte Carlo precision")).to_contain_text("fall short of")
    screenshot(explorer, "explorer_evidence_tab.png")


def test_save_this_view_writes_a_folder_and_refuses_it_again(evidence_page, lab_server, screenshot):
    from playwright.sync_api import expect

    page, explorer, _ = evidence_page
    folder = explorer.locator(".widget-text input").last
    folder.fill("saved_view")
    folder.press("Enter")
    explorer.locator("button.swx-save").click()
    status = explorer.locator(".swx-save-status")
    expect(status).to_contain_text("Saved", timeout=180_000)
    saved = lab_server.root / "saved_view"
    assert (saved / "subgroups_depth3.csv").exists() and (saved / "view.json").exists()
    assert (saved / "figures" / "subgroups.svg").exists()
    explorer.locator("button.swx-save").click()
    expect(status).to_contain_text("already exists and is not empty")
    screenshot(explorer.locator(".swx-save-status"), "explorer_save_refused.png")

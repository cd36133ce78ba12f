"""The explorer's Evidence tab in JupyterLab, in headless Chromium: verdicts shown, stability on request."""
from __future__ import annotations

import nbformat
import pytest

NOTEBOOK = "evidence_browser.ipynb"
CELLS = [
    "import summarize_widgets as sw\n"
    "study = sw.simulate_retrofit_study(n_households=800, n_draws=300)\n"
    "draws = study.effect_draws()",
    "explorer = sw.Explorer(draws, max_depth=3, additive_options={'lam': 1.0})\n"
    "explorer.evidence_panel.fits_control.value = 20\n"
    "explorer",
]


@pytest.fixture(scope="module")
def evidence_page(lab_server, browser, run_all):
    nb = nbformat.v4.new_notebook()
    nb.cells = [nbformat.v4.new_code_cell(c) for c in CELLS]
    nbformat.write(nb, lab_server.root / NOTEBOOK)
    page = browser.new_page(viewport={"width": 1400, "height": 2200})
    run_all(page, lab_server, NOTEBOOK)
    from playwright.sync_api import expect

    explorer = page.locator(".swx-explorer")
    expect(explorer).to_be_visible(timeout=240_000)
    yield page, explorer
    page.close()


def test_evidence_tab_shows_verdicts_and_runs_stability_on_request(evidence_page, screenshot):
    from playwright.sync_api import expect

    page, explorer = evidence_page
    explorer.locator(".lm-TabBar-tab", has_text="Evidence").click()
    panel = explorer.locator(".swx-evidence")
    expect(panel).to_be_visible()
    expect(panel).to_contain_text("Heterogeneity supported")
    expect(panel).to_contain_text("Summary R\u00b2 of nested linear summaries")
    expect(panel).to_contain_text("press the button")
    panel.locator("button", has_text="Check structure stability").click()
    expect(panel).to_contain_text("trees refitted to single posterior draws", timeout=180_000)
    expect(panel.locator("table caption", has_text="Splits of 20 trees")).to_be_visible()
    screenshot(explorer, "explorer_evidence_tab.png")

"""The explorer's Evidence tab (kernel side, no browser)."""
import numpy as np
import pytest

import summarize_widgets as sw
from summarize_widgets.summaries.evidence import heterogeneity_evidence
from summarize_widgets.widgets import Explorer
from summarize_widgets.widgets.evidence_panel import EvidencePanel

from conftest import household_covariates


@pytest.fixture(scope="module")
def draws():
    rng = np.random.default_rng(40)
    n, S = 300, 60
    X = household_covariates(n, rng)
    X["fuel"] = X["fuel"].replace({"oil": "oil<b>"})  # must reach the page escaped (not the reference category)
    return sw.EffectDraws(1.0 + 1.0 * (X["age"].to_numpy() > 50) + rng.normal(0, 0.3, (S, n)), X)


def test_explorer_mounts_the_evidence_tab_and_follows_the_depth(draws):
    ex = Explorer(draws, max_depth=3, background=False, trends=False)
    assert ex.wait(60)  # tabs out of sight are drawn after the first view
    panel = ex.evidence_panel
    names = list(ex._panels)
    k = names.index("evidence")
    assert ex._tabs.get_title(k) == "Evidence" and names[k + 1:] == ["decisions"]
    text = panel.summary_html.value
    expected = heterogeneity_evidence(draws, ex.tree).message
    assert "Heterogeneity supported" in text and "Tree size" in text and "Linear summary size" in text
    assert f"the {len(ex.tree.leaf_ids)} subgroups of the tree at depth {ex.tree.depth}" in expected
    assert "oil<b>" not in text and "fuel = oil&lt;b&gt;" in text  # the linear path's term, escaped
    ex._tabs.selected_index = names.index("evidence")
    ex.apply(depth=1)
    assert "the 2 subgroups of the tree at depth 1" in panel.summary_html.value
    assert "press the button" in panel.stability_html.value


def test_stability_runs_only_on_request_and_is_kept_per_tree(draws):
    tree = sw.summarize_tree(draws, max_depth=2)
    panel = EvidencePanel(draws, stability_fits=6, background=False)
    panel.show(tree)
    assert "press the button" in panel.stability_html.value
    panel.stability_button.click()
    assert panel.wait(30)
    assert "First split supported" in panel.stability_html.value
    assert "Splits of 6 trees" in panel.stability_html.value
    panel.show(tree.at_depth(1))  # another depth: not checked yet
    assert "press the button" in panel.stability_html.value
    panel.show(tree)  # back: the result is kept
    assert "First split supported" in panel.stability_html.value
    assert "oil<b>" not in panel.summary_html.value + panel.stability_html.value


def test_stability_in_the_background(draws):
    tree = sw.summarize_tree(draws, max_depth=1)
    panel = EvidencePanel(draws, stability_fits=4)
    panel.show(tree)
    panel.run_stability()
    assert panel.wait(60)
    assert "First split supported: 100% of 4 trees" in panel.stability_html.value
    assert not panel.stability_button.disabled and panel.progress.layout.display == "none"


def test_monte_carlo_warnings_reach_the_panel():
    from summarize_widgets.core.stats import ESS_MIN, RHAT_MAX

    assert (ESS_MIN, RHAT_MAX) == (400, 1.01)  # Vehtari et al. 2021 (Bayesian Analysis) thresholds
    rng = np.random.default_rng(41)
    n = 300
    X = household_covariates(n, rng)
    base = 1.0 + 1.0 * (X["age"].to_numpy() > 50)
    # 2,000 independent draws: every ESS is well above 400, nothing is flagged.
    good = sw.EffectDraws(base + rng.normal(0, 0.3, (2000, n)), X)
    panel = EvidencePanel(good, background=False)
    panel.show(sw.summarize_tree(good, max_depth=2))
    assert "Monte Carlo precision.</strong> All " in panel.summary_html.value
    assert "swx-verdict swx-verdict-warn" not in panel.summary_html.value
    # Four chains of a random walk (strongly autocorrelated): R-hat far above 1.01, tiny ESS.
    walk = np.cumsum(rng.normal(0, 0.2, (400, n)), axis=0)
    bad = sw.EffectDraws(base + walk, X, chains=4)
    tree = sw.summarize_tree(bad, max_depth=2)
    flagged = tree.table()["mc_warning"].astype(str)
    assert (flagged != "").all()  # the stats core flags these rows (R-hat and ESS)
    panel = EvidencePanel(bad, background=False)
    panel.show(tree)
    text = panel.summary_html.value
    assert "swx-verdict swx-verdict-warn" in text and "fall short of ESS of at least 400 and R-hat at most 1.01" in text
    assert "Run more or longer chains" in text

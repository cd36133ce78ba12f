"""Decision tables as files and the report section: every format written, user text escaped, cautions kept."""
import numpy as np
import pytest
from conftest import household_covariates

import summarize_widgets as sw
from summarize_widgets.export.decisions import decisions_section_html, write_decision_tables


@pytest.fixture(scope="module")
def results():
    rng = np.random.default_rng(4)
    X = household_covariates(200, rng)
    X["fuel"] = X["fuel"].replace({"oil": "oil & <b>50%</b>"})
    pi = rng.uniform(0.2, 0.8, (50, 200))
    T = (X["fuel"] != "gas").to_numpy() + rng.normal(0, 0.3, (50, 200))
    d = sw.EffectDraws.from_itt(T * pi, pi, X, label="saving_<x>")
    tree = sw.summarize_tree(d, max_depth=2, min_size=20)
    return sw.value_of_targeting(tree, min_prob=0.6), sw.uptake_drivers(tree)


def test_every_format_is_written_and_refused_when_present(results, tmp_path):
    t, u = results
    files = write_decision_tables(tmp_path, t, u)
    assert len(files) == 4 * 4
    tex = (tmp_path / "targeting_subgroups.tex").read_text()
    assert "\\&" in tex and "<b>" not in tex.replace("\\textless{}b\\textgreater{}", "")
    page = (tmp_path / "uptake_drivers.html").read_text()
    assert "<b>" not in page and "&lt;b&gt;" in page and "mechanisms" in page
    assert "standards of your field" in (tmp_path / "targeting_gain.md").read_text()
    with pytest.raises(FileExistsError):
        write_decision_tables(tmp_path, t, u)


def test_report_section_has_headline_tables_and_cautions(results):
    t, u = results
    sec = decisions_section_html(t, u)
    assert 'id="sw-decisions"' in sec and "cross-fitted" in sec and "Cross-fitted" in sec
    assert "standards of your field" in sec and "<b>50%</b>" not in sec


def test_report_carries_the_decisions_section(results, tmp_path):
    from summarize_widgets.export.report import write_report

    t, u = results
    path = write_report(tmp_path, tree=t.structure, decisions={"targeting": t, "uptake": u}, figures=None)
    page = path.read_text()
    assert 'href="#sw-decisions"' in page and "Gain of the rule" in page and "Uptake share" in page
    with pytest.raises(sw.SummaryError, match="decisions"):
        write_report(tmp_path / "b", tree=t.structure, decisions={"nonsense": 1}, figures=None)


def test_explorer_has_a_decisions_tab_that_follows_its_controls():
    study = sw.simulate_retrofit_study(300, 100, seed=3)
    e = sw.Explorer(study.effect_draws())
    assert "decisions" in e._panels
    # The value of targeting (with its cross-fitted trees) is computed when its tab is opened, not
    # before the first view: it costs more than the rest of the start-up together at scale.
    assert e.decisions_panel.result is None
    e._tabs.selected_index = list(e._panels).index("decisions")
    assert e.decisions_panel.result is not None
    e._draw_panel(e._panels["decisions"])
    panel = e.decisions_panel
    assert panel.result is not None and "cross-fitted" in panel.tables.value
    panel.cost_control.value = 2.5
    assert panel.result.cost == 2.5
    panel.min_prob_control.value = 0.6
    assert panel.result.min_prob == pytest.approx(0.6)


@pytest.mark.skipif(__import__("shutil").which("pdflatex") is None, reason="pdflatex not installed")
def test_decision_tables_compile_and_fit_a_plain_article(results, tmp_path):
    # Same check as the summary tables (tests/test_export.py): LaTeX accepts every decision table,
    # user text included, and none runs past the text width (no overfull box wider than 2 pt).
    from test_export import _compile, overfull

    from summarize_widgets.datasets.retrofit import simulate_retrofit_study

    study = simulate_retrofit_study(n_households=1200, n_draws=300, seed=20261201)
    late = study.complier_draws()
    tree = sw.summarize_tree(late, max_depth=3)
    files = write_decision_tables(tmp_path / "demo", sw.value_of_targeting(tree), sw.uptake_drivers(tree), formats=("tex",))
    files += write_decision_tables(tmp_path / "nasty", *results, formats=("tex",))
    tex = "".join(f.read_text(encoding="utf-8") for f in files)
    assert "\\le" in tex or "$\\leq$" in tex  # rules typeset for LaTeX, not as Unicode signs
    log = _compile(tmp_path, tex)
    assert "Missing character" not in log and "Undefined control sequence" not in log
    assert overfull(log) == []

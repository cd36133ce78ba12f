"""Kernel-side tests of the notebook widgets (no browser: see tests/browser/ for that)."""
from __future__ import annotations

import base64
import html
import json
import os
import shutil
import subprocess
from pathlib import Path

import numpy as np
import pandas as pd
import plotly.graph_objects as go
import pytest

from summarize_widgets import EffectDraws, SummaryError, summarize_tree
from summarize_widgets.datasets import simulate_retrofit_study
from summarize_widgets.figures import DIVERGING, MUTED, effect_color
from summarize_widgets.widgets import Explorer, TreeView
from summarize_widgets.widgets import panels as P
from summarize_widgets.widgets import explorer as explorer_module
from summarize_widgets.widgets.tree_view import RECORD_FIELDS, asset_path, node_records

REPO = Path(__file__).resolve().parents[1]
IN_CI = os.environ.get("CI", "").lower() == "true"


@pytest.fixture(scope="module")
def study():
    return simulate_retrofit_study(n_households=400, n_draws=200, seed=7)


@pytest.fixture(scope="module")
def draws(study):
    return study.effect_draws()


@pytest.fixture()
def explorer(draws):
    # lam fixed: the smoothing search is not what these tests are about, and it is the slow part.
    return Explorer(draws, max_depth=3, depth=2, background=False, additive_options={"lam": 1.0})


def _leaf_draws_by_groupby(draws_values, covariates, tree):
    """Per-draw subgroup means computed outside the package: pandas groupby over the tree's assignment."""
    groups = tree.assign(covariates)
    frame = pd.DataFrame(np.asarray(draws_values, dtype=float).T)
    return frame.groupby(groups.to_numpy()).mean()  # (n_subgroups, n_draws), index = node id


# -- front-end files and the tree view -------------------------------------------------------------
def test_asset_path_finds_the_repository_js_in_an_editable_install():
    js = asset_path("tree_view.js")
    assert js.resolve() == (REPO / "js" / "tree_view.js").resolve() and js.parent.name == "_static"
    assert "export default { render }" in js.read_text()
    assert asset_path("tree_view.css").read_text().count(".swtv-") > 5
    with pytest.raises(FileNotFoundError, match=r"front-end file 'nope.js' not found"):
        asset_path("nope.js")


def test_tree_view_ships_its_module_and_styles():
    view = TreeView()
    assert "function render" in view._esm and "export function layoutTree" in view._esm
    # No network imports: the module must work offline.
    assert "import " not in "\n".join(line for line in view._esm.splitlines() if not line.lstrip().startswith(("*", "//")))
    assert ".swtv-root" in view._css
    assert view.palette == {"stops": list(DIVERGING), "missing": MUTED}


def test_node_records_are_json_ready(draws):
    nodes = summarize_tree(draws, max_depth=2).nodes()
    nodes.loc[nodes.index[-1], "mean"] = np.nan
    recs = node_records(nodes)
    assert len(recs) == len(nodes)
    assert all(set(r) == set(RECORD_FIELDS) for r in recs)
    # Share of units is n_units over all units, whatever the weights; nothing flagged unless asked.
    assert [r["unit_share"] for r in recs] == pytest.approx((nodes["n_units"] / nodes["n_units"].iloc[0]).tolist())
    assert not any(r["weak"] for r in recs)
    leaf = int(nodes.loc[nodes["is_leaf"], "node"].iloc[0])
    assert [r["node"] for r in node_records(nodes, weak=[leaf]) if r["weak"]] == [leaf]
    assert recs[-1]["mean"] is None
    json.dumps(recs, allow_nan=False)  # raises if a NaN or a numpy scalar slipped through
    assert type(recs[0]["node"]) is int and type(recs[0]["is_leaf"]) is bool and type(recs[1]["share"]) is float
    assert recs[0]["parent"] == -1 and recs[0]["split"] == ""


def test_node_records_carry_rules_in_the_one_rule_syntax(study):
    """The tree view's boxes and read-out rules come from core.rules.rule_text, as figures and tables."""
    cov = study.covariates.copy()
    cov["region"] = pd.Categorical(np.where(cov.index % 3 == 0, "coast", np.where(cov.index % 3 == 1, "hills", "plain")))
    d = EffectDraws(study.itt_outcome_draws + np.where(cov["region"] == "coast", 30.0, 0.0)[None, :], cov)
    nodes = summarize_tree(d, max_depth=2).nodes()
    recs = node_records(nodes)
    deep = [r for r in recs if r["depth"] == 2]
    assert deep and all(" and " in r["rule_text"] and "&" not in r["rule_text"] for r in deep)
    assert any("\u2208" in r["rule_text"] or "\u2208" in r["split_text"] for r in recs)
    assert all("in {" not in r["rule_text"] + r["split_text"] and "<=" not in r["rule_text"] for r in recs)
    assert [r["rule_text"] for r in recs] == [rule_text(r) for r in nodes["rule"]]


def test_node_records_name_missing_columns():
    with pytest.raises(SummaryError, match=r"`nodes` must be a DataFrame with columns .* missing \['split', 'rule'"):
        node_records(pd.DataFrame({"node": [0], "parent": [-1], "depth": [0]}))


def test_tree_view_rejects_bad_palettes():
    with pytest.raises(SummaryError, match=r"`palette\['stops'\]` must list at least two colours"):
        TreeView(palette={"stops": ["#000000"]})
    with pytest.raises(SummaryError, match=r"`palette\['stops'\]\[1\]` must be a colour like '#1f77b4'; got 'blue'"):
        TreeView(palette={"stops": ["#000000", "blue"]})
    with pytest.raises(SummaryError, match=r"`palette\['missing'\]` must be a colour"):
        TreeView(palette={"stops": ["#000000", "#ffffff"], "missing": "#12345"})


def _node_or_skip():
    node = shutil.which("node")
    if node is None:
        if IN_CI:
            pytest.fail("node is missing; CI=true, so the JavaScript tests must run (apt-get install -y nodejs).")
        pytest.skip("node is not installed")
    return node


def test_js_unit_tests_pass():
    """Runs tests/js/ with node's built-in runner, so the JavaScript tests run with pytest."""
    node = _node_or_skip()
    proc = subprocess.run([node, "--test", str(REPO / "tests" / "js")], capture_output=True, text=True, timeout=120)
    assert proc.returncode == 0, proc.stdout[-3000:] + proc.stderr[-2000:]
    assert "# fail 0" in proc.stdout


def test_js_colours_match_the_figures(tmp_path):
    """The tree view fills a leaf with the colour figures.effect_color gives its marker."""
    node = _node_or_skip()
    values = [-3.0, -1.7, -0.4, 0.0, 0.3, 1.1, 2.0, 2.5, float("nan")]
    script = tmp_path / "colours.mjs"
    script.write_text(
        f"import {{ divergingColour }} from {json.dumps((REPO / 'js' / 'tree_view.js').as_uri())};\n"
        f"const pal = {json.dumps({'stops': list(DIVERGING), 'missing': MUTED})};\n"
        f"console.log(JSON.stringify({json.dumps(values[:-1])}.map((v) => divergingColour(v, 2.5, pal))"
        f".concat([divergingColour(NaN, 2.5, pal)])));\n")
    out = json.loads(subprocess.run([node, str(script)], capture_output=True, text=True, check=True).stdout)
    expected = effect_color(np.array(values), 2.5)
    for got, want in zip(out, expected):
        g = np.array([int(got[i:i + 2], 16) for i in (1, 3, 5)])
        w = np.array([int(want[i:i + 2], 16) for i in (1, 3, 5)])
        # Python rounds halves to even, JavaScript up: one unit of difference is allowed.
        assert np.abs(g - w).max() <= 1, (got, want)


# -- panels ------------------------------------------------------------------------------------------
def test_show_figure_replaces_content_and_state():
    widget = go.FigureWidget()
    first = go.Figure(go.Bar(x=[1, 2], y=[3, 4]), layout=dict(title=dict(text="first"), shapes=[dict(type="line", x0=0, x1=1, y0=0, y1=1)]))
    P.show_figure(widget, first)
    second = go.Figure([go.Scatter(x=[1], y=[2]), go.Scatter(x=[3], y=[4])], layout=dict(height=333))
    P.show_figure(widget, second)
    got = widget.to_dict()
    assert [t["type"] for t in got["data"]] == ["scatter", "scatter"]
    assert [{k: v for k, v in t.items() if k != "uid"} for t in got["data"]] == second.to_dict()["data"]
    assert got["layout"]["height"] == 333
    assert not got["layout"].get("shapes") and not got["layout"].get("title", {}).get("text")
    # The saved widget state (what a static export renders) describes the new figure.
    assert [t["type"] for t in widget._widget_data] == ["scatter", "scatter"]
    assert widget._widget_layout["height"] == 333 and "shapes" not in widget._widget_layout


def test_show_figure_sends_no_numpy_arrays():
    """Object arrays (text customdata) become lists, so no edit message carries a binary buffer."""
    widget = go.FigureWidget()
    custom = np.array([["a", 1], ["b", 2]], dtype=object)
    P.show_figure(widget, go.Figure(go.Scatter(x=[1, 2], y=[3, 4], customdata=custom)))

    def arrays(obj):
        if isinstance(obj, dict):
            return sum((arrays(v) for v in obj.values()), [])
        if isinstance(obj, (list, tuple)):
            return sum((arrays(v) for v in obj), [])
        return [obj] if isinstance(obj, (np.ndarray, np.generic)) else []
    assert arrays(widget._data) == [] and arrays(widget._widget_data) == []
    assert list(map(list, widget.data[0].customdata)) == [["a", 1], ["b", 2]]


def test_table_html_escapes_and_marks_the_selected_row():
    tab = pd.DataFrame({"subgroup": [1, 2], "rule": ["x < 1 & <b>bold</b>", "x >= 1"], "n_units": [5, 6],
                        "share": [0.4, 0.6], "mean": [1.0, 2.0], "sd": [0.1, 0.1], "lower": [0.8, 1.8],
                        "upper": [1.2, 2.2], "prob_positive": [1.0, 1.0]})
    tab.attrs.update(level=0.95, interval="equal-tailed", label="effect", summary="tree")
    out = P.table_html(tab, selected_rows=[1], css_scope="scope-x")
    assert "<b>bold</b>" not in out and "&lt;b&gt;bold&lt;/b&gt;" in out
    assert ".scope-x tbody tr:nth-child(2)" in out and "nth-child(1)" not in out
    assert "nth-child" not in P.table_html(tab, selected_rows=(), css_scope="scope-x")
    both = P.table_html(tab, selected_rows=[0, 1], css_scope="scope-x")
    assert "tr:nth-child(1)" in both and "tr:nth-child(2)" in both


def test_estimate_text_matches_the_tree_view(tmp_path):
    """The status line prints numbers as the ES module does (formatEstimate), checked by running it."""
    node = _node_or_skip()
    cases = [(-10.0, -14.0, -6.0), (-4.0, -8.0, 0.5), (1500.4, 1200.0, 1800.6), (9.996, 9.0, 9.5),
             (0.01234, -0.0001, 0.02), (0.0, 0.0, 0.0), (float("nan"), 1.0, 2.0)]
    script = tmp_path / "numbers.mjs"
    script.write_text(
        f"import {{ formatEstimate }} from {json.dumps((REPO / 'js' / 'tree_view.js').as_uri())};\n"
        f"const cases = {json.dumps([[None if np.isnan(v) else v for v in c] for c in cases])};\n"
        "console.log(JSON.stringify(cases.map((c) => formatEstimate(...c))));\n")
    out = json.loads(subprocess.run([node, str(script)], capture_output=True, text=True, check=True).stdout)
    assert out == [P.estimate_text(*c) for c in cases]
    assert P.estimate_text(-10.0, -14.0, -6.0) == "\u221210.0 [\u221214.0, \u22126.0]"


def test_status_html_escapes_and_checks_kind():
    assert "&lt;script&gt;" in P.status_html("<script>", tone="error")
    with pytest.raises(ValueError, match=r"`tone` must be one of \['busy', 'error', 'info'\]; got 'loud'"):
        P.status_html("x", tone="loud")


# -- the Explorer ------------------------------------------------------------------------------------
def test_explorer_rejects_bad_arguments(draws):
    with pytest.raises(SummaryError, match=r"`draws` must be an EffectDraws .* got ndarray"):
        Explorer(np.zeros((3, 4)))
    with pytest.raises(SummaryError, match=r"`depth` must be between 1 and 2; got 3"):
        Explorer(draws, max_depth=2, depth=3, trends=False, linear=False)
    with pytest.raises(SummaryError, match=r"`level` must be a number strictly between 0 and 1"):
        Explorer(draws, level=95, trends=False, linear=False)
    with pytest.raises(SummaryError, match=r"`columns` names covariates that are not in the covariate table: 'zip'"):
        Explorer(draws, columns=["zip"], trends=False, linear=False)
    with pytest.raises(SummaryError, match=r"`additive_options` must be a dict"):
        Explorer(draws, additive_options=[1], trends=False, linear=False)


def test_explorer_shows_the_tree_at_the_chosen_depth(explorer, draws):
    reference = summarize_tree(draws, max_depth=3).at_depth(2)
    assert explorer.tree_view.leaf_ids == [int(i) for i in reference.leaf_ids]
    assert explorer.tree_view.nodes == node_records(reference.nodes())
    tab = reference.table()
    z = np.abs(tab["mean"].to_numpy()) / tab["sd"].to_numpy()
    assert explorer.tree_view.selected == int(tab["subgroup"].iloc[np.argmax(z)])
    # the warm end marks the better direction, as in the figures: reversed stops when lower is better
    assert explorer.tree_view.palette["stops"] == (list(DIVERGING)[::-1] if draws.better == "lower" else list(DIVERGING))
    assert explorer.tree_view.colour_limit == pytest.approx(np.abs(tab["mean"]).max())
    # The first view draws the tab in sight only; the others follow on the kernel's main loop, when
    # opened, or in wait() (so a saved notebook shows them); Decisions says that it is computed when
    # its tab is opened.
    assert [name for name, p in explorer._panels.items() if p.key is not None] == ["effects"]
    assert explorer.wait(timeout=60)
    assert all(p.key is not None for name, p in explorer._panels.items() if name != "decisions")
    assert explorer._panels["decisions"].key is None and "when this tab is opened" in explorer.decisions_panel.status.value
    titles = [explorer._tabs.get_title(i) for i in range(len(explorer._tabs.children))]
    assert titles == ["Subgroup effects", "Fit by depth", "Trends", "Linear fit", "Table", "Contrasts", "Evidence", "Decisions"]


def _values(array_like):
    """A trace's numbers: plotly 7 keeps numpy input in its typed-array form {"dtype", "bdata"}."""
    if isinstance(array_like, dict) and "bdata" in array_like:
        return np.frombuffer(base64.b64decode(array_like["bdata"]), dtype=array_like["dtype"])
    return np.asarray(array_like)


def _highlighted_rule(fig_widget):
    traces = [t for t in fig_widget.data if t.name == "highlight"]
    if not traces or traces[0].customdata is None or len(traces[0].customdata) == 0:
        return None
    return html.unescape(str(traces[0].customdata[0][0]).replace("<br>", " "))


from summarize_widgets.core.rules import rule_text  # noqa: E402


def test_depth_level_and_selection_update_every_panel(explorer, draws, study):
    effects = explorer._panels["effects"].figure
    leaves3 = summarize_tree(draws, max_depth=3).at_depth(3)
    explorer.apply(depth=3)
    assert len(explorer.tree_view.leaf_ids) == len(leaves3.leaf_ids)
    assert explorer.depth_control.value == 3
    # The selected node is still shown (it may now be split further).
    assert explorer.tree_view.selected in [r["node"] for r in explorer.tree_view.nodes]

    leaf = int(leaves3.leaf_ids[0])
    explorer.apply(selected=leaf, level=0.9)
    rule = leaves3.table().set_index("subgroup").loc[leaf, "rule"]
    assert _highlighted_rule(effects) == rule_text(rule)  # the figures print the tables' rule text
    # The status line prints the same rule syntax as the figures and tables ("and", never "&").
    assert " & " in rule and explorer.status.value.count(html.escape(rule_text(rule))) == 1

    # Intervals at the new level equal numpy quantiles (type 7) of per-draw means from a pandas groupby.
    ref = _leaf_draws_by_groupby(study.itt_outcome_draws, study.covariates, leaves3)
    lo, hi = np.quantile(ref.to_numpy(), [0.05, 0.95], axis=1)
    shown = {r["node"]: r for r in explorer.tree_view.nodes if r["is_leaf"]}
    for node, a, b in zip(ref.index, lo, hi):
        assert shown[int(node)]["lower"] == pytest.approx(a, rel=1e-9)
        assert shown[int(node)]["upper"] == pytest.approx(b, rel=1e-9)

    # Hidden panels are redrawn when their tab is opened.
    table_panel = explorer._panels["table"]
    assert table_panel.key != explorer._panel_key("table")
    explorer._tabs.selected_index = list(explorer._panels).index("table")
    assert table_panel.key == explorer._panel_key("table")
    assert "90% interval" in explorer._table_html.value and "nth-child" in explorer._table_html.value
    explorer._tabs.selected_index = list(explorer._panels).index("contrasts")
    contrasts = explorer._panels["contrasts"].figure
    assert html.escape(rule_text(rule), quote=False)[:30] in contrasts.layout.title.text.replace("<br>", " ")
    assert len(_values(contrasts.data[-1].y)) == len(leaves3.leaf_ids) - 1

    # Back to depth 2: the selection moves to the ancestor that is a subgroup there...
    explorer._tabs.selected_index = 0
    explorer.apply(depth=2)
    parent = {r["node"]: r["parent"] for r in node_records(leaves3.nodes())}
    assert explorer.tree_view.selected == parent[leaf]
    assert _highlighted_rule(effects) == rule_text(leaves3.at_depth(2).table().set_index("subgroup").loc[parent[leaf], "rule"])
    # ...and comes back to the picked subgroup when the tree is deep enough again.
    explorer.apply(depth=1)
    explorer.apply(depth=3)
    assert explorer.tree_view.selected == leaf
    assert _highlighted_rule(effects) == rule_text(rule)


def _highlighted_rules(fig_widget):
    traces = [t for t in fig_widget.data if t.name == "highlight"]
    if not traces or traces[0].customdata is None:
        return []
    return sorted(html.unescape(str(row[0]).replace("<br>", " ")) for row in traces[0].customdata)


def test_selecting_an_inner_node_highlights_its_subgroups_everywhere(explorer, draws):
    tree = summarize_tree(draws, max_depth=3).at_depth(2)
    nodes = tree.nodes()
    inner = int(nodes.loc[(nodes["depth"] == 1) & ~nodes["is_leaf"], "node"].iloc[0])
    inside = nodes.loc[(nodes["parent"] == inner) & nodes["is_leaf"]]
    assert len(inside) >= 2
    explorer.apply(selected=inner)
    assert "split further at this depth" in explorer.status.value
    assert _highlighted_rules(explorer._panels["effects"].figure) == sorted(rule_text(r) for r in inside["rule"])
    explorer._tabs.selected_index = list(explorer._panels).index("table")
    rows = tree.table()["subgroup"].tolist()
    for node in inside["node"]:
        assert f"tr:nth-child({rows.index(int(node)) + 1})" in explorer._table_html.value
    assert explorer._table_html.value.count("nth-child") == len(inside)
    explorer._tabs.selected_index = list(explorer._panels).index("contrasts")
    text = explorer._panels["contrasts"].figure.layout.annotations[0].text
    assert text.startswith(f"The selected box holds {len(inside)} subgroups")
    # The root holds every subgroup.
    explorer._tabs.selected_index = 0
    explorer.apply(selected=0)
    assert len(_highlighted_rules(explorer._panels["effects"].figure)) == len(tree.leaf_ids)


def test_clicks_from_the_front_end_go_through_the_same_path(explorer):
    leaf = explorer.tree_view.leaf_ids[-1]
    explorer.tree_view.selected = leaf  # what the ES module does on a click
    assert explorer.settings["selected"] == leaf
    assert _highlighted_rule(explorer._panels["effects"].figure) is not None


def test_figures_follow_the_width_the_browser_reports(explorer):
    explorer.tree_view.client_width = 1000  # what the ES module's ResizeObserver does
    figures = [p.figure for p in explorer._panels.values() if p.figure is not None]
    assert len(figures) == 5
    assert all(f.layout.width == 960 and f._widget_layout["width"] == 960 for f in figures)
    explorer.apply(depth=3)  # redrawn panels keep the width
    assert explorer._panels["effects"].figure.layout.width == 960
    explorer.tree_view.client_width = 200
    assert all(f.layout.width == explorer_module.MIN_FIGURE_WIDTH for f in figures)


def test_apply_rejects_impossible_values(explorer):
    with pytest.raises(SummaryError, match=r"`depth` must be between 1 and 3; got 0"):
        explorer.apply(depth=0)
    with pytest.raises(SummaryError, match=r"`selected` must be a node of the tree at depth 2 .* got 9999"):
        explorer.apply(selected=9999)
    with pytest.raises(SummaryError, match=r"`interval` must be one of 'equal-tailed', 'highest-density'"):
        explorer.apply(interval="central")
    with pytest.raises(SummaryError, match=r"`level` must be a number strictly between 0 and 1"):
        explorer.apply(level=1.0)
    assert explorer.settings["depth"] == 2


def test_odd_level_is_added_to_the_level_control(explorer):
    explorer.apply(level=0.85)
    assert explorer.level_control.value == 0.85
    assert "85%" in explorer.tree_view.caption


def test_densities_and_trend_covariate_controls(explorer):
    effects = explorer._panels["effects"].figure
    n_before = len(effects.data)
    explorer.densities_control.value = True
    assert len(effects.data) == n_before + 1 and effects.data[0].name == "posterior density"
    explorer._tabs.selected_index = list(explorer._panels).index("trends")
    explorer.covariate_control.value = "baseline_bill"
    assert explorer._panels["trends"].figure.layout.xaxis.title.text == "baseline_bill"


def test_impossible_min_size_shows_a_message_and_keeps_the_view(explorer, draws):
    before = list(explorer.tree_view.nodes)
    explorer.min_size_control.value = draws.n_units + 1  # what typing into the box does
    assert "swx-status-error" in explorer.status.value
    # In the words of the control, not of the Python argument.
    assert (f"\u201cSmallest subgroup (units)\u201d must be between 1 and {draws.n_units}; got {draws.n_units + 1}"
            in explorer.status.value)
    assert "min_size" not in explorer.status.value
    assert explorer.tree_view.nodes == before
    assert explorer.min_size_control.value == explorer.tree.min_size
    explorer.columns_control.value = ()
    assert "Choose at least one covariate" in explorer.status.value
    assert explorer.tree_view.nodes == before


def test_unexpected_errors_become_messages(explorer, monkeypatch):
    def boom(*args, **kwargs):
        raise RuntimeError("disk on fire")
    monkeypatch.setattr(explorer, "apply", boom)
    explorer.depth_control.value = 3
    assert "Unexpected error (RuntimeError): disk on fire" in explorer.status.value


def test_min_size_and_covariates_recompute_on_a_worker_thread(draws, monkeypatch):
    monkeypatch.setattr(explorer_module, "PROGRESS_AFTER_S", 0.0)
    ex = Explorer(draws, max_depth=3, depth=2, trends=False, additive_options={"lam": 1.0})
    seen = []
    ex.progress.observe(lambda ch: seen.append(ch["new"]), names="value")
    ex.min_size_control.value = 150
    assert ex.wait(timeout=60)
    assert ex.tree.min_size == 150
    reference = summarize_tree(draws, max_depth=3, min_size=150).at_depth(2)
    assert ex.tree_view.leaf_ids == [int(i) for i in reference.leaf_ids]
    assert seen and max(seen) > 0 and ex.progress.layout.display == "none"
    ex.columns_control.value = ("tenure", "baseline_bill")
    assert ex.wait(timeout=60)
    assert ex.tree.columns == ["tenure", "baseline_bill"]
    assert set(ex.linear.table()["term"]) <= {"(intercept)"} | {t for t in ex.linear.table()["term"] if
                                                                  t.startswith(("tenure", "baseline_bill"))}
    assert "swx-status-error" not in ex.status.value


def test_the_widget_stays_usable_while_a_recompute_runs(draws, monkeypatch):
    import threading

    from summarize_widgets.widgets import results as _results

    ex = Explorer(draws, max_depth=3, depth=2, trends=False, linear=False)
    gate, started = threading.Event(), threading.Event()
    real = _results.Results.compute.__func__

    def slow(cls, *args, **kwargs):
        started.set()
        assert gate.wait(30)
        return real(cls, *args, **kwargs)
    monkeypatch.setattr(_results.Results, "compute", classmethod(slow))
    ex.min_size_control.value = 90
    assert started.wait(30)
    assert "swx-status-busy" in ex.status.value
    ex.apply(depth=3)  # served from the previous results while the worker waits
    assert len(ex.tree_view.leaf_ids) == len(summarize_tree(draws, max_depth=3).at_depth(3).leaf_ids)
    ex.min_size_control.value = 120  # overtakes the first request: only its result is shown
    gate.set()
    assert ex.wait(timeout=60)
    assert ex.tree.min_size == 120 and ex.min_size_control.value == 120
    assert ex.settings["depth"] == 3
    assert ex.tree_view.leaf_ids == [int(i) for i in summarize_tree(draws, max_depth=3, min_size=120).at_depth(3).leaf_ids]


def test_recompute_api_raises_and_keeps_the_view(explorer, draws):
    before = list(explorer.tree_view.nodes)
    with pytest.raises(SummaryError, match=r"`min_size` must be between 1 and 400; got 401"):
        explorer.recompute(min_size=draws.n_units + 1)
    assert explorer.tree_view.nodes == before
    assert "swx-status-error" not in explorer.status.value
    explorer.recompute(min_size=60)
    assert explorer.tree.min_size == 60 and explorer.min_size_control.value == 60


def test_complier_weighted_draws_flag_weak_uptake_in_every_panel(study):
    ex = Explorer(study.complier_draws(), max_depth=3, depth=3, trends=False, linear=False, background=False)
    table = ex.tree.table()
    weak = set(table.loc[table["weak_uptake"], "subgroup"].astype(int))
    assert weak and len(weak) < len(table), "the study has weak-uptake subgroups at depth 3"
    # Tree boxes: flagged; the colour range comes from the other subgroups.
    assert {r["node"] for r in ex.tree_view.nodes if r["weak"]} == weak
    steady = table.loc[~table["weak_uptake"], "mean"].abs().max()
    assert ex.tree_view.colour_limit == pytest.approx(steady)
    assert ex.tree_view.colour_limit < table["mean"].abs().max()
    # Shares: the boxes name shares of compliers and carry the share of units beside them.
    assert ex.tree_view.share_basis == "compliers"
    root = next(r for r in ex.tree_view.nodes if r["parent"] == -1)
    for r in ex.tree_view.nodes:
        assert r["unit_share"] == pytest.approx(r["n_units"] / root["n_units"])
    # Contrasts: a weak subgroup is marked when compared with the selection.
    steady_id = next(int(s) for s in table["subgroup"] if int(s) not in weak)
    ex.apply(selected=steady_id)
    ex._tabs.selected_index = list(ex._panels).index("contrasts")
    ticks = ex._panels["contrasts"].figure.layout.yaxis.ticktext
    assert sum("weak uptake" in t for t in ticks) == len(weak)
    # The effects figure's axis is set by the stable subgroups.
    ex._tabs.selected_index = 0
    lo, hi = ex._panels["effects"].figure.layout.xaxis.range
    stable = table.loc[~table["weak_uptake"]]
    assert lo <= stable["lower"].min() and hi >= stable["upper"].max()
    assert lo > table["lower"].min()


def test_complier_weighted_draws(study):
    ex = Explorer(study.complier_draws(), max_depth=2, trends=False, background=False)
    assert "complier-weighted" in ex._header.value
    # The first selection is the clearest subgroup, not one whose ratio is unstable.
    table = ex.tree.table()
    assert not table.set_index("subgroup").loc[ex.settings["selected"], "weak_uptake"]
    ex._tabs.selected_index = list(ex._panels).index("table")
    assert "sw-table" in ex._table_html.value


def test_text_from_the_data_is_escaped():
    rng = np.random.default_rng(3)
    n = 300
    cov = pd.DataFrame({"<i>group</i>": pd.Categorical(rng.choice(["<script>alert(1)</script>", "a & b"], n)),
                        "x": rng.normal(size=n)})
    shift = np.where(cov["<i>group</i>"] == "a & b", 2.0, -2.0)
    values = rng.normal(size=(50, n)) * 0.1 + shift + cov["x"].to_numpy()
    ex = Explorer(EffectDraws(values, cov), max_depth=1, min_size=20, trends=False, linear=False, background=False)
    ex._tabs.selected_index = list(ex._panels).index("table")
    assert "<script>" not in ex._table_html.value and "&lt;script&gt;" in ex._table_html.value
    assert "<script>" not in ex.status.value
    # The tree view receives the raw text; the ES module only ever sets it as textContent.
    assert any("<script>" in r["rule"] for r in ex.tree_view.nodes)
    assert "innerHTML" not in asset_path("tree_view.js").read_text()


def test_the_selection_survives_a_recompute_when_its_subgroup_does(draws):
    ex = Explorer(draws, max_depth=3, depth=2, trends=False, linear=False, background=False)
    nodes = ex._res.nodes(3, 0.95, "equal-tailed")
    first_split = nodes.loc[nodes["depth"] == 1]
    pick = int(first_split["node"].iloc[1])
    rule = first_split["rule"].iloc[1]
    ex.apply(selected=pick)
    ex.recompute(min_size=ex.tree.min_size + 1)  # the first split does not move for one unit more
    now = ex._res.nodes(3, 0.95, "equal-tailed")
    assert now.set_index("node").loc[ex.settings["selected"], "rule"] == rule
    # A subgroup that no longer exists: the view falls back to the clearest subgroup.
    ex.apply(selected=int(ex.tree.table()["subgroup"].iloc[0]))
    ex.recompute(columns=["baseline_bill"])
    assert ex.settings["selected"] == ex._res.standout(2)


def test_covariate_chooser_ticks_all_none_and_applies(draws):
    ex = Explorer(draws, max_depth=2, depth=1, trends=False, linear=False, background=False)
    chooser = ex.columns_control
    names = list(draws.covariates.columns)
    assert chooser.options == names and chooser.value == tuple(names)
    assert all(box.value for box in chooser.boxes.values())
    assert chooser.apply_button.disabled  # nothing to apply yet
    chooser.none_button.click()
    assert chooser.ticked == () and chooser.apply_button.disabled  # no covariate: cannot apply
    assert ex.tree.columns == names  # ticking alone does not recompute
    chooser.boxes["tenure"].value = True
    chooser.boxes["baseline_bill"].value = True
    assert not chooser.apply_button.disabled and "not applied yet" in chooser.count.value
    chooser.apply_button.click()
    assert ex.tree.columns == ["tenure", "baseline_bill"] or set(ex.tree.columns) == {"tenure", "baseline_bill"}
    assert "2 of 9 in use" in chooser.count.value
    chooser.all_button.click()
    assert chooser.ticked == tuple(names) and chooser.value != tuple(names)


def test_messages_name_the_controls_and_the_interval_choice_is_marked():
    from summarize_widgets.widgets.controls import explorer_style, in_control_words

    assert in_control_words("`min_size` must be between 1 and 400; got 401.") == \
        "\u201cSmallest subgroup (units)\u201d must be between 1 and 400; got 401."
    assert in_control_words("`columns` names covariates that are not there") .startswith("\u201cCovariates used\u201d")
    assert in_control_words("`other` stays") == "`other` stays"
    css = explorer_style()
    assert ".swx-interval .widget-toggle-button.mod-active" in css and "#1d4e79" in css


def test_one_default_depth_for_the_command_line_and_the_explorer(draws):
    from summarize_widgets.cli import build_parser
    from summarize_widgets.summaries.bundle import DEFAULT_DEPTH

    assert DEFAULT_DEPTH == 3
    ex = Explorer(draws, max_depth=4, trends=False, linear=False, background=False)
    assert ex.settings["depth"] == DEFAULT_DEPTH == ex.depth_control.value
    args = build_parser().parse_args(["summarize", "x.npy", "--covariates", "c.csv"])
    assert args.depth == DEFAULT_DEPTH


def test_plotly_widget_internals_we_use_are_present():
    # widgets/panels.py keeps a FigureWidget's saved state in step through plotly internals
    # (_layout_obj._props, _data, _widget_layout, _widget_data); fail loudly if plotly moves them.
    import plotly.graph_objects as go

    w = go.FigureWidget(go.Figure(go.Scatter(x=[1, 2], y=[3, 4])))
    assert isinstance(w._layout_obj._props, dict)
    assert isinstance(w._data, list) and w._data[0]["x"] == [1, 2] or list(w._data[0]["x"]) == [1, 2]
    assert hasattr(w, "_widget_layout") and hasattr(w, "_widget_data")


# -- start-up: the tree first, the linear and additive summaries on a worker thread ------------------
def test_first_view_needs_the_tree_only_and_the_extras_fill_in(draws, monkeypatch):
    import threading

    from summarize_widgets.summaries import bundle as _bundle
    from summarize_widgets.widgets import results as _results

    gate, started = threading.Event(), threading.Event()
    real = _bundle.summarize_extras

    def held(*args, **kwargs):
        started.set()
        assert gate.wait(30)
        return real(*args, **kwargs)
    monkeypatch.setattr(_results, "summarize_extras", held)
    ex = Explorer(draws, max_depth=3, depth=2, additive_options={"lam": 1.0}, fill_in_background=True)
    assert started.wait(30)
    # The first view is there while the extras wait: tree, table, and the tabs say what is coming.
    assert ex.tree_view.leaf_ids == [int(i) for i in summarize_tree(draws, max_depth=3).at_depth(2).leaf_ids]
    assert ex.pending == {"linear", "additive"} and ex.linear is None and ex.additive is None
    titles = list(ex._tabs.titles)
    assert "Trends (computing\u2026)" in titles and "Linear fit (computing\u2026)" in titles
    ex.apply(depth=3)  # view changes work meanwhile
    assert ex.settings["depth"] == 3
    ex._tabs.selected_index = titles.index("Linear fit (computing\u2026)")
    box = ex._waiting["linear"][0]
    assert box.layout.display is None and "in the background" in ex._waiting["linear"][1].value
    gate.set()
    assert ex.wait(timeout=60)
    assert ex.pending == set() and "computing" not in " ".join(ex._tabs.titles)
    assert box.layout.display == "none"
    # The same numbers as the one-call orchestrator (summarize_all fuses the same plans).
    ref = _bundle.summarize_all(draws, depth=3, max_depth=3, additive_options={"lam": 1.0})
    np.testing.assert_allclose(ex.linear.table()["mean"], ref.linear.table()["mean"], rtol=1e-10)
    np.testing.assert_allclose(ex.additive.curves()["mean"], ref.additive.curves()["mean"], rtol=1e-10)
    assert list(ex.covariate_control.options) == list(ref.additive.columns)
    # One covariate chosen, as when everything is computed before the first view (not none: a blank control).
    assert ex.covariate_control.value == ref.additive.columns[0] == ex._state["covariate"]
    shown = {a.text for a in ex._panels["trends"].figure.layout.annotations}
    assert not any(str(c) in shown for c in ref.additive.columns[1:])
    lin = ex._panels["linear"].figure
    assert any(len(t.y or ()) > 1 or len(t.x or ()) > 1 for t in lin.data)  # the coefficients are drawn


def test_a_failure_on_the_extras_thread_is_shown_in_their_tabs(draws, monkeypatch):
    from summarize_widgets.widgets import results as _results

    def broken(*args, **kwargs):
        raise RuntimeError("disk on fire")
    monkeypatch.setattr(_results, "summarize_extras", broken)
    ex = Explorer(draws, max_depth=3, depth=2, additive_options={"lam": 1.0}, fill_in_background=True)
    assert ex.wait(timeout=60)
    assert ex.pending == set()
    for name, tab in (("linear", "Linear fit"), ("additive", "Trends")):
        assert "Unexpected error (RuntimeError): disk on fire" in ex._res.errors[name]
        ex._tabs.selected_index = list(ex._tabs.titles).index(tab)
        box, text, _ = ex._waiting[name]
        assert box.layout.display is None and "swx-status-error" in text.value and "disk on fire" in text.value
    fig = ex._panels["linear"].figure
    assert "disk on fire" in json.dumps(fig.to_dict()["layout"].get("annotations", []))


# -- the explorer's structure reads, and who draws what when ----------------------------------------
def test_results_structure_reads_match_the_node_tables(study):
    from summarize_widgets.widgets.results import Results

    d = study.complier_draws()  # weak-uptake subgroups: the colour limit leaves them out
    res = Results.compute(d, max_depth=3, min_size=None, columns=None, trends=False, linear=False)
    full = res.tree.nodes()
    for node, rule in zip(full["node"], full["rule"]):
        assert res.rule_of(int(node)) == rule
        assert res.node_with_rule(rule) == int(full.loc[full["rule"] == rule, "node"].iloc[0])
    assert res.rule_of(-1) is None and res.rule_of(10_000) is None
    assert res.node_with_rule(None) is None and res.node_with_rule("no such rule") is None
    for depth in (1, 2, 3):
        leaves = res.leaf_ids(depth)
        assert leaves == [int(i) for i in res.tree.at_depth(depth).leaf_ids]
        # Inside, from the units: a subgroup lies in a node when all its units are the node's at its depth.
        at_leaf = res.at(depth).assign(d.covariates).to_numpy()
        for node, node_depth in zip(full["node"], full["depth"]):
            if node_depth > depth:
                continue
            if node_depth == 0:
                want = leaves  # the root holds every subgroup
            else:
                at_node = res.at(int(node_depth)).assign(d.covariates).to_numpy()
                want = [leaf for leaf in leaves if np.all(at_node[at_leaf == leaf] == node)]
            assert res.inside(int(node), depth) == want, (node, depth)
            assert res.follow(int(node), depth) == int(node)
        assert res.inside(-1, depth) == []
        for leaf in res.leaf_ids(3):  # a deeper node shows as its ancestor at this depth
            assert leaf in res.inside(res.follow(leaf, depth), 3)
        table = res.table(depth, 0.9, "equal-tailed")
        weak = {int(s) for s in table.loc[table["weak_uptake"].astype(bool), "subgroup"]}
        assert res.weak_ids(depth, 0.9, "equal-tailed") == weak
        steady = table[~table["subgroup"].isin(list(weak))]
        assert res.colour_limit(depth, 0.9, "equal-tailed") == pytest.approx(
            np.abs((steady if len(steady) else table)["mean"]).max())
        assert res.records(depth, 0.9, "equal-tailed") == node_records(res.nodes(depth, 0.9, "equal-tailed"), weak=weak)
    assert any(res.weak_ids(depth, 0.9, "equal-tailed") for depth in (1, 2, 3))


class _Loop:
    """Stands in for the kernel's main loop: callbacks wait until the test runs them (on its thread)."""

    def __init__(self):
        self.callbacks = []

    def add_callback(self, fn):
        self.callbacks.append(fn)

    def run_one(self):
        self.callbacks.pop(0)()

    def run_all(self):
        while self.callbacks:
            self.run_one()


def test_tabs_out_of_sight_are_drawn_on_the_main_loop_one_per_turn(draws, monkeypatch):
    loop = _Loop()
    monkeypatch.setattr(explorer_module, "_main_loop", lambda: loop)
    ex = Explorer(draws, max_depth=3, depth=2, background=False, additive_options={"lam": 1.0})

    def drawn():
        return [name for name, p in ex._panels.items() if p.key is not None]
    assert drawn() == ["effects"]  # the first view: the tab in sight
    loop.run_one()
    assert drawn() == ["effects", "fit"]
    loop.run_all()
    assert set(drawn()) == set(ex._panels) - {"decisions"}  # Decisions: when opened
    assert ex._panels["trends"].figure.data and ex._panels["linear"].figure.data


def test_figure_widgets_change_only_on_the_main_thread(draws, monkeypatch):
    import threading

    loop = _Loop()
    monkeypatch.setattr(explorer_module, "_main_loop", lambda: loop)
    threads = []
    for name in ("show_figure", "set_width"):
        real = getattr(P, name)
        monkeypatch.setattr(P, name, lambda *a, real=real, **k: (threads.append(threading.current_thread()),
                                                                  real(*a, **k))[1])
    ex = Explorer(draws, max_depth=3, depth=2, additive_options={"lam": 1.0})  # extras on a worker
    ex.tree_view.client_width = 900
    ex.min_size_control.value = 150  # a recompute on a worker
    for worker in (ex._worker, ex._extras_worker):
        if worker is not None:
            worker.join(60)
    # Computed, handed over, not shown: the loop has not run yet.
    assert ex.tree.min_size != 150 and not ex._panels["linear"].figure.data
    loop.run_all()
    assert ex.tree.min_size == 150
    if ex._extras_worker is not None:  # the new results' extras
        ex._extras_worker.join(60)
    loop.run_all()
    assert ex.pending == set() and ex.linear is not None and ex._panels["linear"].figure.data
    assert ex.tree_view.leaf_ids == [int(i) for i in summarize_tree(draws, max_depth=3, min_size=150).at_depth(2).leaf_ids]
    assert threads and all(t is threading.main_thread() for t in threads)
    assert ex.wait(timeout=60)


def test_wait_sends_what_the_main_loop_drew_between_cells_again(draws, monkeypatch):
    loop = _Loop()
    monkeypatch.setattr(explorer_module, "_main_loop", lambda: loop)
    ex = Explorer(draws, max_depth=2, depth=1, trends=False, background=False)
    loop.run_all()  # between cells: a headless run's saved state misses these messages
    sent = {}
    watched = {name: p.figure for name, p in ex._panels.items() if p.figure is not None}
    watched["tree view"] = ex.tree_view
    for name, w in watched.items():
        monkeypatch.setattr(w, "send_state", lambda key=None, name=name: sent.setdefault(name, []).append(key))
    assert ex.wait(timeout=10)
    assert set(sent) == set(watched)
    for name, keys in sent.items():
        keys = set(keys[0])
        assert "_esm" not in keys and not any(k.startswith(("_py2js", "_js2py")) for k in keys), name
        assert ({"_widget_data", "_widget_layout"} if name != "tree view" else {"nodes", "selected"}) <= keys, name


def test_wait_rejects_a_bad_timeout(explorer):
    for bad in ("soon", -1, float("nan")):
        with pytest.raises(SummaryError, match=r"`timeout` must be a number of seconds"):
            explorer.wait(bad)
    assert explorer.wait(0)

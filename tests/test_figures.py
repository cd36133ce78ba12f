"""Figures: palette, escaping, figure builders against their input tables, real results, static export."""
import itertools
import json
import os
import re
import struct
import subprocess
import xml.etree.ElementTree as ET
from pathlib import Path

import numpy as np
import pandas as pd
import plotly.colors as pc
import plotly.graph_objects as go
import pytest

import summarize_widgets as sw
import summarize_widgets.figures.static as SE
import summarize_widgets.figures.plots as F
from summarize_widgets.core.files import _umask, write_atomic
from summarize_widgets import SummaryError
from summarize_widgets.summaries.groups import summarize_groups
from summarize_widgets.summaries.tree import summarize_tree

INJECT = "<script>alert(1)</script>"
REPO = Path(__file__).resolve().parents[1]


# -- helpers ---------------------------------------------------------------------------------
def _strings(obj):
    """Every string inside a figure dict (labels, hover data, titles, annotations)."""
    if isinstance(obj, str):
        yield obj
    elif isinstance(obj, dict):
        for v in obj.values():
            yield from _strings(v)
    elif isinstance(obj, (list, tuple)):
        for v in obj:
            yield from _strings(v)
    elif isinstance(obj, np.ndarray) and obj.dtype == object:
        for v in obj.ravel():
            yield from _strings(v)


def _assert_no_markup_injected(fig, raw=INJECT):
    texts = list(_strings(fig.to_plotly_json()))
    assert not any(raw in t for t in texts)
    assert any(raw.replace("&", "&amp;").replace("<", "&lt;").replace(">", "&gt;") in t for t in texts)


def _trace(fig, name):
    found = [t for t in fig.data if t.name == name]
    assert len(found) == 1, [t.name for t in fig.data]
    return found[0]


def _subgroup_table(seed=0):
    rng = np.random.default_rng(seed)
    draws = rng.normal(loc=[-4.0, -2.5, 0.5, 1.0], scale=[0.6, 0.8, 0.5, 0.9], size=(800, 4))
    rules = ["income <= 32000 & heating in {gas, oil}", INJECT + " & x < 3", "age > 64", "age <= 64"]
    df = pd.DataFrame({
        "subgroup": [3, 4, 7, 8], "rule": rules, "n_units": [120, 80, 230, 190],
        "share": np.array([120, 80, 230, 190]) / 620, "mean": draws.mean(0), "sd": draws.std(0, ddof=1),
        "lower": np.quantile(draws, 0.025, axis=0), "upper": np.quantile(draws, 0.975, axis=0),
        "prob_positive": (draws > 0).mean(0),
    })
    df.attrs.update(level=0.95, interval="equal-tailed", label="Change in winter bill")
    return df, {s: draws[:, j] for j, s in enumerate(df["subgroup"])}


@pytest.fixture(scope="module")
def draws():
    rng = np.random.default_rng(3)
    n, S = 900, 240
    X = pd.DataFrame({
        "age": rng.uniform(20, 85, n).round(),
        INJECT: rng.uniform(0, 10, n),
        "heating": rng.choice(["gas", "oil", "heat <pump>"], n),
    })
    f = -3.0 * (X["age"].to_numpy() > 60) + 0.4 * X[INJECT].to_numpy() + 1.5 * (X["heating"] == "oil").to_numpy()
    T = f + rng.normal(0, 1.0, (S, n)) + rng.normal(0, 0.3, (S, 1))
    return sw.EffectDraws(T, X, label="Change in winter bill")


@pytest.fixture(scope="module")
def tree(draws):
    return summarize_tree(draws, max_depth=3, min_size=60)


# -- palette ---------------------------------------------------------------------------------
# Machado, Oliveira & Fernandes (2009), severity 1.0 simulation matrices on linear RGB
# (values from memory; each row sums to 1, checked below, so white stays white).
_CVD = {
    "protanopia": np.array([[0.152286, 1.052583, -0.204868], [0.114503, 0.786281, 0.099216],
                            [-0.003882, -0.048116, 1.051998]]),
    "deuteranopia": np.array([[0.367322, 0.860646, -0.227968], [0.280085, 0.672501, 0.047413],
                              [-0.011820, 0.042940, 0.968881]]),
    "tritanopia": np.array([[1.255528, -0.076749, -0.178779], [-0.078411, 0.930809, 0.147602],
                            [0.004733, 0.691367, 0.303900]]),
    "normal": np.eye(3),
}


def _lab(hex_colour, matrix=None):
    matrix = np.eye(3) if matrix is None else matrix
    # sRGB -> linear (IEC 61966-2-1), simulated vision, -> XYZ (D65) -> CIELAB (CIE 1976).
    c = np.array([int(hex_colour[i:i + 2], 16) for i in (1, 3, 5)]) / 255
    lin = np.where(c <= 0.04045, c / 12.92, ((c + 0.055) / 1.055) ** 2.4)
    lin = np.clip(matrix @ lin, 0, 1)
    xyz = np.array([[0.4124, 0.3576, 0.1805], [0.2126, 0.7152, 0.0722], [0.0193, 0.1192, 0.9505]]) @ lin
    t = xyz / np.array([0.95047, 1.0, 1.08883])
    f = np.where(t > (6 / 29) ** 3, np.cbrt(t), t / (3 * (6 / 29) ** 2) + 4 / 29)
    return np.array([116 * f[1] - 16, 500 * (f[0] - f[1]), 200 * (f[1] - f[2])])


def test_palette_constants_are_hex_lists_and_consistent():
    hexes = F.PALETTE + F.DIVERGING + [F.INK, F.ACCENT, F.MUTED, F.GRID, F.BAND]
    assert all(re.fullmatch(r"#[0-9A-Fa-f]{6}", h) for h in hexes)
    assert len(set(F.PALETTE)) == len(F.PALETTE) >= 5
    assert F.EFFECT_PALETTE == {"stops": F.DIVERGING, "missing": F.MUTED}
    assert len(F.DIVERGING) % 2 == 1  # an odd number of stops puts a stop exactly at zero
    assert F.effect_colorscale()[0] == [0.0, F.DIVERGING[0]] and F.effect_colorscale()[-1] == [1.0, F.DIVERGING[-1]]


@pytest.mark.parametrize("vision", list(_CVD))
def test_palette_stays_distinguishable_under_colour_vision_deficiency(vision):
    m = _CVD[vision]
    np.testing.assert_allclose(m.sum(axis=1), 1.0, atol=1e-5)
    labs = [_lab(h, m) for h in F.PALETTE]
    worst = min(np.linalg.norm(a - b) for a, b in itertools.combinations(labs, 2))
    assert worst >= 12.0, f"two palette colours nearly merge under {vision} (Delta E {worst:.1f})"
    # the ends of the effect scale (equal and opposite effects) must not merge either
    neg, pos = (_lab(F.effect_color(v, 1.0), m) for v in (-0.6, 0.6))
    assert np.linalg.norm(neg - pos) >= 15.0
    # the highlight colour is told apart from ink and both effect ends
    acc = _lab(F.ACCENT, m)
    assert min(np.linalg.norm(acc - _lab(h, m)) for h in (F.INK, F.DIVERGING[0], F.DIVERGING[-1])) >= 12.0


def test_effect_scale_lightness_rises_towards_zero_on_both_sides():
    values = np.linspace(-1, 1, 41)
    lightness = np.array([_lab(c)[0] for c in F.effect_color(values, 1.0)])
    assert np.all(np.diff(lightness[:21]) > 0) and np.all(np.diff(lightness[20:]) < 0)


def test_effect_color_matches_plotly_colorscale_sampling():
    # Reference: plotly.colors.sample_colorscale interpolates the same stops in sRGB.
    values = np.linspace(-2.5, 2.5, 37)
    ours = F.effect_color(values, 2.0)
    t = np.clip(values / 2.0, -1, 1) / 2 + 0.5
    ref = pc.sample_colorscale(F.effect_colorscale(), list(t), colortype="rgb")
    for h, r in zip(ours, ref):
        got = np.array([int(h[i:i + 2], 16) for i in (1, 3, 5)])
        want = np.array([float(v) for v in re.findall(r"[\d.]+", r)])
        assert np.abs(got - want).max() <= 1.0


def test_effect_color_edges_and_shapes():
    mid = F.DIVERGING[len(F.DIVERGING) // 2].lower()
    assert F.effect_color(0.0, 3.0).lower() == mid
    assert F.effect_color(-10, 3.0).lower() == F.DIVERGING[0].lower()
    assert F.effect_color(10, 3.0).lower() == F.DIVERGING[-1].lower()
    assert F.effect_color(float("nan"), 3.0) == F.MUTED
    assert F.effect_color(5.0, 0).lower() == mid
    assert isinstance(F.effect_color([1, 2], 2.0), list) and len(F.effect_color(np.zeros((2, 3)), 1.0)) == 6


@pytest.mark.parametrize("vmax, match", [(-1.0, "`vmax` must be a finite number >= 0; got -1.0"),
                                         (float("nan"), "`vmax` must be a finite"), ("2", "`vmax`"), (True, "`vmax`")])
def test_effect_color_rejects_bad_vmax(vmax, match):
    with pytest.raises(SummaryError, match=re.escape(match) if "got" in match else match):
        F.effect_color(1.0, vmax)


def test_effect_color_rejects_non_numeric_value():
    with pytest.raises(SummaryError, match="`value` must be a number"):
        F.effect_color("high", 1.0)


def test_effect_color_agrees_with_the_js_tree_view():
    # The tree view's own divergingColour (js/tree_view.js), run by node, given our palette.
    values = [-3.0, -1.2, -0.37, 0.0, 0.01, 0.5, 1.99, 4.0]
    script = (f"import {{divergingColour}} from {json.dumps((REPO / 'js' / 'tree_view.js').as_uri())};"
              f"console.log(JSON.stringify({json.dumps(values)}.map(v => divergingColour(v, 2, "
              f"{json.dumps(F.EFFECT_PALETTE)}))));")
    out = subprocess.run(["node", "--input-type=module", "-e", script], capture_output=True, text=True,
                         timeout=60, check=True)
    assert [c.lower() for c in json.loads(out.stdout)] == [c.lower() for c in F.effect_color(values, 2.0)]


# -- subgroup effects ------------------------------------------------------------------------
def test_subgroups_ordered_by_mean_with_exact_intervals():
    df, _ = _subgroup_table()
    fig = F.subgroups_figure(df)
    assert isinstance(fig, go.Figure)
    tr = _trace(fig, "subgroups")
    order = df.sort_values("mean")  # bottom (y = 0) to top
    np.testing.assert_allclose(tr.x, order["mean"])
    assert np.all(np.diff(tr.y) > 0)  # largest mean on top
    np.testing.assert_allclose(np.array(tr.x) + tr.error_x.array, order["upper"])
    np.testing.assert_allclose(np.array(tr.x) - tr.error_x.arrayminus, order["lower"])
    np.testing.assert_allclose(tr.customdata[:, 5].astype(float), order["prob_positive"])
    # tick labels follow the same order and carry the readable rules (<= typeset as ≤)
    ticks = fig.layout.yaxis.ticktext
    assert "age &gt; 64" in ticks[list(order["subgroup"]).index(7)]
    assert "income ≤ 32000" in ticks[list(order["subgroup"]).index(3)]
    np.testing.assert_allclose(fig.layout.yaxis.tickvals, tr.y)
    # rows are as tall as their labels: a two-line rule gets a taller row than a one-line one
    lines = [t.count("<br>") + 1 for t in ticks]
    assert fig.layout.yaxis.range[1] == pytest.approx(sum(max(30, 16 * k + 14) for k in lines))
    # marker fill on the shared effect scale, zero line drawn
    vmax = np.abs(df["mean"]).max()
    assert list(tr.marker.color) == F.effect_color(order["mean"].to_numpy(), vmax)
    assert any(s.type == "line" and s.x0 == 0 and s.x1 == 0 for s in fig.layout.shapes)
    assert "95% credible interval" in fig.layout.xaxis.title.text
    assert "Change in winter bill" in fig.layout.xaxis.title.text


def test_subgroups_escape_injected_rule():
    df, _ = _subgroup_table()
    _assert_no_markup_injected(F.subgroups_figure(df, title=INJECT))


def test_subgroups_highlight_in_accent():
    df, _ = _subgroup_table()
    fig = F.subgroups_figure(df, highlight=7)
    hi = _trace(fig, "highlight")
    assert hi.error_x.color == F.ACCENT and hi.marker.line.color == F.ACCENT
    assert list(hi.x) == pytest.approx([df.loc[df.subgroup == 7, "mean"].item()])
    assert len(_trace(fig, "subgroups").x) == 3
    assert any(s.type == "rect" and s.fillcolor.startswith("rgba(204, 92, 138") for s in fig.layout.shapes)
    assert sum(F.ACCENT in t for t in fig.layout.yaxis.ticktext) == 1


def test_subgroups_show_draws_as_kde_violins():
    # Reference: scipy's gaussian_kde; the violin is widest where the KDE peaks, spans the draws.
    from scipy.stats import gaussian_kde

    df, draws = _subgroup_table()
    fig = F.subgroups_figure(df, draws=draws)
    v = _trace(fig, "posterior density")
    assert v.fill == "toself"
    x = np.array([np.nan if a is None else a for a in v.x], dtype=float)
    y = np.array([np.nan if a is None else a for a in v.y], dtype=float)
    pieces = np.split(np.arange(len(x)), np.flatnonzero(np.isnan(x)) + 1)
    pieces = [p[~np.isnan(x[p])] for p in pieces if (~np.isnan(x[p])).any()]
    assert len(pieces) == 4
    order = list(df.sort_values("mean")["subgroup"])
    for k, p in enumerate(pieces):
        d = draws[order[k]]
        assert x[p].min() == pytest.approx(d.min()) and x[p].max() == pytest.approx(d.max())
        centre = fig.layout.yaxis.tickvals[k]
        assert (y[p] - centre).max() == pytest.approx(0.4 * 46)  # 0.4 of the smallest row (two label lines)
        grid = np.linspace(d.min(), d.max(), 400)
        peak = grid[np.argmax(gaussian_kde(d)(grid))]
        assert x[p][np.argmax(y[p] - centre)] == pytest.approx(peak, abs=(d.max() - d.min()) / 90)


def test_subgroups_pinned_row_on_top():
    df, _ = _subgroup_table()
    fig = F.subgroups_figure(df, pinned=[8])
    pin = _trace(fig, "pinned")
    assert list(pin.y) == [max(fig.layout.yaxis.tickvals)] and pin.marker.symbol == "diamond"


@pytest.mark.parametrize("kwargs, match", [
    (dict(highlight=99), r"`highlight` 99 is not one of the subgroups: \[3, 4, 7, 8\]"),
    (dict(pinned=["x"]), r"`pinned` 'x' is not one of the subgroups"),
    (dict(draws={3: np.zeros(3)}), r"`draws` has no posterior draws for subgroup\(s\) \[4, 7, 8\]"),
])
def test_subgroups_errors(kwargs, match):
    df, _ = _subgroup_table()
    with pytest.raises(SummaryError, match=match):
        F.subgroups_figure(df, **kwargs)


def test_builders_name_missing_columns_and_empty_tables():
    df, _ = _subgroup_table()
    with pytest.raises(SummaryError, match=r"`table` lacks the column\(s\) 'lower', 'upper'"):
        F.subgroups_figure(df.drop(columns=["lower", "upper"]))
    with pytest.raises(SummaryError, match="`table` has no rows"):
        F.subgroups_figure(df.iloc[:0])
    with pytest.raises(SummaryError, match="`table` must be a pandas DataFrame; got dict"):
        F.subgroups_figure({"mean": [1]})


def test_plot_subgroups_on_a_real_tree(tree):
    t2 = tree.at_depth(2)
    tab = t2.table(level=0.9)
    leaf = int(tab["subgroup"].iloc[0])
    fig = F.plot_subgroups(t2, level=0.9, highlight=np.int64(leaf), show_draws=True)
    hi = _trace(fig, "highlight")
    assert hi.x[0] == pytest.approx(tab["mean"].iloc[0])
    assert hi.x[0] - hi.error_x.arrayminus[0] == pytest.approx(tab["lower"].iloc[0])
    # the interval is the 90% equal-tailed one of the leaf's draws (numpy quantiles)
    j = list(t2.leaf_ids).index(leaf)
    assert hi.x[0] + hi.error_x.array[0] == pytest.approx(np.quantile(t2.leaf_draws[:, j], 0.95), rel=1e-9)
    assert "90% credible interval" in fig.layout.xaxis.title.text
    assert len(_trace(fig, "posterior density").x) > 0
    _assert_no_markup_injected(fig)  # the covariate named <script>... appears in the rules


def test_plot_subgroups_on_groups_pins_all_units(draws):
    groups = summarize_groups(draws, {"older": "age >= 60", "oil <b>": "heating == 'oil'"})
    fig = F.plot_subgroups(groups, show_draws=True, highlight="older")
    pin = _trace(fig, "pinned")
    tab = groups.table()
    assert list(pin.y) == [max(fig.layout.yaxis.tickvals)]
    assert pin.x[0] == pytest.approx(tab.loc[tab.subgroup == "All units", "mean"].item())
    assert all("<b>" not in t.replace("<b>%{customdata[0]}</b>", "") for t in _strings(fig.to_plotly_json())
               if "oil" in t)


def test_plot_functions_reject_wrong_result_types(tree):
    with pytest.raises(SummaryError, match="`result` must be a TreeSummary or a GroupSummary; got DataFrame"):
        F.plot_subgroups(pd.DataFrame())
    with pytest.raises(SummaryError, match="`tree` must be a TreeSummary; got str"):
        F.plot_fit_by_depth("tree")
    with pytest.raises(SummaryError, match="`additive` must be an AdditiveSummary; got TreeSummary"):
        F.plot_curves(tree)
    with pytest.raises(SummaryError, match="`linear` must be a LinearSummary; got TreeSummary"):
        F.plot_coefficients(tree)
    with pytest.raises(SummaryError, match="`result` must be a TreeSummary or a GroupSummary; got int"):
        F.plot_contrasts(3, 1)


# -- summary R^2 by depth --------------------------------------------------------------------
def test_fit_by_depth_on_a_real_tree(tree):
    t2 = tree.at_depth(2)
    fig = F.plot_fit_by_depth(t2, level=0.8)
    summary = tree.fit_r2_by_depth(level=0.8)
    tr = _trace(fig, "summary R²")
    np.testing.assert_allclose(tr.x, summary["depth"])
    np.testing.assert_allclose(tr.y, summary["mean"])
    np.testing.assert_allclose(np.array(tr.y) + tr.error_y.array, summary["upper"])
    np.testing.assert_allclose(np.array(tr.y) - tr.error_y.arrayminus, summary["lower"])
    # the mean is the plain average of the per-draw R^2 (numpy), the upper limit its 90% quantile
    by_depth = tree.fit_r2_draws_by_depth()
    assert tr.y[2] == pytest.approx(np.mean(by_depth[3]))
    assert tr.y[0] + tr.error_y.array[0] == pytest.approx(np.quantile(by_depth[1], 0.9))
    # the current depth (2) is drawn in the accent colour, the others in ink
    assert list(tr.marker.line.color) == [F.INK, F.ACCENT, F.INK]
    assert "80% credible interval" in fig.layout.yaxis.title.text
    violins = _trace(fig, "posterior density")
    assert int(np.isnan(np.asarray(violins.x, dtype=float)).sum()) == 3  # one NaN gap after each violin
    assert "subgroups" in fig.layout.xaxis.ticktext[0]
    no_violins = F.plot_fit_by_depth(t2, show_draws=False, current_depth=3)
    assert [t.name for t in no_violins.data] == ["summary R²"]


def test_fit_by_depth_skips_violin_of_constant_draws():
    summary = pd.DataFrame({"depth": [1, 2], "n_subgroups": [2, 4], "mean": [0.4, 1.0],
                            "lower": [0.3, 1.0], "upper": [0.5, 1.0]})
    fig = F.fit_by_depth_figure(summary, {1: np.random.default_rng(0).normal(0.4, 0.05, 200), 2: np.ones(200)})
    assert int(np.isnan(np.asarray(_trace(fig, "posterior density").x, dtype=float)).sum()) == 1


def test_fit_by_depth_errors():
    summary = pd.DataFrame({"depth": [1, 2], "n_subgroups": [2, 4], "mean": [0.4, 0.6],
                            "lower": [0.3, 0.5], "upper": [0.5, 0.7]})
    with pytest.raises(SummaryError, match=r"`current_depth` 5 is not one of the depths \[1, 2\]"):
        F.fit_by_depth_figure(summary, current_depth=5)
    with pytest.raises(SummaryError, match=r"`draws_by_depth` has no draws for depth\(s\) \[2\]"):
        F.fit_by_depth_figure(summary, {1: np.zeros(3)})
    with pytest.raises(SummaryError, match=r"`summary` lacks the column\(s\) 'n_subgroups'"):
        F.fit_by_depth_figure(summary.drop(columns="n_subgroups"))


# -- additive curves -------------------------------------------------------------------------
def _curves():
    x = np.linspace(20, 80, 30)
    rows = [dict(covariate="age", covariate_type="numeric", x=v, mean=-0.1 * v, lower=-0.1 * v - 1, upper=-0.1 * v + 1,
                 lower_joint=-0.1 * v - 2, upper_joint=-0.1 * v + 2) for v in x[::-1]]
    rows += [dict(covariate="heating", covariate_type="categorical", x=c, mean=m, lower=m - 1, upper=m + 1,
                  lower_joint=m - 2, upper_joint=m + 2) for c, m in [("gas", -1.0), ("heat <pump>", 2.0)]]
    df = pd.DataFrame(rows)
    df.attrs.update(level=0.9, label="Change in winter bill")
    return df


def test_trends_numeric_bands_and_categorical_points():
    df = _curves()
    fig = F.curves_figure(df)
    num = df[df.covariate == "age"].sort_values("x")
    fills = [t for t in fig.data if t.fill == "tonexty"]
    assert [t.fillcolor for t in fills] == [F._JOINT_FILL, F._POINTWISE_FILL]  # lighter band drawn first
    np.testing.assert_allclose(fills[0].y, num["upper_joint"])
    np.testing.assert_allclose(fills[1].y, num["upper"])
    mean_lines = [t for t in fig.data if t.name == "posterior mean" and t.mode == "lines" and t.x[0] is not None]
    np.testing.assert_allclose(mean_lines[0].x, num["x"].astype(float))  # sorted by x although the table was not
    np.testing.assert_allclose(mean_lines[0].y, num["mean"])
    cat = [t for t in fig.data if t.name == "posterior mean" and t.mode == "markers"][0]
    assert list(cat.x) == ["gas", "heat &lt;pump&gt;"]
    np.testing.assert_allclose(np.array(cat.y), [-1.0, 2.0])
    whiskers = [t for t in fig.data if t.error_y is not None and t.error_y.array is not None]
    assert sorted(float(w.error_y.array[1]) for w in whiskers) == [1.0, 2.0]  # pointwise and simultaneous
    assert fig.layout.xaxis2.type == "category"
    legend = [t.name for t in fig.data if t.showlegend is not False]
    assert legend == ["posterior mean", "pointwise 90%", "simultaneous 90%"]
    assert [a.text for a in fig.layout.annotations] == ["age", "heating"]
    assert fig.layout.yaxis.title.text == "Change in winter bill"


def test_trends_one_covariate_and_escaping():
    df = _curves()
    df.loc[df.covariate == "age", "covariate"] = INJECT
    fig = F.curves_figure(df, covariate=INJECT)
    assert fig.layout.xaxis.title.text == "&lt;script&gt;alert(1)&lt;/script&gt;"
    _assert_no_markup_injected(fig)
    _assert_no_markup_injected(F.curves_figure(df, n_cols=1))


@pytest.mark.parametrize("kwargs, match", [
    (dict(covariate="income"), r"`covariate` names 'income'; available: 'age', 'heating'"),
    (dict(covariate=[]), r"`covariate` names nothing"),
    (dict(n_cols=0), r"`n_cols` must be an integer >= 1; got 0"),
])
def test_trends_errors(kwargs, match):
    with pytest.raises(SummaryError, match=match):
        F.curves_figure(_curves(), **kwargs)


def test_trends_rejects_unknown_kind():
    df = _curves()
    df.loc[df.covariate == "heating", "covariate_type"] = "ordinal"
    with pytest.raises(SummaryError, match=r"column 'covariate_type' for covariate 'heating' must be one of"):
        F.curves_figure(df)


def test_plot_trends_on_a_real_additive_summary(draws):
    from summarize_widgets.summaries.additive import summarize_additive

    add = summarize_additive(draws, columns=["age", "heating"])
    curves = add.curves(level=0.9)
    fig = F.plot_curves(add, level=0.9)
    num = curves[curves.covariate == "age"].assign(x=lambda d: d.x.astype(float)).sort_values("x")
    line = [t for t in fig.data if t.name == "posterior mean" and t.mode == "lines" and t.x[0] is not None][0]
    np.testing.assert_allclose(line.y, num["mean"])
    assert [a.text for a in fig.layout.annotations] == ["age", "heating"]
    _assert_no_markup_injected(F.plot_curves(add, covariate="heating"), raw="heat <pump>")


# -- linear coefficients ---------------------------------------------------------------------
def _coefs():
    df = pd.DataFrame({"term": ["(intercept)", "age", INJECT, "heating = oil"], "mean": [3.0, -0.05, 0.4, 1.5],
                       "sd": [0.2, 0.01, 0.05, 0.3], "lower": [2.6, -0.07, 0.3, 0.9], "upper": [3.4, -0.03, 0.5, 2.1],
                       "prob_positive": [1.0, 0.0, 1.0, 1.0]})
    df.attrs.update(level=0.95, interval="equal-tailed", reference={"heating": "gas"})
    return df


def test_coefficients_order_intercept_and_reference():
    df = _coefs()
    fig = F.coefficients_figure(df)
    tr = _trace(fig, "coefficients")
    np.testing.assert_allclose(tr.x, [1.5, 0.4, -0.05])  # first slope on top (largest y)
    np.testing.assert_allclose(np.array(tr.x) + tr.error_x.array, [2.1, 0.5, -0.03])
    assert "compared with heating = gas" in fig.layout.xaxis.title.text
    _assert_no_markup_injected(fig)
    with_icpt = _trace(F.coefficients_figure(df, intercept=True), "coefficients")
    np.testing.assert_allclose(with_icpt.x, [1.5, 0.4, -0.05, 3.0])
    with pytest.raises(SummaryError, match="`table` holds only the intercept; pass `intercept=True`"):
        F.coefficients_figure(df.iloc[:1])


def test_plot_coefficients_on_a_real_linear_summary(draws):
    from summarize_widgets.summaries.linear import summarize_linear

    lin = summarize_linear(draws, columns=["age", INJECT])
    tab = lin.table(level=0.9)
    fig = F.plot_coefficients(lin, level=0.9)  # the standardized scale: per SD of a numeric covariate
    tr = _trace(fig, "coefficients")
    slopes = tab[tab.term != "(intercept)"]
    np.testing.assert_allclose(tr.x, slopes["std_mean"].to_numpy()[::-1])
    np.testing.assert_allclose(np.array(tr.x) - tr.error_x.arrayminus, slopes["std_lower"].to_numpy()[::-1])
    assert "per standard deviation (SD" in fig.layout.xaxis.title.text and any("age (per SD = " in t for t in fig.layout.yaxis.ticktext)
    raw = _trace(F.plot_coefficients(lin, level=0.9, scale="unit"), "coefficients")
    np.testing.assert_allclose(raw.x, slopes["mean"].to_numpy()[::-1])
    with_icpt = F.plot_coefficients(lin, intercept=True)
    assert len(_trace(with_icpt, "coefficients").x) == len(tab)
    assert any("(intercept) at the means" in t for t in with_icpt.layout.yaxis.ticktext)
    with pytest.raises(SummaryError, match="`scale` must be 'sd' or 'unit'"):
        F.plot_coefficients(lin, scale="iqr")
    _assert_no_markup_injected(fig)


# -- contrasts -------------------------------------------------------------------------------
def test_contrasts_orient_subgroup_as_a_whichever_column_it_is_in():
    df = pd.DataFrame({"subgroup_a": [1, 1, 2], "subgroup_b": [2, 3, 3], "rule_a": ["r1", "r1", "r2"],
                       "rule_b": ["r2", "r3 " + INJECT, "r3 " + INJECT], "difference": [0.5, -1.0, 2.0],
                       "lower": [0.1, -1.5, 1.0], "upper": [0.9, -0.4, 3.0], "prob_a_greater": [0.99, 0.01, 1.0]})
    df.attrs.update(level=0.95, interval="equal-tailed")
    fig = F.contrasts_figure(df, 2)
    tr = _trace(fig, "contrasts")
    # 2 vs 1 is the flip of (1, 2): -0.5 in [-0.9, -0.1], P = 0.01; 2 vs 3 as stored; sorted by difference
    np.testing.assert_allclose(tr.x, [-0.5, 2.0])
    np.testing.assert_allclose(np.array(tr.x) - tr.error_x.arrayminus, [-0.9, 1.0])
    np.testing.assert_allclose(np.array(tr.x) + tr.error_x.array, [-0.1, 3.0])
    np.testing.assert_allclose(tr.customdata[:, 3].astype(float), [0.01, 1.0])
    assert "P(A &gt; B)" not in tr.hovertemplate and "P(A > B)" in tr.hovertemplate
    assert fig.layout.yaxis.ticktext[0] == "r1" and "r2" in fig.layout.title.text
    _assert_no_markup_injected(fig)
    with pytest.raises(SummaryError, match=r"`subgroup` 9 is not one of the subgroups in the contrasts: \[1, 2, 3\]"):
        F.contrasts_figure(df, 9)


def test_plot_contrasts_on_a_real_tree_against_numpy(tree):
    t2 = tree.at_depth(2)
    ids = [int(i) for i in t2.leaf_ids]
    a = ids[1]
    fig = F.plot_contrasts(t2, np.int64(a), level=0.9)
    tr = _trace(fig, "contrasts")
    # Reference: differences of the leaf draws and their 5% / 95% quantiles, computed with numpy.
    theta = t2.leaf_draws
    want = []
    for b in ids:
        if b != a:
            d = theta[:, ids.index(a)] - theta[:, ids.index(b)]
            want.append((d.mean(), np.quantile(d, 0.05), np.quantile(d, 0.95), (d > 0).mean()))
    want = np.array(sorted(want))
    np.testing.assert_allclose(tr.x, want[:, 0])
    np.testing.assert_allclose(np.array(tr.x) - tr.error_x.arrayminus, want[:, 1])
    np.testing.assert_allclose(np.array(tr.x) + tr.error_x.array, want[:, 2])
    np.testing.assert_allclose(tr.customdata[:, 3].astype(float), want[:, 3])
    _assert_no_markup_injected(fig)


def test_plot_contrasts_on_groups(draws):
    groups = summarize_groups(draws, {"older": "age >= 60", "younger": "age < 60"})
    fig = F.plot_contrasts(groups, "older")
    assert len(_trace(fig, "contrasts").x) == 2  # against "All units" and "younger"



# -- static export ---------------------------------------------------------------------------
def _have_browser():
    try:
        F.find_browser()
        return True
    except F.BrowserNotFoundError:
        return False


# Like the browser suite: skipped locally without chromium, never skipped in CI (CI=true).
needs_browser = pytest.mark.skipif(not _have_browser() and os.environ.get("CI") != "true",
                                   reason="static export needs chromium (apt-get install chromium)")


@pytest.fixture(scope="module")
def small_fig():
    df, draws_ = _subgroup_table()
    return F.subgroups_figure(df, highlight=7, draws=draws_, title="Subgroups")


def _png_size(data: bytes):
    # PNG spec (ISO/IEC 15948): 8-byte signature, then the IHDR chunk: length, b"IHDR", width, height (big-endian).
    assert data[:8] == b"\x89PNG\r\n\x1a\n"
    assert data[12:16] == b"IHDR"
    return struct.unpack(">II", data[16:24])


@needs_browser
def test_save_figures_writes_valid_svg_pdf_png(tmp_path, small_fig):
    paths = F.save_figures({tmp_path / "fig.svg": small_fig, tmp_path / "fig.pdf": small_fig,
                            tmp_path / "fig.png": small_fig}, width=640, height=400, scale=2)
    assert [p.name for p in paths] == ["fig.svg", "fig.pdf", "fig.png"]
    svg = (tmp_path / "fig.svg").read_bytes()
    root = ET.fromstring(svg)
    assert root.tag.endswith("svg") and root.get("width") == "640" and root.get("height") == "400"
    # the injected rule stays text: no script element, the literal text is in a text node
    assert not any(el.tag.endswith("script") for el in root.iter())
    assert any(INJECT in t for t in root.itertext())
    pdf = (tmp_path / "fig.pdf").read_bytes()
    assert pdf.startswith(b"%PDF-") and b"%%EOF" in pdf[-64:]
    png = (tmp_path / "fig.png").read_bytes()
    assert _png_size(png) == (1280, 800)
    for data in (svg, pdf, png):
        assert len(data) > 5_000
    assert sorted(p.name for p in tmp_path.iterdir()) == ["fig.pdf", "fig.png", "fig.svg"]  # no temp files left
    assert (os.stat(tmp_path / "fig.png").st_mode & 0o777) == 0o666 & ~_umask()


@needs_browser
def test_save_figure_refuses_existing_file_and_overwrites_when_asked(tmp_path, small_fig):
    target = tmp_path / "subgroups.png"
    target.write_bytes(b"keep me")
    with pytest.raises(FileExistsError, match=r"subgroups\.png' already exists; pass overwrite=True"):
        F.save_figure(small_fig, target)
    assert target.read_bytes() == b"keep me"
    out = F.save_figure(small_fig, str(target), overwrite=True, width=500, height=300)
    assert out == target and _png_size(target.read_bytes()) == (500, 300)
    assert [p.name for p in tmp_path.iterdir()] == ["subgroups.png"]


@needs_browser
def test_save_figure_uses_the_figures_own_height_and_format_argument(tmp_path, small_fig):
    out = F.save_figure(small_fig, tmp_path / "plot", format="svg")
    root = ET.fromstring(out.read_bytes())
    assert root.get("height") == str(small_fig.layout.height) and root.get("width") == "900"


def test_write_atomic_never_clobbers_a_file_created_meanwhile(tmp_path):
    # The existence check happens before rendering; a file appearing after it must still survive.
    target = tmp_path / "a.svg"
    target.write_bytes(b"first")
    with pytest.raises(FileExistsError, match=r"a\.svg' already exists"):
        write_atomic(target, b"second", overwrite=False)
    assert target.read_bytes() == b"first" and [p.name for p in tmp_path.iterdir()] == ["a.svg"]
    write_atomic(target, b"second", overwrite=True)
    assert target.read_bytes() == b"second"


@pytest.mark.parametrize("name, kwargs, match", [
    ("fig.jpg", {}, r"`format` was not given and the file name '.*fig\.jpg' does not end in one of \.svg, \.pdf, \.png"),
    ("fig.svg", dict(format="png"), r"`format` is 'png' but the file name '.*fig\.svg' ends in \.svg"),
    ("fig", dict(format="eps"), r"`format` must be one of 'svg', 'pdf', 'png'; got 'eps'"),
    ("missing/fig.svg", {}, r"The folder '.*missing' for '.*fig\.svg' does not exist"),
    ("fig.png", dict(width=0), r"`width` must be a positive integer \(pixels\); got 0"),
    ("fig.png", dict(height=2.5), r"`height` must be a positive integer \(pixels\); got 2.5"),
    ("fig.png", dict(scale=-1), r"`scale` must be a positive number; got -1"),
])
def test_save_figure_errors(tmp_path, small_fig, name, kwargs, match):
    with pytest.raises(SummaryError, match=match):
        F.save_figure(small_fig, tmp_path / name, **kwargs)
    assert list(tmp_path.iterdir()) == []


def test_save_figure_rejects_non_figures(tmp_path, small_fig):
    with pytest.raises(SummaryError, match="`fig` must be a plotly.graph_objects.Figure; got dict"):
        F.save_figure({"data": []}, tmp_path / "a.svg")
    with pytest.raises(SummaryError, match=r"`path` must be a file path \(str or os.PathLike\); got int"):
        F.save_figure(small_fig, 3)


def test_save_figures_checks_every_target_before_rendering(tmp_path, small_fig, monkeypatch):
    monkeypatch.setattr(SE, "_render", lambda jobs: pytest.fail("rendered although a target was refused"))
    (tmp_path / "b.pdf").write_bytes(b"old")
    with pytest.raises(FileExistsError, match=r"b\.pdf' already exists"):
        F.save_figures([(small_fig, tmp_path / "a.svg"), (small_fig, tmp_path / "b.pdf")])
    with pytest.raises(SummaryError, match=r"a\.svg' is listed twice in `items`"):
        F.save_figures([(small_fig, tmp_path / "a.svg"), (small_fig, str(tmp_path / "a.svg"))])
    with pytest.raises(SummaryError, match=r"`fig` for '.*c\.svg' must be a plotly.graph_objects.Figure; got str"):
        F.save_figures({tmp_path / "c.svg": "figure"})
    assert sorted(p.name for p in tmp_path.iterdir()) == ["b.pdf"]


def test_missing_browser_gives_install_hint(tmp_path, small_fig, monkeypatch):
    monkeypatch.delenv("BROWSER_PATH", raising=False)
    monkeypatch.setattr(SE.shutil, "which", lambda name: None)
    monkeypatch.setattr(SE, "_TYPICAL_PATHS", ())
    with pytest.raises(F.BrowserNotFoundError, match=r"No Chromium-family browser found\..*apt-get install chromium"):
        F.find_browser()
    with pytest.raises(F.BrowserNotFoundError, match="apt-get install chromium"):
        F.save_figure(small_fig, tmp_path / "a.svg")
    assert list(tmp_path.iterdir()) == []


def test_bad_browser_path_is_named(tmp_path, monkeypatch):
    monkeypatch.setenv("BROWSER_PATH", str(tmp_path / "no-browser"))
    with pytest.raises(F.BrowserNotFoundError, match=r"BROWSER_PATH is set to '.*no-browser', which is not an executable"):
        F.find_browser()


def test_browser_path_setting_is_honoured(tmp_path, monkeypatch):
    fake = tmp_path / "my-chromium"
    fake.write_text("#!/bin/sh\n")
    fake.chmod(0o755)
    monkeypatch.setenv("BROWSER_PATH", str(fake))
    assert F.find_browser() == str(fake)


# -- labels and axes -------------------------------------------------------------------------
def test_wrap_breaks_between_conditions_and_escapes():
    text = "tenure = owner & 52.2 < dwelling_age <= 89.8 & baseline_bill > 166 & x < 3"
    assert F._rule(text, 40).split("<br>") == ["tenure = owner and", "52.2 &lt; dwelling_age ≤ 89.8 and",
                                               "baseline_bill &gt; 166 and x &lt; 3"]
    assert F._rule("region in {north, south, west, east, central}", 20).split("<br>") == [
        "region ∈ {north,", "south, west, east,", "central}"]


def test_figures_print_rules_and_labels_as_the_tables_do(tree):
    # One rule syntax: the figure's row labels are the table's rule text (export.layout.rule_to_text, the
    # Markdown/HTML formatter), with the table's printed label (S1 .. Sk) in front; no "&", no "in {".
    from summarize_widgets.export.layout import rule_to_text
    tab = tree.table()
    ticks = [re.sub(r"<[^>]+>", " ", t).replace("&lt;", "<").replace("&gt;", ">").replace("&amp;", "&")
             for t in F.plot_subgroups(tree).layout.yaxis.ticktext]
    flat = [" ".join(t.split()) for t in ticks]
    for label, rule in zip(tab["label"], tab["rule"]):
        assert any(t.startswith(f"{label} : {rule_to_text(rule)}") or t.startswith(f"{label}: {rule_to_text(rule)}")
                   for t in flat), (label, rule_to_text(rule), flat)
    fig = F.plot_contrasts(tree, int(tab["subgroup"].iloc[0]))
    texts = " ".join(_strings(fig.to_plotly_json()))
    assert " & " not in texts.replace("&amp;", "") and " in {" not in texts
    assert f"{tab['label'].iloc[0]}:" in texts


def test_unit_and_direction_reach_axis_titles_notes_and_colours():
    # The demo's effects are in currency units per month and lower is better (saving energy).
    from summarize_widgets.datasets.retrofit import BILL_UNIT, simulate_retrofit_study
    study = simulate_retrofit_study(n_households=400, n_draws=120, seed=3)
    lower = summarize_tree(study.effect_draws(), max_depth=2)
    assert lower.draws.unit == BILL_UNIT and lower.draws.better == "lower"
    fig = F.plot_subgroups(lower)
    assert BILL_UNIT in fig.layout.xaxis.title.text and "Lower (more negative) values are better" in fig.layout.xaxis.title.text
    tab = lower.table()
    best, worst = tab["mean"].idxmin(), tab["mean"].idxmax()  # lower is better: the most negative is the best
    vmax = float(tab["mean"].abs().max())
    fills = {}
    for t in fig.data:
        if t.name in ("subgroups", "highlight") and t.marker.color is not None:
            for x, c in zip(t.x, t.marker.color):
                fills[round(float(x), 9)] = c
    assert fills[round(float(tab.loc[best, "mean"]), 9)] == F.effect_color(-tab.loc[best, "mean"], vmax)
    assert fills[round(float(tab.loc[worst, "mean"]), 9)] == F.effect_color(-tab.loc[worst, "mean"], vmax)
    # the better subgroup takes the warm end (the last stops of DIVERGING) whichever direction is better
    warm = F.effect_color(vmax, vmax)
    assert fills[round(float(tab.loc[best, "mean"]), 9)] == warm
    # the same draws declared higher-is-better colour the other way round
    higher = sw.EffectDraws(np.asarray(study.effect_draws().values), study.covariates, unit=BILL_UNIT, better="higher")
    fig_h = F.plot_subgroups(summarize_tree(higher, max_depth=2))
    fills_h = {round(float(x), 9): c for t in fig_h.data if t.name == "subgroups" for x, c in zip(t.x, t.marker.color)}
    cool = F.effect_color(-vmax, vmax)
    assert fills_h[round(float(tab.loc[best, "mean"]), 9)] == cool  # the largest saving is now the worst case
    # the tree view's palette agrees: reversed stops colour v as the plain scale colours -v
    from summarize_widgets.figures.palette import DIVERGING, effect_palette
    assert effect_palette("lower")["stops"] == DIVERGING[::-1] and effect_palette("higher")["stops"] == DIVERGING
    curves = F.plot_curves(sw.summarize_additive(study.effect_draws(), columns=["baseline_bill"]))
    assert BILL_UNIT in curves.layout.yaxis.title.text


def test_effect_axes_always_show_zero():
    df, _ = _subgroup_table()
    df[["mean", "lower", "upper"]] += 50  # every interval far above zero
    lo, hi = F.subgroups_figure(df).layout.xaxis.range
    assert lo < 0 < hi and hi > df["upper"].max()


def test_group_rows_show_name_then_query(draws):
    groups = summarize_groups(draws, {"older owners": "age >= 60"})
    fig = F.plot_subgroups(groups)
    tick = [t for t in fig.layout.yaxis.ticktext if t.startswith("older owners")][0]
    assert "age ≥ 60" in tick and "n = " in tick
    assert [t for t in fig.layout.yaxis.ticktext if t.startswith("All units")]


def test_coefficients_per_amount_rescales_exactly():
    df = _coefs()
    fig = F.coefficients_figure(df, per={"age": 10})
    tr = _trace(fig, "coefficients")
    np.testing.assert_allclose(tr.x, [1.5, 0.4, -0.5])
    np.testing.assert_allclose(np.array(tr.x) - tr.error_x.arrayminus, [0.9, 0.3, -0.7])
    assert fig.layout.yaxis.ticktext[-1] == "age (per 10)"  # first slope, on top
    np.testing.assert_allclose(tr.customdata[:, 3].astype(float), [1.0, 1.0, 0.0])  # probabilities unchanged


@pytest.mark.parametrize("per, match", [
    ({"height": 2}, r"`per` names term\(s\) 'height' that are not in the table; terms: '\(intercept\)', 'age'"),
    ({"age": 0}, r"`per\['age'\]` must be a positive number; got 0"),
    ([("age", 10)], r"`per` must be a mapping of term -> amount, like \{'age': 10\}; got list"),
])
def test_coefficients_per_errors(per, match):
    with pytest.raises(SummaryError, match=match):
        F.coefficients_figure(_coefs(), per=per)


def test_complier_weighted_tree_flags_weak_uptake_and_shows_complier_share():
    # Encouragement design: a subgroup where almost nobody takes up the offer has an unstable ratio.
    rng = np.random.default_rng(8)
    n, S = 600, 200
    X = pd.DataFrame({"age": rng.uniform(20, 80, n)})
    uptake = np.where(X["age"].to_numpy() > 50, 0.6, 0.004) + rng.normal(0, 0.002, (S, n))
    itt = -2.0 * uptake + rng.normal(0, 0.05, (S, n))
    d = sw.EffectDraws.from_itt(itt, np.clip(uptake, 1e-4, None), X)
    t = summarize_tree(d, max_depth=1, min_size=50)
    tab = t.table()
    assert tab["weak_uptake"].any() and not tab["weak_uptake"].all()
    fig = F.plot_subgroups(t)
    flagged = [lab for lab in fig.layout.yaxis.ticktext if "weak uptake" in lab]
    assert len(flagged) == int(tab["weak_uptake"].sum())
    tr = _trace(fig, "subgroups")
    assert "complier share" in tr.hovertemplate and "of all compliers" in tr.hovertemplate
    order = tab.sort_values("mean")
    np.testing.assert_allclose(tr.customdata[:, 7].astype(float), order["uptake_share"])
    # Both shares, each named, with the tables' digits (export.layout.subgroup_texts): `share` is the
    # share of units and `complier_share` the share of compliers.
    from summarize_widgets.export.layout import subgroup_texts

    texts = subgroup_texts(order)
    for lab, (_, t) in zip(fig.layout.yaxis.ticktext, texts.iterrows()):
        assert f"{t['share_text']} of units" in lab and f"{t['complier_share_text']} of compliers" in lab, lab
    # The hover prints the tables' numbers, not plotly's own formats.
    assert ":.4g" not in tr.hovertemplate
    assert {row[-4] for row in tr.customdata} <= set(texts["mean_text"])


def _complier_table():
    """Three subgroups; subgroup 9's complier share may be near zero and its ratio is wild."""
    df = pd.DataFrame({"subgroup": [3, 5, 9], "rule": ["a <= 1", "a > 1 & b <= 2", "a > 1 & b > 2"],
                       "n_units": [800, 700, 109], "share": [0.55, 0.44, 0.007], "mean": [-20.0, -35.0, -257.0],
                       "sd": [3.0, 4.0, 120.0], "lower": [-26.0, -43.0, -589.0], "upper": [-14.0, -27.0, -39.0],
                       "prob_positive": [0.0, 0.0, 0.01], "uptake_share": [0.6, 0.5, 0.06],
                       "uptake_lower": [0.55, 0.45, 0.01], "weak_uptake": [False, False, True]})
    df.attrs.update(level=0.95, interval="equal-tailed", label="effect")
    return df


def test_weak_uptake_does_not_set_the_effects_axis_and_is_drawn_cut_with_its_numbers():
    df = _complier_table()
    fig = F.subgroups_figure(df)
    lo, hi = fig.layout.xaxis.range
    # The axis covers the stable subgroups' intervals (and zero), not the unstable one.
    assert lo <= -43.0 and hi >= 0.0 and lo > -60.0
    arrows = _trace(fig, "cut at the axis")
    assert list(arrows.marker.symbol) == ["triangle-left"] and arrows.x[0] == pytest.approx(lo)
    notes = [a.text for a in fig.layout.annotations]
    assert notes == ["\u2212257 [\u2212589, \u221239]: beyond the axis"]
    # The drawn interval is cut at the edge; the hover keeps the true numbers.
    weak = [t for t in fig.data if t.name == "subgroups"][0]
    row = list(weak.customdata[:, 0]).index("a &gt; 1 and b &gt; 2")
    assert weak.x[row] == pytest.approx(lo) and float(weak.customdata[row, 6]) == pytest.approx(-257.0)
    assert weak.x[row] - weak.error_x.arrayminus[row] == pytest.approx(lo)
    # Colours come from the stable subgroups: the most negative stable one gets the end colour.
    fills = list(weak.marker.color)
    assert fills[row] == fills[[float(v) for v in weak.customdata[:, 6]].index(-35.0)] == F.effect_color(np.array([-35.0]), 35.0)[0]
    # Without the flag every interval sets the axis, nothing is cut.
    plain = F.subgroups_figure(df.drop(columns=["uptake_share", "uptake_lower", "weak_uptake"]))
    assert plain.layout.xaxis.range[0] < -589.0 and not plain.layout.annotations
    assert all(t.name != "cut at the axis" for t in plain.data)


def test_contrasts_flag_weak_subgroups_and_keep_their_axis():
    df = _complier_table()
    tree_like = pd.DataFrame({
        "subgroup_a": [3, 3], "subgroup_b": [5, 9], "rule_a": ["a <= 1"] * 2, "rule_b": ["a > 1 & b <= 2", "a > 1 & b > 2"],
        "difference": [15.0, 237.0], "lower": [6.0, 20.0], "upper": [24.0, 570.0], "prob_a_greater": [0.99, 0.99]})
    tree_like.attrs.update(level=0.95, interval="equal-tailed")
    fig = F.contrasts_figure(tree_like, 3, weak={9})
    assert sum("weak uptake" in lab for lab in fig.layout.yaxis.ticktext) == 1
    assert fig.layout.xaxis.range[1] < 100
    assert any("beyond the axis" in a.text for a in fig.layout.annotations)
    assert list(_trace(fig, "cut at the axis").marker.symbol) == ["triangle-right"]
    # Subgroup A weak: every contrast is unstable; the axis holds them all, A is flagged in the title.
    flipped = F.contrasts_figure(tree_like, 9, weak={9})
    assert flipped.layout.xaxis.range[0] <= -570.0 and "weak uptake" in flipped.layout.title.text
    del df


def test_several_subgroups_can_be_highlighted():
    df = _complier_table()
    fig = F.subgroups_figure(df, highlight=[3, 5])
    assert len(_trace(fig, "highlight").x) == 2
    assert sum(1 for sh in fig.layout.shapes if sh.type == "rect") == 2
    with pytest.raises(SummaryError, match=r"`highlight` 4 is not one of the subgroups: \[3, 5, 9\]"):
        F.subgroups_figure(df, highlight=[3, 4])


@pytest.mark.parametrize("n", [50, 4000])
def test_binned_kde_matches_scipy_gaussian_kde(n):
    # Reference: scipy.stats.gaussian_kde (exact sum over draws, Scott's bandwidth by default).
    from scipy.stats import gaussian_kde

    v = np.random.default_rng(n).gamma(3.0, 2.0, n)
    grid = np.linspace(v.min(), v.max(), 97)
    ours, ref = F._kde(v, grid), gaussian_kde(v)(grid)
    assert np.abs(ours - ref).max() <= 2e-3 * ref.max()


def test_coefficient_and_contrast_hovers_print_the_tables_numbers(draws):
    """Hovers carry the numbers as every table prints them (core.numbers: digits from size and MCSE,
    probabilities as <0.001 at the ends), not plotly's own .4g."""
    lin = F.plot_coefficients(sw.summarize_linear(draws))
    tree = summarize_tree(draws, max_depth=2)
    first = int(tree.table()["subgroup"].iloc[0])
    con = F.plot_contrasts(tree, first)
    for fig, name in ((lin, "coefficients"), (con, "contrasts")):
        tr = _trace(fig, name)
        assert ".4g" not in tr.hovertemplate and ":.3f" not in tr.hovertemplate
        values = tr.x if name == "coefficients" else [float(row[4]) for row in tr.customdata]
        for row, v in zip(tr.customdata, values):
            text = str(row[-3])
            decimals = len(text.split(".")[1]) if "." in text else 0
            assert abs(float(text.replace("\u2212", "-").replace(",", "")) - float(v)) <= 0.51 * 10 ** -decimals
            assert str(row[-2]).startswith("[") and str(row[-1])[0] in "<>01"
    curves = F.plot_curves(sw.summarize_additive(draws, lam=1.0))
    hovers = [t.hovertemplate for t in curves.data if t.hovertemplate]
    assert hovers and not any(".4g" in h for h in hovers)

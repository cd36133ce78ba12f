"""What a reader sees, across outputs: the reference subgroup follows the draws' direction, one
subgroup reads the same in every format, and the report's static tree diagram."""
from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from summarize_widgets import EffectDraws, SummaryError
from summarize_widgets import export as ex
from summarize_widgets.export import report as rp
from summarize_widgets.summaries.groups import summarize_groups
from summarize_widgets.summaries.linear import summarize_linear
from summarize_widgets.summaries.subgroups import best_position
from summarize_widgets.summaries.tree import summarize_tree


@pytest.fixture(scope="module")
def study():
    from summarize_widgets.datasets.retrofit import simulate_retrofit_study

    return simulate_retrofit_study(n_households=1200, n_draws=300, seed=20261201)


@pytest.fixture(scope="module")
def offer_tree(study):
    return summarize_tree(study.effect_draws(), max_depth=3)


@pytest.fixture(scope="module")
def complier_tree(study):
    return summarize_tree(study.complier_draws(), max_depth=3)


# ----------------------------------------------------------------------------- largest benefit
def test_largest_benefit_is_the_lowest_mean_when_lower_is_better(offer_tree):
    assert offer_tree.draws.better == "lower"
    table = offer_tree.table()
    best = offer_tree.best_subgroup()
    assert best == int(table.loc[table["mean"].idxmin(), "subgroup"])  # the biggest saving, not the smallest
    assert best != int(table.loc[table["mean"].idxmax(), "subgroup"])
    pairs = offer_tree.contrasts()
    assert pairs.attrs["best"] == best and pairs.attrs["best_label"] == offer_tree.label_of(best)
    note = ex.to_markdown(pairs)
    assert f"Largest benefit: {offer_tree.label_of(best)} (the lowest posterior mean; lower values are better)" in note


def test_largest_benefit_is_the_highest_mean_when_higher_is_better(offer_tree):
    d = offer_tree.draws
    flipped = EffectDraws(-np.asarray(d.values), d.covariates, better="higher")
    tree = summarize_tree(flipped, max_depth=3)
    table = tree.table()
    assert tree.best_subgroup() == int(table.loc[table["mean"].idxmax(), "subgroup"])
    # the tree is fitted to the negated mean: the same units are the best subgroup either way
    ours, theirs = tree.assign(d.covariates), offer_tree.assign(d.covariates)
    assert np.array_equal(ours == tree.best_subgroup(), theirs == offer_tree.best_subgroup())


def test_largest_benefit_passes_over_weak_uptake(complier_tree):
    table = complier_tree.table()
    assert table["weak_uptake"].any()  # the test needs a flagged subgroup with an erratic ratio
    steady = table[~table["weak_uptake"]]
    assert complier_tree.best_subgroup() == int(steady.loc[steady["mean"].idxmin(), "subgroup"])
    assert table["mean"].min() < steady["mean"].min()  # a weak subgroup would have been picked otherwise


def test_best_position_edges():
    df = pd.DataFrame({"subgroup": ["a", "b"], "mean": [np.nan, np.nan]})
    with pytest.raises(SummaryError, match="missing"):
        best_position(df)
    with pytest.raises(SummaryError, match="empty"):
        best_position(df.iloc[:0])
    df = pd.DataFrame({"subgroup": ["a", "b"], "mean": [1.0, 2.0], "weak_uptake": [True, True]})
    df.attrs["better"] = "lower"
    assert best_position(df) == 0  # every subgroup weak: the flag cannot pass over all of them


def test_groups_largest_benefit_follows_direction(study):
    groups = summarize_groups(study.effect_draws(), {"owners": "tenure == 'owner'", "renters": "tenure == 'renter'"})
    table = groups.table()
    assert groups.best_subgroup() == table.loc[table["mean"].idxmin(), "subgroup"]
    assert groups.contrasts().attrs["best_label"] == groups.best_subgroup()


def test_report_and_folder_contrast_the_largest_benefit(offer_tree):
    figs = rp.default_figures(tree=offer_tree)
    titles = [t for t, _ in figs["tree"]]
    best = offer_tree.label_of(offer_tree.best_subgroup())
    assert f"Differences from the subgroup with the largest benefit ({best})" in titles


# ----------------------------------------------------------------------------- one subgroup, every output
def _cells(text_line: str, sep: str) -> list[str]:
    return [c.strip() for c in text_line.strip().strip(sep).split(sep)]


@pytest.mark.parametrize("which", ["offer_tree", "complier_tree"])
def test_one_subgroup_reads_the_same_in_every_output(which, request):
    import html as H
    from summarize_widgets.export.tree_diagram import tree_box_lines
    from summarize_widgets.widgets.tree_view import node_records

    tree = request.getfixturevalue(which)
    table = tree.table()
    row = table.iloc[0]
    label, node = row["label"], int(row["subgroup"])
    weak = set(table.loc[table["weak_uptake"], "subgroup"].astype(int)) if "weak_uptake" in table.columns else set()
    rec = next(r for r in node_records(tree.nodes(), weak=weak) if r["node"] == node)
    mean, iv = rec["mean_text"], rec["interval_text"]
    assert rec["label"] == label and mean and iv.startswith("[")
    # Markdown: the subgroup's row carries the same mean and interval (true minus signs)
    md_row = next(line for line in ex.to_markdown(table).splitlines() if line.startswith(f"| {label} "))
    assert mean in _cells(md_row, "|") or f"{mean}\u2020" in _cells(md_row, "|")
    assert iv in _cells(md_row, "|")
    # Terminal: the command line's text table (cli.py, the same layout and formatter)
    from summarize_widgets import cli

    term_row = next(line for line in cli._text_table(table).splitlines() if line.startswith(f"{label} "))
    assert mean in term_row and iv in term_row
    # HTML table
    html_out = H.unescape(ex.to_html(table))
    html_row = next(r for r in html_out.split("<tr>") if f">{label}<" in r)
    assert f">{mean}<" in html_row or f">{mean}\u2020<" in html_row
    assert f">{iv}<" in html_row
    # LaTeX: the same digits, with LaTeX's minus
    tex = ex.to_latex(table)
    tex_row = next(line for line in tex.splitlines() if line.startswith(f"{label} &"))
    assert mean.replace("\u2212", "$-$") in tex_row and iv.replace("\u2212", "$-$") in tex_row
    # The widget's tree view: the share is the table's share (of compliers when complier-weighted)
    share_col = "complier_share" if "complier_share" in table.columns else "share"
    assert rec["share"] == pytest.approx(float(row[share_col]))
    shares = [c for c in _cells(md_row, "|") if c.endswith("%")]
    assert rec["share_text"] in shares and rec["unit_share_text"] == shares[0]
    # The report's static tree: the same texts in the subgroup's box
    head, size, est = tree_box_lines(tree.nodes(), weak)[node]
    assert head.startswith(f"{label} \u00b7 ") and est.startswith(f"{mean} {iv}") and rec["share_text"] in size


def test_report_draws_the_tree_without_script_and_prints_cleanly(offer_tree, complier_tree):
    import html as H
    import re

    linear = summarize_linear(offer_tree.draws)
    page = rp.render_report(tree=offer_tree, linear=linear, figures=None, title="Report")
    assert "<script" not in page  # the tree diagram needs no script, and no figure asked for plotly
    svg = page[page.index('<svg class="sw-tree"'):page.index("</svg>")]
    for r in offer_tree.table().itertuples():
        assert f">{r.label} \u00b7 " in H.unescape(svg)
    assert svg.count('class="sw-tree-node') == len(offer_tree.nodes())
    assert "@media print" in page and "break-inside:avoid" in page and ".sw-nav" in page.split("@media print")[1]
    # no line of visible text is repeated (the input and "Made with" lines once, shared notes once)
    text = re.sub(r"<(style|script|title|svg)[^>]*>.*?</\1>", "", page, flags=re.S)
    text = re.sub(r"<details>.*?</details>", "", text, flags=re.S)  # the full JSON record (folded) and contrast pairs
    text = re.sub(r"<nav.*?</nav>", "", text, flags=re.S)  # links to the section headings
    lines = [H.unescape(t).strip() for t in re.split(r"<[^>]+>", text)]
    lines = [t for t in lines if len(t) > 25]
    assert len(lines) == len(set(lines)), sorted({t for t in lines if lines.count(t) > 1})
    weighted = rp.render_report(tree=complier_tree, figures=None)
    assert "of compliers" in weighted[weighted.index('<svg class="sw-tree"'):] and "weak uptake" in weighted


def test_report_tree_colours_follow_the_better_direction(offer_tree):
    """The report's tree fills each subgroup as the figures do: the warm end marks the better
    direction (the demo's bills: lower is better), so the best subgroup is the warmest box."""
    import re

    from summarize_widgets.export.tree_diagram import tree_diagram_svg
    from summarize_widgets.figures.palette import DIVERGING, benefit_sign, effect_color

    assert offer_tree.draws.better == "lower"
    svg = tree_diagram_svg(offer_tree)
    fills = dict(re.findall(r'<g class="sw-tree-node sw-tree-leaf"[^>]*><title>(S\d+) \u00b7 .*?<rect [^>]*fill="(#[0-9A-Fa-f]{6})"',
                            svg, flags=re.S))
    table = offer_tree.table()
    assert set(fills) == set(table["label"])
    vmax = table["mean"].abs().max()
    sign = benefit_sign("lower")
    for r in table.itertuples():
        assert fills[r.label].lower() == effect_color(sign * r.mean, vmax).lower(), r.label
    best = table.loc[table["mean"].idxmin(), "label"]
    assert fills[best].lower() == DIVERGING[-1].lower()

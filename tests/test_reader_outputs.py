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

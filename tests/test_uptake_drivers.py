"""Uptake drivers: uptake share, ITT and complier effect of each subgroup on one structure, against hand sums."""
import numpy as np
import pytest

import summarize_widgets as sw
from summarize_widgets import SummaryError
from summarize_widgets.summaries.uptake import UPTAKE_DRIVER_COLUMNS, uptake_draws, uptake_drivers


@pytest.fixture(scope="module")
def study():
    return sw.simulate_retrofit_study(500, 120, seed=21)


def test_table_matches_hand_sums_and_the_tree(study):
    c = study.complier_draws()
    tree = sw.summarize_tree(c, max_depth=2, min_size=30)
    res = uptake_drivers(tree)
    tab = res.table()
    assert tuple(tab.columns) == UPTAKE_DRIVER_COLUMNS
    units = tree.unit_subgroups()
    Y, P = study.itt_outcome_draws, study.itt_uptake_draws
    for k, node in enumerate(tree.leaf_ids, start=1):
        m = units == node
        np.testing.assert_allclose(res.itt_draws[:, k], Y[:, m].mean(axis=1), rtol=1e-10)
        np.testing.assert_allclose(res.uptake_draws[:, k], P[:, m].mean(axis=1), rtol=1e-10)
        np.testing.assert_allclose(res.complier_draws[:, k], Y[:, m].sum(axis=1) / P[:, m].sum(axis=1), rtol=1e-10)
    # the complier effects are the tree's own subgroup effects
    np.testing.assert_allclose(res.complier_draws[:, 1:], tree.leaf_draws, rtol=1e-12)
    # the two parts add up to the ITT difference from all units in every draw (an identity)
    np.testing.assert_allclose(res.from_uptake_draws + res.from_complier_draws, res.itt_draws - res.itt_draws[:, :1],
                               rtol=1e-9, atol=1e-9)
    assert tab["label"].iloc[0] == "All units" and tab["itt_difference"].iloc[0] == 0
    assert "mechanisms" in tab.attrs["caution"]


def test_renters_itt_gap_comes_from_uptake(study):
    # simulated truth: renters rarely take the retrofit up (complier share 0.04-0.07), so most of their ITT gap is uptake
    c = study.complier_draws()
    g = sw.summarize_groups(c, {"renters": "tenure == 'renter'", "owners": "tenure == 'owner'"})
    tab = uptake_drivers(g).table().set_index("label")
    assert tab.at["renters", "uptake"] < 0.15 < tab.at["owners", "uptake"]
    assert tab.at["renters", "from_uptake"] > 0  # bills fall less for renters (ITT closer to 0), driven by uptake
    assert tab.at["renters", "uptake_explains"] > 0.5


def test_uptake_draws_are_paired_and_plain_draws_refused(study):
    c = study.complier_draws()
    u = uptake_draws(c)
    assert u.source == c.source and not u.is_complier_weighted
    np.testing.assert_array_equal(u.values, study.itt_uptake_draws)
    with pytest.raises(SummaryError, match="complier-weighted"):
        uptake_draws(study.effect_draws())
    with pytest.raises(SummaryError, match="complier-weighted"):
        uptake_drivers(sw.summarize_tree(study.effect_draws(), max_depth=1))

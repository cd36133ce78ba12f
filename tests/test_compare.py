"""One structure, several posteriors: apply_to, paired and independent differences, unit matching."""
import numpy as np
import pandas as pd
import pytest

import summarize_widgets as sw
from summarize_widgets import EffectDraws, SummaryError
from summarize_widgets.summaries.compare import compare_posteriors, pairing_of, side_by_side


@pytest.fixture(scope="module")
def study():
    return sw.simulate_retrofit_study(400, 200, seed=11)


@pytest.fixture(scope="module")
def itt(study):
    return study.effect_draws()


@pytest.fixture(scope="module")
def late(study):
    return study.complier_draws()


@pytest.fixture(scope="module")
def tree(late):
    return sw.summarize_tree(late, max_depth=3, min_size=30)


def test_tree_applied_to_its_own_draws_is_the_same_summary(tree, late):
    again = tree.apply_to(late)
    np.testing.assert_array_equal(again.leaf_draws, tree.leaf_draws)
    pd.testing.assert_frame_equal(again.table(), tree.table())
    pd.testing.assert_frame_equal(again.nodes(), tree.nodes())
    for d in (1, 2):
        pd.testing.assert_frame_equal(again.at_depth(d).table(), tree.at_depth(d).table())
    np.testing.assert_array_equal(again.fit_r2, tree.fit_r2)


def test_groups_linear_additive_applied_to_their_own_draws_are_the_same(itt):
    g = sw.summarize_groups(itt, {"owners": "tenure == 'owner'", "old homes": "dwelling_age > 70"})
    pd.testing.assert_frame_equal(g.apply_to(itt).table(), g.table())
    lin = sw.summarize_linear(itt, columns=["tenure", "baseline_bill", "floor_area"])
    pd.testing.assert_frame_equal(lin.apply_to(itt).table(), lin.table())
    add = sw.summarize_additive(itt, columns=["baseline_bill", "heating_fuel"])
    again = add.apply_to(itt)
    np.testing.assert_array_equal(again.coef_draws, add.coef_draws)
    pd.testing.assert_frame_equal(again.curves(), add.curves())
    assert again.settings["lam_source"] == add.settings["lam_source"]


def test_paired_difference_equals_hand_computation_per_draw(study, tree, itt, late):
    on_itt = tree.apply_to(itt)
    comp = compare_posteriors(tree, on_itt)
    assert comp.pairing.paired  # one array behind both: detected from the shared source
    assert "paired" in comp.table().attrs["pairing"]
    # By hand: per draw, the subgroup LATE is sum ITT_y / sum pi and the ITT the plain mean over its units.
    leaf = tree.assign(study.covariates).to_numpy()
    y, pi = study.itt_outcome_draws, study.itt_uptake_draws
    for j, node in enumerate(tree.leaf_ids):
        m = leaf == node
        hand = y[:, m].sum(axis=1) / pi[:, m].sum(axis=1) - y[:, m].mean(axis=1)
        np.testing.assert_allclose(comp.difference_draws[:, j], hand, rtol=1e-10, atol=1e-10)
    tab = comp.table()
    np.testing.assert_allclose(tab["difference"], comp.difference_draws.mean(axis=0))
    lo, hi = np.quantile(comp.difference_draws, [0.025, 0.975], axis=0)  # numpy's default quantile rule
    np.testing.assert_allclose(tab["lower_diff"], lo)
    np.testing.assert_allclose(tab["upper_diff"], hi)
    np.testing.assert_allclose(tab["prob_a_greater"], (comp.difference_draws > 0).mean(axis=0))


def test_independent_posteriors_are_paired_at_random_and_say_so(study, itt):
    other = EffectDraws(np.array(study.itt_outcome_draws[::-1]), study.covariates, label="second model")
    lin = sw.summarize_linear(itt, columns=["tenure"])
    comp = compare_posteriors(lin, lin.apply_to(other))
    p = comp.pairing
    assert not p.paired and "independent" in p.how and "seed 0" in p.how
    assert sorted(p.index_b) == list(range(other.n_draws)) and not np.array_equal(p.index_b, np.arange(other.n_draws))
    np.testing.assert_array_equal(comp.difference_draws, lin.coef_draws[p.index_a] - other_coef(lin, other)[p.index_b])
    assert (comp.table()["pairing"] == "independent").all()
    # The user can state pairing; a shared source name also pairs.
    assert compare_posteriors(lin, lin.apply_to(other), paired=True).pairing.paired
    named_a = EffectDraws(study.itt_outcome_draws, study.covariates, source="run-7")
    named_b = EffectDraws(np.array(study.itt_outcome_draws), study.covariates, source="run-7")
    assert pairing_of(named_a, named_b).paired
    assert not pairing_of(named_a, named_b, paired=False).paired


def other_coef(lin, other):
    return lin.apply_to(other).coef_draws


def test_units_are_matched_by_index_or_refused(study, tree, itt):
    cov = study.covariates
    shuffled = cov.sample(frac=1.0, random_state=0)
    with pytest.raises(SummaryError, match="different order"):
        tree.apply_to(EffectDraws(study.itt_outcome_draws, shuffled))
    relabelled = cov.set_axis(cov.index + 10_000)
    with pytest.raises(SummaryError, match="never by position"):
        tree.apply_to(EffectDraws(study.itt_outcome_draws, relabelled))
    wrong = cov.copy()
    wrong["baseline_bill"] = wrong["baseline_bill"].to_numpy()[::-1]
    with pytest.raises(SummaryError, match="'baseline_bill' differs"):
        tree.apply_to(EffectDraws(study.itt_outcome_draws, wrong))
    with pytest.raises(SummaryError, match="units"):
        tree.apply_to(EffectDraws(study.itt_outcome_draws[:, :100], cov.iloc[:100]))
    short = EffectDraws(study.itt_outcome_draws[:50], cov)
    lin = sw.summarize_linear(itt, columns=["tenure"])
    with pytest.raises(SummaryError, match="same number of draws"):
        compare_posteriors(lin, lin.apply_to(short), paired=True)
    with pytest.raises(SummaryError, match="apply_to"):
        compare_posteriors(lin, sw.summarize_linear(itt, columns=["region"]))


def test_side_by_side_stacks_posteriors_on_one_structure(tree, itt, late):
    tab = side_by_side({"LATE": tree, "ITT": tree.apply_to(itt)})
    assert list(tab["posterior"].unique()) == ["LATE", "ITT"]
    assert len(tab) == 2 * len(tree.leaf_ids)
    np.testing.assert_allclose(tab.loc[tab["posterior"] == "LATE", "mean"], tree.leaf_draws.mean(axis=0))

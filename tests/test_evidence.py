"""Heterogeneity evidence: the posterior of the spread of effects and its verdict (invented data)."""
import numpy as np
import pytest

import summarize_widgets as sw
from summarize_widgets.summaries.evidence import between_sd_draws, heterogeneity_evidence, unit_sd_draws

from conftest import household_covariates


def _flat(S=400, n=600, seed=1):
    """No heterogeneity: every draw is one common effect plus a tiny unit-level wobble."""
    rng = np.random.default_rng(seed)
    X = household_covariates(n, rng)
    mu = rng.normal(1.0, 0.05, S)[:, None]
    return sw.EffectDraws(mu + rng.normal(0, 0.01, (S, n)), X), X


def _strong(S=400, n=600, seed=2):
    """Strong heterogeneity: older households gain one unit more."""
    rng = np.random.default_rng(seed)
    X = household_covariates(n, rng)
    truth = 1.0 + 1.0 * (X["age"].to_numpy() > 50)
    return sw.EffectDraws(truth + rng.normal(0, 0.05, (S, 1)) + rng.normal(0, 0.1, (S, n)), X), X


def test_no_heterogeneity_concentrates_near_zero_and_says_so():
    d, _ = _flat()
    tree = sw.summarize_tree(d, max_depth=2)
    ev = heterogeneity_evidence(d, tree)
    tab = ev.table()
    unit = tab.iloc[0]
    # The spread of unit effects is the simulated wobble (sd 0.01), tiny next to the average effect 1.
    assert unit["upper"] < 0.02 and unit["lower"] > 0.005
    assert tab.iloc[1]["upper"] < 0.01  # subgroup averages cancel the wobble
    assert ev.verdict == "not supported"
    assert ev.message.startswith("Little evidence of heterogeneity")
    assert "vary little" in ev.message
    assert ev.prob_range_above < 0.05
    assert ev.threshold == pytest.approx(0.25 * abs(d.overall.mean()))


def test_strong_heterogeneity_excludes_zero_and_says_so():
    d, X = _strong()
    tree = sw.summarize_tree(d, max_depth=2).at_depth(1)
    ev = heterogeneity_evidence(d, tree)
    tab = ev.table()
    # Two blocks one unit apart: sd of unit effects is about 0.5, far from zero.
    assert tab.iloc[0]["lower"] > 0.4
    assert tab.iloc[1]["lower"] > 0.4
    assert tab.iloc[2]["lower"] > 0.9  # the split recovers the one-unit difference
    assert ev.verdict == "supported" and ev.message.startswith("Heterogeneity supported")
    assert ev.prob_range_above == 1.0


def test_unit_sd_equals_numpy_weighted_sd():
    rng = np.random.default_rng(3)
    n, S = 300, 50
    X = household_covariates(n, rng)
    T = rng.normal(2.0, 1.0, (S, n)) + 1e4  # large offset: centring must keep the digits
    w = rng.uniform(0.2, 3.0, n)
    for weights in (None, w, rng.uniform(0.2, 3.0, (S, n))):
        d = sw.EffectDraws(T, X, weights=weights)
        W = np.ones((S, n)) if weights is None else np.broadcast_to(weights, (S, n))
        # Reference: numpy.average, the weighted mean of squared deviations per draw.
        ref = np.array([np.sqrt(np.average((T[s] - np.average(T[s], weights=W[s])) ** 2, weights=W[s])) for s in range(S)])
        np.testing.assert_allclose(unit_sd_draws(d), ref, rtol=1e-9)


def _complier(S=200, n=400, seed=4):
    rng = np.random.default_rng(seed)
    X = household_covariates(n, rng)
    pi = np.clip(rng.uniform(0.05, 0.8, n) + rng.normal(0, 0.02, (S, n)), 0.01, 1)
    clate = -10 - 8 * (X["fuel"] == "oil").to_numpy() + rng.normal(0, 2, (S, n))
    v = rng.uniform(0.5, 2, n)
    return sw.EffectDraws.from_itt(clate * pi, pi, X, weights=v), clate, pi, v


def test_complier_weighted_spread_is_uptake_weighted():
    d, clate, pi, v = _complier()
    S = d.n_draws
    # Reference: the (v * pi)-weighted sd of unit CLATEs, dividing unit by unit here (pi > 0 by construction).
    w = v * pi
    ref = np.array([np.sqrt(np.average((clate[s] - np.average(clate[s], weights=w[s])) ** 2, weights=w[s]))
                    for s in range(S)])
    np.testing.assert_allclose(unit_sd_draws(d), ref, rtol=1e-9)
    tree = sw.summarize_tree(d, max_depth=2)
    ev = heterogeneity_evidence(d, tree)
    # Between-subgroup sd: the w-weighted sd of each unit's subgroup effect (tree.fitted_values), per draw.
    fit = tree.fitted_values()
    ref_b = np.array([np.sqrt(np.average((fit[s] - np.average(fit[s], weights=w[s])) ** 2, weights=w[s]))
                      for s in range(S)])
    np.testing.assert_allclose(ev.between_sd, ref_b, rtol=1e-9)
    # Variance decomposition of a partition: between^2 = R^2 x unit^2 (docs/method.md section 3).
    np.testing.assert_allclose(ev.between_sd ** 2, tree.fit_r2 * ev.unit_sd ** 2, rtol=1e-8)
    assert ev.verdict == "supported"  # oil-heated homes save 8 more


def test_groups_spread_leaves_out_all_units_row():
    d, X = _strong()
    g = sw.summarize_groups(d, {"older": "age > 50", "younger": "age <= 50", "oil": "fuel == 'oil'"})
    ev = heterogeneity_evidence(d, g)
    theta = g.group_draws[:, 1:]
    np.testing.assert_allclose(ev.range, theta.max(axis=1) - theta.min(axis=1))
    np.testing.assert_allclose(ev.between_sd, between_sd_draws(theta, g.group_weight_draws[:, 1:]))
    assert "3 pre-specified groups" in ev.message
    with pytest.raises(sw.SummaryError, match="at least two pre-specified groups"):
        heterogeneity_evidence(d, sw.summarize_groups(d, {"older": "age > 50"}))


def test_default_threshold_uses_the_spread_when_average_effect_is_near_zero():
    rng = np.random.default_rng(5)
    X = household_covariates(300, rng)
    T = 0.5 * (X["age"].to_numpy() > 50) - 0.25 + rng.normal(0, 0.05, (200, 300))
    d = sw.EffectDraws(T, X)
    ev = heterogeneity_evidence(d, sw.summarize_tree(d, max_depth=1))
    assert "sd of unit effects" in ev.threshold_rule and "rule of thumb" in ev.threshold_rule
    assert ev.threshold == pytest.approx(0.25 * ev.unit_sd.mean())
    assert ev.verdict == "supported"


def test_user_threshold_and_bad_input():
    d, _ = _strong()
    tree = sw.summarize_tree(d, max_depth=1)
    ev = heterogeneity_evidence(d, tree, threshold=5.0)
    assert ev.verdict == "not supported" and ev.threshold_rule == "set by the user"
    assert ev.table().attrs["threshold"] == 5.0
    for bad in (-1, float("nan"), "big"):
        with pytest.raises(sw.SummaryError, match="`threshold`"):
            heterogeneity_evidence(d, tree, threshold=bad)
    other, _ = _flat()
    with pytest.raises(sw.SummaryError, match="other draws"):
        heterogeneity_evidence(other, tree)
    with pytest.raises(sw.SummaryError, match="TreeSummary or a GroupSummary"):
        heterogeneity_evidence(d, sw.summarize_linear(d))
    with pytest.raises(sw.SummaryError, match="`unit_sd` must have shape"):
        heterogeneity_evidence(d, tree, unit_sd=np.ones(3))


def test_weak_uptake_subgroups_are_named_in_the_verdict():
    rng = np.random.default_rng(6)
    n, S = 400, 200
    X = household_covariates(n, rng)
    oil = (X["fuel"] == "oil").to_numpy()
    pi = np.where(oil, 0.02, 0.6) + np.abs(rng.normal(0, 0.01, (S, n)))  # oil homes hardly take up the offer
    d = sw.EffectDraws.from_itt(-10 * pi + rng.normal(0, 0.2, (S, n)), pi, X)
    tree = sw.summarize_tree(d, max_depth=1, columns=["fuel"])
    ev = heterogeneity_evidence(d, tree)
    assert tree.table()["weak_uptake"].sum() == 1
    assert "1 of the subgroups have weak uptake" in ev.message

"""Pre-specified groups and complier-weighted (ratio-of-sums) effects."""
import numpy as np
import pandas as pd
import pytest
from statsmodels.sandbox.regression.gmm import IV2SLS

import summarize_widgets as sw
from summarize_widgets import SummaryError, summarize_groups, summarize_tree


def _itt(n=600, S=200, seed=7):
    rng = np.random.default_rng(seed)
    X = pd.DataFrame({"age": rng.uniform(20, 80, n), "tenure": rng.choice(["owner", "renter"], n)})
    pi = np.clip(np.where(X["tenure"] == "owner", 0.6, 0.08)[None, :] + rng.normal(0, 0.03, (S, n)), 0.001, 1)
    clate = -20 + 0.3 * X["age"].to_numpy() + rng.normal(0, 3, (S, n))
    return X, clate * pi, pi, clate


def test_group_effects_equal_masked_weighted_means():
    rng = np.random.default_rng(0)
    X = pd.DataFrame({"age": rng.uniform(20, 80, 500), "region": rng.choice(list("abc"), 500)})
    T = rng.normal(size=(100, 500)) + X["age"].to_numpy() / 50
    w = rng.uniform(0.5, 1.5, 500)
    g = summarize_groups(sw.EffectDraws(T, X, weights=w), {"old": "age >= 60", "a or b": "region in ['a', 'b']"})
    tab = g.table()
    assert tab["subgroup"].tolist() == ["All units", "old", "a or b"]
    for label, mask in [("All units", np.ones(500, bool)), ("old", X.age.to_numpy() >= 60),
                        ("a or b", X.region.isin(["a", "b"]).to_numpy())]:
        # reference: numpy's weighted average per draw over the selected units
        ref = np.average(T[:, mask], weights=w[mask], axis=1)
        row = tab.set_index("subgroup").loc[label]
        assert row["mean"] == pytest.approx(ref.mean(), rel=1e-10)
        assert row["n_units"] == mask.sum()
        assert row["lower"] == pytest.approx(np.quantile(ref, 0.025), rel=1e-10)


def test_group_errors_name_the_problem():
    rng = np.random.default_rng(0)
    X = pd.DataFrame({"age": rng.uniform(20, 80, 50)})
    d = sw.EffectDraws(rng.normal(size=(10, 50)), X)
    with pytest.raises(SummaryError, match=r"Group 'rich': query 'income > 5' names 'income', which is not a column of the covariates"):
        summarize_groups(d, {"rich": "income > 5"})
    with pytest.raises(SummaryError, match=r"Group 'none': query 'age > 500' selects no units"):
        summarize_groups(d, {"none": "age > 500"})
    with pytest.raises(SummaryError, match=r"arithmetic 'age \+ 1' is not allowed"):
        summarize_groups(d, {"num": "age + 1"})
    with pytest.raises(SummaryError, match=r"non-empty mapping"):
        summarize_groups(d, {})
    with pytest.raises(SummaryError, match=r"is not a valid query"):
        summarize_groups(d, {"bad": "age >>> 3"})


def test_complier_weighted_group_is_the_wald_ratio_and_not_the_mean_of_unit_ratios():
    X, itt_y, pi, _ = _itt()
    d = sw.EffectDraws.from_itt(itt_y, pi, X)
    g = summarize_groups(d, {"owners": "tenure == 'owner'", "renters": "tenure == 'renter'"})
    for label, query in [("owners", "owner"), ("renters", "renter")]:
        m = (X["tenure"] == query).to_numpy()
        # Wald ratio inside the group, computed independently: ratio of the two mean ITTs per draw
        wald = itt_y[:, m].mean(axis=1) / pi[:, m].mean(axis=1)
        j = g.labels.index(label)
        np.testing.assert_allclose(g.group_draws[:, j], wald, rtol=1e-12)
    # with uptake varying, the plain mean of unit ratios differs
    all_ratio = (itt_y / pi).mean(axis=1)
    assert not np.allclose(g.group_draws[:, 0], all_ratio, rtol=1e-3)
    tab = g.table()
    renters = tab.set_index("subgroup").loc["renters"]
    # renters' complier share is about 0.08 by construction: low, but its posterior stays above the 0.05 floor
    assert renters["uptake_share"] == pytest.approx(pi[:, (X["tenure"] == "renter").to_numpy()].mean(), rel=1e-10)
    assert renters["uptake_lower"] > 0.05 and not bool(renters["weak_uptake"])
    assert not bool(tab.set_index("subgroup").loc["owners", "weak_uptake"])


def test_single_group_wald_ratio_equals_two_stage_least_squares():
    # Reference: statsmodels' IV2SLS. For one draw, write each unit's two potential arms as data
    # (Z=1 with (y1, d1) and Z=0 with (y0, d0)); 2SLS of Y on D instrumented by Z then equals
    # sum ITT_y / sum pi (Imbens & Rubin 2015, ch. 23: the Wald estimator is 2SLS with a binary instrument).
    rng = np.random.default_rng(11)
    n = 300
    d0 = (rng.random(n) < 0.1).astype(float)
    d1 = np.maximum(d0, (rng.random(n) < 0.5).astype(float))  # monotone: d1 >= d0
    y0 = rng.normal(10, 2, n)
    effect = rng.normal(-3, 1, n)
    y1 = y0 + effect * (d1 - d0)
    itt_y = (y1 - y0)[None, :]
    pi = (d1 - d0)[None, :]
    X = pd.DataFrame({"x": rng.normal(size=n)})
    draws = sw.EffectDraws.from_itt(np.repeat(itt_y, 2, 0), np.repeat(pi, 2, 0), X)
    g = summarize_groups(draws, {"everyone": "x == x"})
    Y = np.r_[y1, y0]
    D = np.r_[d1, d0]
    Z = np.r_[np.ones(n), np.zeros(n)]
    iv = IV2SLS(Y, np.column_stack([np.ones(2 * n), D]), np.column_stack([np.ones(2 * n), Z])).fit()
    assert g.group_draws[0, 1] == pytest.approx(iv.params[1], rel=1e-10)


def test_complier_weighted_tree_leaves_are_ratios_of_sums_and_flag_weak_uptake():
    X, itt_y, pi, _ = _itt(S=300)
    pi = pi.copy()
    renter = (X["tenure"] == "renter").to_numpy()
    pi[:, renter] = np.abs(np.random.default_rng(1).normal(0.0, 0.02, (pi.shape[0], renter.sum()))) + 1e-4
    itt_y = itt_y.copy()
    itt_y[:, renter] = pi[:, renter] * 5
    d = sw.EffectDraws.from_itt(itt_y, pi, X)
    tree = summarize_tree(d, max_depth=1, min_size=50, columns=["tenure"])
    tab = tree.table()
    for j, node in enumerate(tree.leaf_ids):
        m = tree.assign(X).to_numpy() == node
        np.testing.assert_allclose(tree.leaf_draws[:, j], itt_y[:, m].sum(1) / pi[:, m].sum(1), rtol=1e-12)
    flags = dict(zip(tab["rule"], tab["weak_uptake"]))
    assert flags == {"tenure = owner": False, "tenure = renter": True}
    assert tab.attrs["uptake_floor"] == 0.05


def test_from_itt_errors():
    X, itt_y, pi, _ = _itt(n=50, S=10)
    with pytest.raises(SummaryError, match=r"`outcome_itt` has shape \(10, 50\) but `uptake_itt` has shape \(9, 50\)"):
        sw.EffectDraws.from_itt(itt_y, pi[:9], X)
    neg = pi.copy()
    neg[0, 0] = -0.2
    with pytest.raises(SummaryError, match=r"`uptake_itt` has 1 negative values .*monotonicity"):
        sw.EffectDraws.from_itt(itt_y, neg, X)
    with pytest.raises(SummaryError, match=r"one per unit"):
        sw.EffectDraws.from_itt(itt_y, pi, X, weights=np.ones((10, 50)))

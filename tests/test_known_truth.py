"""Known truth: the demo's drivers are found, and tree-selected intervals are calibrated.

The calibration study follows the logic of simulation-based calibration (Cook, Gelman & Rubin 2006,
JCGS; Talts et al. 2018): when each replication's true effect function is drawn from the model's
prior and the posterior is exact, a 95% posterior interval covers the truth with probability 0.95
on average over replications, even for a functional chosen after seeing the data (Dawid 1994,
"Selection paradoxes of Bayesian inference"). Subgroups chosen by the tree from the posterior mean
are such functionals, so their coverage checks the whole route: exact draws -> tree on the
posterior mean -> one-pass projection -> quantile intervals.

At one fixed truth (the demo scenario, 30 replications of 2,000 households) tree-chosen subgroups
covered 87-90% (selection on the posterior mean's noise) while a pre-specified subgroup covered 93%
(28 of 30); the README's Cautions say so. That check is not a test: it measures a property of
selecting subgroups, not of this code.
"""
import numpy as np
import pandas as pd
import pytest

import summarize_widgets as sw
from summarize_widgets.datasets import simulate_retrofit_study


def test_depth_two_tree_splits_on_the_simulated_drivers():
    study = simulate_retrofit_study()  # the built-in scenario at its defaults
    tree = sw.summarize_tree(study.effect_draws(), max_depth=2)
    nodes = tree.nodes()
    split_columns = {s.split(" ")[0].strip("(") for s in nodes["split"] if s}
    assert split_columns, "the tree should split"
    assert split_columns <= set(study.drivers), (split_columns, study.drivers)
    # covariates with no effect in the simulation (region, household size, head age, floor area) are not used
    assert not split_columns & {"region", "household_size", "head_age", "floor_area"}
    # depth 2 captures a real share of the heterogeneity, more than depth 1
    r2 = tree.fit_r2_by_depth()
    assert r2.loc[r2.depth == 2, "mean"].item() > r2.loc[r2.depth == 1, "mean"].item() > 0.2


def test_complier_weighted_demo_flags_only_renter_subgroups_as_weak():
    study = simulate_retrofit_study()
    tree = sw.summarize_tree(study.complier_draws(), max_depth=2)
    tab = tree.table()
    weak = tab[tab["weak_uptake"]]
    assert len(weak) >= 1
    assert all("tenure = renter" in r for r in weak["rule"])
    assert not tab.loc[tab["rule"].str.contains("tenure = owner"), "weak_uptake"].any()
    # LATE of each subgroup = ratio of the two sums, so compare with the demo's own truth for large subgroups
    ok = tab[~tab["weak_uptake"]]
    groups = tree.assign(study.covariates).to_numpy()
    for row in ok.itertuples():
        truth = study.true_subgroup_late(groups == row.subgroup)
        assert row.lower - 3 * row.sd < truth < row.upper + 3 * row.sd


def _calibration_replication(rng, n=300, S=400, tau=1.0, sigma=1.0):
    """One replication: truth from the prior, exact Gaussian posterior draws of the effect of every unit."""
    age = rng.uniform(20, 80, n)
    fuel = rng.choice(["gas", "oil", "electric"], n)
    bill = rng.gamma(8, 15, n)
    X = pd.DataFrame({"age": age, "fuel": fuel, "bill": bill})
    a = (age - 50) / 17
    b = (bill - 120) / 40
    B = np.column_stack([np.ones(n), a, a ** 2, b, np.tanh(2 * b), fuel == "oil", fuel == "electric",
                         a * (fuel == "oil"), b * (fuel == "electric"), (age > 60).astype(float)]).astype(float)
    p = B.shape[1]
    beta = rng.normal(0, tau, p)  # truth drawn from the prior N(0, tau^2 I)
    effect = B @ beta
    y = effect + rng.normal(0, sigma, n)  # one noisy measurement of each unit's effect
    # exact conjugate posterior: Sigma = (B'B / sigma^2 + I / tau^2)^-1, mu = Sigma B'y / sigma^2 (BDA3 sec. 14.8)
    prec = B.T @ B / sigma ** 2 + np.eye(p) / tau ** 2
    L = np.linalg.cholesky(np.linalg.inv(prec))
    mu = np.linalg.solve(prec, B.T @ y / sigma ** 2)
    draws = (mu + rng.standard_normal((S, p)) @ L.T) @ B.T
    return X, effect, draws


@pytest.mark.slow
def test_tree_selected_subgroup_intervals_are_calibrated():
    # 200 replications x 4 subgroups = 800 intervals. Independent intervals would give a binomial
    # standard error of sqrt(.95 * .05 / 800) = 0.0077; intervals in one replication are correlated,
    # so we allow about 3.5 such standard errors: [0.92, 0.98]. A method whose intervals were 20% too
    # narrow would cover about 0.90 and fail.
    rng = np.random.default_rng(20261201)
    covered = total = 0
    for _ in range(200):
        X, effect, T = _calibration_replication(rng)
        tree = sw.summarize_tree(sw.EffectDraws(T, X), max_depth=2, min_size=30)
        tab = tree.table(level=0.95)
        groups = tree.assign(X).to_numpy()
        for row in tab.itertuples():
            truth = effect[groups == row.subgroup].mean()
            covered += row.lower <= truth <= row.upper
            total += 1
    rate = covered / total
    assert total >= 700
    assert 0.92 <= rate <= 0.98, rate

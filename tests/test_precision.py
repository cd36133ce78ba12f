"""One Monte Carlo precision verdict over every table (invented data; thresholds after Vehtari et al. 2021)."""
import numpy as np

import summarize_widgets as sw
from summarize_widgets.core.stats import ESS_MIN
from summarize_widgets.summaries.evidence_set import gather_evidence
from summarize_widgets.summaries.precision import precision_check

from conftest import household_covariates


def _draws(values, X):
    return sw.EffectDraws(values, X)


def _effect(X):
    return 3.0 * (X["age"].to_numpy() > 50) - 1.0


def test_well_mixed_draws_pass_with_numbers_in_the_verdict():
    rng = np.random.default_rng(1)
    X = household_covariates(300, rng)
    d = _draws(_effect(X) + rng.normal(0, 1, (2, 500, 300)), X)
    tree = sw.summarize_tree(d, max_depth=2)
    ev = gather_evidence(d, tree, linear=sw.summarize_linear(d))
    p = ev.precision
    assert p.ok and p.rows["flagged"].sum() == 0
    assert set(p.rows["summary"]) >= {"subgroups", "linear", "heterogeneity"}
    assert "meet ESS of at least 400" in p.message and "smallest ESS" in p.message
    assert ("Monte Carlo precision", p.message) in ev.messages
    assert "precision" in ev.tables()
    # The share printed is the largest mcse_mean / sd over the tables it checked.
    tab = tree.table()
    assert p.rows.loc[p.rows["summary"] == "subgroups", "max_mcse_share"].iloc[0] == np.max(tab["mcse_mean"] / tab["sd"])


def test_sticky_chain_is_flagged_and_named():
    # An AR(1) chain with rho = 0.995 has ESS about n (1 - rho) / (1 + rho) = 1000 * 0.0025 = 2.5 per unit effect,
    # far below 400 (formula for the ESS of an AR(1) chain; common knowledge of MCMC output analysis).
    rng = np.random.default_rng(2)
    X = household_covariates(200, rng)
    e = np.empty((1000, 200))
    e[0] = rng.normal(size=200)
    for t in range(1, 1000):
        e[t] = 0.995 * e[t - 1] + np.sqrt(1 - 0.995 ** 2) * rng.normal(size=200)
    d = _draws(_effect(X) + e, X)
    p = gather_evidence(d, sw.summarize_tree(d, max_depth=2)).precision
    assert not p.ok
    assert p.rows.loc[p.rows["summary"] == "subgroups", "flagged"].iloc[0] >= 1
    assert p.rows["min_ess_bulk"].min() < ESS_MIN
    assert "fall short of" in p.message and "ESS" in p.message and "subgroups S" in p.message


def test_chains_that_disagree_are_flagged_by_rhat():
    rng = np.random.default_rng(3)
    X = household_covariates(200, rng)
    v = _effect(X) + rng.normal(0, 1, (2, 800, 200))
    v[1] += 0.5  # the second chain sits elsewhere: R-hat well above 1.01
    d = _draws(v, X)
    p = gather_evidence(d, sw.summarize_tree(d, max_depth=2)).precision
    assert not p.ok and p.rows["max_rhat"].max() > 1.01
    assert "R-hat" in p.message


def test_tables_without_mc_columns_are_skipped_and_said():
    import pandas as pd

    p = precision_check({"plain": pd.DataFrame({"mean": [1.0]})})
    assert p.rows.empty and "not checked" in p.message

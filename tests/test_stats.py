"""The statistics core: every table's columns, and Monte Carlo error checked against arviz-stats
and against the published autocorrelation formula."""
import numpy as np
import pandas as pd
import pytest
from arviz_stats.base import array_stats  # the maintained reference implementation

import summarize_widgets as sw
from conftest import draws_around, household_covariates
from summarize_widgets.core.stats import ESS_MIN, MC_COLUMNS, RHAT_MAX, STAT_COLUMNS, mc_diagnostics, summary_columns
from summarize_widgets.export import summary_tables
from summarize_widgets.summaries.additive import CURVE_COLUMNS, MISSING_COLUMNS
from summarize_widgets.summaries.base import FIT_COLUMNS
from summarize_widgets.summaries.linear import LINEAR_COLUMNS
from summarize_widgets.summaries.subgroups import CONTRAST_COLUMNS, SUBGROUP_COLUMNS, UPTAKE_COLUMNS


def _ar1(rng, n_chains, per_chain, k, rho):
    x = np.empty((n_chains, per_chain, k))
    x[:, 0] = rng.normal(size=(n_chains, k))
    e = rng.normal(size=(n_chains, per_chain, k)) * np.sqrt(1 - rho**2)
    for t in range(1, per_chain):
        x[:, t] = rho * x[:, t - 1] + e[:, t]
    return x


def test_ess_rhat_mcse_equal_arviz_stats_on_chain_major_draws():
    # Draws are stored chain-major (S = chains x draws); the core must hand arviz-stats the
    # (chain, draw) layout, not a scrambled one: equal to arviz-stats on the same array.
    rng = np.random.default_rng(0)
    x = _ar1(rng, 4, 300, 3, 0.6)
    stacked = x.reshape(4 * 300, 3)
    got = mc_diagnostics(stacked, n_chains=4)
    np.testing.assert_allclose(got["ess_bulk"], array_stats.ess(x, chain_axis=0, draw_axis=1, method="bulk"), rtol=1e-12)
    np.testing.assert_allclose(got["ess_tail"], array_stats.ess(x, chain_axis=0, draw_axis=1, method="tail",
                                                                prob=(0.05, 0.95)), rtol=1e-12)
    np.testing.assert_allclose(got["rhat"], array_stats.rhat(x, chain_axis=0, draw_axis=1), rtol=1e-12)
    np.testing.assert_allclose(got["mcse_mean"], array_stats.mcse(x, chain_axis=0, draw_axis=1), rtol=1e-12)
    cols = summary_columns(stacked, level=0.9, n_chains=4)
    np.testing.assert_allclose(cols["mcse_lower"], array_stats.mcse(x, chain_axis=0, draw_axis=1, method="quantile",
                                                                    prob=0.05), rtol=1e-12)
    np.testing.assert_allclose(cols["mcse_upper"], array_stats.mcse(x, chain_axis=0, draw_axis=1, method="quantile",
                                                                    prob=0.95), rtol=1e-12)
    # A wrong chain layout (draw-major) would give different numbers: the check can fail.
    assert not np.allclose(mc_diagnostics(x.transpose(1, 0, 2).reshape(1200, 3), n_chains=4)["rhat"], got["rhat"])


def test_bulk_ess_of_an_ar1_chain_matches_the_published_formula():
    # For a stationary AR(1) chain, ESS = n (1 - rho) / (1 + rho) (Geyer 1992; e.g. Vehtari et al.
    # 2021, section 3.2). With rho = 0.5 and 4 x 5,000 draws: 20,000 / 3 = 6,667.
    rng = np.random.default_rng(1)
    x = _ar1(rng, 4, 5000, 4, 0.5).reshape(20000, 4)
    ess = mc_diagnostics(x, n_chains=4)["ess_bulk"]
    np.testing.assert_allclose(ess, 20000 / 3, rtol=0.12)


def test_chain_and_precision_problems_are_flagged_in_every_subgroup_table():
    # Thresholds per Vehtari et al. (2021): R-hat > 1.01, ESS < 400.
    rng = np.random.default_rng(2)
    n, per = 200, 300
    X = pd.DataFrame({"age": np.linspace(20, 80, n)})
    good = rng.normal(size=(4 * per, n)) + X["age"].to_numpy() / 20
    ok = sw.summarize_tree(sw.EffectDraws(good, X, chains=4), max_depth=1, min_size=50).table()
    assert (ok["mc_warning"] == "").all() and (ok["rhat"] < RHAT_MAX).all() and (ok["ess_bulk"] > ESS_MIN).all()
    shifted = good.copy()
    shifted[:per] += 3.0  # chain 1 sits elsewhere: the chains disagree
    bad = sw.summarize_tree(sw.EffectDraws(shifted, X, chains=4), max_depth=1, min_size=50).table()
    assert (bad["rhat"] > RHAT_MAX).all()
    assert bad["mc_warning"].str.contains("R-hat").all()
    few = sw.summarize_groups(sw.EffectDraws(good[:160], X, chains=4), {"old": "age >= 50"}).table()
    assert few["mc_warning"].str.contains(f"< {ESS_MIN}").all()


def _every_table(d, groups=True):
    tree = sw.summarize_tree(d, max_depth=2, min_size=40)
    lin = sw.summarize_linear(d)
    add = sw.summarize_additive(d, lam=1.0)
    out = {
        "tree.table": (tree.table(), SUBGROUP_COLUMNS),
        "tree.nodes": (tree.nodes(), ("node", "label", "parent", "depth", "split", "rule", "is_leaf", "n_units", "share",
                                      *STAT_COLUMNS, *MC_COLUMNS)),
        "tree.contrasts": (tree.contrasts(), CONTRAST_COLUMNS),
        "tree.fit_r2_by_depth": (tree.fit_r2_by_depth(), ("depth", "n_subgroups", *FIT_COLUMNS)),
        "linear.table": (lin.table(), LINEAR_COLUMNS),
        "additive.curves": (add.curves(), CURVE_COLUMNS),
        "additive.missing_effects": (add.missing_effects(), MISSING_COLUMNS),
    }
    if groups:
        g = sw.summarize_groups(d, {"older": "age >= 50"})
        out["groups.table"] = (g.table(), SUBGROUP_COLUMNS)
        out["groups.contrasts"] = (g.contrasts(), CONTRAST_COLUMNS)
    return out


def _data(n=300, S=80, seed=3):
    rng = np.random.default_rng(seed)
    X = household_covariates(n, rng, n_missing_rooms=20)
    return X, draws_around(X["age"].to_numpy() / 30, S, rng, noise=1.0, shared=0.0), rng


def test_every_table_of_every_summary_has_the_documented_columns():
    X, T, _ = _data()
    for name, (tab, columns) in _every_table(sw.EffectDraws(T, X, chains=2)).items():
        assert list(tab.columns) == list(columns), name
        assert len(tab) > 0, name


def test_complier_tables_add_the_uptake_columns():
    X, T, rng = _data()
    pi = rng.uniform(0.2, 0.9, T.shape)
    d = sw.EffectDraws.from_itt(T * pi, pi, X)
    tables = _every_table(d)
    for name in ("tree.table", "groups.table"):
        tab, columns = tables[name]
        assert list(tab.columns) == [*columns, *UPTAKE_COLUMNS], name
        assert (tab["uptake_lower"] <= tab["uptake_share"]).all() and (tab["uptake_share"] <= tab["uptake_upper"]).all()


def test_group_tables_carry_the_draws_label_in_exported_captions():
    X, T, _ = _data()
    d = sw.EffectDraws(T, X, label="bill saving")
    tables = summary_tables(groups=sw.summarize_groups(d, {"older": "age >= 50"}))
    assert "bill saving" in tables["groups"][1]
    assert sw.summarize_groups(d, {"older": "age >= 50"}).label == "bill saving"


def test_summarize_groups_level_argument_is_deprecated():
    X, T, _ = _data()
    with pytest.warns(DeprecationWarning, match="level"):
        sw.summarize_groups(sw.EffectDraws(T, X), {"older": "age >= 50"}, 0.9)


def test_old_spellings_warn_and_still_work():
    X, T, _ = _data()
    tree = sw.summarize_tree(sw.EffectDraws(T, X), max_depth=2, min_size=40)
    assert tree.depth == 2 and isinstance(tree.depth, int)
    with pytest.warns(DeprecationWarning, match="at_depth"):
        old = tree.depth(1)
    pd.testing.assert_frame_equal(old.table(), tree.at_depth(1).table())
    with pytest.warns(DeprecationWarning, match="current_depth"):
        assert tree.current_depth == 2


def test_tables_reuse_their_monte_carlo_error_at_a_level_already_computed(monkeypatch):
    """A table read again at the same level and interval type (the report, then the evidence's
    precision verdict) makes no new arviz call, and gives the same numbers; a new level does."""
    from summarize_widgets.core import stats as core_stats

    rng = np.random.default_rng(3)
    X = household_covariates(300, rng)
    draws = sw.EffectDraws(draws_around(np.where(X["age"] > 50, 2.0, 0.0), 200, rng), X)
    tree = sw.summarize_tree(draws, max_depth=2)
    first = tree.table(level=0.9)
    calls = []
    real = core_stats.mc_error
    monkeypatch.setattr(core_stats, "mc_error", lambda *a, **k: calls.append(1) or real(*a, **k))
    again = tree.table(level=0.9)
    pd.testing.assert_frame_equal(first, again)
    assert calls == []
    other = tree.table(level=0.8)
    assert calls and not np.allclose(other["lower"], first["lower"])


def test_a_node_table_after_the_subgroup_table_computes_only_the_inner_nodes(monkeypatch):
    """The columns kept per node, level and interval type are reused one by one: the node table
    read after the subgroup table at that setting computes the inner nodes only, with the same
    numbers as a node table computed from nothing."""
    from summarize_widgets.summaries import base

    rng = np.random.default_rng(4)
    X = household_covariates(400, rng)
    draws = sw.EffectDraws(draws_around(np.where(X["age"] > 50, 2.0, 0.0) + 0.02 * X["age"], 200, rng), X)
    fresh = sw.summarize_tree(draws, max_depth=3).nodes(level=0.9, interval="highest-density")
    tree = sw.summarize_tree(draws, max_depth=3)
    widths = []
    real = base.summary_columns
    monkeypatch.setattr(base, "summary_columns", lambda theta, **k: widths.append(theta.shape[1]) or real(theta, **k))
    table = tree.table(level=0.9, interval="highest-density")
    nodes = tree.nodes(level=0.9, interval="highest-density")
    n_leaves, n_nodes = len(table), len(nodes)
    assert n_nodes > n_leaves > 1
    assert widths == [n_leaves, n_nodes - n_leaves]
    pd.testing.assert_frame_equal(nodes, fresh)
    tree.nodes(level=0.9, interval="highest-density")  # everything known: nothing computed
    assert widths == [n_leaves, n_nodes - n_leaves]

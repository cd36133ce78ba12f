"""One suite of invariants run over every summary type (tree, additive, linear; groups where they apply).

Each invariant follows from the summary being a fixed projection applied to every draw
(docs/method.md section 2): properties of least squares, not of any implementation.
"""
import numpy as np
import pandas as pd
import pytest

import summarize_widgets as sw
from conftest import WEIGHT_DESIGNS, draws_around, weighted_draws

SUMMARIES = {
    "tree": lambda d: sw.summarize_tree(d, max_depth=3, min_size=40),
    "additive": lambda d: sw.summarize_additive(d, lam=1.0),
    "linear": lambda d: sw.summarize_linear(d),
}


def _covariates(n, rng):
    X = pd.DataFrame({
        "age": rng.uniform(20, 80, n),
        "income": rng.lognormal(10, 0.4, n),
        "fuel": rng.choice(["gas", "oil", "electric"], n),
        "owner": rng.random(n) < 0.6,
    })
    X.loc[rng.random(n) < 0.05, "income"] = np.nan
    return X


def _draws(kind="plain", S=120, n=400, seed=0, dtype=np.float64):
    rng = np.random.default_rng(seed)
    X = _covariates(n, rng)
    f = np.sin(X["age"].to_numpy() / 12) + np.where(X["fuel"] == "oil", 1.0, 0.0) + 0.5 * X["owner"].to_numpy()
    T = draws_around(f, S, rng, dtype=dtype)
    return weighted_draws(kind, T, X, rng)


KINDS = list(WEIGHT_DESIGNS)


@pytest.mark.parametrize("name", SUMMARIES)
@pytest.mark.parametrize("kind", KINDS)
def test_r2_between_zero_and_one(name, kind):
    d, _, _ = _draws(kind)
    r2 = SUMMARIES[name](d).fit_r2
    assert r2.shape == (d.n_draws,)
    assert np.all((r2 >= 0) & (r2 <= 1))


@pytest.mark.parametrize("name", SUMMARIES)
@pytest.mark.parametrize("kind", ["plain", "unit-weights"])
def test_weighted_mean_of_fitted_values_is_the_overall_effect(name, kind):
    # With an intercept (or a partition) in the design, least-squares fitted values keep the weighted mean.
    d, T, w = _draws(kind)
    fitted = SUMMARIES[name](d).fitted_values()
    weights = np.ones(T.shape[1]) if w is None else w
    np.testing.assert_allclose(fitted @ weights / weights.sum(), d.overall, rtol=1e-9, atol=1e-9)
    np.testing.assert_allclose(d.overall, np.average(T, weights=weights, axis=1), rtol=1e-12)


def test_tree_subgroup_effects_average_to_the_overall_effect_with_every_kind_of_weight():
    # Per draw, the weight-share-weighted mean of subgroup effects equals the overall effect
    # (a ratio of sums splits exactly over a partition), for every kind of weight.
    for kind in KINDS:
        d, T, w = _draws(kind)
        tree = sw.summarize_tree(d, max_depth=2, min_size=40)
        groups = tree.assign(d.covariates).to_numpy()
        if w is None:
            W = np.ones_like(T)
        else:
            W = np.broadcast_to(w, T.shape)
        Wl = np.column_stack([W[:, groups == g].sum(1) for g in tree.leaf_ids])
        np.testing.assert_allclose((tree.leaf_draws * Wl).sum(1) / Wl.sum(1), d.overall, rtol=1e-10)
        g = sw.summarize_groups(d, {"all again": "age == age"})
        np.testing.assert_allclose(g.group_draws[:, 0], d.overall, rtol=1e-10)


@pytest.mark.parametrize("name", SUMMARIES)
@pytest.mark.parametrize("kind", ["plain", "unit-weights"])
def test_projecting_a_projection_changes_nothing(name, kind):
    d, T, w = _draws(kind, S=40)
    first = SUMMARIES[name](d)
    fitted = first.fitted_values()
    again_draws = sw.EffectDraws(fitted, d.covariates, weights=w)
    if name == "tree":
        # the tree refitted to its own fitted values finds the same partition
        again = sw.summarize_tree(again_draws, max_depth=3, min_size=40)
        np.testing.assert_allclose(again.fitted_values(), fitted, rtol=1e-9, atol=1e-9)
    else:
        again = SUMMARIES[name](again_draws)
        # additive: a penalized smoother shrinks, so only the linear projection is idempotent;
        # with the same frozen smoother the fit of a fit moves less than the first fit did.
        if name == "linear":
            np.testing.assert_allclose(again.fitted_values(), fitted, rtol=1e-8, atol=1e-8)
            np.testing.assert_allclose(again.fit_r2, 1.0, atol=1e-9)
        else:
            moved_again = np.abs(again.fitted_values() - fitted).max()
            moved_first = np.abs(fitted - T).max()
            assert moved_again < moved_first
    if name == "tree":
        np.testing.assert_allclose(again.fit_r2, 1.0, atol=1e-9)


@pytest.mark.parametrize("name", SUMMARIES)
def test_adding_a_constant_shifts_effects_and_keeps_r2(name):
    d, T, _ = _draws("plain", S=60)
    base = SUMMARIES[name](d)
    shifted = SUMMARIES[name](sw.EffectDraws(T + 1000.0, d.covariates))
    # rtol 1e-8: the additive smoother keeps pygam's tiny ridge (sqrt(machine eps)) on every coefficient,
    # the intercept included, so a constant of 1000 is reproduced to about 1e-9 relative, not exactly.
    np.testing.assert_allclose(shifted.fitted_values(), base.fitted_values() + 1000.0, rtol=1e-8)
    np.testing.assert_allclose(shifted.fit_r2, base.fit_r2, rtol=1e-6, atol=1e-9)


@pytest.mark.parametrize("name", SUMMARIES)
def test_float32_and_float64_give_the_same_summary(name):
    d64, T, _ = _draws("plain", S=60)
    d32 = sw.EffectDraws(T.astype(np.float32), d64.covariates)
    a, b = SUMMARIES[name](d64), SUMMARIES[name](d32)
    np.testing.assert_allclose(b.fitted_values(), a.fitted_values(), rtol=1e-5, atol=1e-5)
    np.testing.assert_allclose(b.fit_r2, a.fit_r2, rtol=1e-4, atol=1e-6)


@pytest.mark.parametrize("name", SUMMARIES)
def test_every_summary_records_its_settings(name):
    d, _, _ = _draws("plain", S=20)
    s = SUMMARIES[name](d)
    assert s.settings["summary"] == name and s.settings["n_draws"] == 20


@pytest.mark.parametrize("name", SUMMARIES)
def test_constant_effect_makes_r2_undefined_with_a_message(name):
    d, T, _ = _draws("plain", S=20)
    flat = sw.EffectDraws(np.full_like(T, -4.0), d.covariates)
    with pytest.raises(sw.SummaryError, match="R\\^2 is undefined"):
        SUMMARIES[name](flat).fit_r2

"""Linear summary: projections, R^2, intervals and errors checked against outside references."""
import numpy as np
import pytest
import statsmodels.api as sm

import summarize_widgets as sw
from conftest import draws_around, household_covariates
from summarize_widgets import SummaryError
from summarize_widgets.core.design import classify_columns, linear_design
from summarize_widgets.summaries.linear import LINEAR_COLUMNS, summarize_linear


def _data(n=500, S=200, seed=3, dtype=np.float64, offset=0.0):
    """Simulated bill changes after a home energy retrofit: effect drifts with age, fuel and size."""
    rng = np.random.default_rng(seed)
    X = household_covariates(n, rng)
    f = -0.02 * X["age"].to_numpy() - 0.6 * (X["fuel"] == "oil").to_numpy() - 0.1 * np.nan_to_num(X["rooms"].to_numpy(), nan=4)
    return draws_around(offset + f, S, rng, dtype=dtype), X


def _design(X, columns=None):
    specs = classify_columns(X, list(X.columns) if columns is None else columns)
    B, terms, _ = linear_design(X, specs)
    return B, terms


def _rel(a, b):
    return np.max(np.abs(a - b)) / np.max(np.abs(b))


@pytest.mark.parametrize("weights", ["none", "unit"])
def test_coefficients_equal_statsmodels_wls_per_draw(weights):
    # Reference: statsmodels WLS refitted to each draw with the same design and weights wbar.
    T, X = _data()
    w = None
    if weights == "unit":
        w = np.random.default_rng(9).uniform(0.2, 3.0, T.shape[1])
        w[:7] = 0.0  # zero-weight units take no part
    d = sw.EffectDraws(T, X, weights=w)
    lin = summarize_linear(d)
    B, terms = _design(X)
    assert lin.terms == terms
    ww = np.ones(T.shape[1]) if w is None else w
    for s in (0, 17, 199):
        ref = sm.WLS(T[s], B, weights=ww).fit()
        np.testing.assert_allclose(lin.coef_draws[s], ref.params, rtol=1e-8, atol=1e-10)
        # statsmodels' WLS rsquared is 1 - SSR/centered TSS with the weights (its documented definition)
        np.testing.assert_allclose(lin.fit_r2[s], ref.rsquared, rtol=1e-8)


def test_per_draw_weights_equal_wls_on_pseudo_values():
    # Definition (linear.py docstring): WLS of Y_s = w_s T_s / wbar with weights wbar = mean_s w_s,
    # checked against statsmodels WLS on those pseudo-values.
    T, X = _data()
    rng = np.random.default_rng(4)
    W = rng.uniform(0.1, 2.0, T.shape)
    W[:, :5] = 0.0  # units never weighted: left out
    d = sw.EffectDraws(T, X, weights=W)
    lin = summarize_linear(d)
    B, _ = _design(X)
    wbar = W.mean(axis=0)
    keep = wbar > 0
    for s in (0, 50, 123):
        Y = W[s, keep] * T[s, keep] / wbar[keep]
        ref = sm.WLS(Y, B[keep], weights=wbar[keep]).fit()
        np.testing.assert_allclose(lin.coef_draws[s], ref.params, rtol=1e-8, atol=1e-10)
        np.testing.assert_allclose(lin.fit_r2[s], ref.rsquared, rtol=1e-8)


def test_complier_weighted_draws_use_outcome_itt_over_mean_uptake():
    # Complier weighting: wt = outcome ITT, w = uptake ITT, so Y_s = ITT_y,s / pibar (numerator only),
    # checked against statsmodels WLS with weights pibar.
    T, X = _data()
    rng = np.random.default_rng(8)
    pi = np.clip(0.5 + 0.3 * (X["fuel"] == "gas").to_numpy() + rng.normal(0, 0.05, T.shape), 0.01, 1)
    itt = pi * T
    d = sw.EffectDraws.from_itt(itt, pi, X)
    lin = summarize_linear(d)
    B, _ = _design(X)
    pibar = pi.mean(axis=0)
    for s in (3, 77):
        ref = sm.WLS(itt[s] / pibar, B, weights=pibar).fit()
        np.testing.assert_allclose(lin.coef_draws[s], ref.params, rtol=1e-8, atol=1e-10)
        np.testing.assert_allclose(lin.fit_r2[s], ref.rsquared, rtol=1e-8)
    assert lin.settings["complier_weighted"] is True


def test_fit_r2_equals_definition_from_residuals():
    # Definition (docs/method.md section 3, pseudo-values): R2 = 1 - sum wbar (Y - fit)^2 / sum wbar (Y - Ybar)^2,
    # computed here directly from numpy residuals, with per-draw weights.
    T, X = _data(S=60)
    W = np.random.default_rng(1).uniform(0.5, 1.5, T.shape)
    d = sw.EffectDraws(T, X, weights=W)
    lin = summarize_linear(d)
    wbar = W.mean(axis=0)
    Y = W * T / wbar
    fit = lin.fitted_values()
    ybar = (Y * wbar).sum(axis=1) / wbar.sum()
    sse = ((Y - fit) ** 2 * wbar).sum(axis=1)
    sst = ((Y - ybar[:, None]) ** 2 * wbar).sum(axis=1)
    np.testing.assert_allclose(lin.fit_r2, 1 - sse / sst, rtol=1e-8)
    assert ((lin.fit_r2 >= 0) & (lin.fit_r2 <= 1)).all()


def test_centring_keeps_r2_exact_with_a_large_offset():
    # Adding 1e4 to every effect changes only the intercept; R^2 must not suffer from cancellation.
    T, X = _data(S=40)
    base = summarize_linear(sw.EffectDraws(T, X))
    shifted = summarize_linear(sw.EffectDraws(T + 1e4, X))
    np.testing.assert_allclose(shifted.fit_r2, base.fit_r2, rtol=1e-8)
    np.testing.assert_allclose(shifted.coef_draws[:, 1:], base.coef_draws[:, 1:], rtol=1e-7, atol=1e-9)
    np.testing.assert_allclose(shifted.coef_draws[:, 0] - 1e4, base.coef_draws[:, 0], rtol=1e-7)


def test_projection_is_idempotent():
    # Projecting projected draws changes nothing and leaves no residual (R^2 = 1).
    T, X = _data(S=30)
    lin = summarize_linear(sw.EffectDraws(T, X))
    again = summarize_linear(sw.EffectDraws(lin.fitted_values(), X))
    np.testing.assert_allclose(again.coef_draws, lin.coef_draws, rtol=1e-9, atol=1e-11)
    np.testing.assert_allclose(again.fit_r2, 1.0, atol=1e-9)


@pytest.mark.parametrize("weights", ["none", "unit"])
def test_weighted_mean_of_fitted_values_is_the_overall_effect(weights):
    # With fixed weights the intercept makes the weighted mean of the fitted values equal the
    # weighted mean of each draw (the normal equation of the constant column).
    T, X = _data(S=50)
    w = None if weights == "none" else np.random.default_rng(2).uniform(0.2, 2.0, T.shape[1])
    d = sw.EffectDraws(T, X, weights=w)
    fit = summarize_linear(d).fitted_values()
    ww = np.ones(T.shape[1]) if w is None else w
    np.testing.assert_allclose((fit * ww).sum(axis=1) / ww.sum(), d.overall, rtol=1e-10, atol=1e-12)


def test_float32_and_float64_agree():
    T, X = _data()
    a = summarize_linear(sw.EffectDraws(T, X))
    b = summarize_linear(sw.EffectDraws(T.astype(np.float32), X))
    np.testing.assert_allclose(b.coef_draws, a.coef_draws, rtol=1e-5, atol=1e-6)
    np.testing.assert_allclose(b.fit_r2, a.fit_r2, rtol=1e-5)


@pytest.mark.parametrize("kind", ["equal-tailed", "highest-density"])
def test_table_intervals_against_numpy(kind):
    T, X = _data()
    lin = summarize_linear(sw.EffectDraws(T, X))
    tab = lin.table(level=0.9, interval=kind)
    assert list(tab.columns) == list(LINEAR_COLUMNS)
    assert tab.attrs["level"] == 0.9 and tab.attrs["interval"] == kind
    assert tab.attrs["reference"] == {"fuel": "gas"}
    G = lin.coef_draws
    np.testing.assert_allclose(tab["mean"], G.mean(axis=0))
    np.testing.assert_allclose(tab["sd"], G.std(axis=0, ddof=1))
    np.testing.assert_allclose(tab["prob_positive"], (G > 0).mean(axis=0))
    if kind == "equal-tailed":
        # numpy's default (linear, Hyndman & Fan type 7) quantiles at 5% and 95%
        lo, hi = np.quantile(G, [0.05, 0.95], axis=0)
    else:
        # shortest window holding ceil(0.9 * S) sorted draws, found by brute force here
        k = int(np.ceil(0.9 * G.shape[0]))
        srt = np.sort(G, axis=0)
        widths = srt[k - 1:] - srt[: G.shape[0] - k + 1]
        j = widths.argmin(axis=0)
        lo = srt[j, np.arange(G.shape[1])]
        hi = srt[j + k - 1, np.arange(G.shape[1])]
    np.testing.assert_allclose(tab["lower"], lo)
    np.testing.assert_allclose(tab["upper"], hi)
    # the simulated oil effect is clearly negative
    assert tab.set_index("term").loc["fuel = oil", "upper"] < 0


def test_settings_columns_and_progress():
    T, X = _data(S=20)
    calls = []
    lin = summarize_linear(sw.EffectDraws(T, X), columns=["age", "fuel"], progress=lambda k, n: calls.append((k, n)))
    assert lin.terms == ["(intercept)", "age", "fuel = heat pump", "fuel = oil"]
    assert lin.settings["summary"] == "linear" and lin.settings["columns"] == ["age", "fuel"]
    assert calls and calls[-1][0] == calls[-1][1]
    assert lin.fill == {}
    assert "rooms" in summarize_linear(sw.EffectDraws(T, X)).fill


# -- errors ---------------------------------------------------------------------------------

def test_rank_deficient_design_names_the_columns():
    T, X = _data(S=10)
    X = X.assign(age_copy=X["age"])
    with pytest.raises(SummaryError, match=r"rank-deficient.*'age'.*'age_copy'"):
        summarize_linear(sw.EffectDraws(T, X))


def test_column_constant_among_weighted_units_is_rank_deficient():
    T, X = _data(S=10)
    w = np.ones(T.shape[1])
    X = X.assign(flag=np.where(np.arange(len(X)) < 5, 1.0, 0.0))
    w[:5] = 0.0  # the only units with flag = 1 have zero weight
    with pytest.raises(SummaryError, match=r"'flag'.*zero for every unit with positive weight"):
        summarize_linear(sw.EffectDraws(T, X, weights=w))


def test_bad_columns_are_named():
    T, X = _data(S=10)
    with pytest.raises(SummaryError, match=r"`columns` names covariates that are not in the covariate table: 'tenure'"):
        summarize_linear(sw.EffectDraws(T, X), columns=["age", "tenure"])
    with pytest.raises(SummaryError, match=r"Covariate 'region' has a single value \('north'\)"):
        summarize_linear(sw.EffectDraws(T, X.assign(region="north")))
    with pytest.raises(SummaryError, match=r"Covariate 'income' has no observed values"):
        summarize_linear(sw.EffectDraws(T, X.assign(income=np.nan)))
    with pytest.raises(SummaryError, match=r"`draws` must be an EffectDraws"):
        summarize_linear(T)


def test_constant_effect_has_undefined_r2():
    T, X = _data(S=10)
    const = np.repeat(np.linspace(-1, 1, 10)[:, None], T.shape[1], axis=1)
    lin = summarize_linear(sw.EffectDraws(const, X))
    with pytest.raises(SummaryError, match=r"Summary R\^2 is undefined: every posterior draw has the same effect"):
        lin.fit_r2
    # only some draws constant: NaN there, and a note says how many
    mixed = T.copy()
    mixed[:3] = 0.25
    lin = summarize_linear(sw.EffectDraws(mixed, X))
    r2 = lin.fit_r2
    assert np.isnan(r2[:3]).all() and np.isfinite(r2[3:]).all()
    assert lin.fit_r2_note.startswith("3 of 10 draws have no heterogeneity")
    assert summarize_linear(sw.EffectDraws(T, X)).fit_r2_note == ""


def test_bad_level_and_interval_are_named():
    T, X = _data(S=10)
    lin = summarize_linear(sw.EffectDraws(T, X))
    with pytest.raises(SummaryError, match=r"`level` must be a number strictly between 0 and 1"):
        lin.table(level=95)
    with pytest.raises(SummaryError, match=r"`interval` must be one of"):
        lin.table(interval="hpd")


def test_per_draw_weights_fix_the_denominator_at_its_posterior_mean():
    # Documented behaviour (summarize_linear Notes): with per-draw weights the wbar-weighted mean of the
    # fitted values is sum_i w_si T_si / sum_i wbar_i, not the per-draw ratio EffectDraws.overall.
    T, X = _data(S=40)
    W = np.random.default_rng(12).uniform(0.2, 2.0, T.shape)
    d = sw.EffectDraws(T, X, weights=W)
    fit = summarize_linear(d).fitted_values()
    wbar = W.mean(axis=0)
    mean_fit = (fit * wbar).sum(axis=1) / wbar.sum()
    np.testing.assert_allclose(mean_fit, (W * T).sum(axis=1) / wbar.sum(), rtol=1e-10)
    assert np.abs(mean_fit - d.overall).max() > 1e-4  # the two differ when weights vary by draw


@pytest.mark.parametrize("weights", ["none", "unit"])
def test_standardized_coefficients_equal_statsmodels_wls_on_standardized_columns(weights):
    # Reference: statsmodels WLS refitted to each draw on a design whose numeric columns are
    # standardized, (x - weighted mean) / weighted SD (divisor: the summed weight), dummies and
    # missing indicators as they are. Its slopes are the per-SD coefficients and its intercept is
    # the effect at the means with every category at its reference (docs/method.md section 4).
    T, X = _data()
    w = None
    if weights == "unit":
        w = np.random.default_rng(9).uniform(0.2, 3.0, T.shape[1])
        w[:7] = 0.0
    d = sw.EffectDraws(T, X, weights=w)
    lin = summarize_linear(d)
    B, terms = _design(X)
    wbar = d.mean_weights
    keep = wbar > 0
    Z = B[keep].copy()
    numeric = [j for j, t in enumerate(terms) if t in ("age", "rooms", "income")]
    assert numeric, terms
    for j in numeric:
        m = np.average(Z[:, j], weights=wbar[keep])
        Z[:, j] = (Z[:, j] - m) / np.sqrt(np.average((Z[:, j] - m) ** 2, weights=wbar[keep]))
    ref = np.array([sm.WLS(T[s, keep], Z, weights=wbar[keep]).fit().params for s in range(0, T.shape[0], 10)])
    std = lin.standardized_draws()[::10]
    assert _rel(std, ref) < 1e-9
    tab = lin.table()
    assert list(tab.columns) == list(LINEAR_COLUMNS)
    assert np.allclose(tab["std_mean"], lin.standardized_draws().mean(axis=0), rtol=1e-12, atol=1e-12)
    # the SD column says which scale: each numeric term's SD, NaN for the intercept and the switches
    for j, t in enumerate(terms):
        if j in numeric:
            assert tab["per_sd"].iloc[j] == pytest.approx(lin.spread[t])
            # slopes: a positive rescaling, so P(>0) is unchanged
            assert tab["std_prob_positive"].iloc[j] == tab["prob_positive"].iloc[j]
        else:
            assert np.isnan(tab["per_sd"].iloc[j])
            if j > 0:
                assert tab["std_mean"].iloc[j] == pytest.approx(tab["mean"].iloc[j])
    assert tab.attrs["standardized"] == "sd"

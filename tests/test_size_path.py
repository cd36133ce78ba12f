"""Summary-size paths: nested linear summaries and tree depths (invented data)."""
import numpy as np
import pytest

import summarize_widgets as sw
from summarize_widgets.core.design import classify_columns, linear_design
from summarize_widgets.summaries.size_path import linear_size_path, term_order, tree_size_path

from conftest import household_covariates


def _study(S=60, n=400, seed=20):
    rng = np.random.default_rng(seed)
    X = household_covariates(n, rng)
    X["noise"] = rng.normal(size=n)
    X["income"] = 1e5 + 1e3 * rng.normal(size=n)  # far from zero and large: the path must keep its digits
    f = 0.08 * X["age"].to_numpy() + 1.5 * (X["fuel"] == "oil").to_numpy() + 0.05 * np.nan_to_num(X["rooms"].to_numpy())
    return rng, X, f


def _explicit_r2(draws, X, terms_in_order, columns):
    """R^2 of refitting each nested set to each draw: numpy lstsq on sqrt(wbar)-scaled pseudo-values."""
    specs = classify_columns(X, columns)
    B, terms, _ = linear_design(X, specs)
    wbar = draws.mean_weights
    keep = wbar > 0
    w = wbar[keep]
    if draws.is_complier_weighted:
        v = draws.weights if draws.weights is not None else np.ones(draws.n_units)
        wt = draws.values * v
    elif draws.weights is None:
        wt = draws.values
    else:
        wt = draws.values * draws.weights
    Y = wt[:, keep] / w  # the linear summary's pseudo-values (linear.py module notes)
    idx = [terms.index(t) for t in terms_in_order]
    out = np.empty((draws.n_draws, len(idx) + 1))
    sw_ = np.sqrt(w)
    for s in range(draws.n_draws):
        y = Y[s]
        m = (w @ y) / w.sum()
        sst = w @ (y - m) ** 2
        for k in range(len(idx) + 1):
            D = B[keep][:, [0, *idx[:k]]]
            beta = np.linalg.lstsq(sw_[:, None] * D, sw_ * y, rcond=None)[0]
            out[s, k] = 1.0 - w @ (y - D @ beta) ** 2 / sst
    return out


@pytest.mark.parametrize("kind", ["plain", "unit weights", "draw weights", "complier"])
def test_linear_path_equals_explicit_projections(kind):
    rng, X, f = _study()
    S, n = 60, len(X)
    T = f + rng.normal(0, 0.5, (S, n)) + rng.normal(0, 0.2, (S, 1))
    if kind == "plain":
        d = sw.EffectDraws(T, X)
    elif kind == "unit weights":
        d = sw.EffectDraws(T, X, weights=rng.uniform(0.2, 3, n))
    elif kind == "draw weights":
        d = sw.EffectDraws(T, X, weights=rng.uniform(0.2, 3, (S, n)))
    else:
        pi = rng.uniform(0.1, 0.9, (S, n))
        d = sw.EffectDraws.from_itt(T * pi, pi, X, weights=rng.uniform(0.5, 2, n))
    cols = ["age", "fuel", "rooms", "noise", "income"]
    lin = sw.summarize_linear(d, columns=cols)
    path = linear_size_path(d, lin)
    ref = _explicit_r2(d, X, path.steps[1:], cols)
    np.testing.assert_allclose(path.r2_draws, ref, atol=1e-8, rtol=0)
    np.testing.assert_allclose(path.r2_draws[:, -1], lin.fit_r2, atol=1e-12)


def test_linear_path_matches_statsmodels_wls_on_one_draw():
    import statsmodels.api as sm

    rng, X, f = _study()
    S, n = 20, len(X)
    wts = rng.uniform(0.2, 3, n)
    d = sw.EffectDraws(f + rng.normal(0, 0.5, (S, n)), X, weights=wts)
    cols = ["age", "fuel", "rooms", "noise"]
    path = linear_size_path(d, sw.summarize_linear(d, columns=cols))
    B, terms, _ = linear_design(X, classify_columns(X, cols))
    k = 2
    D = B[:, [0, *[terms.index(t) for t in path.steps[1:k + 1]]]]
    # Reference: statsmodels WLS R^2 (weighted, centred total sum of squares) for draw 7.
    res = sm.WLS(d.values[7], D, weights=wts).fit()
    assert path.r2_draws[7, k] == pytest.approx(res.rsquared, abs=1e-10)


def test_path_order_finds_the_drivers_first_and_a_small_set_suffices():
    rng, X, f = _study()
    S, n = 60, len(X)
    d = sw.EffectDraws(f + rng.normal(0, 0.3, (S, n)), X)
    path = linear_size_path(d, sw.summarize_linear(d))
    assert set(path.steps[1:3]) == {"age", "fuel = oil"}
    tab = path.table()
    assert tab["chosen"].sum() == 1
    chosen = tab[tab["chosen"]].iloc[0]
    assert chosen["size"] <= 3 and chosen["shortfall"] <= 0.05
    assert (tab["shortfall"].iloc[: int(chosen["step"])] > 0.05).all()  # nothing smaller is within tolerance
    assert tab["mean"].is_monotonic_increasing and tab["mean"].iloc[0] == 0
    assert "Smallest linear summary" in path.message
    forward = linear_size_path(d, sw.summarize_linear(d), order="forward", tolerance=0.0)
    assert forward.chosen == len(forward.steps) - 1 or forward.table()["shortfall"].iloc[forward.chosen] <= 1e-12


def test_forward_order_first_term_has_the_largest_single_term_r2():
    rng, X, f = _study()
    specs = classify_columns(X, ["age", "fuel", "rooms", "noise"])
    B, terms, _ = linear_design(X, specs)
    w = rng.uniform(0.5, 2, len(X))
    order = term_order(B, f, w, order="forward")
    assert sorted(order) == list(range(1, B.shape[1]))

    def r2(cols):  # weighted R^2 via numpy lstsq
        D = B[:, [0, *cols]]
        sw_ = np.sqrt(w)
        beta = np.linalg.lstsq(sw_[:, None] * D, sw_ * f, rcond=None)[0]
        m = w @ f / w.sum()
        return 1 - w @ (f - D @ beta) ** 2 / (w @ (f - m) ** 2)

    singles = [r2([j]) for j in range(1, B.shape[1])]
    assert order[0] == 1 + int(np.argmax(singles))
    pairs = {j: r2([order[0], j]) for j in range(1, B.shape[1]) if j != order[0]}
    assert order[1] == max(pairs, key=pairs.get)


def test_tree_path_is_the_r2_by_depth():
    rng = np.random.default_rng(21)
    X = household_covariates(400, rng)
    d = sw.EffectDraws(2.0 * (X["age"].to_numpy() > 50) + rng.normal(0, 0.3, (50, 400)), X)
    tree = sw.summarize_tree(d, max_depth=3)
    path = tree_size_path(tree)
    by = tree.fit_r2_draws_by_depth()
    np.testing.assert_array_equal(path.r2_draws, np.column_stack([by[k] for k in (1, 2, 3)]))
    assert list(path.sizes) == list(tree.fit_r2_by_depth()["n_subgroups"])
    assert path.chosen == 0 and "depth 1 (2 subgroups)" in path.message


def test_bad_input():
    rng, X, f = _study()
    d = sw.EffectDraws(f + rng.normal(0, 0.3, (10, len(X))), X)
    lin = sw.summarize_linear(d)
    for bad in (-0.1, 1.0, "x"):
        with pytest.raises(sw.SummaryError, match="`tolerance`"):
            linear_size_path(d, lin, tolerance=bad)
    with pytest.raises(sw.SummaryError, match="`order`"):
        linear_size_path(d, lin, order="backward")
    with pytest.raises(sw.SummaryError, match="other draws or covariates"):
        other = sw.EffectDraws(d.values, X.fillna({"rooms": 4.0}))  # no missing rooms: no indicator term
        linear_size_path(d, sw.summarize_linear(other))
    with pytest.raises(sw.SummaryError, match="`linear` must be a LinearSummary"):
        linear_size_path(d, sw.summarize_tree(d, max_depth=1))
    with pytest.raises(sw.SummaryError, match="`tree` must be a TreeSummary"):
        tree_size_path(lin)


def test_lars_order_equals_sklearn_lars_path_on_the_explicit_scaled_design():
    # Reference: scikit-learn's lars_path (Efron et al. 2004) on the n x p weighted, centred, unit-length
    # columns, against our Gram-only route (lars_path_gram on the p x p Gram matrix).
    from sklearn.linear_model import lars_path

    rng, X, f = _study()
    specs = classify_columns(X, ["age", "fuel", "rooms", "noise", "income"])
    B, terms, _ = linear_design(X, specs)
    w = rng.uniform(0.5, 2, len(X))
    sw_ = np.sqrt(w)
    Xc = B[:, 1:] - (w @ B[:, 1:]) / w.sum()
    Xs = sw_[:, None] * Xc
    Xs /= np.linalg.norm(Xs, axis=0)
    _, active, _ = lars_path(Xs, sw_ * (f - w @ f / w.sum()), method="lar")
    ours = term_order(B, f, w, order="lars")
    assert ours[: len(active)] == [int(j) + 1 for j in active]
    assert sorted(ours) == list(range(1, B.shape[1]))

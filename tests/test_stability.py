"""Structure stability: the summary tree refitted to single draws (invented data)."""
import numpy as np
import pytest
from sklearn.metrics import adjusted_rand_score

import summarize_widgets as sw
from summarize_widgets.summaries.stability import draw_target, structure_stability

from conftest import household_covariates


def _covariates(n, rng):
    X = household_covariates(n, rng)
    for k in range(4):  # covariates that play no part in any effect
        X[f"noise{k}"] = rng.normal(size=n)
    return X


def test_strong_single_split_is_found_in_almost_every_draw():
    rng = np.random.default_rng(10)
    n, S = 500, 120
    X = _covariates(n, rng)
    truth = 2.0 * (X["age"].to_numpy() > 50)
    d = sw.EffectDraws(truth + rng.normal(0, 0.1, (S, 1)) + rng.normal(0, 0.3, (S, n)), X)
    tree = sw.summarize_tree(d, max_depth=2)
    check = structure_stability(tree, n_fits=60)
    assert check.summary_first == "age"
    assert check.first_share > 0.9 and check.supported
    tab = check.table()
    assert tab.set_index("covariate").loc["age", "first_split"] == check.first_share
    assert tab.set_index("covariate").loc["age", "in_summary"].startswith("1")
    assert check.message.startswith("First split supported")
    assert len(check.rows) == 60 and len(set(check.rows)) == 60


def test_flat_truth_gives_low_agreement_and_a_flag():
    rng = np.random.default_rng(11)
    n, S = 500, 120
    X = _covariates(n, rng)
    d = sw.EffectDraws(1.0 + rng.normal(0, 1.0, (S, n)), X)  # every unit differs by noise only
    tree = sw.summarize_tree(d, max_depth=2)
    check = structure_stability(tree, n_fits=60)
    assert check.first_share < 0.5 and not check.supported
    assert "NOT supported" in check.message
    assert check.ari.mean() < 0.3
    agree = check.agreement()
    assert agree.iloc[0]["upper"] < 0.6
    # the first-split shares add up to one
    assert check.table()["first_split"].sum() == pytest.approx(1.0)


def test_identical_draws_reproduce_the_summary_tree_exactly():
    # Every draw equals the posterior mean: each refit is the summary tree itself (same encoding,
    # Fisher ranks of categories, binning and weights), so every index is 1.
    rng = np.random.default_rng(12)
    n = 400
    X = _covariates(n, rng)
    f = 3.0 * (X["fuel"] == "oil").to_numpy() - 1.5 * (X["fuel"] == "gas").to_numpy() + 0.02 * X["age"].to_numpy()
    w = rng.uniform(0.5, 2.0, n)
    d = sw.EffectDraws(np.tile(f, (5, 1)), X, weights=w)
    tree = sw.summarize_tree(d, max_depth=3, min_size=20)
    check = structure_stability(tree, n_fits=5, threads=1)
    np.testing.assert_array_equal(check.ari, 1.0)
    assert check.first_share == 1.0 and check.first_split[0] == "fuel"
    assert check.splits[0] == tree.split_columns()


def test_complier_weighted_draw_target_and_fit():
    rng = np.random.default_rng(13)
    n, S = 300, 40
    X = _covariates(n, rng)
    pi = rng.uniform(0.0, 0.8, (S, n))
    pi[:, :5] = 0.0  # no uptake at all: the unit weighs nothing
    itt = (-5 - 10 * (X["age"].to_numpy() > 60)) * pi
    v = rng.uniform(1, 2, n)
    d = sw.EffectDraws.from_itt(itt, pi, X, weights=v)
    y, w = draw_target(d, 3)
    np.testing.assert_allclose(w, v * pi[3])
    ok = pi[3] > 0
    np.testing.assert_allclose(y[ok], itt[3, ok] / pi[3, ok])
    assert (y[~ok] == 0).all()
    check = structure_stability(sw.summarize_tree(d, max_depth=1), n_fits=10)
    assert check.summary_first == "age" and check.first_share == 1.0


def test_ari_is_scikit_learns_on_the_partitions():
    rng = np.random.default_rng(14)
    n, S = 300, 30
    X = _covariates(n, rng)
    d = sw.EffectDraws(1.0 * (X["age"].to_numpy() > 40) + rng.normal(0, 0.5, (S, n)), X)
    tree = sw.summarize_tree(d, max_depth=2)
    check = structure_stability(tree, n_fits=4, seed=3)
    from summarize_widgets.summaries.tree import fit_cart
    s = int(check.rows[1])
    est = fit_cart(tree.encoded_covariates, d.values[s], np.ones(n), depth=2, min_size=tree.min_size,
                   categorical=[t == "categorical" for t in tree.column_types])
    assert check.ari[1] == pytest.approx(adjusted_rand_score(tree.unit_subgroups(), est.apply(tree.encoded_covariates)))


def test_bad_input():
    rng = np.random.default_rng(15)
    X = _covariates(100, rng)
    d = sw.EffectDraws(rng.normal(size=(10, 100)), X)
    with pytest.raises(sw.SummaryError, match="`tree` must be a TreeSummary"):
        structure_stability(sw.summarize_linear(d))
    tree = sw.summarize_tree(d, max_depth=1)
    with pytest.raises(sw.SummaryError, match="`n_fits`"):
        structure_stability(tree, n_fits=1)
    # More fits than draws: every draw once.
    assert list(structure_stability(tree, n_fits=50).rows) == list(range(10))

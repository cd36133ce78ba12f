"""Summary tree: projections, truncations, R^2, intervals and errors checked against outside references."""
import itertools

import numpy as np
import pandas as pd
import pytest
from sklearn.tree import DecisionTreeRegressor

import summarize_widgets as sw
from summarize_widgets import SummaryError, summarize_tree


def _data(n=1200, S=300, seed=1, dtype=np.float64, weights=None):
    rng = np.random.default_rng(seed)
    X = pd.DataFrame({
        "age": rng.uniform(20, 80, n).round(1),
        "income": rng.lognormal(10, 0.4, n),
        "size": rng.integers(1, 6, n).astype(float),
    })
    f = 0.8 * (X["age"].to_numpy() > 45) + 0.3 * np.log(X["income"].to_numpy() / 2e4) + 0.1 * X["size"].to_numpy()
    T = (f + rng.normal(0, 0.4, (S, n)) + rng.normal(0, 0.2, (S, 1))).astype(dtype)
    return T, X


def _reference_tree(target, X, max_depth, min_size, weights=None):
    est = DecisionTreeRegressor(max_depth=max_depth, min_samples_leaf=min_size, random_state=0)
    est.fit(X.to_numpy(), target, sample_weight=weights)
    return est.apply(X.to_numpy())


@pytest.mark.parametrize("with_weights", [False, True])
def test_leaf_effects_equal_pandas_groupby_over_sklearn_apply(with_weights):
    # Reference: scikit-learn's DecisionTreeRegressor.apply gives each unit's leaf; a pandas
    # groupby computes each draw's (weighted) leaf mean the slow way.
    T, X = _data()
    w = np.random.default_rng(5).uniform(0.5, 2.0, T.shape[1]) if with_weights else None
    d = sw.EffectDraws(T, X, weights=w)
    tree = summarize_tree(d, max_depth=3, min_size=60, n_bins=None)  # exact CART search, as scikit-learn's
    ww = np.ones(T.shape[1]) if w is None else w
    leaf = _reference_tree(T.mean(0), X, 3, 60, weights=w)
    frame = pd.DataFrame(T.T * ww[:, None])
    num = frame.groupby(leaf).sum()
    den = pd.Series(ww).groupby(leaf).sum()
    expected = (num.T / den.to_numpy()).to_numpy()  # (S, leaves) sorted by sklearn leaf id
    got = tree.leaf_draws
    assert got.shape == expected.shape
    np.testing.assert_allclose(got, expected, rtol=1e-8)
    # with fixed unit weights the posterior mean is the plain mean over draws (numpy)
    np.testing.assert_allclose(d.posterior_mean, T.mean(0), rtol=1e-12)


def test_fit_r2_equals_definition_from_residuals_at_every_depth():
    # Definition (docs/method.md section 3; Woody, Carvalho & Murray 2021): R2_s = 1 - SSE_s / SST_s with
    # residuals from each draw's own subgroup means, computed directly here.
    T, X = _data(S=120)
    w = np.random.default_rng(2).uniform(0.2, 3.0, T.shape[1])
    d = sw.EffectDraws(T, X, weights=w)
    tree = summarize_tree(d, max_depth=4, min_size=40)
    by_depth = tree.fit_r2_draws_by_depth()
    for depth in range(1, 5):
        groups = tree.at_depth(depth).assign(X).to_numpy()
        r2 = np.empty(T.shape[0])
        for s in range(T.shape[0]):
            fitted = pd.Series(T[s] * w).groupby(groups).transform("sum") / pd.Series(w).groupby(groups).transform("sum")
            sse = np.sum(w * (T[s] - fitted.to_numpy()) ** 2)
            sst = np.sum(w * (T[s] - np.average(T[s], weights=w)) ** 2)
            r2[s] = 1 - sse / sst
        np.testing.assert_allclose(by_depth[depth], r2, rtol=1e-8)
        assert np.all((0 <= by_depth[depth]) & (by_depth[depth] <= 1))
    # deeper trees refine shallower ones, so R^2 never decreases with depth in any draw
    for a, b in zip(range(1, 4), range(2, 5)):
        assert np.all(by_depth[b] >= by_depth[a] - 1e-12)


def test_depth_truncation_equals_tree_grown_to_that_depth():
    T, X = _data(S=100)
    d = sw.EffectDraws(T, X)
    deep = summarize_tree(d, max_depth=4, min_size=50)
    for depth in (1, 2, 3):
        direct = summarize_tree(d, max_depth=depth, min_size=50).table()
        trunc = deep.at_depth(depth).table()
        assert direct["rule"].tolist() == trunc["rule"].tolist()
        np.testing.assert_allclose(trunc[["n_units", "mean", "lower", "upper"]].to_numpy(float),
                                   direct[["n_units", "mean", "lower", "upper"]].to_numpy(float), rtol=1e-12)
        np.testing.assert_allclose(deep.at_depth(depth).fit_r2, summarize_tree(d, max_depth=depth, min_size=50).fit_r2, rtol=1e-12)


@pytest.mark.parametrize("kind", ["equal-tailed", "highest-density"])
def test_table_intervals_match_numpy_quantiles(kind):
    T, X = _data(S=400)
    tree = summarize_tree(sw.EffectDraws(T, X), max_depth=2, min_size=100)
    tab = tree.table(level=0.9, interval=kind)
    theta = tree.leaf_draws
    if kind == "equal-tailed":
        # numpy's default ("linear", Hyndman & Fan type 7) quantiles at 5% and 95%
        lo, hi = np.quantile(theta, [0.05, 0.95], axis=0)
    else:
        # shortest window holding ceil(0.9 * S) sorted draws, computed by brute force
        srt = np.sort(theta, axis=0)
        k = int(np.ceil(0.9 * len(srt))) - 1
        lo, hi = [], []
        for j in range(srt.shape[1]):
            widths = [srt[i + k, j] - srt[i, j] for i in range(len(srt) - k)]
            i = int(np.argmin(widths))
            lo.append(srt[i, j]), hi.append(srt[i + k, j])
    np.testing.assert_allclose(tab["lower"], lo, rtol=1e-12)
    np.testing.assert_allclose(tab["upper"], hi, rtol=1e-12)
    np.testing.assert_allclose(tab["prob_positive"], (theta > 0).mean(0))
    np.testing.assert_allclose(tab["mean"], theta.mean(0))


def test_contrasts_are_per_draw_differences():
    T, X = _data(S=200)
    tree = summarize_tree(sw.EffectDraws(T, X), max_depth=2, min_size=100)
    c = tree.contrasts(level=0.8)
    theta, ids = tree.leaf_draws, list(tree.leaf_ids)
    assert len(c) == len(ids) * (len(ids) - 1) // 2
    row = c.iloc[0]
    diff = theta[:, ids.index(row.subgroup_a)] - theta[:, ids.index(row.subgroup_b)]
    assert row.difference == pytest.approx(diff.mean())
    assert row.lower == pytest.approx(np.quantile(diff, 0.1))
    assert row.prob_a_greater == pytest.approx((diff > 0).mean())
    one = tree.contrasts(subgroup=ids[0])
    assert len(one) == len(ids) - 1 and set(one.subgroup_a) == {ids[0]}


def test_categorical_root_split_is_the_best_partition_by_exhaustive_search():
    # Fisher (1958) / Breiman et al. (1984, sec. 9.4): ordering categories by their mean makes the best
    # binary partition one of the ordered splits. Check against all 2^(k-1) - 1 partitions.
    rng = np.random.default_rng(3)
    n, k = 1500, 5
    cats = np.array(["ash", "birch", "cedar", "daisy", "elm"])
    region = rng.choice(cats, n)
    effect = dict(zip(cats, [0.3, -1.0, 0.9, -0.2, 1.4]))
    T = np.array([effect[r] for r in region]) + rng.normal(0, 0.5, (50, n))
    X = pd.DataFrame({"region": region})
    tree = summarize_tree(sw.EffectDraws(T, X), max_depth=1, min_size=1)
    tbar = T.mean(0)
    best, best_sse = None, np.inf
    for r in range(1, k):
        for left in itertools.combinations(cats, r):
            if "ash" not in left:  # each partition once
                continue
            m = np.isin(region, left)
            sse = ((tbar[m] - tbar[m].mean()) ** 2).sum() + ((tbar[~m] - tbar[~m].mean()) ** 2).sum()
            if sse < best_sse:
                best, best_sse = set(left), sse
    rules = tree.table()["rule"].tolist()
    sets = [set(r.split("{")[1].rstrip("}").split(", ")) if "{" in r else {r.split(" = ")[1]} for r in rules]
    assert best in sets or set(cats) - best in sets
    assert all(r.startswith("region") for r in rules)


def test_rules_read_in_category_names_and_assign_new_rows():
    rng = np.random.default_rng(4)
    n = 800
    X = pd.DataFrame({"fuel": pd.Categorical(rng.choice(["gas", "oil", "electric"], n)),
                      "owner": rng.random(n) > 0.5, "age": rng.uniform(18, 90, n)})
    X.loc[::17, "age"] = np.nan
    f = np.where(X["fuel"] == "oil", 2.0, 0.0) + np.where(X["owner"], 1.0, 0.0)
    d = sw.EffectDraws(f + rng.normal(0, 0.3, (60, n)), X)
    tree = summarize_tree(d, max_depth=2, min_size=20)
    text = " ".join(tree.table()["rule"])
    assert "fuel" in text and ("oil" in text) and "owner = True" in text or "owner = False" in text
    assigned = tree.assign(X)
    np.testing.assert_array_equal(np.sort(assigned.unique()), np.sort(tree.leaf_ids))
    assert (assigned.value_counts().sort_index().to_numpy() == tree.table().set_index("subgroup")["n_units"].sort_index().to_numpy()).all()
    with pytest.raises(SummaryError, match="categories not seen.*'coal'"):
        tree.assign(X.assign(fuel=["coal"] * n))
    with pytest.raises(SummaryError, match="lacks the column.*'owner'"):
        tree.assign(X.drop(columns="owner"))


def test_float32_and_float64_agree():
    T, X = _data(S=80)
    a = summarize_tree(sw.EffectDraws(T, X), max_depth=2, min_size=100).table()
    b = summarize_tree(sw.EffectDraws(T.astype(np.float32), X), max_depth=2, min_size=100).table()
    np.testing.assert_allclose(a["mean"], b["mean"], rtol=1e-5)


def test_large_offset_does_not_lose_r2_to_cancellation():
    # Effects of size 1e7 with spread 1: centring before squaring (docs/method.md section 3) keeps R^2 exact.
    T, X = _data(S=50)
    base = summarize_tree(sw.EffectDraws(T, X), max_depth=2, min_size=100).fit_r2
    shifted = summarize_tree(sw.EffectDraws(T + 1e7, X), max_depth=2, min_size=100).fit_r2
    np.testing.assert_allclose(shifted, base, rtol=1e-6)


def test_nodes_describe_every_node_to_the_current_depth():
    T, X = _data(S=50)
    tree = summarize_tree(sw.EffectDraws(T, X), max_depth=3, min_size=80).at_depth(2)
    nodes = tree.nodes()
    assert nodes["depth"].max() == 2 and nodes.iloc[0]["parent"] == -1
    assert nodes.loc[nodes.is_leaf, "node"].tolist() == tree.leaf_ids.tolist()
    root = nodes.iloc[0]
    assert root["n_units"] == X.shape[0] and root["mean"] == pytest.approx(T.mean())


def test_outline_is_the_structure_of_nodes_at_every_depth():
    T, X = _data(S=40)
    grown = summarize_tree(sw.EffectDraws(T, X), max_depth=4, min_size=60)
    for depth in range(1, 5):
        tree = grown.at_depth(depth)
        nodes, outline = tree.nodes(), tree.outline()
        assert list(outline.columns) == ["node", "parent", "depth", "rule", "is_leaf"]
        pd.testing.assert_frame_equal(outline, nodes[list(outline.columns)].reset_index(drop=True), check_dtype=False)
        assert outline.loc[outline.is_leaf, "node"].tolist() == tree.leaf_ids.tolist()


@pytest.mark.parametrize("kwargs, message", [
    ({"max_depth": 0}, r"`max_depth` must be between 1 and 8; got 0"),
    ({"max_depth": 2.5}, r"`max_depth` must be an integer"),
    ({"min_size": 0}, r"`min_size` must be between 1 and 1200; got 0"),
    ({"min_size": 5000}, r"`min_size` must be between 1 and 1200; got 5000"),
    ({"columns": ["age", "height"]}, r"not in the covariate table: 'height'"),
])
def test_bad_arguments_are_named(kwargs, message):
    T, X = _data(S=20)
    with pytest.raises(SummaryError, match=message):
        summarize_tree(sw.EffectDraws(T, X), **kwargs)


def test_bad_covariates_are_named():
    T, X = _data(S=20)
    with pytest.raises(SummaryError, match=r"'flat' has a single value"):
        summarize_tree(sw.EffectDraws(T, X.assign(flat=3.0)))
    with pytest.raises(SummaryError, match=r"'gone' has no observed values"):
        summarize_tree(sw.EffectDraws(T, X.assign(gone=np.nan)))
    with pytest.raises(SummaryError, match=r"`draws` must be an EffectDraws"):
        summarize_tree(T)
    tree = summarize_tree(sw.EffectDraws(T, X), max_depth=2)
    with pytest.raises(SummaryError, match=r"`depth` must be between 1 and 2; got 3"):
        tree.at_depth(3)
    with pytest.raises(SummaryError, match=r"`level` must be a number strictly between 0 and 1"):
        tree.table(level=95)
    with pytest.raises(SummaryError, match=r"`interval` must be one of"):
        tree.table(interval="hpd")


def test_constant_effect_reports_r2_undefined():
    rng = np.random.default_rng(0)
    X = pd.DataFrame({"a": rng.normal(size=300), "b": rng.normal(size=300)})
    T = np.full((40, 300), 2.5)
    tree = summarize_tree(sw.EffectDraws(T, X), max_depth=2, min_size=10)
    with pytest.raises(SummaryError, match="Summary R\\^2 is undefined: every posterior draw has the same effect"):
        tree.fit_r2
    # the effect table itself stays well defined
    assert np.allclose(tree.table()["mean"], 2.5)
    # a mixture: draws with and without heterogeneity
    T2 = T.copy()
    T2[:10] += rng.normal(size=(10, 300))
    tree2 = summarize_tree(sw.EffectDraws(T2, X), max_depth=2, min_size=10)
    assert np.isnan(tree2.fit_r2).sum() == 30 and "30 of 40 draws have no heterogeneity" in tree2.fit_r2_note


def test_binned_search_keeps_rules_exact_for_the_fitted_units():
    # With quantile bins the thresholds move by at most a bin, but each rule still holds exactly:
    # evaluating the printed rule with pandas selects exactly the units the tree assigns there.
    T, X = _data(S=40, n=3000)
    tree = summarize_tree(sw.EffectDraws(T, X), max_depth=3, min_size=100, n_bins=16)
    assigned = tree.assign(X).to_numpy()
    for row in tree.table().itertuples():
        query = row.rule.replace(" & ", " and ")
        picked = X.eval(query).to_numpy()
        np.testing.assert_array_equal(picked, assigned == row.subgroup)

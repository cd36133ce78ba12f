"""Covariates at their edges: scale and offset, missing values, many levels, column names (issue 9, item 5)."""
import numpy as np
import pandas as pd
import pytest

import summarize_widgets as sw
from summarize_widgets import SummaryError
from summarize_widgets.core.query import query_mask


def _step_study(x, *, n_draws=40, seed=3):
    """Draws whose effect steps up by 2 where ``x`` is above its median (a strong, simple moderator)."""
    rng = np.random.default_rng(seed)
    f = np.where(x > np.median(x), 2.0, 0.0)
    return f + rng.normal(0, 0.3, (n_draws, x.size))


def _rule_mask(X, rule):
    """Units a printed rule selects, read by the package's query grammar (``&`` -> ``and``, sets -> lists)."""
    q = rule.replace(" & ", " and ").replace(" = ", " == ").replace("{", "[").replace("}", "]")
    return query_mask(X, q)


@pytest.mark.parametrize("few_values", [False, True], ids=["many-values", "few-values"])
@pytest.mark.parametrize("scale, offset", [(1e-9, 0.0), (1.0, 1.7e9), (1e-12, 1e-3)],
                         ids=["dose-in-grams", "timestamp-offset", "tiny-spread-small-offset"])
def test_split_found_whatever_the_scale_or_offset_of_a_numeric_column(scale, offset, few_values):
    rng = np.random.default_rng(11)
    base = rng.uniform(0, 100, 400)
    if few_values:
        base = np.round(base / 10)  # 11 distinct values: no quantile binning
    T = _step_study(base)
    noise = rng.normal(size=base.size)
    well = sw.summarize_tree(sw.EffectDraws(T, pd.DataFrame({"x": base, "noise": noise})), max_depth=1)
    X = pd.DataFrame({"x": offset + scale * base, "noise": noise})
    odd = sw.summarize_tree(sw.EffectDraws(T, X), max_depth=1)
    assert odd.split_columns() == [(0, "x")] == well.split_columns()
    # the same partition of the units as the well-scaled column
    np.testing.assert_array_equal(odd.unit_subgroups(), well.unit_subgroups())
    # rules in the column's own units select exactly those units, and assign() agrees with them
    for row in odd.table().itertuples():
        np.testing.assert_array_equal(_rule_mask(X, row.rule), odd.unit_subgroups() == row.subgroup)
    np.testing.assert_array_equal(odd.assign(X).to_numpy(), odd.unit_subgroups())


def test_tiny_thresholds_read_in_scientific_notation_not_a_row_of_zeros():
    rng = np.random.default_rng(2)
    base = rng.uniform(0, 1, 300)
    tree = sw.summarize_tree(sw.EffectDraws(_step_study(base), pd.DataFrame({"dose": base * 1e-9})), max_depth=1)
    rules = tree.table()["rule"].tolist()
    assert all("e-10" in r or "e-9" in r for r in rules) and not any("0.0000" in r for r in rules), rules


def test_assign_follows_the_printed_threshold_for_values_between_fitted_ones():
    # fitted values 0..10; the rule's threshold is the shortest decimal between the sides, and a new row
    # just above it goes where the printed rule says (not where the nearest fitted value went)
    x = np.repeat(np.arange(11.0), 30)
    tree = sw.summarize_tree(sw.EffectDraws(_step_study(x), pd.DataFrame({"x": x})), max_depth=1)
    split = tree.nodes().set_index("node").loc[1, "split"]
    assert split.startswith("x <= "), split
    value = float(split.removeprefix("x <= "))
    new = pd.DataFrame({"x": [value, np.nextafter(value, np.inf), value + 0.5]})
    got = tree.assign(new).to_numpy()
    expected = np.where(new["x"].to_numpy() <= value, 1, 2)
    np.testing.assert_array_equal(got, expected)


# -- missing values --------------------------------------------------------------------------------------------
def _missing_age_study(seed=5):
    rng = np.random.default_rng(seed)
    n = 500
    age = rng.uniform(20, 80, n).round(1)
    age[:100] = np.nan
    f = np.where(np.isnan(age), 3.0, np.where(age > 50, 1.0, 0.0))
    T = f + rng.normal(0, 0.3, (40, n))
    return T, pd.DataFrame({"age": age})


def test_missing_values_read_as_their_own_condition_never_inf():
    T, X = _missing_age_study()
    tree = sw.summarize_tree(sw.EffectDraws(T, X), max_depth=2, min_size=20)
    nodes = tree.nodes()
    text = " | ".join(nodes["rule"].tolist() + nodes["split"].tolist())
    assert "inf" not in text, text
    assert "age is missing" in nodes["rule"].tolist()
    assert "age is not missing" in nodes["split"].tolist()
    assert {"age <= 49.9", "age > 49.9"} <= set(nodes["rule"]) or {"age <= 50", "age > 50"} <= set(nodes["rule"])
    # every subgroup's rule selects exactly its units (missing values compare False, as in the rule)
    for row in tree.table().itertuples():
        np.testing.assert_array_equal(_rule_mask(X, row.rule), tree.unit_subgroups() == row.subgroup)


def test_missing_values_that_follow_a_threshold_read_or_missing():
    rng = np.random.default_rng(8)
    n = 600
    age = rng.uniform(20, 80, n).round(1)
    age[:40] = np.nan
    f = np.where(np.isnan(age) | (age > 50), 1.5, 0.0)  # missing ages behave like the old
    T = f + rng.normal(0, 0.3, (40, n))
    tree = sw.summarize_tree(sw.EffectDraws(T, pd.DataFrame({"age": age, "rooms": rng.integers(1, 6, n)})),
                             max_depth=1, min_size=20)
    rules = tree.table()["rule"].tolist()
    assert any(r.endswith(" or missing") and r.startswith("age >") for r in rules), rules
    assert not any("(" in r or "inf" in r for r in rules), rules


def test_rule_text_combines_missing_conditions_readably():
    from summarize_widgets.core.rules import Condition, combine

    gt = Condition("age", op=">", value="50", numeric_value=50.0, with_missing=True)
    le = Condition("rooms", op="<=", value="3", numeric_value=3.0)
    assert combine([gt]) == "age > 50 or missing"
    assert combine([gt, le]) == "(age > 50 or missing) & rooms <= 3"
    assert combine([Condition("age", op="observed"), gt]) == "age > 50"
    assert combine([Condition("age", op="missing")]) == "age is missing"
    assert combine([Condition("fuel", labels=("gas", "(missing)"))]) == "fuel = gas or missing"
    assert combine([Condition("fuel", labels=("(missing)",))]) == "fuel is missing"


# -- many levels ---------------------------------------------------------------------------------------------
def _street_study(n=6000, levels=2000, seed=4):
    rng = np.random.default_rng(seed)
    X = pd.DataFrame({"age": rng.uniform(20, 80, n), "street": [f"st{k}" for k in rng.integers(0, levels, n)]})
    X.loc[: n // 4, "street"] = "main"  # one common level
    f = np.where(X["street"] == "main", 1.0, 0.0) + 0.01 * X["age"].to_numpy()
    return f + rng.normal(0, 0.3, (20, n)), X


@pytest.mark.parametrize("summarize", [sw.summarize_linear, sw.summarize_additive], ids=lambda f: f.__name__)
def test_high_cardinality_column_is_refused_in_one_line_naming_it_and_its_count(summarize):
    T, X = _street_study()
    n_levels = X["street"].nunique()
    with pytest.raises(SummaryError, match=rf"Covariate 'street' has {n_levels:,} levels, .*pool_levels=k") as err:
        summarize(sw.EffectDraws(T, X))
    assert "\n" not in str(err.value)


def test_pooled_levels_keep_the_most_common_and_pool_the_rest_into_other():
    T, X = _street_study()
    lin = sw.summarize_linear(sw.EffectDraws(T, X), pool_levels=3)
    street_terms = [t for t in lin.terms if t.startswith("street")]
    common = set(X["street"].value_counts().index[:3])
    # the reference is the first kept level (sorted); the other kept ones and "(other)" get coefficients
    assert len(street_terms) == 3 and "street = (other)" in street_terms
    assert {t.removeprefix("street = ") for t in street_terms} - {"(other)"} <= common
    # pooled coding fits what an explicit pooled column fits (reference: pandas' own relabelling; the
    # reference category may differ, the fitted values may not)
    Xp = X.assign(street=X["street"].where(X["street"].isin(common), "(other)"))
    ref = sw.summarize_linear(sw.EffectDraws(T, Xp))
    np.testing.assert_allclose(lin.fitted_values(), ref.fitted_values(), rtol=1e-9, atol=1e-10)
    np.testing.assert_allclose(lin.fit_r2, ref.fit_r2, rtol=1e-9)
    add = sw.summarize_additive(sw.EffectDraws(T, X), pool_levels=3)
    assert "(other)" in set(add.curves().query("covariate == 'street'")["x"])


def test_tree_rule_for_many_levels_is_abbreviated_with_the_full_list_on_the_result():
    T, X = _street_study()
    tree = sw.summarize_tree(sw.EffectDraws(T, X), max_depth=1)
    tab = tree.table()
    assert tree.split_columns() == [(0, "street")]
    long_row = max(tab.itertuples(), key=lambda r: len(tree.rule_levels(r.subgroup)["street"]))
    levels = tree.rule_levels(long_row.subgroup)["street"]
    assert len(levels) > 100 and len(long_row.rule) < 120, long_row.rule
    assert long_row.rule.endswith(f"and {len(levels) - 5:,} more}}")
    assert all(lv in tree.full_rule(long_row.subgroup) for lv in levels)
    for frame in (tab, tree.nodes()):  # the same abbreviation in every table the outputs are built from
        assert frame["rule"].map(len).max() < 120


# -- column names ---------------------------------------------------------------------------------------------
def test_empty_column_name_is_refused_naming_its_position():
    rng = np.random.default_rng(0)
    X = pd.DataFrame({"age": rng.uniform(size=50), "": rng.uniform(size=50)})
    with pytest.raises(SummaryError, match=r"empty or blank name \(position 1 of 2\)"):
        sw.EffectDraws(rng.normal(size=(10, 50)), X)


def test_integer_column_names_work_in_columns_and_assign():
    rng = np.random.default_rng(1)
    X = pd.DataFrame({0: rng.uniform(20, 80, 300), 1: rng.normal(size=300)})
    T = np.where(X[0].to_numpy() > 50, 1.0, 0.0) + rng.normal(0, 0.3, (30, 300))
    d = sw.EffectDraws(T, X)
    tree = sw.summarize_tree(d, columns=[0], max_depth=1)
    assert tree.columns == ["0"]
    np.testing.assert_array_equal(tree.assign(X).to_numpy(), tree.unit_subgroups())
    assert sw.summarize_linear(d, columns=[0, 1]).terms == ["(intercept)", "0", "1"]

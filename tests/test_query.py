"""Group queries: a whitelisted grammar evaluated with NumPy; user text is data, never code."""
import numpy as np
import pandas as pd
import pytest

import summarize_widgets as sw
from summarize_widgets import SummaryError, summarize_groups
from summarize_widgets.core.query import query_mask


@pytest.fixture
def table():
    return pd.DataFrame({
        "age": [20.0, 40.0, np.nan, 70.0, 55.0],
        "fuel": ["gas", "oil", None, "gas", "heat pump"],
        "floor area": [50, 100, 150, 200, 90],
        3: [1, 2, 3, 4, 5],
        "owner": [True, False, True, False, True],
    }, index=[100, 150, 200, 250, 300])


@pytest.mark.parametrize("query, expected", [
    ("age >= 40", [0, 1, 0, 1, 1]),
    ("30 < age <= 60", [0, 1, 0, 0, 1]),                        # chained comparison
    ("fuel in ['gas', 'oil']", [1, 1, 0, 1, 0]),
    ("fuel not in ['gas']", [0, 1, 0, 0, 1]),                    # missing is in no list
    ("age is missing", [0, 0, 1, 0, 0]),
    ("age is not missing and owner", [1, 0, 0, 0, 1]),
    ("`floor area` > 95 and not owner", [0, 1, 0, 1, 0]),        # backquoted name with a space
    ("`3` == 2", [0, 1, 0, 0, 0]),                               # integer column name
    ("(age < 30 or age > 60) and fuel == 'gas'", [1, 0, 0, 1, 0]),
    ("age != 40", [1, 0, 0, 1, 1]),                              # missing never satisfies a comparison
    ("fuel == 'heat pump'", [0, 0, 0, 0, 1]),
    ("age > -5.5", [1, 1, 0, 1, 1]),
])
def test_query_grammar_selects_the_same_rows_as_pandas_boolean_indexing(table, query, expected):
    assert query_mask(table, query).tolist() == [bool(e) for e in expected]


def test_query_sees_the_index_as_given(table):
    # reference: pandas boolean indexing on the user's own index
    assert query_mask(table, "index < 250").tolist() == (table.index < 250).tolist()


@pytest.mark.parametrize("query, part", [
    ("x.__class__.__init__.__globals__['os']", r"indexing"),
    ("__import__('os').system('echo pwned')", r"the call"),
    ("age.__class__ == 1", r"attribute access 'age.__class__'"),
    ("age + 1 > 3", r"arithmetic 'age \+ 1'"),
    ("(age := 3)", r"the assignment"),
    ("lambda: 1", r"the lambda"),
    ("fuel in [1, len]", r"a list element 'len'"),
    ("age is 3", r"`is` other than"),
])
def test_anything_outside_the_grammar_is_refused_with_the_offending_part_named(table, query, part, tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    with pytest.raises(SummaryError, match=part):
        query_mask(table, query)
    assert not (tmp_path / "pwned").exists()


def test_a_single_equals_sign_says_compare_with_double_equals(table):
    with pytest.raises(SummaryError, match=r"a single '=' \(assignment\) is not allowed; compare with '=='"):
        query_mask(table, "age = 40")


def test_type_mismatch_and_unknown_column_are_clear(table):
    with pytest.raises(SummaryError, match=r"'age' \(number\) is compared with \"'x'\" \(text\)"):
        query_mask(table, "age > 'x'")
    with pytest.raises(SummaryError, match=r"names 'income', which is not a column of the covariates. Available: 'age'"):
        query_mask(table, "income > 5")
    with pytest.raises(SummaryError, match=r"'fuel' is a text column, not True/False"):
        query_mask(table, "fuel")


def test_groups_use_the_user_index_not_a_renumbered_copy():
    rng = np.random.default_rng(0)
    X = pd.DataFrame({"age": rng.uniform(20, 80, 200)}, index=np.arange(100, 300))
    d = sw.EffectDraws(rng.normal(size=(20, 200)), X)
    tab = summarize_groups(d, {"first fifty": "index < 150"}).table()
    assert tab.set_index("subgroup").loc["first fifty", "n_units"] == 50


def test_group_query_errors_carry_the_group_label():
    rng = np.random.default_rng(0)
    d = sw.EffectDraws(rng.normal(size=(10, 50)), pd.DataFrame({"age": rng.uniform(20, 80, 50)}))
    with pytest.raises(SummaryError, match=r"Group 'hack': query .* the call"):
        summarize_groups(d, {"hack": "__import__('os').getcwd() == 1"})

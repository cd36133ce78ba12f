"""Numerical edge cases: summary R^2 and "no heterogeneity" are scale-free (issue 9, item 6)."""
import numpy as np
import pandas as pd
import pytest

import summarize_widgets as sw
from summarize_widgets import SummaryError

SUMMARIES = (sw.summarize_tree, sw.summarize_linear, sw.summarize_additive)


def _study(seed=1, n=300, S=40):
    rng = np.random.default_rng(seed)
    x = rng.uniform(0, 1, n)
    X = pd.DataFrame({"x": x, "fuel": rng.choice(["gas", "oil", "heat pump"], n)})
    return 2 * x + rng.normal(0, 0.5, (S, n)), X


@pytest.mark.parametrize("offset, scale", [(1e9, 1e-3), (1e12, 1.0)], ids=["1e9+tiny-effects", "1e12+spread-4"])
@pytest.mark.parametrize("summarize", SUMMARIES, ids=lambda f: f.__name__)
def test_large_common_offset_keeps_heterogeneity_and_its_r2(summarize, offset, scale):
    T, X = _study()
    shifted = offset + scale * T
    held = (shifted - offset) / scale  # exactly what float64 holds of the spread, on the unit scale
    r2 = summarize(sw.EffectDraws(shifted, X)).fit_r2
    assert not np.isnan(r2).any()
    # Reference: the same summary of the held spread without the offset (an offset changes no R^2, by definition)
    np.testing.assert_allclose(r2, summarize(sw.EffectDraws(held, X)).fit_r2, rtol=0, atol=1e-9)


@pytest.mark.parametrize("summarize", SUMMARIES, ids=lambda f: f.__name__)
def test_tiny_magnitudes_give_the_r2_of_the_unit_scale(summarize):
    T, X = _study()
    r2 = summarize(sw.EffectDraws(1e-12 * T, X)).fit_r2
    np.testing.assert_allclose(r2, summarize(sw.EffectDraws(T, X)).fit_r2, rtol=0, atol=1e-12)


def test_tree_on_a_tiny_scale_finds_the_same_subgroups():
    T, X = _study()
    small = sw.summarize_tree(sw.EffectDraws(1e-12 * T, X), max_depth=2)
    plain = sw.summarize_tree(sw.EffectDraws(T, X), max_depth=2)
    np.testing.assert_array_equal(small.unit_subgroups(), plain.unit_subgroups())
    assert small.fit_r2.mean() > 0.3


def test_constant_draws_with_a_large_offset_still_have_no_heterogeneity():
    _, X = _study()
    T = np.full((20, len(X)), 1e9 + 0.1)
    with pytest.raises(SummaryError, match="no heterogeneity"):
        _ = sw.summarize_tree(sw.EffectDraws(T, X)).fit_r2


def test_no_heterogeneity_rule_is_scale_free():
    from summarize_widgets.summaries.projection import no_heterogeneity

    sst = np.array([4.0 * 300, 0.0, 1e-30])
    for b in (1e-100, 1e-12, 1.0, 1e12):
        got = no_heterogeneity(sst * b * b, np.full(3, 300.0), np.array([1e12, 5.0, 1.0]) * b)
        np.testing.assert_array_equal(got, [False, True, True])


def test_effects_too_small_to_square_are_refused_naming_the_rescale():
    T, X = _study()
    with pytest.raises(SummaryError, match=r"`values` is too small in magnitude .*multiply them by 1e20\d"):
        sw.EffectDraws(3e-201 * T / np.abs(T).max(), X)


def test_effects_too_large_to_square_are_refused_naming_the_rescale():
    T, X = _study()
    with pytest.raises(SummaryError, match=r"`values` is too large in magnitude .*Rescale"):
        sw.EffectDraws(1e200 * T, X)

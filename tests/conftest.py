"""Shared test builders: small simulated inputs of the retrofit study (invented data, for tests only).

Test modules import the builders directly (``from conftest import household_covariates``) when
they build data at module level, or use the fixtures below.
"""
import numpy as np
import pandas as pd
import pytest

import summarize_widgets as sw

#: The weight designs every summary must handle (see tests/test_invariants.py).
WEIGHT_DESIGNS = ("plain", "unit-weights", "draw-weights", "complier")


def household_covariates(n, rng, n_missing_rooms=40):
    """Household age, heating fuel and rooms (some rooms missing), as a retrofit study would record."""
    X = pd.DataFrame({
        "age": rng.uniform(20, 85, n).round(1),
        "fuel": rng.choice(["gas", "oil", "heat pump"], n),
        "rooms": rng.integers(2, 9, n).astype(float),
    })
    X.loc[rng.choice(n, n_missing_rooms, replace=False), "rooms"] = np.nan
    return X


def draws_around(f, S, rng, *, noise=0.5, shared=0.3, dtype=np.float64):
    """Posterior-like draws ``(S, n)`` around a true effect ``f`` (n,): unit noise plus a shared
    per-draw shift (the overall level is uncertain too)."""
    f = np.asarray(f, dtype=np.float64)
    T = f + rng.normal(0, noise, (S, f.size)) + rng.normal(0, shared, (S, 1))
    return T.astype(dtype)


def weighted_draws(design, T, X, rng):
    """``(EffectDraws, T, weights)`` for one of :data:`WEIGHT_DESIGNS`.

    complier: uptake shares ``pi`` in (0.1, 0.9) and outcome ITT ``T * pi``, so the complier
    effect of every unit is ``T``.
    """
    S, n = T.shape
    if design == "plain":
        return sw.EffectDraws(T, X), T, None
    if design == "unit-weights":
        w = rng.uniform(0.2, 3.0, n)
        return sw.EffectDraws(T, X, weights=w), T, w
    if design == "draw-weights":
        w = rng.uniform(0.2, 3.0, (S, n))
        return sw.EffectDraws(T, X, weights=w), T, w
    if design == "complier":
        pi = rng.uniform(0.1, 0.9, (S, n))
        return sw.EffectDraws.from_itt(T * pi, pi, X), T, pi
    raise ValueError(f"unknown weight design {design!r}; one of {WEIGHT_DESIGNS}")


@pytest.fixture
def rng():
    return np.random.default_rng(20261202)


@pytest.fixture
def households(rng):
    """300 households' covariates and draws of a bill change that falls with age and on oil heating."""
    X = household_covariates(300, rng, n_missing_rooms=20)
    f = -0.02 * X["age"].to_numpy() - 0.6 * (X["fuel"] == "oil").to_numpy()
    return X, draws_around(f, 80, rng)

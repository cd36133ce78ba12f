"""Small simulated inputs shared by several test modules (invented data, for tests only)."""
import numpy as np
import pandas as pd


def household_covariates(n, rng, n_missing_rooms=40):
    """Household age, heating fuel and rooms (some rooms missing), as a retrofit study would record."""
    X = pd.DataFrame({
        "age": rng.uniform(20, 85, n).round(1),
        "fuel": rng.choice(["gas", "oil", "heat pump"], n),
        "rooms": rng.integers(2, 9, n).astype(float),
    })
    X.loc[rng.choice(n, n_missing_rooms, replace=False), "rooms"] = np.nan
    return X

"""Test data builders: sampler-style posterior files written with xarray alone (invented data, tests only).

A general-purpose sampler saves its draws as a netCDF file (or zarr store) whose ``posterior``
group holds variables with dims ``(chain, draw, <unit>)``, beside other groups
(``sample_stats``, ``observed_data``); these builders write that open layout directly.
"""
from __future__ import annotations

import numpy as np
import pandas as pd
import xarray as xr


def household_study(n_units=60, n_chains=2, n_draws=40, seed=0, ids=None):
    """Covariates and (chain, draw, unit) effect, outcome-ITT and uptake-ITT cubes with a known structure.

    The effect is 2 for households older than 50, 0 otherwise (plus noise).
    """
    rng = np.random.default_rng(seed)
    ids = [f"h{i + 1}" for i in range(n_units)] if ids is None else list(ids)
    cov = pd.DataFrame({"age": rng.uniform(20, 80, n_units).round(1),
                        "tenure": rng.choice(["owner", "renter"], n_units)}, index=pd.Index(ids, name="household"))
    base = np.where(cov["age"].to_numpy() > 50, 2.0, 0.0)
    tau = base + rng.normal(0, 0.3, (n_chains, n_draws, n_units))
    uptake = rng.uniform(0.2, 0.8, (n_chains, n_draws, n_units))
    return cov, tau, tau * uptake, uptake


def posterior_dataset(cubes: dict, ids, unit_dim="household") -> xr.Dataset:
    """A Dataset like a sampler's posterior group: each cube (chain, draw, unit) under its name."""
    n_chains, n_draws, _ = next(iter(cubes.values())).shape
    coords = {"chain": np.arange(n_chains), "draw": np.arange(n_draws), unit_dim: list(ids)}
    return xr.Dataset({k: (("chain", "draw", unit_dim), v) for k, v in cubes.items()}, coords=coords)


def write_sampler_netcdf(path, cubes: dict, ids, unit_dim="household"):
    """A netCDF-4 file with an empty root, a ``posterior`` group and a ``sample_stats`` group."""
    post = posterior_dataset(cubes, ids, unit_dim)
    n_chains, n_draws = post.sizes["chain"], post.sizes["draw"]
    stats = xr.Dataset({"lp": (("chain", "draw"), np.zeros((n_chains, n_draws)))},
                       coords={"chain": post["chain"], "draw": post["draw"]})
    xr.Dataset(attrs={"created_by": "tests/builders.py"}).to_netcdf(path, engine="h5netcdf")
    post.to_netcdf(path, group="posterior", mode="a", engine="h5netcdf")
    stats.to_netcdf(path, group="sample_stats", mode="a", engine="h5netcdf")
    return path


def write_sampler_zarr(path, cubes: dict, ids, unit_dim="household"):
    """A zarr store with a ``posterior`` group (and a ``sample_stats`` group), written by xarray."""
    post = posterior_dataset(cubes, ids, unit_dim)
    stats = xr.Dataset({"lp": (("chain", "draw"), np.zeros((post.sizes["chain"], post.sizes["draw"])))})
    post.to_zarr(path, group="posterior", mode="w")
    stats.to_zarr(path, group="sample_stats", mode="a")
    return path


class SamplerResults:
    """Stands in for a sampler's results object: groups as attributes (no sampler library needed)."""

    def __init__(self, posterior: xr.Dataset):
        self.posterior = posterior
        self.sample_stats = xr.Dataset()

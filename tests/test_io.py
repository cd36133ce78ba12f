"""load_draws: every format round-trips exactly, every bad file gets a clear error.

Each file is written with the general-purpose library for its format (numpy.save/savez,
pandas.to_csv/to_parquet, xarray.to_netcdf, or sampler CSV text written by hand), loaded
back, and compared value for value with numpy.testing.assert_array_equal.
"""
from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import xarray as xr

from summarize_widgets.core.validate import SummaryError
from summarize_widgets.io import load_draws

N_DRAWS, N_UNITS = 6, 5


@pytest.fixture
def values():
    # Values spread over many orders of magnitude so that a lossy text format would show.
    rng = np.random.default_rng(20240611)
    return rng.standard_normal((N_DRAWS, N_UNITS)) * 10.0 ** rng.integers(-12, 12, (N_DRAWS, N_UNITS))


@pytest.fixture
def households():
    # Covariates of the retrofit scenario: one row per household.
    return pd.DataFrame(
        {
            "baseline_bill": [812.5, 640.0, np.nan, 1204.25, 955.0],
            "heating": pd.Categorical(["gas", "electric", "gas", "oil", "electric"]),
            "renter": [True, False, False, True, False],
            "region": ["north", "south", None, "north", "east"],
        }
    )


def _long(values, chains=None):
    """A long table (draw, unit, value[, chain]) of a (draws, units) matrix, in shuffled row order."""
    s, n = values.shape
    frame = pd.DataFrame(
        {"draw": np.repeat(np.arange(s), n), "unit": np.tile(np.arange(1, n + 1), s), "value": values.ravel()}
    )
    if chains:
        per = s // chains
        frame.insert(0, "chain", frame["draw"] // per)
        frame["draw"] = frame["draw"] % per
    return frame.sample(frac=1.0, random_state=3).reset_index(drop=True)


# -- NumPy ------------------------------------------------------------------------------------
def test_npy_round_trip_float64(tmp_path, values, households):
    np.save(tmp_path / "tau.npy", values)
    d = load_draws(tmp_path / "tau.npy", households)
    np.testing.assert_array_equal(d._values, values)
    assert d.dtype == np.float64 and d.n_chains == 1
    assert list(d.covariates.columns) == list(households.columns)


def test_npy_float32_stays_float32(tmp_path, values, households):
    v32 = values.astype(np.float32)
    np.save(tmp_path / "tau.npy", v32)
    d = load_draws(str(tmp_path / "tau.npy"), households)
    assert d.dtype == np.float32
    np.testing.assert_array_equal(d._values, v32)


def test_npy_three_dims_are_chain_major(tmp_path, values, households):
    cube = values.reshape(2, 3, N_UNITS)  # (chain, draw, unit)
    np.save(tmp_path / "tau.npy", cube)
    d = load_draws(tmp_path / "tau.npy", households)
    assert d.n_chains == 2
    # Chain-major stacking by hand: chain 0's three draws, then chain 1's.
    np.testing.assert_array_equal(d._values, np.concatenate([cube[0], cube[1]]))


def test_npy_memory_mapped(tmp_path, values, households):
    np.save(tmp_path / "tau.npy", values)
    d = load_draws(tmp_path / "tau.npy", households, mmap=True)
    assert isinstance(d._values, np.memmap)
    np.testing.assert_array_equal(d._values, values)


def test_npz_picks_the_only_array_or_the_named_one(tmp_path, values, households):
    np.savez(tmp_path / "one.npz", cate=values)
    np.testing.assert_array_equal(load_draws(tmp_path / "one.npz", households)._values, values)
    np.savez_compressed(tmp_path / "two.npz", cate=values, other=values[:, ::-1])
    d = load_draws(tmp_path / "two.npz", households, variable="other")
    np.testing.assert_array_equal(d._values, values[:, ::-1])


def test_npz_errors_list_the_arrays(tmp_path, values, households):
    np.savez(tmp_path / "two.npz", cate=values, other=values)
    with pytest.raises(SummaryError, match=r"holds 2 arrays; name one of 'cate', 'other'"):
        load_draws(tmp_path / "two.npz", households)
    with pytest.raises(SummaryError, match=r"`variable` 'tau' is not in .*available: 'cate', 'other'"):
        load_draws(tmp_path / "two.npz", households, variable="tau")


def test_pickled_object_arrays_are_refused(tmp_path, households):
    obj = np.empty((N_DRAWS, N_UNITS), dtype=object)
    obj[:] = 1.0
    np.save(tmp_path / "obj.npy", obj, allow_pickle=True)
    with pytest.raises(SummaryError, match="pickled object array; pickles are refused"):
        load_draws(tmp_path / "obj.npy", households)
    np.savez(tmp_path / "obj.npz", cate=obj)
    with pytest.raises(SummaryError, match="pickled object array"):
        load_draws(tmp_path / "obj.npz", households)


def test_truncated_npy(tmp_path, values, households):
    np.save(tmp_path / "full.npy", values)
    data = (tmp_path / "full.npy").read_bytes()
    (tmp_path / "cut.npy").write_bytes(data[:-12])
    with pytest.raises(SummaryError, match=r"cannot read .*cut\.npy.* as \.npy \(is it truncated\?\)"):
        load_draws(tmp_path / "cut.npy", households)
    with pytest.raises(SummaryError, match="is it truncated"):
        load_draws(tmp_path / "cut.npy", households, mmap=True)


def test_not_a_numpy_file(tmp_path, households):
    (tmp_path / "fake.npy").write_text("draw,unit\n")
    with pytest.raises(SummaryError, match=r"is not a \.npy file"):
        load_draws(tmp_path / "fake.npy", households)
    (tmp_path / "fake.npz").write_bytes(b"\x93NUMPY not a zip")
    with pytest.raises(SummaryError, match=r"is not a \.npz \(zip\) file"):
        load_draws(tmp_path / "fake.npz", households)


def test_npy_with_wrong_dimensions(tmp_path, households):
    np.save(tmp_path / "flat.npy", np.arange(5.0))
    with pytest.raises(SummaryError, match=r"has shape \(5,\); it must be 2-D \(draw, unit\) or 3-D"):
        load_draws(tmp_path / "flat.npy", households)


# -- CSV and Parquet tables -----------------------------------------------------------------------
def test_wide_csv_round_trip(tmp_path, values, households):
    wide = pd.DataFrame(values, columns=[f"hh{i}" for i in range(N_UNITS)])
    wide.to_csv(tmp_path / "wide.csv", index=False, float_format="%.17g")
    d = load_draws(tmp_path / "wide.csv", households)
    np.testing.assert_array_equal(d._values, values)


def test_wide_csv_chain_and_draw_columns_order_rows_and_are_removed(tmp_path, values, households):
    wide = pd.DataFrame(values, columns=[f"hh{i}" for i in range(N_UNITS)])
    wide.insert(0, "chain", np.repeat([1, 2], 3))
    wide.insert(1, "draw", np.tile([0, 1, 2], 2))
    wide.iloc[::-1].to_csv(tmp_path / "wide.csv", index=False, float_format="%.17g")  # rows reversed on disk
    d = load_draws(tmp_path / "wide.csv", households)
    assert d.n_chains == 2 and d.n_units == N_UNITS
    np.testing.assert_array_equal(d._values, values)


def test_wide_parquet_keeps_float32(tmp_path, values, households):
    v32 = values.astype(np.float32)
    pd.DataFrame(v32, columns=[f"hh{i}" for i in range(N_UNITS)]).to_parquet(tmp_path / "wide.parquet")
    d = load_draws(tmp_path / "wide.parquet", households)
    assert d.dtype == np.float32
    np.testing.assert_array_equal(d._values, v32)


@pytest.mark.parametrize("suffix", ["csv", "parquet"])
def test_long_table_round_trip_units_sorted(tmp_path, values, households, suffix):
    long = _long(values)
    long["unit"] = long["unit"].map(lambda u: N_UNITS + 1 - u)  # ids 5..1: sorted ids reverse the columns
    path = tmp_path / f"long.{suffix}"
    long.to_csv(path, index=False, float_format="%.17g") if suffix == "csv" else long.to_parquet(path)
    d = load_draws(path, households)
    np.testing.assert_array_equal(d._values, values[:, ::-1])


def test_long_table_with_chains_and_named_value_column(tmp_path, values, households):
    long = _long(values, chains=2).rename(columns={"value": "bill_change"})
    long.to_parquet(tmp_path / "long.parquet")
    d = load_draws(tmp_path / "long.parquet", households, variable="bill_change")
    assert d.n_chains == 2
    np.testing.assert_array_equal(d._values, values)


def test_long_table_must_be_a_complete_grid(tmp_path, values, households):
    long = _long(values)
    gap = long[~((long["draw"] == 4) & (long["unit"] == 2))]
    gap.to_csv(tmp_path / "gap.csv", index=False)
    with pytest.raises(SummaryError, match=r"not a complete draw x unit grid \(6 draws x 5 units\): 1 of 30 cells are missing, e\.g\. \(draw 4, unit 2\)"):
        load_draws(tmp_path / "gap.csv", households)
    pd.concat([long, long.iloc[:1]]).to_csv(tmp_path / "dup.csv", index=False)
    with pytest.raises(SummaryError, match=r"1 \(draw, unit\) cells .* appear more than once \(first: draw \d, unit \d\)"):
        load_draws(tmp_path / "dup.csv", households)


def test_layout_long_forced_names_missing_columns(tmp_path, values, households):
    pd.DataFrame(values).to_csv(tmp_path / "wide.csv", index=False)
    with pytest.raises(SummaryError, match=r"`layout`='long' needs columns 'draw', 'unit', 'value'.*missing 'draw', 'unit', 'value'"):
        load_draws(tmp_path / "wide.csv", households, layout="long")
    with pytest.raises(SummaryError, match=r"`layout` must be one of 'wide', 'long'"):
        load_draws(tmp_path / "wide.csv", households, layout="tall")
    np.save(tmp_path / "tau.npy", values)
    with pytest.raises(SummaryError, match="`layout` applies to CSV and Parquet tables only"):
        load_draws(tmp_path / "tau.npy", households, layout="wide")


def test_wide_table_with_text_columns(tmp_path, values, households):
    wide = pd.DataFrame(values, columns=[f"hh{i}" for i in range(N_UNITS)])
    wide["note"] = "x"
    wide.to_csv(tmp_path / "wide.csv", index=False)
    with pytest.raises(SummaryError, match=r"are not numeric: 'note'"):
        load_draws(tmp_path / "wide.csv", households)


def test_truncated_csv_row(tmp_path, values, households):
    pd.DataFrame(values).to_csv(tmp_path / "wide.csv", index=False, float_format="%.17g")
    text = (tmp_path / "wide.csv").read_text()
    (tmp_path / "cut.csv").write_text(text[: text.rindex(",")])  # the last row loses its last field
    with pytest.raises(SummaryError, match=r"cannot read .*cut\.csv.* as a CSV table \(is it truncated or malformed\?\).*Expected 5 columns, got 4"):
        load_draws(tmp_path / "cut.csv", households)


def test_truncated_parquet(tmp_path, values, households):
    pd.DataFrame(values, columns=list("abcde")).to_parquet(tmp_path / "full.parquet")
    data = (tmp_path / "full.parquet").read_bytes()
    (tmp_path / "cut.parquet").write_bytes(data[: len(data) // 2])
    with pytest.raises(SummaryError, match=r"cannot read .*cut\.parquet.* as Parquet \(is it truncated or malformed\?\)"):
        load_draws(tmp_path / "cut.parquet", households)


# -- matching units to the covariates -------------------------------------------------------------
def test_unit_ids_in_covariates_reorder_the_draws(tmp_path, values, households):
    wide = pd.DataFrame(values, columns=[f"hh{i}" for i in range(N_UNITS)])
    wide.to_csv(tmp_path / "wide.csv", index=False, float_format="%.17g")
    order = [3, 0, 4, 1, 2]
    cov = households.assign(unit=[f"hh{i}" for i in order])
    d = load_draws(tmp_path / "wide.csv", cov)
    # the matrix keeps the file's order; the covariate rows follow it (matched by id)
    np.testing.assert_array_equal(d.values, values)
    assert list(d.unit_ids) == [f"hh{i}" for i in range(N_UNITS)]
    pd.testing.assert_frame_equal(d.covariates, households.iloc[np.argsort(order)].reset_index(drop=True))
    assert "unit" not in d.covariates.columns  # an identifier is not a covariate
    # unit_column=None matches by position and keeps the column
    d = load_draws(tmp_path / "wide.csv", cov, unit_column=None)
    np.testing.assert_array_equal(d._values, values)
    assert "unit" in d.covariates.columns


def test_unit_ids_for_long_table(tmp_path, values, households):
    _long(values).to_csv(tmp_path / "long.csv", index=False, float_format="%.17g")
    cov = households.assign(unit=[5, 4, 3, 2, 1])
    d = load_draws(tmp_path / "long.csv", cov)
    np.testing.assert_array_equal(d.values, values)  # file units 1..5 in natural order
    pd.testing.assert_frame_equal(d.covariates, households.iloc[::-1].reset_index(drop=True))


def test_unit_ids_that_do_not_match(tmp_path, values, households):
    pd.DataFrame(values, columns=[f"hh{i}" for i in range(N_UNITS)]).to_csv(tmp_path / "wide.csv", index=False)
    cov = households.assign(unit=["hh0", "hh1", "hh2", "hh3", "hh9"])
    with pytest.raises(SummaryError, match=r"do not match the covariates' column 'unit': 1 covariate units have no draws \(e\.g\. 'hh9'\), 1 draw units are not in the covariates \(e\.g\. 'hh4'\)"):
        load_draws(tmp_path / "wide.csv", cov)
    with pytest.raises(SummaryError, match=r"repeats unit ids: 'hh1'"):
        load_draws(tmp_path / "wide.csv", households.assign(unit=["hh0", "hh1", "hh1", "hh3", "hh4"]))
    with pytest.raises(SummaryError, match=r"\(unit ids\) has 1 missing values"):
        load_draws(tmp_path / "wide.csv", households.assign(unit=["hh0", None, "hh2", "hh3", "hh4"]))


@pytest.mark.parametrize("suffix", ["csv", "parquet"])
def test_covariates_from_a_file(tmp_path, values, households, suffix):
    np.save(tmp_path / "tau.npy", values)
    cov = households.assign(heating=households["heating"].astype(str))
    path = tmp_path / f"households.{suffix}"
    cov.to_csv(path, index=False, float_format="%.17g") if suffix == "csv" else cov.to_parquet(path)
    d = load_draws(tmp_path / "tau.npy", path)
    np.testing.assert_array_equal(d.covariates["baseline_bill"].to_numpy(), cov["baseline_bill"].to_numpy())
    assert d.covariates["region"].isna().sum() == 1 and list(d.covariates.columns) == list(cov.columns)


def test_covariate_file_errors(tmp_path, values, households):
    np.save(tmp_path / "tau.npy", values)
    (tmp_path / "households.xlsx").write_text("x")
    with pytest.raises(SummaryError, match=r"`covariates`: cannot tell the format .*'\.xlsx'; supported: \.csv, \.parquet"):
        load_draws(tmp_path / "tau.npy", tmp_path / "households.xlsx")
    (tmp_path / "cut.csv").write_text("baseline_bill,region\n812.5,north\n640.0\n")
    with pytest.raises(SummaryError, match=r"`covariates`: cannot read .*cut\.csv.*truncated or malformed"):
        load_draws(tmp_path / "tau.npy", tmp_path / "cut.csv")
    with pytest.raises(SummaryError, match="`covariates`: .*does not exist"):
        load_draws(tmp_path / "tau.npy", tmp_path / "nope.csv")
    with pytest.raises(SummaryError, match="`covariates` must be a pandas DataFrame or a path .* got ndarray"):
        load_draws(tmp_path / "tau.npy", np.zeros((N_UNITS, 2)))


# -- netCDF --------------------------------------------------------------------------------------
@pytest.mark.parametrize("engine", ["h5netcdf", "netcdf4"])
@pytest.mark.parametrize("dtype", [np.float64, np.float32])
def test_netcdf_round_trip_chain_major(tmp_path, values, households, engine, dtype):
    cube = values.astype(dtype).reshape(2, 3, N_UNITS)
    # dims stored as (household, chain, draw) so the loader has to reorder them
    da = xr.DataArray(cube.transpose(2, 0, 1), dims=("household", "chain", "draw"))
    xr.Dataset({"tau": da, "lp": (("chain", "draw"), np.zeros((2, 3)))}).to_netcdf(tmp_path / "post.nc", engine=engine)
    d = load_draws(tmp_path / "post.nc", households, variable="tau")
    assert d.n_chains == 2 and d.dtype == dtype
    np.testing.assert_array_equal(d._values, cube.reshape(6, N_UNITS))  # C-order reshape = chain-major


def test_netcdf3_classic_file(tmp_path, values, households):
    # netCDF-3 (not HDF5) written by scipy's writer: read through xarray's own engine choice
    da = xr.DataArray(values[None], dims=("chain", "draw", "household"))
    da.to_dataset(name="tau").to_netcdf(tmp_path / "post.nc", engine="scipy", format="NETCDF3_64BIT")
    np.testing.assert_array_equal(load_draws(tmp_path / "post.nc", households)._values, values)


def test_netcdf_unit_coordinate_matched_to_covariates(tmp_path, values, households):
    ids = [10, 20, 30, 40, 50]
    da = xr.DataArray(values.reshape(1, N_DRAWS, N_UNITS), dims=("chain", "draw", "household"), coords={"household": ids})
    da.to_dataset(name="tau").to_netcdf(tmp_path / "post.nc")
    d = load_draws(tmp_path / "post.nc", households.assign(unit=[50, 40, 30, 20, 10]))
    np.testing.assert_array_equal(d.values, values)  # the file's order; the covariate rows follow it
    assert list(d.unit_ids) == ids
    pd.testing.assert_frame_equal(d.covariates, households.iloc[::-1].reset_index(drop=True))


def test_netcdf_errors(tmp_path, values, households):
    ds = xr.Dataset({"tau": (("chain", "draw", "household"), values.reshape(2, 3, N_UNITS)), "lp": (("chain", "draw"), np.zeros((2, 3)))})
    ds.to_netcdf(tmp_path / "post.nc")
    with pytest.raises(SummaryError, match=r"`variable` 'cate' is not in .*available, by group: \(root\): 'tau', 'lp'"):
        load_draws(tmp_path / "post.nc", households, variable="cate")
    with pytest.raises(SummaryError, match=r"holds 2 variables; name one of 'tau', 'lp'"):
        load_draws(tmp_path / "post.nc", households)
    with pytest.raises(SummaryError, match=r"has dims \('chain', 'draw'\); it needs a 'draw' dim, .*exactly one unit dim"):
        load_draws(tmp_path / "post.nc", households, variable="lp")
    with pytest.raises(SummaryError, match=r"`chains` = 3 but the file records 2 chains"):
        load_draws(tmp_path / "post.nc", households, variable="tau", chains=3)
    data = (tmp_path / "post.nc").read_bytes()
    (tmp_path / "cut.nc").write_bytes(data[: len(data) // 3])
    with pytest.raises(SummaryError, match=r"cannot read .*cut\.nc.* (as netCDF|variable 'tau')"):
        load_draws(tmp_path / "cut.nc", households, variable="tau")


# -- sampler CSV output ---------------------------------------------------------------------------
def _sampler_text(values, name="tau.{}", order=None, comments=True):
    """Sampler CSV written by hand: comment lines, extra columns, unit columns in the given text order."""
    n = values.shape[1]
    order = list(range(n)) if order is None else order
    header = ["lp__", "accept_stat__"] + [name.format(k + 1) for k in order] + ["sigma"]
    lines = ["# model = retrofit_bills", "# num_samples = 6"] if comments else []
    lines.append(",".join(f'"{h}"' if "," in h else h for h in header))
    if comments:
        lines.append("# Adaptation terminated")
    for s, row in enumerate(values):
        fields = [repr(-10.0 - s), "0.9"] + [repr(float(row[k])) for k in order] + ["1.5"]
        lines.append(",".join(fields))
    if comments:
        lines.append("#  Elapsed Time: 0.1 seconds")
    return "\n".join(lines) + "\n"


@pytest.mark.parametrize("name", ["tau.{}", "tau[{}]", "tau_{}"])
def test_sampler_csv_orders_units_by_integer_index(tmp_path, name):
    rng = np.random.default_rng(7)
    wide = rng.standard_normal((4, 12))
    order = [9, 0, 10, 1, 11, 2, 3, 4, 5, 6, 7, 8]  # text order puts tau.10 before tau.2
    (tmp_path / "out.csv").write_text(_sampler_text(wide, name, order))
    cov = pd.DataFrame({"baseline_bill": np.arange(12.0)})
    d = load_draws(tmp_path / "out.csv", cov, variable="tau")  # detected from the leading '#'
    np.testing.assert_array_equal(d._values, wide)


def test_sampler_csv_detected_without_comments(tmp_path, values, households):
    (tmp_path / "out.csv").write_text(_sampler_text(values, comments=False))
    d = load_draws(tmp_path / "out.csv", households, variable="tau")
    np.testing.assert_array_equal(d._values, values)


def test_sampler_csv_one_file_per_chain(tmp_path, values, households):
    (tmp_path / "chain1.csv").write_text(_sampler_text(values[:3]))
    (tmp_path / "chain2.csv").write_text(_sampler_text(values[3:], "tau[{}]"))
    d = load_draws([tmp_path / "chain1.csv", tmp_path / "chain2.csv"], households, variable="tau")
    assert d.n_chains == 2
    np.testing.assert_array_equal(d._values, values)
    (tmp_path / "short.csv").write_text(_sampler_text(values[:2]))
    with pytest.raises(SummaryError, match=r"short\.csv' has 2 draws but .*chain1\.csv' has 3"):
        load_draws([tmp_path / "chain1.csv", tmp_path / "short.csv"], households, variable="tau")


def test_sampler_csv_prefix_matching_no_column(tmp_path, values, households):
    (tmp_path / "out.csv").write_text(_sampler_text(values))
    with pytest.raises(SummaryError, match=r"prefix 'cate' matches no column .*Columns seen: 'lp__', 'accept_stat__', 'tau\.1'"):
        load_draws(tmp_path / "out.csv", households, variable="cate")
    with pytest.raises(SummaryError, match=r"`variable` is needed for sampler CSV output"):
        load_draws(tmp_path / "out.csv", households)
    # no comments: 'cate' is neither a long-table value column nor a prefix
    (tmp_path / "plain.csv").write_text(_sampler_text(values, comments=False))
    with pytest.raises(SummaryError, match=r"`variable` 'cate' matches no column .*nor a prefix of unit columns"):
        load_draws(tmp_path / "plain.csv", households, variable="cate")


def test_sampler_csv_gaps_and_truncation(tmp_path, values, households):
    (tmp_path / "gap.csv").write_text(_sampler_text(values, order=[0, 1, 3, 4]).replace("tau.5", "tau.6"))
    with pytest.raises(SummaryError, match=r"must run 1\.\.n .*missing '3', '5'"):
        load_draws(tmp_path / "gap.csv", households, variable="tau")
    text = _sampler_text(values, comments=False)
    (tmp_path / "cut.csv").write_text(text[: text.rindex(",")])
    with pytest.raises(SummaryError, match=r"as sampler CSV \(is it truncated\?\).*Expected 8 columns, got 7"):
        load_draws(tmp_path / "cut.csv", households, variable="tau", format="sampler-csv")


# -- paths and formats ---------------------------------------------------------------------------
def test_unknown_extension_lists_supported(tmp_path, households):
    (tmp_path / "draws.xlsx").write_text("x")
    with pytest.raises(SummaryError, match=r"extension '\.xlsx'\. Supported: extensions \.npy, \.npz, \.csv, \.parquet, \.pq, \.nc"):
        load_draws(tmp_path / "draws.xlsx", households)
    with pytest.raises(SummaryError, match=r"`format` must be one of 'npy', 'npz', 'csv', 'parquet', 'netcdf', 'zarr', 'sampler-csv'"):
        load_draws(tmp_path / "draws.xlsx", households, format="excel")


def test_format_overrides_extension(tmp_path, values, households):
    np.save(tmp_path / "tau.npy", values)
    (tmp_path / "tau.npy").rename(tmp_path / "tau.bin")
    np.testing.assert_array_equal(load_draws(tmp_path / "tau.bin", households, format="npy")._values, values)


def test_path_errors(tmp_path, values, households):
    with pytest.raises(SummaryError, match=r"`path`: '.*missing\.npy' does not exist"):
        load_draws(tmp_path / "missing.npy", households)
    with pytest.raises(SummaryError, match="is a directory, not a file"):
        load_draws(tmp_path, households)
    with pytest.raises(SummaryError, match="`path` must be a file path"):
        load_draws(values, households)
    np.save(tmp_path / "tau.npy", values)
    with pytest.raises(SummaryError, match=r"a list \(one file per chain\) is read only for format='sampler-csv'"):
        load_draws([tmp_path / "tau.npy", tmp_path / "tau.npy"], households)
    with pytest.raises(SummaryError, match=r"`variable` picks an array inside a \.npz file"):
        load_draws(tmp_path / "tau.npy", households, variable="tau")


def test_passes_settings_and_checks_to_effect_draws(tmp_path, values, households):
    np.save(tmp_path / "tau.npy", values)
    w = np.array([1.0, 2.0, 0.5, 1.0, 3.0])
    d = load_draws(tmp_path / "tau.npy", households, weights=w, chains=3, label="bill change")
    assert (d.n_chains, d.label) == (3, "bill change")
    # unit weights cancel in the per-unit posterior mean (sum_s w_i T_si / sum_s w_i): numpy's plain mean
    np.testing.assert_allclose(d.posterior_mean, values.mean(axis=0), rtol=1e-12)
    with pytest.raises(SummaryError, match=r"`values` has shape \(6, 5\) but `covariates` has 4 rows"):
        load_draws(tmp_path / "tau.npy", households.iloc[:4])

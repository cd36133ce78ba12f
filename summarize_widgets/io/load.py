"""Read posterior draws of unit-level effects from files into an :class:`EffectDraws`.

One entry point, :func:`load_draws`. Each format has a small reader that returns
the draw matrix (or an xarray DataArray), the number of chains the file records
and, when the file names its units, their ids; the shared tail matches the ids to
the covariate table and builds the :class:`EffectDraws`, which does all value
checks (shape, finiteness, weights, chains).

Formats (chosen from the extension, or by ``format=``):

- ``npy`` (``.npy``): a 2-D (draw, unit) or 3-D (chain, draw, unit) array.
- ``npz`` (``.npz``): one such array, picked by ``variable``.
- ``csv`` (``.csv``) and ``parquet`` (``.parquet``, ``.pq``): a wide or a long table.
- ``netcdf`` (``.nc``, ``.nc4``, ``.cdf``): a variable with dims (chain, draw, unit).
- ``sampler-csv`` (detected in ``.csv`` files): ``#`` comment lines, one column per
  unit named ``tau.1``, ``tau[1]`` or ``tau_1``.

Files are never unpickled: NumPy files are opened with ``allow_pickle=False``.
"""
from __future__ import annotations

import csv
import io
import os
import re
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd

from ..core.validate import SummaryError, format_names
from ..core.draws import EffectDraws

__all__ = ["load_draws", "DRAW_FORMATS"]

# format name -> extensions that select it (sampler-csv is detected inside .csv files).
DRAW_FORMATS = {
    "npy": (".npy",),
    "npz": (".npz",),
    "csv": (".csv",),
    "parquet": (".parquet", ".pq"),
    "netcdf": (".nc", ".nc4", ".cdf"),
    "sampler-csv": (),
}
_LAYOUTS = ("wide", "long")
_NPY_MAGIC = b"\x93NUMPY"
_ZIP_MAGIC = b"PK\x03\x04"
_HDF5_MAGIC = b"\x89HDF\r\n\x1a\n"


@dataclass
class _Read:
    """What a format reader found: values (ndarray or DataArray), chains recorded in the file, unit ids."""

    values: object
    chains: int | None = None
    unit_ids: list | None = None
    unit_dim: str | None = None  # for DataArrays: the dim the unit ids index


def load_draws(
    path,
    covariates,
    *,
    format: str | None = None,
    variable: str | None = None,
    layout: str | None = None,
    chains: int | None = None,
    weights=None,
    label: str = "effect",
    unit_column: str | None = "unit",
    group: str | None = None,
    mmap: bool = False,
) -> EffectDraws:
    """Load posterior draws of unit-level effects from a file.

    Parameters
    ----------
    path : str or path-like, or list of them
        The draws file. A list (or tuple) of sampler CSV files is read as one file
        per chain, stacked chain-major in the order given.
    covariates : pandas.DataFrame, or str or path-like to a ``.csv`` / ``.parquet`` file
        One row per unit. If it has a column named ``unit_column``, that column holds
        unit ids: draws whose file names its units (wide and long tables, a netCDF
        unit coordinate) are matched to it by id, and the column is then dropped
        (an identifier is not a covariate).
    format : {"npy", "npz", "csv", "parquet", "netcdf", "sampler-csv"}, optional
        Overrides the format implied by the extension. A ``.csv`` file is read as
        sampler output when it begins with ``#`` comment lines, or when ``variable``
        is not a column but prefixes columns like ``tau.1``.
    variable : str, optional
        The array inside a ``.npz`` file or the variable inside a netCDF file (needed
        when there are several); the column prefix for sampler CSV output
        (``"tau"`` picks ``tau.1``, ``tau[1]`` or ``tau_1``); the value column of a
        long table (default ``"value"``).
    layout : {"wide", "long"}, optional
        For CSV and Parquet tables. *wide*: one row per draw, one column per unit,
        with optional ``chain`` and ``draw`` columns (used to order the rows, then
        removed). *long*: columns ``draw``, ``unit``, ``value`` and optionally
        ``chain``, one row per draw and unit, a complete grid. Default: long when
        the ``draw``, ``unit`` and value columns exist, wide otherwise.
    chains : int, optional
        Number of chains when the file does not record them (draws stored chain-major).
        If the file records chains (a ``chain`` column or dim, a 3-D array, a list of
        files), a different value is an error.
    weights : None or array-like, shape (n_units,) or (n_draws, n_units), optional
        Passed to :class:`EffectDraws`, in the order of the covariate rows.
    label : str, default "effect"
        What the values are, for tables and figures.
    unit_column : str or None, default "unit"
        Name of the unit-id column of the covariates (see ``covariates``); None turns
        matching off.
    group : str, optional
        netCDF group holding the variable (default: the root group).
    mmap : bool, default False
        Memory-map a ``.npy`` file read-only instead of reading it into memory.

    Returns
    -------
    EffectDraws
        Draws of shape (n_draws, n_units), chain-major.

    Notes
    -----
    Unit order (the columns of the draw matrix, which must follow the covariate
    rows): with a unit-id column in the covariates, its order; otherwise the file's
    order (array columns, table columns, the netCDF unit dim, the sampler index
    1, 2, ..., 10 compared as integers), except for long tables, whose units are
    sorted by id. Draw order: chain-major, draws in file order, or sorted by
    ``(chain, draw)`` when those columns exist.

    Float values are read exactly: ``.npy``, ``.npz``, Parquet and netCDF keep
    their dtype (float32 stays float32); CSV numbers are parsed to the nearest
    float64, so a file written with 17 significant digits round-trips exactly.

    Raises
    ------
    SummaryError
        For a missing, unreadable or truncated file, an unknown extension or format,
        a variable or prefix that is not there (the available names are listed),
        a pickled object array, an incomplete long table, or any check of
        :class:`EffectDraws`.
    """
    paths = _as_paths(path)
    fmt = _resolve_format(paths, format, variable)
    if layout is not None and layout not in _LAYOUTS:
        raise SummaryError(f"`layout` must be one of {format_names(_LAYOUTS)} or None; got {layout!r}.")
    if layout is not None and fmt not in ("csv", "parquet"):
        raise SummaryError(f"`layout` applies to CSV and Parquet tables only; the draws are read as {fmt!r}.")
    if len(paths) > 1 and fmt != "sampler-csv":
        raise SummaryError(
            f"`path` is a list of {len(paths)} files; a list (one file per chain) is read only for "
            f"format='sampler-csv', but the files are read as {fmt!r}."
        )
    if fmt == "npy" and variable is not None:
        raise SummaryError("`variable` picks an array inside a .npz file; a .npy file holds a single array.")
    cov = _read_covariates(covariates)

    if fmt == "npy":
        read = _read_npy(paths[0], mmap)
    elif fmt == "npz":
        read = _read_npz(paths[0], variable)
    elif fmt in ("csv", "parquet"):
        read = _read_table(paths[0], fmt, variable, layout)
    elif fmt == "netcdf":
        read = _read_netcdf(paths[0], variable, group)
    else:
        read = _read_sampler_csv(paths, variable)

    values, cov = _match_units(read, cov, unit_column)
    if read.chains is not None and chains is not None and chains != read.chains:
        raise SummaryError(
            f"`chains` = {chains!r} but the file records {read.chains} chains; leave `chains` unset to use the file's."
        )
    return EffectDraws(values, cov, weights=weights, chains=read.chains if chains is None else chains, label=label)


# -- paths and formats -------------------------------------------------------------------
def _as_paths(path) -> list[Path]:
    items = list(path) if isinstance(path, (list, tuple)) else [path]
    if not items:
        raise SummaryError("`path` is an empty list; pass a file, or one sampler CSV file per chain.")
    out = []
    for p in items:
        if not isinstance(p, (str, os.PathLike)):
            raise SummaryError(f"`path` must be a file path (str or path-like) or a list of them; got {type(p).__name__}.")
        p = Path(p)
        if not p.is_file():
            what = "is a directory, not a file" if p.is_dir() else "does not exist"
            raise SummaryError(f"`path`: {str(p)!r} {what}.")
        out.append(p)
    return out


def _supported() -> str:
    exts = [e for f in DRAW_FORMATS.values() for e in f]
    return f"extensions {', '.join(exts)}; formats {format_names(DRAW_FORMATS)}"


def _resolve_format(paths: list[Path], format, variable) -> str:
    if format is not None:
        if format not in DRAW_FORMATS:
            raise SummaryError(f"`format` must be one of {format_names(DRAW_FORMATS)}; got {format!r}.")
        return format
    suffixes = {p.suffix.lower() for p in paths}
    if len(suffixes) > 1:
        raise SummaryError(f"`path` lists files with different extensions {sorted(suffixes)}; pass one format.")
    suffix = suffixes.pop()
    fmt = next((f for f, exts in DRAW_FORMATS.items() if suffix in exts), None)
    if fmt is None:
        raise SummaryError(
            f"`path`: cannot tell the format of {str(paths[0])!r} from its extension {suffix or '(none)'!r}. "
            f"Supported: {_supported()}; pass `format=` to override."
        )
    if fmt == "csv":
        first, header = _sniff_csv(paths[0])
        if first.lstrip().startswith("#"):
            return "sampler-csv"
        if len(paths) > 1 or (variable is not None and variable not in header and _prefix_columns(header, variable)):
            return "sampler-csv"
    return fmt


def _sniff_csv(path: Path) -> tuple[str, list[str]]:
    """The first line and the header (first non-comment line) of a CSV file, read cheaply."""
    first, header = "", []
    try:
        with open(path, encoding="utf-8", newline="") as fh:
            for i, line in enumerate(fh):
                if i == 0:
                    first = line
                if line.strip() and not line.lstrip().startswith("#"):
                    header = next(csv.reader([line]))
                    break
    except (OSError, UnicodeDecodeError) as exc:
        raise SummaryError(f"`path`: cannot read {str(path)!r} as text CSV: {exc}") from exc
    return first, header


# -- covariates ----------------------------------------------------------------------------
def _read_covariates(covariates) -> pd.DataFrame:
    if isinstance(covariates, pd.DataFrame):
        return covariates
    if not isinstance(covariates, (str, os.PathLike)):
        raise SummaryError(
            "`covariates` must be a pandas DataFrame or a path to a .csv or .parquet file; "
            f"got {type(covariates).__name__}."
        )
    p = Path(covariates)
    if not p.is_file():
        raise SummaryError(f"`covariates`: {str(p)!r} does not exist or is not a file.")
    suffix = p.suffix.lower()
    try:
        if suffix == ".csv":
            # The pyarrow parser refuses rows with missing fields (pandas' C parser pads them with NaN).
            return pd.read_csv(p, engine="pyarrow")
        if suffix in (".parquet", ".pq"):
            return pd.read_parquet(p)
    except Exception as exc:  # noqa: BLE001 - any parser failure is reported with the file name
        raise SummaryError(f"`covariates`: cannot read {str(p)!r} (is it truncated or malformed?): {exc}") from exc
    raise SummaryError(
        f"`covariates`: cannot tell the format of {str(p)!r} from its extension {suffix or '(none)'!r}; "
        "supported: .csv, .parquet, .pq, or pass a DataFrame."
    )


def _match_units(read: _Read, cov: pd.DataFrame, unit_column):
    """Reorder the draw columns to the covariates' unit ids (if both exist); drop the id column."""
    if unit_column is None or unit_column not in cov.columns:
        return read.values, cov
    ids = cov[unit_column]
    if ids.isna().any():
        raise SummaryError(
            f"`covariates` column {unit_column!r} (unit ids) has {int(ids.isna().sum())} missing values; "
            "every unit needs an id (or pass unit_column=None)."
        )
    keys = [str(v) for v in ids]
    dup = sorted({k for k, c in pd.Series(keys).value_counts().items() if c > 1})
    if dup:
        raise SummaryError(f"`covariates` column {unit_column!r} (unit ids) repeats ids: {format_names(dup, 5)}.")
    cov = cov.drop(columns=[unit_column])
    if read.unit_ids is None:
        return read.values, cov
    file_keys = [str(v) for v in read.unit_ids]
    pos = {k: i for i, k in enumerate(file_keys)}
    missing = [k for k in keys if k not in pos]
    extra = sorted(set(file_keys) - set(keys))
    if missing or extra:
        parts = []
        if missing:
            parts.append(f"{len(missing)} covariate unit ids have no draws (e.g. {format_names(missing, 5)})")
        if extra:
            parts.append(f"{len(extra)} units in the draws are not in the covariates (e.g. {format_names(extra, 5)})")
        raise SummaryError(
            f"`covariates` column {unit_column!r} does not match the draws' units: {'; '.join(parts)}. "
            "Ids are compared as text; pass unit_column=None to match by position instead."
        )
    order = np.array([pos[k] for k in keys])
    if np.array_equal(order, np.arange(len(order))):
        return read.values, cov  # already aligned: keep the matrix as it is (no copy)
    if read.unit_dim is not None:
        return read.values.isel({read.unit_dim: order}), cov
    return read.values[:, order], cov


# -- NumPy -----------------------------------------------------------------------------------
def _check_magic(path: Path, magic: bytes, what: str):
    with open(path, "rb") as fh:
        head = fh.read(len(magic))
    if head != magic:
        raise SummaryError(f"`path`: {str(path)!r} is not a {what} file (it does not start with the {what} signature).")


def _numpy_error(path: Path, exc: Exception, what: str) -> SummaryError:
    text = str(exc)
    if "allow_pickle" in text or "Object arrays" in text or "pickled" in text:
        return SummaryError(
            f"`path`: {str(path)!r} holds a pickled object array; pickles are refused because loading them can run "
            "code. Save the draws as a numeric array (e.g. values.astype(float))."
        )
    return SummaryError(f"`path`: cannot read {str(path)!r} as {what} (is it truncated?): {text}")


def _from_array(arr: np.ndarray, path: Path, what: str) -> _Read:
    if arr.ndim == 3:  # (chain, draw, unit): a C-order reshape keeps chain-major order (a view for contiguous arrays)
        return _Read(arr.reshape(arr.shape[0] * arr.shape[1], arr.shape[2]), chains=int(arr.shape[0]))
    if arr.ndim != 2:
        raise SummaryError(
            f"`path`: the array in {str(path)!r} ({what}) has shape {arr.shape}; it must be 2-D (draw, unit) "
            "or 3-D (chain, draw, unit)."
        )
    return _Read(arr)


def _read_npy(path: Path, mmap: bool) -> _Read:
    _check_magic(path, _NPY_MAGIC, ".npy")
    try:
        arr = np.load(path, allow_pickle=False, mmap_mode="r" if mmap else None)
    except Exception as exc:  # noqa: BLE001 - numpy raises ValueError/EOFError/OSError for bad files
        raise _numpy_error(path, exc, ".npy") from exc
    return _from_array(arr, path, ".npy")


def _read_npz(path: Path, variable) -> _Read:
    _check_magic(path, _ZIP_MAGIC, ".npz (zip)")
    try:
        with np.load(path, allow_pickle=False) as archive:
            names = list(archive.files)
            if variable is None:
                if len(names) != 1:
                    raise SummaryError(
                        f"`variable`: {str(path)!r} holds {len(names)} arrays; name one of {format_names(names)}."
                    )
                variable = names[0]
            elif variable not in names:
                raise SummaryError(f"`variable` {variable!r} is not in {str(path)!r}; available: {format_names(names)}.")
            arr = archive[variable]
    except SummaryError:
        raise
    except Exception as exc:  # noqa: BLE001 - zipfile/zlib/numpy errors for damaged archives
        raise _numpy_error(path, exc, ".npz") from exc
    return _from_array(arr, path, f"array {variable!r}")


# -- tables ----------------------------------------------------------------------------------
def _load_frame(path: Path, fmt: str) -> pd.DataFrame:
    try:
        if fmt == "csv":
            # pyarrow's parser refuses rows with missing fields (a truncated file) and parses floats exactly.
            return pd.read_csv(path, engine="pyarrow")
        return pd.read_parquet(path)
    except Exception as exc:  # noqa: BLE001 - parser failures of either engine
        kind = "a CSV table" if fmt == "csv" else "Parquet"
        raise SummaryError(f"`path`: cannot read {str(path)!r} as {kind} (is it truncated or malformed?): {exc}") from exc


def _read_table(path: Path, fmt: str, variable, layout) -> _Read:
    df = _load_frame(path, fmt)
    cols = [str(c) for c in df.columns]
    df.columns = cols
    value_col = variable if variable is not None else "value"
    if variable is not None and variable not in cols:
        hint = ""
        if fmt == "csv":
            hint = " nor a prefix of unit columns like 'tau.1', 'tau[1]' or 'tau_1' (sampler output)"
        raise SummaryError(
            f"`variable` {variable!r} matches no column of {str(path)!r}: it is neither the value column of a "
            f"long table{hint}. Columns seen: {format_names(cols, 8)}."
        )
    long_cols = ["draw", "unit", value_col]
    if layout is None:
        layout = "long" if all(c in cols for c in long_cols) else "wide"
    if layout == "long":
        missing = [c for c in long_cols if c not in cols]
        if missing:
            raise SummaryError(
                f"`layout`='long' needs columns {format_names(long_cols)} (and optionally 'chain') in {str(path)!r}; "
                f"missing {format_names(missing)}. Columns seen: {format_names(cols, 8)}."
            )
        return _long_to_matrix(df, value_col, path)
    return _wide_to_matrix(df, path)


def _check_keys(df: pd.DataFrame, keys: list[str], path: Path):
    for k in keys:
        n_missing = int(df[k].isna().sum())
        if n_missing:
            raise SummaryError(f"`path`: column {k!r} of {str(path)!r} has {n_missing} missing values.")


def _chain_count(df: pd.DataFrame, path: Path) -> int | None:
    """Number of chains from a 'chain' column, checking each has the same number of draws."""
    if "chain" not in df.columns:
        return None
    sizes = df.groupby("chain", sort=True).size()
    if sizes.nunique() != 1:
        raise SummaryError(
            f"`path`: the chains in {str(path)!r} have different numbers of draws "
            f"({', '.join(f'chain {k}: {v}' for k, v in sizes.items())}); each chain needs the same number."
        )
    return int(sizes.size)


def _wide_to_matrix(df: pd.DataFrame, path: Path) -> _Read:
    keys = [c for c in ("chain", "draw") if c in df.columns]
    chains = None
    if keys:
        _check_keys(df, keys, path)
        dup = df.duplicated(keys)
        if dup.any():
            raise SummaryError(
                f"`path`: {int(dup.sum())} rows of {str(path)!r} repeat a ({', '.join(keys)}) pair already seen "
                f"(first at row {int(np.flatnonzero(dup.to_numpy())[0])})."
            )
        chains = _chain_count(df, path)
        df = df.sort_values(keys, kind="stable")
    units = [c for c in df.columns if c not in keys]
    bad = [c for c in units if df[c].dtype.kind not in "biuf"]
    if bad:
        raise SummaryError(
            f"`path`: a wide table has one numeric column per unit, but these columns of {str(path)!r} are not "
            f"numeric: {format_names(bad, 5)}. For a long table use columns 'draw', 'unit', 'value'."
        )
    return _Read(df[units].to_numpy(), chains=chains, unit_ids=units)


def _plain(v):
    """A NumPy scalar as the Python value it holds, so messages read 4, not np.int64(4)."""
    return v.item() if isinstance(v, np.generic) else v


def _cell_text(draw_keys, row_key, unit) -> str:
    parts = [f"{k} {_plain(v)!r}" for k, v in zip(draw_keys, row_key)]
    return ", ".join(parts + [f"unit {_plain(unit)!r}"])


def _long_to_matrix(df: pd.DataFrame, value_col: str, path: Path) -> _Read:
    draw_keys = ["chain", "draw"] if "chain" in df.columns else ["draw"]
    _check_keys(df, draw_keys + ["unit"], path)
    if df[value_col].dtype.kind not in "biuf":
        raise SummaryError(f"`path`: value column {value_col!r} of {str(path)!r} is not numeric (dtype {df[value_col].dtype}).")
    rows = df.groupby(draw_keys, sort=True).ngroup().to_numpy()
    row_keys = df[draw_keys].drop_duplicates().sort_values(draw_keys).to_numpy()
    unit_codes, unit_ids = pd.factorize(df["unit"], sort=True)
    n_rows, n_units = int(rows.max()) + 1, len(unit_ids)
    cell = rows.astype(np.int64) * n_units + unit_codes
    counts = np.bincount(cell, minlength=n_rows * n_units)
    if (counts > 1).any():
        first = int(np.flatnonzero(counts > 1)[0])
        raise SummaryError(
            f"`path`: {int((counts > 1).sum())} (draw, unit) cells of the long table {str(path)!r} appear more than "
            f"once (first: {_cell_text(draw_keys, row_keys[first // n_units], unit_ids[first % n_units])})."
        )
    if (counts == 0).any():
        gaps = np.flatnonzero(counts == 0)
        shown = ", ".join(f"({_cell_text(draw_keys, row_keys[g // n_units], unit_ids[g % n_units])})" for g in gaps[:5])
        raise SummaryError(
            f"`path`: the long table {str(path)!r} is not a complete draw x unit grid ({n_rows} draws x {n_units} "
            f"units): {gaps.size} of {n_rows * n_units} cells are missing, e.g. {shown}."
        )
    values = df[value_col].to_numpy()
    out = np.empty(n_rows * n_units, dtype=values.dtype if values.dtype.kind == "f" else np.float64)
    out[cell] = values
    chains = _chain_count(df.drop_duplicates(draw_keys), path) if "chain" in df.columns else None
    return _Read(out.reshape(n_rows, n_units), chains=chains, unit_ids=list(unit_ids))


# -- netCDF ----------------------------------------------------------------------------------
def _read_netcdf(path: Path, variable, group) -> _Read:
    import xarray as xr  # a dependency, imported only when needed

    with open(path, "rb") as fh:
        is_hdf5 = fh.read(8) == _HDF5_MAGIC
    # netCDF-4 files are HDF5: read them with h5netcdf (a runtime dependency) so the result does not depend on
    # which optional engines are installed; netCDF-3 files go to xarray's own choice (scipy or netCDF4).
    engine = "h5netcdf" if is_hdf5 else None
    try:
        ds = xr.open_dataset(path, group=group, engine=engine)
    except Exception as exc:  # noqa: BLE001 - backends raise many types for unreadable files
        raise SummaryError(f"`path`: cannot read {str(path)!r} as netCDF (is it truncated or malformed?): {exc}") from exc
    with ds:
        names = [str(v) for v in ds.data_vars]
        if variable is None:
            if len(names) != 1:
                raise SummaryError(f"`variable`: {str(path)!r} holds {len(names)} variables; name one of {format_names(names)}.")
            variable = names[0]
        elif variable not in names:
            raise SummaryError(f"`variable` {variable!r} is not in {str(path)!r}; available: {format_names(names)}.")
        try:
            da = ds[variable].load()
        except Exception as exc:  # noqa: BLE001 - a damaged data section shows up only when read
            raise SummaryError(f"`path`: cannot read variable {variable!r} from {str(path)!r}: {exc}") from exc
    dims = [str(d) for d in da.dims]
    units = [d for d in dims if d not in ("chain", "draw")]
    if "draw" not in dims or len(units) != 1:
        raise SummaryError(
            f"`variable` {variable!r} in {str(path)!r} has dims {tuple(dims)}; it needs a 'draw' dim, optionally "
            "a 'chain' dim, and exactly one unit dim."
        )
    unit_dim = units[0]
    ids = list(da[unit_dim].values) if unit_dim in da.coords else None
    chains = int(da.sizes["chain"]) if "chain" in dims else None
    return _Read(da, chains=chains, unit_ids=ids, unit_dim=unit_dim)


# -- sampler CSV output --------------------------------------------------------------------
def _prefix_columns(columns: list[str], prefix: str) -> dict[int, str]:
    """Columns ``prefix.K``, ``prefix[K]`` or ``prefix_K`` as {K: name}; repeated K is an error."""
    pattern = re.compile(rf"^{re.escape(prefix)}(?:\.(\d+)|\[(\d+)\]|_(\d+))$")
    found: dict[int, str] = {}
    for c in columns:
        m = pattern.match(c.strip())
        if m:
            k = int(next(g for g in m.groups() if g is not None))
            if k in found:
                raise SummaryError(f"`variable` {prefix!r}: columns {found[k]!r} and {c!r} both have index {k}.")
            found[k] = c
    return found


def _read_sampler_csv(paths: list[Path], variable) -> _Read:
    import pyarrow as pa
    import pyarrow.csv as pacsv

    if variable is None:
        raise SummaryError(
            f"`variable` is needed for sampler CSV output ({str(paths[0])!r}): the prefix of the unit columns, "
            "e.g. variable='tau' for columns tau.1, tau.2, ..."
        )
    mats, index_sets = [], []
    for path in paths:
        try:
            lines = path.read_bytes().splitlines(keepends=True)
        except OSError as exc:
            raise SummaryError(f"`path`: cannot read {str(path)!r}: {exc}") from exc
        # Comment lines may appear anywhere (settings at the top, timings at the end).
        body = [ln for ln in lines if ln.strip() and not ln.lstrip().startswith(b"#")]
        if not body:
            raise SummaryError(f"`path`: {str(path)!r} has no header or data lines (only comments or nothing).")
        try:
            header = next(csv.reader([body[0].decode("utf-8")]))
        except UnicodeDecodeError as exc:
            raise SummaryError(f"`path`: cannot read {str(path)!r} as text CSV: {exc}") from exc
        found = _prefix_columns(header, variable)
        if not found:
            raise SummaryError(
                f"`variable` prefix {variable!r} matches no column of {str(path)!r} (looked for {variable}.1, "
                f"{variable}[1] or {variable}_1). Columns seen: {format_names(header, 8)}."
            )
        idx = sorted(found)  # integer order: tau.10 comes after tau.9
        gaps = sorted(set(range(idx[0], idx[-1] + 1)) - set(idx))
        if idx[0] not in (0, 1) or gaps:
            raise SummaryError(
                f"`variable` {variable!r}: the unit indices in {str(path)!r} must run 1..n (or 0..n-1) without "
                f"gaps; found {len(idx)} columns from {idx[0]} to {idx[-1]}"
                + (f", missing {format_names(gaps, 5)}." if gaps else ".")
            )
        names = [found[k] for k in idx]
        try:
            table = pacsv.read_csv(
                io.BytesIO(b"".join(body)),
                convert_options=pacsv.ConvertOptions(include_columns=names, column_types={n: pa.float64() for n in names}),
            )
        except Exception as exc:  # noqa: BLE001 - parse and conversion errors carry the offending row
            raise SummaryError(f"`path`: cannot read {str(path)!r} as sampler CSV (is it truncated?): {exc}") from exc
        mats.append(np.column_stack([table.column(n).to_numpy(zero_copy_only=False) for n in names]))
        index_sets.append(idx)
    for path, idx, mat in zip(paths[1:], index_sets[1:], mats[1:]):
        if idx != index_sets[0]:
            raise SummaryError(
                f"`path`: {str(path)!r} has {variable!r} columns {idx[0]}..{idx[-1]} ({len(idx)}) but "
                f"{str(paths[0])!r} has {index_sets[0][0]}..{index_sets[0][-1]} ({len(index_sets[0])}); chains must have the same units."
            )
        if mat.shape[0] != mats[0].shape[0]:
            raise SummaryError(
                f"`path`: {str(path)!r} has {mat.shape[0]} draws but {str(paths[0])!r} has {mats[0].shape[0]}; "
                "each chain needs the same number of draws."
            )
    values = mats[0] if len(mats) == 1 else np.concatenate(mats, axis=0)
    return _Read(values, chains=len(paths) if len(paths) > 1 else None)

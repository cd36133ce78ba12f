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
- ``netcdf`` (``.nc``, ``.nc4``, ``.cdf``): a variable with dims (chain, draw, unit), in the root
  group or any group (a sampler's ``posterior`` group is found without being named).
- ``zarr`` (a ``.zarr`` directory, or any directory holding a zarr store): the same, read with
  ``xarray.open_zarr`` (lazily: only the chosen variable is read).
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
    "zarr": (".zarr",),
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
    source: str | None = None,
) -> EffectDraws:
    """Load posterior draws of unit-level effects from a file.

    Parameters
    ----------
    path : str or path-like, or list of them
        The draws file. A list (or tuple) of sampler CSV files is read as one file
        per chain, stacked chain-major in the order given.
    covariates : pandas.DataFrame, or str or path-like to a ``.csv`` / ``.parquet`` file
        One row per unit, in any order when the file names its units. If it has a
        column named ``unit_column``, that column holds unit ids: the file's units
        (wide and long tables, a netCDF/zarr unit coordinate, sampler indices) are
        matched to it by id, and the column is dropped (an identifier is not a covariate).
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
        netCDF or zarr group holding the variable. Default: the root group when it holds
        the variable (or any data variable), else the group that holds ``variable``, else
        a ``posterior`` group; an error lists every group and its variables.
    mmap : bool, default False
        Memory-map a ``.npy`` file read-only instead of reading it into memory.
    source : str, optional
        Names the sampler run (see :class:`EffectDraws`); default: the file's path.

    Returns
    -------
    EffectDraws
        Draws of shape (n_draws, n_units), chain-major.

    Notes
    -----
    Unit order: the draw matrix keeps the file's unit order (it is never reordered or
    copied); the covariate rows are matched to it by the file's unit ids (table columns, a
    long table's unit column, a netCDF/zarr unit coordinate, the sampler index 1, 2, ...,
    10 compared as integers) through the ``unit_column`` column, else through the
    covariates' index when it holds the same ids (in any order). Without ids on both sides
    the rows pair by position with the file's order; long tables' units are then sorted
    naturally (``h2`` before ``h10``; numbers as numbers).
    Draw order: chain-major, draws in file order, or sorted by
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
    elif fmt in ("netcdf", "zarr"):
        read = _read_grouped(paths[0], fmt, variable, group)
    else:
        read = _read_sampler_csv(paths, variable)
    if group is not None and fmt not in ("netcdf", "zarr"):
        raise SummaryError(f"`group` picks a netCDF or zarr group; the draws are read as {fmt!r}.")

    id_column = unit_column if unit_column is not None and unit_column in cov.columns else None
    values = _labelled(read, cov, id_column)
    if read.chains is not None and chains is not None and chains != read.chains:
        raise SummaryError(
            f"`chains` = {chains!r} but the file records {read.chains} chains; leave `chains` unset to use the file's."
        )
    # EffectDraws matches the file's unit labels to the id column or the covariates' index (the covariate
    # rows follow the file's unit order: the draw matrix is never reordered or copied).
    return EffectDraws(values, cov, weights=weights, chains=read.chains if chains is None else chains, label=label,
                       source=source if source is not None else str(paths[0]), unit_column=id_column)


def _labelled(read: _Read, cov: pd.DataFrame, id_column):
    """The values, carrying the file's unit labels when the covariates can be matched to them
    (an id column, or an index holding the same ids); otherwise the plain matrix (file order)."""
    from ..core.inputs import unit_key

    keep = read.unit_ids is not None and (id_column is not None or (
        len(read.unit_ids) == len(cov) and {unit_key(v) for v in read.unit_ids} == {unit_key(v) for v in cov.index}))
    if id_column is not None and read.unit_ids is None:
        # the file names no units: the id column is only dropped (rows in file order)
        return read.values
    if read.unit_dim is not None:  # a DataArray
        if keep or read.unit_dim not in read.values.coords:
            return read.values
        return read.values.drop_vars(read.unit_dim)
    if keep:
        return pd.DataFrame(read.values, columns=pd.Index(read.unit_ids), copy=False)
    return read.values


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
        if p.is_dir() and _is_zarr(p):
            out.append(p)
            continue
        if not p.is_file():
            what = ("is a directory, not a file (nor a zarr store)" if p.is_dir() else "does not exist")
            raise SummaryError(f"`path`: {str(p)!r} {what}.")
        out.append(p)
    return out


def _is_zarr(p: Path) -> bool:
    """A directory holding a zarr store (version 3 ``zarr.json`` or version 2 ``.zgroup`` / ``.zarray``)."""
    return any((p / name).exists() for name in ("zarr.json", ".zgroup", ".zarray", ".zmetadata"))


def _supported() -> str:
    exts = [e for f in DRAW_FORMATS.values() for e in f]
    return f"extensions {', '.join(exts)}; formats {format_names(DRAW_FORMATS)}"


def _resolve_format(paths: list[Path], format, variable) -> str:
    if format is not None:
        if format not in DRAW_FORMATS:
            raise SummaryError(f"`format` must be one of {format_names(DRAW_FORMATS)}; got {format!r}.")
        return format
    if all(p.is_dir() for p in paths):
        return "zarr"
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


def _natural_key(v):
    """Sort key: numbers by value; text by its runs of digits as numbers (h2 < h10), the rest as text."""
    if isinstance(v, (int, float, np.integer, np.floating)) and not isinstance(v, (bool, np.bool_)):
        return (0, float(v), ())
    parts = re.split(r"(\d+)", str(v))
    return (1, 0.0, tuple((0, int(p), "") if p.isdigit() else (1, 0, p) for p in parts if p != ""))


def _natural_factorize(ids: pd.Series):
    """Codes into the distinct ids, the ids in natural order (never text order for numbered ids)."""
    codes, uniques = pd.factorize(ids, sort=False)
    order = sorted(range(len(uniques)), key=lambda k: _natural_key(uniques[k]))
    rank = np.empty(len(uniques), dtype=np.int64)
    rank[order] = np.arange(len(uniques))
    return rank[codes], [uniques[k] for k in order]


def _long_to_matrix(df: pd.DataFrame, value_col: str, path: Path) -> _Read:
    draw_keys = ["chain", "draw"] if "chain" in df.columns else ["draw"]
    _check_keys(df, draw_keys + ["unit"], path)
    if df[value_col].dtype.kind not in "biuf":
        raise SummaryError(f"`path`: value column {value_col!r} of {str(path)!r} is not numeric (dtype {df[value_col].dtype}).")
    rows = df.groupby(draw_keys, sort=True).ngroup().to_numpy()
    row_keys = df[draw_keys].drop_duplicates().sort_values(draw_keys).to_numpy()
    unit_codes, unit_ids = _natural_factorize(df["unit"])
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


# -- netCDF and zarr -------------------------------------------------------------------------
def _netcdf_engine(path: Path):
    with open(path, "rb") as fh:
        is_hdf5 = fh.read(8) == _HDF5_MAGIC
    # netCDF-4 files are HDF5: read them with h5netcdf (a runtime dependency) so the result does not depend on
    # which optional engines are installed; netCDF-3 files go to xarray's own choice (scipy or netCDF4).
    return "h5netcdf" if is_hdf5 else None


def _group_names(path: Path, fmt: str) -> list[str]:
    """Every group of a netCDF-4 file or zarr store ("" is the root), parents before children."""
    names = [""]
    try:
        if fmt == "zarr":
            import zarr

            def walk(g, prefix):
                for key, sub in sorted(g.groups()):
                    names.append(prefix + key)
                    walk(sub, prefix + key + "/")

            walk(zarr.open_group(str(path), mode="r"), "")
        elif _netcdf_engine(path) == "h5netcdf":
            import h5netcdf

            with h5netcdf.File(path, "r") as f:
                def walk(g, prefix):
                    for key in sorted(g.groups):
                        names.append(prefix + key)
                        walk(g.groups[key], prefix + key + "/")

                walk(f, "")
    except Exception:  # noqa: BLE001 - an unreadable layout: only the root is tried (and reported)
        pass
    return names


def _open(path: Path, fmt: str, group):
    import xarray as xr  # a dependency, imported only when needed

    kind = "zarr" if fmt == "zarr" else "netCDF"
    try:
        if fmt == "zarr":
            return xr.open_zarr(str(path), group=group or None, consolidated=None)
        return xr.open_dataset(path, group=group or None, engine=_netcdf_engine(path))
    except Exception as exc:  # noqa: BLE001 - backends raise many types for unreadable files
        if group:
            raise SummaryError(f"`group` {group!r}: cannot open it in {str(path)!r} ({kind}): {exc}") from exc
        raise SummaryError(f"`path`: cannot read {str(path)!r} as {kind} (is it truncated or malformed?): {exc}") from exc


def _layout(path: Path, fmt: str) -> dict[str, list[str]]:
    """Group -> its data variables (lazily opened; no data read)."""
    out = {}
    for g in _group_names(path, fmt):
        try:
            ds = _open(path, fmt, g)
        except SummaryError:
            if g:
                continue
            raise
        with ds:
            out[g] = [str(v) for v in ds.data_vars]
    return out


def _describe_layout(layout: dict) -> str:
    return "; ".join(f"{g or '(root)'}: {format_names(v) if v else '(no variables)'}" for g, v in layout.items())


def _choose_group(path: Path, fmt: str, variable, group, layout: dict) -> str:
    """The group to read: given, or the root when it holds what is asked, else the group holding
    ``variable``, else ``posterior`` (what samplers write)."""
    if group is not None:
        key = group.strip("/")
        if key not in layout:
            raise SummaryError(
                f"`group` {group!r} is not in {str(path)!r}; groups and their variables: {_describe_layout(layout)}."
            )
        return key
    root = layout.get("", [])
    if (variable is None and root) or (variable is not None and variable in root):
        return ""
    holders = [g for g, v in layout.items() if g and (variable in v if variable is not None else v)]
    if "posterior" in holders:
        return "posterior"
    if len(holders) == 1:
        return holders[0]
    what = f"the variable {variable!r}" if variable is not None else "variables"
    if not holders:
        if variable is not None:
            raise SummaryError(
                f"`variable` {variable!r} is not in {str(path)!r} (in no group); available, by group: "
                f"{_describe_layout(layout)}."
            )
        raise SummaryError(
            f"`variable`: {str(path)!r} holds no variables in any group; groups: {_describe_layout(layout)}."
        )
    raise SummaryError(
        f"`group`: {what} of {str(path)!r} sit in several groups; name one with `group=` "
        f"(groups and their variables: {_describe_layout(layout)})."
    )


def _read_grouped(path: Path, fmt: str, variable, group) -> _Read:
    layout = _layout(path, fmt)
    g = _choose_group(path, fmt, variable, group, layout)
    where = f"group {g!r} of {str(path)!r}" if g else str(path)
    names = layout[g]
    if variable is None:
        if len(names) != 1:
            raise SummaryError(
                f"`variable`: {where} holds {len(names)} variables; name one of {format_names(names)} "
                f"(groups and their variables: {_describe_layout(layout)})."
            )
        variable = names[0]
    elif variable not in names:
        raise SummaryError(
            f"`variable` {variable!r} is not in {where}; groups and their variables: {_describe_layout(layout)}."
        )
    ds = _open(path, fmt, g)
    try:
        da = ds[variable]
        if fmt == "netcdf":  # the file closes below: read the one variable now
            da = da.load()
    except Exception as exc:  # noqa: BLE001 - a damaged data section shows up only when read
        raise SummaryError(f"`path`: cannot read variable {variable!r} from {str(path)!r}: {exc}") from exc
    finally:
        if fmt == "netcdf":
            ds.close()
    dims = [str(d) for d in da.dims]
    units = [d for d in dims if d not in ("chain", "draw")]
    if "draw" not in dims or len(units) != 1:
        raise SummaryError(
            f"`variable` {variable!r} in {where} has dims {tuple(dims)}; it needs a 'draw' dim, optionally "
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
    return _Read(values, chains=len(paths) if len(paths) > 1 else None, unit_ids=index_sets[0])

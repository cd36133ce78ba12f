"""What a draw input is: a matrix (draws x units), its chains and the unit labels it carries.

Small functions shared by :class:`~summarize_widgets.EffectDraws`, ``EffectDraws.from_itt`` and
:func:`~summarize_widgets.load_draws`:

* :func:`as_draw_input` turns what samplers and users hold into a 2-D chain-major matrix:
  objects with a ``posterior`` group (an attribute or a mapping key holding an xarray
  ``Dataset``; found by duck typing, no sampler library is imported), xarray ``Dataset``
  (``variable=`` picks the variable) and ``DataArray`` (dims ``(chain, draw, unit)`` in any
  order, or a stacked ``(chain, draw)`` sample dim), 3-D NumPy arrays ``(chain, draw, unit)``,
  pandas DataFrames (columns are units) and 2-D arrays.
* :func:`match_units` matches the labels the draws carry to the covariates' index or to an id
  column, and says how to reorder the covariate rows (the draw matrix is never copied for
  this: reordering the covariates is cheap and keeps a memory-mapped or lazy matrix as it is).
* :func:`align_weights` does the same for weights that carry labels (a pandas Series index).

Unit labels that are just the default numbering ``0..n-1`` (a DataFrame built from an array,
a sampler's default coordinate) count as labels only when the covariates' ids are the same set
(a shuffled table with its original index); otherwise they are taken as positions.
"""
from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass

import numpy as np
import pandas as pd

from .validate import SummaryError, format_names

__all__ = ["DrawInput", "as_draw_input", "match_units", "unit_key", "align_weights", "id_like_columns"]

# Names that mark a stacked sample dim, or the draw dim itself.
_DRAW_DIMS = ("draw",)


@dataclass
class DrawInput:
    """A draw input made 2-D.

    Attributes
    ----------
    values : ndarray, shape (n_draws, n_units)
        Chain-major (all draws of chain 1, then chain 2, ...).
    chains : int or None
        Chains the input records (a ``chain`` dim or a 3-D array), else None.
    unit_labels : pandas.Index or None
        Labels of the columns (units) when the input carries them.
    """

    values: object
    chains: int | None = None
    unit_labels: pd.Index | None = None


def _xarray():
    try:
        import xarray as xr
    except ImportError:  # pragma: no cover - xarray is a dependency
        return None
    return xr


def posterior_group(obj):
    """The ``posterior`` Dataset of a sampler's results object (attribute or mapping key), else None."""
    xr = _xarray()
    if xr is None or isinstance(obj, (xr.Dataset, xr.DataArray, np.ndarray, pd.DataFrame)):
        return None
    group = None
    if isinstance(obj, Mapping) and "posterior" in obj:
        group = obj["posterior"]
    elif not isinstance(obj, Mapping):
        try:
            group = getattr(obj, "posterior", None)
        except Exception:  # noqa: BLE001 - a property that fails is not a posterior group
            group = None
    if group is None:
        return None
    # a DataTree node holds its Dataset in .dataset / .to_dataset()
    if not isinstance(group, xr.Dataset):
        for attr in ("to_dataset", "dataset", "ds"):
            cand = getattr(group, attr, None)
            cand = cand() if callable(cand) else cand
            if isinstance(cand, xr.Dataset):
                group = cand
                break
    return group if isinstance(group, xr.Dataset) else None


def pick_variable(ds, variable, name: str, where: str = ""):
    """The DataArray ``variable`` of Dataset ``ds``; without a name, the only one with a draw dim."""
    names = [str(v) for v in ds.data_vars]
    where = where or "the Dataset"
    if variable is None:
        with_draws = [v for v in names if "draw" in ds[v].dims]
        if len(with_draws) == 1:
            return ds[with_draws[0]]
        if len(names) == 1:
            return ds[names[0]]
        cands = with_draws or names
        raise SummaryError(
            f"`{name}`: {where} holds {len(names)} variables; name one with `variable=` "
            f"({format_names(cands, 20)})."
        )
    if variable not in names:
        raise SummaryError(f"`variable` {variable!r} is not in {where}; variables there: {format_names(names, 20)}.")
    return ds[variable]


def _default_numbering(labels: pd.Index) -> bool:
    """True for the labels 0..n-1 in order (what a DataFrame or a sampler gives when the user named nothing)."""
    if isinstance(labels, pd.RangeIndex):
        return labels.start == 0 and labels.step == 1
    if labels.dtype.kind not in "iu":
        return False
    return bool(np.array_equal(labels.to_numpy(), np.arange(len(labels))))


def _from_dataarray(da, name: str) -> DrawInput:
    dims = [str(d) for d in da.dims]
    chains = None
    # A stacked sample dim, e.g. da.stack(sample=("chain", "draw")): unstack so chains are kept.
    for d in dims:
        idx = da.indexes.get(d)
        if isinstance(idx, pd.MultiIndex) and {"chain", "draw"} <= set(idx.names):
            da = da.unstack(d)
            dims = [str(x) for x in da.dims]
            break
    if "chain" in dims and "draw" in dims:
        others = [x for x in dims if x not in ("chain", "draw")]
        if len(others) != 1:
            raise SummaryError(
                f"`{name}` must have dims (chain, draw, <unit>) with exactly one unit dimension; got dims {tuple(dims)}."
            )
        unit_dim = others[0]
        chains = int(da.sizes["chain"])
        da = da.transpose("chain", "draw", unit_dim)
    elif "draw" in dims and len(dims) == 2:
        unit_dim = [x for x in dims if x != "draw"][0]
        da = da.transpose("draw", unit_dim)
    elif len(dims) == 2 and "chain" not in dims:
        unit_dim = dims[1]
    else:
        raise SummaryError(
            f"`{name}` must be 2-D (draws x units) or have dims (chain, draw, <unit>); got dims {tuple(dims)}."
        )
    labels = pd.Index(da.indexes[unit_dim]) if unit_dim in da.indexes else None
    arr = da.to_numpy()  # one read of the data (a view for NumPy-backed arrays)
    if arr.ndim == 3:
        arr = arr.reshape(arr.shape[0] * arr.shape[1], arr.shape[2])
    return DrawInput(arr, chains, labels)


def as_draw_input(values, name: str, variable: str | None = None) -> DrawInput:
    """Make ``values`` a 2-D chain-major draw matrix, keeping its chains and unit labels.

    Parameters
    ----------
    values : sampler results object (with a ``posterior`` group), xarray Dataset or DataArray,
        pandas DataFrame, or array-like of shape (n_draws, n_units) or (n_chains, n_draws, n_units)
    name : str
        The argument's name, for messages.
    variable : str, optional
        The variable of a Dataset or posterior group (needed when it holds several).
    """
    xr = _xarray()
    group = posterior_group(values)
    if group is not None:
        return _from_dataarray(pick_variable(group, variable, name, "the posterior group"), name)
    if xr is not None and isinstance(values, xr.Dataset):
        return _from_dataarray(pick_variable(values, variable, name), name)
    if variable is not None:
        raise SummaryError(
            f"`variable` picks a variable of an xarray Dataset or posterior group; `{name}` is a "
            f"{type(values).__name__}, which holds a single matrix."
        )
    if xr is not None and isinstance(values, xr.DataArray):
        return _from_dataarray(values, name)
    if isinstance(values, pd.DataFrame):
        return DrawInput(values.to_numpy(), None, pd.Index(values.columns))
    if isinstance(values, np.ndarray):
        arr = values
    else:
        try:
            arr = np.asarray(values)
        except Exception as exc:  # noqa: BLE001 - report what was passed
            raise SummaryError(
                f"`{name}` must be an array of shape (n_draws, n_units) or (n_chains, n_draws, n_units); "
                f"got {type(values).__name__}."
            ) from exc
    if arr.ndim == 3:  # (chain, draw, unit): a C-order reshape keeps chain-major order (a view when contiguous)
        return DrawInput(arr.reshape(arr.shape[0] * arr.shape[1], arr.shape[2]), int(arr.shape[0]), None)
    return DrawInput(arr, None, None)


# -- unit identity ---------------------------------------------------------------------------
def unit_key(v) -> str:
    """A unit id as comparable text: 7, 7.0, np.int64(7) and "7" are the same unit."""
    if isinstance(v, (bool, np.bool_)):
        return str(bool(v))
    if isinstance(v, (int, np.integer)):
        return str(int(v))
    if isinstance(v, (float, np.floating)) and float(v).is_integer():
        return str(int(v))
    return str(v)


def _keys(labels) -> list[str]:
    return [unit_key(v) for v in labels]


def _check_unique(keys: list[str], what: str):
    s = pd.Series(keys)
    dup = s[s.duplicated()].unique().tolist()
    if dup:
        raise SummaryError(f"{what} repeats unit ids: {format_names(dup, 5)}; every unit needs its own id.")


def id_like_columns(covariates: pd.DataFrame) -> list:
    """Text columns with a distinct value for every unit (at least 20 units): they identify units, not describe them."""
    n = len(covariates)
    if n < 20:
        return []
    out = []
    for c in covariates.columns:
        s = covariates[c]
        if (s.dtype == object or pd.api.types.is_string_dtype(s)) and not isinstance(s.dtype, pd.CategoricalDtype):
            if s.notna().all() and s.nunique() == n:
                out.append(c)
    return out


def match_units(labels, covariates: pd.DataFrame, unit_column=None, *, name: str = "values"):
    """Match the unit labels of the draws to the covariates.

    Parameters
    ----------
    labels : pandas.Index or None
        Unit labels the draws carry (column labels, a unit coordinate), or None.
    covariates : pandas.DataFrame
        As the user gave it.
    unit_column : column name, optional
        A covariate column holding unit ids (it is then not a covariate). Without one, the
        draws' labels are matched to the covariates' index, or to the one column that holds
        exactly the same ids (used, and excluded from the covariates, with a note).

    Returns
    -------
    order : ndarray of int or None
        Covariate row of each draw column (None: the rows are already in the draws' order).
    covariates : pandas.DataFrame
        Without the id column.
    ids : pandas.Index
        The unit ids, in draw-column order (the covariate index, or the id column's values).
    notes : list of str
    """
    notes = []
    cov = covariates
    if unit_column is not None:
        if unit_column not in cov.columns:
            raise SummaryError(
                f"`unit_column` {unit_column!r} is not a column of the covariates; columns: {format_names(cov.columns, 12)}."
            )
        col = cov[unit_column]
        if col.isna().any():
            raise SummaryError(
                f"covariate column {unit_column!r} (unit ids) has {int(col.isna().sum())} missing values; every unit needs an id."
            )
        ids = pd.Index(col.to_numpy(), name=str(unit_column))
        cov = cov.drop(columns=[unit_column])
        _check_unique(_keys(ids), f"covariate column {unit_column!r} (unit ids)")
    else:
        ids = cov.index
    if labels is None or len(labels) != len(cov):
        return None, cov, ids, notes  # no labels (or a shape error the caller reports)
    lkeys = _keys(labels)
    _check_unique(lkeys, f"`{name}` (its unit labels)")
    ikeys = _keys(ids)
    if unit_column is None and set(lkeys) != set(ikeys):
        # the ids may sit in a column: the one column holding exactly the draws' labels
        found = [c for c in cov.columns if cov[c].notna().all() and cov[c].nunique() == len(cov)
                 and set(_keys(cov[c])) == set(lkeys)]
        if len(found) == 1 and not _default_numbering(pd.Index(labels)):
            c = found[0]
            notes.append(f"Units matched to the draws by covariate column {str(c)!r} (unit ids); it is not used as a covariate.")
            ids = pd.Index(cov[c].to_numpy(), name=str(c))
            cov = cov.drop(columns=[c])
            ikeys = _keys(ids)
        elif _default_numbering(pd.Index(labels)):
            return None, cov, ids, notes  # 0..n-1: positions, not ids
    if set(lkeys) != set(ikeys):
        where = f"column {str(unit_column)!r}" if unit_column is not None else "index"
        missing = [k for k in ikeys if k not in set(lkeys)]
        extra = [k for k in lkeys if k not in set(ikeys)]
        raise SummaryError(
            f"`{name}` carries unit labels that do not match the covariates' {where}: "
            f"{len(missing)} covariate units have no draws (e.g. {format_names(missing, 3)}), "
            f"{len(extra)} draw units are not in the covariates (e.g. {format_names(extra, 3)}). "
            "Set the covariates' index to the unit ids (covariates.set_index('<id column>')) or pass `unit_column=`."
        )
    pos = {k: i for i, k in enumerate(ikeys)}
    order = np.fromiter((pos[k] for k in lkeys), dtype=np.int64, count=len(lkeys))
    if np.array_equal(order, np.arange(order.size)):
        return None, cov, ids, notes
    return order, cov.iloc[order], ids[order], notes


def align_weights(weights, ids: pd.Index, order, name: str = "weights"):
    """Weights in draw-column order.

    A pandas Series (or DataFrame, whose columns are units) with labels is matched to ``ids``;
    plain arrays are in the order of the covariate rows as given and follow ``order``.
    """
    if weights is None:
        return None
    if isinstance(weights, (pd.Series, pd.DataFrame)):
        labels = weights.index if isinstance(weights, pd.Series) else weights.columns
        lkeys, ikeys = _keys(labels), _keys(ids)
        if len(lkeys) == len(ikeys) and not (_default_numbering(pd.Index(labels)) and set(lkeys) != set(ikeys)):
            if set(lkeys) != set(ikeys):
                missing = [k for k in ikeys if k not in set(lkeys)]
                raise SummaryError(
                    f"`{name}` is labelled by unit, but its labels do not match the covariates' unit ids "
                    f"({len(missing)} units have no weight, e.g. {format_names(missing, 3)}); give it the covariates' index."
                )
            _check_unique(lkeys, f"`{name}`")
            pos = {k: i for i, k in enumerate(lkeys)}
            take = np.array([pos[k] for k in ikeys], dtype=np.int64)
            arr = weights.to_numpy()
            return arr[take] if arr.ndim == 1 else arr[:, take]
        weights = weights.to_numpy()
    if order is None:
        return weights
    w = np.asarray(weights)
    if w.ndim == 1 and w.shape[0] == order.size:
        return w[order]
    if w.ndim == 2 and w.shape[1] == order.size:
        return w[:, order]
    return w  # a shape error, reported by the weight check

"""The one data contract for posterior draws of unit-level effects.

An :class:`EffectDraws` holds the draw matrix (never copied), the covariate
table, optional weights, and a few per-draw and per-unit sums computed in one
validation pass. Every summary reads the draws only through
:func:`summarize_widgets._passes.run_pass`, a chunked reduction over blocks of
draws, so the same code serves in-memory arrays and memory-mapped files.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from .inputs import align_weights, as_draw_input, id_like_columns, match_units
from .validate import SummaryError, check_covariates, check_int, describe_nonfinite

__all__ = ["EffectDraws", "DrawBlock", "ScanRecord", "DIRECTIONS"]

#: Smallest spread of a draw across units that float64 can square with digits to spare (about 1e-140).
_SMALLEST_SPREAD = 1e-140

# Rows per block in a pass: about 8 MB of float64 at 100,000 units.
_BLOCK_BYTES = 8 * 2**20


@dataclass(frozen=True)
class DrawBlock:
    """One block of consecutive draws, as the reducers see it.

    Attributes
    ----------
    rows : slice
        Which draws (rows of the full matrix) this block holds.
    wt : ndarray, shape (n_rows, n_units)
        Weighted values ``w_si * T_si`` (for complier-weighted draws: the outcome ITT
        times the unit weight). A view of the user's matrix when there are no weights.
        May be float32; reducers accumulate in float64.
    w : None or ndarray, shape (n_units,) or (n_rows, n_units)
        The weights: None means every unit weighs 1.
    values : ndarray, shape (n_rows, n_units)
        The draws as stored (effects, or the outcome ITT of complier-weighted draws).
    uptake : None or ndarray, shape (n_rows, n_units)
        The uptake ITT draws of complier-weighted draws (None otherwise).
    """

    rows: slice
    wt: np.ndarray
    w: np.ndarray | None
    values: np.ndarray | None = None
    uptake: np.ndarray | None = None


def assemble_block(rows: slice, vals: np.ndarray, den: np.ndarray | None, weights: np.ndarray | None) -> DrawBlock:
    """The :class:`DrawBlock` of draws ``rows`` from their stored values (where the block lives).

    Parameters
    ----------
    rows : slice
    vals : ndarray, shape (n_rows, n_units)
        Effects, or the outcome ITT of complier-weighted draws.
    den : None or ndarray, shape (n_rows, n_units)
        Uptake ITT of complier-weighted draws.
    weights : None or ndarray, shape (n_units,) or (n_draws, n_units)
        The draws' weights as given (per-draw weights are sliced to ``rows`` here).
    """
    # Products that overflow float64 are caught by the validation scan and reported as an error.
    with np.errstate(over="ignore", invalid="ignore"):
        if den is not None:
            den64 = np.asarray(den, dtype=np.float64)
            if weights is None:
                return DrawBlock(rows, vals, den64, vals, den)
            return DrawBlock(rows, vals * weights, den64 * weights, vals, den)
        w = weights
        if w is None:
            return DrawBlock(rows, vals, None, vals)
        if w.ndim == 2:
            w = w[rows]
        return DrawBlock(rows, vals * w, w, vals)


@dataclass(frozen=True)
class ScanRecord:
    """What the validation scan measured, per draw (read-only arrays of shape (n_draws,)).

    Attributes
    ----------
    centre : ndarray
        A centring constant ``c_s`` per draw (a typical value of the draw; any constant is exact,
        a typical one avoids cancellation, docs/method.md section 3).
    centred_squares : ndarray
        ``sum_i w_si (T_si - c_s)^2`` (for complier-weighted draws
        ``sum_i v_i (ITT_y,si - c_s pi_si)^2 / pi_si``).
    weight_sums : ndarray
        ``sum_i w_si``.
    weighted_sums : ndarray
        ``sum_i w_si T_si``.
    """

    centre: np.ndarray
    centred_squares: np.ndarray
    weight_sums: np.ndarray
    weighted_sums: np.ndarray

    def __post_init__(self):
        for name in ("centre", "centred_squares", "weight_sums", "weighted_sums"):
            getattr(self, name).flags.writeable = False


#: Allowed values of ``EffectDraws(better=...)``.
DIRECTIONS = ("higher", "lower")


def _check_better(better) -> str:
    if better not in DIRECTIONS:
        raise SummaryError(f"`better` must be 'higher' or 'lower' (which direction of the effect is good); got {better!r}.")
    return better


def _check_unit(unit) -> str:
    if unit is None:
        return ""
    if not isinstance(unit, str):
        raise SummaryError(f"`unit` must be a string such as 'kWh per month'; got {type(unit).__name__}.")
    return unit.strip()


def _as_matrix(values, name: str, variable=None):
    """Return (2-D float array without copying floats, n_chains from the input or None, unit labels or None)."""
    inp = as_draw_input(values, name, variable)
    arr = inp.values
    if arr.ndim != 2:
        raise SummaryError(
            f"`{name}` must be 2-D (n_draws, n_units) or 3-D (n_chains, n_draws, n_units); got {arr.ndim}-D shape {arr.shape}."
        )
    if arr.dtype.kind == "b" or arr.dtype.kind in "iu":
        arr = arr.astype(np.float64)
    elif arr.dtype.kind != "f":
        raise SummaryError(f"`{name}` must hold numbers; got dtype {arr.dtype}.")
    elif arr.dtype not in (np.float32, np.float64):
        arr = arr.astype(np.float64)
    return arr, inp.chains, inp.unit_labels


def _same_matrix(a, b) -> bool:
    """True when ``a`` and ``b`` hold the same numbers (the same array, or equal copies).

    Cheap unless they are equal: the first draw is compared first, the rest only if it matches.
    """
    if a is b:
        return True
    if a.shape != b.shape:
        return False
    if not (isinstance(a, np.ndarray) and isinstance(b, np.ndarray)):  # lazy: same graph, or equal first draws
        if getattr(a, "name", None) is not None and getattr(a, "name", None) == getattr(b, "name", None):
            return True
        if not np.array_equal(np.asarray(a[:1]), np.asarray(b[:1])):
            return False
        import dask.array as da

        return bool(da.all(da.asarray(a) == da.asarray(b)).compute())
    if (a.__array_interface__["data"][0] == b.__array_interface__["data"][0] and a.strides == b.strides):
        return True
    if not np.array_equal(a[0], b[0]):
        return False
    step = max(1, (8 * 2**20) // (8 * max(1, a.shape[1])))
    return all(np.array_equal(a[i : i + step], b[i : i + step]) for i in range(0, a.shape[0], step))


def _check_shape(arr, n_units: int, name: str, covariates_name: str = "covariates"):
    if arr.shape[1] != n_units:
        hint = ""
        if arr.shape[0] == n_units:
            hint = f" It looks transposed: pass `{name}.T` (shape {arr.shape[::-1]})."
        raise SummaryError(
            f"`{name}` has shape {arr.shape} but `{covariates_name}` has {n_units} rows; "
            f"`{name}` must be (n_draws, n_units) = (?, {n_units}).{hint}"
        )
    if arr.shape[0] < 2:
        raise SummaryError(f"`{name}` has {arr.shape[0]} draw; at least 2 posterior draws are needed for intervals.")
    if arr.shape[1] < 2:
        raise SummaryError(f"`{name}` has {arr.shape[1]} unit; at least 2 units are needed to summarize heterogeneity.")


def _check_weights(weights, n_draws: int, n_units: int, name: str = "weights"):
    if weights is None:
        return None
    if isinstance(weights, (pd.Series, pd.DataFrame)):
        weights = weights.to_numpy()
    w = np.asarray(weights)
    if w.dtype.kind not in "biuf":
        raise SummaryError(f"`{name}` must be numeric; got dtype {w.dtype}.")
    w = w.astype(np.float64, copy=False)
    if w.shape not in ((n_units,), (n_draws, n_units)):
        raise SummaryError(
            f"`{name}` must have shape ({n_units},) (one per unit) or ({n_draws}, {n_units}) "
            f"(one per draw and unit); got shape {w.shape}."
        )
    bad = ~np.isfinite(w)
    if bad.any():
        raise SummaryError(f"`{name}` contains {int(bad.sum())} NaN or infinite values; weights must be finite.")
    neg = w < 0
    if neg.any():
        raise SummaryError(f"`{name}` contains {int(neg.sum())} negative values (smallest {w.min():.4g}); weights must be >= 0.")
    return w


def _check_source(source, arr) -> str:
    """The given run name, or an id of the memory behind ``arr`` (shared by views of one array)."""
    if source is None:
        if not isinstance(arr, np.ndarray):
            from .lazy import lazy_source

            return lazy_source(arr)
        base = arr
        while isinstance(getattr(base, "base", None), np.ndarray):
            base = base.base
        return f"memory:{base.__array_interface__['data'][0]:x}:{arr.shape[0]}"
    if not isinstance(source, str) or not source.strip():
        raise SummaryError(f"`source` must be a non-empty string naming the sampler run; got {source!r}.")
    return source


class _Shape:
    """A stand-in with only ``.shape``, so shape checks need no array."""

    def __init__(self, shape):
        self.shape = tuple(shape)


def _chains(given, recorded, name):
    """The chain count: given, or what the input records; both must agree."""
    if given is not None and recorded is not None and given != recorded:
        raise SummaryError(
            f"`chains` = {given!r} but `{name}` records {recorded} chains (its chain dim); leave `chains` unset."
        )
    return given if given is not None else recorded


def _same_units(num, den, lab1, lab2):
    """Uptake columns in the outcome's unit order (matched by labels when both carry them)."""
    from .inputs import unit_key

    if lab1 is None or lab2 is None:
        return den, lab1 if lab1 is not None else lab2
    k1, k2 = [unit_key(v) for v in lab1], [unit_key(v) for v in lab2]
    if k1 == k2:
        return den, lab1
    if set(k1) != set(k2) or len(set(k2)) != len(k2):
        only = [k for k in k1 if k not in set(k2)][:3] or [k for k in k2 if k not in set(k1)][:3]
        raise SummaryError(
            f"`outcome_itt` and `uptake_itt` carry different unit labels (e.g. {', '.join(map(repr, only))}); "
            "both must describe the same units."
        )
    pos = {k: i for i, k in enumerate(k2)}
    return den[:, [pos[k] for k in k1]], lab1


class EffectDraws:
    """Posterior draws of unit-level effects, with the units' covariates.

    Parameters
    ----------
    values : array-like, shape (n_draws, n_units) or (n_chains, n_draws, n_units)
        One row per posterior draw. NumPy arrays (float32 stays float32, float64
        stays float64; the matrix is not copied; ``np.memmap`` works; a 3-D array is
        read as (chain, draw, unit)), pandas DataFrames (columns are units), xarray
        DataArrays with dims (chain, draw, <unit>) in any order (or a stacked
        (chain, draw) sample dim), xarray Datasets, or a sampler's results object
        with a ``posterior`` group (an attribute or mapping key holding a Dataset);
        chains are kept, stacked chain-major.
    covariates : pandas.DataFrame
        One row per unit: numeric, boolean, categorical and string columns; missing
        values allowed. When ``values`` carries unit labels (DataFrame columns, a unit
        coordinate) they are matched to the covariates' index (or ``unit_column``, or
        the one column holding exactly those ids), whatever the row order; without
        labels, rows are in the order of the columns of ``values``.
    weights : None or array-like, shape (n_units,) or (n_draws, n_units), optional
        Non-negative weights: fixed per unit (survey or frequency weights) or per
        draw and unit. A pandas Series is matched to the units by its index; plain
        arrays follow the covariate rows as given.
    chains : int, optional
        Number of chains, the draws stored chain-major (all of chain 1, then chain 2...).
        Taken from the input when it records chains (a ``chain`` dim, a 3-D array); 1 otherwise.
    variable : str, optional
        The variable of a Dataset or ``posterior`` group (needed when it holds several
        variables with a ``draw`` dim).
    unit_column : column name, optional
        A covariate column holding unit ids; it is used to match units and is not a covariate.
    label : str, default "effect"
        What the values are (used in tables and figure titles).
    unit : str, optional
        The effect's unit, for example ``"kWh per month"`` (axis titles and table notes).
    better : {"higher", "lower"}, default "higher"
        Which direction of the effect is good: "largest benefit" and colour scales follow it.
    source : str, optional
        Names the sampler run the draws come from (for example a file name). Two draw
        sets with the same ``source`` and the same number of draws are taken as paired
        (draw ``s`` of one and draw ``s`` of the other come from the same sampler state)
        when two posteriors are compared. Default: an id of the array's memory, so draws
        built on the very same array (for example the outcome ITT of complier-weighted
        draws and the plain ITT draws) are recognised as paired.

    Notes
    -----
    Construction makes one pass over the draws: it checks that every value is
    finite and stores, per unit, the weighted posterior mean (the target every
    summary is fitted to) and, per draw, the centred weighted sum of squares
    used by every summary R^2 (docs/method.md section 3).
    """

    def __init__(self, values, covariates, *, weights=None, chains=None, label: str = "effect", unit: str | None = None,
                 better: str = "higher", source=None, variable: str | None = None, unit_column=None):
        arr, dim_chains, labels = _as_matrix(values, "values", variable)
        cov, w, notes = self._units(labels, covariates, unit_column, weights, arr.shape, "values")
        self._source = _check_source(source, arr)
        self._init(arr, None, w, cov, _chains(chains, dim_chains, "values"), label, "values", unit, better)
        self._notes = tuple(notes)

    def _units(self, labels, covariates, unit_column, weights, shape, name, one_per_unit=False):
        """Match unit labels to the covariates; check shapes and weights. Sets ``_unit_ids``.

        Returns (covariates renumbered 0..n-1 in draw-column order, checked weights, notes).
        """
        check_covariates(covariates)
        order, cov_given, ids, notes = match_units(labels, covariates, unit_column, name=name)
        drop = [c for c in id_like_columns(cov_given) if c != unit_column]
        if drop:
            names = ", ".join(repr(str(c)) for c in drop)
            notes.append(
                f"Not used as covariates: {names} (a different text value for every unit: it identifies units "
                "rather than describing them; set it as the covariates' index or pass `unit_column=` to match units by it)."
            )
            cov_given = cov_given.drop(columns=drop)
        cov = check_covariates(cov_given)
        _check_shape(_Shape(shape), cov.shape[0], name)
        if one_per_unit and weights is not None and np.ndim(weights) != 1:
            raise SummaryError(
                f"`weights` for complier-weighted draws must be one per unit, shape ({shape[1]},); "
                f"got shape {np.shape(weights)} (the uptake draws already act as per-draw weights)."
            )
        w = _check_weights(align_weights(weights, ids, order), shape[0], shape[1])
        self._unit_ids = ids.copy()
        return cov, w, notes

    # -- construction ---------------------------------------------------------------
    def _init(self, values, denominator, weights, covariates, chains, label, name, unit=None, better="higher"):
        self._values = values  # (S, n): effects, or outcome ITT for complier-weighted draws
        self._den = denominator  # None, or (S, n) uptake ITT
        self._weights = weights  # None, (n,) or (S, n) (for complier-weighted: unit weights only)
        self.covariates = covariates
        self.label = str(label)
        self.unit = _check_unit(unit)
        self.better = _check_better(better)
        n_draws = values.shape[0]
        if chains is None:
            chains = 1
        chains = check_int(chains, "chains", low=1, high=n_draws)
        if n_draws % chains:
            raise SummaryError(
                f"`chains` = {chains} does not divide the {n_draws} draws; draws must be stored chain-major "
                "with the same number of draws per chain."
            )
        self.n_chains = chains
        self._scan_progress = None  # the scan's progress: a tqdm bar on long passes
        self._scan(name)

    @classmethod
    def from_itt(cls, outcome_itt, uptake_itt, covariates, *, weights=None, chains=None, label: str = "LATE",
                 unit: str | None = None, better: str = "higher", source=None, outcome_variable: str | None = None,
                 uptake_variable: str | None = None, unit_column=None):
        """Complier-weighted draws for an encouragement (instrument) design.

        Parameters
        ----------
        outcome_itt : array-like, shape (n_draws, n_units)
            Per-draw unit-level intention-to-treat effect of the offer on the outcome.
        uptake_itt : array-like, shape (n_draws, n_units)
            Per-draw unit-level effect of the offer on uptake (the complier share,
            non-negative under monotonicity).
        covariates, chains, label, unit, better, source, unit_column
            As for :class:`EffectDraws` (the default ``source`` is that of ``outcome_itt``).
            Both matrices take any input :class:`EffectDraws` takes; they must cover the same
            units (same shape; same unit labels when they carry labels, matched by label) and
            must differ (identical matrices are refused: a complier effect of exactly 1).
        outcome_variable, uptake_variable : str, optional
            The variable of each input when it is a Dataset or has a ``posterior`` group (the
            same object may be passed twice with two variable names).
        weights : None or array-like, shape (n_units,)
            Fixed unit weights ``v_i``, multiplying both sums.

        Notes
        -----
        Every subgroup effect is the ratio of sums ``sum v ITT_y / sum v pi`` per
        draw (the Wald ratio inside the subgroup, docs/method.md section 5), i.e. the
        uptake-weighted mean of unit CLATEs; nothing is divided unit by unit.
        """
        num, c1, lab1 = _as_matrix(outcome_itt, "outcome_itt", outcome_variable)
        den, c2, lab2 = _as_matrix(uptake_itt, "uptake_itt", uptake_variable)
        if isinstance(covariates, pd.DataFrame):  # each matrix against the covariates first (transposed hints)
            _check_shape(num, len(covariates), "outcome_itt")
            _check_shape(den, len(covariates), "uptake_itt")
        if num.shape != den.shape:
            raise SummaryError(f"`outcome_itt` has shape {num.shape} but `uptake_itt` has shape {den.shape}; they must match.")
        if isinstance(num, np.ndarray) != isinstance(den, np.ndarray):  # one lazy: read both through Dask
            import dask.array as da

            lazy = den if isinstance(num, np.ndarray) else num
            num, den = (da.from_array(x, chunks=lazy.chunks) if isinstance(x, np.ndarray) else x.rechunk(lazy.chunks)
                        for x in (num, den))
        den, labels = _same_units(num, den, lab1, lab2)
        if _same_matrix(num, den):
            raise SummaryError(
                "`outcome_itt` and `uptake_itt` hold the same numbers; the uptake ITT must be the offer's effect on "
                "uptake, a different matrix (was the same variable read twice? name each with outcome_variable= "
                "and uptake_variable=)."
            )
        if c1 is not None and c2 is not None and c1 != c2:
            raise SummaryError(f"`outcome_itt` records {c1} chains but `uptake_itt` records {c2}; they must match.")
        self = cls.__new__(cls)
        cov, w, notes = self._units(labels, covariates, unit_column, weights, num.shape, "outcome_itt", one_per_unit=True)
        self._source = _check_source(source, num)
        self._init(num, den, w, cov, _chains(chains, c1 or c2, "outcome_itt"), label, "outcome_itt", unit, better)
        self._notes = tuple(notes)
        return self

    def _scan(self, name):
        """The validation pass: finiteness, per-unit weighted means, per-draw centred sums.

        One :func:`~summarize_widgets.core.passes.run_pass` with the reducers of
        :mod:`summarize_widgets.core.scan` (threads for in-memory draws, a Dask computation
        for lazy ones).
        """
        from .passes import run_pass
        from .scan import ScanColumns, ScanRows

        n = self.n_units
        unit_w = self._weights if (self._weights is not None and self._weights.ndim == 1) else None
        rows = ScanRows(unit_w if self._den is not None else None, complier=self._den is not None)
        cols = ScanColumns(n, unit_w)
        # Overflow (finite values whose weighted sums exceed float64) is detected below and reported, not warned.
        with np.errstate(over="ignore", invalid="ignore"):
            run_pass(self, [rows, cols], progress=self._scan_progress)
        self._centre, self._q = rows.centre, rows.centred_squares
        self._wsum, self._wtsum = rows.weight_sums, rows.weighted_sums
        self._uptake_min = float(rows.uptake_min.min())
        self._uptake_neg = int(rows.uptake_negative.sum())
        colsum_wt, colsum_w = cols.weighted, cols.weights
        if rows.bad.any():
            bad = np.flatnonzero(rows.bad)
            runs = np.split(bad, np.flatnonzero(np.diff(bad) > 1) + 1)
            self._raise_nonfinite([slice(int(r[0]), int(r[-1]) + 1) for r in runs], name)
        if not (np.isfinite(colsum_wt).all() and np.isfinite(self._q).all()):
            self._raise_overflow(name)
        self._check_underflow(name)
        if self._den is not None:
            self._check_uptake()
        self._colsum_w = colsum_w
        with np.errstate(invalid="ignore", divide="ignore"):
            self._mean = np.where(colsum_w > 0, colsum_wt / np.where(colsum_w > 0, colsum_w, 1.0), np.nan)
        if not (colsum_w > 0).any():
            if self._den is not None:
                raise SummaryError(
                    "`uptake_itt` is zero for every unit in every draw: the offer changes nobody's uptake, so there "
                    "are no compliers and no complier-weighted effect; check that the uptake ITT matrix is the right one."
                )
            raise SummaryError("`weights` are zero for every unit (zero total weight); nothing to summarize.")
        self._scan_record = ScanRecord(self._centre, self._q, self._wsum, self._wtsum)

    def _raise_nonfinite(self, bad_rows, name):
        """Report non-finite draws, the effect (or outcome ITT) matrix first, then the uptake matrix."""
        S, n = self._values.shape
        for arr, nm in ((self._values, name), (self._den, "uptake_itt")):
            if arr is None:
                continue
            rows_mask = np.zeros(S, bool)
            cols_mask = np.zeros(n, bool)
            count = 0
            for r in bad_rows:
                m = ~np.isfinite(np.asarray(arr[r]))
                if m.any():
                    rows_mask[r] |= m.any(axis=1)
                    cols_mask |= m.any(axis=0)
                    count += int(m.sum())
            if count:
                raise SummaryError(describe_nonfinite(rows_mask, cols_mask, count, nm))
        self._raise_overflow(name)  # every value is finite: a weighted sum overflowed

    def _raise_overflow(self, name):
        if self.is_lazy:
            import dask.array as da

            biggest = float(da.nanmax(da.fabs(da.where(da.isfinite(self._values), self._values, 0))).compute())
        else:
            step = self.block_rows()
            biggest = max(float(np.max(np.abs(self._values[i : i + step]))) for i in range(0, self.n_draws, step))
        weighted = " times `weights`" if self._weights is not None else ""
        raise SummaryError(
            f"`{name}`{weighted} is too large in magnitude (largest |value| {biggest:.4g}): sums over units or "
            "draws overflow float64. Rescale the values (for example to thousands of the currency unit)."
        )

    def _check_underflow(self, name):
        """Refuse draws whose spread across units is real but too small for float64 to square.

        A spread below about 1e-140 (effects on a 1e-200 scale) makes every centred sum of squares
        underflow to zero, and every draw would read "no heterogeneity", which is false. Only draws
        whose centred sum of squares is that small are read again, and only a few.
        """
        with np.errstate(over="ignore", invalid="ignore"):
            tiny = np.flatnonzero((self._q >= 0) & (self._q < self._wsum * _SMALLEST_SPREAD**2))
        for r in tiny[:8]:
            row = np.asarray(self._values[int(r)], dtype=np.float64)
            biggest = float(np.max(np.abs(row)))
            spread = float(np.max(row) - np.min(row))
            if spread > 64 * np.finfo(np.float64).eps * biggest:
                power = -int(np.floor(np.log10(biggest)))
                raise SummaryError(
                    f"`{name}` is too small in magnitude (largest |value| {biggest:.4g} in draw {int(r)}): the squares of "
                    f"its spread across units underflow float64, so no spread or summary R^2 can be computed. Rescale the "
                    f"values (for example multiply them by 1e{power})."
                )

    def _check_uptake(self):
        """Refuse negative uptake effects (counted during the scan)."""
        if self._uptake_neg:
            raise SummaryError(
                f"`uptake_itt` has {self._uptake_neg} negative values (smallest {self._uptake_min:.4g}). "
                "Complier weighting assumes "
                "monotonicity (the offer never lowers uptake), so the uptake effect must be >= 0; if the negative "
                "values are sampling noise you accept, clip them yourself, e.g. np.clip(uptake_itt, 0, None)."
            )

    # -- the pass primitive ---------------------------------------------------------
    def block_rows(self) -> int:
        """Draws per block: so one float64 block is about 8 MB; for lazy draws their chunk of draws."""
        if self.is_lazy:
            return int(self._values.chunks[0][0])
        return max(1, min(self.n_draws, _BLOCK_BYTES // (8 * self.n_units)))

    @property
    def is_lazy(self) -> bool:
        """True when the draws are a Dask array (not loaded): every pass is then a Dask computation."""
        return not isinstance(self._values, np.ndarray)

    def blocks(self, rows_per_block: int | None = None):
        """Yield :class:`DrawBlock` objects covering all draws in order (lazy draws: read one by one)."""
        step = rows_per_block or self.block_rows()
        for start in range(0, self.n_draws, step):
            r = slice(start, min(start + step, self.n_draws))
            yield self.block(r)

    def block(self, r: slice) -> DrawBlock:
        """The :class:`DrawBlock` of draws ``r`` (a slice of rows), as every pass reads it.

        For lazy draws the block is read (computed) here, as NumPy arrays.
        """
        vals = self._values[r]
        den = None if self._den is None else self._den[r]
        if self.is_lazy:
            vals = np.asarray(vals)
            den = None if den is None else np.asarray(den)
        return assemble_block(r, vals, den, self._weights)

    # -- public description ------------------------------------------------------------
    @property
    def n_draws(self) -> int:
        return int(self._values.shape[0])

    @property
    def n_units(self) -> int:
        return int(self._values.shape[1])

    @property
    def dtype(self) -> np.dtype:
        return self._values.dtype

    @property
    def values(self) -> np.ndarray:
        """The draw matrix as given (effects, or the outcome ITT for complier-weighted draws), not a copy.

        Read-only view: summaries assume it does not change after construction. Lazy draws:
        the Dask array itself (chunks of draws spanning every unit).
        """
        if self.is_lazy:
            return self._values
        v = self._values.view()
        v.flags.writeable = False
        return v

    @property
    def uptake_values(self) -> np.ndarray | None:
        """The uptake ITT draws of complier-weighted draws (read-only view), else None."""
        if self._den is None:
            return None
        if self.is_lazy:
            return self._den
        v = self._den.view()
        v.flags.writeable = False
        return v

    @property
    def weights(self) -> np.ndarray | None:
        """The weights as given (None, per unit, or per draw and unit)."""
        return self._weights

    @property
    def unit_weights(self) -> np.ndarray | None:
        """Fixed weight of each unit, shape (n_units,): the given per-unit weights, ones when none
        were given. For complier-weighted draws the unit weights ``v_i`` that multiply both sums.
        None when the weights vary by draw (plain draws with per-draw weights).
        """
        if self._weights is None:
            return np.ones(self.n_units)
        if self._weights.ndim == 2:
            return None
        return self._weights

    @property
    def weights_description(self) -> str:
        """"none", "per unit" or "per draw and unit", for provenance and settings."""
        if self._weights is None:
            return "none"
        return "per unit" if self._weights.ndim == 1 else "per draw and unit"

    @property
    def scan(self) -> ScanRecord:
        """The validation scan's per-draw sums (frozen); see :class:`ScanRecord`."""
        return self._scan_record

    @property
    def is_complier_weighted(self) -> bool:
        """True for draws built with :meth:`from_itt`."""
        return self._den is not None

    @property
    def has_draw_weights(self) -> bool:
        """True when weights vary by draw (per-draw weights or complier weighting)."""
        return self._den is not None or (self._weights is not None and self._weights.ndim == 2)

    @property
    def posterior_mean(self) -> np.ndarray:
        """Weighted posterior mean per unit, shape (n_units,): ``sum_s w_si T_si / sum_s w_si``.

        For complier-weighted draws: ``sum_s ITT_y,si / sum_s pi_si``. NaN for a unit
        whose weight is zero in every draw (such a unit takes no part in any summary).
        """
        return self._mean

    @property
    def mean_weights(self) -> np.ndarray:
        """Posterior mean weight per unit, shape (n_units,) (ones without weights)."""
        return self._colsum_w / self.n_draws

    @property
    def overall(self) -> np.ndarray:
        """Per draw, the weighted average effect over all units, shape (n_draws,)."""
        return self._wtsum / self._wsum

    @property
    def source(self) -> str:
        """Which sampler run the draws come from (given, or an id of the array's memory); read-only."""
        return self._source

    @property
    def unit_ids(self) -> pd.Index:
        """The index of the covariate table as given (``covariates`` itself is renumbered 0..n-1)."""
        return self._unit_ids

    @property
    def notes(self) -> tuple:
        """What construction decided for the user (an id column matched or excluded), as sentences."""
        return getattr(self, "_notes", ())

    @property
    def draws_per_chain(self) -> int:
        return self.n_draws // self.n_chains

    def describe(self) -> dict:
        """Shape, dtype and settings, for provenance records."""
        return {
            "label": self.label,
            "n_draws": self.n_draws,
            "n_units": self.n_units,
            "n_chains": self.n_chains,
            "dtype": str(self.dtype),
            "complier_weighted": self.is_complier_weighted,
            "weights": None if self._weights is None else self.weights_description,
            "unit": self.unit,
            "better": self.better,
            "covariates": list(self.covariates.columns),
        }

    def __repr__(self) -> str:
        kind = "complier-weighted (ITT ratio) " if self.is_complier_weighted else ""
        return (
            f"EffectDraws({kind}'{self.label}': {self.n_draws} draws x {self.n_units} units, "
            f"{self.n_chains} chain{'s' if self.n_chains != 1 else ''}, {self.dtype}, "
            f"{self.covariates.shape[1]} covariates)"
        )

"""The main job in one call: every summary of one set of draws (the one orchestrator).

The command line, the report folder and the explorer all build their summaries here.
"""
from __future__ import annotations

from dataclasses import dataclass, field

from ..core.validate import SummaryError, check_int
from .additive import plan_additive
from .groups import plan_groups
from .linear import plan_linear
from .projection import project
from .tree import plan_tree

__all__ = ["SummaryBundle", "summarize_all", "summarize_extras", "summarize_draws", "DEFAULT_DEPTH", "STAGES"]

#: Depth of the reported subgroups, shared by the command line, the report and the explorer.
DEFAULT_DEPTH = 3
#: The summaries :func:`summarize_all` computes, in order (names used by progress callbacks and ``errors``).
STAGES = ("tree", "groups", "linear", "additive")

@dataclass
class SummaryBundle:
    """The summaries of one set of draws (any but the tree may be None), and the files written from them.

    Attributes
    ----------
    errors : dict
        Summary name ("linear", "additive") -> message, for an extra that could not be computed
        when :func:`summarize_all` was asked to record such failures instead of raising.
    """

    draws: object
    tree: object
    additive: object = None
    linear: object = None
    groups: object = None
    evidence: object = None  # EvidenceSet, only when asked for (summarize_all(evidence=True))
    files: list = field(default_factory=list)
    notes: list = field(default_factory=list)
    errors: dict = field(default_factory=dict)

    @property
    def results(self) -> dict:
        return {k: v for k, v in (("tree", self.tree), ("additive", self.additive), ("linear", self.linear),
                                  ("groups", self.groups)) if v is not None}


def summarize_all(draws, *, depth: int = DEFAULT_DEPTH, max_depth: int | None = None, min_size=None, columns=None,
                  groups=None, additive: bool = True, linear: bool = True, additive_options=None,
                  extras: str = "raise", evidence: bool = False, stability_fits: int = 0, threshold=None,
                  tolerance: float = 0.05, level: float = 0.95, interval: str = "equal-tailed",
                  pool_levels: int | None = None, progress=None) -> SummaryBundle:
    """Every summary of one set of draws: the tree (at ``depth``, grown to ``max_depth``), optional
    groups, the linear and the additive summary. The one orchestrator: the command line, the
    report folder and the explorer all call it.

    Parameters
    ----------
    draws : EffectDraws
    depth : int, default :data:`DEFAULT_DEPTH`
        Depth of the reported subgroups.
    max_depth : int, optional
        Depth the tree is grown to (default ``max(depth, 4)``), so summary R^2 is shown for every depth.
    min_size, columns
        Passed to :func:`summarize_tree` (``columns`` also to the additive and linear summaries).
    groups : mapping label -> query (:mod:`summarize_widgets.core.query`), optional
        Pre-specified groups (:func:`summarize_groups`).
    additive, linear : bool, default True
        Whether to compute these summaries.
    pool_levels : int, optional
        For the linear and additive summaries: keep this many most common levels of any text
        column with more than 50 levels and pool the rest into "(other)" (default: such a column
        is refused with a message naming it; the tree takes every column as it is).
    additive_options : mapping, optional
        Keyword arguments for :func:`summarize_additive` (``n_splines``, ``lam``, ``grid_size``).
    extras : {"raise", "record"}, default "raise"
        What a failure of the linear or additive summary does: raise, or leave it None and record
        the message in ``bundle.errors`` (the explorer shows it in that summary's tab). The tree
        and the groups always raise.
    progress : callable(stage, stage_index, n_stages, done_blocks, total_blocks), optional
        Called after each block of the one pass (``stage`` is the first of :data:`STAGES`
        computed, ``stage_index`` 0 of ``n_stages`` 1). Without one, a long pass shows a tqdm bar.
    evidence : bool, default False
        Also gather the evidence a referee asks for (heterogeneity, size paths;
        :func:`~summarize_widgets.summaries.evidence_set.gather_evidence`) into ``bundle.evidence``.
    stability_fits : int, default 0
        With ``evidence``: draws to refit the tree to for the structure stability check (0 skips it:
        it costs one CART fit per draw).
    threshold, tolerance : float, optional
        With ``evidence``: the difference ``c`` of ``P(range > c)`` (default: a rule of thumb) and the
        summary R^2 tolerance of the size paths.
    level, interval
        With ``evidence``: credible level and interval kind of its verdicts.

    Notes
    -----
    ONE pass over the draws, whatever is asked for: every structure (tree, groups, designs
    and smoothing) is fitted from the validation scan's posterior mean, then the draws are
    projected onto all of them at once (leaf sums of every depth, group sums, the linear and
    additive maps). With the validation scan, the whole job reads each block of draws twice
    (``evidence=True`` adds its own passes).
    """
    depth = check_int(depth, "depth", low=1, high=8)
    max_depth = max(depth, 4) if max_depth is None else check_int(max_depth, "max_depth", low=depth, high=8)
    if extras not in ("raise", "record"):
        raise SummaryError(f"`extras` must be 'raise' or 'record'; got {extras!r}.")
    wanted = [name for name, on in zip(STAGES, (True, bool(groups), linear, additive)) if on]
    tick = None
    if progress is not None:
        def tick(done, total):  # one pass for every summary: reported as the first stage, of one
            progress(wanted[0], 0, 1, done, total)

    # Fit every structure from the validation scan's posterior mean (no pass over the draws) ...
    plans = {"tree": plan_tree(draws, max_depth=max_depth, min_size=min_size, columns=columns)}
    if groups:
        plans["groups"] = plan_groups(draws, groups)
    extra_plans = _extra_plans(draws, columns, additive_options, pool_levels)
    errors = _plan_extras(plans, extra_plans, wanted, extras)
    # ... then project the draws onto all of them in ONE pass.
    results = dict(zip(plans, project(draws, list(plans.values()), progress=tick)))
    bundle = SummaryBundle(draws=draws, tree=results["tree"].at_depth(depth), groups=results.get("groups"),
                           linear=results.get("linear"), additive=results.get("additive"), errors=errors,
                           notes=list(draws.notes))  # what construction decided (an id column matched or excluded)
    if evidence:
        from .evidence_set import gather_evidence

        bundle.evidence = gather_evidence(draws, bundle.tree, linear=bundle.linear, groups=bundle.groups,
                                          stability_fits=stability_fits, threshold=threshold, tolerance=tolerance,
                                          level=level, interval=interval)
    return bundle


def _plan_extras(plans: dict, makers: dict, wanted, extras: str) -> dict:
    """Add the plans of the wanted extras to ``plans``; return {name: message} of those that failed."""
    errors = {}
    for name, make in makers.items():
        if name not in wanted:
            continue
        try:
            plans[name] = make()
        except SummaryError as exc:
            if extras == "raise":
                raise
            errors[name] = str(exc)
    return errors


def _extra_plans(draws, columns, additive_options, pool_levels) -> dict:
    """Deferred plans of the linear and additive summaries (built only for the summaries asked for)."""
    opts = {"pool_levels": pool_levels, **dict(additive_options or {})}
    return {"linear": lambda: plan_linear(draws, columns=columns, pool_levels=pool_levels),
            "additive": lambda: plan_additive(draws, columns=columns, **opts)}


def summarize_extras(draws, *, columns=None, linear: bool = True, additive: bool = True, additive_options=None,
                     extras: str = "raise", pool_levels: int | None = None, progress=None) -> SummaryBundle:
    """The linear and additive summaries alone, in ONE pass shared by both (the explorer's second step).

    The explorer shows its tree from :func:`summarize_all` with ``linear=False, additive=False``
    (one pass), then fills in these two from this call on a worker thread. The plans and the
    fused projection are those of :func:`summarize_all`, so the results are the same.

    Parameters
    ----------
    draws : EffectDraws
    columns, linear, additive, additive_options, extras, pool_levels
        As for :func:`summarize_all`.
    progress : callable(stage, stage_index, n_stages, done_blocks, total_blocks), optional
        ``stage`` is "linear" (or "additive" when the linear summary is not asked for).

    Returns
    -------
    SummaryBundle
        With ``tree`` None; ``linear``, ``additive`` and ``errors`` filled.
    """
    if extras not in ("raise", "record"):
        raise SummaryError(f"`extras` must be 'raise' or 'record'; got {extras!r}.")
    wanted = [name for name, on in (("linear", linear), ("additive", additive)) if on]
    tick = None
    if progress is not None and wanted:
        def tick(done, total):
            progress(wanted[0], 0, 1, done, total)
    plans: dict = {}
    errors = _plan_extras(plans, _extra_plans(draws, columns, additive_options, pool_levels), wanted, extras)
    results = dict(zip(plans, project(draws, list(plans.values()), progress=tick))) if plans else {}
    return SummaryBundle(draws=draws, tree=None, linear=results.get("linear"), additive=results.get("additive"),
                         errors=errors, notes=list(draws.notes))


def summarize_draws(values, covariates, *, weights=None, chains=None, label: str = "effect", unit=None,
                    better: str = "higher", **options) -> SummaryBundle:
    """The whole job in one call and two passes over the draws: validate, then every summary.

    Parameters
    ----------
    values : array-like, Dask array, zarr array, xarray object, or EffectDraws
        The draws (n_draws, n_units), as for :class:`~summarize_widgets.EffectDraws`: a NumPy
        array or ``np.memmap`` runs on threads; a Dask array, a zarr array or an xarray object
        opened with chunks (``xr.open_zarr``, ``xr.open_dataset(..., chunks={})``) stays on disk
        or on the cluster and every pass is a Dask computation on the active scheduler.
    covariates : pandas.DataFrame
        One row per unit (ignored when ``values`` is already an EffectDraws).
    weights, chains, label, unit, better
        As for :class:`~summarize_widgets.EffectDraws`.
    **options
        Passed to :func:`summarize_all` (``depth``, ``max_depth``, ``min_size``, ``columns``,
        ``groups``, ``additive``, ``linear``, ``additive_options``, ``extras``, ``progress``).

    Returns
    -------
    SummaryBundle

    Notes
    -----
    Pass 1 is the validation scan (finiteness, posterior mean, per-draw sums of squares);
    the structures (tree, groups, linear and additive designs, smoothing) are fitted from it
    without reading the draws; pass 2 computes every projection at once.
    """
    from ..core.draws import EffectDraws

    draws = values if isinstance(values, EffectDraws) else EffectDraws(
        values, covariates, weights=weights, chains=chains, label=label, unit=unit, better=better)
    return summarize_all(draws, **options)

"""Uptake drivers beside effect drivers (complier designs): is a subgroup's offer effect large because many
take the offer up, or because the effect among those who take it up is large?

For complier-weighted draws (:meth:`EffectDraws.from_itt`) and a subgroup ``g`` (unit weights ``v_i``),
per draw ``s``:

* uptake share ``pi_sg = sum_g v pi_si / sum_g v`` (the offer's effect on uptake, the complier share),
* intention-to-treat effect ``ITT_sg = sum_g v ITT_si / sum_g v``,
* complier effect ``LATE_sg = ITT_sg / pi_sg`` (the Wald ratio, docs/method.md section 5),

so ``ITT_sg = pi_sg LATE_sg`` exactly. Against all units (``0``) the ITT difference splits exactly, per draw::

    ITT_g - ITT_0 = (pi_g - pi_0) LATE_0  +  pi_g (LATE_g - LATE_0)
                    `-- from uptake --'     `-- from the effect among compliers --'

(a two-factor decomposition with the reference's LATE and the subgroup's uptake; the other ordering would
use ``LATE_g`` and ``pi_0``; :data:`DECOMPOSITION_NOTE` says so in every output).
"""
from __future__ import annotations

import numpy as np
import pandas as pd

from ..core.draws import EffectDraws
from ..core.intervals import credible_interval
from ..core.passes import LinearMap, run_pass
from ..core.validate import SummaryError, check_interval, check_level

__all__ = ["uptake_draws", "uptake_drivers", "UptakeDrivers", "UPTAKE_DRIVER_COLUMNS", "DECOMPOSITION_NOTE",
           "UPTAKE_CAUTION"]

#: Columns of :meth:`UptakeDrivers.table`.
UPTAKE_DRIVER_COLUMNS = ("subgroup", "label", "rule", "n_units", "share",
                         "uptake", "uptake_lower", "uptake_upper",
                         "itt", "itt_lower", "itt_upper",
                         "complier_effect", "complier_lower", "complier_upper",
                         "itt_difference", "from_uptake", "from_uptake_lower", "from_uptake_upper",
                         "from_complier_effect", "from_complier_lower", "from_complier_upper", "uptake_explains")

DECOMPOSITION_NOTE = (
    "ITT difference from all units = (uptake - uptake of all) x complier effect of all  +  uptake x (complier effect - "
    "complier effect of all), per posterior draw; 'uptake_explains' is the posterior mean share of the difference "
    "from uptake (blank when the difference is near zero)."
)
UPTAKE_CAUTION = (
    "These figures describe a model's posterior; subgroup findings are exploratory unless pre-specified, and "
    "moderators are not mechanisms: a subgroup with low uptake is not shown to benefit less if it took the offer up."
)


def uptake_draws(draws: EffectDraws, label: str = "offer effect on uptake") -> EffectDraws:
    """The offer's effect on uptake as plain effect draws (paired with ``draws``: same source, same draw index).

    Summarize it with any summary (``summarize_tree(uptake_draws(d))``) for the uptake drivers' own structure.
    """
    if not isinstance(draws, EffectDraws) or not draws.is_complier_weighted:
        raise SummaryError("`draws` must be complier-weighted EffectDraws (EffectDraws.from_itt(outcome_itt, uptake_itt, ...)); "
                           "uptake drivers need the offer's effect on uptake.")
    return EffectDraws(draws.uptake_values, draws.covariates, weights=draws.unit_weights if draws.weights is not None else None,
                       chains=draws.n_chains, label=label, better="higher", source=draws.source)


def _membership(summary):
    from .groups import GroupSummary
    from .tree import TreeSummary

    if isinstance(summary, TreeSummary):
        ids = [int(i) for i in summary.leaf_ids]
        units = summary.unit_subgroups()
        M = np.column_stack([np.ones(units.size, bool)] + [units == i for i in ids])
        tab = summary.table()[["subgroup", "label", "rule", "n_units"]]
        info = pd.concat([pd.DataFrame({"subgroup": ["all"], "label": ["All units"], "rule": ["all units"],
                                        "n_units": [units.size]}), tab], ignore_index=True)
        return M, info
    if isinstance(summary, GroupSummary):
        M = np.asarray(summary.membership)
        info = pd.DataFrame({"subgroup": summary.labels, "label": summary.labels, "rule": summary.queries,
                             "n_units": M.sum(axis=0).astype(int)})
        return M, info
    raise SummaryError(f"`structure` must be a TreeSummary or a GroupSummary; got {type(summary).__name__}.")


class UptakeDrivers:
    """Uptake, intention-to-treat and complier effects of each subgroup of one structure, per draw.

    Attributes
    ----------
    structure : TreeSummary or GroupSummary
    draws : EffectDraws (complier-weighted)
    uptake_draws, itt_draws, complier_draws : ndarray, shape (n_draws, 1 + K)
        All units first, then the subgroups in table order.
    from_uptake_draws, from_complier_draws : ndarray, shape (n_draws, 1 + K)
        The two parts of each subgroup's ITT difference from all units (zero for all units).
    """

    def __init__(self, structure, draws, info, uptake, itt):
        self.structure = structure
        self.draws = draws
        self._info = info
        self.uptake_draws = uptake
        self.itt_draws = itt
        self.complier_draws = itt / uptake
        late0 = self.complier_draws[:, :1]
        self.from_uptake_draws = (uptake - uptake[:, :1]) * late0
        self.from_complier_draws = uptake * (self.complier_draws - late0)

    @property
    def caution(self) -> str:
        return UPTAKE_CAUTION

    def table(self, level: float = 0.95, interval: str = "equal-tailed") -> pd.DataFrame:
        """One row per subgroup (all units first): :data:`UPTAKE_DRIVER_COLUMNS`."""
        level = check_level(level)
        interval = check_interval(interval)
        out = self._info.reset_index(drop=True).copy()
        uw = self.draws.unit_weights
        M, _ = _membership(self.structure)
        out["share"] = (uw @ M) / uw.sum()
        for name, q, lo_name, hi_name in (("uptake", self.uptake_draws, "uptake_lower", "uptake_upper"),
                                          ("itt", self.itt_draws, "itt_lower", "itt_upper"),
                                          ("complier_effect", self.complier_draws, "complier_lower", "complier_upper"),
                                          ("from_uptake", self.from_uptake_draws, "from_uptake_lower", "from_uptake_upper"),
                                          ("from_complier_effect", self.from_complier_draws, "from_complier_lower",
                                           "from_complier_upper")):
            lo, hi = credible_interval(q, level, interval)
            out[name] = q.mean(axis=0)
            out[lo_name] = lo
            out[hi_name] = hi
        out["itt_difference"] = (self.itt_draws - self.itt_draws[:, :1]).mean(axis=0)
        diff = out["itt_difference"].to_numpy()
        scale = np.abs(self.itt_draws[:, :1].mean()) + 1e-12
        with np.errstate(divide="ignore", invalid="ignore"):
            explains = np.where(np.abs(diff) > 1e-6 * scale, out["from_uptake"].to_numpy() / diff, np.nan)
        out["uptake_explains"] = explains
        out.attrs.update({"level": level, "interval": interval, "summary": "uptake drivers", "label": self.draws.label,
                          "unit": self.draws.unit, "better": self.draws.better, "note": DECOMPOSITION_NOTE,
                          "caution": UPTAKE_CAUTION})
        return out[list(UPTAKE_DRIVER_COLUMNS)]

    def __repr__(self) -> str:
        return f"UptakeDrivers of '{self.draws.label}' on {self.uptake_draws.shape[1] - 1} subgroups"


def uptake_drivers(structure, draws: EffectDraws | None = None, *, progress=None) -> UptakeDrivers:
    """Each subgroup's uptake share, intention-to-treat effect and complier effect on one structure.

    Parameters
    ----------
    structure : TreeSummary or GroupSummary
        Whose subgroups (a tree at its current depth, or groups; groups may overlap).
    draws : EffectDraws, optional
        Complier-weighted draws of the same units (default: the structure's own draws).
    progress : callable(done, total), optional

    Returns
    -------
    UptakeDrivers
    """
    from .compare import check_same_units

    draws = structure.draws if draws is None and hasattr(structure, "draws") else draws
    if not isinstance(draws, EffectDraws) or not draws.is_complier_weighted:
        raise SummaryError("`draws` must be complier-weighted EffectDraws (EffectDraws.from_itt(outcome_itt, uptake_itt, ...)); "
                           "pass them as `draws=` when the structure was fitted on other draws.")
    M, info = _membership(structure)
    if draws is not structure.draws:
        check_same_units(structure.draws, draws, getattr(structure, "columns", None))
    red = LinearMap(M.astype(np.float64), with_weights=True)
    run_pass(draws, [red], progress=progress)
    U = draws.unit_weights @ M  # sum of unit weights per subgroup
    itt = red.out / U
    uptake = red.weights_out / U
    if (uptake <= 0).any(axis=0).any():
        bad = info["label"][(uptake <= 0).any(axis=0)].tolist()
        raise SummaryError(f"Subgroup(s) {', '.join(map(repr, bad[:5]))} have no uptake in some draws; their complier "
                           "effect is undefined.")
    return UptakeDrivers(structure, draws, info, uptake, itt)

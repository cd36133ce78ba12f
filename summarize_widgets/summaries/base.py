"""What every summary result shares: the draws it describes, their label, its settings, the
statistics core's cached Monte Carlo diagnostics."""
from __future__ import annotations

import numpy as np

from ..core.stats import MC_COLUMNS, mc_diagnostics, summary_columns

__all__ = ["SummaryResult", "FIT_COLUMNS"]

#: Columns describing the posterior of a summary R^2 (no P(>0): R^2 is never negative).
FIT_COLUMNS = ("mean", "sd", "lower", "upper", *MC_COLUMNS)


class SummaryResult:
    """Base of every summary result (tree, groups, linear, additive).

    Attributes
    ----------
    draws : EffectDraws
        The draws the summary describes.
    label : str
        What the effect is (``draws.label``).
    settings : dict
        What produced the summary, for provenance; ``settings["summary"]`` names its type.
    """

    #: The summary type: "tree", "groups", "linear" or "additive".
    summary_type = ""

    def __init__(self, draws, settings: dict):
        self._draws = draws
        self._settings = {"summary": self.summary_type, "label": draws.label, **settings}
        self._diagnostics: dict = {}
        self._columns: dict = {}

    @property
    def draws(self):
        return self._draws

    @property
    def label(self) -> str:
        return self._draws.label

    @property
    def settings(self) -> dict:
        """What produced this summary (a plain dict of JSON-friendly values)."""
        return self._settings

    def statistics(self, keys, theta: np.ndarray, *, level: float, interval: str) -> dict:
        """Table columns of per-draw quantities ``theta`` (n_draws, k).

        ``keys`` names each column (k hashable ids, for example node ids): the level-free Monte
        Carlo diagnostics are computed once per key and reused (they change with neither the
        level nor the interval type), so going back to a depth or a level costs no arviz call; the
        whole columns are kept per key, level and interval type, so reading a table again (the
        report, then the evidence's precision verdict) costs nothing.
        """
        keys = list(keys)
        setting = (float(level), str(interval))
        missing = [j for j, k in enumerate(keys) if (k, setting) not in self._columns]
        if missing:
            # Only the columns not seen at this setting (a node table after the subgroup table
            # computes its inner nodes only): every statistic is computed column by column.
            part = theta if len(missing) == len(keys) else theta[:, missing]
            todo = [j for j in missing if keys[j] not in self._diagnostics]
            if todo:
                fresh = mc_diagnostics(theta[:, todo], self._draws.n_chains)
                for pos, j in enumerate(todo):
                    self._diagnostics[keys[j]] = {name: values[pos] for name, values in fresh.items()}
            diag = {name: np.array([self._diagnostics[keys[j]][name] for j in missing], dtype=np.float64)
                    for name in ("ess_bulk", "ess_tail", "rhat", "mcse_mean")}
            cols = summary_columns(part, level=level, interval=interval, n_chains=self._draws.n_chains,
                                   diagnostics=diag)
            for pos, j in enumerate(missing):
                self._columns[(keys[j], setting)] = {name: values[pos] for name, values in cols.items()}
            if len(missing) == len(keys):
                return cols
        done = [self._columns[(k, setting)] for k in keys]
        if not done:  # no columns
            return summary_columns(theta, level=level, interval=interval, n_chains=self._draws.n_chains,
                                   diagnostics={name: np.empty(0) for name in ("ess_bulk", "ess_tail", "rhat",
                                                                               "mcse_mean")})
        return {name: np.array([c[name] for c in done]) for name in done[0]}

    def r2_statistics(self, key, r2: np.ndarray, *, level: float, interval: str) -> dict:
        """:data:`FIT_COLUMNS` of a per-draw summary R^2 (one value each).

        Draws with no heterogeneity have no R^2 (NaN); they are left out, and the remaining
        draws' Monte Carlo error is then computed as if from one chain.
        """
        ok = ~np.isnan(r2)
        if ok.all():
            cols = self.statistics([key], r2[:, None], level=level, interval=interval)
        else:
            cols = summary_columns(r2[ok][:, None], level=level, interval=interval, n_chains=1)
        return {name: cols[name][0] for name in FIT_COLUMNS}

"""What every projected summary shares: the per-draw summary R^2 and the fitted draws."""
from __future__ import annotations

import numpy as np

from ..core.validate import SummaryError

__all__ = ["checked_r2", "r2_note", "ProjectedFit"]


def checked_r2(r2: np.ndarray) -> np.ndarray:
    """Return ``r2``; raise when no draw has heterogeneity (NaN marks single draws without any)."""
    if np.isnan(r2).all():
        raise SummaryError(
            "Summary R^2 is undefined: every posterior draw has the same effect for all units "
            "(no heterogeneity to explain), so there is nothing for a summary to capture."
        )
    return r2


def r2_note(r2: np.ndarray) -> str:
    """How many draws had no heterogeneity (their R^2 is NaN), or ""."""
    k = int(np.isnan(r2).sum())
    return "" if k == 0 else f"{k} of {r2.size} draws have no heterogeneity; their summary R^2 is undefined (NaN)."


class ProjectedFit:
    """Mixin for summaries stored as coefficient draws on a fixed design.

    Parameters
    ----------
    coef : ndarray, shape (n_draws, p)
        Projected coefficients per draw (``coef_draws``).
    r2 : ndarray, shape (n_draws,)
        Summary R^2 per draw, NaN where a draw has no heterogeneity.
    design : ndarray or sparse matrix, shape (n_kept, p)
        The fixed design over the units that take part.
    keep : ndarray of bool, shape (n_units,)
        Which units take part (positive posterior-mean weight).
    """

    def __init__(self, coef, r2, design, keep):
        self.coef_draws = coef
        self._r2 = r2
        self._design = design
        self._keep = keep

    @property
    def kept_units(self) -> np.ndarray:
        """Which units take part in the summary (positive posterior-mean weight), shape (n_units,)."""
        return self._keep

    @property
    def fit_r2(self) -> np.ndarray:
        """Summary R^2 per draw, shape (n_draws,) (docs/method.md section 3, with the pseudo-values).

        NaN for draws with no heterogeneity (``fit_r2_note`` says how many); raises
        :class:`SummaryError` when no draw has any.
        """
        return checked_r2(self._r2)

    @property
    def fit_r2_note(self) -> str:
        """How many draws had no heterogeneity (their R^2 is undefined), or ""."""
        return r2_note(self._r2)

    def fitted_values(self, rows=None) -> np.ndarray:
        """Projected draws ``B gamma_s``, shape (n_rows, n_units); NaN for units with zero weight.

        Parameters
        ----------
        rows : None, int, slice or array of int
            Which draws (default: all; mind the memory, n_draws x n_units).
        """
        coef = self.coef_draws if rows is None else np.atleast_2d(self.coef_draws[rows])
        out = np.full((coef.shape[0], self._keep.size), np.nan)
        out[:, self._keep] = (self._design @ coef.T).T
        return out

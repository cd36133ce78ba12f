"""Credible intervals, posterior probabilities and simultaneous bands (docs/method.md sections 4 and 6).

All functions take draws along axis 0 (shape (n_draws, ...)) and return plain arrays.
"""
from __future__ import annotations

import numpy as np

from .validate import INTERVAL_TYPES, check_interval, check_level

__all__ = ["credible_interval", "equal_tailed", "highest_density", "prob_above", "simultaneous_band", "INTERVAL_TYPES"]


def equal_tailed(draws: np.ndarray, level: float = 0.95) -> tuple[np.ndarray, np.ndarray]:
    """Equal-tailed interval from draw quantiles.

    Quantile rule: numpy's default "linear" method (type 7 of Hyndman & Fan 1996),
    at probabilities ``(1 - level) / 2`` and ``(1 + level) / 2``.
    """
    level = check_level(level)
    a = (1.0 - level) / 2.0
    lo, hi = np.quantile(draws, [a, 1.0 - a], axis=0)
    return lo, hi


def highest_density(draws: np.ndarray, level: float = 0.95) -> tuple[np.ndarray, np.ndarray]:
    """Shortest interval holding ``ceil(level * n_draws)`` of the sorted draws.

    The empirical highest-density interval of a unimodal posterior (Hyndman 1996;
    the sorted-draws construction of Chen & Shao 1999).
    """
    level = check_level(level)
    x = np.sort(np.asarray(draws, dtype=np.float64), axis=0)
    n = x.shape[0]
    k = min(n - 1, max(1, int(np.ceil(level * n)) - 1))
    widths = x[k:] - x[: n - k]
    best = np.argmin(widths, axis=0)
    idx = np.indices(best.shape)
    lo = x[(best, *idx)]
    hi = x[(best + k, *idx)]
    return lo, hi


def credible_interval(draws: np.ndarray, level: float = 0.95, interval: str = "equal-tailed") -> tuple[np.ndarray, np.ndarray]:
    """Credible interval of each column: ``interval`` is "equal-tailed" (:func:`equal_tailed`) or
    "highest-density" (:func:`highest_density`)."""
    interval = check_interval(interval)
    return equal_tailed(draws, level) if interval == "equal-tailed" else highest_density(draws, level)


def prob_above(draws: np.ndarray, threshold: float = 0.0) -> np.ndarray:
    """Posterior probability ``P(theta > threshold)``: the share of draws above it."""
    return (np.asarray(draws) > threshold).mean(axis=0)


def simultaneous_band(draws: np.ndarray, level: float = 0.95) -> tuple[np.ndarray, np.ndarray]:
    """Simultaneous band over the last axis of ``draws`` (n_draws, n_points).

    Standardize each point by its posterior mean and sd, take per draw the largest
    absolute standardized deviation over the points, and use its ``level`` quantile q:
    ``mean +/- q sd`` (Ruppert, Wand & Carroll 2003, ch. 6; docs/method.md section 4).
    Points with zero sd get a zero-width band.
    """
    level = check_level(level)
    draws = np.asarray(draws, dtype=np.float64)
    m = draws.mean(axis=0)
    sd = draws.std(axis=0, ddof=1)
    safe = np.where(sd > 0, sd, 1.0)
    z = np.abs(draws - m) / safe
    z[:, sd == 0] = 0.0
    q = np.quantile(z.max(axis=1), level)
    return m - q * sd, m + q * sd

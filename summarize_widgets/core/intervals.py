"""Credible intervals, posterior probabilities, simultaneous bands, effective sample size.

All functions take draws along axis 0 (shape (n_draws, ...)) and return plain arrays.
"""
from __future__ import annotations

import numpy as np

from .validate import check_interval, check_level

__all__ = ["interval", "equal_tailed", "highest_density", "prob_above", "simultaneous_band", "ess_bulk", "summarize_draws"]


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


def interval(draws: np.ndarray, level: float = 0.95, kind: str = "equal-tailed") -> tuple[np.ndarray, np.ndarray]:
    """Dispatch to :func:`equal_tailed` or :func:`highest_density`."""
    kind = check_interval(kind)
    return equal_tailed(draws, level) if kind == "equal-tailed" else highest_density(draws, level)


def prob_above(draws: np.ndarray, threshold: float = 0.0) -> np.ndarray:
    """Posterior probability ``P(theta > threshold)``: the share of draws above it."""
    return (np.asarray(draws) > threshold).mean(axis=0)


def simultaneous_band(draws: np.ndarray, level: float = 0.95) -> tuple[np.ndarray, np.ndarray]:
    """Simultaneous band over the last axis of ``draws`` (n_draws, n_points).

    Standardize each point by its posterior mean and sd, take per draw the largest
    absolute standardized deviation over the points, and use its ``level`` quantile q:
    ``mean +/- q sd`` (Ruppert, Wand & Carroll 2003, ch. 6; METHOD.md section 4).
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


def _autocov_fft(x: np.ndarray) -> np.ndarray:
    """Autocovariance of each column of x (n, k) by FFT (biased, as in Geyer 1992)."""
    n = x.shape[0]
    xc = x - x.mean(axis=0)
    f = np.fft.rfft(xc, n=2 * n, axis=0)
    ac = np.fft.irfft(f * np.conj(f), axis=0)[:n]
    return ac / n


def ess_bulk(draws: np.ndarray, n_chains: int = 1) -> np.ndarray:
    """Bulk effective sample size of each column (rank-normalized, split chains).

    Follows Vehtari, Gelman, Simpson, Carpenter & Buerkner (2021): rank-normalize the
    pooled draws, split each chain in half, combine within- and between-chain
    variances, and sum autocorrelations with Geyer's initial monotone sequence.

    Parameters
    ----------
    draws : ndarray, shape (n_draws,) or (n_draws, k)
        Stored chain-major.
    n_chains : int
    """
    from scipy.stats import norm, rankdata

    x = np.asarray(draws, dtype=np.float64)
    squeeze = x.ndim == 1
    if squeeze:
        x = x[:, None]
    S, k = x.shape
    per = S // n_chains
    half = per // 2
    if half < 2:
        out = np.full(k, np.nan)
        return out[0] if squeeze else out
    # split chains: (2 * n_chains, half, k)
    chains = x[: per * n_chains].reshape(n_chains, per, k)
    split = np.concatenate([chains[:, :half], chains[:, per - half:]], axis=0)
    m, n = split.shape[0], half
    flat = split.reshape(m * n, k)
    r = rankdata(flat, axis=0)
    z = norm.ppf((r - 0.375) / (m * n + 0.25)).reshape(m, n, k)
    out = np.empty(k)
    for j in range(k):
        zj = z[:, :, j]
        if np.ptp(zj) == 0:
            out[j] = np.nan
            continue
        acov = _autocov_fft(zj.T)  # (n, m)
        chain_var = acov[0] * n / (n - 1)
        W = chain_var.mean()
        B_over_n = zj.mean(axis=1).var(ddof=1) if m > 1 else 0.0
        var_plus = W * (n - 1) / n + B_over_n
        rho = 1.0 - (W - acov.mean(axis=1)) / var_plus
        rho[0] = 1.0
        # Geyer's initial positive and monotone sequence over pairs
        t, prev = 0, np.inf
        total = 0.0
        while t + 1 < n:
            pair = rho[t] + rho[t + 1]
            if pair < 0:
                break
            pair = min(pair, prev)
            total += pair
            prev = pair
            t += 2
        tau = -1.0 + 2.0 * total
        tau = max(tau, 1.0 / np.log10(m * n))
        out[j] = m * n / tau
    return out[0] if squeeze else out


def summarize_draws(draws: np.ndarray, level: float = 0.95, kind: str = "equal-tailed", threshold: float = 0.0) -> dict:
    """Mean, sd, interval and P(> threshold) for each column of draws (n_draws, k)."""
    draws = np.asarray(draws, dtype=np.float64)
    lo, hi = interval(draws, level, kind)
    return {
        "mean": draws.mean(axis=0),
        "sd": draws.std(axis=0, ddof=1),
        "lower": lo,
        "upper": hi,
        "prob_positive": prob_above(draws, threshold),
    }

"""Helpers for data-driven starting values: what a model's ``guess`` can build on.

The idea (variable projection; Golub & Pereyra, SIAM J. Numer. Anal. 10 (1973) 413,
doi:10.1137/0710036): most flow models are *linear* in two of their parameters once the
others are fixed — η = c·g(γ̇) + d with g set by (λ, n, a, m). So a coarse grid over the few
nonlinear parameters, each point solved exactly for (c, d) ≥ 0 by relative-weighted linear least
squares (relative errors ≈ log-space residuals), is a cheap, deterministic global stage: its best grid point starts the local fit, and a
poor start never decides the answer. All functions are vectorised over the grid (no Python loop
per grid point).
"""

from __future__ import annotations

import math

import numpy as np


def log_line(x: np.ndarray, y: np.ndarray) -> tuple[float, float]:
    """Slope and intercept of ln y against ln x (least squares; slope 0 for a single rate)."""
    lx, ly = np.log(x), np.log(y)
    if len(x) < 2 or np.ptp(lx) == 0:
        return 0.0, float(np.mean(ly))
    slope, intercept = np.polyfit(lx, ly, 1)
    return float(slope), float(intercept)


def geometric_mean(y: np.ndarray) -> float:
    """exp(mean ln y): the least-squares constant in log space."""
    return float(np.exp(np.mean(np.log(y))))


def time_constant_grid(x: np.ndarray, per_decade: int = 2, margin_decades: float = 1.0) -> np.ndarray:
    """Candidate time constants λ (s) so that 1/λ runs from ``margin_decades`` below the lowest
    to the same above the highest measured shear rate (log-spaced)."""
    low = -math.log10(float(np.max(x))) - margin_decades
    high = margin_decades - math.log10(float(np.min(x)))
    count = max(2, int(round((high - low) * per_decade)) + 1)
    return 10.0 ** np.linspace(low, high, count)


def fit_scaled_offset(basis: np.ndarray, y: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """For each row g of ``basis`` (shape (G, n)), the c > 0, d ≥ 0 minimising the relative
    misfit Σ ((c·g_i + d − y_i)/y_i)², and that misfit.

    Where the unconstrained d is negative, d = 0 and c is refitted alone; where no c > 0 fits,
    the misfit is +inf. At a least-squares solution the misfit is n − c·Σa − d·Σb (a = g/y,
    b = 1/y: the residual is orthogonal to the fit), so no second pass over the grid is needed.
    Returns (c, d, misfit), each of shape (G,).
    """
    a = basis / y  # c-column of the relative system; the d-column is b = 1/y
    b = 1.0 / y
    saa, sab = np.einsum("gi,gi->g", a, a), a @ b
    sbb, sa, sb = float(b @ b), a.sum(axis=1), float(b.sum())
    det = saa * sbb - sab * sab
    with np.errstate(divide="ignore", invalid="ignore"):
        c = (sa * sbb - sab * sb) / det
        d = (saa * sb - sab * sa) / det
        c_alone = sa / saa
    use_alone = ~(np.isfinite(d) & (d >= 0) & np.isfinite(c))
    c = np.where(use_alone, c_alone, c)
    d = np.where(use_alone, 0.0, d)
    misfit = len(y) - c * sa - d * sb
    misfit = np.where((c > 0) & np.isfinite(misfit), misfit, np.inf)
    return c, d, misfit

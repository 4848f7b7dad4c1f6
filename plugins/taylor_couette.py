"""Onset of Taylor vortices between concentric cylinders, inner cylinder turning, outer at rest.

Above a critical Reynolds number Re_c = Ω·R_i·d/ν (d = R_o − R_i, ν = η/ρ) circular Couette
flow gives way to stationary toroidal vortices and the torque rises above the laminar value
(Taylor, Phil. Trans. R. Soc. A 223 (1923) 289, doi:10.1098/rsta.1923.0008). Re_c depends on the
radius ratio η_r = R_i/R_o. With only the outer cylinder turning the flow is centrifugally stable
(Rayleigh's criterion) and no vortices form.

The critical values tabulated below are for axisymmetric stationary modes, from a
Chebyshev-collocation eigen-solver of the linear stability problem (the formulation of
Chandrasekhar, *Hydrodynamic and Hydromagnetic Stability*, 1961, ch. VII — chapter from memory),
converged between 32 and 48 collocation points; they reproduce the widely cited Re_c = 68.19 at
η_r = 0.5. In the narrow-gap limit Ta_c = Re_c²·d/R_i tends to 1695 (Chandrasekhar's exact
narrow-gap value 3389.9 for T = 4Re²(1 − η_r)/(1 + η_r), outer cylinder at rest); the often quoted
1708 is the mean-rotation approximation of the same limit.

Between tabulated ratios √Ta_c is interpolated in (1 − η_r) with a monotone cubic (PCHIP); the
tests compare it with an independent eigen-solver at ratios between the nodes.
"""

from __future__ import annotations

import functools
import math

import numpy as np

# η_r = R_i/R_o and the critical Reynolds number Re_c = Ω R_i d/ν (eigen-solver, see above).
_RADIUS_RATIO = (0.50, 0.70, 0.80, 0.90, 0.921914, 0.95, 0.99, 0.9999)
_CRITICAL_RE = (68.186, 79.491, 94.734, 131.61, 148.51, 184.99, 412.04, 4117.0)
SMALLEST_TABULATED_RATIO = _RADIUS_RATIO[0]
LARGEST_TABULATED_RATIO = _RADIUS_RATIO[-1]


def taylor_number(reynolds: float | np.ndarray, radius_ratio: float) -> float | np.ndarray:
    """Ta = Re²·d/R_i = Re²(1 − η_r)/η_r (dimensionless)."""
    return reynolds**2 * (1.0 - radius_ratio) / radius_ratio


@functools.lru_cache(maxsize=1)
def _interpolant():  # type: ignore[no-untyped-def]
    from scipy.interpolate import PchipInterpolator

    ratio = np.asarray(_RADIUS_RATIO)
    sqrt_ta = np.sqrt(taylor_number(np.asarray(_CRITICAL_RE), ratio))
    gap = 1.0 - ratio
    order = np.argsort(gap)
    return PchipInterpolator(gap[order], sqrt_ta[order])


def critical_taylor_number(radius_ratio: float) -> float:
    """Ta_c at η_r, clamped to the tabulated range [0.5, 0.9999].

    Below 0.5 the value at 0.5 is used: the exact Re_c dips at most ~0.6 % below it (≈ 67.8
    near η_r = 0.45, same eigen-solver) and rises above it for smaller ratios.
    """
    ratio = min(max(radius_ratio, SMALLEST_TABULATED_RATIO), LARGEST_TABULATED_RATIO)
    return float(_interpolant()(1.0 - ratio)) ** 2


def critical_reynolds(radius_ratio: float) -> float:
    """Re_c = Ω R_i d/ν at the onset of Taylor vortices for η_r = R_i/R_o (outer cylinder at rest)."""
    ratio = min(max(radius_ratio, SMALLEST_TABULATED_RATIO), LARGEST_TABULATED_RATIO)
    return math.sqrt(critical_taylor_number(ratio) * ratio / (1.0 - ratio))

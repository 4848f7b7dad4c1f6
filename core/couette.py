"""Concentric-cylinder (Couette/Searle) relations: wall stresses, representative values, the
Krieger wide-gap correction and a yield-stress estimate for finding partly sheared gaps.

Symbols and units: M torque (N·m), Ω relative angular velocity (rad/s), R_i inner (bob) and
R_o outer (cup) radius (m), δ = R_o/R_i, L immersed length (m), c_L end-effect factor (1),
τ shear stress (Pa), γ̇ shear rate (1/s), n′ = d ln M / d ln Ω (1).

In steady creeping flow only the relative rotation matters, so every relation holds whether
the inner or the outer cylinder turns (Bird, Stewart & Lightfoot, *Transport Phenomena*, 2nd
ed., §3.6). Sources of the relations are cited at each function.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

__all__ = [
    "YieldStressEstimate",
    "estimate_yield_stress",
    "herschel_bulkley_couette_speed",
    "inner_wall_stress",
    "krieger_inner_rate",
    "local_power_law_rate",
    "newtonian_inner_rate",
    "representative_radius",
    "representative_rate",
    "representative_stress_factor",
]


def inner_wall_stress(torque: np.ndarray, inner_radius: float, length: float,
                      end_factor: float = 1.0) -> np.ndarray:
    """τ_i = M/(2πR_i²L·c_L) (Pa): the torque balance on the bob, any fluid.

    c_L > 1 accounts for the torque on the bob's ends (ISO 3219 / DIN 53019-1 practice).
    """
    return np.asarray(torque, dtype=float) / (2.0 * math.pi * inner_radius**2 * length * end_factor)


def newtonian_inner_rate(omega: np.ndarray, delta: float) -> np.ndarray:
    """Inner-wall rate of a Newtonian fluid, γ̇_i = 2Ωδ²/(δ² − 1) (1/s) (Margules; BSL §3.6)."""
    return 2.0 * np.asarray(omega, dtype=float) * delta**2 / (delta**2 - 1.0)


def representative_stress_factor(delta: float) -> float:
    """τ_rep/τ_i = (1 + δ²)/(2δ²): the mean of the inner- and outer-wall stresses (ISO 3219 / DIN 53019-1)."""
    return (1.0 + delta**2) / (2.0 * delta**2)


def representative_rate(omega: np.ndarray, delta: float) -> np.ndarray:
    """γ̇_rep = Ω(1 + δ²)/(δ² − 1) (1/s): the mean of the Newtonian wall rates (ISO 3219 / DIN 53019-1)."""
    return np.asarray(omega, dtype=float) * (1.0 + delta**2) / (delta**2 - 1.0)


def representative_radius(inner_radius: float, delta: float) -> float:
    """r_rep = R_i·δ·√(2/(1 + δ²)) (m): where a Newtonian fluid has exactly τ_rep and γ̇_rep."""
    return inner_radius * delta * math.sqrt(2.0 / (1.0 + delta**2))


def krieger_inner_rate(omega: np.ndarray, slope: np.ndarray, delta: float) -> np.ndarray:
    """Inner-wall rate from the local power-law (Krieger) wide-gap correction (1/s).

    γ̇_i = 2Ω / (n′(1 − s^{2/n′})), s = 1/δ, n′ = d ln M / d ln Ω: exact for a power-law
    fluid, a close approximation for others (Krieger, Trans. Soc. Rheol. 12 (1968) 5 —
    reference from memory; the formula follows from γ̇ ∝ r^{−2/n} and Ω = ∫ γ̇/r dr).
    NaN where n′ is not finite and positive. 1 − s^{2/n′} is computed as −expm1 for accuracy
    when the gap is narrow.
    """
    omega = np.asarray(omega, dtype=float)
    slope = np.asarray(slope, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        ok = np.isfinite(slope) & (slope > 0)
        safe = np.where(ok, slope, 1.0)
        rate = 2.0 * omega / (safe * -np.expm1(-2.0 * math.log(delta) / safe))
    return np.where(ok, rate, np.nan)


def local_power_law_rate(rate_at: np.ndarray, stress_ratio: float, slope: np.ndarray) -> np.ndarray:
    """Rate at stress τ = ratio·τ_at from the rate at τ_at, with the local power law (1/s).

    γ̇ ∝ τ^{1/n′} along the gap (τ ∝ r⁻², γ̇ ∝ r^{−2/n′}), so γ̇ = γ̇_at·ratio^{1/n′}: exact for a
    power-law fluid; used to carry the Krieger inner-wall rate to the representative radius.
    """
    slope = np.asarray(slope, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        return np.asarray(rate_at, dtype=float) * stress_ratio ** (1.0 / slope)


# --------------------------------------------------------------------------- yield stress

_GAUSS_X, _GAUSS_W = np.polynomial.legendre.leggauss(24)
_MIN_POINTS = 5


def _hb_rate_over_stress(stress: np.ndarray, tau_y: float, consistency: float, index: float) -> np.ndarray:
    """γ̇/τ of a Herschel–Bulkley fluid, γ̇ = ((τ − τ_y)/K)^{1/n} above τ_y, else 0 (1/(Pa·s))."""
    return np.power(np.maximum(stress - tau_y, 0.0) / consistency, 1.0 / index) / stress


def herschel_bulkley_couette_speed(tau_i: np.ndarray, delta: float, tau_y: float,
                                   consistency: float, index: float) -> np.ndarray:
    """Ω (rad/s) for inner-wall stresses τ_i (Pa) of a Herschel–Bulkley fluid, plug included.

    Ω = ½∫ γ̇(τ)/τ dτ from max(τ_i/δ², τ_y) to τ_i, since τ ∝ r⁻² (BSL §3.6; with a plug
    beyond r_c where τ = τ_y: Reiner & Riwlin, Kolloid-Z. 43 (1927) 1 — reference from memory).
    24-point Gauss–Legendre quadrature, vectorised over the points.
    """
    tau_i = np.asarray(tau_i, dtype=float)
    low = np.maximum(tau_i / delta**2, tau_y)
    width = np.maximum(tau_i - low, 0.0)
    nodes = low[:, None] + width[:, None] * (_GAUSS_X[None, :] + 1.0) / 2.0
    return 0.25 * width * (_hb_rate_over_stress(nodes, tau_y, consistency, index) @ _GAUSS_W)


def _log_speed_slope(tau_i: np.ndarray, delta: float, tau_y: float, consistency: float, index: float,
                     speed: np.ndarray) -> np.ndarray:
    """d ln Ω / d ln τ_i of the Herschel–Bulkley Couette relation (Leibniz rule on the integral)."""
    outer = tau_i / delta**2
    inner_term = _hb_rate_over_stress(tau_i, tau_y, consistency, index)
    outer_term = np.where(outer > tau_y, _hb_rate_over_stress(outer, tau_y, consistency, index) / delta**2, 0.0)
    return 0.5 * (inner_term - outer_term) * tau_i / speed


@dataclass(frozen=True)
class YieldStressEstimate:
    """A yield stress τ_y (Pa) with its standard error, from a Herschel–Bulkley fit in the gap.

    ``significant`` is true when τ_y exceeds twice its standard error.
    """

    value: float
    stderr: float
    flow_index: float

    @property
    def significant(self) -> bool:
        """τ_y > 2·stderr and τ_y > 0."""
        return self.value > 0 and self.value > 2.0 * self.stderr


def estimate_yield_stress(omega: np.ndarray, tau_i: np.ndarray, delta: float) -> YieldStressEstimate | None:
    """Yield stress from the measured inner-wall stress against speed, or ``None``.

    Fits the exact Couette relation of a Herschel–Bulkley fluid (plug flow included) to the
    points, with residuals ln Ω_model − ln Ω divided by d ln Ω/d ln τ_i, i.e. taken as
    relative stress deviations (the torque carries the noise; the speed is set). τ_y is bounded
    below the lowest measured stress. For a Bingham or Herschel–Bulkley fluid the fit is
    exact; a fluid without yield stress gives τ_y near 0 or far below the measured stresses.
    Used to find partly sheared gaps, not as the material's yield stress (see model fits).
    ``None`` with fewer than five usable points or when the fit fails.
    """
    from scipy.optimize import least_squares

    omega = np.asarray(omega, dtype=float)
    tau_i = np.asarray(tau_i, dtype=float)
    keep = np.isfinite(omega) & np.isfinite(tau_i) & (omega > 0) & (tau_i > 0)
    speed, stress = omega[keep], tau_i[keep]
    if len(speed) < _MIN_POINTS or np.ptp(np.log(speed)) == 0:
        return None
    lowest = float(stress.min())
    ln_speed = np.log(speed)

    def residuals(p: np.ndarray) -> np.ndarray:
        tau_y, consistency, index = p[0] * lowest, math.exp(p[1]), p[2]
        with np.errstate(all="ignore"):
            model = herschel_bulkley_couette_speed(stress, delta, tau_y, consistency, index)
            slope = _log_speed_slope(stress, delta, tau_y, consistency, index, model)
            r = (np.log(model) - ln_speed) / slope
        return np.where(np.isfinite(r), r, 1e3)

    power, _ = np.polyfit(ln_speed, np.log(stress), 1)
    index0 = float(np.clip(power, 0.05, 2.0))
    best = None
    for fraction in (0.0, 0.5, 0.9):
        rate0 = float(np.median(newtonian_inner_rate(speed, delta)))
        excess = float(np.median(stress)) - fraction * lowest
        start = [fraction, math.log(max(excess, 1e-300) / rate0**index0), index0]
        try:
            fit = least_squares(residuals, start, bounds=([0.0, -700.0, 0.05], [0.999, 700.0, 3.0]))
        except (ValueError, FloatingPointError):
            continue
        if best is None or fit.cost < best.cost:
            best = fit
    if best is None or not best.success:
        return None
    dof = max(len(speed) - 3, 1)
    try:
        covariance = np.linalg.pinv(best.jac.T @ best.jac) * (2.0 * best.cost / dof)
    except np.linalg.LinAlgError:
        return None
    stderr = math.sqrt(max(float(covariance[0, 0]), 0.0)) * lowest
    return YieldStressEstimate(float(best.x[0] * lowest), stderr, float(best.x[2]))

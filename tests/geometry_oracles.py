"""Independent oracles for the geometry tests: torque and speed from a constitutive law by
quadrature and root finding (scipy), written here and not taken from gammadot's own code.

Physics (steady, creeping, isothermal flow; SI units):

- concentric cylinders, δ = R_o/R_i: τ(r) = τ_i (R_i/r)², so Ω = ½∫_{τ_o}^{τ_i} γ̇(τ)/τ dτ with
  τ_o = τ_i/δ² (Bird, Stewart & Lightfoot, *Transport Phenomena*, 2nd ed., §3.6 and Example
  3.6-3 — numbering from memory), and γ̇ = 0 below a yield stress (plug flow: the lower limit
  becomes τ_y; Reiner & Riwlin, Kolloid-Z. 43 (1927) 1 — reference from memory);
- parallel plates, gap h: γ̇(r) = Ωr/h, M = 2π∫₀ᴿ τ r² dr, F = π∫₀ᴿ (N₁ − N₂) r dr (Macosko,
  *Rheology*, VCH 1994, ch. 5); with wall slip u_s(τ) at both plates the local stress solves
  γ̇(τ) + 2u_s(τ)/h = Ωr/h (Yoshimura & Prud'homme, J. Rheol. 32 (1988) 53).
"""

from __future__ import annotations

import math
from typing import Callable

import numpy as np
from scipy.integrate import quad
from scipy.optimize import brentq

from gammadot.config import GeometryConfig
from gammadot.datamodel import Run

RateOfStress = Callable[[float], float]


def power_law_rate(K: float, n: float) -> RateOfStress:
    """γ̇(τ) = (τ/K)^{1/n} (1/s)."""
    return lambda tau: (tau / K) ** (1.0 / n)


def bingham_rate(tau_y: float, eta_p: float) -> RateOfStress:
    """γ̇(τ) = (τ − τ_y)/η_p above τ_y, else 0 (1/s)."""
    return lambda tau: max(tau - tau_y, 0.0) / eta_p


def carreau_stress(eta0: float, lam: float, n: float) -> Callable[[float], float]:
    """τ(γ̇) = γ̇·η0·(1 + (λγ̇)²)^((n−1)/2) (Pa), η∞ = 0."""
    return lambda rate: rate * eta0 * (1.0 + (lam * rate) ** 2) ** ((n - 1.0) / 2.0)


def invert(stress_of_rate: Callable[[float], float]) -> RateOfStress:
    """γ̇(τ) of an increasing τ(γ̇), by Brent's method in ln γ̇."""
    def rate(tau: float) -> float:
        if tau <= 0:
            return 0.0
        return math.exp(brentq(lambda x: math.log(stress_of_rate(math.exp(x))) - math.log(tau), -50.0, 50.0,
                               xtol=1e-15, rtol=1e-15))
    return rate


def couette_speed(rate: RateOfStress, tau_i: float, delta: float, tau_y: float = 0.0) -> float:
    """Ω (rad/s) at inner-wall stress τ_i (Pa) by adaptive quadrature."""
    low = max(tau_i / delta**2, tau_y)
    if tau_i <= low:
        return 0.0
    value, _ = quad(lambda t: rate(t) / t, low, tau_i, epsabs=0.0, epsrel=1e-13, limit=200)
    return 0.5 * value


def couette_inner_stress(rate: RateOfStress, omega: float, delta: float, tau_y: float = 0.0) -> float:
    """τ_i (Pa) that turns the cylinder at Ω (rad/s): root of the quadrature above."""
    high = 1.0
    while couette_speed(rate, high, delta, tau_y) < omega:
        high *= 2.0
    low = max(tau_y, high / 2.0 ** 60)
    return brentq(lambda t: couette_speed(rate, t, delta, tau_y) - omega, low, high, xtol=1e-300, rtol=1e-14)


def plate_torque(stress_of_apparent_rate: Callable[[float], float], omega: float, radius: float, gap: float) -> float:
    """M = 2π∫₀ᴿ τ(Ωr/h) r² dr (N·m) by quadrature."""
    value, _ = quad(lambda r: stress_of_apparent_rate(omega * r / gap) * r * r, 0.0, radius,
                    epsabs=0.0, epsrel=1e-12, limit=200)
    return 2.0 * math.pi * value


def plate_force(n12_of_rate: Callable[[float], float], omega: float, radius: float, gap: float) -> float:
    """F = π∫₀ᴿ (N₁ − N₂)(Ωr/h) r dr (N) by quadrature."""
    value, _ = quad(lambda r: n12_of_rate(omega * r / gap) * r, 0.0, radius, epsabs=0.0, epsrel=1e-12, limit=200)
    return math.pi * value


def slipping_stress(rate: RateOfStress, slip_per_stress: float, gap: float) -> Callable[[float], float]:
    """τ(γ̇_a) with γ̇(τ) + 2·β·τ/h = γ̇_a: flow plus slip u_s = β·τ at both plates."""
    def stress(apparent_rate: float) -> float:
        if apparent_rate <= 0:
            return 0.0
        high = apparent_rate * gap / (2.0 * slip_per_stress)
        return brentq(lambda t: rate(t) + 2.0 * slip_per_stress * t / gap - apparent_rate, 0.0, high,
                      xtol=1e-300, rtol=1e-14)
    return stress


def make_run(columns: dict[str, np.ndarray], metadata: dict | None = None, run_id: str = "test-run") -> Run:
    """A run as the importer would make it (SI columns)."""
    return Run(run_id=run_id, source_file=f"{run_id}.csv", source_sha256="0" * 64, first_line=1,
               metadata=dict(metadata or {}), columns={k: np.asarray(v, dtype=float) for k, v in columns.items()})


def geometry(kind: str, **values: float | str) -> GeometryConfig:
    """A geometry as study.toml would give it (SI values)."""
    return GeometryConfig(id=f"test-{kind}", type=kind, values=dict(values))

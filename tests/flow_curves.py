"""Synthetic flow curves for the recovery, selection and check tests (test data only, never the demo).

Each generator maps numbers u ∈ [0, 1] to a parameter set of one model, chosen so that every
parameter is visible in the measured range (a plateau the curve reaches, a yield stress that
shows at low rates, a transition inside the range): what a well-designed measurement of such a
fluid looks like. Noise is multiplicative and normal, σ = 1–2 % (typical of a rotational
rheometer within its torque range; common practice).
"""

from __future__ import annotations

import math
from typing import Callable, Sequence

import numpy as np

RATES = np.geomspace(1e-2, 1e4, 40)  # 1/s: six decades, as a wide rheometer flow curve
LOW, HIGH = float(RATES[0]), float(RATES[-1])


def _log_between(u: float, low: float, high: float) -> float:
    return math.exp(math.log(low) + u * (math.log(high) - math.log(low)))


def _between(u: float, low: float, high: float) -> float:
    return low + u * (high - low)


def _plateau_ratio(u: float, lam: float, slope: float) -> float:
    """η∞/η0 so that the upper plateau shows: at the highest rate the thinning term
    (λγ̇)^slope is at most a fifth of η∞/η0 (slope < 0), and η∞ ≤ η0/30."""
    low = 5.0 * (lam * HIGH) ** slope
    return _log_between(u, min(low, 1 / 40), 1 / 30)


def newtonian(u: Sequence[float]) -> dict[str, float]:
    return {"eta": _log_between(u[0], 1e-3, 1e3)}


def power_law(u: Sequence[float]) -> dict[str, float]:
    return {"K": _log_between(u[0], 0.1, 100.0), "n": _between(u[1], 0.2, 0.8)}


def bingham(u: Sequence[float]) -> dict[str, float]:
    return {"tau_y": _log_between(u[0], 0.5, 50.0), "eta_p": _log_between(u[1], 0.01, 1.0)}


def herschel_bulkley(u: Sequence[float]) -> dict[str, float]:
    return {"tau_y": _log_between(u[0], 1.0, 50.0), "K": _log_between(u[1], 0.5, 20.0),
            "n": _between(u[2], 0.3, 0.7)}


def casson(u: Sequence[float]) -> dict[str, float]:
    return {"tau_y": _log_between(u[0], 1.0, 50.0), "eta_c": _log_between(u[1], 0.01, 1.0)}


def cross(u: Sequence[float]) -> dict[str, float]:
    eta0, lam, m = _log_between(u[0], 1.0, 1e3), 1.0 / _log_between(u[1], 0.1, 10.0), _between(u[2], 0.6, 0.95)
    return {"eta0": eta0, "eta_inf": eta0 * _plateau_ratio(u[3], lam, -m), "lam": lam, "m": m}


def carreau(u: Sequence[float]) -> dict[str, float]:
    eta0, lam, n = _log_between(u[0], 1.0, 1e3), 1.0 / _log_between(u[1], 0.1, 10.0), _between(u[2], 0.15, 0.5)
    return {"eta0": eta0, "eta_inf": eta0 * _plateau_ratio(u[3], lam, n - 1.0), "lam": lam, "n": n}


def carreau_yasuda(u: Sequence[float]) -> dict[str, float]:
    eta0, lam, n = _log_between(u[0], 1.0, 1e3), 1.0 / _log_between(u[1], 0.1, 10.0), _between(u[2], 0.15, 0.3)
    # broad transitions, clearly not Carreau's a = 2, and away from n = 1 − a where the form
    # is exactly Cross's (then the simpler Cross is the right choice)
    a = _between(u[4], 0.35, 0.6)
    return {"eta0": eta0, "eta_inf": eta0 * _plateau_ratio(u[3], lam, n - 1.0), "lam": lam, "a": a, "n": n}


def sisko(u: Sequence[float]) -> dict[str, float]:
    K, n = _log_between(u[0], 0.5, 50.0), _between(u[1], 0.2, 0.6)
    crossover = _log_between(u[2], 1.0, 100.0)  # rate (1/s) where K·γ̇ⁿ⁻¹ = η∞
    return {"eta_inf": K * crossover ** (n - 1.0), "K": K, "n": n}


GENERATORS: dict[str, tuple[int, Callable[[Sequence[float]], dict[str, float]]]] = {
    "newtonian": (1, newtonian), "power_law": (2, power_law), "bingham": (2, bingham),
    "herschel_bulkley": (3, herschel_bulkley), "casson": (2, casson), "cross": (4, cross),
    "carreau": (4, carreau), "carreau_yasuda": (5, carreau_yasuda), "sisko": (3, sisko),
}


def noisy(values: np.ndarray, noise: float, seed: int) -> np.ndarray:
    """values·(1 + ε), ε ~ N(0, noise²), from a seeded generator (reproducible)."""
    return values * (1.0 + noise * np.random.default_rng(seed).standard_normal(values.shape))


def expected_stderr(model, params: dict[str, float], noise: float, rates: np.ndarray = RATES) -> np.ndarray:
    """Standard errors a least-squares fit in log space should show for this truth and noise:
    σ·√diag((JᵀJ)⁻¹), J = ∂ln f/∂p at the true parameters (linearised least squares, e.g.
    Seber & Wild, Nonlinear Regression, Wiley 1989, §2.1). Independent of the fit's answer."""
    names = [p.name for p in model.parameters]
    f = model.function(rates, **params)
    parts = model.jacobian(rates, **params)
    J = np.column_stack([np.broadcast_to(parts[n], rates.shape) / f for n in names])
    return noise * np.sqrt(np.diag(np.linalg.inv(J.T @ J)))


def moore_loop(points: int, build_rate: float, seed: int, noise: float = 0.015) -> tuple[np.ndarray, np.ndarray]:
    """A rested thixotropic gel paint taken up from 0.1 to 500 1/s and back through the same steps.

    Moore-type structure kinetics, ds/dt = k[(1 − s) − (λγ̇)^m·s] (s = 1 rested, 0 broken down),
    solved exactly on each step of constant rate: s(t) = s_e + (s₀ − s_e)exp(−k(1 + (λγ̇)^m)t),
    s_e = 1/(1 + (λγ̇)^m); at fixed s the paint is Newtonian with η = η∞ + (η0 − η∞)s (its steady
    state is the Cross model). Invented Merrowind gel paint: η0 = 20 Pa·s, η∞ = 0.08 Pa·s, λ = 0.5 s,
    m = 0.9; steps of 8 + 30/(1 + γ̇) s; 1.5 % torque noise (seeded). Stress in Pa.
    """
    up = np.geomspace(0.1, 500.0, points)
    rate = np.concatenate([up, up[-2::-1]])
    structure, s = [], 1.0
    for g, duration in zip(rate, 8.0 + 30.0 / (1.0 + rate)):
        breakdown = (0.5 * g) ** 0.9
        steady = 1.0 / (1.0 + breakdown)
        s = steady + (s - steady) * math.exp(-build_rate * (1.0 + breakdown) * duration)
        structure.append(s)
    viscosity = 0.08 + (20.0 - 0.08) * np.array(structure)
    return rate, viscosity * rate * (1 + noise * np.random.default_rng(seed).standard_normal(rate.size))

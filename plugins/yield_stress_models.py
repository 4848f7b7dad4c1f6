"""Built-in yield-stress models: Bingham, Herschel–Bulkley, Casson.

They describe stress above the yield stress, so they are fitted to shear stress against shear
rate (in log space the same residuals as viscosity: ln τ = ln η + ln γ̇). A yield stress from a
fit is the model's limit at γ̇ → 0, below the lowest measured rate: an extrapolation that depends
on the model (common practice; compare models before relying on one).

Starting values: Bingham and Casson are straight lines (τ against γ̇, √τ against √γ̇), solved
directly; Herschel–Bulkley gets a deterministic global stage, a grid over n with (K, τ_y)
solved exactly at each grid point (:mod:`gammadot.starting_values`).
Literature references are as recalled (volume/page from the shared REFERENCE §6; DOIs from
memory, not verified here).
"""

from __future__ import annotations

import math

import numpy as np

from gammadot.hookspecs import hookimpl
from gammadot.records import Model, ModelParameter
from gammadot.starting_values import fit_scaled_offset

YIELD_HINT = "no yield stress is resolved: the data are consistent with zero"
HB_EXPONENTS = np.linspace(0.1, 1.5, 15)  # grid of n for the global stage
TAU_Y_START = 0.1  # τ_y starts at least at this fraction of the lowest stress (off its bound 0)


def _positive_start(value: float, floor: float) -> float:
    """A start > 0 (positive parameters are fitted on a log scale)."""
    return float(value) if np.isfinite(value) and value > floor else float(floor)


def _yield_stress_parameter() -> ModelParameter:
    return ModelParameter("tau_y", "Pa", 0.0, math.inf, "yield stress (model limit at γ̇ → 0)", YIELD_HINT)


def bingham(shear_rate: np.ndarray, tau_y: float, eta_p: float) -> np.ndarray:
    """Bingham stress τ = τ_y + η_p γ̇ (Pa), for flow above the yield stress."""
    return tau_y + eta_p * np.asarray(shear_rate, dtype=float)


def bingham_jacobian(shear_rate: np.ndarray, tau_y: float, eta_p: float) -> dict[str, np.ndarray]:
    """∂τ/∂τ_y = 1; ∂τ/∂η_p = γ̇."""
    rate = np.asarray(shear_rate, dtype=float)
    return {"tau_y": np.ones_like(rate), "eta_p": rate}


def guess_bingham(shear_rate: np.ndarray, stress: np.ndarray) -> dict[str, float]:
    """The straight line τ = τ_y + η_p γ̇ by relative-weighted least squares (τ_y ≥ 0)."""
    c, d, _ = fit_scaled_offset(shear_rate[None, :], stress)
    floor = TAU_Y_START * float(np.min(stress))
    return {"tau_y": _positive_start(d[0], floor),
            "eta_p": _positive_start(c[0], floor / float(np.max(shear_rate)))}


def herschel_bulkley(shear_rate: np.ndarray, tau_y: float, K: float, n: float) -> np.ndarray:
    """Herschel–Bulkley stress τ = τ_y + K γ̇ⁿ (Pa); K in Pa·sⁿ."""
    return tau_y + K * np.power(shear_rate, n)


def herschel_bulkley_jacobian(shear_rate: np.ndarray, tau_y: float, K: float, n: float) -> dict[str, np.ndarray]:
    """∂τ/∂τ_y = 1; ∂τ/∂K = γ̇ⁿ; ∂τ/∂n = K γ̇ⁿ ln γ̇."""
    power = np.power(shear_rate, n)
    return {"tau_y": np.ones_like(power), "K": power, "n": K * power * np.log(shear_rate)}


def guess_herschel_bulkley(shear_rate: np.ndarray, stress: np.ndarray) -> dict[str, float]:
    """Global stage: for each n of a grid, K and τ_y ≥ 0 solved exactly; the best grid point."""
    basis = np.power(shear_rate[None, :], HB_EXPONENTS[:, None])
    c, d, misfit = fit_scaled_offset(basis, stress)
    i = int(np.argmin(misfit))
    floor = TAU_Y_START * float(np.min(stress))
    return {"tau_y": _positive_start(d[i], floor), "K": _positive_start(c[i], 1e-12),
            "n": float(HB_EXPONENTS[i])}


def casson(shear_rate: np.ndarray, tau_y: float, eta_c: float) -> np.ndarray:
    """Casson stress τ = (√τ_y + √(η_c γ̇))² (Pa)."""
    return np.square(np.sqrt(tau_y) + np.sqrt(eta_c * np.asarray(shear_rate, dtype=float)))


def casson_jacobian(shear_rate: np.ndarray, tau_y: float, eta_c: float) -> dict[str, np.ndarray]:
    """∂τ/∂τ_y = 1 + √(η_c γ̇/τ_y); ∂τ/∂η_c = (√τ_y + √(η_c γ̇))·√(γ̇/η_c)."""
    rate = np.asarray(shear_rate, dtype=float)
    root = np.sqrt(tau_y) + np.sqrt(eta_c * rate)
    with np.errstate(divide="ignore"):
        return {"tau_y": root / np.sqrt(tau_y), "eta_c": root * np.sqrt(rate / eta_c)}


def guess_casson(shear_rate: np.ndarray, stress: np.ndarray) -> dict[str, float]:
    """The straight line √τ = √τ_y + √η_c·√γ̇ by relative-weighted least squares."""
    c, d, _ = fit_scaled_offset(np.sqrt(shear_rate)[None, :], np.sqrt(stress))
    floor = TAU_Y_START * float(np.min(stress))
    return {"tau_y": _positive_start(d[0] ** 2, floor),
            "eta_c": _positive_start(c[0] ** 2, floor / float(np.max(shear_rate)))}


BINGHAM = Model(
    id="bingham",
    title="Bingham plastic",
    target="shear_stress",
    parameters=(_yield_stress_parameter(),
                ModelParameter("eta_p", "Pa·s", 0.0, math.inf, "plastic viscosity", log_scale=True)),
    function=bingham,
    guess=guess_bingham,
    equation="τ = τ_y + η_p·γ̇  (τ > τ_y)",
    reference="E. C. Bingham, Bull. Bur. Stand. 13 (1916) 309; Fluidity and Plasticity, McGraw-Hill (1922)",
    jacobian=bingham_jacobian,
)

HERSCHEL_BULKLEY = Model(
    id="herschel_bulkley",
    title="Herschel–Bulkley",
    target="shear_stress",
    parameters=(_yield_stress_parameter(),
                ModelParameter("K", "Pa·s^n", 0.0, math.inf, "consistency index", log_scale=True),
                ModelParameter("n", "1", 0.0, math.inf, "flow behaviour index (n < 1: shear thinning)",
                               "the measured range is too short to fix the exponent", log_scale=True)),
    function=herschel_bulkley,
    guess=guess_herschel_bulkley,
    equation="τ = τ_y + K·γ̇ⁿ  (τ > τ_y)",
    reference="W. H. Herschel & R. Bulkley, Kolloid-Z. 39 (1926) 291, doi:10.1007/BF01432034",
    jacobian=herschel_bulkley_jacobian,
)

CASSON = Model(
    id="casson",
    title="Casson",
    target="shear_stress",
    parameters=(_yield_stress_parameter(),
                ModelParameter("eta_c", "Pa·s", 0.0, math.inf, "Casson viscosity", log_scale=True)),
    function=casson,
    guess=guess_casson,
    equation="√τ = √τ_y + √(η_c·γ̇)  (τ > τ_y)",
    reference="N. Casson, in Rheology of Disperse Systems (C. C. Mill, ed.), Pergamon, London (1959) 84",
    jacobian=casson_jacobian,
)


@hookimpl
def gammadot_models() -> list[Model]:
    """Provide the Bingham, Herschel–Bulkley and Casson models."""
    return [BINGHAM, HERSCHEL_BULKLEY, CASSON]

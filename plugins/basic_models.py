"""Built-in models without plateaus or yield stress: Newtonian and power law (Ostwald–de Waele).

Both are fitted to viscosity against shear rate. In log space that is the same fit as stress
against rate (ln τ = ln η + ln γ̇), and both are linear in (ln η, ln K, n): the data-driven start
is already the least-squares answer.
"""

from __future__ import annotations

import math

import numpy as np

from gammadot.hookspecs import hookimpl
from gammadot.records import Model, ModelParameter
from gammadot.starting_values import geometric_mean, log_line


def newtonian(shear_rate: np.ndarray, eta: float) -> np.ndarray:
    """Newtonian viscosity η(γ̇) = η (Pa·s), independent of shear rate (1/s)."""
    return np.full_like(np.asarray(shear_rate, dtype=float), eta)


def newtonian_jacobian(shear_rate: np.ndarray, eta: float) -> dict[str, np.ndarray]:
    """∂η/∂η = 1."""
    return {"eta": np.ones_like(np.asarray(shear_rate, dtype=float))}


def guess_newtonian(shear_rate: np.ndarray, viscosity: np.ndarray) -> dict[str, float]:
    """Start at the geometric mean viscosity (the least-squares answer in log space)."""
    return {"eta": geometric_mean(viscosity)}


def power_law(shear_rate: np.ndarray, K: float, n: float) -> np.ndarray:
    """Power-law viscosity η = K γ̇^(n−1); K in Pa·sⁿ, n dimensionless, γ̇ in 1/s."""
    return K * np.power(shear_rate, n - 1.0)


def power_law_jacobian(shear_rate: np.ndarray, K: float, n: float) -> dict[str, np.ndarray]:
    """∂η/∂K = γ̇^(n−1); ∂η/∂n = K γ̇^(n−1) ln γ̇."""
    base = np.power(shear_rate, n - 1.0)
    return {"K": base, "n": K * base * np.log(shear_rate)}


def guess_power_law(shear_rate: np.ndarray, viscosity: np.ndarray) -> dict[str, float]:
    """Start from the straight line through ln η against ln γ̇ (slope n − 1)."""
    slope, intercept = log_line(shear_rate, viscosity)
    return {"K": math.exp(intercept), "n": float(np.clip(slope + 1.0, 0.02, 3.0))}


NEWTONIAN = Model(
    id="newtonian",
    title="Newtonian",
    target="viscosity",
    parameters=(ModelParameter("eta", "Pa·s", 0.0, math.inf, "viscosity", log_scale=True),),
    function=newtonian,
    guess=guess_newtonian,
    equation="τ = η·γ̇",
    reference="Newton's law of viscosity; Bird, Stewart & Lightfoot, Transport Phenomena, 2nd ed., eq. 1.1-2",
    jacobian=newtonian_jacobian,
)

POWER_LAW = Model(
    id="power_law",
    title="Power law (Ostwald–de Waele)",
    target="viscosity",
    parameters=(
        ModelParameter("K", "Pa·s^n", 0.0, math.inf, "consistency index", log_scale=True),
        ModelParameter("n", "1", 0.0, math.inf, "flow behaviour index (n < 1: shear thinning)",
                       "the measured range is too short to fix the slope", log_scale=True),
    ),
    function=power_law,
    guess=guess_power_law,
    equation="τ = K·γ̇ⁿ  (η = K·γ̇ⁿ⁻¹)",
    reference="W. Ostwald, Kolloid-Z. 36 (1925) 99; A. de Waele, J. Oil Colour Chem. Assoc. 6 (1923) 33; "
              "Bird, Armstrong & Hassager, Dynamics of Polymeric Liquids, Vol. 1, 2nd ed., §4.1",
    jacobian=power_law_jacobian,
)


@hookimpl
def gammadot_models() -> list[Model]:
    """Provide the Newtonian and power-law models."""
    return [NEWTONIAN, POWER_LAW]

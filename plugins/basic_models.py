"""Built-in models: Newtonian and power law (Ostwald–de Waele), fitted as viscosity.

Both are fitted to viscosity against shear rate in log space; for these models that is the
same fit as stress against rate (ln τ = ln η + ln γ̇).
"""

from __future__ import annotations

import numpy as np

from gammadot.hookspecs import hookimpl
from gammadot.records import Model, ModelParameter


def newtonian(shear_rate: np.ndarray, eta: float) -> np.ndarray:
    """Newtonian viscosity η(γ̇) = η (Pa·s), independent of shear rate (1/s)."""
    return np.full_like(np.asarray(shear_rate, dtype=float), eta)


def guess_newtonian(shear_rate: np.ndarray, viscosity: np.ndarray) -> dict[str, float]:
    """Start at the geometric mean viscosity (the least-squares answer in log space)."""
    return {"eta": float(np.exp(np.mean(np.log(viscosity))))}


def power_law(shear_rate: np.ndarray, K: float, n: float) -> np.ndarray:
    """Power-law viscosity η = K γ̇^(n−1); K in Pa·sⁿ, n dimensionless, γ̇ in 1/s."""
    return K * np.power(shear_rate, n - 1.0)


def guess_power_law(shear_rate: np.ndarray, viscosity: np.ndarray) -> dict[str, float]:
    """Start from the straight line through ln η against ln γ̇ (slope n − 1)."""
    if len(shear_rate) < 2 or np.ptp(np.log(shear_rate)) == 0:
        return {"K": float(np.exp(np.mean(np.log(viscosity)))), "n": 1.0}
    slope, intercept = np.polyfit(np.log(shear_rate), np.log(viscosity), 1)
    return {"K": float(np.exp(intercept)), "n": float(np.clip(slope + 1.0, 0.01, 2.0))}


NEWTONIAN = Model(
    id="newtonian",
    title="Newtonian",
    target="viscosity",
    parameters=(ModelParameter("eta", "Pa·s", 0.0, np.inf, "viscosity"),),
    function=newtonian,
    guess=guess_newtonian,
    equation="τ = η·γ̇",
    reference="Newton's law of viscosity; Bird, Stewart & Lightfoot, Transport Phenomena, 2nd ed., eq. 1.1-2",
)

POWER_LAW = Model(
    id="power_law",
    title="Power law (Ostwald–de Waele)",
    target="viscosity",
    parameters=(
        ModelParameter("K", "Pa·s^n", 0.0, np.inf, "consistency index"),
        ModelParameter("n", "1", 0.0, 3.0, "flow behaviour index (n < 1: shear thinning)"),
    ),
    function=power_law,
    guess=guess_power_law,
    equation="τ = K·γ̇ⁿ  (η = K·γ̇ⁿ⁻¹)",
    reference="Bird, Armstrong & Hassager, Dynamics of Polymeric Liquids, Vol. 1, 2nd ed., §4.1",
)


@hookimpl
def gammadot_models() -> list[Model]:
    """Provide the Newtonian and power-law models."""
    return [NEWTONIAN, POWER_LAW]

"""Built-in shear-thinning models with Newtonian plateaus: Cross, Carreau, Carreau–Yasuda, Sisko.

All four are fitted to viscosity against shear rate. Each is also an lmfit model
(``gammadot.lmfit_models.as_lmfit_model(CARREAU)``), so it can be used in plain lmfit code.

Numerics: (λγ̇)^a is written as exp(a·ln λγ̇), ln(1 + (λγ̇)^a) as logaddexp(0, a·ln λγ̇) and
(λγ̇)^a/(1 + (λγ̇)^a) as the logistic function, so neither the model nor its Jacobian
overflows for extreme trial values during a fit.

Starting values: a deterministic global stage. Each model is η = η∞ + (η0 − η∞)·g(γ̇) with g
set by (λ, n[, a]) or (λ, m); Sisko is η∞ + K·g with g = γ̇ⁿ⁻¹. On a grid of those nonlinear
parameters, the two linear ones are solved exactly with relative weights
(:func:`gammadot.starting_values.fit_scaled_offset`) and the grid point with the smallest
relative misfit starts the local fit.
Literature references as in the shared REFERENCE §6 (DOIs from memory, not verified here).
"""

from __future__ import annotations

import math

import numpy as np

from gammadot.hookspecs import hookimpl
from gammadot.records import Model, ModelParameter
from gammadot.starting_values import fit_scaled_offset, time_constant_grid

ETA0_HINT = "the curve does not reach its lower (zero-shear) Newtonian plateau in the measured range"
ETA_INF_HINT = "the curve does not reach its upper (high-shear) Newtonian plateau in the measured range"
LAMBDA_HINT = "the onset of shear thinning is not resolved in the measured range"
EXPONENTS = np.linspace(0.05, 0.95, 8)  # grid of n (Carreau, Carreau–Yasuda, Sisko)
CROSS_EXPONENTS = np.linspace(0.2, 1.1, 8)  # grid of m
YASUDA_A = np.array([0.5, 2.0])  # grid of a: broad transitions, and Carreau's
ETA_INF_START = 0.1  # η∞ starts at least at this fraction of the lowest viscosity (off its bound 0)


def _logistic(s: np.ndarray) -> np.ndarray:
    """1/(1 + e^(−s)), without overflow."""
    return 0.5 * (1.0 + np.tanh(0.5 * s))


def _plateau_parameters(exponent: ModelParameter, *extra: ModelParameter) -> tuple[ModelParameter, ...]:
    return (ModelParameter("eta0", "Pa·s", 0.0, math.inf, "zero-shear viscosity", ETA0_HINT, log_scale=True),
            ModelParameter("eta_inf", "Pa·s", 0.0, math.inf, "infinite-shear viscosity", ETA_INF_HINT),
            ModelParameter("lam", "s", 0.0, math.inf, "time constant (1/λ ≈ rate where thinning sets in)",
                           LAMBDA_HINT, log_scale=True),
            *extra, exponent)


# ------------------------------------------------------------------------------ Carreau–Yasuda

def carreau_yasuda(shear_rate: np.ndarray, eta0: float, eta_inf: float, lam: float, a: float,
                   n: float) -> np.ndarray:
    """η = η∞ + (η0 − η∞)[1 + (λγ̇)^a]^((n−1)/a) in Pa·s; λ in s, a and n dimensionless."""
    log_b = np.logaddexp(0.0, a * (np.log(lam) + np.log(np.asarray(shear_rate, dtype=float))))
    return eta_inf + (eta0 - eta_inf) * np.exp((n - 1.0) / a * log_b)


def carreau_yasuda_jacobian(shear_rate: np.ndarray, eta0: float, eta_inf: float, lam: float, a: float,
                            n: float) -> dict[str, np.ndarray]:
    """Partial derivatives of η; with s = a·ln λγ̇, L = ln(1 + e^s), q = e^s/(1 + e^s), g = e^((n−1)L/a):
    ∂η0 = g, ∂η∞ = 1 − g, ∂λ = Δ g (n−1) q/λ, ∂n = Δ g L/a, ∂a = Δ g (n−1)(q ln λγ̇/a − L/a²)."""
    log_x = (np.log(lam) + np.log(np.asarray(shear_rate, dtype=float)))
    s = a * log_x
    log_b, q = np.logaddexp(0.0, s), _logistic(s)
    g = np.exp((n - 1.0) / a * log_b)
    dg = (eta0 - eta_inf) * g
    return {"eta0": g, "eta_inf": 1.0 - g, "lam": dg * (n - 1.0) * q / lam, "n": dg * log_b / a,
            "a": dg * (n - 1.0) * (q * log_x / a - log_b / (a * a))}


def _plateau_grid_start(shear_rate: np.ndarray, viscosity: np.ndarray, a_values: np.ndarray) -> dict[str, float]:
    """Best grid point over (λ, n, a) with (η0, η∞) solved exactly (Carreau: a = 2 only)."""
    lams = time_constant_grid(shear_rate)
    log_x = np.log(lams[:, None] * shear_rate[None, :])  # (Λ, N)
    log_b = np.logaddexp(0.0, a_values[:, None, None] * log_x[None, :, :])  # (A, Λ, N)
    power = (EXPONENTS[None, :] - 1.0) / a_values[:, None]  # (A, E)
    basis = np.exp(power[:, None, :, None] * log_b[:, :, None, :])  # (A, Λ, E, N)
    c, d, misfit = fit_scaled_offset(basis.reshape(-1, len(shear_rate)), viscosity)
    i = int(np.argmin(misfit))
    a_i, lam_i, n_i = np.unravel_index(i, basis.shape[:3])
    floor = ETA_INF_START * float(np.min(viscosity))
    return {"eta0": float(c[i] + d[i]), "eta_inf": max(float(d[i]), floor), "lam": float(lams[lam_i]),
            "a": float(a_values[a_i]), "n": float(EXPONENTS[n_i])}


def guess_carreau_yasuda(shear_rate: np.ndarray, viscosity: np.ndarray) -> dict[str, float]:
    """Global stage over (λ, n, a ∈ {0.5, 2}); see the module docstring."""
    return _plateau_grid_start(shear_rate, viscosity, YASUDA_A)


# ------------------------------------------------------------------------------ Carreau

def carreau(shear_rate: np.ndarray, eta0: float, eta_inf: float, lam: float, n: float) -> np.ndarray:
    """η = η∞ + (η0 − η∞)[1 + (λγ̇)²]^((n−1)/2) in Pa·s; λ in s, n dimensionless."""
    return carreau_yasuda(shear_rate, eta0, eta_inf, lam, 2.0, n)


def carreau_jacobian(shear_rate: np.ndarray, eta0: float, eta_inf: float, lam: float, n: float) -> dict[str, np.ndarray]:
    """The Carreau–Yasuda derivatives at a = 2 (without ∂a)."""
    parts = carreau_yasuda_jacobian(shear_rate, eta0, eta_inf, lam, 2.0, n)
    del parts["a"]
    return parts


def guess_carreau(shear_rate: np.ndarray, viscosity: np.ndarray) -> dict[str, float]:
    """Global stage over (λ, n); see the module docstring."""
    start = _plateau_grid_start(shear_rate, viscosity, np.array([2.0]))
    del start["a"]
    return start


# ------------------------------------------------------------------------------ Cross

def cross(shear_rate: np.ndarray, eta0: float, eta_inf: float, lam: float, m: float) -> np.ndarray:
    """η = η∞ + (η0 − η∞)/(1 + (λγ̇)^m) in Pa·s; λ in s, m dimensionless."""
    g = _logistic(-m * (np.log(lam) + np.log(np.asarray(shear_rate, dtype=float))))
    return eta_inf + (eta0 - eta_inf) * g


def cross_jacobian(shear_rate: np.ndarray, eta0: float, eta_inf: float, lam: float, m: float) -> dict[str, np.ndarray]:
    """With s = m·ln λγ̇ and g = 1/(1 + e^s): ∂η0 = g, ∂η∞ = 1 − g, ∂λ = −Δ g(1−g) m/λ,
    ∂m = −Δ g(1−g) ln λγ̇."""
    log_x = (np.log(lam) + np.log(np.asarray(shear_rate, dtype=float)))
    g = _logistic(-m * log_x)
    slope = -(eta0 - eta_inf) * g * (1.0 - g)
    return {"eta0": g, "eta_inf": 1.0 - g, "lam": slope * m / lam, "m": slope * log_x}


def guess_cross(shear_rate: np.ndarray, viscosity: np.ndarray) -> dict[str, float]:
    """Global stage over (λ, m); see the module docstring."""
    lams = time_constant_grid(shear_rate)
    log_x = np.log(lams[:, None] * shear_rate[None, :])
    basis = _logistic(-CROSS_EXPONENTS[None, :, None] * log_x[:, None, :]).reshape(-1, len(shear_rate))
    c, d, misfit = fit_scaled_offset(basis, viscosity)
    i = int(np.argmin(misfit))
    floor = ETA_INF_START * float(np.min(viscosity))
    return {"eta0": float(c[i] + d[i]), "eta_inf": float(d[i]) if d[i] > floor else floor,
            "lam": float(lams[i // len(CROSS_EXPONENTS)]), "m": float(CROSS_EXPONENTS[i % len(CROSS_EXPONENTS)])}


# ------------------------------------------------------------------------------ Sisko

def sisko(shear_rate: np.ndarray, eta_inf: float, K: float, n: float) -> np.ndarray:
    """η = η∞ + K γ̇^(n−1) in Pa·s; K in Pa·sⁿ."""
    return eta_inf + K * np.power(shear_rate, n - 1.0)


def sisko_jacobian(shear_rate: np.ndarray, eta_inf: float, K: float, n: float) -> dict[str, np.ndarray]:
    """∂η∞ = 1; ∂K = γ̇^(n−1); ∂n = K γ̇^(n−1) ln γ̇."""
    power = np.power(shear_rate, n - 1.0)
    return {"eta_inf": np.ones_like(power), "K": power, "n": K * power * np.log(shear_rate)}


def guess_sisko(shear_rate: np.ndarray, viscosity: np.ndarray) -> dict[str, float]:
    """Global stage over n with (K, η∞) solved exactly."""
    basis = np.power(shear_rate[None, :], EXPONENTS[:, None] - 1.0)
    c, d, misfit = fit_scaled_offset(basis, viscosity)
    i = int(np.argmin(misfit))
    floor = ETA_INF_START * float(np.min(viscosity))
    return {"eta_inf": float(d[i]) if d[i] > floor else floor, "K": float(c[i]), "n": float(EXPONENTS[i])}


_N_THINNING = "power-law index of the thinning region (n < 1: shear thinning)"
_SHAPE_HINT = "the measured range is too short to fix it"

CROSS = Model(
    id="cross",
    title="Cross",
    target="viscosity",
    parameters=_plateau_parameters(ModelParameter("m", "1", 0.0, math.inf, "rate constant (thinning slope −m)",
                                                  _SHAPE_HINT, log_scale=True)),
    function=cross,
    guess=guess_cross,
    equation="η = η∞ + (η0 − η∞)/(1 + (λγ̇)^m)",
    reference="M. M. Cross, J. Colloid Sci. 20 (1965) 417, doi:10.1016/0095-8522(65)90022-X",
    jacobian=cross_jacobian,
)

CARREAU = Model(
    id="carreau",
    title="Carreau",
    target="viscosity",
    parameters=_plateau_parameters(ModelParameter("n", "1", 0.0, math.inf, _N_THINNING, _SHAPE_HINT, log_scale=True)),
    function=carreau,
    guess=guess_carreau,
    equation="η = η∞ + (η0 − η∞)·[1 + (λγ̇)²]^((n−1)/2)",
    reference="P. J. Carreau, Trans. Soc. Rheol. 16 (1972) 99, doi:10.1122/1.549276",
    jacobian=carreau_jacobian,
)

CARREAU_YASUDA = Model(
    id="carreau_yasuda",
    title="Carreau–Yasuda",
    target="viscosity",
    parameters=_plateau_parameters(
        ModelParameter("n", "1", 0.0, math.inf, _N_THINNING, _SHAPE_HINT, log_scale=True),
        ModelParameter("a", "1", 0.0, math.inf, "transition sharpness (a = 2: Carreau)",
                       "the shape of the transition is not resolved by the data", log_scale=True)),
    function=carreau_yasuda,
    guess=guess_carreau_yasuda,
    equation="η = η∞ + (η0 − η∞)·[1 + (λγ̇)^a]^((n−1)/a)",
    reference="K. Yasuda, R. C. Armstrong & R. E. Cohen, Rheol. Acta 20 (1981) 163, doi:10.1007/BF01513059",
    jacobian=carreau_yasuda_jacobian,
)

SISKO = Model(
    id="sisko",
    title="Sisko",
    target="viscosity",
    parameters=(ModelParameter("eta_inf", "Pa·s", 0.0, math.inf, "infinite-shear viscosity", ETA_INF_HINT),
                ModelParameter("K", "Pa·s^n", 0.0, math.inf, "consistency index", log_scale=True),
                ModelParameter("n", "1", 0.0, math.inf, "flow behaviour index (n < 1: shear thinning)",
                               _SHAPE_HINT, log_scale=True)),
    function=sisko,
    guess=guess_sisko,
    equation="η = η∞ + K·γ̇ⁿ⁻¹",
    reference="A. W. Sisko, Ind. Eng. Chem. 50 (1958) 1789, doi:10.1021/ie50588a042",
    jacobian=sisko_jacobian,
)


@hookimpl
def gammadot_models() -> list[Model]:
    """Provide the Cross, Carreau, Carreau–Yasuda and Sisko models."""
    return [CROSS, CARREAU, CARREAU_YASUDA, SISKO]

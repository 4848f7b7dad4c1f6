"""The nine built-in flow models: formulas, analytic Jacobians, contract names, trade facts.

Checks against: the η(γ̇) check table of the shared REFERENCE.md §6 (values computed there
independently of this code), scipy.differentiate.jacobian (an independent numerical
derivative) and facts of the trade (common practice).
"""

from __future__ import annotations

import math
from decimal import Decimal

import numpy as np
import pytest
from scipy.differentiate import jacobian

from gammadot.plugins.basic_models import NEWTONIAN, POWER_LAW
from gammadot.plugins.plateau_models import CARREAU, CARREAU_YASUDA, CROSS, SISKO
from gammadot.plugins.yield_stress_models import BINGHAM, CASSON, HERSCHEL_BULKLEY

ALL = (NEWTONIAN, POWER_LAW, BINGHAM, HERSCHEL_BULKLEY, CASSON, CROSS, CARREAU, CARREAU_YASUDA, SISKO)

# PRODUCT.md "Model ids and parameter names (SI units)": the public contract.
CONTRACT = {
    "newtonian": ("eta",), "power_law": ("K", "n"), "bingham": ("tau_y", "eta_p"),
    "herschel_bulkley": ("tau_y", "K", "n"), "casson": ("tau_y", "eta_c"),
    "cross": ("eta0", "eta_inf", "lam", "m"), "carreau": ("eta0", "eta_inf", "lam", "n"),
    "carreau_yasuda": ("eta0", "eta_inf", "lam", "a", "n"), "sisko": ("eta_inf", "K", "n"),
}

# REFERENCE.md §6, "Viscosity check values η(γ̇) in Pa·s", copied as printed (strings, so the
# tolerance can be half a unit of the last printed digit). Parameter sets as given there.
RATES = ("0.01", "0.1", "1", "10", "100", "1000")
TABLE = {
    ("carreau", (("eta0", 10), ("eta_inf", 0), ("lam", 1), ("n", 0.4))):
        ("9.9997", "9.9701935", "8.122524", "2.5043994", "0.63093842", "0.15848927"),
    ("carreau_yasuda", (("eta0", 10), ("eta_inf", 1e-3), ("lam", 1), ("a", 2), ("n", 0.4))):
        ("9.9997", "9.9701965", "8.1227117", "2.5051489", "0.63187532", "0.15947342"),
    ("carreau_yasuda", (("eta0", 10), ("eta_inf", 0), ("lam", 1), ("a", 0.5), ("n", 0.4))):
        ("8.9192591", "7.1912228", "4.3527528", "1.8063535", "0.5627672", "0.15267745"),
    ("cross", (("eta0", 10), ("eta_inf", 1e-3), ("lam", 1), ("m", 0.6))):
        ("9.4065499", "7.9926007", "5.0005", "2.0083993", "0.59445008", "0.15700102"),
    ("sisko", (("eta_inf", 1e-3), ("K", 2), ("n", 0.5))):
        ("20.001", "6.3255553", "2.001", "0.63345553", "0.201", "0.064245553"),
    ("power_law", (("K", 2), ("n", 0.5))):
        ("20", "6.3245553", "2", "0.63245553", "0.2", "0.063245553"),
    ("bingham", (("tau_y", 5), ("eta_p", 0.1))):
        ("500.1", "50.1", "5.1", "0.6", "0.15", "0.105"),
    ("herschel_bulkley", (("tau_y", 5), ("K", 2), ("n", 0.5))):
        ("520", "56.324555", "7", "1.1324555", "0.25", "0.068245553"),
    ("casson", (("tau_y", 5), ("eta_c", 0.1))):
        ("514.24214", "54.572136", "6.5142136", "1.0472136", "0.29142136", "0.14972136"),
}
BY_ID = {m.id: m for m in ALL}


def _viscosity(model, rate, params):
    value = model.function(np.asarray(rate, float), **params)
    return value / rate if model.target == "shear_stress" else value


def test_ids_and_parameter_names_follow_the_contract() -> None:
    assert {m.id: tuple(p.name for p in m.parameters) for m in ALL} == CONTRACT
    for model in ALL:
        assert model.equation and model.reference and model.jacobian is not None
        assert model.target == ("shear_stress" if model.id in ("bingham", "herschel_bulkley", "casson")
                                else "viscosity")


@pytest.mark.parametrize("key", list(TABLE), ids=lambda k: f"{k[0]}-{dict(k[1])}")
def test_functions_reproduce_the_reference_check_table(key) -> None:
    """REFERENCE.md §6 check values, to half a unit in the last printed digit."""
    model_id, params = key
    for rate_text, printed in zip(RATES, TABLE[key]):
        tolerance = 0.5 * 10.0 ** Decimal(printed).as_tuple().exponent
        assert _viscosity(BY_ID[model_id], float(rate_text), dict(params)) == pytest.approx(float(printed),
                                                                                          abs=tolerance)


POINTS = {  # parameter sets across the space, including η∞ = 0 and τ_y = 0 edges
    "newtonian": [{"eta": 0.05}],
    "power_law": [{"K": 2.0, "n": 0.5}, {"K": 0.01, "n": 1.4}],
    "bingham": [{"tau_y": 5.0, "eta_p": 0.1}, {"tau_y": 0.0, "eta_p": 2.0}],
    "herschel_bulkley": [{"tau_y": 5.0, "K": 2.0, "n": 0.5}, {"tau_y": 0.3, "K": 20.0, "n": 0.2}],
    "casson": [{"tau_y": 5.0, "eta_c": 0.1}, {"tau_y": 120.0, "eta_c": 3.0}],
    "cross": [{"eta0": 10.0, "eta_inf": 1e-3, "lam": 1.0, "m": 0.6}, {"eta0": 3e3, "eta_inf": 0.0, "lam": 40.0, "m": 0.9}],
    "carreau": [{"eta0": 10.0, "eta_inf": 0.01, "lam": 1.0, "n": 0.4}, {"eta0": 500.0, "eta_inf": 0.0, "lam": 0.02, "n": 0.15}],
    "carreau_yasuda": [{"eta0": 10.0, "eta_inf": 1e-3, "lam": 1.0, "a": 2.0, "n": 0.4},
                       {"eta0": 80.0, "eta_inf": 0.2, "lam": 5.0, "a": 0.6, "n": 0.3}],
    "sisko": [{"eta_inf": 1e-3, "K": 2.0, "n": 0.5}, {"eta_inf": 0.4, "K": 30.0, "n": 0.25}],
}


@pytest.mark.parametrize("model", ALL, ids=lambda m: m.id)
def test_analytic_jacobians_match_scipy_numerical_derivatives(model) -> None:
    """Each model's ∂f/∂p against scipy.differentiate.jacobian (Richardson-extrapolated central
    differences), in relative steps, on rates from 10⁻³ to 10⁴ 1/s."""
    rate = np.geomspace(1e-3, 1e4, 15)
    names = [p.name for p in model.parameters]
    for params in POINTS[model.id]:
        p0 = np.array([params[n] for n in names])
        scale = np.where(p0 != 0, np.abs(p0), 1.0)

        def f(u):  # u: (k, ...) relative parameters → (n_rates, ...)
            flat = u.reshape(len(names), -1)
            out = [model.function(rate, **dict(zip(names, flat[:, i] * scale))) for i in range(flat.shape[1])]
            return np.stack(out, axis=-1).reshape((len(rate),) + u.shape[1:])

        steps = np.where(p0 == 0, 1, 0)  # a parameter at its bound 0 is differentiated one-sided
        # one order-8 difference with a 1 % step: iterating to smaller steps only adds round-off
        numeric = jacobian(f, p0 / scale, initial_step=1e-2, step_direction=steps, maxiter=1).df / scale
        analytic = model.jacobian(rate, **params)
        for j, name in enumerate(names):
            expected = np.broadcast_to(analytic[name], rate.shape)
            assert expected == pytest.approx(numeric[:, j], rel=1e-6, abs=1e-7 * np.max(np.abs(numeric[:, j]))), name


# --------------------------------------------------------------- facts of the trade (common practice)

RATE = np.geomspace(1e-3, 1e4, 30)


def test_herschel_bulkley_with_n_one_is_bingham() -> None:
    """Common practice: Herschel–Bulkley with n = 1 is the Bingham plastic (K plays η_p)."""
    assert HERSCHEL_BULKLEY.function(RATE, tau_y=7.5, K=0.3, n=1.0) == pytest.approx(
        BINGHAM.function(RATE, tau_y=7.5, eta_p=0.3), rel=1e-14)


def test_carreau_with_n_one_is_newtonian() -> None:
    """Common practice: Carreau (and Carreau–Yasuda) with n = 1 is Newtonian at η0, whatever λ, η∞, a."""
    for lam, eta_inf in ((1e-3, 0.0), (1.0, 0.2), (1e3, 5.0)):
        assert CARREAU.function(RATE, eta0=3.0, eta_inf=eta_inf, lam=lam, n=1.0) == pytest.approx(3.0, rel=1e-14)
        assert CARREAU_YASUDA.function(RATE, eta0=3.0, eta_inf=eta_inf, lam=lam, a=0.7, n=1.0) == pytest.approx(
            3.0, rel=1e-14)


def test_carreau_yasuda_with_a_two_is_carreau() -> None:
    """Yasuda, Armstrong & Cohen (1981): a = 2 gives back Carreau's form (by construction)."""
    assert CARREAU_YASUDA.function(RATE, eta0=40.0, eta_inf=0.01, lam=2.0, a=2.0, n=0.35) == pytest.approx(
        CARREAU.function(RATE, eta0=40.0, eta_inf=0.01, lam=2.0, n=0.35), rel=1e-13)


def test_cross_is_halfway_between_its_plateaus_at_lambda_rate_one() -> None:
    """Common practice: 1/λ of the Cross model is the rate where η = (η0 + η∞)/2."""
    for m in (0.4, 0.8, 1.0):
        assert CROSS.function(np.array([1 / 2.5]), eta0=12.0, eta_inf=0.5, lam=2.5, m=m)[0] == pytest.approx(6.25)


def test_models_reduce_to_their_simpler_relatives() -> None:
    """Common practice: Sisko with η∞ = 0 is the power law; Casson with τ_y = 0 is Newtonian at η_c;
    the power law with n = 1 is Newtonian at K; Bingham with τ_y = 0 is Newtonian at η_p."""
    assert SISKO.function(RATE, eta_inf=0.0, K=2.0, n=0.5) == pytest.approx(POWER_LAW.function(RATE, K=2.0, n=0.5))
    assert CASSON.function(RATE, tau_y=0.0, eta_c=0.3) / RATE == pytest.approx(0.3, rel=1e-14)
    assert POWER_LAW.function(RATE, K=0.7, n=1.0) == pytest.approx(NEWTONIAN.function(RATE, eta=0.7))
    assert BINGHAM.function(RATE, tau_y=0.0, eta_p=0.3) / RATE == pytest.approx(0.3, rel=1e-14)


def test_models_do_not_overflow_at_extreme_trial_values() -> None:
    """During a fit λγ̇ can reach 10³⁰⁰: the plateau models stay finite (stable forms)."""
    huge = np.array([1e-300, 1.0, 1e300])
    for model, params in ((CROSS, {"eta0": 1.0, "eta_inf": 0.0, "lam": 1e10, "m": 0.8}),
                          (CARREAU_YASUDA, {"eta0": 1.0, "eta_inf": 0.0, "lam": 1e10, "a": 3.0, "n": 0.3})):
        values = model.function(huge, **params)
        assert np.all(np.isfinite(values)) and values[0] == pytest.approx(1.0)
        assert all(np.all(np.isfinite(v)) for v in model.jacobian(huge, **params).values())
    assert math.isfinite(float(CARREAU.function(np.array([1e300]), eta0=1.0, eta_inf=0.0, lam=1e300, n=0.2)[0]))

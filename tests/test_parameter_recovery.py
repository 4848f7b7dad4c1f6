"""Parameter recovery: synthetic flow curves across each model's parameter space, with 1–2 %
multiplicative noise, give their parameters back within tolerances derived from the noise.

Tolerance: the standard error a log-space least-squares fit must show for the true parameters
and the noise level, σ_p = σ·√diag((JᵀJ)⁻¹) with J = ∂ln f/∂p at the truth (linearised least
squares; Seber & Wild, *Nonlinear Regression*, Wiley 1989, §2.1) — computed from the truth, not
from the fit. Every parameter must land within 5 σ_p (a normal deviate beyond 5σ has
probability 6·10⁻⁷), and the engine's own standard error must agree with σ_p within a factor 2
(it estimates the same quantity from the residuals of 40 points).

Curves: tests/flow_curves.py (each parameter visible in the measured range; examples whose
truth-derived σ_p exceeds 20 % of a parameter are skipped as not identifiable by design).
Hypothesis draws the parameters, the noise level and the noise seed; ``derandomize=True`` makes
every run test the same examples.
"""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import HealthCheck, assume, given, settings
from hypothesis import strategies as st

from gammadot.fitting import fit_model

from flow_curves import GENERATORS, RATES, expected_stderr, noisy

EXAMPLES = 12


def _models(registry):
    return {model_id: registry.models[model_id].record for model_id in GENERATORS}


@pytest.fixture(scope="module")
def models():
    from gammadot.plugin_manager import build_plugin_manager
    from gammadot.registry import build_registry

    return _models(build_registry(build_plugin_manager(entry_points=False)))


@pytest.mark.parametrize("model_id", list(GENERATORS))
def test_parameters_come_back_within_the_noise(model_id: str, models) -> None:
    model = models[model_id]
    size, make = GENERATORS[model_id]

    @settings(max_examples=EXAMPLES, derandomize=True, deadline=None, database=None,
              suppress_health_check=[HealthCheck.too_slow, HealthCheck.filter_too_much])
    @given(u=st.lists(st.floats(0.0, 1.0), min_size=size, max_size=size),
           noise=st.floats(0.01, 0.02), seed=st.integers(0, 2**32 - 1))
    def check(u, noise, seed):
        truth = make(u)
        sigma = expected_stderr(model, truth, noise)
        # only curves whose data determine every parameter (σ_p below 20 % of the value): in a
        # corner of the space (a broad Carreau–Yasuda transition between close plateaus) the
        # truth itself is not identifiable, and the engine rightly says so (test_identifiability)
        assume(all(sigma[j] < 0.2 * abs(truth[p.name]) for j, p in enumerate(model.parameters)))
        values = noisy(model.function(RATES, **truth), noise, seed)
        fit = fit_model(model, RATES, values)
        assert fit.success, fit.message
        for j, spec in enumerate(model.parameters):
            estimate = fit.estimate(spec.name)
            assert estimate is not None and estimate.value is not None, fit.message
            deviation = abs(estimate.value - truth[spec.name]) / sigma[j]
            assert deviation < 5.0, (spec.name, truth, estimate, sigma[j])
            assert 0.5 < estimate.stderr / sigma[j] < 2.0, (spec.name, estimate.stderr, sigma[j])

    check()


def test_a_newtonian_fluid_gives_n_one_in_the_power_law(models) -> None:
    """Common practice: a Newtonian liquid fitted with the power law gives n = 1 and K = η.
    Tolerance: 5 standard errors derived from the noise as above."""
    eta, noise = 0.0485, 0.015
    values = noisy(np.full_like(RATES, eta), noise, seed=11)
    fit = fit_model(models["power_law"], RATES, values)
    sigma = expected_stderr(models["power_law"], {"K": eta, "n": 1.0}, noise)
    assert abs(fit.value("n") - 1.0) < 5 * sigma[1] and abs(fit.value("K") - eta) < 5 * sigma[0]


def test_herschel_bulkley_on_bingham_data_gives_n_one_and_the_bingham_values(models) -> None:
    """Common practice: HB with n = 1 is Bingham, so HB fitted to a Bingham plastic returns
    n ≈ 1, τ_y and K = η_p, each within 5 noise-derived standard errors."""
    truth, noise = {"tau_y": 12.0, "eta_p": 0.08}, 0.015
    stress = noisy(models["bingham"].function(RATES, **truth), noise, seed=5)
    fit = fit_model(models["herschel_bulkley"], RATES, stress)
    sigma = expected_stderr(models["herschel_bulkley"], {"tau_y": 12.0, "K": 0.08, "n": 1.0}, noise)
    for j, (name, value) in enumerate((("tau_y", 12.0), ("K", 0.08), ("n", 1.0))):
        assert abs(fit.value(name) - value) < 5 * sigma[j], name

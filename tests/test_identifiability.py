"""Parameters the data cannot determine are reported as not identified (value null, reason).

Cases built from the physics of the models (REFERENCE.md §6 Carreau set η0 = 10 Pa·s, λ = 1 s,
n = 0.4): the upper plateau η∞ only shows once (λγ̇)^(n−1) has fallen below η∞/η0, the lower
plateau η0 only below γ̇ ≈ 1/λ; a yield stress only when τ_y is comparable with Kγ̇ⁿ at the
lowest rate. Each expectation is checked against the truth-derived standard error
(tests/flow_curves.expected_stderr), so the test knows independently whether the data could
have determined the parameter.
"""

from __future__ import annotations

import numpy as np
import pytest

from gammadot.fitting import fit_model
from gammadot.identifiability import RELATIVE_STDERR_LIMIT
from gammadot.plugins.plateau_models import CARREAU
from gammadot.plugins.yield_stress_models import HERSCHEL_BULKLEY

from flow_curves import expected_stderr, noisy

CARREAU_TRUTH = {"eta0": 10.0, "eta_inf": 1e-3, "lam": 1.0, "n": 0.4}


def test_carreau_without_its_upper_plateau_reports_eta_inf_not_identified() -> None:
    rate = np.geomspace(0.01, 100.0, 30)  # η(100 1/s) ≈ 0.63 Pa·s: 630 × η∞, no upper plateau
    noise = 0.015
    sigma = expected_stderr(CARREAU, CARREAU_TRUTH, noise, rate)
    assert sigma[1] > 5 * CARREAU_TRUTH["eta_inf"]  # the data cannot fix η∞ (independent check)
    fit = fit_model(CARREAU, rate, noisy(CARREAU.function(rate, **CARREAU_TRUTH), noise, seed=1))
    assert fit.success
    eta_inf = fit.estimate("eta_inf")
    assert eta_inf.value is None and eta_inf.stderr is None
    assert eta_inf.note.startswith("not identified: ") and "upper (high-shear) Newtonian plateau" in eta_inf.note
    assert "eta_inf not identified" in fit.message
    for name in ("eta0", "lam", "n"):  # the rest of the curve is well determined
        assert fit.value(name) is not None, name
        assert abs(fit.value(name) - CARREAU_TRUTH[name]) < 5 * sigma[list(CARREAU_TRUTH).index(name)]


def test_carreau_without_its_lower_plateau_reports_eta0_not_identified() -> None:
    rate = np.geomspace(30.0, 3000.0, 25)  # far above 1/λ = 1 1/s: power-law region only
    truth = dict(CARREAU_TRUTH, eta_inf=0.0)
    noise = 0.015
    sigma = expected_stderr(CARREAU, dict(truth, eta_inf=1e-9), noise, rate)
    assert sigma[0] > RELATIVE_STDERR_LIMIT * truth["eta0"]  # independent: η0 not determinable
    fit = fit_model(CARREAU, rate, noisy(CARREAU.function(rate, **truth), noise, seed=2))
    assert fit.estimate("eta0").value is None
    assert "lower (zero-shear) Newtonian plateau" in fit.estimate("eta0").note


def test_herschel_bulkley_on_a_fluid_without_yield_stress_reports_tau_y_not_identified() -> None:
    rate = np.geomspace(0.1, 1000.0, 30)
    stress = noisy(HERSCHEL_BULKLEY.function(rate, tau_y=0.0, K=5.0, n=0.5), 0.015, seed=3)
    fit = fit_model(HERSCHEL_BULKLEY, rate, stress)
    tau_y = fit.estimate("tau_y")
    assert tau_y.value is None and "consistent with zero" in tau_y.note
    assert fit.value("K") == pytest.approx(5.0, rel=0.05) and fit.value("n") == pytest.approx(0.5, abs=0.02)


def test_a_resolved_yield_stress_is_reported_with_its_standard_error() -> None:
    rate = np.geomspace(0.1, 1000.0, 30)
    truth, noise = {"tau_y": 32.0, "K": 8.5, "n": 0.44}, 0.015
    fit = fit_model(HERSCHEL_BULKLEY, rate, noisy(HERSCHEL_BULKLEY.function(rate, **truth), noise, seed=4))
    sigma = expected_stderr(HERSCHEL_BULKLEY, truth, noise, rate)
    tau_y = fit.estimate("tau_y")
    assert tau_y.value == pytest.approx(32.0, abs=5 * sigma[0]) and 0.5 < tau_y.stderr / sigma[0] < 2
    assert fit.message == "converged"

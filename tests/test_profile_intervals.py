"""Profile-likelihood confidence intervals (``[fit] intervals = "profile"``).

Oracles: the exact t-distribution interval of ordinary linear regression (a power law is a
straight line in log–log axes: scipy.stats.linregress for the estimates and standard errors,
scipy.stats.t for the quantile), where the F-test profile interval is that interval exactly; and
lmfit's own ``conf_interval`` (an independent implementation of the same F-test profile, on an
``lmfit.Minimizer``) for a nonlinear Carreau fit.
"""

from __future__ import annotations

import dataclasses
import math

import lmfit
import numpy as np
import pytest
from scipy import stats

from gammadot.config import FitConfig, StudyConfig
from gammadot.datamodel import Run
from gammadot.fitting import prepare_fit
from gammadot.plugins.basic_models import POWER_LAW
from gammadot.plugins.plateau_models import CARREAU
from gammadot.processing import fit_run
from gammadot.profile_intervals import profile_interval

from flow_curves import RATES, noisy

CARREAU_TRUTH = {"eta0": 40.0, "eta_inf": 0.05, "lam": 3.0, "n": 0.35}


def test_power_law_interval_is_the_linear_regression_t_interval() -> None:
    """ln η = ln K + (n − 1) ln γ̇: the profile interval of n is n̂ ± t(N − 2)·se exactly, and
    that of K is exp(ln K̂ ± t·se(ln K)) (the profile does not depend on the parametrisation)."""
    values = noisy(POWER_LAW.function(RATES, K=3.0, n=0.4), 0.02, seed=5)
    prepared = prepare_fit(POWER_LAW, RATES, values)
    line = stats.linregress(np.log(RATES), np.log(values))
    t = stats.t.ppf(0.975, len(RATES) - 2)
    n_low, n_high = profile_interval(prepared, "n")
    k_low, k_high = profile_interval(prepared, "K")
    assert (n_low, n_high) == pytest.approx((line.slope + 1 - t * line.stderr, line.slope + 1 + t * line.stderr),
                                            rel=1e-9)
    assert (k_low, k_high) == pytest.approx((math.exp(line.intercept - t * line.intercept_stderr),
                                             math.exp(line.intercept + t * line.intercept_stderr)), rel=1e-9)


def _lmfit_conf_interval(values: np.ndarray, start: dict[str, float]) -> dict[str, tuple[float, float]]:
    params = lmfit.Parameters()
    for spec in CARREAU.parameters:
        params.add(spec.name, value=start[spec.name], min=spec.min, max=spec.max)

    def residual(p: lmfit.Parameters) -> np.ndarray:
        return np.log(CARREAU.function(RATES, **p.valuesdict())) - np.log(values)

    minimizer = lmfit.Minimizer(residual, params)
    result = minimizer.minimize(method="leastsq", ftol=1e-12, xtol=1e-12)
    ci = lmfit.conf_interval(minimizer, result, sigmas=[0.95])
    return {name: (rows[0][1], rows[-1][1]) for name, rows in ci.items()}


def test_carreau_interval_agrees_with_lmfit_conf_interval() -> None:
    """Both plateaus in range: every Carreau parameter is identified; lmfit's conf_interval
    (F-test, 95 %) gives the same ends. lmfit stops its root search at rtol 5·10⁻⁵, hence
    the tolerance."""
    values = noisy(CARREAU.function(RATES, **CARREAU_TRUTH), 0.015, seed=3)
    prepared = prepare_fit(CARREAU, RATES, values)
    reference = _lmfit_conf_interval(values, dict(zip(prepared.curve.names, prepared.curve.values)))
    for name in CARREAU_TRUTH:
        low, high = profile_interval(prepared, name)
        assert (low, high) == pytest.approx(reference[name], rel=1e-4), name
        value = prepared.curve.value(name)
        assert low < value < high, name


def _run(viscosity: np.ndarray) -> Run:
    return Run(run_id="r", source_file="r.csv", source_sha256="0" * 64, first_line=1, metadata={},
               columns={"shear_rate": RATES, "viscosity": viscosity, "shear_stress": viscosity * RATES})


def test_only_the_selected_model_gets_intervals_and_only_when_asked(registry) -> None:
    values = noisy(CARREAU.function(RATES, **CARREAU_TRUTH), 0.015, seed=3)
    excluded = np.zeros(len(RATES), dtype=bool)
    models = ("carreau", "cross", "power_law")
    default = fit_run(_run(values), excluded, StudyConfig(title="t", fit=FitConfig(models=models)), registry)
    assert all(p.ci_low is None and p.ci_high is None for f in default for p in f.parameters)
    config = StudyConfig(title="t", fit=FitConfig(models=models, intervals="profile"))
    fits = fit_run(_run(values), excluded, config, registry)
    (selected,) = [f for f in fits if f.selected]
    assert selected.model == "carreau"
    prepared = prepare_fit(CARREAU, RATES, values)
    for estimate in selected.parameters:
        assert (estimate.ci_low, estimate.ci_high) == pytest.approx(profile_interval(prepared, estimate.name))
    assert all(p.ci_low is None for f in fits if not f.selected for p in f.parameters)
    # the intervals do not change anything else
    assert [dataclasses.replace(f, parameters=()) for f in fits] == [
        dataclasses.replace(f, parameters=()) for f in default]


def test_a_parameter_not_identified_gets_no_interval(registry) -> None:
    """Carreau without its upper plateau: η∞ is not identified, so it has no interval either."""
    rates = np.geomspace(1e-2, 10.0, 30)
    values = noisy(CARREAU.function(rates, eta0=40.0, eta_inf=1e-4, lam=3.0, n=0.35), 0.015, seed=4)
    run = Run(run_id="r", source_file="r.csv", source_sha256="0" * 64, first_line=1, metadata={},
              columns={"shear_rate": rates, "viscosity": values, "shear_stress": values * rates})
    config = StudyConfig(title="t", fit=FitConfig(models=("carreau",), intervals="profile"))
    (fit,) = fit_run(run, np.zeros(len(rates), dtype=bool), config, registry)
    eta_inf = fit.estimate("eta_inf")
    assert eta_inf.value is None and eta_inf.ci_low is None and eta_inf.ci_high is None
    eta0 = fit.estimate("eta0")
    assert eta0.value is not None and eta0.ci_low < eta0.value < eta0.ci_high

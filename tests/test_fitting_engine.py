"""The fitting engine (gammadot.least_squares / gammadot.fitting) against reference libraries.

Oracles: lmfit's own ``Model.fit`` (Levenberg–Marquardt with lmfit's bound handling and its
covariance), scipy.optimize.differential_evolution (a global optimiser, seeded), numpy.polyfit
(weighted linear least squares) and scipy.optimize.curve_fit (weighted nonlinear least squares).
"""

from __future__ import annotations

import dataclasses
import functools
import math

import lmfit
import numpy as np
import pytest
from scipy.optimize import curve_fit, differential_evolution

from gammadot import Model, ModelParameter
from gammadot.fitting import fit_model
from gammadot.least_squares import Objective, fit_curve
from gammadot.lmfit_models import ModelDefinitionError, as_lmfit_model
from gammadot.plugins.basic_models import POWER_LAW
from gammadot.plugins.plateau_models import CARREAU, CARREAU_YASUDA, CROSS, SISKO
from gammadot.plugins.yield_stress_models import HERSCHEL_BULKLEY

from flow_curves import RATES, noisy

CASES = [
    (CARREAU, {"eta0": 40.0, "eta_inf": 0.05, "lam": 3.0, "n": 0.35}),
    (CROSS, {"eta0": 9.5, "eta_inf": 0.06, "lam": 0.8, "m": 0.72}),
    (CARREAU_YASUDA, {"eta0": 120.0, "eta_inf": 0.3, "lam": 0.5, "a": 0.8, "n": 0.3}),
    (SISKO, {"eta_inf": 0.02, "K": 4.0, "n": 0.35}),
    (HERSCHEL_BULKLEY, {"tau_y": 32.0, "K": 8.5, "n": 0.44}),
]


def _log_model(model: Model) -> lmfit.Model:
    """ln f as an lmfit model with the same parameters (lmfit reads the wrapped signature)."""

    @functools.wraps(model.function)
    def log_f(shear_rate, **params):
        return np.log(model.function(shear_rate, **params))

    return lmfit.Model(log_f, independent_vars=["shear_rate"])


@pytest.mark.parametrize(("model", "truth"), CASES, ids=lambda c: getattr(c, "id", ""))
def test_engine_agrees_with_lmfit_model_fit(model, truth) -> None:
    """Same data, same start, same bounds: lmfit's Model.fit (method leastsq) finds the same
    optimum and the same standard errors (both s²(JᵀJ)⁻¹)."""
    values = noisy(model.function(RATES, **truth), 0.015, seed=3)
    ours = fit_model(model, RATES, values)
    start = model.guess(RATES, values)
    params = as_lmfit_model(model).make_params(**start)  # bounds from the model's hints
    reference = _log_model(model).fit(np.log(values), params, shear_rate=RATES, method="leastsq",
                                      fit_kws={"ftol": 1e-12, "xtol": 1e-12})
    for name in truth:
        ref = reference.params[name]
        assert ours.best_fit[name] == pytest.approx(ref.value, rel=1e-5), name
        assert ours.estimate(name).stderr == pytest.approx(ref.stderr, rel=2e-3), name
    assert ours.rmse_log == pytest.approx(math.sqrt(2 * reference.chisqr / 2 / len(RATES)), rel=1e-6)


def test_lmfit_view_of_a_model_is_a_working_lmfit_model() -> None:
    """The documented bridge: as_lmfit_model(CARREAU).guess(...) then .fit(...) in plain lmfit
    (least squares in linear space here) recovers noise-free parameters."""
    truth = {"eta0": 10.0, "eta_inf": 0.01, "lam": 1.0, "n": 0.4}
    values = CARREAU.function(RATES, **truth)
    carreau = as_lmfit_model(CARREAU)
    assert isinstance(carreau, lmfit.Model) and carreau is as_lmfit_model(CARREAU)  # cached
    params = carreau.guess(values, shear_rate=RATES)
    assert params["eta_inf"].min == 0.0 and params["lam"].min == 0.0
    result = carreau.fit(values, params, shear_rate=RATES, weights=1 / values)
    for name, value in truth.items():
        assert result.params[name].value == pytest.approx(value, rel=1e-6)


def test_a_function_whose_parameters_differ_from_the_declared_ones_is_refused() -> None:
    typo = dataclasses.replace(POWER_LAW, id="typo", parameters=(ModelParameter("K", "Pa·s^n"),
                                                                 ModelParameter("m", "1")))
    with pytest.raises(ModelDefinitionError, match="differ from the declared ones"):
        as_lmfit_model(typo)


def _global_minimum(model: Model, values: np.ndarray, box: dict[str, tuple[float, float]]) -> float:
    """The least log-space sum of squares differential evolution finds (log10 box for scale
    parameters, linear for exponents; seeded; polished by L-BFGS-B)."""
    names = [p.name for p in model.parameters]
    exponents = {"n", "m", "a"}
    target = np.log(values)

    def cost(u):  # vectorised: u has shape (k, S), the model broadcasts (S, 1) against the rates
        u = np.asarray(u, dtype=float)
        columns = u.reshape(len(names), -1)
        params = {n: (col if n in exponents else 10.0 ** col)[:, None] for n, col in zip(names, columns)}
        with np.errstate(all="ignore"):
            r = np.log(model.function(RATES[None, :], **params)) - target
        total = np.sum(r * r, axis=1)
        total = np.where(np.isfinite(total), total, 1e300)
        return total.reshape(u.shape[1:]) if u.ndim > 1 else float(total[0])

    result = differential_evolution(cost, [box[n] for n in names], seed=1, tol=1e-10, maxiter=2000,
                                    popsize=25, polish=True, vectorized=True, updating="deferred")
    return float(result.fun)


@pytest.mark.parametrize(("model", "truth", "box"), [
    # transition near the top of the range; η∞ barely reached
    (CARREAU_YASUDA, {"eta0": 300.0, "eta_inf": 0.5, "lam": 0.05, "a": 0.6, "n": 0.25},
     {"eta0": (0, 5), "eta_inf": (-4, 1), "lam": (-4, 3), "a": (0.1, 5), "n": (0.0, 1.5)}),
    # thinning sets in at the very bottom of the range
    (CROSS, {"eta0": 50.0, "eta_inf": 0.2, "lam": 30.0, "m": 0.8},
     {"eta0": (-1, 4), "eta_inf": (-4, 1), "lam": (-4, 4), "m": (0.05, 2.0)}),
    (CARREAU, {"eta0": 8.0, "eta_inf": 0.02, "lam": 0.01, "n": 0.3},
     {"eta0": (-1, 3), "eta_inf": (-4, 0), "lam": (-5, 3), "n": (0.0, 1.5)}),
    # small yield stress against a strong power-law part
    (HERSCHEL_BULKLEY, {"tau_y": 0.8, "K": 15.0, "n": 0.35},
     {"tau_y": (-3, 2), "K": (-2, 3), "n": (0.05, 1.5)}),
], ids=lambda c: getattr(c, "id", ""))
def test_a_poor_start_never_decides_the_answer(model, truth, box) -> None:
    """The global stage + local fit reach the global least-squares minimum that scipy's
    differential evolution finds in a wide box (to 10⁻⁶ of the sum of squares)."""
    values = noisy(model.function(RATES, **truth), 0.02, seed=17)
    ours = fit_curve(model, RATES, values, model.guess(RATES, values))
    assert ours.rss == pytest.approx(_global_minimum(model, values, box), rel=1e-6)


def test_several_starts_keep_the_best_solution() -> None:
    """A guess may return several starts (multi-start): the lowest sum of squares wins, the
    same whatever the order of the starts."""
    truth = {"eta0": 9.5, "eta_inf": 0.06, "lam": 0.8, "m": 0.72}
    values = noisy(CROSS.function(RATES, **truth), 0.015, seed=6)
    good = CROSS.guess(RATES, values)
    poor = {"eta0": 1e4, "eta_inf": 5.0, "lam": 1e4, "m": 3.0}  # thinning far outside the range
    alone = fit_curve(CROSS, RATES, values, poor)
    both, reversed_ = (fit_curve(CROSS, RATES, values, s) for s in ([poor, good], [good, poor]))
    assert alone.rss > 2 * both.rss  # from the poor start alone LM ends elsewhere
    assert both.rss == reversed_.rss and both.start_index == 1 and reversed_.start_index == 0


def test_robust_loss_resists_outliers() -> None:
    """Three gross outliers (×3) in a power-law curve: with soft_l1 the estimate stays within
    5 noise-derived standard errors of the truth; plain least squares is pulled well away."""
    truth, noise = {"K": 2.0, "n": 0.5}, 0.01
    values = noisy(POWER_LAW.function(RATES, **truth), noise, seed=4)
    values[[5, 20, 33]] *= 3.0
    sigma_n = noise / math.sqrt(np.sum((np.log(RATES) - np.log(RATES).mean()) ** 2))  # slope SE
    robust = fit_model(POWER_LAW, RATES, values, Objective(loss="soft_l1", loss_scale=0.03))
    plain = fit_model(POWER_LAW, RATES, values)
    assert abs(robust.value("n") - 0.5) < 5 * sigma_n
    assert abs(plain.value("K") - 2.0) > 10 * abs(robust.value("K") - 2.0)
    huber = fit_model(POWER_LAW, RATES, values, Objective(loss="huber"))  # scale from the MAD
    assert abs(huber.value("n") - 0.5) < 5 * sigma_n


def test_per_decade_weights_equal_weighted_linear_regression() -> None:
    """Power law in log space is a straight line: with per_decade weights the fit equals
    numpy.polyfit of ln η on ln γ̇ with the same weights (trapezoid widths in ln γ̇)."""
    rate = np.concatenate([np.geomspace(0.1, 1.0, 20), np.geomspace(2.0, 1000.0, 6)])  # dense first decade
    values = noisy(POWER_LAW.function(rate, K=3.0, n=0.45), 0.02, seed=8)
    ours = fit_model(POWER_LAW, rate, values, Objective(weights="per_decade"))
    lx = np.log(rate)
    edges = np.concatenate(([lx[0]], (lx[1:] + lx[:-1]) / 2, [lx[-1]]))
    slope, intercept = np.polyfit(lx, np.log(values), 1, w=np.sqrt(np.diff(edges)))
    assert ours.value("n") == pytest.approx(slope + 1, rel=1e-7)
    assert ours.value("K") == pytest.approx(math.exp(intercept), rel=1e-7)


def test_linear_space_with_relative_weights_equals_scipy_curve_fit() -> None:
    """space = "linear", weights = "relative": stress residuals divided by the stress, the same
    problem as scipy.optimize.curve_fit with sigma = τ (absolute_sigma off: same covariance)."""
    truth = {"tau_y": 32.0, "K": 8.5, "n": 0.44}
    stress = noisy(HERSCHEL_BULKLEY.function(RATES, **truth), 0.015, seed=9)
    ours = fit_model(HERSCHEL_BULKLEY, RATES, stress, Objective(space="linear", weights="relative"))
    popt, pcov = curve_fit(lambda x, t, k, n: HERSCHEL_BULKLEY.function(x, t, k, n), RATES, stress,
                           p0=[30.0, 8.0, 0.5], sigma=stress)
    for j, name in enumerate(truth):
        assert ours.value(name) == pytest.approx(popt[j], rel=1e-6)
        assert ours.estimate(name).stderr == pytest.approx(math.sqrt(pcov[j, j]), rel=1e-4)


def test_same_input_gives_identical_results() -> None:
    values = noisy(CARREAU_YASUDA.function(RATES, **CASES[2][1]), 0.015, seed=3)
    first, second = (fit_model(CARREAU_YASUDA, RATES, values) for _ in range(2))
    assert first == second and first.best_fit == second.best_fit


def test_a_bounded_parameter_pushed_past_its_bound_is_reported_at_the_bound() -> None:
    """A third party's power law restricted to n ≤ 1 (thinning only), fitted to a thickening
    fluid (n = 1.3): n stops at 1, is reported as not identified naming the bound, and K keeps a
    standard error computed with n held fixed."""
    thinning_only = dataclasses.replace(POWER_LAW, id="thinning_power_law", parameters=(
        POWER_LAW.parameters[0], ModelParameter("n", "1", 0.0, 1.0, "flow index")))
    values = noisy(POWER_LAW.function(RATES, K=0.02, n=1.3), 0.01, seed=2)
    fit = fit_model(thinning_only, RATES, values)
    n = fit.estimate("n")
    assert fit.success and n.value is None and "stops at the bound 1 of its range" in n.note
    assert fit.best_fit["n"] == 1.0 and fit.fixed == ("n",)
    assert fit.estimate("K").stderr is not None


def test_a_model_without_jacobian_is_fitted_by_numerical_derivatives() -> None:
    """A third party's record with function and guess only gives the same answer as the
    built-in model with its analytic Jacobian."""
    plain = dataclasses.replace(CARREAU, id="plain_carreau", jacobian=None)
    values = noisy(CARREAU.function(RATES, **CASES[0][1]), 0.015, seed=3)
    a, b = fit_model(plain, RATES, values), fit_model(CARREAU, RATES, values)
    for name in CASES[0][1]:
        assert a.best_fit[name] == pytest.approx(b.best_fit[name], rel=1e-5)
        assert a.estimate(name).stderr == pytest.approx(b.estimate(name).stderr, rel=1e-4)


def test_objective_refuses_unknown_choices() -> None:
    with pytest.raises(ValueError, match="loss: unknown value 'cauchy'"):
        Objective(loss="cauchy")
    with pytest.raises(ValueError, match="weights: 'relative' applies to space = 'linear'"):
        Objective(weights="relative")


def test_a_parameter_stuck_at_its_bound_on_the_way_is_freed(monkeypatch) -> None:
    """A Carreau–Yasuda curve (η∞ = η0/1000 > 0) where the projected bound stops η∞ at 0 on
    the way: the first-order (KKT) check sees the cost falling towards η∞ > 0, the fit is
    repeated with lmfit's bound transform, and the answer is the global minimum that
    differential evolution finds."""
    import gammadot.least_squares as engine

    rate = np.geomspace(0.01, 1000.0, 40)
    truth = {"eta0": 84.05059, "eta_inf": 0.08405, "lam": 0.57805, "a": 1.45373, "n": 0.40152}
    values = noisy(CARREAU_YASUDA.function(rate, **truth), 0.015, seed=43)
    seen = []
    check = engine._pulls_off_bound
    monkeypatch.setattr(engine, "_pulls_off_bound", lambda problem, local: seen.append(check(problem, local)) or seen[-1])
    fit = fit_curve(CARREAU_YASUDA, rate, values, CARREAU_YASUDA.guess(rate, values))
    assert seen == [True] and not any(fit.at_bound) and fit.value("eta_inf") > 0
    box = {"eta0": (0, 4), "eta_inf": (-4, 1), "lam": (-3, 2), "a": (0.2, 5), "n": (0.0, 1.2)}
    names = [p.name for p in CARREAU_YASUDA.parameters]
    target = np.log(values)

    def cost(u):
        columns = np.asarray(u, float).reshape(len(names), -1)
        params = {n: (c if n in ("a", "n") else 10.0 ** c)[:, None] for n, c in zip(names, columns)}
        with np.errstate(all="ignore"):
            r = np.log(CARREAU_YASUDA.function(rate[None, :], **params)) - target
        total = np.where(np.isfinite(np.sum(r * r, axis=1)), np.sum(r * r, axis=1), 1e300)
        return total if np.ndim(u) > 1 else float(total[0])

    reference = differential_evolution(cost, [box[n] for n in names], seed=1, tol=1e-10, maxiter=2000,
                                       popsize=25, polish=True, vectorized=True, updating="deferred")
    assert fit.rss == pytest.approx(reference.fun, rel=1e-6)

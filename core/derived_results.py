"""Run-level results derived from the fits: what a lab reports from a flow curve.

Each is a :class:`~gammadot.records.Result` (results.parquet), with its uncertainty and how it
was obtained (``method``):

- ``viscosity`` at each shear rate of ``[fit] shear_rates``, twice:
  * from the selected model, with the standard error propagated from the parameter covariance
    (first-order, "delta method": var η = gᵀCg, g = ∂η/∂p; JCGM 100:2008 (GUM) §5.1.2);
    ``extrapolated`` is true outside [shear_rate_min, shear_rate_max] and the note says so;
  * by interpolation of the measured points, linear in (ln γ̇, ln η) between the two
    neighbouring fitted points; its standard error takes the scatter of one point as the
    selected fit's ``rmse_log`` (relative), so σ_rel = rmse_log·√(w² + (1 − w)²) for the
    interpolation weight w. Outside the measured range there is no value (no extrapolation).
- ``zero_shear_viscosity`` (the selected model's ``eta0``; ``eta`` of a Newtonian fit) and
  ``yield_stress`` (``tau_y``): model limits at γ̇ → 0, so ``at_shear_rate`` is 0 and they are
  always marked extrapolated (below the lowest measured rate).
- ``flow_index``: the power-law index of the selected model's thinning region (``n``; Cross:
  1 − m; Newtonian: 1).

Which parameter means what is read from the contract's parameter names, so an in-house model
that uses them (``eta0``, ``tau_y``, ``n``) gets the same results. A quantity the selected model
lacks, or a parameter that is not identified, gives a row with value null and the reason.
"""

from __future__ import annotations

import math
from typing import Sequence

import numpy as np

from .fitting import FitResult
from .records import Model, Result

VISCOSITY, ZERO_SHEAR, YIELD, FLOW_INDEX = "viscosity", "zero_shear_viscosity", "yield_stress", "flow_index"
INTERPOLATION = "interpolation of the measured points (linear in ln γ̇, ln η)"


def derived_results(shear_rate: np.ndarray, viscosity: np.ndarray, fits: Sequence[FitResult],
                    models: dict[str, Model], shear_rates: Sequence[float]) -> list[Result]:
    """The derived results of one run from its fitted points (excluded points already removed)."""
    selected = next((f for f in fits if f.selected), None)
    model = models.get(selected.model) if selected is not None else None
    results: list[Result] = []
    for rate in shear_rates:
        results.append(_model_viscosity(selected, model, rate))
        results.append(_interpolated_viscosity(shear_rate, viscosity, rate, selected))
    results += _parameter_results(selected)
    return results


def _model_viscosity(fit: FitResult | None, model: Model | None, rate: float) -> Result:
    if fit is None or model is None:
        return Result(VISCOSITY, None, "Pa·s", method="selected model", at_shear_rate=rate,
                      note="no model could be fitted")
    method = f"selected model {fit.model}; standard error from the parameter covariance"
    outside = _outside(fit, rate)
    note = _range_note(fit) if outside else ""
    eta, stderr = model_viscosity(fit, model, np.array([rate]))
    value, error = float(eta[0]), float(stderr[0])
    return Result(VISCOSITY, value if math.isfinite(value) else None, "Pa·s",
                  error if math.isfinite(error) else None, method, rate, outside, note)


def model_viscosity(fit: FitResult, model: Model, shear_rate: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """A fitted model's viscosity (Pa·s) at each shear rate (1/s) and its standard error.

    The standard error is propagated from the parameter covariance to first order (the
    "delta method": var η = gᵀCg with g = ∂η/∂p; JCGM 100:2008 (GUM) §5.1.2), parameters at a
    bound held fixed. NaN where the value or its uncertainty is unknown (a parameter without a
    standard error that the value depends on). Uses every parameter's least-squares value
    (``fit.best_fit``); nothing here says whether a rate lies inside the fitted range.
    """
    x = np.atleast_1d(np.asarray(shear_rate, dtype=float))
    names = [p.name for p in model.parameters]
    values = np.array([fit.best_fit[name] for name in names])
    with np.errstate(all="ignore"):
        target = np.broadcast_to(np.asarray(model.function(x, **fit.best_fit), float), x.shape)
        scale = 1.0 / x if model.target == "shear_stress" else np.ones_like(x)  # η = τ/γ̇ for stress models
        eta = target * scale
        gradient = _gradient(model, x, fit.best_fit, values) * scale[:, None]
    eta = np.where(np.isfinite(eta), eta, np.nan)
    return eta, _propagated_stderr(fit, names, gradient)


def _gradient(model: Model, x: np.ndarray, params: dict[str, float], values: np.ndarray) -> np.ndarray:
    """∂f/∂p at each rate, shape (rates, parameters): the model's Jacobian, or central
    differences (relative step 10⁻⁶)."""
    names = [p.name for p in model.parameters]
    if model.jacobian is not None:
        parts = model.jacobian(x, **params)
        return np.stack([np.broadcast_to(np.asarray(parts[n], float), x.shape) for n in names], axis=1)
    gradient = np.empty((len(x), len(names)))
    for j, name in enumerate(names):
        step = 1e-6 * (abs(values[j]) or 1.0)
        up, down = dict(params), dict(params)
        up[name], down[name] = values[j] + step, values[j] - step
        gradient[:, j] = (np.asarray(model.function(x, **up), float) - np.asarray(model.function(x, **down), float)) \
            / (2 * step)
    return gradient


def _propagated_stderr(fit: FitResult, names: list[str], gradient: np.ndarray) -> np.ndarray:
    """√(gᵀCg) for each row of ``gradient``; parameters at a bound are held fixed. NaN where a
    gradient is not finite, or where the value depends on a parameter without a (finite)
    covariance entry."""
    rows = gradient.shape[0]
    if fit.covariance is None:
        return np.full(rows, np.nan)
    cov = np.asarray(fit.covariance, dtype=float)
    finite_rows = np.all(np.isfinite(gradient), axis=1)
    free = np.array([n not in fit.fixed for n in names], dtype=float)
    g = np.where(np.isfinite(gradient), gradient, 0.0) * free
    matters = (g != 0).astype(float)
    unknown = ~np.isfinite(cov)
    broken = np.einsum("ia,ab,ib->i", matters, unknown.astype(float), matters) > 0
    variance = np.einsum("ia,ab,ib->i", g, np.where(unknown, 0.0, cov), g)
    with np.errstate(invalid="ignore"):
        stderr = np.sqrt(np.where(variance >= 0, variance, np.nan))
    stderr[~finite_rows | broken] = np.nan
    return stderr


def _interpolated_viscosity(shear_rate: np.ndarray, viscosity: np.ndarray, rate: float,
                            fit: FitResult | None) -> Result:
    keep = np.isfinite(shear_rate) & np.isfinite(viscosity) & (shear_rate > 0) & (viscosity > 0)
    if not keep.any():
        return Result(VISCOSITY, None, "Pa·s", method=INTERPOLATION, at_shear_rate=rate, note="no usable points")
    levels, index = np.unique(np.log(shear_rate[keep]), return_inverse=True)
    log_eta = np.bincount(index, np.log(viscosity[keep])) / np.bincount(index)  # repeats averaged
    target = math.log(rate)
    if not levels[0] <= target <= levels[-1]:
        return Result(VISCOSITY, None, "Pa·s", method=INTERPOLATION, at_shear_rate=rate, extrapolated=True,
                      note=f"outside the measured range {math.exp(levels[0]):.3g} to {math.exp(levels[-1]):.3g} 1/s; "
                           "interpolation does not extrapolate")
    eta = float(np.exp(np.interp(target, levels, log_eta)))
    upper = int(np.clip(np.searchsorted(levels, target), 1, max(1, len(levels) - 1)))
    if len(levels) == 1:
        weight = 1.0
    else:
        weight = float((levels[upper] - target) / (levels[upper] - levels[upper - 1]))
    stderr = None
    if fit is not None and fit.rmse_log is not None:
        stderr = eta * fit.rmse_log * math.sqrt(weight ** 2 + (1.0 - weight) ** 2)
    return Result(VISCOSITY, eta, "Pa·s", stderr, INTERPOLATION, rate, False,
                  "" if stderr is not None else "no fitted model to estimate the scatter of the points")


def _parameter_results(fit: FitResult | None) -> list[Result]:
    if fit is None:
        return [Result(name, None, unit, note="no model could be fitted", **where)
                for name, unit, where in ((ZERO_SHEAR, "Pa·s", {"at_shear_rate": 0.0, "extrapolated": True}),
                                          (YIELD, "Pa", {"at_shear_rate": 0.0, "extrapolated": True}),
                                          (FLOW_INDEX, "1", {}))]
    limit = f"model limit at γ̇ → 0, below the lowest measured rate {fit.shear_rate_min:.3g} 1/s"
    zero_shear = "eta" if fit.model == "newtonian" else "eta0"
    return [
        _from_parameter(fit, ZERO_SHEAR, zero_shear, "Pa·s", limit, at_zero=True,
                        absent="the selected model has no zero-shear plateau"),
        _from_parameter(fit, YIELD, "tau_y", "Pa", limit, at_zero=True,
                        absent="the selected model has no yield stress"),
        _flow_index(fit),
    ]


def _from_parameter(fit: FitResult, name: str, parameter: str, unit: str, limit: str, *, at_zero: bool,
                    absent: str) -> Result:
    where = {"at_shear_rate": 0.0, "extrapolated": True} if at_zero else {}
    method = f"selected model {fit.model}, parameter {parameter}"
    estimate = fit.estimate(parameter)
    if estimate is None:
        return Result(name, None, unit, method=f"selected model {fit.model}", note=absent, **where)
    if estimate.value is None:
        return Result(name, None, unit, method=method, note=estimate.note or "not determined", **where)
    return Result(name, estimate.value, unit, estimate.stderr, method, note=limit if at_zero else "", **where)


def _flow_index(fit: FitResult) -> Result:
    if fit.model == "newtonian":
        return Result(FLOW_INDEX, 1.0, "1", None, "selected model newtonian", note="n = 1 for a Newtonian fluid")
    if fit.estimate("m") is not None and fit.model == "cross":
        m = fit.estimate("m")
        assert m is not None
        if m.value is None:
            return Result(FLOW_INDEX, None, "1", method="selected model cross, 1 − m", note=m.note)
        return Result(FLOW_INDEX, 1.0 - m.value, "1", m.stderr, "selected model cross, 1 − m",
                      note="power-law index of the thinning region")
    return _from_parameter(fit, FLOW_INDEX, "n", "1", "", at_zero=False,
                           absent="the selected model has no flow index")


def _outside(fit: FitResult, rate: float) -> bool:
    return (fit.shear_rate_min is None or fit.shear_rate_max is None
            or not fit.shear_rate_min <= rate <= fit.shear_rate_max)


def _range_note(fit: FitResult) -> str:
    return (f"extrapolated: outside the measured range {fit.shear_rate_min:.3g} to {fit.shear_rate_max:.3g} 1/s; "
            "the model may not hold there")

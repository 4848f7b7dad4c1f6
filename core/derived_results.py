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
    x = np.array([rate])
    values = np.array([fit.best_fit[p.name] for p in model.parameters])
    with np.errstate(all="ignore"):
        target = float(np.asarray(model.function(x, **fit.best_fit), float)[0])
        scale = 1.0 / rate if model.target == "shear_stress" else 1.0  # η = τ/γ̇ for stress models
        eta = target * scale
        gradient = _gradient(model, x, fit.best_fit, values) * scale
    return Result(VISCOSITY, eta if math.isfinite(eta) else None, "Pa·s",
                  _propagated_stderr(fit, [p.name for p in model.parameters], gradient),
                  method, rate, outside, note)


def _gradient(model: Model, x: np.ndarray, params: dict[str, float], values: np.ndarray) -> np.ndarray:
    """∂f/∂p at one rate: the model's Jacobian, or central differences (relative step 10⁻⁶)."""
    names = [p.name for p in model.parameters]
    if model.jacobian is not None:
        parts = model.jacobian(x, **params)
        return np.array([float(np.broadcast_to(parts[n], x.shape)[0]) for n in names])
    gradient = np.empty(len(names))
    for j, name in enumerate(names):
        step = 1e-6 * (abs(values[j]) or 1.0)
        up, down = dict(params), dict(params)
        up[name], down[name] = values[j] + step, values[j] - step
        gradient[j] = float((model.function(x, **up)[0] - model.function(x, **down)[0]) / (2 * step))
    return gradient


def _propagated_stderr(fit: FitResult, names: list[str], gradient: np.ndarray) -> float | None:
    """√(gᵀCg); parameters at a bound are held fixed; a parameter without a standard error
    that the value depends on makes the uncertainty unknown (``None``)."""
    if fit.covariance is None or not np.all(np.isfinite(gradient)):
        return None
    matters = (gradient != 0) & np.array([n not in fit.fixed for n in names])
    cov = np.asarray(fit.covariance, dtype=float)[np.ix_(matters, matters)]
    if not np.all(np.isfinite(cov)):
        return None
    variance = float(gradient[matters] @ cov @ gradient[matters])
    return math.sqrt(variance) if variance >= 0 else None


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

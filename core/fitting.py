"""Fitting constitutive models to one run with lmfit, in log space, and choosing among them.

Rheological data span decades with roughly constant *relative* error, so residuals are
taken in natural-log space: r_i = ln f(γ̇_i; p) − ln y_i. ``rmse_log`` is the RMS of these
residuals (≈ the typical relative deviation). Model choice uses the small-sample Akaike
criterion (AICc; Hurvich & Tsai, Biometrika 76 (1989) 297, doi:10.1093/biomet/76.2.297):
the lowest AICc wins, except that the model with the fewest parameters whose AICc lies
within 2 of the lowest is preferred (ΔAICc ≤ 2 means comparable support; Burnham &
Anderson, *Model Selection and Multimodel Inference*, 2nd ed. 2002, §2.6).
"""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass, replace
from typing import Callable, Sequence

import numpy as np

from .records import Model

AICC_TOLERANCE = 2.0


@dataclass(frozen=True)
class ParameterEstimate:
    """A fitted parameter: value and standard error in the parameter's SI unit.

    ``value``/``stderr`` are ``None`` when the fit failed or the data cannot determine them.
    """

    name: str
    value: float | None
    stderr: float | None
    unit: str


@dataclass(frozen=True)
class FitResult:
    """One model fitted to one run (columns of fits.parquet plus the parameters)."""

    model: str
    success: bool
    n_points: int
    aicc: float | None
    bic: float | None
    rmse_log: float | None
    message: str
    shear_rate_min: float | None
    shear_rate_max: float | None
    parameters: tuple[ParameterEstimate, ...] = ()
    selected: bool = False

    def value(self, name: str) -> float | None:
        """The fitted value of parameter ``name`` (``None`` if absent or undetermined)."""
        return next((p.value for p in self.parameters if p.name == name), None)


def _log_of(function: Callable[..., np.ndarray]) -> Callable[..., np.ndarray]:
    """Wrap a model function so it returns ln f; the signature (lmfit reads it) is kept."""

    @functools.wraps(function)
    def log_function(shear_rate: np.ndarray, **params: float) -> np.ndarray:
        with np.errstate(divide="ignore", invalid="ignore"):
            return np.log(function(shear_rate, **params))

    return log_function


def failed_fit(model: Model, n_points: int, message: str) -> FitResult:
    """A failed fit record naming the reason (no numbers are invented)."""
    params = tuple(ParameterEstimate(p.name, None, None, p.unit) for p in model.parameters)
    return FitResult(model.id, False, n_points, None, None, None, message, None, None, params)


def fit_model(model: Model, shear_rate: np.ndarray, values: np.ndarray) -> FitResult:
    """Fit ``model`` to (shear rate 1/s, target values in SI) by least squares in log space.

    Points that are not finite and positive in both arrays are ignored. Returns a failed
    :class:`FitResult` (never raises for bad data) when fewer points than parameters + 1.
    """
    import lmfit

    keep = np.isfinite(shear_rate) & np.isfinite(values) & (shear_rate > 0) & (values > 0)
    x, y = shear_rate[keep], values[keep]
    k = len(model.parameters)
    if len(x) < k + 1:
        return failed_fit(model, len(x), f"too few usable points ({len(x)}) for {k} parameters")
    lmodel = lmfit.Model(_log_of(model.function), independent_vars=["shear_rate"])
    params = lmodel.make_params()
    start = model.guess(x, y)
    for spec in model.parameters:
        params[spec.name].set(value=float(start[spec.name]), min=spec.min, max=spec.max)
    result = lmodel.fit(np.log(y), params, shear_rate=x)
    return _summarise(model, result, x)


def _summarise(model: Model, result: "object", x: np.ndarray) -> FitResult:
    n = len(x)
    k = result.nvarys  # type: ignore[attr-defined]
    residual = np.asarray(result.residual, dtype=float)  # type: ignore[attr-defined]
    if not np.all(np.isfinite(residual)):
        return failed_fit(model, n, "model gives non-positive or undefined values at the data")
    aicc = result.aic + 2 * k * (k + 1) / (n - k - 1) if n - k - 1 > 0 else math.inf  # type: ignore[attr-defined]
    estimates = tuple(
        ParameterEstimate(p.name, float(result.params[p.name].value),  # type: ignore[attr-defined]
                          _finite_or_none(result.params[p.name].stderr), p.unit)  # type: ignore[attr-defined]
        for p in model.parameters)
    message = str(result.message)  # type: ignore[attr-defined]
    if any(e.stderr is None for e in estimates):
        message += "; standard errors could not be estimated"
    return FitResult(model.id, bool(result.success), n, float(aicc), float(result.bic),  # type: ignore[attr-defined]
                     float(np.sqrt(np.mean(residual ** 2))), message,
                     float(x.min()), float(x.max()), estimates)


def _finite_or_none(value: float | None) -> float | None:
    return float(value) if value is not None and np.isfinite(value) else None


def select_model(fits: Sequence[FitResult], n_parameters: dict[str, int]) -> list[FitResult]:
    """Mark the selected fit (rule in the module docstring); return fits in the same order."""
    usable = [f for f in fits if f.success and f.aicc is not None and math.isfinite(f.aicc)]
    if not usable:
        return list(fits)
    best = min(f.aicc for f in usable)  # type: ignore[type-var]
    close = [f for f in usable if f.aicc <= best + AICC_TOLERANCE]  # type: ignore[operator]
    chosen = min(close, key=lambda f: (n_parameters[f.model], f.aicc))
    return [replace(f, selected=f is chosen) for f in fits]

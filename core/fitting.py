"""Fitting the constitutive models to one run, and choosing among them.

For each model: data-driven starts from the model's ``guess`` (a global stage where the model
needs one), Levenberg–Marquardt from each start (:mod:`gammadot.least_squares`), standard
errors and correlations from the covariance, the identifiability rule
(:mod:`gammadot.identifiability`), AICc and BIC (:mod:`gammadot.model_selection`).

The objective (:class:`~gammadot.least_squares.Objective`, study.toml ``[fit]``) is, by default,
least squares of ln(value): every point counts by its relative deviation. ``rmse_log`` is always
the RMS of the natural-log residuals ln f(γ̇_i) − ln y_i of the fitted points (≈ the typical
relative deviation), whatever the objective. In ``space = "linear"`` every model is compared on
shear stress in Pa (a viscosity model through τ = η·γ̇), so the criteria of all models stay
comparable.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Mapping, Sequence

import numpy as np

from .identifiability import assess
from .least_squares import CurveFit, Objective, fit_curve
from .model_selection import information_criteria, select_model
from .records import Model

__all__ = ["FitResult", "ParameterEstimate", "PreparedFit", "failed_fit", "fit_model", "prepare_fit", "profiled",
           "select_model", "summarise"]

PROFILE_MARGIN = 10.0  # AICc units: fits this close to a run's best get the full identifiability rule


@dataclass(frozen=True)
class ParameterEstimate:
    """A fitted parameter: value and standard error in the parameter's SI unit.

    ``value``/``stderr`` are ``None`` when the fit failed or the data cannot determine the
    parameter; ``note`` then says why ("" otherwise). ``ci_low``/``ci_high``: the 95 %
    profile-likelihood interval in the same unit (:mod:`gammadot.profile_intervals`), ``None``
    unless ``[fit] intervals = "profile"`` computed it (the selected model only).
    """

    name: str
    value: float | None
    stderr: float | None
    unit: str
    note: str = ""
    ci_low: float | None = None
    ci_high: float | None = None


@dataclass(frozen=True)
class FitResult:
    """One model fitted to one run (columns of fits.parquet plus the parameters).

    ``best_fit`` holds the least-squares value of *every* parameter, identified or not: it is
    what curves and predictions inside the measured range use. ``covariance`` (order of
    ``best_fit``) has NaN rows for parameters without a standard error; ``fixed`` names the
    parameters that stopped at a bound (held fixed in error propagation).
    ``correlations`` are (parameter, parameter, correlation coefficient) for every pair of
    parameters with standard errors. ``supported``: every parameter is identified or vanishes
    (:mod:`gammadot.identifiability`); the selection prefers supported fits.
    """

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
    correlations: tuple[tuple[str, str, float], ...] = ()
    best_fit: Mapping[str, float] = field(default_factory=dict)
    covariance: np.ndarray | None = field(default=None, compare=False, repr=False)
    fixed: tuple[str, ...] = ()
    supported: bool = True

    def value(self, name: str) -> float | None:
        """The fitted value of parameter ``name`` (``None`` if absent or not identified)."""
        return next((p.value for p in self.parameters if p.name == name), None)

    def estimate(self, name: str) -> ParameterEstimate | None:
        """The :class:`ParameterEstimate` of parameter ``name``."""
        return next((p for p in self.parameters if p.name == name), None)


def failed_fit(model: Model, n_points: int, message: str) -> FitResult:
    """A failed fit record naming the reason (no numbers are invented)."""
    params = tuple(ParameterEstimate(p.name, None, None, p.unit) for p in model.parameters)
    return FitResult(model.id, False, n_points, None, None, None, message, None, None, params)


@dataclass
class PreparedFit:
    """A model fitted to one run's points, before its parameters are judged: what the
    identifiability profiles need (the data as fitted, the objective, the engine's answer)."""

    model: Model
    x: np.ndarray
    y: np.ndarray
    y_fit: np.ndarray
    factor: np.ndarray | None
    objective: Objective
    curve: CurveFit

    def aicc(self) -> float:
        """AICc of the fit (+inf when it did not converge or has too few points)."""
        if not self.curve.success:
            return math.inf
        return information_criteria(self.curve.rss, len(self.x), len(self.model.parameters))[0]

    def profile(self, name: str, value: float) -> float:
        """Residual sum of squares with ``name`` held at ``value``, the others refitted from
        the solution."""
        start = {n: float(v) for n, v in zip(self.curve.names, self.curve.values)}
        start[name] = value
        return fit_curve(self.model, self.x, self.y_fit, start, self.objective, factor=self.factor,
                         fixed={name: value}).rss


def prepare_fit(model: Model, shear_rate: np.ndarray, values: np.ndarray,
                objective: Objective = Objective()) -> PreparedFit | FitResult:
    """Fit ``model`` to (shear rate 1/s, its target values in SI): the engine's answer, or a
    failed :class:`FitResult` when there are not more usable points than parameters.

    Points that are not finite and positive in both arrays are ignored. Exceptions from the
    model's own functions propagate (the caller names the plugin).
    """
    shear_rate, values = np.asarray(shear_rate, float), np.asarray(values, float)
    keep = np.isfinite(shear_rate) & np.isfinite(values) & (shear_rate > 0) & (values > 0)
    x, y = shear_rate[keep], values[keep]
    k = len(model.parameters)
    if len(x) < k + 1:
        return failed_fit(model, len(x), f"too few usable points ({len(x)}) for {k} parameters")
    starts = model.guess(x, y)
    on_stress = objective.space == "linear" and model.target == "viscosity"
    y_fit, factor = (y * x, x) if on_stress else (y, None)
    curve = fit_curve(model, x, y_fit, starts, objective, factor=factor)
    return PreparedFit(model, x, y, y_fit, factor, objective, curve)


def fit_model(model: Model, shear_rate: np.ndarray, values: np.ndarray,
              objective: Objective = Objective()) -> FitResult:
    """Fit ``model`` to one data set and judge its parameters with the full identifiability
    rule (:func:`prepare_fit`, then :func:`summarise`)."""
    prepared = prepare_fit(model, shear_rate, values, objective)
    return prepared if isinstance(prepared, FitResult) else summarise(prepared)


def profiled(prepared: Sequence[PreparedFit | FitResult]) -> set[int]:
    """Which fits of one run get the profile part of the identifiability rule: those within
    ``PROFILE_MARGIN`` AICc units of the run's best. A fit much worse than the best cannot be
    selected; its parameters are judged by the covariance alone (saves the refits)."""
    aiccs = {i: p.aicc() for i, p in enumerate(prepared) if isinstance(p, PreparedFit)}
    finite = [a for a in aiccs.values() if math.isfinite(a)]
    if not finite:
        return set(aiccs)
    best = min(finite)
    return {i for i, a in aiccs.items() if not a > best + PROFILE_MARGIN}


def summarise(prepared: PreparedFit, profiles: bool = True) -> FitResult:
    """The run-level record of a curve fit: criteria, rmse_log, identified parameters
    (``profiles=False``: the identifiability rule without its profile refits)."""
    model, curve, x, y = prepared.model, prepared.curve, prepared.x, prepared.y
    n, k = len(x), len(model.parameters)
    best = dict(zip(curve.names, curve.values.tolist()))
    objective = prepared.objective
    if objective.space == "log" and objective.weights == "none" and objective.loss == "linear":
        log_residual = curve.residual  # the objective's residuals are ln f − ln y already
    else:
        with np.errstate(all="ignore"):
            log_residual = np.log(np.asarray(model.function(x, **best), dtype=float)) - np.log(y)
    if not curve.success:
        return _without_parameters(model, n, x, f"did not converge: {curve.message}")
    sum_squares = float(log_residual @ log_residual)  # finite only when every residual is
    if not math.isfinite(sum_squares):
        return _without_parameters(model, n, x, "the model gives non-positive or undefined values at the data")
    aicc, bic = information_criteria(curve.rss, n, k)
    verdicts = assess(curve, model.parameters, prepared.profile if profiles else None)
    estimates = tuple(
        ParameterEstimate(spec.name, best[spec.name], float(curve.stderr[j]), spec.unit)
        if verdict.reason is None else
        ParameterEstimate(spec.name, None, None, spec.unit, f"not identified: {verdict.reason}")
        for j, (spec, verdict) in enumerate(zip(model.parameters, verdicts)))
    notes = [f"{spec.name} not identified: {v.reason}" for spec, v in zip(model.parameters, verdicts) if v.reason]
    supported = all(v.reason is None or v.vanishes for v in verdicts)
    if not math.isfinite(aicc):
        notes.append(f"AICc needs more than {k + 2} points: not considered for selection")
    return FitResult(
        model.id, True, n, aicc, bic, math.sqrt(sum_squares / n),
        "; ".join(["converged", *notes]), float(x.min()), float(x.max()), estimates,
        correlations=_correlations(curve), best_fit=best, covariance=curve.covariance,
        fixed=tuple(name for name, at in zip(curve.names, curve.at_bound) if at), supported=supported)


def _without_parameters(model: Model, n: int, x: np.ndarray, message: str) -> FitResult:
    failed = failed_fit(model, n, message)
    return FitResult(failed.model, False, n, None, None, None, message, float(x.min()), float(x.max()),
                     failed.parameters)


def _correlations(curve: CurveFit) -> tuple[tuple[str, str, float], ...]:
    """(name, name, r) for every pair with standard errors: r = C_ij/(σ_i σ_j), clipped to ±1.
    A handful of scalars: plain floats are faster than numpy here."""
    cov, se, names = curve.covariance.tolist(), curve.stderr.tolist(), curve.names
    pairs = []
    for i in range(len(names)):
        for j in range(i + 1, len(names)):
            scale = se[i] * se[j]
            if math.isfinite(cov[i][j]) and math.isfinite(scale) and scale > 0:
                pairs.append((names[i], names[j], min(1.0, max(-1.0, cov[i][j] / scale))))
    return tuple(pairs)

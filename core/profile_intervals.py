"""Profile-likelihood confidence intervals of fitted parameters (``[fit] intervals = "profile"``).

For a parameter p_j the profile is S(v): the least residual sum of squares with p_j held at v
and the other parameters refitted. The 95 % interval is the set of values with

    S(v) ≤ S_min · (1 + F(1, n − k; 0.95) / (n − k))

(likelihood-ratio / F-test inference: Bates & Watts, *Nonlinear Regression Analysis and Its
Applications*, Wiley 1988, §6.1; the same F-test criterion lmfit's ``conf_interval`` uses). For
a model that is linear in its parameters this is exactly the t-distribution interval
p̂ ± t(n − k; 0.975)·stderr; for a nonlinear one it follows the curvature the covariance misses
(an interval need not be symmetric).

Each end is found by stepping out from the covariance interval until the profile crosses the
threshold, then Brent's method (``scipy.optimize.brentq``). A parameter declared ``log_scale``
is searched in ln p (the interval is the same; the search is better conditioned). An end that
reaches the parameter's bound with the profile still below the threshold is that bound (the
data are consistent with it); an end not found within ``MAX_STEPS`` doublings is left null.
Cost: typically 10–20 refits per end, so only the selected model of a run is profiled.
"""

from __future__ import annotations

import math
from dataclasses import replace
from typing import TYPE_CHECKING, Callable

from .identifiability import f_quantile
from .least_squares import fit_curve

if TYPE_CHECKING:
    from .fitting import FitResult, PreparedFit

MAX_STEPS = 12  # doublings of the first step (t·stderr) before an end is given up
X_TOLERANCE = 1e-7  # Brent's tolerance on the end, as a fraction of the first step

__all__ = ["MAX_STEPS", "profile_interval", "with_profile_intervals"]


def profile_interval(prepared: "PreparedFit", name: str) -> tuple[float | None, float | None]:
    """The 95 % profile-likelihood interval (low, high) of parameter ``name``, in its SI unit.

    ``(None, None)`` when the fit has no standard error for it (the first step needs one) or
    no residual degrees of freedom; one end ``None`` when the profile does not reach the
    threshold within ``MAX_STEPS`` doublings and there is no bound to stop at.
    """
    curve, model = prepared.curve, prepared.model
    j = curve.names.index(name)
    spec = model.parameters[j]
    value, stderr = float(curve.values[j]), float(curve.stderr[j])
    dof = curve.n_points - curve.n_free
    if dof <= 0 or not math.isfinite(stderr) or stderr <= 0 or not curve.success:
        return None, None
    quantile = f_quantile(dof)
    threshold = curve.rss * (1.0 + quantile / dof)
    log = spec.log_scale and value > 0
    to_u: Callable[[float], float] = math.log if log else float
    from_u: Callable[[float], float] = math.exp if log else float
    step = math.sqrt(quantile) * (stderr / value if log else stderr)
    starts = {n: float(v) for n, v in zip(curve.names, curve.values)}

    def excess(u: float) -> float:
        held = from_u(u)
        start = dict(last)
        start[name] = held
        refit = fit_curve(model, prepared.x, prepared.y_fit, start, prepared.objective,
                          factor=prepared.factor, fixed={name: held})
        if refit.success and math.isfinite(refit.rss):
            last.update({n: float(v) for n, v in zip(refit.names, refit.values)})
        return refit.rss - threshold

    ends: list[float | None] = []
    for direction, bound in ((-1.0, spec.min), (1.0, spec.max)):
        last = dict(starts)  # warm starts along this side of the profile
        limit = to_u(bound) if math.isfinite(bound) and (not log or bound > 0) else None
        ends.append(_end(excess, to_u(value), direction * step, limit, bound, from_u))
    return ends[0], ends[1]


def _end(excess: Callable[[float], float], centre: float, step: float, limit: float | None,
         bound: float, from_u: Callable[[float], float]) -> float | None:
    """One end of the interval: step out from ``centre`` (doubling), then Brent's method."""
    from scipy.optimize import brentq

    inner = centre
    for _ in range(MAX_STEPS):
        outer = inner + step
        at_limit = limit is not None and (outer - limit) * step >= 0
        if at_limit:
            outer = limit  # type: ignore[assignment]
        if excess(outer) > 0:
            u = brentq(excess, inner, outer, xtol=X_TOLERANCE * abs(step), rtol=1e-12)
            return from_u(u)
        if at_limit:
            return float(bound)  # the profile stays below the threshold up to the bound
        inner, step = outer, 2.0 * step
    return None


def with_profile_intervals(fit: "FitResult", prepared: "PreparedFit") -> "FitResult":
    """``fit`` with ``ci_low``/``ci_high`` of every identified parameter (others stay null)."""
    estimates = []
    for estimate in fit.parameters:
        if estimate.value is None:
            estimates.append(estimate)
            continue
        low, high = profile_interval(prepared, estimate.name)
        estimates.append(replace(estimate, ci_low=low, ci_high=high))
    return replace(fit, parameters=tuple(estimates))

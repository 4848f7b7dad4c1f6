"""Which fitted parameters the data actually determine: the identifiability rule.

A parameter is **identified** when the data fix it within a factor of 2 at about 95 %
confidence. Otherwise it is reported as **not identified** (value null, the reason in the
fit's message). Two kinds of parameter are judged differently:

*Vanishing* parameters (``min = 0`` and not ``log_scale``: a yield stress τ_y, an
infinite-shear viscosity η∞) may be exactly 0, which leaves the simpler model (no yield stress,
no upper plateau). Such a parameter is not identified, **consistent with zero**, when it stopped
at 0, when |value| < 2·stderr, or, for a relative standard error between
``CLEARLY_DETERMINED`` (20 %) and 50 %, when holding it at 0 (the others refitted) raises the
residual sum of squares by less than the 95 % F-test threshold F(1, n − k)·s².

Every other parameter is not identified when:

1. it stopped at a bound of its range: the data push it outside the model's range, and its
   standard error from the covariance means nothing;
2. the Jacobian is singular in its direction: the data cannot separate it from the others;
3. its standard error exceeds half its magnitude (``RELATIVE_STDERR_LIMIT``) — η0 and λ of a
   curve without its lower plateau, an exponent over too short a range;
4. its relative standard error lies between 20 % and 50 % and holding it at half or twice its
   value (the others refitted: a profile) raises the residual sum of squares by less than the
   same F-test threshold. In the linear regime this means a relative standard error above
   ≈ 25 %; along a curved ridge (η0 and λ without a lower plateau) the profile catches what the
   local covariance misses.

Profiles follow Bates & Watts, *Nonlinear Regression Analysis and Its Applications*, Wiley
1988, §6.1 (likelihood-ratio / F-test inference). They cost a refit or two, only for parameters
in the doubtful band (20–50 %, where the linear approximation is near the decision threshold),
and in a study only for fits within 10 AICc units of the run's best (``gammadot.fitting.profiled``):
a fit much worse than the best cannot be selected, and its parameters are judged by the
covariance alone. A fit whose parameters are all identified or
vanish is *supported* by the data (the model selection uses only such fits when there are any:
:mod:`gammadot.model_selection`). The parameter's own ``when_unidentified`` text is added as
the usual physical reason.
"""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass
from typing import Callable, Sequence

from .least_squares import CurveFit
from .records import ModelParameter

RELATIVE_STDERR_LIMIT = 0.5
CLEARLY_DETERMINED = 0.2
PROFILE_FACTORS = (0.5, 2.0)
CONFIDENCE = 0.95

# (parameter name, value held) -> residual sum of squares of the best fit of the others
Profile = Callable[[str, float], float]


@dataclass(frozen=True)
class Verdict:
    """One parameter: ``reason`` is ``None`` when identified; ``vanishes`` when it is not
    identified only because the data are consistent with its being 0 (the simpler model)."""

    reason: str | None
    vanishes: bool = False


def may_vanish(spec: ModelParameter) -> bool:
    """A parameter whose value 0 is the simpler model (a yield stress, η∞)."""
    return spec.min == 0.0 and not spec.log_scale


def assess(curve: CurveFit, specs: Sequence[ModelParameter], profile: Profile | None = None) -> list[Verdict]:
    """The identifiability verdict of every parameter (rule in the module docstring)."""
    verdicts = []
    for j, spec in enumerate(specs):
        verdict = (_vanishing(curve, j, spec, profile) if may_vanish(spec) else _ordinary(curve, j, spec, profile))
        if verdict.reason is not None and spec.when_unidentified:
            verdict = Verdict(f"{verdict.reason} ({spec.when_unidentified})", verdict.vanishes)
        verdicts.append(verdict)
    return verdicts


def _vanishing(curve: CurveFit, j: int, spec: ModelParameter, profile: Profile | None) -> Verdict:
    value, stderr = float(curve.values[j]), float(curve.stderr[j])
    zero = "the data are consistent with 0"
    if curve.at_bound[j] and value <= spec.min:
        return Verdict(f"it stops at 0, {zero}", True)
    if curve.at_bound[j]:
        return Verdict(f"it stops at the bound {_quantity(spec.max, spec.unit)} of its range")
    if curve.unresolved[j] or not math.isfinite(stderr):
        return Verdict("the data cannot separate it from the other parameters")
    if stderr > RELATIVE_STDERR_LIMIT * abs(value):
        return Verdict(f"{_quantity(value, spec.unit)} ± {_quantity(stderr, spec.unit)}: {zero}", True)
    if stderr > CLEARLY_DETERMINED * abs(value) and profile is not None and len(curve.names) > 1:
        if _flat(curve, profile, spec.name, 0.0):
            return Verdict(f"holding it at 0 worsens the fit by less than the 95 % F-test threshold: {zero}", True)
    return Verdict(None)


def _ordinary(curve: CurveFit, j: int, spec: ModelParameter, profile: Profile | None) -> Verdict:
    value, stderr = float(curve.values[j]), float(curve.stderr[j])
    if curve.at_bound[j]:
        bound = spec.min if abs(value - spec.min) <= abs(value - spec.max) else spec.max
        return Verdict(f"it stops at the bound {_quantity(bound, spec.unit)} of its range")
    if curve.unresolved[j] or not math.isfinite(stderr):
        return Verdict("the data cannot separate it from the other parameters")
    if stderr > RELATIVE_STDERR_LIMIT * abs(value):
        return Verdict(f"its standard error {_quantity(stderr, spec.unit)} exceeds half its value "
                       f"{_quantity(value, spec.unit)}")
    if stderr > CLEARLY_DETERMINED * abs(value) and profile is not None and value > 0 and len(curve.names) > 1:
        for factor in PROFILE_FACTORS:
            held = value * factor
            if spec.min <= held <= spec.max and _flat(curve, profile, spec.name, held):
                words = "half" if factor < 1 else "twice"
                return Verdict(f"holding it at {words} its value ({_quantity(held, spec.unit)}) worsens the fit "
                               "by less than the 95 % F-test threshold")
    return Verdict(None)


def _flat(curve: CurveFit, profile: Profile, name: str, held: float) -> bool:
    """True when the best fit with ``name`` held at ``held`` is within the 95 % F-test
    threshold F(1, n − k)·s² of the best fit (Bates & Watts 1988, §6.1)."""
    dof = curve.n_points - curve.n_free
    if dof <= 0:
        return False
    return profile(name, held) - curve.rss < f_quantile(dof) * curve.rss / dof


@functools.lru_cache(maxsize=256)
def f_quantile(dof: int) -> float:
    """F(1, dof) at the ``CONFIDENCE`` level (scipy.stats; cached per degrees of freedom)."""
    from scipy.stats import f as f_distribution

    return float(f_distribution.ppf(CONFIDENCE, 1, dof))


def _quantity(value: float, unit: str) -> str:
    """Three significant digits and the unit (none for a pure number): the same text for the
    same value, so the tables stay byte-identical."""
    return f"{value:.3g}" if unit in ("", "1") else f"{value:.3g} {unit}"

"""Converting a concentric-cylinder run: apparent values, the Krieger wide-gap correction,
and points where the gap is only partly sheared. Shared by every Couette-type geometry
(rheometer cup and bob, direct-indicating viscometer).

Input: speed Ω (rad/s) and inner-wall stress τ_i (Pa) per point, radius ratio δ = R_o/R_i.
Output: a :class:`~gammadot.records.Conversion` whose true values are taken at

- ``"representative"`` (default): the representative radius of ISO 3219 / DIN 53019-1;
  apparent values are τ_rep and γ̇_rep, the true stress is τ_rep (stress at a radius is
  exact for any fluid, τ ∝ r⁻²) and the true rate γ̇(τ_rep) follows from the Krieger
  inner-wall rate carried along the gap with the local power law. For a Newtonian fluid the
  true values equal the apparent ones exactly;
- ``"inner_wall"``: the bob; apparent values are τ_i and the Newtonian (Margules) rate
  2Ωδ²/(δ² − 1), the true rate is Krieger's 2Ω/(n′(1 − δ^{−2/n′})).

A yield-stress material leaves a plug next to the outer wall when τ_o = τ_i/δ² < τ_y
(Reiner–Riwlin regime). There the local power-law correction does not apply: such points keep
their apparent values and are flagged (warning) and kept out of fits. The yield stress comes
from a Herschel–Bulkley fit in the gap and counts only with evidence of a plug
(:func:`plug_yield_stress`), so a liquid whose stress is raised at high speed by Taylor
vortices is not taken for a yield-stress material.
"""

from __future__ import annotations

import numpy as np

from .correction_size import correction_size_results
from .couette import (YieldStressEstimate, estimate_yield_stress, krieger_inner_rate, local_power_law_rate, newtonian_inner_rate,
                      representative_rate, representative_stress_factor)
from .records import Conversion, Finding, Result
from .slopes import log_slopes

__all__ = ["KRIEGER", "VALUES_AT", "convert_couette", "plug_yield_stress"]

KRIEGER = "krieger_wide_gap"
VALUES_AT = ("representative", "inner_wall")
MAX_PLUG_FLOW_INDEX = 1.1  # see plug_yield_stress


def plug_yield_stress(omega: np.ndarray, tau_i: np.ndarray, delta: float) -> YieldStressEstimate | None:
    """The yield-stress estimate that can leave a plug in the gap, or ``None`` without evidence.

    A plug shows as a flow curve that flattens towards a stress plateau at LOW speed. A curve
    that instead bends upwards at high speed (Taylor vortices or other secondary flow in a
    low-viscosity liquid, or shear thickening) can also be fitted with τ_y > 0, but only together
    with a flow index n > 1. So the estimate counts only when it is significant (τ_y > 2σ), its
    flow index is at most ``MAX_PLUG_FLOW_INDEX`` (Herschel–Bulkley materials have n ≤ 1 in
    practice, Bingham n = 1: common practice, with 0.1 allowed for scatter), and, when the
    lower two thirds of the speeds hold at least five points, the same fit on those points alone
    (away from any high-speed disturbance) finds a significant yield stress too.
    """
    estimate = estimate_yield_stress(omega, tau_i, delta)
    if estimate is None or not estimate.significant or estimate.flow_index > MAX_PLUG_FLOW_INDEX:
        return None
    usable = np.flatnonzero(np.isfinite(omega) & np.isfinite(tau_i) & (omega > 0) & (tau_i > 0))
    lower = usable[np.argsort(omega[usable], kind="stable")][: (2 * len(usable)) // 3]
    if len(lower) >= 5:
        confirmation = estimate_yield_stress(omega[lower], tau_i[lower], delta)
        if confirmation is None or not confirmation.significant:
            return None
    return estimate


def _partly_sheared(omega: np.ndarray, tau_i: np.ndarray, delta: float) -> tuple[np.ndarray, list[Finding], tuple[Result, ...]]:
    """Points whose outer-wall stress lies below a yield-stress estimate with evidence of a plug."""
    mask = np.zeros(len(tau_i), dtype=bool)
    estimate = plug_yield_stress(omega, tau_i, delta)
    if estimate is None:
        return mask, [], ()
    with np.errstate(invalid="ignore"):
        outer = tau_i / delta**2
        mask = np.isfinite(outer) & (outer < estimate.value)
    findings = [Finding(
        "geometry.partly_sheared", "warning",
        f"outer-wall stress {outer[i]:.4g} Pa (inner wall {tau_i[i]:.4g} Pa, δ = {delta:.4g}) is below the "
        f"yield-stress estimate {estimate.value:.4g} ± {estimate.stderr:.2g} Pa: the gap is only partly sheared "
        "(unsheared plug at the outer wall, Reiner–Riwlin regime); the wide-gap correction does not apply, "
        "the apparent values are kept and the point is left out of fits",
        point_index=int(i), exclude=True) for i in np.flatnonzero(mask)]
    results: tuple[Result, ...] = ()
    if mask.any():
        results = (Result("yield_stress_estimate", estimate.value, "Pa", stderr=estimate.stderr,
                          method="Herschel–Bulkley Couette relation with plug flow fitted to inner-wall stress "
                                 "against speed",
                          note="used to find partly sheared points; the model fits give the material's "
                               "yield stress"),)
    return mask, findings, results


def convert_couette(omega: np.ndarray, tau_i: np.ndarray, delta: float, *,
                    values_at: str = "representative") -> Conversion:
    """Apparent and corrected stress and rate of a Couette run (SI arrays, see module doc)."""
    if values_at not in VALUES_AT:
        raise ValueError(f"values_at must be one of {', '.join(VALUES_AT)}, not {values_at!r}")
    omega = np.asarray(omega, dtype=float)
    tau_i = np.asarray(tau_i, dtype=float)
    slope = log_slopes(omega, tau_i)  # τ_i ∝ M, so this is n′ = d ln M / d ln Ω
    inner_rate = krieger_inner_rate(omega, slope, delta)
    if values_at == "representative":
        factor = representative_stress_factor(delta)
        apparent_rate, apparent_stress = representative_rate(omega, delta), tau_i * factor
        true_rate = local_power_law_rate(inner_rate, factor, slope)
        where = "at the representative radius (ISO 3219 / DIN 53019-1)"
    else:
        apparent_rate, apparent_stress = newtonian_inner_rate(omega, delta), tau_i.copy()
        true_rate = inner_rate
        where = "at the inner wall"
    partial, notes, results = _partly_sheared(omega, tau_i, delta)
    undefined = ~np.isfinite(true_rate) & ~partial & np.isfinite(apparent_rate)
    notes += [Finding("geometry.slope_undefined", "warning",
                      f"the local slope d ln M/d ln Ω could not be estimated or is not positive "
                      f"({slope[i]:.3g}); the apparent shear rate is kept for this point", point_index=int(i))
              for i in np.flatnonzero(undefined)]
    true_rate = np.where(partial | undefined, apparent_rate, true_rate)
    corrected = ~(partial | undefined)
    method = KRIEGER if corrected.any() else "none"
    if corrected.any():
        finite = slope[corrected & np.isfinite(slope)]
        notes.insert(0, Finding(
            "geometry.wide_gap", "info",
            f"Krieger wide-gap correction from the local slope n′ = d ln M/d ln Ω "
            f"({finite.min():.3g} to {finite.max():.3g}), δ = {delta:.4g}; values {where}"))
    results = correction_size_results(true_rate, apparent_rate, apparent_stress, apparent_stress, method) + results
    return Conversion(shear_rate=true_rate, shear_stress=apparent_stress.copy(),
                      shear_rate_apparent=apparent_rate, shear_stress_apparent=apparent_stress,
                      correction=method, notes=tuple(notes), results=results)

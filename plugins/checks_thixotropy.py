"""Built-in check ``hysteresis_loop``: the area between the rising- and falling-rate curves of a
run that goes up and down in rate, a number for thixotropy.

A thixotropic sample is broken down by shearing, so on the way back down in rate its stress lies
below the way up; the area of the loop, A = ∫τ_up dγ̇ − ∫τ_down dγ̇ over the rates both sweeps
cover, measures the structure lost (Pa/s; Barnes, "Thixotropy — a review", J. Non-Newtonian Fluid Mech.
70 (1997) 1, doi:10.1016/S0377-0257(97)00004-9 — citation from memory; common practice in QC). It depends on the sweep
times, so it compares samples only under one procedure. Negative areas (down above up) mean
structure builds up under shear (anti-thixotropy).

A is the usual number, but on a flow curve spanning decades it is set by the top decade of rate
(dγ̇ is largest there). The message therefore also gives a scale-free measure that weights every
decade alike, the relative loop area in log rate

    a_rel = ∫(τ_up − τ_down) d ln γ̇ / ∫τ_up d ln γ̇      (dimensionless),

the mean fraction by which the falling curve lies below the rising one per decade. For power-law
legs τ = K γ̇ⁿ with one n it is exactly 1 − K_down/K_up, whatever the range.

Each sweep is interpolated linearly onto the union of both sweeps' rates in the common range
(in γ̇ for A, in ln γ̇ for a_rel) and the integrals taken with the trapezoidal rule. The result
is a run-level info finding whose ``value`` is A (Pa/s, to checks.parquet).

When |a_rel| reaches ``relative_area`` (default 10 %) and the study fits both legs together
(``[fit] sweeps = "all"``), a warning says that one model is being fitted across two structural
states. 10 % is judgement: five or more times the 1–2 % scatter of a steady-shear point (common
practice), so two legs that agree within noise never trigger it, while a down curve lying a
tenth below the up curve changes a fitted viscosity by about as much.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from gammadot.config import check_settings
from gammadot.datamodel import Run
from gammadot.hookspecs import hookimpl
from gammadot.records import Check, CheckContext, CheckSetting, Finding
from gammadot.sweeps import Sweep, loop_legs

from .check_inputs import num, percent, setting, usable

CHECK_ID = "hysteresis_loop"

SETTINGS = (
    CheckSetting("relative_area", "dimensionless", 0.10,
                 "relative loop area in log rate above which fitting one model to both legs is warned about",
                 minimum=0.0),
)


@dataclass(frozen=True)
class LoopArea:
    """The loop between a rising and a falling sweep over the rates ``low``–``high`` (1/s):
    ``area`` = ∫τ_up dγ̇ − ∫τ_down dγ̇ (Pa/s) and ``up_area`` = ∫τ_up dγ̇ over the same range;
    ``log_area`` = ∫(τ_up − τ_down) d ln γ̇ and ``up_log_area`` = ∫τ_up d ln γ̇ (Pa)."""

    area: float
    up_area: float
    low: float
    high: float
    log_area: float = float("nan")
    up_log_area: float = float("nan")

    @property
    def relative_log_area(self) -> float:
        """a_rel = ∫(τ_up − τ_down) d ln γ̇ / ∫τ_up d ln γ̇ (1): every decade of rate weighs alike."""
        return self.log_area / self.up_log_area if self.up_log_area > 0 else float("nan")


def _branch(rate: np.ndarray, stress: np.ndarray, sweep: Sweep) -> tuple[np.ndarray, np.ndarray]:
    """A sweep's rates in increasing order (repeats of a held rate averaged) with their stresses."""
    order = sweep.by_rate()
    rates, inverse = np.unique(rate[order], return_inverse=True)
    sums = np.bincount(inverse, weights=stress[order])
    return rates, sums / np.bincount(inverse)


def loop_area(rate: np.ndarray, stress: np.ndarray) -> LoopArea | None:
    """The first up-and-down (or down-and-up) loop of the run, ``None`` without one."""
    found = loop_legs(rate, usable(rate, stress))
    for first, second in zip(found, found[1:]):
        if first.direction == second.direction:
            continue
        up, down = (first, second) if first.direction > 0 else (second, first)
        up_rate, up_stress = _branch(rate, stress, up)
        down_rate, down_stress = _branch(rate, stress, down)
        low, high = max(up_rate[0], down_rate[0]), min(up_rate[-1], down_rate[-1])
        if high <= low:
            continue
        grid = np.unique(np.concatenate([up_rate, down_rate, [low, high]]))
        grid = grid[(grid >= low) & (grid <= high)]
        upper = np.interp(grid, up_rate, up_stress)
        lower = np.interp(grid, down_rate, down_stress)
        # the same grid in ln γ̇, each branch now linear between its points in log rate
        ln_grid = np.log(grid)
        upper_log = np.interp(ln_grid, np.log(up_rate), up_stress)
        lower_log = np.interp(ln_grid, np.log(down_rate), down_stress)
        return LoopArea(float(np.trapezoid(upper - lower, grid)), float(np.trapezoid(upper, grid)), low, high,
                        float(np.trapezoid(upper_log - lower_log, ln_grid)), float(np.trapezoid(upper_log, ln_grid)))
    return None


def significant_loop(rate: np.ndarray, stress: np.ndarray, context: CheckContext) -> LoopArea | None:
    """The run's loop if its relative log area reaches the study's ``[checks.hysteresis_loop]
    relative_area`` (either sign), else ``None``; other checks use it to tell thixotropy apart."""
    loop = loop_area(rate, stress)
    if loop is None:
        return None
    threshold = float(check_settings(context.study, CHECK_ID, SETTINGS)["relative_area"])
    return loop if abs(loop.relative_log_area) >= threshold else None


def find_hysteresis_loop(run: Run, context: CheckContext) -> list[Finding]:
    """A run-level info with the loop area for runs that go up and down in rate, and a warning
    when a significant loop is fitted as one curve (``[fit] sweeps = "all"``)."""
    rate, stress = run.columns.get("shear_rate"), run.columns.get("shear_stress")
    if rate is None or stress is None:
        return []
    loop = loop_area(rate, stress)
    if loop is None:
        return []
    meaning = ("the rising curve lies above the falling one: shearing broke structure down (thixotropy)"
               if loop.area >= 0 else
               "the falling curve lies above the rising one: structure built up under shear (anti-thixotropy)")
    share = loop.area / loop.up_area if loop.up_area > 0 else float("nan")
    relative = loop.relative_log_area
    found = [Finding(
        CHECK_ID, "info",
        f"the rising- and falling-rate curves enclose a hysteresis loop of {num(loop.area)} Pa/s between "
        f"{num(loop.low)} and {num(loop.high)} 1/s ({percent(share)} of the area under the rising curve, "
        f"set mostly by the top decade of rate); weighting every decade alike, the relative loop area in log "
        f"rate ∫(τ_up − τ_down) d ln γ̇ / ∫τ_up d ln γ̇ is {percent(relative)}, and {meaning}",
        value=loop.area, unit="Pa/s")]
    threshold = float(setting(context, SETTINGS, "relative_area"))
    if abs(relative) >= threshold and context.study.fit.sweeps == "all":
        found.append(Finding(
            CHECK_ID, "warning",
            f"the relative loop area in log rate is {percent(relative)} (at least {percent(threshold)}), so the "
            "rising and falling sweeps are two different structural states of the sample, and one model is being "
            "fitted across both: set [fit] sweeps = \"falling\" (the sheared state; or \"rising\", the state "
            "before shearing) to fit one of them",
            value=relative, unit="1"))
    return found


HYSTERESIS_LOOP = Check(
    id=CHECK_ID,
    title="Hysteresis loop area (thixotropy)",
    severity="info",
    run=find_hysteresis_loop,
    settings=SETTINGS,
    reference=("loop area between up and down flow curves, ∫τ dγ̇ (Barnes, J. Non-Newtonian Fluid Mech. 70 (1997) "
               "1, from memory; common practice); relative area in log rate and its 10 % threshold: judgement"),
)


@hookimpl
def gammadot_checks() -> list[Check]:
    """Provide the hysteresis-loop check."""
    return [HYSTERESIS_LOOP]

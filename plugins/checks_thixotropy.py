"""Built-in check ``hysteresis_loop``: the area between the rising- and falling-rate curves of a
run that goes up and down in rate, a number for thixotropy.

A thixotropic sample is broken down by shearing, so on the way back down in rate its stress lies
below the way up; the area of the loop, A = ∫τ_up dγ̇ − ∫τ_down dγ̇ over the rates both sweeps
cover, measures the structure lost (Pa/s; Barnes, "Thixotropy — a review", J. Non-Newtonian Fluid Mech.
70 (1997) 1, doi:10.1016/S0377-0257(97)00004-9 — citation from memory; common practice in QC). It depends on the sweep
times, so it compares samples only under one procedure. Negative areas (down above up) mean
structure builds up under shear (anti-thixotropy).

Each sweep is interpolated linearly in rate onto the union of both sweeps' rates in the common
range and the difference integrated with the trapezoidal rule. The result is a run-level info
finding whose ``value`` (Pa/s) goes to checks.parquet.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from gammadot.datamodel import Run
from gammadot.hookspecs import hookimpl
from gammadot.records import Check, CheckContext, Finding

from .check_inputs import num, percent, usable
from .rate_sweeps import Sweep, sweeps

CHECK_ID = "hysteresis_loop"
MIN_SWEEP_POINTS = 3


@dataclass(frozen=True)
class LoopArea:
    """The loop between a rising and a falling sweep over the rates ``low``–``high`` (1/s):
    ``area`` = ∫τ_up dγ̇ − ∫τ_down dγ̇ (Pa/s) and ``up_area`` = ∫τ_up dγ̇ over the same range."""

    area: float
    up_area: float
    low: float
    high: float


def _branch(rate: np.ndarray, stress: np.ndarray, sweep: Sweep) -> tuple[np.ndarray, np.ndarray]:
    """A sweep's rates in increasing order (repeats of a held rate averaged) with their stresses."""
    order = sweep.by_rate()
    rates, inverse = np.unique(rate[order], return_inverse=True)
    sums = np.bincount(inverse, weights=stress[order])
    return rates, sums / np.bincount(inverse)


def loop_area(rate: np.ndarray, stress: np.ndarray) -> LoopArea | None:
    """The first up-and-down (or down-and-up) loop of the run, ``None`` without one."""
    found = [s for s in sweeps(rate, usable(rate, stress)) if len(s.indices) >= MIN_SWEEP_POINTS]
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
        return LoopArea(float(np.trapezoid(upper - lower, grid)), float(np.trapezoid(upper, grid)), low, high)
    return None


def find_hysteresis_loop(run: Run, context: CheckContext) -> list[Finding]:
    """A run-level info with the loop area, for runs that go up and down in rate."""
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
    return [Finding(
        CHECK_ID, "info",
        f"the rising- and falling-rate curves enclose a hysteresis loop of {num(loop.area)} Pa/s between "
        f"{num(loop.low)} and {num(loop.high)} 1/s ({percent(share)} of the area under the rising curve), and "
        f"{meaning}",
        value=loop.area, unit="Pa/s")]


HYSTERESIS_LOOP = Check(
    id=CHECK_ID,
    title="Hysteresis loop area (thixotropy)",
    severity="info",
    run=find_hysteresis_loop,
    reference=("loop area between up and down flow curves, ∫τ dγ̇ (Barnes, J. Non-Newtonian Fluid Mech. 70 (1997) "
               "1, from memory; common practice)"),
)


@hookimpl
def gammadot_checks() -> list[Check]:
    """Provide the hysteresis-loop check."""
    return [HYSTERESIS_LOOP]

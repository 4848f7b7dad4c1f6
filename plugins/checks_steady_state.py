"""Built-in check ``steady_state``: points not sheared long enough to be steady, and held steps
whose stress (or rate) still drifts.

**Momentum diffusion.** When a wall starts moving, the velocity profile across a gap h develops
by viscous diffusion on the time scale t_ν = ρh²/η. For start-up of plane Couette flow the
fixed-wall stress relative to its steady value is 1 + 2Σ(−1)ⁿ·exp(−n²π²τ*), τ* = t/t_ν, and the
moving-wall stress 1 + 2Σ exp(−n²π²τ*) (Bird, Stewart & Lightfoot, *Transport Phenomena*, 2nd ed.,
unsteady viscous flow examples — example number from memory). On both walls the leading term
2·exp(−π²τ*) dominates, so the stress is within a fraction ε of steady after
τ*_ε = ln(2/ε)/π² (0.53683 for ε = 1 %); the next term is below 1e-9 there. The gap is the
plate gap, αR at the rim of a cone, R_o − R_i between cylinders. A point sheared for less than
τ*_ε·t_ν (with its own viscosity) is left out of the fit.

The shear time of a point comes from ``[checks.steady_state] point_duration`` if set, else from
the time column: consecutive points holding one speed (or rate, within 2 %) form a step; a point's shear time is its
time minus the step's start, the time of the previous step's last point (the first step starts at
0 when times are positive, else one sampling interval before its first point).

**Drift.** Where a step holds several samples (a time column with at least three samples per
held speed or rate), the stress is fitted with a straight line over the step's second half; a
change over that half larger than
``drift_tolerance`` (default 5 %, common practice: the order of the steady-state tolerances used
by rheometers' step controls) is flagged on the step's last point and kept in the fit — a
thixotropic sample drifts by nature, and the operator decides. Exports with one row per step
cannot show drift; only the shear time is checked for them.
"""

from __future__ import annotations

import math

import numpy as np

from gammadot.datamodel import Run
from gammadot.hookspecs import hookimpl
from gammadot.records import Check, CheckContext, CheckSetting, Finding
from gammadot.sweeps import held_steps

from .check_inputs import num, percent, sample_density, setting, usable, with_prefix
from .geometry_facts import geometry_facts

CHECK_ID = "steady_state"
MIN_DRIFT_SAMPLES = 3

SETTINGS = (
    CheckSetting("point_duration", "time", None,
                 "time each point was sheared; overrides the time column (default: from the time column)",
                 minimum=0.0),
    CheckSetting("settling_tolerance", "dimensionless", 0.01,
                 "how close to its steady value the stress must be (1 % needs 0.537 ρh²/η)", minimum=1e-9),
    CheckSetting("drift_tolerance", "dimensionless", 0.05,
                 "largest change of the stress over the second half of a held step", minimum=0.0),
)


def settling_fraction(tolerance: float) -> float:
    """τ*_ε = ln(2/ε)/π²: diffusion times until the wall stress is within ε of steady."""
    return math.log(2.0 / tolerance) / math.pi**2


def find_unsteady_points(run: Run, context: CheckContext) -> list[Finding]:
    """Excluded points sheared for less than τ*_ε·ρh²/η; drifting steps (flagged, kept)."""
    facts = geometry_facts(context.geometry)
    viscosity = run.columns.get("viscosity")
    if facts is None or viscosity is None:
        return []
    density, density_text = sample_density(context)
    tolerance = float(setting(context, SETTINGS, "settling_tolerance"))
    keep = usable(viscosity)
    diffusion = np.where(keep, density * facts.gap**2 / np.where(keep, viscosity, 1.0), np.nan)  # t_ν = ρh²/η (s)
    needed = settling_fraction(tolerance) * diffusion
    steps = _steps(run)
    elapsed = _shear_times(run, steps, setting(context, SETTINGS, "point_duration"))
    basis = (f"{num(settling_fraction(tolerance), 3)} × ρh²/η with gap h = {with_prefix(facts.gap, 'm')}, "
             f"{density_text}")
    if elapsed is None:
        return [_unknown_duration(needed, tolerance, basis)]
    findings = [Finding(
        CHECK_ID, "warning",
        f"the point was sheared for {num(elapsed[i])} s, less than the {num(needed[i])} s the stress needs to come "
        f"within {percent(tolerance)} of steady ({basis}), so it is left out of the fit",
        point_index=int(i), exclude=True, value=float(elapsed[i] / diffusion[i]), unit="1")
        for i in np.flatnonzero(np.isfinite(elapsed) & np.isfinite(needed) & (elapsed < needed))]
    time, stress = run.columns.get("time"), run.columns.get("shear_stress")
    if time is not None and stress is not None:
        drift_limit = float(setting(context, SETTINGS, "drift_tolerance"))
        findings += _drifting_steps(steps, time, stress, drift_limit)
    return findings


def _unknown_duration(needed: np.ndarray, tolerance: float, basis: str) -> Finding:
    longest = float(np.nanmax(needed)) if np.isfinite(needed).any() else math.nan
    return Finding(
        CHECK_ID, "info",
        f"the time each point was sheared is unknown (no time column; set [checks.steady_state] point_duration), "
        f"and the slowest point needs {num(longest)} s to come within {percent(tolerance)} of steady stress "
        f"({basis})", value=longest if math.isfinite(longest) else None, unit="s")


def _steps(run: Run) -> list[np.ndarray]:
    """Points holding one speed (or shear rate): the steps of a controlled-rate flow curve."""
    held = run.columns.get("angular_velocity", run.columns.get("shear_rate_apparent", run.columns.get("shear_rate")))
    return [np.arange(run.n_points)] if held is None else held_steps(held)


def _shear_times(run: Run, steps: list[np.ndarray], duration: float | None) -> np.ndarray | None:
    """Seconds each point had been sheared at its step's value (NaN where the time column
    runs backwards); ``None`` when neither a duration nor a time column is known."""
    if duration is not None:
        return np.full(run.n_points, float(duration))
    time = run.columns.get("time")
    if time is None or len(time) == 0:
        return None
    elapsed = np.full(len(time), np.nan)
    for k, step in enumerate(steps):
        start = time[steps[k - 1][-1]] if k > 0 else _first_start(time)
        with np.errstate(invalid="ignore"):
            values = time[step] - start
        elapsed[step] = np.where(values > 0, values, np.nan)
    return elapsed


def _first_start(time: np.ndarray) -> float:
    """0 when the clock counts from the test's start, else one interval before the first time."""
    if time[0] > 0 or len(time) < 2:
        return 0.0
    return float(time[0] - (time[1] - time[0]))


def _drifting_steps(steps: list[np.ndarray], time: np.ndarray, stress: np.ndarray, limit: float) -> list[Finding]:
    findings = []
    for step in steps:
        drift, span = _drift(time[step], stress[step])
        if drift is None or abs(drift) <= limit:
            continue
        findings.append(Finding(
            CHECK_ID, "warning",
            f"the stress changes by {'+' if drift > 0 else ''}{percent(drift)} over the last {num(span)} s of the "
            f"step at constant rate (points {int(step[0])}–{int(step[-1])}), more than the {percent(limit)} "
            "allowed, so the step had not reached steady state: the point is kept in the fit, but check the "
            "sample for thixotropy, evaporation, settling or slip",
            point_index=int(step[-1]), value=float(drift), unit="1"))
    return findings


def _drift(time: np.ndarray, values: np.ndarray) -> tuple[float | None, float]:
    """Relative change of ``values`` over the step's second half, from a least-squares line
    (``None`` with fewer than three usable samples), and the seconds that half spans."""
    keep = np.isfinite(time) & np.isfinite(values)
    time, values = time[keep], values[keep]
    if len(time) < MIN_DRIFT_SAMPLES:
        return None, 0.0
    late = time >= time[0] + 0.5 * (time[-1] - time[0])
    if late.sum() >= MIN_DRIFT_SAMPLES:
        time, values = time[late], values[late]
    mean = float(np.mean(values))
    span = float(time[-1] - time[0])
    if mean == 0 or span <= 0:
        return None, 0.0
    slope = np.polyfit(time, values, 1)[0]  # least-squares line through the late samples
    return float(slope * span / mean), span


UNSTEADY = Check(
    id=CHECK_ID,
    title="Not at steady state",
    severity="warning",
    run=find_unsteady_points,
    settings=SETTINGS,
    reference=("start-up of plane Couette flow, series solution (Bird, Stewart & Lightfoot, Transport Phenomena, "
               "2nd ed., unsteady viscous flow examples; numbering from memory): 99 % of steady stress at "
               "t = ln(200)/π² · ρh²/η"),
)


@hookimpl
def gammadot_checks() -> list[Check]:
    """Provide the steady-state check."""
    return [UNSTEADY]

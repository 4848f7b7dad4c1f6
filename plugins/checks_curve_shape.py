"""Built-in checks on the shape of a flow curve: ``sample_loss`` and ``non_monotonic``.

In steady shear the stress of a stable, homogeneous flow rises with the shear rate (a
decreasing τ(γ̇) is mechanically unstable; Yerushalmi, Katz & Shinnar, Chem. Eng. Sci. 25 (1970)
1891 — from memory). Two departures are common:

- ``sample_loss``: on cone-plate and parallel plates, at high rates the sample can be flung out of
  the gap or its free edge can fracture. The measured stress then drops suddenly with increasing
  rate, and for good: the sample in the gap is no longer the one loaded (common practice; edge
  fracture: Tanner & Keentok, J. Rheol. 27 (1983) 47 — from memory). Two things look alike and
  are not losses: noise at the torque floor (10–20 % scatter at the low-rate start of a sweep,
  which the curve climbs out of) and structural breakdown of a thixotropic sample (the rising
  sweep bends over and falls, gradually, as the structure is sheared down). So point k of a
  rising-rate sweep (ordered by rate, positions 0…N−1) starts a loss only when all of these hold:

  1. it fell: τ_k < (1 − ``drop``)·min(τ_{k−1}, τ_{k−2}) (default 10 %; against both points
     before it, so one high outlier cannot fake a drop);
  2. it lasts: the next point, if any, is still more than ``drop``/2 below τ_{k−1} (one low
     outlier is not a loss);
  3. it is at the high-rate end: ln γ̇_k lies in the upper half of the sweep's span of ln γ̇
     (inertia that flings sample out and the normal stresses that fracture the free edge both
     grow with rate; torque-floor noise sits at the low end);
  4. it does not recover: none of the (up to) :data:`RECOVERY_POINTS` (3) points after it climbs
     back to within ``drop``/2 of the curve the stress was on before the drop,
     τ_{k−1}·(γ̇/γ̇_{k−1})^s, with s the median local slope d ln τ/d ln γ̇ of the (up to)
     :data:`PRECEDING_STEPS` (8) steps before the drop, taken between 0 (the pre-drop level
     itself) and 1 (a Newtonian rise): a loss is irreversible, a dip in the noise is not. (Only
     the next three points: the remaining sample still rises with rate, and over a decade or
     more an extrapolated slope is no longer a fair yardstick.)
  5. it is abrupt: the change of slope at the drop, b = |d_k − d_{k−1}| with
     d_j = ln τ_j − ln τ_{j−1}, is more than :data:`ABRUPTNESS` (2) times the fall of the slope
     over the three steps before it, d_{k−4} − d_{k−1} (a breakdown bends the curve over several
     points first: its slope was already falling by as much as it falls at the drop; noise
     adds only about 2σ to that difference), and more than :data:`NOISE_Z` (4) times the RMS
     change of slope |d_j − d_{j−1}| over the (up to) :data:`PRECEDING_STEPS` (8) steps before
     it (the scatter of a second difference: noise makes the preceding changes as large as the
     drop). At least two steps before it are needed. A loss is one step on a curve that was
     rising as before.

  It and every later point are left out of the fit. A loss too small to make the stress fall
  (a steep curve measured in coarse steps) is not seen here (the fit-residual check may show
  it), and a structural breakdown completed within one step cannot be told from a loss by the
  curve's shape alone.
- ``non_monotonic``: the stress falls with increasing rate over a range of at least two points,
  by more than ``tolerance`` (default 10 %) below the highest stress before them, on any sweep
  ordered by rate: possible shear banding or wall slip. A run-level warning with the range; points are
  kept (the data are real, a model just cannot describe them). Points already explained by a
  sample loss are not counted again. On the rising sweep of a run whose falling sweep lies below
  it (a significant hysteresis loop, :func:`gammadot.plugins.checks_thixotropy.significant_loop`)
  the message says instead that the fall is most likely structure breaking down with time under
  shear (thixotropy): the stress of a rested sample passes a maximum as it is sheared down
  (Barnes, J. Non-Newtonian Fluid Mech. 70 (1997) 1 — from memory).

Both are made robust to one outlier (an air bubble): a drop must show against the two points
before it and persist at the next, and the falling-curve test runs on the running median of
three points.

Default thresholds: 10 % is about seven times the 1–2 % scatter of a steady-shear point
(common practice), so noise does not trigger them.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from gammadot.datamodel import Run
from gammadot.hookspecs import hookimpl
from gammadot.records import Check, CheckContext, CheckSetting, Finding
from gammadot.sweeps import sweeps

from .check_inputs import num, percent, setting, usable
from .checks_thixotropy import significant_loop
from .geometry_facts import PLATE_TYPES

SAMPLE_LOSS_ID = "sample_loss"
NON_MONOTONIC_ID = "non_monotonic"
MIN_DECREASING_POINTS = 2
# Sample loss (criteria 3–5 of the docstring). Judgement, tried on synthetic curves (1.5 %
# scatter, torque-floor noise, step and rim losses on power-law, Carreau and Herschel–Bulkley
# curves, 240 Moore-type thixotropic loops): the upper half of the log-rate span keeps the noisy
# low-rate start out; a bend twice the fall of the slope over the three steps before it is no
# gradual breakdown; 4 RMS changes of slope stand out of the noise; three points after the drop
# show whether the curve came back.
UPPER_PART = 0.5
ABRUPTNESS = 2.0
LOCAL_STEPS = 4  # d_{k−4} … d_{k−1}: the three steps before the drop
NOISE_Z = 4.0
PRECEDING_STEPS = 8
RECOVERY_POINTS = 3

SAMPLE_LOSS_SETTINGS = (
    CheckSetting("drop", "dimensionless", 0.10,
                 "sudden fall of stress from one point to the next, with rate rising, that marks a sample loss",
                 minimum=0.0),
)
NON_MONOTONIC_SETTINGS = (
    CheckSetting("tolerance", "dimensionless", 0.10,
                 "fall of stress with increasing rate accepted as scatter", minimum=0.0),
)


@dataclass(frozen=True)
class StressDrop:
    """A fall of stress along a sweep ordered by rate: from ``level`` (Pa, at point ``peak``) to
    the stress of point ``low``; ``fraction`` = 1 − τ_low/level."""

    peak: int
    level: float
    low: int
    fraction: float
    rising: bool


def sample_loss_start(rate: np.ndarray, stress: np.ndarray, drop: float) -> StressDrop | None:
    """The first lasting, abrupt, irreversible drop at the high-rate end of a rising-rate sweep
    (``low`` is where the loss starts), or ``None``; the five criteria are in the module's
    docstring. ``rate`` in 1/s, ``stress`` in Pa, ``drop`` a fraction."""
    for sweep in sweeps(rate, usable(rate, stress)):
        if sweep.direction < 0:
            continue
        order = sweep.by_rate()
        log_rate, log_stress = np.log(rate[order]), np.log(stress[order])
        for k in range(2, len(order)):
            if _is_loss(log_rate, log_stress, k, drop):
                previous, now = stress[order[k - 1]], stress[order[k]]
                return StressDrop(int(order[k - 1]), float(previous), int(order[k]), float(1.0 - now / previous), True)
    return None


def _is_loss(x: np.ndarray, y: np.ndarray, k: int, drop: float) -> bool:
    """Whether position ``k`` of a rising sweep (``x`` = ln γ̇ increasing, ``y`` = ln τ) starts a
    sample loss: criteria 1–5 of the module's docstring, cheapest first."""
    fell = y[k] < np.log(1.0 - drop) + min(y[k - 1], y[k - 2])
    lasting = k + 1 == len(y) or y[k + 1] < np.log(1.0 - drop / 2) + y[k - 1]
    high_end = x[k] >= x[0] + UPPER_PART * (x[-1] - x[0])
    if not (fell and lasting and high_end):
        return False
    first = max(1, k - PRECEDING_STEPS)
    steps = np.diff(y[first - 1:k])  # d_j = y_j − y_{j−1} for j = first … k−1
    if len(steps) < 2:
        return False  # no change of slope before it to compare with: a trend needs three points
    slope = float(np.clip(np.median(steps / np.diff(x[first - 1:k])), 0.0, 1.0))
    after = slice(k + 1, k + 1 + RECOVERY_POINTS)
    trend = y[k - 1] + slope * (x[after] - x[k - 1])  # the curve before the drop, carried on
    if np.any(y[after] >= trend + np.log(1.0 - drop / 2)):
        return False  # climbed back to the curve it was on: noise or a transient, not a loss
    bend = abs((y[k] - y[k - 1]) - steps[-1])
    gradual = bend <= ABRUPTNESS * float(steps[-min(LOCAL_STEPS, len(steps))] - steps[-1])
    noisy = bend <= NOISE_Z * math.sqrt(6.0) * _point_scatter(x[first - 1:k], y[first - 1:k])
    return not (gradual or noisy)


def _point_scatter(x: np.ndarray, y: np.ndarray) -> float:
    """The scatter σ of ln τ about the curve over these points (ln γ̇ ``x``, ln τ ``y``): the RMS
    residual of a least-squares parabola in ln γ̇ with its 3 degrees of freedom taken off (a
    smooth flow curve is close to a parabola over a decade or two in log–log; the residuals
    are the noise). With five points or fewer, the RMS second difference over √6 instead (the
    standard deviation of a second difference of independent points of scatter σ is √6·σ)."""
    if len(x) > 5:
        residual = y - np.polyval(np.polyfit(x, y, 2), x)
        return float(np.sqrt(np.sum(residual**2) / (len(x) - 3)))
    return float(np.sqrt(np.mean(np.diff(y, 2) ** 2) / 6.0))


def find_sample_loss(run: Run, context: CheckContext) -> list[Finding]:
    """Excluded point findings from the start of a sample loss to the end of the run."""
    rate, stress = run.columns.get("shear_rate"), run.columns.get("shear_stress")
    if context.geometry is None or context.geometry.type not in PLATE_TYPES or rate is None or stress is None:
        return []
    loss = sample_loss_start(rate, stress, float(setting(context, SAMPLE_LOSS_SETTINGS, "drop")))
    if loss is None:
        return []
    first = Finding(
        SAMPLE_LOSS_ID, "warning",
        f"the stress fell suddenly from {num(loss.level)} Pa at {num(rate[loss.peak])} 1/s to "
        f"{num(stress[loss.low])} Pa at {num(rate[loss.low])} 1/s ({percent(loss.fraction)} lower although the "
        "rate rose; at the high-rate end, in one step and without coming back, unlike noise or a gradual "
        "breakdown), so sample has probably been thrown out of the gap or its edge has fractured: this point "
        "and every later one are left out of the fit",
        point_index=loss.low, exclude=True, value=loss.fraction, unit="1")
    later = [Finding(
        SAMPLE_LOSS_ID, "warning",
        f"measured after the sample loss at {num(rate[loss.low])} 1/s (point {loss.low}), so left out of the fit",
        point_index=i, exclude=True) for i in range(loss.low + 1, run.n_points)]
    return [first, *later]


def _median_of_three(values: np.ndarray) -> np.ndarray:
    """Position of the running median of three (ends: the lower of the first two, the last),
    so that one outlier never stands for the curve (Tukey, Exploratory Data Analysis, 1977)."""
    chosen = np.arange(len(values))
    if len(values) >= 2:
        chosen[0] = 0 if values[0] <= values[1] else 1
    for k in range(1, len(values) - 1):
        window = np.arange(k - 1, k + 2)
        chosen[k] = window[np.argsort(values[window], kind="stable")[1]]
    return chosen


def stress_decreases(rate: np.ndarray, stress: np.ndarray, keep: np.ndarray, tolerance: float) -> list[StressDrop]:
    """The largest fall of stress with increasing rate on each sweep: at least two points in a
    row of the running median of three below (1 − tolerance) × its highest value before them."""
    found = []
    for sweep in sweeps(rate, keep):
        order = sweep.by_rate()
        smooth = order[_median_of_three(stress[order])]  # point indices standing for each position
        best: StressDrop | None = None
        below, top = 0, int(smooth[0])
        for k in range(1, len(smooth)):
            below = below + 1 if stress[smooth[k]] < (1.0 - tolerance) * stress[top] else 0
            if below >= MIN_DECREASING_POINTS:
                fraction = 1.0 - stress[smooth[k]] / stress[top]
                if best is None or fraction > best.fraction:
                    best = StressDrop(top, float(stress[top]), int(smooth[k]), float(fraction), sweep.direction > 0)
            if stress[smooth[k]] > stress[top]:
                top = int(smooth[k])
        if best is not None:
            found.append(best)
    return found


def find_non_monotonic(run: Run, context: CheckContext) -> list[Finding]:
    """A run-level warning per sweep whose stress falls with increasing rate."""
    rate, stress = run.columns.get("shear_rate"), run.columns.get("shear_stress")
    if rate is None or stress is None:
        return []
    keep = usable(rate, stress)
    if context.geometry is not None and context.geometry.type in PLATE_TYPES:
        loss = sample_loss_start(rate, stress, float(setting(context, SAMPLE_LOSS_SETTINGS, "drop")))
        if loss is not None:
            keep[loss.low:] = False  # reported by sample_loss
    tolerance = float(setting(context, NON_MONOTONIC_SETTINGS, "tolerance"))
    loop = significant_loop(rate, stress, context)
    broken_down = loop is not None and loop.relative_log_area > 0  # the falling sweep lies below the rising one
    findings = []
    for d in stress_decreases(rate, stress, keep, tolerance):
        fall = (f"on the {'rising' if d.rising else 'falling'}-rate sweep the stress falls from {num(d.level)} Pa at "
                f"{num(rate[d.peak])} 1/s to {num(stress[d.low])} Pa at {num(rate[d.low])} 1/s ({percent(d.fraction)} "
                f"lower, more than the {percent(tolerance)} tolerance)")
        if d.rising and broken_down:
            cause = (f", and the falling-rate sweep lies below the rising one (relative loop area in log rate "
                     f"{percent(loop.relative_log_area)}), so the fall is most likely the structure breaking down "
                     "with time under shear (thixotropy), not shear banding or wall slip; a steady-shear model "
                     "fitted across this range describes the sample only roughly")
        else:
            cause = (", which points to shear banding or wall slip, so a model fitted across this range describes "
                     "the sample only roughly")
        findings.append(Finding(NON_MONOTONIC_ID, "warning", fall + cause, value=d.fraction, unit="1"))
    return findings


SAMPLE_LOSS = Check(
    id=SAMPLE_LOSS_ID,
    title="Sample loss or edge fracture at high rate",
    severity="warning",
    run=find_sample_loss,
    settings=SAMPLE_LOSS_SETTINGS,
    reference=("common practice (sudden, lasting, irreversible stress drop at high rate on cone-plate and parallel "
               "plates, abrupt against the changes before it); "
               "edge fracture: Tanner & Keentok, J. Rheol. 27 (1983) 47 (from memory)"),
)
NON_MONOTONIC = Check(
    id=NON_MONOTONIC_ID,
    title="Stress falls with increasing rate",
    severity="warning",
    run=find_non_monotonic,
    settings=NON_MONOTONIC_SETTINGS,
    reference=("a decreasing flow curve is mechanically unstable (Yerushalmi, Katz & Shinnar, Chem. Eng. Sci. 25 "
               "(1970) 1891, from memory): shear banding or wall slip; on the rising sweep of a thixotropic loop, "
               "structural breakdown with time (Barnes, J. Non-Newtonian Fluid Mech. 70 (1997) 1, from memory)"),
)


@hookimpl
def gammadot_checks() -> list[Check]:
    """Provide the sample-loss and non-monotonic flow-curve checks."""
    return [SAMPLE_LOSS, NON_MONOTONIC]

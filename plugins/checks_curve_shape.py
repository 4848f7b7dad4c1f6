"""Built-in checks on the shape of a flow curve: ``sample_loss`` and ``non_monotonic``.

In steady shear the stress of a stable, homogeneous flow rises with the shear rate (a
decreasing τ(γ̇) is mechanically unstable; Yerushalmi, Katz & Shinnar, Chem. Eng. Sci. 25 (1970)
1891 — from memory). Two departures are common:

- ``sample_loss``: on cone-plate and parallel plates, at high rates the sample can be flung out of
  the gap or its free edge can fracture. The measured stress then drops suddenly with increasing
  rate (common practice; edge fracture: Tanner & Keentok, J. Rheol. 27 (1983) 47 — from memory).
  On a rising-rate sweep, the first point whose stress lies more than ``drop`` (default 10 %)
  below both points before it, with the next point still more than half that below the point
  before the drop, marks the loss: it and every later point are left out of the fit (the sample
  in the gap is no longer the one loaded). A loss too small to make the stress fall (a steep
  curve measured in coarse steps) is not seen here; the fit-residual check may show it.
- ``non_monotonic``: the stress falls with increasing rate over a range of at least two points,
  by more than ``tolerance`` (default 10 %) below the highest stress before them, on any sweep
  ordered by rate: possible shear banding or wall slip. A run-level warning with the range; points are
  kept (the data are real, a model just cannot describe them). Points already explained by a
  sample loss are not counted again.

Both are made robust to one outlier (an air bubble): a drop must show against the two points
before it and persist at the next, and the falling-curve test runs on the running median of
three points.

Default thresholds: 10 % is about seven times the 1–2 % scatter of a steady-shear point
(common practice), so noise does not trigger them.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from gammadot.datamodel import Run
from gammadot.hookspecs import hookimpl
from gammadot.records import Check, CheckContext, CheckSetting, Finding

from .check_inputs import num, percent, setting, usable
from .geometry_facts import PLATE_TYPES
from .rate_sweeps import sweeps

SAMPLE_LOSS_ID = "sample_loss"
NON_MONOTONIC_ID = "non_monotonic"
MIN_DECREASING_POINTS = 2

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
    """The first lasting sudden drop on a rising-rate sweep (``low`` is where the loss starts).

    Point k starts a loss when, with the rate rising, its stress lies more than ``drop`` below
    both points before it (so one high outlier before it cannot fake a drop) and the next point,
    if any, still lies more than ``drop``/2 below the point before the drop (so one low outlier
    is not taken for a loss).
    """
    for sweep in sweeps(rate, usable(rate, stress)):
        if sweep.direction < 0:
            continue
        order = sweep.by_rate()
        for k in range(2, len(order)):
            before, previous, now = stress[order[k - 2]], stress[order[k - 1]], stress[order[k]]
            fell = now < (1.0 - drop) * min(previous, before)
            lasting = k + 1 == len(order) or stress[order[k + 1]] < (1.0 - drop / 2) * previous
            if fell and lasting:
                return StressDrop(int(order[k - 1]), float(previous), int(order[k]), float(1.0 - now / previous), True)
    return None


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
        "rate rose), so sample has probably been thrown out of the gap or its edge has fractured: this point "
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
    return [Finding(
        NON_MONOTONIC_ID, "warning",
        f"on the {'rising' if d.rising else 'falling'}-rate sweep the stress falls from {num(d.level)} Pa at "
        f"{num(rate[d.peak])} 1/s to {num(stress[d.low])} Pa at {num(rate[d.low])} 1/s ({percent(d.fraction)} "
        f"lower, more than the {percent(tolerance)} tolerance), which points to shear banding or wall slip, so a "
        "model fitted across this range describes the sample only roughly",
        value=d.fraction, unit="1") for d in stress_decreases(rate, stress, keep, tolerance)]


SAMPLE_LOSS = Check(
    id=SAMPLE_LOSS_ID,
    title="Sample loss or edge fracture at high rate",
    severity="warning",
    run=find_sample_loss,
    settings=SAMPLE_LOSS_SETTINGS,
    reference=("common practice (sudden, lasting stress drop at high rate on cone-plate and parallel plates); "
               "edge fracture: Tanner & Keentok, J. Rheol. 27 (1983) 47 (from memory)"),
)
NON_MONOTONIC = Check(
    id=NON_MONOTONIC_ID,
    title="Stress falls with increasing rate",
    severity="warning",
    run=find_non_monotonic,
    settings=NON_MONOTONIC_SETTINGS,
    reference=("a decreasing flow curve is mechanically unstable (Yerushalmi, Katz & Shinnar, Chem. Eng. Sci. 25 "
               "(1970) 1891, from memory): shear banding or wall slip"),
)


@hookimpl
def gammadot_checks() -> list[Check]:
    """Provide the sample-loss and non-monotonic flow-curve checks."""
    return [SAMPLE_LOSS, NON_MONOTONIC]

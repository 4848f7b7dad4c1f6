"""Built-in check ``torque_range``: points measured outside the torque range the instrument
resolves, and the stress and rate window that range gives with the run's geometry.

Below its resolvable minimum a rheometer's torque is mostly bearing friction, drift and noise;
above its maximum the reading saturates or the motor cannot hold the speed. Both limits come
from ``[limits] torque_min`` / ``torque_max`` in study.toml. Without them the defaults below are
used; they are the order of magnitude of current air-bearing research rheometers in steady shear
(common practice, values from memory: specified minima are lower, ~1–10 nN·m, but steady-shear
data are rarely trusted below ~0.1 µN·m; specified maxima are ~0.15–0.3 N·m). Set your
instrument's own figures.

The torque is the export's torque column; for runs with a geometry but no torque column it is
recovered from the apparent stress, M = τ_a/k_τ (:mod:`gammadot.plugins.geometry_facts`).

A run with neither (instrument-computed values and no geometry, or a geometry without a known
stress constant) has no torque to check. For those, and for every other run too, the study may
state the instrument's stress window directly: ``[limits] stress_min`` / ``stress_max`` (Pa).
Points whose |apparent shear stress| lies outside them are flagged and excluded like torque
points (a point already flagged for its torque is not flagged twice). A run where neither the
torque nor a stress limit can be checked gets one information finding saying so and how to
enable the check, so the gap is never silent.
"""

from __future__ import annotations

from typing import Callable

import numpy as np

from gammadot.datamodel import Run
from gammadot.hookspecs import hookimpl
from gammadot.records import Check, CheckContext, Finding

from .check_inputs import num, usable, with_prefix
from .geometry_facts import GeometryFacts, geometry_facts, torque

CHECK_ID = "torque_range"
DEFAULT_TORQUE_MIN = 0.1e-6  # N·m (see module docstring: common practice, from memory)
DEFAULT_TORQUE_MAX = 0.2  # N·m


def torque_limits(context: CheckContext) -> tuple[float, float]:
    """(M_min, M_max) in N·m: study.toml ``[limits]`` or the documented defaults."""
    limits = context.study.limits
    return (float(limits.get("torque_min", DEFAULT_TORQUE_MIN)),
            float(limits.get("torque_max", DEFAULT_TORQUE_MAX)))


def stress_limits(context: CheckContext) -> tuple[float | None, float | None]:
    """(τ_min, τ_max) in Pa from study.toml ``[limits] stress_min`` / ``stress_max``; ``None``
    where the study sets none (there is no default: the window depends on the geometry)."""
    limits = context.study.limits
    low, high = limits.get("stress_min"), limits.get("stress_max")
    return (None if low is None else float(low)), (None if high is None else float(high))


def find_torque_out_of_range(run: Run, context: CheckContext) -> list[Finding]:
    """A point finding (excluded) per torque outside ``[limits] torque_min``/``torque_max``
    (N·m) and per apparent stress outside ``[limits] stress_min``/``stress_max`` (Pa), plus the
    run's window; one information finding when neither can be checked."""
    facts = geometry_facts(context.geometry)
    values, measured = torque(run, facts)
    findings = [] if values is None else _torque_points(values, measured, context)
    flagged = {f.point_index for f in findings}
    stress = run.columns.get("shear_stress_apparent", run.columns.get("shear_stress"))
    stress_low, stress_high = stress_limits(context)
    stress_checked = stress is not None and (stress_low is not None or stress_high is not None)
    if stress_checked:
        findings += [f for f in _stress_points(stress, stress_low, stress_high) if f.point_index not in flagged]
    if values is None and not stress_checked:
        findings.append(_not_checked(context))
    if facts is not None and values is not None:
        low, high = torque_limits(context)
        findings.append(_window(run, facts, low, high))
    return findings


def _torque_points(values: np.ndarray, measured: bool, context: CheckContext) -> list[Finding]:
    """A finding (excluded) per point whose |torque| (N·m) is outside the torque limits."""
    low, high = torque_limits(context)
    source = "torque" if measured else "torque (from the stress and the geometry)"
    return (_beyond(values, np.abs(values) < low, "warning",
                    lambda v: f"{source} {v} is below the resolvable minimum {with_prefix(low, 'N·m')} ([limits] "
                              "torque_min), so the stress here is mostly instrument noise", "N·m")
            + _beyond(values, np.abs(values) > high, "error",
                      lambda v: f"{source} {v} is above the instrument's maximum {with_prefix(high, 'N·m')} "
                                "([limits] torque_max), so the reading is saturated", "N·m"))


def _stress_points(stress: np.ndarray, low: float | None, high: float | None) -> list[Finding]:
    """A finding (excluded) per point whose |apparent shear stress| (Pa) is outside the limits."""
    magnitude = np.abs(stress)
    findings = []
    if low is not None:
        findings += _beyond(stress, magnitude < low, "warning",
                            lambda v: f"apparent shear stress {v} is below the lowest stress the instrument "
                                      f"resolves, {with_prefix(low, 'Pa')} ([limits] stress_min), so the reading "
                                      "here is mostly instrument noise", "Pa")
    if high is not None:
        findings += _beyond(stress, magnitude > high, "error",
                            lambda v: f"apparent shear stress {v} is above the instrument's maximum "
                                      f"{with_prefix(high, 'Pa')} ([limits] stress_max), so the reading is "
                                      "saturated", "Pa")
    return sorted(findings, key=lambda f: f.point_index)


def _beyond(values: np.ndarray, outside: np.ndarray, severity: str, says: Callable[[str], str],
            unit: str) -> list[Finding]:
    """One excluded point finding per ``outside`` point: ``says(value with unit)`` and why the
    point is left out of the fit."""
    return [Finding(CHECK_ID, severity, f"{says(with_prefix(values[i], unit))} and the point is left out of the fit",
                    point_index=int(i), exclude=True, value=float(values[i]), unit=unit)
            for i in np.flatnonzero(outside)]


def _not_checked(context: CheckContext) -> Finding:
    """Run-level info: why the torque range could not be checked, and how to enable it."""
    geometry = context.geometry
    if geometry is None:
        why = "the run has no torque column and no geometry (it uses the instrument's own shear stress)"
        enable = "name the run's geometry in study.toml ([geometries.<id>] and the export's geometry line)"
    else:
        why = (f"the run has no torque column and its geometry {geometry.id} ({geometry.type}) gives no torque "
               "from the stress")
        enable = "export the torque column if the instrument records one"
    return Finding(CHECK_ID, "info",
                   f"the torque range was not checked: {why}, so points below the instrument's resolution or "
                   f"above its maximum would go unnoticed; to check them set [limits] stress_min and stress_max "
                   f"(the instrument's stress window with this measuring system, in Pa) or {enable}")


def _window(run: Run, facts: GeometryFacts, low: float, high: float) -> Finding:
    """Run-level info: the stress window k_τ·[M_min, M_max], and the rate window it gives at
    the viscosity measured at each end of the curve (γ̇ = τ/η; beyond the measured range the
    sample's viscosity is unknown, so this is an estimate)."""
    stress_low, stress_high = facts.stress_per_torque * low, facts.stress_per_torque * high
    text = (f"with {facts.title} the torque range {with_prefix(low, 'N·m')} to {with_prefix(high, 'N·m')} "
            f"measures shear stress {num(stress_low)} to {num(stress_high)} Pa")
    rate, viscosity = run.columns.get("shear_rate"), run.columns.get("viscosity")
    keep = usable(rate, viscosity) if rate is not None and viscosity is not None else None
    if keep is not None and keep.any():
        order = np.flatnonzero(keep)[np.argsort(rate[keep])]
        eta_first, eta_last = viscosity[order[0]], viscosity[order[-1]]
        text += (f", which at this sample's viscosity ({num(eta_first)} Pa·s at the lowest rate, "
                 f"{num(eta_last)} Pa·s at the highest) is shear rate {num(stress_low / eta_first)} to "
                 f"{num(stress_high / eta_last)} 1/s")
    return Finding(CHECK_ID, "info", text)


TORQUE_RANGE = Check(
    id=CHECK_ID,
    title="Torque or stress outside the instrument's range",
    severity="warning",
    run=find_torque_out_of_range,
    reference=("instrument torque and stress limits from study.toml [limits]; torque defaults: common practice "
               "for air-bearing rheometers (order of magnitude, from memory); stress constants: Macosko, "
               "Rheology (1994) ch. 5"),
)


@hookimpl
def gammadot_checks() -> list[Check]:
    """Provide the torque-range check."""
    return [TORQUE_RANGE]

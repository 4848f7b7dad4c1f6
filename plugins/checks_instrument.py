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
Runs with neither (instrument values, no geometry) are not checked.
"""

from __future__ import annotations

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


def find_torque_out_of_range(run: Run, context: CheckContext) -> list[Finding]:
    """A point finding (excluded) per torque outside the limits, plus the run's window."""
    facts = geometry_facts(context.geometry)
    values, measured = torque(run, facts)
    if values is None:
        return []
    low, high = torque_limits(context)
    source = "torque" if measured else "torque (from the stress and the geometry)"
    findings = []
    for index in np.flatnonzero(np.abs(values) < low):
        findings.append(Finding(
            CHECK_ID, "warning",
            f"{source} {with_prefix(values[index], 'N·m')} is below the resolvable minimum "
            f"{with_prefix(low, 'N·m')} ([limits] torque_min), so the stress here is mostly instrument noise "
            "and the point is left out of the fit",
            point_index=int(index), exclude=True, value=float(values[index]), unit="N·m"))
    for index in np.flatnonzero(np.abs(values) > high):
        findings.append(Finding(
            CHECK_ID, "error",
            f"{source} {with_prefix(values[index], 'N·m')} is above the instrument's maximum "
            f"{with_prefix(high, 'N·m')} ([limits] torque_max), so the reading is saturated and the point "
            "is left out of the fit",
            point_index=int(index), exclude=True, value=float(values[index]), unit="N·m"))
    if facts is not None:
        findings.append(_window(run, facts, low, high))
    return findings


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
    title="Torque outside the instrument's range",
    severity="warning",
    run=find_torque_out_of_range,
    reference=("instrument torque limits from study.toml [limits]; defaults: common practice for air-bearing "
               "rheometers (order of magnitude, from memory); stress constants: Macosko, Rheology (1994) ch. 5"),
)


@hookimpl
def gammadot_checks() -> list[Check]:
    """Provide the torque-range check."""
    return [TORQUE_RANGE]

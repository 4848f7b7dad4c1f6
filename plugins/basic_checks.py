"""Built-in check ``invalid_point``: points without a finite, positive shear rate and stress.

Such points cannot lie on a flow curve in log–log space (zero speed at a step start,
a missing cell, a negative torque offset at rest) and are kept out of fits.
"""

from __future__ import annotations

import numpy as np

from gammadot.datamodel import Run
from gammadot.hookspecs import hookimpl
from gammadot.records import Check, CheckContext, Finding


def find_invalid_points(run: Run, context: CheckContext) -> list[Finding]:
    """One finding per point whose shear rate or shear stress is missing, zero or negative."""
    rate = run.columns.get("shear_rate")
    stress = run.columns.get("shear_stress")
    if rate is None or stress is None:
        return []
    findings = []
    for index in np.flatnonzero(~(np.isfinite(rate) & np.isfinite(stress) & (rate > 0) & (stress > 0))):
        findings.append(Finding(
            "invalid_point", "warning",
            f"shear rate {rate[index]:.4g} 1/s and shear stress {stress[index]:.4g} Pa: "
            "a flow-curve point needs both finite and positive",
            point_index=int(index), exclude=True))
    return findings


INVALID_POINT = Check(
    id="invalid_point",
    title="Missing, zero or negative shear rate or stress",
    severity="warning",
    run=find_invalid_points,
    reference="common practice: steady-shear flow curves are analysed on log–log axes",
)


@hookimpl
def gammadot_checks() -> list[Check]:
    """Provide the invalid-point check."""
    return [INVALID_POINT]

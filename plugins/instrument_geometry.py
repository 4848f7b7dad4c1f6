"""Pass-through geometry ``instrument``: use the shear rate, stress and viscosity the
instrument computed, for runs that name no geometry (or have no torque and speed).

Values are taken as they are (no correction is possible without torque, speed and the
geometry's dimensions); the missing one of stress and viscosity follows from τ = η·γ̇.
"""

from __future__ import annotations

import numpy as np

from gammadot.datamodel import Run
from gammadot.hookspecs import hookimpl
from gammadot.records import Conversion, GeometryType


def convert_instrument(run: Run, geometry: object | None) -> Conversion | None:
    """Instrument values as both apparent and true values; ``None`` without rate and stress/viscosity."""
    rate = run.columns.get("shear_rate")
    stress = run.columns.get("shear_stress")
    viscosity = run.columns.get("viscosity")
    if rate is None or (stress is None and viscosity is None):
        return None
    if stress is None:
        stress = viscosity * rate
    return Conversion(shear_rate=rate, shear_stress=stress, shear_rate_apparent=rate.copy(),
                      shear_stress_apparent=stress.copy(), correction="none")


INSTRUMENT = GeometryType(
    id="instrument",
    title="Instrument-computed values (pass-through)",
    parameters=(),
    convert=convert_instrument,
)


@hookimpl(trylast=True)
def gammadot_geometries() -> list[GeometryType]:
    """Provide the pass-through geometry."""
    return [INSTRUMENT]

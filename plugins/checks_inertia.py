"""Built-in check ``secondary_flow``: points where the sample's inertia has turned the simple
shear flow of the geometry into a secondary flow, so the torque no longer measures viscosity.

Per point, with ρ from ``[study] density`` (or 1000 kg/m³, said in the message), Ω the speed and
η the point's measured viscosity:

- concentric cylinders, inner cylinder turning: Re = ρΩR_i d/η against the critical Reynolds
  number of Taylor-vortex onset for the radius ratio (:mod:`gammadot.plugins.taylor_couette`;
  Taylor 1923). With the outer cylinder turning the flow is stable: nothing is flagged.
- cone-plate: the secondary-flow parameter R̃ = ρΩα²R²/(12η) at the rim (Sdougos, Bussolari &
  Dewey, "Secondary flow and turbulence in a cone-and-plate device", J. Fluid Mech. 138 (1984)
  379 — title checked; the form of R̃ and the threshold are from memory): secondary flow changes
  the torque noticeably above R̃ ≈ 0.5.
- parallel plates: Re = ρΩh²/η. Between a turning and a fixed disk the exact similarity
  solution of the Navier–Stokes equations (von Kármán's form, u_r = rΩF(z), u_θ = rΩG(z)),
  expanded for small Re, gives the wall stress on the turning plate (ηΩr/h)·(1 + (3/700)·Re²)
  and on the fixed plate (ηΩr/h)·(1 − (2/1575)·Re²) (derived here; the test checks both
  coefficients with a numerical boundary-value solution). The default limit Re = 2 keeps the
  inertial change of the turning-plate stress below 1.7 %.

Flagged points are left out of the fit (the physics of the measurement no longer holds).
Instrument-value runs (no geometry) are not checked.
"""

from __future__ import annotations

from typing import Callable

import numpy as np

from gammadot.datamodel import Run
from gammadot.hookspecs import hookimpl
from gammadot.records import Check, CheckContext, CheckSetting, Finding

from .check_inputs import num, percent, sample_density, setting, usable
from .geometry_facts import (CONCENTRIC_CYLINDER, CONE_PLATE, PARALLEL_PLATE, GeometryFacts, angular_velocity,
                             geometry_facts)
from .taylor_couette import SMALLEST_TABULATED_RATIO, critical_reynolds

CHECK_ID = "secondary_flow"
TURNING_PLATE_COEFFICIENT = 3.0 / 700.0  # inertial change of the turning-plate stress / Re² (derived, see above)

SETTINGS = (
    CheckSetting("cone_plate_limit", "dimensionless", 0.5,
                 "largest rim secondary-flow parameter ρΩα²R²/(12η) accepted on a cone-plate "
                 "(Sdougos et al. 1984, from memory)", minimum=0.0),
    CheckSetting("parallel_plate_limit", "dimensionless", 2.0,
                 "largest Reynolds number ρΩh²/η accepted on parallel plates "
                 "(1.7 % inertial change of the turning-plate stress)", minimum=0.0),
)


def find_secondary_flow(run: Run, context: CheckContext) -> list[Finding]:
    """Point findings (excluded) where the geometry's inertia criterion is exceeded."""
    facts = geometry_facts(context.geometry)
    viscosity = run.columns.get("viscosity")
    if facts is None or viscosity is None:
        return []
    speed = angular_velocity(run, facts)
    if speed is None:
        return []
    density, density_text = sample_density(context)
    keep = usable(speed, viscosity)
    # ρΩ/η per point (1/m²); 0 where a value is missing, so such points never exceed a limit
    inertia = np.where(keep, density * speed / np.where(keep, viscosity, 1.0), 0.0)
    if facts.kind == CONCENTRIC_CYLINDER:
        criterion = _taylor_vortices(facts, inertia, density_text)
    elif facts.kind == CONE_PLATE:
        criterion = _cone_plate(facts, inertia, density_text, float(setting(context, SETTINGS, "cone_plate_limit")))
    elif facts.kind == PARALLEL_PLATE:
        criterion = _parallel_plate(facts, inertia, density_text,
                                    float(setting(context, SETTINGS, "parallel_plate_limit")))
    else:
        criterion = None
    if criterion is None:
        return []
    number, limit, explain = criterion
    return [Finding(CHECK_ID, "warning", explain(float(number[i])), point_index=int(i), exclude=True,
                    value=float(number[i]), unit="1") for i in np.flatnonzero(number > limit)]


# A geometry's criterion: the dimensionless number per point, its limit, and the sentence for a
# point above the limit (given the point's number).
Criterion = tuple[np.ndarray, float, Callable[[float], str]]


def _taylor_vortices(facts: GeometryFacts, inertia: np.ndarray, density_text: str) -> Criterion | None:
    if facts.rotating != "inner" or facts.outer_radius is None:
        return None  # outer cylinder turning: centrifugally stable (Rayleigh), no vortices
    ratio = facts.radius / facts.outer_radius
    limit = critical_reynolds(ratio)
    note = "" if ratio >= SMALLEST_TABULATED_RATIO else f", the value at {SMALLEST_TABULATED_RATIO} as an estimate"
    return inertia * facts.radius * facts.gap, limit, lambda reynolds: (
        f"Reynolds number ρΩR_i·d/η = {num(reynolds)} is above {num(limit, 4)}, where Taylor vortices start "
        f"between cylinders of radius ratio {num(ratio, 4)} turning on the inside ({density_text}{note}), so the "
        "torque overstates the viscosity and the point is left out of the fit")


def _cone_plate(facts: GeometryFacts, inertia: np.ndarray, density_text: str, limit: float) -> Criterion:
    angle = facts.cone_angle or 0.0
    return inertia * angle**2 * facts.radius**2 / 12.0, limit, lambda parameter: (
        f"secondary-flow parameter ρΩα²R²/(12η) = {num(parameter)} at the cone rim is above {num(limit)} "
        f"({density_text}), so inertia drives a secondary flow that raises the torque and the point is left "
        "out of the fit")


def _parallel_plate(facts: GeometryFacts, inertia: np.ndarray, density_text: str, limit: float) -> Criterion:
    return inertia * facts.gap**2, limit, lambda reynolds: (
        f"Reynolds number ρΩh²/η = {num(reynolds)} is above {num(limit)} ({density_text}), so inertia adds "
        f"about {percent(TURNING_PLATE_COEFFICIENT * reynolds ** 2)} to the turning plate's stress, drives a "
        "secondary flow, and the point is left out of the fit")


SECONDARY_FLOW = Check(
    id=CHECK_ID,
    title="Inertia: Taylor vortices or secondary flow",
    severity="warning",
    run=find_secondary_flow,
    settings=SETTINGS,
    reference=("Taylor, Phil. Trans. R. Soc. A 223 (1923) 289, doi:10.1098/rsta.1923.0008 (critical values by "
               "radius ratio from a Chebyshev eigen-solver); Sdougos, Bussolari & Dewey, J. Fluid Mech. 138 "
               "(1984) 379 (cone-plate, threshold from memory); two-disk similarity solution, expanded for small "
               "Reynolds number (parallel plates, derived here)"),
)


@hookimpl
def gammadot_checks() -> list[Check]:
    """Provide the secondary-flow check."""
    return [SECONDARY_FLOW]

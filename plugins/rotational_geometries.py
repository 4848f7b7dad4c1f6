"""Rotational geometries: torque M (N·m) and angular velocity Ω (rad/s) to stress and rate.

This module gives the standard Newtonian ("apparent") relations for each geometry:

- cone-plate (small angle): γ̇ = Ω/α, τ = 3M/(2πR³) — uniform in the gap, so exact for any
  fluid in the small-angle limit (Macosko, *Rheology*, 1994, ch. 5);
- parallel plate: rim rate γ̇_R = ΩR/h, apparent rim stress τ_a = 2M/(πR³) (Newtonian);
- concentric cylinder: inner-wall stress τ_i = M/(2πR_i²L·c_L), Newtonian inner-wall rate
  γ̇_i = 2Ωδ²/(δ² − 1) with δ = R_o/R_i (Margules; Bird, Stewart & Lightfoot 2nd ed. §3.6).

Non-Newtonian corrections (wide gap, Weissenberg–Rabinowitsch) are not applied here: the
run's findings say so, and the true values equal the apparent ones.
"""

from __future__ import annotations

import math

import numpy as np

from gammadot.config import GeometryConfig
from gammadot.datamodel import Run
from gammadot.hookspecs import hookimpl
from gammadot.records import Conversion, Finding, GeometryParameter, GeometryType

_NOT_CORRECTED = Finding(
    "geometry.uncorrected", "info",
    "apparent (Newtonian) stress and rate are reported; no non-Newtonian correction was applied")


def _torque_speed(run: Run) -> tuple[np.ndarray, np.ndarray] | None:
    torque = run.columns.get("torque")
    speed = run.columns.get("angular_velocity")
    if torque is None or speed is None:
        return None
    return torque, speed


def convert_cone_plate(run: Run, geometry: GeometryConfig | None) -> Conversion | None:
    """Cone-plate, small angle: γ̇ = Ω/α, τ = 3M/(2πR³) (no correction needed)."""
    raw = _torque_speed(run)
    if raw is None or geometry is None:
        return None
    torque, speed = raw
    radius, angle = float(geometry.values["radius"]), float(geometry.values["cone_angle"])
    rate = speed / angle
    stress = 3.0 * torque / (2.0 * math.pi * radius**3)
    extra = {}
    force = run.columns.get("normal_force")
    if force is not None:
        extra["first_normal_stress_difference"] = 2.0 * force / (math.pi * radius**2)
    return Conversion(rate, stress, rate.copy(), stress.copy(), correction="none", extra_columns=extra)


def convert_parallel_plate(run: Run, geometry: GeometryConfig | None) -> Conversion | None:
    """Parallel plate: rim rate ΩR/h and apparent (Newtonian) rim stress 2M/(πR³)."""
    raw = _torque_speed(run)
    if raw is None or geometry is None:
        return None
    torque, speed = raw
    radius, gap = float(geometry.values["radius"]), float(geometry.values["gap"])
    rate = speed * radius / gap
    stress = 2.0 * torque / (math.pi * radius**3)
    return Conversion(rate, stress, rate.copy(), stress.copy(), correction="none", notes=(_NOT_CORRECTED,))


def convert_concentric_cylinder(run: Run, geometry: GeometryConfig | None) -> Conversion | None:
    """Concentric cylinder: inner-wall stress and Newtonian inner-wall rate (Margules)."""
    raw = _torque_speed(run)
    if raw is None or geometry is None:
        return None
    torque, speed = raw
    v = geometry.values
    r_i, r_o, length = float(v["inner_radius"]), float(v["outer_radius"]), float(v["immersed_length"])
    delta = r_o / r_i
    stress = torque / (2.0 * math.pi * r_i**2 * length * float(v["end_factor"]))
    rate = 2.0 * speed * delta**2 / (delta**2 - 1.0)
    return Conversion(rate, stress, rate.copy(), stress.copy(), correction="none", notes=(_NOT_CORRECTED,))


_LENGTH = "length"
CONE_PLATE = GeometryType(
    id="cone_plate", title="Cone and plate", convert=convert_cone_plate,
    parameters=(
        GeometryParameter("radius", _LENGTH, description="cone radius"),
        GeometryParameter("cone_angle", "angle", description="angle between cone and plate"),
        GeometryParameter("truncation", _LENGTH, required=False, description="gap at the truncated tip"),
    ))
PARALLEL_PLATE = GeometryType(
    id="parallel_plate", title="Parallel plates", convert=convert_parallel_plate,
    parameters=(
        GeometryParameter("radius", _LENGTH, description="plate radius"),
        GeometryParameter("gap", _LENGTH, description="distance between the plates"),
    ))
CONCENTRIC_CYLINDER = GeometryType(
    id="concentric_cylinder", title="Concentric cylinders", convert=convert_concentric_cylinder,
    parameters=(
        GeometryParameter("inner_radius", _LENGTH, description="bob radius"),
        GeometryParameter("outer_radius", _LENGTH, description="cup radius"),
        GeometryParameter("immersed_length", _LENGTH, description="immersed (effective) bob length"),
        GeometryParameter("end_factor", "dimensionless", required=False, default=1.0,
                          description="end-effect factor c_L multiplying the length"),
        GeometryParameter("rotating", "text", required=False, default="inner", choices=("inner", "outer"),
                          description="which cylinder turns"),
    ))


@hookimpl
def gammadot_geometries() -> list[GeometryType]:
    """Provide cone-plate, parallel-plate and concentric-cylinder geometries."""
    return [CONE_PLATE, PARALLEL_PLATE, CONCENTRIC_CYLINDER]

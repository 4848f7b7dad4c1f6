"""Rotational geometries: torque M (N·m), angular velocity Ω (rad/s) and normal force F (N)
to true shear stress and shear rate, with the standard corrections.

- cone-plate (small angle): γ̇ = Ω/α and τ = 3M/(2πR³) are uniform in the gap, so exact for
  any fluid; N₁ = 2F/(πR²) when normal force is present (Macosko, *Rheology*, VCH 1994,
  ch. 5). The truncation gap is recorded as a run result;
- parallel plate: rim rate γ̇_R = ΩR/h; the apparent (Newtonian) rim stress 2M/(πR³) is
  corrected with Weissenberg–Rabinowitsch, τ_R = M/(2πR³)·(3 + d ln M/d ln γ̇_R), and
  N₁ − N₂ = F/(πR²)·(2 + d ln F/d ln γ̇_R) (Macosko 1994 ch. 5; Bird, Armstrong & Hassager,
  *Dynamics of Polymeric Liquids* Vol. 1, 2nd ed., ch. 10). A run's ``gap:`` metadata wins
  over study.toml;
- concentric cylinder: inner-wall stress M/(2πR_i²L·c_L), ISO 3219 / DIN 53019-1
  representative values as apparent values, and the Krieger wide-gap correction with
  partly sheared gaps flagged (:mod:`gammadot.wide_gap`).

Local slopes come from :func:`gammadot.slopes.log_slopes`. Every conversion reports the size
of its correction (:mod:`gammadot.correction_size`).
"""

from __future__ import annotations

import math

import numpy as np

from gammadot.config import GeometryConfig
from gammadot.correction_size import correction_size_results
from gammadot.couette import inner_wall_stress
from gammadot.datamodel import Run
from gammadot.hookspecs import hookimpl
from gammadot.records import Conversion, Finding, GeometryParameter, GeometryType, Result
from gammadot.slopes import log_slopes
from gammadot.wide_gap import VALUES_AT, convert_couette

WEISSENBERG_RABINOWITSCH = "weissenberg_rabinowitsch"


def _torque_speed(run: Run) -> tuple[np.ndarray, np.ndarray] | None:
    torque = run.columns.get("torque")
    speed = run.columns.get("angular_velocity")
    if torque is None or speed is None:
        return None
    return torque, speed


def convert_cone_plate(run: Run, geometry: GeometryConfig | None) -> Conversion | None:
    """Cone-plate, small angle: γ̇ = Ω/α, τ = 3M/(2πR³), N₁ = 2F/(πR²); no correction needed."""
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
    results = correction_size_results(rate, rate, stress, stress, "none",
                                      note="cone-plate: uniform shear in the gap, no correction needed")
    truncation = geometry.values.get("truncation")
    if truncation is not None:
        results += (Result("truncation_gap", float(truncation), "m", method="study.toml",
                           note=f"gap at the flattened cone tip (tip radius {float(truncation) / angle * 1e3:.3g} mm)"),)
    return Conversion(rate, stress, rate.copy(), stress.copy(), correction="none", extra_columns=extra,
                      results=results)


def _gap_result(run: Run, gap: float) -> Result:
    from_run = run.metadata.get("gap") is not None
    return Result("gap", gap, "m", method="run metadata" if from_run else "study.toml",
                  note="the run's own gap line wins over study.toml" if from_run else "")


def convert_parallel_plate(run: Run, geometry: GeometryConfig | None) -> Conversion | None:
    """Parallel plate: rim rate ΩR/h and the Weissenberg–Rabinowitsch rim stress; N₁ − N₂."""
    raw = _torque_speed(run)
    if raw is None or geometry is None:
        return None
    torque, speed = raw
    radius, gap = float(geometry.values["radius"]), float(geometry.values["gap"])
    rate = speed * radius / gap
    apparent = 2.0 * torque / (math.pi * radius**3)
    slope = log_slopes(rate, torque)
    stress = torque / (2.0 * math.pi * radius**3) * (3.0 + slope)
    undefined = ~np.isfinite(stress) & np.isfinite(apparent)
    stress = np.where(undefined, apparent, stress)
    notes = [Finding("geometry.slope_undefined", "warning",
                     "the local slope d ln M/d ln γ̇_R could not be estimated; the apparent rim stress is kept "
                     "for this point", point_index=int(i)) for i in np.flatnonzero(undefined)]
    corrected = np.isfinite(slope)
    method = WEISSENBERG_RABINOWITSCH if corrected.any() else "none"
    if corrected.any():
        notes.insert(0, Finding("geometry.weissenberg_rabinowitsch", "info",
                                f"rim stress corrected with Weissenberg–Rabinowitsch, local slope "
                                f"d ln M/d ln γ̇_R from {np.nanmin(slope[corrected]):.3g} to "
                                f"{np.nanmax(slope[corrected]):.3g}; gap {gap * 1e3:.4g} mm"))
    extra = {}
    force = run.columns.get("normal_force")
    if force is not None:
        force_slope = log_slopes(rate, force)
        with np.errstate(invalid="ignore"):
            extra["normal_stress_difference_12"] = force / (math.pi * radius**2) * (2.0 + force_slope)
    results = correction_size_results(rate, rate, stress, apparent, method) + (_gap_result(run, gap),)
    return Conversion(rate, stress, rate.copy(), apparent, correction=method, notes=tuple(notes),
                      extra_columns=extra, results=results)


def convert_concentric_cylinder(run: Run, geometry: GeometryConfig | None) -> Conversion | None:
    """Concentric cylinder: ISO representative (apparent) values and the Krieger correction."""
    raw = _torque_speed(run)
    if raw is None or geometry is None:
        return None
    torque, speed = raw
    v = geometry.values
    r_i, r_o, length = float(v["inner_radius"]), float(v["outer_radius"]), float(v["immersed_length"])
    if not r_o > r_i:
        raise ValueError(f"outer_radius ({r_o * 1e3:g} mm) must exceed inner_radius ({r_i * 1e3:g} mm)")
    tau_i = inner_wall_stress(torque, r_i, length, float(v["end_factor"]))
    return convert_couette(speed, tau_i, r_o / r_i, values_at=str(v.get("values_at", "representative")))


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
                          description="which cylinder turns (the steady-flow relations are the same)"),
        GeometryParameter("values_at", "text", required=False, default="representative", choices=VALUES_AT,
                          description="radius of the reported values: ISO representative radius or the inner wall"),
    ))


@hookimpl
def gammadot_geometries() -> list[GeometryType]:
    """Provide cone-plate, parallel-plate and concentric-cylinder geometries."""
    return [CONE_PLATE, PARALLEL_PLATE, CONCENTRIC_CYLINDER]

"""Geometry ``direct_indicating``: a multi-speed rotor–bob viscometer read on a dial.

The outer sleeve (rotor) turns at a set speed N (rpm), the bob hangs on a torsion spring and
the dial shows its deflection θ (degrees). Runs carry ``Speed [rpm]`` and ``Dial reading [-]``.

Constants (study.toml ``[geometries.<id>]``, all optional, in this order of precedence):

- ``shear_rate_factor`` (a bare number: shear rate in 1/s per rpm) and ``stress_factor``
  (stress per dial degree, e.g. ``"0.511 Pa"``);
- else the dimensions: ``rotor_radius`` and ``bob_radius`` give the Newtonian bob rate
  (2π/60)·2R_r²/(R_r² − R_b²) per rpm; ``spring_constant`` (torque per dial degree, e.g.
  ``"386 dyn*cm"``), ``bob_radius``, ``bob_length`` and ``end_factor`` give k/(2πR_b²L·c_L);
- else the standard R1-B1 rotor–bob with F1 spring: 1.7023 s⁻¹ per rpm and 0.511 Pa per
  degree (API RP 13D).

The apparent values are the standard's bob values (rate = factor·N, stress = factor·θ). The
gap is a concentric-cylinder gap (δ = R_r/R_b = 1.0678 for R1-B1, or from the rate factor),
so the same Krieger wide-gap correction and partly-sheared-gap check as for a rheometer
cup and bob apply (:mod:`gammadot.wide_gap`), with values at the bob. The field results of
API RP 13D (plastic viscosity, yield point, ...) come from the dial readings themselves
(:mod:`gammadot.field_rheology`).
"""

from __future__ import annotations

import math

import numpy as np

from gammadot.config import GeometryConfig
from gammadot.datamodel import Run
from gammadot.field_rheology import (STANDARD_RATE_PER_RPM, STANDARD_SPEEDS, STANDARD_STRESS_PER_DEGREE,
                                     field_results)
from gammadot.hookspecs import hookimpl
from gammadot.records import Conversion, Finding, GeometryParameter, GeometryType
from gammadot.wide_gap import convert_couette

RPM = 2.0 * math.pi / 60.0  # rad/s per rpm
SPEED_TOLERANCE = 0.02  # a reading belongs to a standard speed within ±2 %


def _value(values: dict, name: str) -> float | None:
    value = values.get(name)
    return None if value is None else float(value)


def rate_factor(values: dict) -> tuple[float, str]:
    """Shear rate per rpm (1/s) and where it came from."""
    factor = _value(values, "shear_rate_factor")
    if factor is not None:
        return factor, "shear_rate_factor"
    rotor, bob = _value(values, "rotor_radius"), _value(values, "bob_radius")
    if rotor is not None or bob is not None:
        if rotor is None or bob is None or not rotor > bob:
            raise ValueError("the shear rate from dimensions needs rotor_radius > bob_radius")
        return RPM * 2.0 * rotor**2 / (rotor**2 - bob**2), "rotor_radius and bob_radius"
    return STANDARD_RATE_PER_RPM, "R1-B1 (API RP 13D)"


def stress_factor(values: dict) -> tuple[float, str]:
    """Stress per dial degree (Pa) and where it came from."""
    factor = _value(values, "stress_factor")
    if factor is not None:
        return factor, "stress_factor"
    spring = _value(values, "spring_constant")
    if spring is not None:
        bob, length = _value(values, "bob_radius"), _value(values, "bob_length")
        if bob is None or length is None:
            raise ValueError("the stress from spring_constant needs bob_radius and bob_length")
        end = _value(values, "end_factor") or 1.0
        return spring / (2.0 * math.pi * bob**2 * length * end), "spring_constant and bob dimensions"
    return STANDARD_STRESS_PER_DEGREE, "F1 spring (API RP 13D)"


def radius_ratio(rate_per_rpm: float) -> float:
    """δ² from the Newtonian bob rate per rpm: c = 2δ²/(δ² − 1) with c = factor/(2π/60)."""
    c = rate_per_rpm / RPM
    if not c > 2.0:
        raise ValueError(f"shear_rate_factor {rate_per_rpm:g} 1/s per rpm is too small for a rotor–bob gap")
    return math.sqrt(c / (c - 2.0))


def standard_readings(rpm: np.ndarray, dial: np.ndarray) -> dict[float, float]:
    """Mean dial reading at each standard speed found in the run (within ±2 % of the speed)."""
    readings = {}
    for speed in STANDARD_SPEEDS:
        at = np.isfinite(rpm) & np.isfinite(dial) & (np.abs(rpm / speed - 1.0) <= SPEED_TOLERANCE)
        if at.any():
            readings[speed] = float(np.mean(dial[at]))
    return readings


def convert_direct_indicating(run: Run, geometry: GeometryConfig | None) -> Conversion | None:
    """Dial readings and speeds to stress and rate; the field results as run results."""
    dial = run.columns.get("dial_reading")
    speed = run.columns.get("angular_velocity")
    if dial is None or speed is None or geometry is None:
        return None
    values = dict(geometry.values)
    per_rpm, rate_source = rate_factor(values)
    per_degree, stress_source = stress_factor(values)
    delta = (_value(values, "rotor_radius") or 0.0) / (_value(values, "bob_radius") or 1.0)
    if rate_source != "rotor_radius and bob_radius":
        delta = radius_ratio(per_rpm)
    conversion = convert_couette(speed, per_degree * dial, delta, values_at="inner_wall")
    rpm = speed / RPM
    note = Finding("geometry.direct_indicating", "info",
                   f"dial constants: {per_rpm:.5g} 1/s per rpm ({rate_source}), {per_degree:.4g} Pa per degree "
                   f"({stress_source}); radius ratio {delta:.5g}")
    results = conversion.results + tuple(field_results(standard_readings(rpm, dial), per_rpm, per_degree))
    return Conversion(conversion.shear_rate, conversion.shear_stress, conversion.shear_rate_apparent,
                      conversion.shear_stress_apparent, correction=conversion.correction,
                      notes=(note,) + conversion.notes, results=results)


_OPTIONAL = dict(required=False)
DIRECT_INDICATING = GeometryType(
    id="direct_indicating", title="Direct-indicating multi-speed viscometer (rotor–bob, dial)",
    convert=convert_direct_indicating,
    parameters=(
        GeometryParameter("shear_rate_factor", "dimensionless", **_OPTIONAL,
                          description="shear rate at the bob in 1/s per rpm (R1-B1: 1.7023)"),
        GeometryParameter("stress_factor", "pressure", **_OPTIONAL,
                          description="shear stress at the bob per dial degree (F1 spring: 0.511 Pa)"),
        GeometryParameter("rotor_radius", "length", **_OPTIONAL, description="inside radius of the rotor sleeve"),
        GeometryParameter("bob_radius", "length", **_OPTIONAL, description="bob radius"),
        GeometryParameter("bob_length", "length", **_OPTIONAL, description="bob length"),
        GeometryParameter("spring_constant", "torque", **_OPTIONAL, description="spring torque per dial degree"),
        GeometryParameter("end_factor", "dimensionless", **_OPTIONAL,
                          description="end-effect factor multiplying the bob length"),
    ))


@hookimpl
def gammadot_geometries() -> list[GeometryType]:
    """Provide the direct-indicating viscometer geometry."""
    return [DIRECT_INDICATING]

"""Torque-range check: points outside the instrument's torque range, and the window it gives.

Oracles: the small-angle cone-plate and parallel-plate relations τ = 3M/(2πR³), τ_a = 2M/(πR³)
(Macosko, Rheology: Principles, Measurements and Applications, 1994, ch. 5) and the Margules
inner-wall stress τ_i = M/(2πR_i²L) (Bird, Stewart & Lightfoot 2nd ed. §3.6), written out here.
"""

from __future__ import annotations

import math
import re

import numpy as np
import pytest

from gammadot.plugins.checks_instrument import DEFAULT_TORQUE_MAX, DEFAULT_TORQUE_MIN, find_torque_out_of_range

from check_helpers import (concentric_cylinder, cone_plate, context_for, excluded, flow_columns, make_run,
                           parallel_plate)


def _cone_run(torque: np.ndarray, radius: float = 0.025, angle_deg: float = 1.0):
    geometry = cone_plate(radius, angle_deg)
    speed = np.geomspace(0.01, 10.0, len(torque))
    rate = speed / math.radians(angle_deg)
    stress = 3 * torque / (2 * math.pi * radius**3)
    return make_run(flow_columns(rate, stress, torque=torque, angular_velocity=speed)), geometry


def test_points_below_the_minimum_and_above_the_maximum_torque_are_excluded() -> None:
    torque = np.array([0.02e-6, 0.08e-6, 0.5e-6, 1e-3, 0.15, 0.25, 0.4])
    run, geometry = _cone_run(torque)
    findings = find_torque_out_of_range(run, context_for("torque_range", geometry=geometry))
    assert excluded(findings) == [0, 1, 5, 6]
    low = [f for f in findings if f.point_index in (0, 1)]
    high = [f for f in findings if f.point_index in (5, 6)]
    assert all(f.severity == "warning" and "0.1 µN·m" in f.message for f in low)
    assert all(f.severity == "error" and "0.2 N·m" in f.message for f in high)
    assert low[0].value == pytest.approx(0.02e-6) and low[0].unit == "N·m"


def test_limits_from_study_toml_replace_the_defaults() -> None:
    torque = np.array([0.02e-6, 0.08e-6, 0.5e-6, 1e-3, 0.15])
    run, geometry = _cone_run(torque)
    context = context_for("torque_range", geometry=geometry, limits={"torque_min": 1e-6, "torque_max": 0.1})
    assert excluded(find_torque_out_of_range(run, context)) == [0, 1, 2, 4]


def test_points_inside_the_range_are_not_flagged_and_the_window_follows_from_the_geometry() -> None:
    torque = np.geomspace(1e-6, 1e-2, 8)
    run, geometry = _cone_run(torque, radius=0.025, angle_deg=1.0)
    findings = find_torque_out_of_range(run, context_for("torque_range", geometry=geometry))
    (window,) = findings
    assert window.severity == "info" and window.point_index is None
    stress_low = 3 * DEFAULT_TORQUE_MIN / (2 * math.pi * 0.025**3)   # 0.00306 Pa
    stress_high = 3 * DEFAULT_TORQUE_MAX / (2 * math.pi * 0.025**3)  # 6110 Pa
    low, high = map(float, re.search(r"shear stress (\S+) to (\S+) Pa", window.message).groups())
    assert (low, high) == pytest.approx((stress_low, stress_high), rel=5e-3)  # printed to 3 significant digits
    # the rate window at the viscosity measured at each end of the curve: γ̇ = τ/η
    viscosity = run.columns["viscosity"]
    rate_low, rate_high = map(float, re.search(r"shear rate (\S+) to (\S+) 1/s", window.message).groups())
    assert (rate_low, rate_high) == pytest.approx((stress_low / viscosity[0], stress_high / viscosity[-1]), rel=5e-3)


@pytest.mark.parametrize(("geometry", "stress_per_torque"), [
    (parallel_plate(radius=0.0125, gap=1e-3), 2 / (math.pi * 0.0125**3)),
    (concentric_cylinder(inner=0.014, outer=0.0152, length=0.042), 1 / (2 * math.pi * 0.014**2 * 0.042)),
])
def test_torque_is_recovered_from_the_stress_when_the_export_has_none(geometry, stress_per_torque) -> None:
    torque = np.array([0.05e-6, 2e-6, 1e-3, 0.3])
    rate = np.geomspace(0.1, 100.0, 4)
    run = make_run(flow_columns(rate, stress_per_torque * torque))  # stress only, no torque column
    findings = find_torque_out_of_range(run, context_for("torque_range", geometry=geometry))
    assert excluded(findings) == [0, 3]
    assert findings[0].value == pytest.approx(0.05e-6, rel=1e-9)
    assert "from the stress" in findings[0].message


def test_instrument_values_without_torque_or_geometry_are_not_checked() -> None:
    rate = np.geomspace(0.1, 100.0, 4)
    assert find_torque_out_of_range(make_run(flow_columns(rate, 1e-9 * rate)), context_for("torque_range")) == []

"""Steady-state check against the series solution of start-up of plane Couette flow.

Oracle: the fixed-wall stress after a wall starts moving, relative to its steady value,
S(τ*) = 1 + 2Σ(−1)ⁿ exp(−n²π²τ*), τ* = νt/h² (Bird, Stewart & Lightfoot, Transport Phenomena,
2nd ed., unsteady viscous flow examples — example number from memory), summed here and solved
for S = 0.99 with a root finder, independently of the check's closed form.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.linalg import expm
from scipy.optimize import brentq

from gammadot.plugins.checks_steady_state import SETTINGS, find_unsteady_points, settling_fraction

from check_helpers import context_for, cone_plate, excluded, flagged, flow_columns, make_run, parallel_plate


def fixed_wall_stress(tau: float, terms: int = 200) -> float:
    """S(τ*) = 1 + 2Σ_{n=1..terms} (−1)ⁿ exp(−n²π²τ*)."""
    n = np.arange(1, terms + 1)
    return float(1 + 2 * np.sum((-1.0) ** n * np.exp(-(n**2) * np.pi**2 * tau)))


def time_to_99_percent() -> float:
    """τ* at which the series reaches 99 % of the steady stress."""
    return brentq(lambda tau: fixed_wall_stress(tau) - 0.99, 0.1, 2.0, xtol=1e-12)


def test_series_agrees_with_a_numerical_solution_of_the_start_up_problem() -> None:
    # u_τ = u_yy on 0 < y < 1, u(0) = 0, u(1) = 1, u = 0 at τ = 0 (the same problem in units of h and
    # h²/ν), discretised by central differences (method of lines) and integrated exactly with
    # scipy's matrix exponential: u(τ) = u_ss + exp(Aτ)(u(0) − u_ss); wall stress ∝ ∂u/∂y at y = 0.
    n = 200
    dy = 1.0 / n
    a = (np.diag(np.full(n - 1, -2.0)) + np.diag(np.ones(n - 2), 1) + np.diag(np.ones(n - 2), -1)) / dy**2
    steady = np.linspace(0.0, 1.0, n + 1)[1:-1]
    for tau in (0.2, 0.5, 1.0):
        u = steady + expm(a * tau) @ (0.0 - steady)
        wall = (4 * u[0] - u[1]) / (2 * dy)  # second-order one-sided difference, u(0) = 0
        assert wall == pytest.approx(fixed_wall_stress(tau), abs=1e-4)  # O(dy²) ≈ 3e-5 here


def test_settling_fraction_equals_the_series_time_to_99_percent() -> None:
    # the closed form keeps only the leading term; the n = 2 term (≈ 1e-9 in stress) moves τ* by ~2e-8
    assert settling_fraction(0.01) == pytest.approx(time_to_99_percent(), rel=1e-7)
    assert time_to_99_percent() == pytest.approx(0.53683, abs=1e-5)


def _plate_run(durations: np.ndarray, viscosity: float, gap: float) -> tuple:
    geometry = parallel_plate(radius=0.025, gap=gap)
    rate = np.geomspace(1.0, 100.0, len(durations))
    time = np.cumsum(durations)  # time at the end of each point, counted from the start of the test
    return make_run(flow_columns(rate, viscosity * rate, time=time)), geometry


def test_a_point_sheared_shorter_than_the_99_percent_time_is_flagged_and_a_longer_one_is_not() -> None:
    viscosity, gap, density = 1e-3, 1e-3, 1000.0
    diffusion = density * gap**2 / viscosity  # t_ν = ρh²/η = 1 s
    needed = time_to_99_percent() * diffusion
    durations = np.array([0.9, 1.1, 0.95, 1.05, 2.0, 0.5]) * needed
    run, geometry = _plate_run(durations, viscosity, gap)
    findings = find_unsteady_points(run, context_for("steady_state", SETTINGS, geometry=geometry, density=density))
    assert excluded(findings) == [0, 2, 5]
    # the stress at that shear time, from the series, is indeed short of 99 %
    for f in findings:
        assert fixed_wall_stress(durations[f.point_index] / diffusion) < 0.99
        assert f.value == pytest.approx(durations[f.point_index] / diffusion)


def test_viscous_sample_with_ordinary_step_times_is_not_flagged() -> None:
    run, geometry = _plate_run(np.full(10, 10.0), viscosity=1.0, gap=1e-3)
    assert find_unsteady_points(run, context_for("steady_state", SETTINGS, geometry=geometry)) == []


def test_cone_plate_uses_the_rim_gap_and_the_point_duration_setting() -> None:
    # h = αR at the rim: 25 mm × 2° = 0.873 mm; water-like: t_ν = ρh²/η = 0.761 s, 99 %: 0.409 s
    geometry = cone_plate(radius=0.025, angle_deg=2.0)
    rate = np.geomspace(1.0, 100.0, 6)
    run = make_run(flow_columns(rate, 1e-3 * rate))  # no time column
    gap = 0.025 * math.radians(2.0)
    needed = time_to_99_percent() * 1000.0 * gap**2 / 1e-3
    short = context_for("steady_state", SETTINGS, geometry=geometry, settings={"point_duration": 0.9 * needed})
    long = context_for("steady_state", SETTINGS, geometry=geometry, settings={"point_duration": 1.1 * needed})
    assert excluded(find_unsteady_points(run, short)) == list(range(6))
    assert find_unsteady_points(run, long) == []


def test_without_time_the_run_gets_the_needed_time_as_information() -> None:
    geometry = parallel_plate(radius=0.025, gap=1e-3)
    rate = np.geomspace(1.0, 100.0, 6)
    run = make_run(flow_columns(rate, 1e-3 * rate))
    (finding,) = find_unsteady_points(run, context_for("steady_state", SETTINGS, geometry=geometry))
    assert finding.severity == "info" and finding.point_index is None
    assert finding.value == pytest.approx(time_to_99_percent() * 1.0, rel=1e-6)  # ρh²/η = 1 s


def _sampled_run(stress_of_time) -> tuple:
    """Two held rates, 20 samples each 1 s apart (a time column with several samples per step)."""
    geometry = parallel_plate(radius=0.025, gap=1e-3)
    t_step = np.arange(1.0, 21.0)
    time = np.concatenate([t_step, 20.0 + t_step])
    rate = np.repeat([10.0, 20.0], 20)
    stress = np.concatenate([stress_of_time(t_step, 10.0), stress_of_time(t_step, 20.0)])
    return make_run(flow_columns(rate, stress, time=time)), geometry


def test_stress_drifting_within_a_held_step_is_flagged_but_kept() -> None:
    # τ(t) = τ_ss·(1 + 0.5·exp(−t/15 s)): still relaxing at the end of a 20 s step (thixotropic breakdown)
    run, geometry = _sampled_run(lambda t, rate: 2.0 * rate * (1 + 0.5 * np.exp(-t / 15.0)))
    findings = find_unsteady_points(run, context_for("steady_state", SETTINGS, geometry=geometry))
    assert flagged(findings) == [19, 39] and excluded(findings) == []
    # reported change over the second half (t = 10.5…20 s) vs the analytic change of the same function
    late = np.arange(11.0, 21.0)
    curve = 1 + 0.5 * np.exp(-late / 15.0)
    assert findings[0].value == pytest.approx((curve[-1] - curve[0]) / curve.mean(), rel=0.1)


def test_steady_samples_within_a_step_are_not_flagged() -> None:
    rng = np.random.default_rng(5)
    run, geometry = _sampled_run(lambda t, rate: 2.0 * rate * (1 + 0.01 * rng.standard_normal(t.size)))
    assert find_unsteady_points(run, context_for("steady_state", SETTINGS, geometry=geometry)) == []


def test_runs_without_a_geometry_are_not_checked() -> None:
    rate = np.geomspace(1.0, 100.0, 6)
    run = make_run(flow_columns(rate, 1e-3 * rate, time=np.arange(1.0, 7.0) * 0.01))
    assert find_unsteady_points(run, context_for("steady_state", SETTINGS)) == []

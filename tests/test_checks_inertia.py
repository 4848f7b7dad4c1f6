"""Secondary-flow check: Taylor vortices, cone-plate and parallel-plate inertia.

Oracles: an eigen-solver of the linear stability of circular Couette flow written here (Chebyshev
collocation, the axisymmetric equations as in Chandrasekhar, Hydrodynamic and Hydromagnetic
Stability, 1961, ch. VII — chapter from memory), the widely cited Re_c = 68.19 at η_r = 0.5
(from memory), the narrow-gap limits 1695 (exact profile) and 1708 (mean-rotation approximation;
equal to the Rayleigh–Bénard value 1707.76 for rigid walls, from memory), and scipy's
boundary-value solver for the flow between a turning and a fixed disk.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.integrate import solve_bvp
from scipy.linalg import eig
from scipy.optimize import minimize_scalar

from gammadot.plugins.checks_inertia import SETTINGS, TURNING_PLATE_COEFFICIENT, find_secondary_flow
from gammadot.plugins.taylor_couette import critical_reynolds, critical_taylor_number

from check_helpers import (concentric_cylinder, cone_plate, context_for, excluded, flow_columns, make_run,
                           parallel_plate)

WATER_20C_VISCOSITY = 1.0016e-3  # Pa·s, IAPWS 2008 (Huber et al., J. Phys. Chem. Ref. Data 38 (2009) 101)
WATER_20C_DENSITY = 998.21  # kg/m³, IAPWS-95 at 0.101325 MPa


# --------------------------------------------------------------------------- independent eigen-solver


def _chebyshev(n: int) -> tuple[np.ndarray, np.ndarray]:
    """Chebyshev differentiation matrix and points on [-1, 1] (Trefethen, Spectral Methods in MATLAB, 2000, cheb.m)."""
    x = np.cos(np.pi * np.arange(n + 1) / n)
    c = np.hstack([2.0, np.ones(n - 1), 2.0]) * (-1.0) ** np.arange(n + 1)
    dx = x[:, None] - x[None, :]
    d = np.outer(c, 1.0 / c) / (dx + np.eye(n + 1))
    return d - np.diag(d.sum(axis=1)), x


def _reynolds_squared(k: float, eta: float, mean_rotation: bool = False, n: int = 32) -> float:
    """Smallest Re² = (ΩR_i d/ν)² of a neutral axisymmetric mode of axial wavenumber k·d.

    Inner cylinder turning, outer at rest; lengths in units of d. Equations (stationary marginal
    state): (DD* − k²)²u = Re²·k²·c(r)·w, (DD* − k²)w = u with c ∝ (R_i²/r² − η²)·η²/(1 − η²)²,
    u = Du = w = 0 at both walls. ``mean_rotation`` replaces c(r) by its gap average.
    """
    d, s = _chebyshev(n)
    xi = eta / (1.0 - eta)
    x = xi + (s + 1.0) / 2.0
    d1 = 2.0 * d
    eye = np.eye(n + 1)
    inv_x = np.diag(1.0 / x)
    lap = d1 @ d1 + inv_x @ d1 - inv_x @ inv_x - k**2 * eye  # D D* − k², D* = D + 1/r
    profile = xi**2 / x**2 - eta**2
    if mean_rotation:
        grid = np.linspace(xi, xi + 1.0, 20001)
        profile = np.full_like(profile, np.mean(xi**2 / grid**2 - eta**2))
    c = 4.0 * eta**2 / (xi**2 * (1.0 - eta**2) ** 2) * profile
    m = n + 1
    a, b = np.zeros((2 * m, 2 * m)), np.zeros((2 * m, 2 * m))
    a[:m, :m] = lap @ lap
    b[:m, m:] = -k**2 * np.diag(c)
    a[m:, :m], a[m:, m:] = -eye, lap
    for row, vector in ((0, eye[0]), (n, eye[n]), (1, d1[0]), (n - 1, d1[n])):  # u = Du = 0
        a[row], b[row] = 0.0, 0.0
        a[row, :m] = vector
    for row in (m, m + n):  # w = 0
        a[row], b[row] = 0.0, 0.0
        a[row, row] = 1.0
    values = eig(a, b, right=False)
    values = values[np.isfinite(values)]
    real = values[np.abs(values.imag) < 1e-6 * np.abs(values.real)].real
    return float(real[real > 0].min())


def _eigen_critical_reynolds(eta: float, mean_rotation: bool = False) -> float:
    result = minimize_scalar(lambda k: _reynolds_squared(k, eta, mean_rotation), bracket=(2.5, 3.1, 3.8), tol=1e-7)
    return math.sqrt(result.fun)


# --------------------------------------------------------------------------- Taylor criterion


def test_critical_reynolds_at_radius_ratio_half_is_the_classical_value() -> None:
    # Re_c = 68.19 at η_r = 0.5: the widely cited value (from memory); the eigen-solver here agrees
    assert critical_reynolds(0.5) == pytest.approx(68.19, abs=0.01)
    assert _eigen_critical_reynolds(0.5) == pytest.approx(68.19, abs=0.01)


@pytest.mark.parametrize("eta", [0.6, 0.75, 0.85, 0.935, 0.97, 0.995])
def test_critical_reynolds_between_table_nodes_matches_an_independent_eigen_solver(eta: float) -> None:
    # The check interpolates a table; the solver above is computed afresh for ratios between nodes.
    assert critical_reynolds(eta) == pytest.approx(_eigen_critical_reynolds(eta), rel=0.01)


def test_narrow_gap_limit_is_1695_exact_and_1708_in_the_mean_rotation_approximation() -> None:
    # Chandrasekhar's narrow-gap T_c = 3389.9 (outer at rest; from memory) with T = 4Re²(1−η)/(1+η)
    # gives Ta = Re²(1−η)/η = T_c(1+η)/(4η) → 1694.95 as η → 1.
    eta = 0.9999
    assert critical_taylor_number(eta) == pytest.approx(3389.9 * (1 + eta) / (4 * eta), rel=1e-3)
    # The classical 1708 is the same limit with the rotation profile replaced by its mean
    # (Rayleigh–Bénard, rigid walls: 1707.76, from memory): the solver reproduces both.
    exact = _eigen_critical_reynolds(eta) ** 2 * (1 - eta) / eta
    mean = _eigen_critical_reynolds(eta, mean_rotation=True) ** 2 * (1 - eta) / eta
    assert exact == pytest.approx(1695.0, rel=2e-3)
    assert mean == pytest.approx(1707.76, rel=2e-3)
    assert critical_taylor_number(eta) == pytest.approx(exact, rel=2e-3)


def _couette_water_run(speeds: np.ndarray) -> tuple:
    """Water at 20 °C between ISO 3219 cylinders (R_i = 12.5 mm, δ = 1.0847; ratios from memory),
    Newtonian inner-wall rate γ̇ = 2Ωδ²/(δ²−1) (Margules; Bird, Stewart & Lightfoot 2nd ed. §3.6)."""
    geometry = concentric_cylinder()
    delta = geometry.values["outer_radius"] / geometry.values["inner_radius"]
    rate = 2 * speeds * delta**2 / (delta**2 - 1)
    run = make_run(flow_columns(rate, WATER_20C_VISCOSITY * rate, angular_velocity=speeds))
    return run, geometry


def test_taylor_vortices_are_flagged_above_the_eigen_solver_onset_speed() -> None:
    speeds = np.geomspace(2.0, 40.0, 25)
    run, geometry = _couette_water_run(speeds)
    r_i, r_o = geometry.values["inner_radius"], geometry.values["outer_radius"]
    nu = WATER_20C_VISCOSITY / WATER_20C_DENSITY
    onset = _eigen_critical_reynolds(r_i / r_o) * nu / (r_i * (r_o - r_i))  # Ω_c = Re_c ν/(R_i d)
    assert onset == pytest.approx(11.26, rel=5e-3)  # ≈ 11.26 rad/s (107.5 rpm) for this geometry and water
    assert np.min(np.abs(speeds / onset - 1)) > 0.01  # no point within the interpolation error
    findings = find_secondary_flow(run, context_for("secondary_flow", SETTINGS, geometry=geometry,
                                                    density=WATER_20C_DENSITY))
    assert excluded(findings) == [int(i) for i in np.flatnonzero(speeds > onset)]
    assert all("Taylor vortices" in f.message and "density 998" in f.message for f in findings)


def test_outer_cylinder_turning_is_stable_and_never_flagged() -> None:
    # Rayleigh's criterion: with only the outer cylinder turning, circulation grows outward (stable).
    run, geometry = _couette_water_run(np.geomspace(2.0, 40.0, 25))
    outer = concentric_cylinder(rotating="outer")
    assert find_secondary_flow(run, context_for("secondary_flow", SETTINGS, geometry=outer)) == []
    assert find_secondary_flow(run, context_for("secondary_flow", SETTINGS, geometry=geometry)) != []


def test_viscous_sample_in_cylinders_is_not_flagged() -> None:
    speeds = np.geomspace(2.0, 40.0, 25)
    geometry = concentric_cylinder()
    delta = geometry.values["outer_radius"] / geometry.values["inner_radius"]
    rate = 2 * speeds * delta**2 / (delta**2 - 1)
    run = make_run(flow_columns(rate, 1.0 * rate, angular_velocity=speeds))  # 1 Pa·s: Re ≤ 0.02
    assert find_secondary_flow(run, context_for("secondary_flow", SETTINGS, geometry=geometry)) == []


# --------------------------------------------------------------------------- cone-plate


def _cone_run(viscosity: float, rates: np.ndarray) -> tuple:
    geometry = cone_plate(radius=0.025, angle_deg=1.0)
    speeds = rates * geometry.values["cone_angle"]  # γ̇ = Ω/α (Macosko 1994 ch. 5)
    return make_run(flow_columns(rates, viscosity * rates, angular_velocity=speeds)), geometry, speeds


def test_cone_plate_points_above_the_secondary_flow_limit_are_flagged_with_the_default_density() -> None:
    rates = np.geomspace(100.0, 5000.0, 20)
    run, geometry, speeds = _cone_run(1e-3, rates)
    findings = find_secondary_flow(run, context_for("secondary_flow", SETTINGS, geometry=geometry))
    angle, radius = geometry.values["cone_angle"], geometry.values["radius"]
    parameter = 1000.0 * speeds * angle**2 * radius**2 / (12 * 1e-3)  # R̃ = ρΩα²R²/(12η), Sdougos et al. 1984
    expected = [int(i) for i in np.flatnonzero(parameter > 0.5)]  # threshold ≈ 0.5 (from memory)
    assert expected and len(expected) < len(rates)
    assert excluded(findings) == expected
    assert "1000 kg/m³ assumed" in findings[0].message
    assert findings[0].value == pytest.approx(parameter[expected[0]])


def test_cone_plate_with_a_viscous_sample_is_not_flagged_and_the_limit_can_be_changed() -> None:
    rates = np.geomspace(100.0, 5000.0, 20)
    run, geometry, _ = _cone_run(0.5, rates)
    assert find_secondary_flow(run, context_for("secondary_flow", SETTINGS, geometry=geometry)) == []
    strict = context_for("secondary_flow", SETTINGS, geometry=geometry, settings={"cone_plate_limit": 1e-4})
    assert excluded(find_secondary_flow(run, strict))


# --------------------------------------------------------------------------- parallel plates


def _disk_flow_wall_shear(reynolds: float) -> tuple[float, float]:
    """dG/dz on the turning (z = 1) and fixed (z = 0) disk from the exact similarity solution
    u_r = rΩF(z), u_θ = rΩG(z), u_z = ΩhH(z), Re = ρΩh²/η (von Kármán's form):
    F'' = Re(F² + HF' − G²) + λ, G'' = Re(2FG + HG'), H' = −2F; F = G = H = 0 at z = 0,
    F = H = 0 and G = 1 at z = 1 (λ: the radial pressure gradient, an unknown)."""

    def rhs(z: np.ndarray, y: np.ndarray, p: np.ndarray) -> np.ndarray:
        f, df, g, dg, h = y
        return np.vstack([df, reynolds * (f**2 + h * df - g**2) + p[0], dg, reynolds * (2 * f * g + h * dg), -2 * f])

    def bc(a: np.ndarray, b: np.ndarray, p: np.ndarray) -> np.ndarray:
        return np.array([a[0], a[2], a[4], b[0], b[2] - 1.0, b[4]])

    z = np.linspace(0.0, 1.0, 101)
    guess = np.zeros((5, z.size))
    guess[2], guess[3] = z, 1.0
    solution = solve_bvp(rhs, bc, z, guess, p=[0.0], tol=1e-10, max_nodes=100000)
    assert solution.success
    return float(solution.sol(1.0)[3]), float(solution.sol(0.0)[3])


def test_parallel_plate_inertia_coefficients_match_the_two_disk_similarity_solution() -> None:
    reynolds = 0.2
    turning, fixed = _disk_flow_wall_shear(reynolds)
    assert (turning - 1) / reynolds**2 == pytest.approx(TURNING_PLATE_COEFFICIENT, rel=1e-3)  # 3/700
    assert (fixed - 1) / reynolds**2 == pytest.approx(-2 / 1575, rel=1e-3)


def test_parallel_plate_points_above_the_reynolds_limit_are_flagged() -> None:
    geometry = parallel_plate(radius=0.025, gap=2e-3)
    rates = np.geomspace(1.0, 100.0, 20)
    speeds = rates * geometry.values["gap"] / geometry.values["radius"]  # γ̇_R = ΩR/h
    run = make_run(flow_columns(rates, 1e-3 * rates, angular_velocity=speeds))
    findings = find_secondary_flow(run, context_for("secondary_flow", SETTINGS, geometry=geometry, density=1000.0))
    reynolds = 1000.0 * speeds * 2e-3**2 / 1e-3
    expected = [int(i) for i in np.flatnonzero(reynolds > 2.0)]
    assert expected and len(expected) < len(rates)
    assert excluded(findings) == expected
    turning, _ = _disk_flow_wall_shear(float(reynolds[expected[0]]))
    # the message's inertial change agrees with the full similarity solution to a few %
    stated = float(findings[0].message.split("about ")[1].split(" %")[0]) / 100
    assert stated == pytest.approx(turning - 1, rel=0.05)


def test_parallel_plate_with_a_viscous_sample_is_not_flagged() -> None:
    geometry = parallel_plate(radius=0.025, gap=1e-3)
    rates = np.geomspace(10.0, 2000.0, 20)
    speeds = rates * geometry.values["gap"] / geometry.values["radius"]
    run = make_run(flow_columns(rates, 0.1 * rates, angular_velocity=speeds))
    assert find_secondary_flow(run, context_for("secondary_flow", SETTINGS, geometry=geometry)) == []


def test_runs_without_a_geometry_are_not_checked() -> None:
    rates = np.geomspace(100.0, 5000.0, 20)
    run = make_run(flow_columns(rates, 1e-3 * rates))
    assert find_secondary_flow(run, context_for("secondary_flow", SETTINGS)) == []

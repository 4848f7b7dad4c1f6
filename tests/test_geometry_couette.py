"""Concentric cylinders: Newtonian wide gaps, power-law fluids, the Krieger correction, the ISO
representative values and partly sheared gaps of a Bingham fluid.

Each expected value comes from outside gammadot: closed forms (Margules; the power-law Couette
solution), scipy quadrature of Ω = ½∫γ̇(τ)/τ dτ (tests/geometry_oracles.py), and the check
values of the shared reference sheet REFERENCE.md (§1.2, §1.4, §1.5, §1.6, §1.7), whose own
sources are named at each test.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from gammadot.couette import representative_radius
from gammadot.plugins.rotational_geometries import convert_concentric_cylinder
from gammadot.records import Conversion

import geometry_oracles as oracle

R_I, LENGTH = 12.5e-3, 37.5e-3  # m: the reference sheet's ISO-like bob


def cylinder(delta: float, **extra: float | str):
    return oracle.geometry("concentric_cylinder", inner_radius=R_I, outer_radius=R_I * delta,
                           immersed_length=LENGTH, end_factor=extra.pop("end_factor", 1.0),
                           rotating=extra.pop("rotating", "inner"),
                           values_at=extra.pop("values_at", "representative"))


def torque_of(tau_i: np.ndarray, end_factor: float = 1.0) -> np.ndarray:
    """M = 2πR_i²L·c_L·τ_i (torque balance on the bob)."""
    return 2.0 * math.pi * R_I**2 * LENGTH * end_factor * np.asarray(tau_i)


def convert(omega: np.ndarray, torque: np.ndarray, delta: float, **extra: float | str) -> Conversion:
    run = oracle.make_run({"angular_velocity": omega, "torque": torque})
    conversion = convert_concentric_cylinder(run, cylinder(delta, **extra))
    assert conversion is not None
    return conversion


def margules_torque(viscosity: float, omega: np.ndarray, delta: float) -> np.ndarray:
    """T = 4πμLΩR_i²R_o²/(R_o² − R_i²) (Bird, Stewart & Lightfoot 2nd ed. §3.6; REFERENCE §1.2)."""
    r_o = R_I * delta
    return 4.0 * math.pi * viscosity * LENGTH * omega * R_I**2 * r_o**2 / (r_o**2 - R_I**2)


def power_law_inner_stress(K: float, n: float, omega: np.ndarray, delta: float) -> np.ndarray:
    """Exact power-law Couette flow: γ̇_i = 2Ω/(n(1 − s^{2/n})), s = 1/δ, τ_i = Kγ̇_iⁿ (REFERENCE §1.5)."""
    return K * (2.0 * omega / (n * (1.0 - delta ** (-2.0 / n)))) ** n


# ----------------------------------------------------------------------------- Newtonian


def test_margules_check_value_and_iso_representative_values() -> None:
    """REFERENCE §1.2: R_i = 12.5 mm, δ = 1.0847, L = 37.5 mm, μ = 1 Pa·s, Ω = 10 rad/s →
    T = 4.906292785e-3 N·m; §1.4 (ISO 3219 / DIN 53019-1 formulas from memory there, their
    consistency checked numerically): γ̇_rep = τ_rep = 123.266901, r_rep/R_i = 1.039772."""
    omega = np.geomspace(1.0, 100.0, 9)
    assert omega[4] == pytest.approx(10.0)
    torque = margules_torque(1.0, omega, 1.0847)
    assert torque[4] == pytest.approx(4.906292785e-3, rel=1e-9)
    conversion = convert(omega, torque, 1.0847)
    assert conversion.shear_rate_apparent[4] == pytest.approx(123.266901, rel=1e-8)
    assert conversion.shear_stress_apparent[4] == pytest.approx(123.266901, rel=1e-8)
    assert representative_radius(R_I, 1.0847) / R_I == pytest.approx(1.039772, rel=1e-6)
    inner = convert(omega, torque, 1.0847, values_at="inner_wall")
    assert inner.shear_rate[4] == pytest.approx(133.266901, rel=1e-8)  # γ̇_i of §1.2


@pytest.mark.parametrize("delta", [1.2, 1.5])
@pytest.mark.parametrize("values_at", ["representative", "inner_wall"])
def test_newtonian_wide_gap_torque_gives_the_viscosity(delta: float, values_at: str) -> None:
    """Exact Couette torque of a Newtonian fluid ↔ its viscosity within 0.1 % in a wide gap
    (Bird, Stewart & Lightfoot 2nd ed. §3.6; Macosko 1994 ch. 5)."""
    omega = np.geomspace(0.05, 50.0, 12)
    conversion = convert(omega, margules_torque(0.85, omega, delta), delta, values_at=values_at)
    viscosity = conversion.shear_stress / conversion.shear_rate
    assert viscosity == pytest.approx(np.full(12, 0.85), rel=1e-3)
    assert np.abs(conversion.shear_rate / conversion.shear_rate_apparent - 1).max() < 1e-9  # nothing to correct


def test_trade_fact_newtonian_fluid_gives_n_equal_to_one() -> None:
    """Common practice: a Newtonian fluid has flow behaviour index n = 1 — here the local slope
    d ln M/d ln Ω the correction reports, and the slope of the corrected flow curve."""
    omega = np.geomspace(0.1, 100.0, 10)
    conversion = convert(omega, margules_torque(0.05, omega, 1.2), 1.2)
    note = next(f for f in conversion.notes if f.check == "geometry.wide_gap")
    assert "(1 to 1)" in note.message
    slope, _ = np.polyfit(np.log(conversion.shear_rate), np.log(conversion.shear_stress), 1)
    assert slope == pytest.approx(1.0, abs=1e-9)


def test_outer_cylinder_turning_gives_the_same_values() -> None:
    """In steady creeping flow only the relative rotation matters (BSL 2nd ed. §3.6; REFERENCE §1.2)."""
    omega = np.geomspace(0.1, 10.0, 8)
    torque = torque_of(power_law_inner_stress(2.0, 0.5, omega, 1.2))
    inner, outer = convert(omega, torque, 1.2), convert(omega, torque, 1.2, rotating="outer")
    assert outer.shear_rate == pytest.approx(inner.shear_rate, rel=1e-12)
    assert outer.shear_stress == pytest.approx(inner.shear_stress, rel=1e-12)


def test_end_factor_divides_the_stress() -> None:
    """τ_i = M/(2πR_i²L·c_L): with c_L = 1.10 (ISO 3219 practice; REFERENCE §1.4) the same torque
    means a 1/1.10 lower stress and an unchanged rate."""
    omega = np.geomspace(0.1, 10.0, 8)
    torque = margules_torque(1.0, omega, 1.0847)
    plain, corrected = convert(omega, torque, 1.0847), convert(omega, torque, 1.0847, end_factor=1.10)
    assert corrected.shear_stress == pytest.approx(plain.shear_stress / 1.10, rel=1e-12)
    assert corrected.shear_rate == pytest.approx(plain.shear_rate, rel=1e-9)


# ----------------------------------------------------------------------------- power law


@pytest.mark.parametrize("delta, omega", [(1.0847, 1.7351694329), (1.5, 5.0154320988), (3.0, 6.1728395062)])
def test_power_law_oracle_matches_the_reference_and_quadrature(delta: float, omega: float) -> None:
    """The closed form used below against REFERENCE §1.5 (K = 2, n = 0.5, τ_i = 10 Pa) and
    against scipy quadrature of Ω = ½∫γ̇/τ dτ."""
    assert power_law_inner_stress(2.0, 0.5, np.array([omega]), delta)[0] == pytest.approx(10.0, rel=1e-9)
    assert oracle.couette_speed(oracle.power_law_rate(2.0, 0.5), 10.0, delta) == pytest.approx(omega, rel=1e-9)


CASES = [(n, delta) for n in (0.2, 0.5, 0.8, 1.2, 1.5) for delta in (1.0847, 1.2, 1.5)]


@pytest.mark.parametrize("n, delta", CASES)
def test_power_law_krieger_correction_is_exact(n: float, delta: float) -> None:
    """Krieger's local power-law correction is exact for a power-law fluid (REFERENCE §1.5):
    the corrected inner-wall rate within 0.5 % of (τ_i/K)^{1/n}, K and n of a least-squares
    power law through the corrected points within 1 %. The Newtonian (Margules) rate and the K
    it implies are off by more than those tolerances (n is not: for a power law the Newtonian
    formula scales every rate by the same factor)."""
    K = 3.0
    omega = np.geomspace(0.01, 10.0, 20)
    tau_i = power_law_inner_stress(K, n, omega, delta)
    conversion = convert(omega, torque_of(tau_i), delta, values_at="inner_wall")
    true_rate = (tau_i / K) ** (1.0 / n)
    assert conversion.shear_stress == pytest.approx(tau_i, rel=1e-12)
    assert np.abs(conversion.shear_rate / true_rate - 1).max() < 0.005
    fitted_n, ln_k = np.polyfit(np.log(conversion.shear_rate), np.log(conversion.shear_stress), 1)
    assert fitted_n == pytest.approx(n, rel=0.01) and math.exp(ln_k) == pytest.approx(K, rel=0.01)
    assert np.abs(conversion.shear_rate_apparent / true_rate - 1).min() > 0.005
    apparent_n, apparent_ln_k = np.polyfit(np.log(conversion.shear_rate_apparent), np.log(tau_i), 1)
    assert abs(math.exp(apparent_ln_k) / K - 1) > 0.01


@pytest.mark.parametrize("n, delta", CASES)
def test_power_law_at_the_representative_radius(n: float, delta: float) -> None:
    """Default output: true values at the ISO representative radius. The stress there is
    τ_rep = τ_i(1 + δ²)/(2δ²) for any fluid (τ ∝ r⁻²), and the corrected rate must be the power
    law's (τ_rep/K)^{1/n} within 0.5 %."""
    K = 3.0
    omega = np.geomspace(0.01, 10.0, 20)
    tau_i = power_law_inner_stress(K, n, omega, delta)
    conversion = convert(omega, torque_of(tau_i), delta)
    tau_rep = tau_i * (1 + delta**2) / (2 * delta**2)
    assert conversion.shear_stress == pytest.approx(tau_rep, rel=1e-12)
    assert np.abs(conversion.shear_rate / (tau_rep / K) ** (1.0 / n) - 1).max() < 0.005


@pytest.mark.parametrize("n, delta", [(0.2, 1.5), (0.5, 1.2), (0.8, 1.0847), (1.5, 1.2)])
def test_power_law_with_one_percent_torque_noise(n: float, delta: float) -> None:
    """1 % relative torque noise (seeded): K and n of the corrected curve within 2 %; the
    median per-point rate error within 2 % (the slope noise enters the correction)."""
    K = 3.0
    omega = np.geomspace(0.01, 10.0, 20)
    tau_i = power_law_inner_stress(K, n, omega, delta)
    noisy = tau_i * (1 + 0.01 * np.random.default_rng(17).standard_normal(20))
    conversion = convert(omega, torque_of(noisy), delta, values_at="inner_wall")
    fitted_n, ln_k = np.polyfit(np.log(conversion.shear_rate), np.log(conversion.shear_stress), 1)
    assert fitted_n == pytest.approx(n, rel=0.02) and math.exp(ln_k) == pytest.approx(K, rel=0.02)
    assert np.median(np.abs(conversion.shear_rate / (tau_i / K) ** (1.0 / n) - 1)) < 0.02


def test_carreau_inversion_oracle() -> None:
    """REFERENCE §1.6 inversion oracle (Carreau η0 = 10 Pa·s, λ = 1 s, n = 0.4, δ = 1.0847):
    at τ_i = 20 Pa, Ω = 0.3902784003 rad/s, true γ̇_i = 5.783237073 1/s and γ̇_rep = 4.810841 1/s.
    Krieger's formula is not exact for Carreau (−1.1e-3 with the exact slope, REFERENCE §1.5);
    with slopes estimated from 25 noise-free points the corrected rate is within 0.5 %."""
    rate = oracle.invert(oracle.carreau_stress(10.0, 1.0, 0.4))
    tau_i = np.geomspace(1.0, 60.0, 25)
    tau_i[np.argmin(np.abs(tau_i - 20.0))] = 20.0
    omega = np.array([oracle.couette_speed(rate, t, 1.0847) for t in tau_i])
    at = int(np.flatnonzero(tau_i == 20.0)[0])
    assert omega[at] == pytest.approx(0.3902784003, rel=1e-8)
    inner = convert(omega, torque_of(tau_i), 1.0847, values_at="inner_wall")
    assert inner.shear_rate[at] == pytest.approx(5.783237073, rel=0.005)
    representative = convert(omega, torque_of(tau_i), 1.0847)
    assert representative.shear_rate_apparent[at] == pytest.approx(4.810841, rel=1e-6)
    assert representative.shear_rate[at] == pytest.approx(rate(representative.shear_stress[at]), rel=0.005)


# ----------------------------------------------------------------------------- Bingham


TAU_Y, ETA_P, DELTA_RR = 5.0, 0.1, 1.0847


def reiner_riwlin_speed(tau_i: float) -> float:
    """Ω of a Bingham fluid in the Couette gap (Reiner & Riwlin 1927; REFERENCE §1.7):
    fully sheared Ω = (τ_i/(2μ_p))(1 − 1/δ²) − (τ_y/μ_p) ln δ; partly sheared
    Ω = (τ_i − τ_y − τ_y ln(τ_i/τ_y))/(2μ_p)."""
    if tau_i / DELTA_RR**2 >= TAU_Y:
        return tau_i / (2 * ETA_P) * (1 - DELTA_RR**-2) - TAU_Y / ETA_P * math.log(DELTA_RR)
    return (tau_i - TAU_Y - TAU_Y * math.log(tau_i / TAU_Y)) / (2 * ETA_P)


@pytest.mark.parametrize("tau_i, omega", [(5.5, 0.1172455049), (5.8, 0.2894998720), (7.0, 1.1874445174),
                                          (20.0, 10.9423047915)])
def test_reiner_riwlin_oracle(tau_i: float, omega: float) -> None:
    """The closed forms against REFERENCE §1.7 check values and against quadrature."""
    assert reiner_riwlin_speed(tau_i) == pytest.approx(omega, rel=1e-9)
    assert oracle.couette_speed(oracle.bingham_rate(TAU_Y, ETA_P), tau_i, DELTA_RR, TAU_Y) == pytest.approx(
        omega, rel=1e-9)


@pytest.mark.parametrize("values_at", ["representative", "inner_wall"])
def test_bingham_partly_sheared_points_are_flagged_and_fully_sheared_recover_the_parameters(values_at: str) -> None:
    """Points with τ_o = τ_i/δ² < τ_y (plug at the outer wall) are exactly the flagged ones,
    kept apparent and out of fits; a straight line τ = τ_y + η_p·γ̇ through the fully sheared,
    corrected points gives τ_y within 2 % and η_p within 1 % (the local power-law correction
    is approximate for a Bingham fluid near the onset of full shear)."""
    omega = np.geomspace(0.02, 30.0, 24)
    tau_i = np.array([_bingham_stress(w) for w in omega])
    conversion = convert(omega, torque_of(tau_i), DELTA_RR, values_at=values_at)
    flagged = sorted(f.point_index for f in conversion.notes if f.check == "geometry.partly_sheared")
    expected = list(np.flatnonzero(tau_i / DELTA_RR**2 < TAU_Y))
    assert 3 <= len(expected) < len(omega) - 5 and flagged == expected
    assert all(f.exclude and f.severity == "warning" for f in conversion.notes if f.check == "geometry.partly_sheared")
    assert conversion.shear_rate[expected] == pytest.approx(conversion.shear_rate_apparent[expected], rel=1e-12)
    estimate = next(r for r in conversion.results if r.name == "yield_stress_estimate")
    assert estimate.value == pytest.approx(TAU_Y, rel=0.01)
    full = np.setdiff1d(np.arange(len(omega)), expected)
    eta_p, tau_y = np.polyfit(conversion.shear_rate[full], conversion.shear_stress[full], 1)
    assert tau_y == pytest.approx(TAU_Y, rel=0.02) and eta_p == pytest.approx(ETA_P, rel=0.01)


def _bingham_stress(omega: float) -> float:
    from scipy.optimize import brentq

    return brentq(lambda t: reiner_riwlin_speed(t) - omega, TAU_Y * (1 + 1e-12), 1e4, xtol=1e-14, rtol=1e-14)


def test_fluid_without_yield_stress_has_no_partly_sheared_points() -> None:
    """A shear-thinning fluid without yield stress (Carreau, REFERENCE §6 parameters) in a wide
    gap with 1 % noise: nothing is flagged."""
    rate = oracle.invert(oracle.carreau_stress(10.0, 1.0, 0.4))
    tau_i = np.geomspace(0.5, 60.0, 15)
    omega = np.array([oracle.couette_speed(rate, t, 1.5) for t in tau_i])
    noisy = tau_i * (1 + 0.01 * np.random.default_rng(5).standard_normal(15))
    conversion = convert(omega, torque_of(noisy), 1.5)
    assert not [f for f in conversion.notes if f.check == "geometry.partly_sheared"]
    assert conversion.correction == "krieger_wide_gap"


def test_correction_size_results() -> None:
    """correction_* results are max and median of |true/apparent − 1| (unit "1")."""
    omega = np.geomspace(0.01, 10.0, 12)
    conversion = convert(omega, torque_of(power_law_inner_stress(3.0, 0.3, omega, 1.5)), 1.5)
    results = {r.name: r for r in conversion.results}
    change = np.abs(conversion.shear_rate / conversion.shear_rate_apparent - 1)
    assert results["correction_shear_rate_max"].value == pytest.approx(change.max())
    assert results["correction_shear_rate_median"].value == pytest.approx(np.median(change))
    assert results["correction_shear_stress_max"].value == 0.0
    assert {r.unit for r in conversion.results if r.name.startswith("correction_")} == {"1"}
    assert results["correction_shear_rate_max"].method == "krieger_wide_gap"


@pytest.mark.parametrize("delta", [1.0847, 1.2])
@pytest.mark.parametrize("exponent", [0.25, 0.5, 1.0])
def test_liquid_with_vortex_raised_stress_is_not_taken_for_a_yield_stress(delta: float, exponent: float) -> None:
    """A Newtonian liquid (Margules torque, Bird, Stewart & Lightfoot 2nd ed. §3.6) whose torque
    above an onset speed rises faster than the speed, as with Taylor vortices (the torque of
    supercritical Couette flow grows faster than Ω: Taylor 1923 and common practice; the form
    (Ω/Ω_c)^exponent here is an assumption standing for any such rise), 1 % noise. The curve
    bends upwards at high speed, which a Herschel–Bulkley fit can mimic only with τ_y > 0 and
    n > 1: no point may be flagged as partly sheared (a plug needs a curve that flattens at low
    speed). Before the plug-evidence rule the lowest point was flagged for exponents ≥ 0.5."""
    omega = np.geomspace(0.5, 300.0, 15)
    onset = omega[10]
    torque = margules_torque(1e-3, omega, delta) * np.where(omega > onset, (omega / onset) ** exponent, 1.0)
    torque *= 1 + 0.01 * np.random.default_rng(3).standard_normal(len(omega))
    conversion = convert(omega, torque, delta)
    assert not [f for f in conversion.notes if f.check == "geometry.partly_sheared"]
    assert not [r for r in conversion.results if r.name == "yield_stress_estimate"]


def test_herschel_bulkley_partly_sheared_points_are_flagged() -> None:
    """A shear-thinning yield-stress material (Herschel–Bulkley τ_y = 10 Pa, K = 2 Pa·s^0.5,
    n = 0.5) in a gap δ = 1.2: τ_i from the Couette integral Ω = ½∫γ̇(τ)/τ dτ with the plug
    (Reiner–Riwlin regime, Macosko, Rheology 1994, §5.3 — from memory) by scipy quadrature;
    exactly the points with τ_i/δ² < τ_y are flagged, and the yield stress estimate is within 2 %."""
    tau_y, consistency, index, delta = 10.0, 2.0, 0.5, 1.2
    rate = lambda tau: (max(tau - tau_y, 0.0) / consistency) ** (1.0 / index)  # noqa: E731
    omega = np.geomspace(0.005, 50.0, 20)
    tau_i = np.array([oracle.couette_inner_stress(rate, w, delta, tau_y) for w in omega])
    conversion = convert(omega, torque_of(tau_i), delta)
    flagged = sorted(f.point_index for f in conversion.notes if f.check == "geometry.partly_sheared")
    expected = list(np.flatnonzero(tau_i / delta**2 < tau_y))
    assert len(expected) >= 3 and flagged == expected
    estimate = next(r for r in conversion.results if r.name == "yield_stress_estimate")
    assert estimate.value == pytest.approx(tau_y, rel=0.02)

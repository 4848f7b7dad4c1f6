"""Parallel plates (Weissenberg–Rabinowitsch rim correction, N₁ − N₂) and cone-plate (N₁,
truncation), against closed forms, scipy quadrature and the check values of REFERENCE.md §2–3
(Macosko, *Rheology: Principles, Measurements and Applications*, VCH 1994, ch. 5)."""

from __future__ import annotations

import math

import numpy as np
import pytest

from gammadot.plugins.rotational_geometries import convert_cone_plate, convert_parallel_plate

import geometry_oracles as oracle

RADIUS, GAP = 25e-3, 1e-3  # m


def power_law_plate_torque(K: float, n: float, omega: np.ndarray, radius: float = RADIUS, gap: float = GAP) -> np.ndarray:
    """T = 2πK(Ω/h)ⁿR^{n+3}/(n + 3) (power law between plates; REFERENCE §2)."""
    return 2.0 * math.pi * K * (omega / gap) ** n * radius ** (n + 3) / (n + 3)


def plates(gap: float = GAP):
    return oracle.geometry("parallel_plate", radius=RADIUS, gap=gap)


def convert(columns: dict, metadata: dict | None = None, gap: float = GAP):
    run = oracle.make_run(columns, metadata)
    geometry = plates(gap).with_overrides(run.metadata)  # as the core resolves it: the run's gap wins
    conversion = convert_parallel_plate(run, geometry)
    assert conversion is not None
    return conversion


def test_power_law_torque_closed_form_against_reference_and_quadrature() -> None:
    """REFERENCE §2: K = 2, n = 0.5, Ω/h = 1000 1/s, R = 25 mm → T = 2.80499344e-4 N·m, τ_R = 10 Pa."""
    omega = np.array([1000.0 * GAP])
    assert power_law_plate_torque(2.0, 0.5, omega)[0] == pytest.approx(2.80499344e-4, rel=1e-8)
    quadrature = oracle.plate_torque(lambda rate: 2.0 * rate**0.5, omega[0], RADIUS, GAP)
    assert quadrature == pytest.approx(2.80499344e-4, rel=1e-9)


@pytest.mark.parametrize("n", [0.2, 0.5, 0.8, 1.0, 1.5])
def test_weissenberg_rabinowitsch_on_a_power_law(n: float) -> None:
    """Corrected rim stress = apparent × (3 + n)/4 within 0.5 % and equal to K·γ̇_Rⁿ (Macosko
    1994 ch. 5; REFERENCE §2)."""
    K = 2.0
    omega = np.geomspace(1e-4, 1.0, 15)
    conversion = convert({"angular_velocity": omega, "torque": power_law_plate_torque(K, n, omega)})
    rim_rate = omega * RADIUS / GAP
    assert conversion.shear_rate == pytest.approx(rim_rate, rel=1e-12)
    assert conversion.shear_stress / conversion.shear_stress_apparent == pytest.approx(
        np.full(15, (3 + n) / 4), rel=0.005)
    assert conversion.shear_stress == pytest.approx(K * rim_rate**n, rel=0.005)
    assert conversion.correction == ("weissenberg_rabinowitsch")


def test_weissenberg_rabinowitsch_with_one_percent_noise() -> None:
    """1 % torque noise (seeded): K and n of the corrected rim curve within 2 %, while the
    apparent curve's K is off by more (a factor 4/(3 + n))."""
    K, n = 2.0, 0.4
    omega = np.geomspace(1e-4, 1.0, 20)
    torque = power_law_plate_torque(K, n, omega) * (1 + 0.01 * np.random.default_rng(8).standard_normal(20))
    conversion = convert({"angular_velocity": omega, "torque": torque})
    fitted_n, ln_k = np.polyfit(np.log(conversion.shear_rate), np.log(conversion.shear_stress), 1)
    assert fitted_n == pytest.approx(n, rel=0.02) and math.exp(ln_k) == pytest.approx(K, rel=0.02)
    _, apparent_ln_k = np.polyfit(np.log(conversion.shear_rate), np.log(conversion.shear_stress_apparent), 1)
    assert abs(math.exp(apparent_ln_k) / K - 1) > 0.1


CARREAU_TABLE = [  # γ̇_R, T (N·m), d ln T/d ln γ̇_R, τ_R true (Pa), apparent τ_a (Pa): REFERENCE §2
    (0.1, 2.44948431e-5, 0.996031, 0.99701935, 0.998010),
    (1.0, 2.11467037e-4, 0.770928, 8.12252396, 8.615942),
    (10.0, 7.20353636e-4, 0.413169, 25.04399382, 29.349848),
    (100.0, 1.82175273e-3, 0.400145, 63.09384170, 74.224884),
]


def test_carreau_table_as_second_oracle() -> None:
    """Carreau (η0 = 10 Pa·s, λ = 1 s, n = 0.4), R = 25 mm: torques by quadrature on a dense
    rate grid that contains the table's rates; the WR slope, rim stress and apparent stress at
    those rates against REFERENCE §2 (slope within 0.01, stresses within 0.3 %)."""
    stress = oracle.carreau_stress(10.0, 1.0, 0.4)
    rates = np.unique(np.concatenate([np.geomspace(0.02, 500.0, 29), [row[0] for row in CARREAU_TABLE]]))
    omega = rates * GAP / RADIUS
    torque = np.array([oracle.plate_torque(stress, w, RADIUS, GAP) for w in omega])
    conversion = convert({"angular_velocity": omega, "torque": torque})
    for rate, table_torque, slope, true, apparent in CARREAU_TABLE:
        i = int(np.argmin(np.abs(rates - rate)))
        assert torque[i] == pytest.approx(table_torque, rel=1e-7)
        assert conversion.shear_stress_apparent[i] == pytest.approx(apparent, rel=1e-5)
        assert conversion.shear_stress[i] / (torque[i] / (2 * math.pi * RADIUS**3)) - 3 == pytest.approx(slope, abs=0.01)
        assert conversion.shear_stress[i] == pytest.approx(true, rel=0.003)


def test_normal_stress_difference_from_plate_force() -> None:
    """N₁ − N₂ = Ψγ̇², Ψ = 0.5 Pa·s², R = 25 mm: F = 2.45436926e-4 N at γ̇_R = 1 1/s and
    2.45436926e-2 N at 10 1/s; (F/(πR²))(2 + d ln F/d ln γ̇_R) returns 0.5 and 50 Pa (REFERENCE §2)."""
    rates = np.geomspace(0.1, 100.0, 13)
    omega = rates * GAP / RADIUS
    force = np.array([oracle.plate_force(lambda g: 0.5 * g * g, w, RADIUS, GAP) for w in omega])
    assert force[4] == pytest.approx(2.45436926e-4, rel=1e-8) and force[8] == pytest.approx(2.45436926e-2, rel=1e-8)
    conversion = convert({"angular_velocity": omega, "torque": power_law_plate_torque(1.0, 1.0, omega),
                          "normal_force": force})
    n12 = conversion.extra_columns["normal_stress_difference_12"]
    assert n12[4] == pytest.approx(0.5, rel=1e-6) and n12[8] == pytest.approx(50.0, rel=1e-6)
    assert n12 == pytest.approx(0.5 * rates**2, rel=1e-6)


def test_gap_from_the_run_wins_over_study_toml() -> None:
    """A run's `gap: 0.5 mm` line overrides study.toml's 1 mm: the rim rate doubles (γ̇_R = ΩR/h)
    and the gap used is reported as a run result naming its source."""
    omega = np.geomspace(1e-3, 1.0, 8)
    torque = power_law_plate_torque(2.0, 0.5, omega, gap=0.5e-3)
    conversion = convert({"angular_velocity": omega, "torque": torque}, {"gap": 0.5e-3})
    assert conversion.shear_rate == pytest.approx(omega * RADIUS / 0.5e-3, rel=1e-12)
    gap = next(r for r in conversion.results if r.name == "gap")
    assert gap.value == pytest.approx(0.5e-3) and gap.unit == "m" and gap.method == "run metadata"
    results = {r.name: r.value for r in conversion.results}
    assert results["correction_shear_stress_max"] == pytest.approx(1 - (3 + 0.5) / 4, rel=0.01)
    assert results["correction_shear_rate_max"] == 0.0


def test_cone_plate_first_normal_stress_difference_and_truncation() -> None:
    """N₁ = 2F/(πR²): N₁ = 0.5·γ̇² at γ̇ = 10 1/s, R = 25 mm ↔ F = 4.9087385e-2 N (REFERENCE §3);
    τ = 3M/(2πR³), γ̇ = Ω/α need no correction; the truncation gap is a run result."""
    alpha = math.radians(1.0)
    rates = np.array([1.0, 10.0, 100.0])
    force = 0.5 * rates**2 * math.pi * RADIUS**2 / 2.0
    assert force[1] == pytest.approx(4.9087385e-2, rel=1e-7)
    torque = 2.0 * math.pi * RADIUS**3 * (0.3 * rates) / 3.0  # a 0.3 Pa·s Newtonian fluid
    run = oracle.make_run({"angular_velocity": rates * alpha, "torque": torque, "normal_force": force})
    conversion = convert_cone_plate(run, oracle.geometry("cone_plate", radius=RADIUS, cone_angle=alpha,
                                                         truncation=50e-6))
    assert conversion.extra_columns["first_normal_stress_difference"][1] == pytest.approx(50.0, rel=1e-7)
    assert conversion.shear_rate == pytest.approx(rates) and conversion.shear_stress == pytest.approx(0.3 * rates)
    results = {r.name: r for r in conversion.results}
    assert results["truncation_gap"].value == pytest.approx(50e-6) and results["truncation_gap"].unit == "m"
    assert results["correction_shear_stress_max"].value == 0.0 and conversion.correction == "none"

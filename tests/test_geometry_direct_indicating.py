"""Direct-indicating six-speed viscometer: dial constants and the field formulas of API RP 13D.

Sources (as recorded in REFERENCE.md §5):
- formulas PV = θ600 − θ300, YP = θ300 − PV, AV = θ600/2, LSYP = 2θ3 − θ6,
  n_p = 3.32·log(θ600/θ300), K_p = 5.11·θ600/1022ⁿ, n_a = 0.657·log(θ100/θ3),
  K_a = 5.11·θ100/170.2ⁿ: API RP 13D equation sheet and Guo & Liu, *Applied Drilling
  Circulation Systems* (2011) ch. 2, eqs. 2.5–2.14 [checked against source text there];
- 5.11 dyn/cm² (0.511 Pa) per dial degree: API 13D hydraulics equations [checked there];
- R1-B1 dimensions (rotor 18.415 mm, bob 17.245 mm radius, bob 38.0 mm long) and the F1 spring
  (386 dyn·cm per degree): FROM MEMORY in REFERENCE.md (consistent with 1.7023 s⁻¹ per rpm);
- the worked readings θ600…θ3 = 55, 35, 27, 18, 5, 4 are a synthetic set; the expected values
  were derived from the formulas in REFERENCE.md §5 (no published worked example was found).
- 1 lbf/100 ft² in Pa from the exact unit definitions: 1 lbf = 4.4482216152605 N and
  1 ft = 0.3048 m (international yard and pound, 1959; NIST SP 811 appendix B).
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from gammadot.field_rheology import field_results
from gammadot.plugins.direct_indicating import convert_direct_indicating, rate_factor, stress_factor

import geometry_oracles as oracle

LBF_PER_100FT2 = 4.4482216152605 / (100 * 0.3048**2)  # Pa
SPEEDS = np.array([600.0, 300.0, 200.0, 100.0, 6.0, 3.0])
READINGS = np.array([55.0, 35.0, 27.0, 18.0, 5.0, 4.0])
RPM = 2 * math.pi / 60


def convert(dial: np.ndarray, speeds: np.ndarray = SPEEDS, **constants: float):
    run = oracle.make_run({"angular_velocity": speeds * RPM, "dial_reading": dial})
    conversion = convert_direct_indicating(run, oracle.geometry("direct_indicating", **constants))
    assert conversion is not None
    return conversion


def test_field_results_on_the_worked_readings() -> None:
    """PV 20 cP, YP 15 lbf/100 ft², AV 27.5 cP, LSYP 3 lbf/100 ft², n_p 0.651698 and
    K_p 3.07277 dyn·sⁿ/cm² (3.32 constant), n_a 0.429161 and K_a 10.14503 dyn·sⁿ/cm² (0.657)
    — REFERENCE §5, derived values; stored in SI."""
    results = {r.name: r for r in convert(READINGS).results}
    assert LBF_PER_100FT2 == pytest.approx(0.47880259, rel=1e-8)  # REFERENCE §8 units
    assert results["plastic_viscosity"].value == pytest.approx(20e-3, rel=1e-12)
    assert results["plastic_viscosity"].unit == "Pa·s" and "20 cP" in results["plastic_viscosity"].note
    assert results["yield_point"].value == pytest.approx(15 * LBF_PER_100FT2, rel=1e-9)
    assert results["yield_point"].unit == "Pa" and "15 lbf/100 ft²" in results["yield_point"].note
    assert results["apparent_viscosity"].value == pytest.approx(27.5e-3, rel=1e-12)
    assert results["apparent_viscosity"].at_shear_rate == pytest.approx(1021.38, rel=1e-5)
    assert results["low_shear_yield_point"].value == pytest.approx(3 * LBF_PER_100FT2, rel=1e-9)
    assert results["power_law_n_pipe"].value == pytest.approx(0.651698, abs=1e-6)
    assert results["power_law_K_pipe"].value == pytest.approx(0.307277, rel=1e-5)  # 3.07277 dyn·sⁿ/cm²
    assert results["power_law_K_pipe"].unit == "Pa·s^n"
    assert results["power_law_n_annulus"].value == pytest.approx(0.429161, abs=1e-6)
    assert results["power_law_K_annulus"].value == pytest.approx(1.014503, rel=1e-5)
    assert all("API RP 13D" in r.method for name, r in results.items() if not name.startswith("correction_"))


def test_missing_speeds_are_reported_with_the_reason_not_invented() -> None:
    """Without the 6 and 3 rpm readings, LSYP and the annulus power law are n/a with the reason."""
    results = {r.name: r for r in convert(READINGS[:4], SPEEDS[:4]).results}
    for name in ("low_shear_yield_point", "power_law_n_annulus", "power_law_K_annulus"):
        assert results[name].value is None
        assert results[name].note.startswith("n/a: needs readings at") and "600, 300, 200, 100 rpm" in results[name].note
    assert results["plastic_viscosity"].value == pytest.approx(20e-3)
    only_low = {r.name: r for r in field_results({6.0: 5.0, 3.0: 4.0})}
    assert only_low["plastic_viscosity"].value is None and "600 and 300" in only_low["plastic_viscosity"].note


def test_default_constants_are_r1_b1_with_f1_spring() -> None:
    """Apparent (standard) values: γ̇ = 1.7023·N 1/s, τ = 0.511·θ Pa (REFERENCE §5)."""
    conversion = convert(READINGS)
    assert conversion.shear_rate_apparent == pytest.approx(1.7023 * SPEEDS, rel=1e-12)
    assert conversion.shear_stress_apparent == pytest.approx(0.511 * READINGS, rel=1e-12)
    assert conversion.shear_stress == pytest.approx(0.511 * READINGS, rel=1e-12)


def test_constants_from_dimensions() -> None:
    """R1-B1 radii (from memory) give (2π/60)·2R_r²/(R_r² − R_b²) = 1.70230 s⁻¹ per rpm; the F1
    spring with the bob's geometric length gives k/(2πR_b²L) = 5.436 dyn/cm² per degree, not
    5.11 — the standard's constant includes the end effects (REFERENCE §5, derived)."""
    values = {"rotor_radius": 18.415e-3, "bob_radius": 17.245e-3, "bob_length": 38.0e-3,
              "spring_constant": 386e-7}  # 386 dyn·cm = 386e-7 N·m
    assert rate_factor(values)[0] == pytest.approx(1.70230, rel=2e-5)
    assert stress_factor(values)[0] == pytest.approx(0.5436, rel=1e-3)
    assert stress_factor({**values, "stress_factor": 0.511})[0] == 0.511  # a direct factor wins


def test_newtonian_readings_need_no_correction_and_give_n_one() -> None:
    """A Newtonian oil reads θ ∝ N: corrected values equal the standard's, its viscosity in cP
    is 300θ_N/N (REFERENCE §5 [S]; 1.0006 mPa·s per degree with the rounded constants), and the
    pipe power law gives n = 3.32·log10 2 ≈ 1 (common practice: a Newtonian fluid has n = 1; the
    0.06 % offset is the standard's rounding of 1/log10 2 = 3.3219 to 3.32)."""
    dial = 0.1 * SPEEDS  # θ300 = 30: a 30 cP oil
    conversion = convert(dial)
    assert conversion.shear_rate == pytest.approx(conversion.shear_rate_apparent, rel=1e-9)
    viscosity = conversion.shear_stress / conversion.shear_rate
    assert viscosity * 1e3 == pytest.approx(np.full(6, 30 * 1.0006), rel=1e-4)
    results = {r.name: r.value for r in conversion.results}
    assert results["power_law_n_pipe"] == pytest.approx(1.0, rel=1e-3)
    assert results["power_law_n_annulus"] == pytest.approx(1.0, rel=1e-3)
    assert results["yield_point"] == pytest.approx(0.0, abs=1e-12)


def test_other_spring_scales_the_field_values() -> None:
    """A softer spring with a fifth of the F1 stress per degree reads five times higher for the
    same sample: PV, YP and K come out unchanged."""
    standard = {r.name: r.value for r in convert(READINGS).results}
    soft = {r.name: r.value for r in convert(5 * READINGS, stress_factor=0.511 / 5).results}
    for name in ("plastic_viscosity", "yield_point", "low_shear_yield_point", "power_law_K_pipe"):
        assert soft[name] == pytest.approx(standard[name], rel=1e-12)

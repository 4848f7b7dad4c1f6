"""Shape checks: sample loss at high rate, a stress that falls with rate, the hysteresis loop area.

Oracles: the sign of dτ/dγ̇ of curves built here from closed forms (a falling stress is the
definition of a non-monotonic flow curve), the common-practice signature of sample loss (a
sudden, lasting stress drop at high rate on plates), and the closed-form loop area
∫(K_up − K_down)γ̇ⁿ dγ̇ = (K_up − K_down)(b^{n+1} − a^{n+1})/(n + 1), cross-checked with scipy's quad.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy.integrate import quad

from gammadot.plugins.checks_curve_shape import (NON_MONOTONIC_SETTINGS, SAMPLE_LOSS_SETTINGS, find_non_monotonic,
                                                  find_sample_loss)
from gammadot.plugins.checks_thixotropy import find_hysteresis_loop

from check_helpers import (concentric_cylinder, cone_plate, context_for, excluded, flow_columns, make_run,
                           parallel_plate)

RATES = np.geomspace(1.0, 1000.0, 20)


def _power_law(rate: np.ndarray, k: float = 20.0, n: float = 0.5, noise: float = 0.01, seed: int = 1) -> np.ndarray:
    """τ = Kγ̇ⁿ with relative Gaussian scatter (seeded)."""
    return k * rate**n * (1 + noise * np.random.default_rng(seed).standard_normal(rate.size))


def _loss_context(geometry) -> object:
    return context_for("sample_loss", SAMPLE_LOSS_SETTINGS, geometry=geometry)


# --------------------------------------------------------------------------- sample loss


@pytest.mark.parametrize("geometry", [cone_plate(), parallel_plate()])
def test_a_sudden_lasting_stress_drop_at_high_rate_excludes_that_point_and_all_later_ones(geometry) -> None:
    stress = _power_law(RATES)
    stress[16:] *= 0.6  # 40 % of the sample flung out from the 17th point on
    findings = find_sample_loss(make_run(flow_columns(RATES, stress)), _loss_context(geometry))
    assert excluded(findings) == list(range(16, 20))
    # the drop from the point before: 1 − 0.6·(γ̇₁₆/γ̇₁₅)^0.5 ≈ 28 % (power law, 1 % scatter)
    assert findings[0].value == pytest.approx(1 - 0.6 * (RATES[16] / RATES[15]) ** 0.5, abs=0.03)
    assert "fell suddenly" in findings[0].message


def test_loss_during_a_loop_excludes_the_falling_sweep_too() -> None:
    up = RATES
    rate = np.concatenate([up, up[::-1][1:]])
    stress = _power_law(rate)
    stress[17:] *= 0.5
    findings = find_sample_loss(make_run(flow_columns(rate, stress)), _loss_context(cone_plate()))
    assert excluded(findings) == list(range(17, len(rate)))


def test_a_small_loss_on_a_yield_stress_plateau_is_found_but_a_single_low_point_is_not() -> None:
    # Herschel–Bulkley with τ_y = 50 Pa, K = 0.5 Pa·sⁿ, n = 0.5: nearly flat, so a 20 % loss shows at once
    stress = (50 + 0.5 * RATES**0.5) * (1 + 0.01 * np.random.default_rng(4).standard_normal(RATES.size))
    lost = stress.copy()
    lost[15:] *= 0.8
    assert excluded(find_sample_loss(make_run(flow_columns(RATES, lost)), _loss_context(parallel_plate()))) == \
        list(range(15, 20))
    dip = stress.copy()
    dip[12] *= 0.85
    assert find_sample_loss(make_run(flow_columns(RATES, dip)), _loss_context(parallel_plate())) == []


def test_a_smooth_curve_is_not_sample_loss() -> None:
    assert find_sample_loss(make_run(flow_columns(RATES, _power_law(RATES))), _loss_context(cone_plate())) == []


@pytest.mark.parametrize("spike", range(1, 20))
def test_a_single_high_outlier_is_not_sample_loss(spike: int) -> None:
    spiked = _power_law(RATES, noise=0.015, seed=spike)
    spiked[spike] *= 1.45  # one air bubble
    assert find_sample_loss(make_run(flow_columns(RATES, spiked)), _loss_context(cone_plate())) == []


def test_sample_loss_is_not_checked_in_cylinders_or_without_a_geometry() -> None:
    stress = _power_law(RATES)
    stress[16:] *= 0.6
    run = make_run(flow_columns(RATES, stress))
    assert find_sample_loss(run, _loss_context(concentric_cylinder())) == []
    assert find_sample_loss(run, _loss_context(None)) == []


# --------------------------------------------------------------------------- non-monotonic


def _banding_curve(rate: np.ndarray) -> np.ndarray:
    """A flow curve with a falling branch: τ = 10·γ̇/(1 + (γ̇/10)²) + 0.05·γ̇ (Pa, γ̇ in 1/s).

    dτ/dγ̇ < 0 between the roots of its derivative, about 10.9 and 88 1/s (computed below).
    """
    return 10 * rate / (1 + (rate / 10) ** 2) + 0.05 * rate


def test_a_flow_curve_falling_with_rate_is_reported_over_the_falling_range() -> None:
    rate = np.geomspace(0.5, 500.0, 31)
    stress = _banding_curve(rate) * (1 + 0.01 * np.random.default_rng(3).standard_normal(rate.size))
    findings = find_non_monotonic(make_run(flow_columns(rate, stress)),
                                  context_for("non_monotonic", NON_MONOTONIC_SETTINGS))
    (finding,) = findings
    assert finding.severity == "warning" and finding.point_index is None
    fine = np.geomspace(0.5, 500.0, 200001)
    slope = np.gradient(_banding_curve(fine), fine)
    falling = fine[slope < 0]
    peak_rate = float(finding.message.split(" Pa at ")[1].split(" 1/s")[0])
    low_rate = float(finding.message.split(" Pa at ")[2].split(" 1/s")[0])
    # the reported range starts near the top of the falling branch and ends inside it
    assert falling[0] / 1.5 <= peak_rate <= falling[0] * 1.5
    assert falling[0] < low_rate <= falling[-1] * 1.3
    assert finding.value > 0.5


@pytest.mark.parametrize("seed", range(20))
def test_noisy_monotonic_curves_are_not_reported(seed: int) -> None:
    # Carreau (η0 = 10 Pa·s, λ = 1 s, n = 0.4) and a near-plateau Herschel–Bulkley (τ_y = 50 Pa, K = 0.5,
    # n = 0.5): both rise with rate; 1.5 % scatter and one 1.45× outlier must not look like a falling branch.
    rng = np.random.default_rng(seed)
    rate = np.geomspace(0.01, 100.0, 25)
    carreau = 10 * rate * (1 + rate**2) ** ((0.4 - 1) / 2)
    plateau = 50 + 0.5 * rate**0.5
    context = context_for("non_monotonic", NON_MONOTONIC_SETTINGS)
    for stress in (carreau, plateau):
        noisy = stress * (1 + 0.015 * rng.standard_normal(rate.size))
        noisy[rng.integers(2, rate.size - 2)] *= 1.45
        assert find_non_monotonic(make_run(flow_columns(rate, noisy)), context) == []


def test_a_sample_loss_is_reported_once_not_also_as_a_falling_curve() -> None:
    stress = _power_law(RATES)
    stress[12:] *= 0.4
    run = make_run(flow_columns(RATES, stress))
    context = context_for("non_monotonic", NON_MONOTONIC_SETTINGS, geometry=cone_plate())
    assert find_non_monotonic(run, context) == []
    assert find_non_monotonic(run, context_for("non_monotonic", NON_MONOTONIC_SETTINGS)) != []  # no geometry


# --------------------------------------------------------------------------- hysteresis loop


def test_loop_area_of_a_thixotropic_run_matches_the_closed_form() -> None:
    up = np.geomspace(1.0, 100.0, 30)
    rate = np.concatenate([up, up[::-1]])
    k_up, k_down, n = 12.0, 9.0, 0.5
    stress = np.concatenate([k_up * up**n, k_down * up[::-1] ** n])
    (finding,) = find_hysteresis_loop(make_run(flow_columns(rate, stress)), context_for("hysteresis_loop"))
    exact = (k_up - k_down) * (100.0 ** (n + 1) - 1.0) / (n + 1)
    assert quad(lambda g: (k_up - k_down) * g**n, 1.0, 100.0)[0] == pytest.approx(exact, rel=1e-10)
    assert finding.value == pytest.approx(exact, rel=2e-3) and finding.unit == "Pa/s"
    assert finding.severity == "info" and "thixotropy" in finding.message


def test_loop_area_is_negative_when_the_structure_builds_up() -> None:
    up = np.geomspace(1.0, 100.0, 30)
    rate = np.concatenate([up, up[::-1]])
    stress = np.concatenate([9.0 * up**0.5, 12.0 * up[::-1] ** 0.5])
    (finding,) = find_hysteresis_loop(make_run(flow_columns(rate, stress)), context_for("hysteresis_loop"))
    assert finding.value == pytest.approx(-3.0 * (100.0**1.5 - 1.0) / 1.5, rel=2e-3)
    assert "anti-thixotropy" in finding.message


def test_a_run_going_only_up_has_no_loop() -> None:
    run = make_run(flow_columns(RATES, _power_law(RATES)))
    assert find_hysteresis_loop(run, context_for("hysteresis_loop")) == []

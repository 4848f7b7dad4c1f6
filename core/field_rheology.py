"""Field formulas for direct-indicating (six-speed) viscometer readings, as in API RP 13D.

Drilling-fluid practice reads the dial of a rotor–bob viscometer at 600, 300, 200, 100, 6 and
3 rpm and reports (API RP 13D, rheology and hydraulics of oil-well drilling fluids; the
formulas are also collected in Guo & Liu, *Applied Drilling Circulation Systems*, 2011,
ch. 2, eqs. 2.5–2.14):

- plastic viscosity PV = θ600 − θ300 (cP) and yield point YP = θ300 − PV (lbf/100 ft²), the
  Bingham line through the 600 and 300 rpm readings;
- apparent viscosity AV = θ600/2 (cP), the viscosity at 600 rpm;
- low-shear yield point LSYP = 2θ3 − θ6 (lbf/100 ft²);
- power law for pipe flow: n_p = 3.32·log10(θ600/θ300), K_p = 5.11·θ600/1022^{n_p} (dyn·sⁿ/cm²);
- power law for annular flow: n_a = 0.657·log10(θ100/θ3), K_a = 5.11·θ100/170.2^{n_a}.

These hold for the standard R1-B1 rotor–bob with the F1 spring (1.7023 s⁻¹ per rpm, 0.511 Pa
per dial degree). The field convention reads a dial degree as 1 lbf/100 ft² (a degree is
0.511 Pa, 1.067 lbf/100 ft²). For other combinations the readings are scaled by
C_τ = (stress per degree)/(0.511 Pa) and the rates by C_γ = (rate per rpm)/(1.7023 s⁻¹):
PV = C_τ/C_γ·(θ600 − θ300), YP = C_τ·(2θ300 − θ600), K_p = 0.511 Pa·C_τθ600/(1022·C_γ)^{n_p}.

Results are stored in SI (Pa·s, Pa, Pa·sⁿ); each note gives the value in field units. A
result whose readings are missing is reported with no value and the reason, never guessed.
"""

from __future__ import annotations

import math
from typing import Mapping

from .records import Result

__all__ = ["STANDARD_SPEEDS", "STANDARD_RATE_PER_RPM", "STANDARD_STRESS_PER_DEGREE", "field_results",
           "lbf_per_100ft2"]

STANDARD_SPEEDS = (600.0, 300.0, 200.0, 100.0, 6.0, 3.0)  # rpm
STANDARD_RATE_PER_RPM = 1.7023  # 1/s per rpm, R1-B1 (API RP 13D)
STANDARD_STRESS_PER_DEGREE = 0.511  # Pa per dial degree, F1 spring (5.11 dyn/cm², API RP 13D)
CENTIPOISE = 1e-3  # Pa·s
DYNE_PER_CM2 = 0.1  # Pa
_STANDARD = "API RP 13D"


def lbf_per_100ft2() -> float:
    """1 lbf/100 ft² in Pa, from the unit library (≈ 0.4788 Pa)."""
    from .units import parse_quantity

    return parse_quantity("1 lbf/ft**2", "pressure") / 100.0


def _missing(name: str, unit: str, formula: str, speeds: tuple[float, ...],
             readings: Mapping[float, float]) -> Result:
    have = ", ".join(f"{s:g}" for s in sorted(readings, reverse=True)) or "none"
    need = " and ".join(f"{s:g}" for s in speeds)
    return Result(name, None, unit, method=f"{_STANDARD}: {formula}",
                  note=f"n/a: needs readings at {need} rpm; this run has readings at {have} rpm")


def _positive(readings: Mapping[float, float], speeds: tuple[float, ...]) -> bool:
    return all(readings[s] > 0 for s in speeds)


def field_results(readings: Mapping[float, float], rate_per_rpm: float = STANDARD_RATE_PER_RPM,
                  stress_per_degree: float = STANDARD_STRESS_PER_DEGREE) -> list[Result]:
    """The field results of one run from its dial readings by nominal speed (rpm → degrees).

    ``rate_per_rpm`` (1/s per rpm) and ``stress_per_degree`` (Pa) are the rotor–bob–spring
    constants of the run (default R1-B1/F1).
    """
    c_tau = stress_per_degree / STANDARD_STRESS_PER_DEGREE
    c_rate = rate_per_rpm / STANDARD_RATE_PER_RPM
    field_stress = lbf_per_100ft2()
    r = readings
    results: list[Result] = []

    def has(*speeds: float) -> bool:
        return all(s in r for s in speeds)

    # Bingham plastic: PV (cP) and YP (lbf/100 ft²) from 600 and 300 rpm
    if has(600.0, 300.0):
        pv_cp = c_tau / c_rate * (r[600.0] - r[300.0])
        yp_field = c_tau * (2.0 * r[300.0] - r[600.0])
        sign = "; negative: check the readings" if yp_field < 0 else ""
        results.append(Result("plastic_viscosity", pv_cp * CENTIPOISE, "Pa·s",
                              method=f"{_STANDARD}: PV = θ600 − θ300 (cP)",
                              note=f"{pv_cp:.4g} cP" + ("; negative: check the readings" if pv_cp < 0 else "")))
        results.append(Result("yield_point", yp_field * field_stress, "Pa",
                              method=f"{_STANDARD}: YP = θ300 − PV (lbf/100 ft²)",
                              note=f"{yp_field:.4g} lbf/100 ft² (field convention: a dial degree read as "
                                   f"1 lbf/100 ft²){sign}"))
    else:
        results.append(_missing("plastic_viscosity", "Pa·s", "PV = θ600 − θ300 (cP)", (600.0, 300.0), r))
        results.append(_missing("yield_point", "Pa", "YP = θ300 − PV (lbf/100 ft²)", (600.0, 300.0), r))
    if has(600.0):
        av_cp = c_tau / c_rate * r[600.0] / 2.0
        results.append(Result("apparent_viscosity", av_cp * CENTIPOISE, "Pa·s",
                              method=f"{_STANDARD}: AV = θ600/2 (cP)", at_shear_rate=600.0 * rate_per_rpm,
                              note=f"{av_cp:.4g} cP at 600 rpm"))
    else:
        results.append(_missing("apparent_viscosity", "Pa·s", "AV = θ600/2 (cP)", (600.0,), r))
    if has(6.0, 3.0):
        lsyp_field = c_tau * (2.0 * r[3.0] - r[6.0])
        results.append(Result("low_shear_yield_point", lsyp_field * field_stress, "Pa",
                              method=f"{_STANDARD}: LSYP = 2θ3 − θ6 (lbf/100 ft²)",
                              note=f"{lsyp_field:.4g} lbf/100 ft² (field convention)"))
    else:
        results.append(_missing("low_shear_yield_point", "Pa", "LSYP = 2θ3 − θ6 (lbf/100 ft²)", (6.0, 3.0), r))
    results += _power_law(r, "pipe", (600.0, 300.0), 3.32, 600.0, 1022.0, c_tau, c_rate)
    results += _power_law(r, "annulus", (100.0, 3.0), 0.657, 100.0, 170.2, c_tau, c_rate)
    return results


def _power_law(r: Mapping[float, float], flow: str, speeds: tuple[float, float], factor: float,
               reference_speed: float, reference_rate: float, c_tau: float, c_rate: float) -> list[Result]:
    """n and K of the API power law for ``flow`` ("pipe" or "annulus")."""
    high, low = speeds
    n_formula = f"n = {factor:g}·log10(θ{high:g}/θ{low:g})"
    k_formula = f"K = 5.11·θ{reference_speed:g}/{reference_rate:g}ⁿ (dyn·sⁿ/cm²)"
    if not (high in r and low in r):
        return [_missing(f"power_law_n_{flow}", "1", n_formula, speeds, r),
                _missing(f"power_law_K_{flow}", "Pa·s^n", k_formula, speeds, r)]
    if not _positive(r, speeds):
        note = f"n/a: the readings at {high:g} and {low:g} rpm must be positive"
        return [Result(f"power_law_n_{flow}", None, "1", method=f"{_STANDARD}: {n_formula}", note=note),
                Result(f"power_law_K_{flow}", None, "Pa·s^n", method=f"{_STANDARD}: {k_formula}", note=note)]
    n = factor * math.log10(r[high] / r[low])
    k_dyne = 10.0 * STANDARD_STRESS_PER_DEGREE * c_tau * r[reference_speed] / (reference_rate * c_rate) ** n
    return [Result(f"power_law_n_{flow}", n, "1", method=f"{_STANDARD}: {n_formula}"),
            Result(f"power_law_K_{flow}", k_dyne * DYNE_PER_CM2, "Pa·s^n", method=f"{_STANDARD}: {k_formula}",
                   note=f"{k_dyne:.4g} dyn·sⁿ/cm²")]

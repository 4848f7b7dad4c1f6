"""Study-level analysis ``wall_slip``: slip velocity from one sample measured at several gaps.

Between parallel plates a sample that slips at the walls flows faster than its true shear
rate suggests: at equal (Weissenberg–Rabinowitsch) rim stress τ_R the apparent rim rate at gap
h is γ̇_a(h) = γ̇(τ_R) + 2u_s(τ_R)/h, with the same slip velocity u_s on both plates
(Yoshimura & Prud'homme, J. Rheol. 32 (1988) 53, doi:10.1122/1.549963; the same 1/h
construction as Mooney's for capillaries). With two or more gaps a straight line of γ̇_a
against 1/h gives the true rate (intercept) and 2u_s (slope) at each stress.

Runs qualify when they are parallel-plate runs of the same sample at the same temperature
(to 0.5 °C) with at least two different gaps (more than 1 % apart). Each run's flow curve
(points used in fits only) is interpolated in log space on a common grid of stresses, only
inside its own measured stress range, never extrapolated. The analysis writes the table
``wall_slip`` and an info finding on every run involved; it never changes a measured curve.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any, Sequence

import numpy as np

from gammadot.hookspecs import hookimpl
from gammadot.records import Analysis, AnalysisOutput, AnalysisTable, Finding

ANALYSIS_ID = "wall_slip"
TEMPERATURE_STEP = 0.5  # °C: runs within the same 0.5 °C step are compared
GAP_TOLERANCE = 0.01  # gaps closer than 1 % count as one
GRID_MIN, GRID_MAX = 5, 30  # stresses per comparison

UNITS = {"temperature": "°C", "shear_stress": "Pa", "shear_rate_slip_corrected": "1/s", "slip_velocity": "m/s",
         "n_gaps": "1"}


def yoshimura_prudhomme(gaps: np.ndarray, apparent_rates: np.ndarray) -> tuple[float, float]:
    """(true rate 1/s, slip velocity m/s) at one stress from apparent rim rates at gaps h (m).

    Least-squares line γ̇_a = γ̇ + 2u_s·(1/h); with two gaps this is γ̇ = (h₁γ̇₁ − h₂γ̇₂)/(h₁ − h₂)
    and u_s = (γ̇₁ − γ̇₂)/(2(1/h₁ − 1/h₂)).
    """
    slope, intercept = np.polyfit(1.0 / np.asarray(gaps, dtype=float), np.asarray(apparent_rates, dtype=float), 1)
    return float(intercept), float(slope) / 2.0


@dataclass(frozen=True)
class _Curve:
    run_id: str
    gap: float  # m
    ln_stress: np.ndarray  # increasing
    ln_rate: np.ndarray

    def covers(self, ln_tau: float) -> bool:
        return self.ln_stress[0] <= ln_tau <= self.ln_stress[-1]

    def rate_at(self, ln_tau: float) -> float:
        return math.exp(float(np.interp(ln_tau, self.ln_stress, self.ln_rate)))


def _gap_of(rr: Any) -> float | None:
    for result in rr.results:
        if result.name == "gap" and result.value is not None:
            return float(result.value)
    geometry = getattr(rr, "geometry", None)
    if geometry is not None and "gap" in geometry.values:
        return float(geometry.values["gap"])
    return None


def _curve(rr: Any) -> _Curve | None:
    if rr.geometry_type != "parallel_plate" or rr.run.sample is None:
        return None
    gap = _gap_of(rr)
    rate, stress = rr.run.columns.get("shear_rate"), rr.run.columns.get("shear_stress")
    if gap is None or rate is None or stress is None:
        return None
    with np.errstate(invalid="ignore"):
        keep = rr.in_fit & np.isfinite(rate) & np.isfinite(stress) & (rate > 0) & (stress > 0)
    if keep.sum() < 2:
        return None
    order = np.argsort(stress[keep], kind="stable")
    return _Curve(rr.run.run_id, gap, np.log(stress[keep][order]), np.log(rate[keep][order]))


def _distinct(gaps: Sequence[float]) -> list[float]:
    found: list[float] = []
    for gap in sorted(gaps):
        if not found or gap > found[-1] * (1.0 + GAP_TOLERANCE):
            found.append(gap)
    return found


def _group_key(rr: Any) -> tuple[str, float | None]:
    temperature = rr.run.temperature
    step = None if temperature is None or not math.isfinite(temperature) else \
        round(temperature / TEMPERATURE_STEP) * TEMPERATURE_STEP
    return str(rr.run.sample), step


def _mm(gaps: Sequence[float]) -> str:
    return ", ".join(f"{g * 1e3:.4g} mm" for g in gaps)


def _analyse_group(sample: str, temperature: float | None, curves: list[_Curve]) -> tuple[list[dict], dict[str, list[Finding]]]:
    low = min(c.ln_stress[0] for c in curves)
    high = max(c.ln_stress[-1] for c in curves)
    size = int(np.clip(np.median([len(c.ln_stress) for c in curves]), GRID_MIN, GRID_MAX))
    rows = []
    for ln_tau in np.linspace(low, high, size):
        covering = [c for c in curves if c.covers(ln_tau)]
        gaps = _distinct([c.gap for c in covering])
        if len(gaps) < 2:
            continue
        rate, slip = yoshimura_prudhomme(np.array([c.gap for c in covering]),
                                         np.array([c.rate_at(ln_tau) for c in covering]))
        rows.append({"sample": sample, "temperature": temperature, "shear_stress": math.exp(ln_tau),
                     "shear_rate_slip_corrected": rate, "slip_velocity": slip, "n_gaps": len(gaps),
                     "gaps": _mm(gaps), "run_ids": ", ".join(c.run_id for c in covering)})
    if not rows:
        return [], {}
    used = sorted({rid for row in rows for rid in row["run_ids"].split(", ")})
    slips = [row["slip_velocity"] for row in rows]
    negative = sum(1 for row in rows if not row["shear_rate_slip_corrected"] > 0)
    message = (f"wall slip from {len(_distinct([c.gap for c in curves if c.run_id in used]))} gaps "
               f"({_mm(_distinct([c.gap for c in curves if c.run_id in used]))}; runs {', '.join(used)}), "
               f"Yoshimura–Prud'homme at {len(rows)} stresses from {rows[0]['shear_stress']:.4g} to "
               f"{rows[-1]['shear_stress']:.4g} Pa: slip velocity {min(slips) * 1e3:.3g} to {max(slips) * 1e3:.3g} mm/s; "
               "slip-corrected rates are in the table wall_slip, the measured curve is unchanged")
    if negative:
        message += (f"; at {negative} of these stresses the slip-corrected rate is not positive "
                    "(slip dominates there, or the runs disagree)")
    return rows, {rid: [Finding(ANALYSIS_ID, "info", message)] for rid in used}


def analyse_wall_slip(result: Any) -> AnalysisOutput | None:
    """The wall-slip table and findings of a study, or ``None`` when no sample has two gaps."""
    groups: dict[tuple[str, float | None], list[_Curve]] = {}
    for rr in result.runs:
        curve = _curve(rr)
        if curve is not None:
            groups.setdefault(_group_key(rr), []).append(curve)
    rows: list[dict] = []
    findings: dict[str, list[Finding]] = {}
    for (sample, temperature), curves in groups.items():
        if len(_distinct([c.gap for c in curves])) < 2:
            continue
        found_rows, found = _analyse_group(sample, temperature, curves)
        rows += found_rows
        for run_id, items in found.items():
            findings.setdefault(run_id, []).extend(items)
    if not rows:
        return None
    table = AnalysisTable(ANALYSIS_ID, rows, UNITS, title="Wall slip (Yoshimura–Prud'homme, several gaps)")
    return AnalysisOutput(tables=(table,), findings=findings)


WALL_SLIP = Analysis(id=ANALYSIS_ID, title="Wall slip from parallel plates at several gaps",
                     run=analyse_wall_slip,
                     reference="Yoshimura & Prud'homme, J. Rheol. 32 (1988) 53, doi:10.1122/1.549963")


@hookimpl
def gammadot_analyses() -> list[Analysis]:
    """Provide the wall-slip analysis."""
    return [WALL_SLIP]

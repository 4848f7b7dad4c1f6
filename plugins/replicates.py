"""Built-in analysis ``replicates``: runs of one sample at one temperature that should agree, and
whether they do.

Every pair of runs with the same sample name whose temperatures differ by at most
``temperature_window`` (default 1 °C; viscosity changes by roughly 2–10 % per °C near room
temperature, common practice) is compared over the shear rates both cover. Parallel-plate runs
at different gaps are not replicates: they form a wall-slip series (``wall_slip`` analysis). Each run's flow curve
(fitted points only, its first sweep when it goes up and down) is interpolated linearly in
log η against log γ̇ at every rate of either run inside the common range; the largest ratio
between the two, |ln(η_a/η_b)| turned back into a percentage, is the disagreement. Above
``tolerance`` (default 10 %: a common acceptance band for repeat flow curves in QC, common
practice) both runs get a run-level warning. Every compared pair is a row of the table
``replicates`` (``OUT/tables/replicates.parquet``). Runs with unknown temperature are compared
only with runs of the same sample whose temperature is unknown too.
"""

from __future__ import annotations

from dataclasses import dataclass
from itertools import combinations
from typing import Any

import numpy as np

from gammadot.config import check_settings
from gammadot.hookspecs import hookimpl
from gammadot.records import Analysis, AnalysisOutput, AnalysisTable, CheckSetting, Finding
from gammadot.sweeps import sweeps

from .check_inputs import num, percent, usable

ANALYSIS_ID = "replicates"
MIN_POINTS = 2

SETTINGS = (
    CheckSetting("tolerance", "dimensionless", 0.10,
                 "largest viscosity difference between replicate runs over their common rate range", minimum=0.0),
    CheckSetting("temperature_window", "temperature_difference", 1.0,
                 "largest temperature difference between runs still compared as replicates", minimum=0.0),
)
_UNITS = {"temperature_a": "°C", "temperature_b": "°C", "shear_rate_min": "1/s", "shear_rate_max": "1/s",
          "max_difference": "1", "at_shear_rate": "1/s", "tolerance": "1"}


@dataclass(frozen=True)
class Curve:
    """A run's flow curve for comparison: increasing shear rates (1/s) and viscosities (Pa·s)."""

    run_id: str
    sample: str
    temperature: float | None
    rate: np.ndarray
    viscosity: np.ndarray
    gap: float | None = None  # parallel-plate gap (m): runs at different gaps are a slip series


@dataclass(frozen=True)
class Comparison:
    """Two curves over their common range: the largest difference (fraction) and where."""

    low: float
    high: float
    n_rates: int
    max_difference: float
    at_rate: float


def curve_of(run_result: Any) -> Curve | None:
    """The fitted points of a processed run's first sweep, sorted by rate (``None`` if too few)."""
    run = run_result.run
    rate, viscosity = run.columns.get("shear_rate"), run.columns.get("viscosity")
    if run.sample is None or rate is None or viscosity is None:
        return None
    keep = usable(rate, viscosity) & run_result.in_fit
    found = sweeps(rate, keep)
    if not found:
        return None
    index = found[0].by_rate()
    rates, inverse = np.unique(rate[index], return_inverse=True)
    if len(rates) < MIN_POINTS:
        return None
    log_eta = np.bincount(inverse, weights=np.log(viscosity[index])) / np.bincount(inverse)
    geometry = getattr(run_result, "geometry", None)
    gap = geometry.values.get("gap") if geometry is not None and geometry.type == "parallel_plate" else None
    return Curve(run.run_id, run.sample, run.temperature, rates, np.exp(log_eta),
                 None if gap is None else float(gap))


def compare(a: Curve, b: Curve) -> Comparison | None:
    """The largest |ln(η_a/η_b)| over the common rate range, as a fraction exp(·) − 1."""
    low, high = max(a.rate[0], b.rate[0]), min(a.rate[-1], b.rate[-1])
    if not high > low:
        return None
    grid = np.unique(np.concatenate([a.rate, b.rate]))
    grid = grid[(grid >= low) & (grid <= high)]
    log_grid = np.log(grid)
    gap = np.abs(np.interp(log_grid, np.log(a.rate), np.log(a.viscosity))
                 - np.interp(log_grid, np.log(b.rate), np.log(b.viscosity)))
    worst = int(np.argmax(gap))
    return Comparison(float(low), float(high), len(grid), float(np.expm1(gap[worst])), float(grid[worst]))


def _same_conditions(a: Curve, b: Curve, window: float) -> bool:
    if a.sample != b.sample:
        return False
    if a.gap is not None and b.gap is not None and not np.isclose(a.gap, b.gap, rtol=1e-3):
        return False  # a series of gaps measures wall slip (plugins/wall_slip.py), not repeatability
    if a.temperature is None or b.temperature is None:
        return a.temperature is None and b.temperature is None
    return abs(a.temperature - b.temperature) <= window


def analyse_replicates(result: Any) -> AnalysisOutput | None:
    """Compare every replicate pair of the study; ``None`` when no sample has two runs."""
    settings = check_settings(result.config, ANALYSIS_ID, SETTINGS)
    tolerance, window = float(settings["tolerance"]), float(settings["temperature_window"])
    curves = [c for c in (curve_of(r) for r in result.runs) if c is not None]
    rows: list[dict[str, Any]] = []
    findings: dict[str, list[Finding]] = {}
    for a, b in combinations(curves, 2):
        if not _same_conditions(a, b, window):
            continue
        comparison = compare(a, b)
        rows.append(_row(a, b, comparison, tolerance))
        if comparison is not None and comparison.max_difference > tolerance:
            findings.setdefault(a.run_id, []).append(_finding(a, b, comparison, tolerance))
            findings.setdefault(b.run_id, []).append(_finding(b, a, comparison, tolerance))
    if not rows:
        return None
    table = AnalysisTable("replicates", rows, _UNITS, title="Agreement of replicate runs")
    return AnalysisOutput(tables=(table,), findings=findings)


def _row(a: Curve, b: Curve, comparison: Comparison | None, tolerance: float) -> dict[str, Any]:
    found = comparison is not None
    return {
        "sample": a.sample, "run_id_a": a.run_id, "run_id_b": b.run_id,
        "temperature_a": a.temperature, "temperature_b": b.temperature,
        "shear_rate_min": comparison.low if found else None, "shear_rate_max": comparison.high if found else None,
        "n_rates": comparison.n_rates if found else 0,
        "max_difference": comparison.max_difference if found else None,
        "at_shear_rate": comparison.at_rate if found else None,
        "tolerance": tolerance,
        "agree": (comparison.max_difference <= tolerance) if found else None,
    }


def _finding(run: Curve, other: Curve, comparison: Comparison, tolerance: float) -> Finding:
    where = "" if run.temperature is None else f" at {num(run.temperature)} °C"
    return Finding(
        ANALYSIS_ID, "warning",
        f"the viscosity of sample {run.sample}{where} differs from its replicate run {other.run_id} by up to "
        f"{percent(comparison.max_difference)} (at {num(comparison.at_rate)} 1/s, over {num(comparison.low)} to "
        f"{num(comparison.high)} 1/s), more than the {percent(tolerance)} tolerance, so at least one of the two "
        "runs does not represent the sample",
        value=comparison.max_difference, unit="1")


REPLICATES = Analysis(
    id=ANALYSIS_ID,
    title="Replicate runs disagree",
    run=analyse_replicates,
    settings=SETTINGS,
    reference="common practice: repeat measurements of one sample agree within a tolerance band",
)


@hookimpl
def gammadot_analyses() -> list[Analysis]:
    """Provide the replicate-agreement analysis."""
    return [REPLICATES]

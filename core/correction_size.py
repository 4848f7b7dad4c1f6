"""How large a geometry correction was: run-level results for results.parquet and the site.

For every converted run the geometry reports the relative change its correction made,
|true/apparent − 1| (unit "1"), for the shear rate and the shear stress: the largest and the
median over the points where both values are finite and non-zero. A lab sees at a glance
whether a correction mattered (a few per mille for a Newtonian oil, tens of per cent for a
shear-thinning paste between plates).
"""

from __future__ import annotations

import numpy as np

from .records import Result

__all__ = ["CORRECTION_RESULT_NAMES", "correction_size_results", "relative_change"]

CORRECTION_RESULT_NAMES = ("correction_shear_rate_max", "correction_shear_rate_median",
                           "correction_shear_stress_max", "correction_shear_stress_median")


def relative_change(true: np.ndarray, apparent: np.ndarray) -> np.ndarray:
    """|true/apparent − 1| per point (1); NaN where either value is missing or apparent is 0."""
    true = np.asarray(true, dtype=float)
    apparent = np.asarray(apparent, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        change = np.abs(true / apparent - 1.0)
    return np.where(np.isfinite(change), change, np.nan)


def _summary(change: np.ndarray) -> tuple[float | None, float | None]:
    finite = change[np.isfinite(change)]
    if not len(finite):
        return None, None
    return float(finite.max()), float(np.median(finite))


def correction_size_results(shear_rate: np.ndarray, shear_rate_apparent: np.ndarray,
                            shear_stress: np.ndarray, shear_stress_apparent: np.ndarray,
                            method: str, note: str = "") -> tuple[Result, ...]:
    """The four correction-size results of a run (largest and median, rate and stress)."""
    results = []
    for quantity, true, apparent in (("shear_rate", shear_rate, shear_rate_apparent),
                                     ("shear_stress", shear_stress, shear_stress_apparent)):
        largest, median = _summary(relative_change(true, apparent))
        missing = "" if largest is not None else "no point has both values"
        for statistic, value in (("max", largest), ("median", median)):
            results.append(Result(name=f"correction_{quantity}_{statistic}", value=value, unit="1",
                                  method=method, note=note or missing))
    return tuple(results)

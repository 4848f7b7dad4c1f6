"""The output tables of the public contract, as Arrow tables with units in field metadata.

Column names and units here are what users, scripts and plugins rely on (README, "Output
tables"). Every numeric column carries its SI unit under the field-metadata key ``unit``.
Rows are in file order, then point order, so the same input gives byte-identical files.
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any, Iterable

import numpy as np
import pyarrow as pa

from .datamodel import KNOWN_METADATA
from .sweeps import STEP_TOLERANCE, sweeps
from .units import DIMENSIONS

if TYPE_CHECKING:
    from .pipeline import StudyResult

# Point columns in contract order, with their unit labels.
POINT_COLUMNS: dict[str, str] = {
    "time": "s",
    "torque": "N·m",
    "angular_velocity": "rad/s",
    "normal_force": "N",
    "temperature": "°C",
    "shear_rate": "1/s",
    "shear_stress": "Pa",
    "viscosity": "Pa·s",
    "shear_rate_apparent": "1/s",
    "shear_stress_apparent": "Pa",
    "dial_reading": "1",
    "first_normal_stress_difference": "Pa",
    "normal_stress_difference_12": "Pa",
}
TABLE_NAMES = ("runs", "points", "fits", "parameters", "correlations", "results", "checks", "rejected", "specs")


def _field(name: str, type_: pa.DataType, unit: str | None = None) -> pa.Field:
    return pa.field(name, type_, metadata={"unit": unit} if unit else None)


def _table(columns: dict[str, tuple[Any, pa.DataType, str | None]]) -> pa.Table:
    fields = [_field(name, t, unit) for name, (_, t, unit) in columns.items()]
    arrays = [pa.array(values, type=t) for values, t, _ in columns.values()]
    return pa.Table.from_arrays(arrays, schema=pa.schema(fields))


def infer_test_type(rate: np.ndarray | None) -> str:
    """``steady_shear_up``/``_down``/``_loop`` from the order of shear rates, by the same sweep
    classifier the checks and the fit stage use (:func:`gammadot.sweeps.sweeps`: samples of one
    held rate belong to one step); ``steady_shear`` when the rate never changes."""
    if rate is None or len(rate) < 2:
        return "steady_shear"
    rate = np.asarray(rate, dtype=float)
    with np.errstate(invalid="ignore"):
        found = sweeps(rate, np.isfinite(rate) & (rate > 0))
    if len(found) == 1:
        moved = rate[found[0].indices]
        if len(moved) < 2 or np.ptp(moved) <= STEP_TOLERANCE * np.max(np.abs(moved)):
            return "steady_shear"  # one held rate: no sweep
        return "steady_shear_up" if found[0].direction > 0 else "steady_shear_down"
    return "steady_shear_loop" if len(found) >= 2 else "steady_shear"


def runs_table(result: "StudyResult") -> pa.Table:
    """runs.parquet: one row per run with its metadata (extra keys as text columns)."""
    runs = result.runs
    extra_keys = sorted({k for r in runs for k in r.run.metadata} - {"sample", "geometry", "temperature", "test_type"})
    columns: dict[str, tuple[Any, pa.DataType, str | None]] = {
        "run_id": ([r.run.run_id for r in runs], pa.string(), None),
        "study": ([result.config.title] * len(runs), pa.string(), None),
        "source_file": ([r.run.source_file for r in runs], pa.string(), None),
        "source_sha256": ([r.run.source_sha256 for r in runs], pa.string(), None),
        "source_line": ([r.run.first_line for r in runs], pa.int64(), None),
        "sample": ([r.run.sample for r in runs], pa.string(), None),
        "geometry": ([r.geometry_id or r.run.metadata.get("geometry") for r in runs], pa.string(), None),
        "geometry_type": ([r.geometry_type for r in runs], pa.string(), None),
        "correction": ([r.correction for r in runs], pa.string(), None),
        "temperature": ([r.run.temperature for r in runs], pa.float64(), "°C"),
        "test_type": ([r.run.metadata.get("test_type") or infer_test_type(r.run.columns.get("shear_rate"))
                       for r in runs], pa.string(), None),
        "n_points": ([r.run.n_points for r in runs], pa.int64(), None),
    }
    for key in extra_keys:
        dimension = KNOWN_METADATA.get(key)
        if dimension:
            columns[key] = ([_float_or_none(r.run.metadata.get(key)) for r in runs], pa.float64(),
                            DIMENSIONS[dimension].label)
        else:
            columns[key] = ([_text_or_none(r.run.metadata.get(key)) for r in runs], pa.string(), None)
    return _table(columns)


def _float_or_none(value: Any) -> float | None:
    return None if value is None else float(value)


def _text_or_none(value: Any) -> str | None:
    return None if value is None else str(value)


def points_table(result: "StudyResult") -> pa.Table:
    """points.parquet: every point of every run; columns present in any run, null elsewhere."""
    runs = result.runs
    sizes = [r.run.n_points for r in runs]
    total = int(sum(sizes))
    present = [c for c in POINT_COLUMNS if any(c in r.run.columns for r in runs)]
    fields = [_field("run_id", pa.string()), _field("point_index", pa.int64())]
    arrays: list[pa.Array] = [
        pa.DictionaryArray.from_arrays(np.repeat(np.arange(len(runs), dtype=np.int32), sizes),
                                       pa.array([r.run.run_id for r in runs])).cast(pa.string()),
        pa.array(np.concatenate([np.arange(n, dtype=np.int64) for n in sizes]) if runs else [], pa.int64()),
    ]
    for name in present:
        values = np.full(total, np.nan)
        known = np.zeros(total, dtype=bool)
        start = 0
        for r, n in zip(runs, sizes):
            column = r.run.columns.get(name)
            if column is not None:
                values[start:start + n] = column
                known[start:start + n] = True
            start += n
        fields.append(_field(name, pa.float64(), POINT_COLUMNS[name]))
        arrays.append(pa.array(values, mask=~known, type=pa.float64()))
    fields += [_field("excluded", pa.bool_()), _field("flags", pa.list_(pa.string()))]
    arrays.append(pa.array(np.concatenate([r.excluded for r in runs]) if runs else [], pa.bool_()))
    arrays.append(pa.array([sorted(set(f)) for r in runs for f in r.flags], pa.list_(pa.string())))
    return pa.Table.from_arrays(arrays, schema=pa.schema(fields))


def fits_table(result: "StudyResult") -> pa.Table:
    """fits.parquet: one row per run and model."""
    rows = [(r.run.run_id, f) for r in result.runs for f in r.fits]
    return _table({
        "run_id": ([rid for rid, _ in rows], pa.string(), None),
        "model": ([f.model for _, f in rows], pa.string(), None),
        "success": ([f.success for _, f in rows], pa.bool_(), None),
        "n_points": ([f.n_points for _, f in rows], pa.int64(), None),
        "aicc": ([f.aicc for _, f in rows], pa.float64(), None),
        "bic": ([f.bic for _, f in rows], pa.float64(), None),
        "rmse_log": ([f.rmse_log for _, f in rows], pa.float64(), "1"),
        "selected": ([f.selected for _, f in rows], pa.bool_(), None),
        "message": ([f.message for _, f in rows], pa.string(), None),
        "shear_rate_min": ([f.shear_rate_min for _, f in rows], pa.float64(), "1/s"),
        "shear_rate_max": ([f.shear_rate_max for _, f in rows], pa.float64(), "1/s"),
    })


def parameters_table(result: "StudyResult") -> pa.Table:
    """parameters.parquet: one row per run, model and parameter (value and standard error;
    both null when the parameter is not identified, ``note`` saying why; ``ci_low``/``ci_high``
    the 95 % profile-likelihood interval in the parameter's unit, null unless
    ``[fit] intervals = "profile"`` computed it)."""
    rows = [(r.run.run_id, f.model, p) for r in result.runs for f in r.fits for p in f.parameters]
    return _table({
        "run_id": ([rid for rid, _, _ in rows], pa.string(), None),
        "model": ([m for _, m, _ in rows], pa.string(), None),
        "name": ([p.name for _, _, p in rows], pa.string(), None),
        "value": ([p.value for _, _, p in rows], pa.float64(), None),
        "stderr": ([p.stderr for _, _, p in rows], pa.float64(), None),
        "unit": ([p.unit for _, _, p in rows], pa.string(), None),
        "note": ([p.note or None for _, _, p in rows], pa.string(), None),
        "ci_low": ([p.ci_low for _, _, p in rows], pa.float64(), None),
        "ci_high": ([p.ci_high for _, _, p in rows], pa.float64(), None),
    })


def correlations_table(result: "StudyResult") -> pa.Table:
    """correlations.parquet: one row per run, model and pair of parameters with standard errors:
    the correlation coefficient of their estimates (from the covariance)."""
    rows = [(r.run.run_id, f.model, c) for r in result.runs for f in r.fits for c in f.correlations]
    return _table({
        "run_id": ([rid for rid, _, _ in rows], pa.string(), None),
        "model": ([m for _, m, _ in rows], pa.string(), None),
        "parameter_1": ([c[0] for _, _, c in rows], pa.string(), None),
        "parameter_2": ([c[1] for _, _, c in rows], pa.string(), None),
        "correlation": ([c[2] for _, _, c in rows], pa.float64(), "1"),
    })


def results_table(result: "StudyResult") -> pa.Table:
    """results.parquet: run-level results (from geometries, fits and plugins)."""
    rows = [(r.run.run_id, x) for r in result.runs for x in r.results]
    return _table({
        "run_id": ([rid for rid, _ in rows], pa.string(), None),
        "name": ([x.name for _, x in rows], pa.string(), None),
        "value": ([x.value for _, x in rows], pa.float64(), None),
        "stderr": ([x.stderr for _, x in rows], pa.float64(), None),
        "unit": ([x.unit for _, x in rows], pa.string(), None),
        "method": ([x.method for _, x in rows], pa.string(), None),
        "at_shear_rate": ([x.at_shear_rate for _, x in rows], pa.float64(), "1/s"),
        "extrapolated": ([x.extrapolated for _, x in rows], pa.bool_(), None),
        "note": ([x.note for _, x in rows], pa.string(), None),
    })


def analysis_tables(result: "StudyResult") -> dict[str, pa.Table]:
    """Tables added by study-level analyses (name must not clash with a contract table)."""
    tables: dict[str, pa.Table] = {}
    for analysis_id, output in result.analyses.items():
        for extra in output.tables:
            if extra.name in TABLE_NAMES or extra.name in tables:
                raise ValueError(f"analysis '{analysis_id}' table name '{extra.name}' is already used")
            table = pa.Table.from_pylist([dict(row) for row in extra.rows])
            fields = [f.with_metadata({"unit": extra.units[f.name]}) if f.name in extra.units else f
                      for f in table.schema]
            tables[extra.name] = table.cast(pa.schema(fields))
    return tables


def checks_table(result: "StudyResult") -> pa.Table:
    """checks.parquet: every finding (import notes, geometry notes, checks) per run."""
    rows = [(r.run.run_id, f) for r in result.runs for f in r.findings]
    return _table({
        "run_id": ([rid for rid, _ in rows], pa.string(), None),
        "point_index": ([f.point_index for _, f in rows], pa.int64(), None),
        "check": ([f.check for _, f in rows], pa.string(), None),
        "severity": ([f.severity for _, f in rows], pa.string(), None),
        "message": ([f.message for _, f in rows], pa.string(), None),
        "value": ([f.value for _, f in rows], pa.float64(), None),  # unit per row: next column
        "unit": ([f.unit or None for _, f in rows], pa.string(), None),
    })


def rejected_table(result: "StudyResult") -> pa.Table:
    """rejected.parquet: files that could not be used, with line and reason."""
    rejected = result.rejected
    return _table({
        "source_file": ([r.source_file for r in rejected], pa.string(), None),
        "line": ([r.line for r in rejected], pa.int64(), None),
        "reason": ([r.reason for r in rejected], pa.string(), None),
        "plugin": ([r.plugin for r in rejected], pa.string(), None),
    })


def build_tables(result: "StudyResult") -> dict[str, pa.Table]:
    """All contract tables by name (``runs``, ``points``, ...)."""
    builders: Iterable[tuple[str, Any]] = (
        ("runs", runs_table), ("points", points_table), ("fits", fits_table),
        ("parameters", parameters_table), ("correlations", correlations_table), ("results", results_table),
        ("checks", checks_table), ("rejected", rejected_table))
    tables = {name: build(result) for name, build in builders}
    if result.config.specs:
        tables["specs"] = specs_table(result)
    return {**tables, **analysis_tables(result)}


def specs_table(result: "StudyResult") -> pa.Table:
    """specs.parquet: one row per run and applicable rule, with the verdict and its basis.

    ``value``/``stderr``/``min``/``max`` are in SI; their unit label is in ``unit`` (the rules
    of one table can have different units, so the fields carry no unit metadata).
    """
    rows = result.specs
    return _table({
        "run_id": ([v.run_id for v in rows], pa.string(), None),
        "rule": ([v.rule for v in rows], pa.string(), None),
        "value": ([v.value for v in rows], pa.float64(), None),
        "stderr": ([v.stderr for v in rows], pa.float64(), None),
        "min": ([v.min for v in rows], pa.float64(), None),
        "max": ([v.max for v in rows], pa.float64(), None),
        "unit": ([v.unit for v in rows], pa.string(), None),
        "verdict": ([v.verdict for v in rows], pa.string(), None),
        "straddles_limit": ([v.straddles_limit for v in rows], pa.bool_(), None),
        "method": ([v.method for v in rows], pa.string(), None),
        "message": ([v.message for v in rows], pa.string(), None),
    })

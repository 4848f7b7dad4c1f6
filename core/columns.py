"""Resolve what importers found (column names, unit text, metadata text) into a :class:`Run`.

Shared by every importer, so that a header means the same in a text file, a spreadsheet or
any lab's own format: names and symbols are matched case- and space-insensitively, the unit
is read for the dimension the name's meaning requires (:func:`gammadot.units.parse_unit`),
and values are converted to SI.
"""

from __future__ import annotations

import re
import unicodedata
from typing import Any, Mapping

from .datamodel import KNOWN_METADATA, QUANTITIES, Run
from .records import Finding, ImportRejection, RawColumn, RawRun
from .units import DIMENSIONS, UnitError, parse_quantity, to_si

# Names and symbols (after normalisation: lower case, no spaces, '_', '-', '.') for each
# quantity. Symbols follow common practice in rheometry exports.
NAME_ALIASES: dict[str, tuple[str, ...]] = {
    "shear_rate": ("shearrate", "rate", "γ̇", "γ", "gammadot", "gamma", "ẏ", "shearratė"),
    "shear_stress": ("shearstress", "stress", "τ", "tau", "σ", "sigma"),
    "viscosity": ("viscosity", "η", "eta", "dynamicviscosity", "apparentviscosity", "shearviscosity", "visc"),
    "torque": ("torque", "m"),
    "angular_velocity": ("speed", "rotationalspeed", "angularvelocity", "angularspeed", "ω", "omega", "rotation"),
    "temperature": ("temperature", "temp"),
    "time": ("time", "elapsedtime", "steptime"),
    "normal_force": ("normalforce", "fn", "force"),
    "dial_reading": ("dialreading", "dial", "θ", "theta", "reading"),
}
# Names whose meaning depends on the unit: "T"/"t" is time in s but temperature in °C.
AMBIGUOUS: dict[str, tuple[str, ...]] = {"t": ("time", "temperature")}

# SI unit assumed when a header states none (recorded as a warning on the run).
DEFAULT_UNITS: dict[str, str] = {
    "time": "s",
    "torque": "N*m",
    "angular_velocity": "rad/s",
    "normal_force": "N",
    "temperature": "degC",
    "shear_rate": "1/s",
    "shear_stress": "Pa",
    "viscosity": "Pa*s",
    "dial_reading": "dimensionless",
}

_LOOKUP: dict[str, str] = {alias: q for q, aliases in NAME_ALIASES.items() for alias in aliases}


def normalise_name(name: str) -> str:
    """Lower-case a header name and drop spaces, underscores, hyphens and dots."""
    text = unicodedata.normalize("NFC", name).strip().lower()
    return re.sub(r"[\s_\-.]+", "", text)


def recognise(name: str, unit: str | None, column_map: Mapping[str, str] | None = None) -> str | None:
    """The quantity a column holds, or ``None`` when the name is not recognised.

    ``column_map`` (from ``study.toml`` ``[columns]``) maps header names to quantities and wins.
    """
    if column_map:
        for header, quantity in column_map.items():
            if normalise_name(header) == normalise_name(name):
                return quantity
    key = normalise_name(name)
    if key in AMBIGUOUS:
        for quantity in AMBIGUOUS[key]:
            try:
                if unit is not None:
                    to_si(1.0, unit, QUANTITIES[quantity].dimension)
                    return quantity
            except UnitError:
                continue
        return AMBIGUOUS[key][0] if unit is None else None
    return _LOOKUP.get(key)


def build_run(
    raw: RawRun,
    *,
    run_id: str,
    source_file: str,
    source_sha256: str,
    column_map: Mapping[str, str] | None = None,
) -> Run:
    """Turn an importer's :class:`RawRun` into a :class:`Run` with SI columns.

    Raises :class:`ImportRejection` (with the header line) for a unit of the wrong dimension
    or an unknown unit; unrecognised columns are kept out and noted on the run.
    """
    findings: list[Finding] = [Finding("import.note", "info", note) for note in raw.notes]
    columns: dict[str, Any] = {}
    source_units: dict[str, str] = {}
    for col in raw.columns:
        quantity = recognise(col.name, col.unit, column_map)
        if quantity is None:
            findings.append(Finding("import.column_ignored", "info",
                                    f"column '{col.name}' was not recognised and is not used "
                                    "(name it in study.toml [columns] to use it)"))
            continue
        if quantity in columns:
            findings.append(Finding("import.column_duplicate", "warning",
                                    f"column '{col.name}' repeats {quantity}; the first one is used"))
            continue
        columns[quantity], source_units[quantity] = _convert_column(col, quantity, raw, findings)
    if not any(q in columns for q in ("shear_rate", "angular_velocity", "dial_reading")):
        raise ImportRejection(
            "no shear-rate, speed or dial-reading column found in the header "
            f"({', '.join(c.name for c in raw.columns) or 'empty'})", raw.header_line)
    metadata = resolve_metadata(raw.metadata, raw.first_line)
    return Run(run_id=run_id, source_file=source_file, source_sha256=source_sha256,
               first_line=raw.first_line, metadata=metadata, columns=columns,
               source_units=source_units, findings=findings)


def _convert_column(col: RawColumn, quantity: str, raw: RawRun, findings: list[Finding]) -> tuple[Any, str]:
    dimension = QUANTITIES[quantity].dimension
    unit = col.unit
    if unit is None or not unit.strip():
        unit = DEFAULT_UNITS[quantity]
        if quantity != "dial_reading":
            findings.append(Finding("import.unit_assumed", "warning",
                                    f"column '{col.name}' states no unit; "
                                    f"{DIMENSIONS[dimension].label} was assumed"))
    try:
        return to_si(col.values, unit, dimension), unit
    except UnitError as exc:
        raise ImportRejection(f"column '{col.name}': {exc}", raw.header_line) from None


def resolve_metadata(metadata: Mapping[str, str], line: int) -> dict[str, Any]:
    """Known keys lower-cased and typed (temperature °C, gap m); other keys kept as text."""
    resolved: dict[str, Any] = {}
    for key, value in metadata.items():
        name = normalise_name(key).replace("testtype", "test_type")
        dimension = KNOWN_METADATA.get(name)
        if name not in KNOWN_METADATA:
            name = re.sub(r"[^\w]+", "_", key.strip().lower()).strip("_") or "field"
            resolved[name] = value.strip()
            continue
        if dimension is None:
            resolved[name] = value.strip()
            continue
        try:
            resolved[name] = parse_quantity(value, dimension)
        except UnitError as exc:
            raise ImportRejection(f"metadata '{key}': {exc}", line) from None
    return resolved

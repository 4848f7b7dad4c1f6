"""The study site's downloads: the Parquet tables and CSV copies, inside the site folder.

The tables are copied from ``OUT/tables`` (written just before by the ``parquet_tables``
writer, the same bytes), or built here when that writer did not run, so a published site is
complete on its own. CSV copies are written with ``pyarrow.csv``; list columns (a point's
flags) become text joined with "; ", and a text cell that a spreadsheet program would run as
a formula (starting with = + - @, a tab or a carriage return) gets a leading apostrophe.
The Parquet files keep every text unchanged.
"""

from __future__ import annotations

import shutil
from pathlib import Path
from typing import Any

import pyarrow as pa
import pyarrow.compute as pc
import pyarrow.csv as pacsv
import pyarrow.parquet as pq

DOWNLOADS_DIR = "downloads"
FORMULA_START = r"^[=+\-@\t\r]"

DESCRIPTIONS = {
    "runs": "one row per run: source file and its SHA-256, sample, geometry, temperature, metadata",
    "points": "every point of every run: corrected and apparent values, excluded, flags",
    "fits": "one row per run and model: success, AICc, BIC, rmse (ln), selected, validity range",
    "parameters": "one row per run, model and parameter: value, standard error, unit",
    "correlations": "correlation coefficients of the parameter estimates, per run and model",
    "results": "run-level results: viscosity at the reporting rates, zero-shear viscosity, yield stress, "
               "correction sizes, field results",
    "checks": "every finding of every check, per run and point",
    "rejected": "files that could not be used, with line and reason",
    "specs": "specification verdicts per run and rule",
}


def csv_safe(table: pa.Table) -> pa.Table:
    """A copy for CSV: lists joined as text, formula-like text cells prefixed with ``'``."""
    columns, fields = [], []
    for field, column in zip(table.schema, table.columns):
        if pa.types.is_list(field.type) or pa.types.is_large_list(field.type):
            column = pc.binary_join(column.cast(pa.list_(pa.string())), "; ")
            field = pa.field(field.name, pa.string(), metadata=field.metadata)
        if pa.types.is_string(field.type) or pa.types.is_large_string(field.type):
            risky = pc.match_substring_regex(column, FORMULA_START)
            column = pc.if_else(risky, pc.binary_join_element_wise("'", column, ""), column)
        columns.append(column)
        fields.append(field)
    return pa.Table.from_arrays(columns, schema=pa.schema(fields))


def _source_tables(result: Any, tables_dir: Path | None) -> dict[str, tuple[Path | None, pa.Table | None]]:
    if tables_dir is not None and tables_dir.is_dir():
        found = {p.stem: (p, None) for p in sorted(tables_dir.glob("*.parquet"))}
        if found:
            return found
    from gammadot.tables import build_tables

    return {name: (None, table) for name, table in build_tables(result).items()}


def _size(path: Path) -> str:
    size = path.stat().st_size
    for unit in ("B", "kB", "MB", "GB"):
        if size < 1000 or unit == "GB":
            return f"{size:.0f} {unit}" if unit == "B" else f"{size:.1f} {unit}"
        size /= 1000
    return f"{size} B"


def write_downloads(result: Any, site_dir: Path, tables_dir: Path | None) -> tuple[list[dict[str, Any]], list[Path]]:
    """Copy (or build) the tables into ``site_dir/downloads`` with CSV copies.

    Returns the view of each table for the downloads page and the files written.
    """
    from .parquet_tables import table_bytes

    target = site_dir / DOWNLOADS_DIR
    target.mkdir(parents=True, exist_ok=True)
    views, written = [], []
    ordered = sorted(_source_tables(result, tables_dir).items(),
                     key=lambda item: (list(DESCRIPTIONS).index(item[0]) if item[0] in DESCRIPTIONS else 99, item[0]))
    for name, (path, table) in ordered:
        parquet = target / f"{name}.parquet"
        if path is not None:
            shutil.copyfile(path, parquet)
            table = pq.read_table(parquet)
        else:
            assert table is not None
            parquet.write_bytes(table_bytes(table))
        csv = target / f"{name}.csv"
        pacsv.write_csv(csv_safe(table), csv)
        written += [parquet, csv]
        units = [(f.name, (f.metadata or {}).get(b"unit", b"").decode("utf-8")) for f in table.schema]
        views.append({
            "name": name, "description": DESCRIPTIONS.get(name, "a table added by an analysis plugin"),
            "rows": table.num_rows, "parquet": f"{DOWNLOADS_DIR}/{parquet.name}", "parquet_size": _size(parquet),
            "csv": f"{DOWNLOADS_DIR}/{csv.name}", "csv_size": _size(csv), "columns": units,
        })
    return views, written

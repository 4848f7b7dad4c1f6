"""Helpers to process a study and compare its output tables (importable as ``study_tables``)."""

from __future__ import annotations

from pathlib import Path
from typing import Iterable

import pyarrow as pa
import pyarrow.parquet as pq

from gammadot.pipeline import StudyResult, process_study, write_outputs
from gammadot.registry import Registry


def run_study(study: Path, registry: Registry, out: Path) -> StudyResult:
    """Process ``study`` and write its outputs to ``out`` (tables and site)."""
    result = process_study(study, registry, out_dir=out)
    write_outputs(result, out)
    return result


def read_tables(out: Path) -> dict[str, pa.Table]:
    """Every ``OUT/tables/*.parquet`` by name (without suffix)."""
    return {p.stem: pq.read_table(p) for p in sorted((out / "tables").glob("*.parquet"))}


def without(table: pa.Table, columns: Iterable[str]) -> pa.Table:
    """``table`` without the named columns (those absent are ignored)."""
    drop = [c for c in columns if c in table.column_names]
    return table.drop_columns(drop)


def assert_same_tables(left: dict[str, pa.Table], right: dict[str, pa.Table],
                       ignore: dict[str, Iterable[str]] | None = None) -> None:
    """The same tables with equal schemas (units included) and equal rows.

    ``ignore`` maps a table name to columns left out of the comparison (a source file's name
    and checksum differ between two inputs holding the same values).
    """
    ignore = ignore or {}
    assert sorted(left) == sorted(right)
    for name in left:
        a, b = without(left[name], ignore.get(name, ())), without(right[name], ignore.get(name, ()))
        assert a.schema.equals(b.schema, check_metadata=True), name
        assert a.to_pylist() == b.to_pylist(), name

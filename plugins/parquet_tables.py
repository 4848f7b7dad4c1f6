"""Writer ``parquet_tables``: the contract tables as ``OUT/tables/<name>.parquet``.

Files are written whole to a temporary name and renamed, so a reader never sees half a
table. Compression and options are fixed, so the same input gives byte-identical files.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

import pyarrow as pa
import pyarrow.parquet as pq

from gammadot.atomic import atomic_write_bytes
from gammadot.hookspecs import hookimpl
from gammadot.records import Writer
from gammadot.tables import build_tables


def table_bytes(table: pa.Table) -> bytes:
    """A table as Parquet bytes (zstd, statistics on; deterministic for the same table)."""
    sink = pa.BufferOutputStream()
    pq.write_table(table, sink, compression="zstd")
    return sink.getvalue().to_pybytes()


def write_tables(result: Any, out_dir: Path) -> list[Path]:
    """Write every contract table below ``out_dir/tables``."""
    written = []
    for name, table in build_tables(result).items():
        path = out_dir / "tables" / f"{name}.parquet"
        atomic_write_bytes(path, table_bytes(table))
        written.append(path)
    return written


@hookimpl
def gammadot_writers() -> list[Writer]:
    """Provide the Parquet tables writer (runs first: the site links to its files)."""
    return [Writer(id="parquet_tables", title="Parquet tables", write=write_tables, order=10)]

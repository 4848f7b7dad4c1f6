"""Benchmark: the delimited-text importer against plain pyarrow.csv on the same table.

Writes a 10^6-row export (shear rate, shear stress, viscosity; a small metadata block and
units in the header) to a temporary folder, then times, best of 3:

- ``pyarrow.csv.read_csv`` on the table part alone (header row and data rows, no metadata):
  the floor no importer built on pyarrow can beat;
- ``parse_text`` on the whole file's bytes, and ``read`` on the file (includes reading it).

Prints rows per second for each and the ratio to pyarrow. The target is a ratio of at least
0.5 (and at least 1.75 M rows/s on a 2-core machine).

Run: ``python bench/bench_import.py [rows]``
"""

from __future__ import annotations

import sys
import tempfile
import time
from pathlib import Path
from typing import Callable

import numpy as np
import pyarrow as pa
import pyarrow.csv as pacsv

from gammadot.plugins.delimited_text import parse_text, read
from gammadot.records import ImportContext

METADATA = "sample: BENCH-0001\ngeometry: bob14\ntemperature: 25 °C\noperator: A. Tester\n\n"
HEADER = "Shear rate [1/s],Shear stress [Pa],Viscosity [Pa·s]\n"


def write_table(folder: Path, rows: int) -> tuple[Path, Path]:
    """Write the full export and the table-only part; return both paths."""
    rng = np.random.default_rng(20261103)
    rate = np.logspace(-2, 3, rows)
    stress = 5.0 + 2.0 * rate**0.6 * (1.0 + 0.01 * rng.standard_normal(rows))
    viscosity = stress / rate
    table = np.column_stack([rate, stress, viscosity])
    body_path = folder / "table_only.csv"
    np.savetxt(body_path, table, fmt="%.6g", delimiter=",", header=HEADER.rstrip("\n"),
               comments="")
    body = body_path.read_bytes()
    full_path = folder / "export.csv"
    full_path.write_bytes(METADATA.encode("utf-8") + body)
    return full_path, body_path


def best_of(function: Callable[[], object], repeats: int = 3) -> float:
    """The fastest of ``repeats`` wall-clock timings of ``function()`` in seconds."""
    best = float("inf")
    for _ in range(repeats):
        start = time.perf_counter()
        function()
        best = min(best, time.perf_counter() - start)
    return best


def main(rows: int = 1_000_000) -> None:
    """Time both readers and print rows/s and the ratio."""
    with tempfile.TemporaryDirectory() as tmp:
        full_path, body_path = write_table(Path(tmp), rows)
        data = full_path.read_bytes()
        body = body_path.read_bytes()
        runs = parse_text(data)
        assert len(runs) == 1 and len(runs[0].columns[0].values) == rows, "importer lost rows"
        t_arrow = best_of(lambda: pacsv.read_csv(pa.BufferReader(body)))
        t_parse = best_of(lambda: parse_text(data))
        t_read = best_of(lambda: read(full_path, ImportContext()))
    print(f"rows: {rows:,}  file: {len(data) / 1e6:.1f} MB")
    for label, seconds in (("pyarrow.csv.read_csv (table only)", t_arrow),
                           ("parse_text (whole file, bytes)", t_parse),
                           ("read (whole file, from disk)", t_read)):
        print(f"{label:36s} {seconds * 1e3:8.1f} ms  {rows / seconds / 1e6:6.2f} M rows/s  "
              f"ratio to pyarrow {t_arrow / seconds:.2f}")


if __name__ == "__main__":
    main(int(sys.argv[1]) if len(sys.argv) > 1 else 1_000_000)

"""A generator of delimited-text exports and the runs an importer must find in them.

Shared by the delimited-text tests and the spreadsheet tests (which replay the same exports
through workbooks). Every expected value, name, unit and line number is what the generator
wrote, never a constant copied from an importer. Sources the generator rests on are named in
``test_delimited_text.py``.
"""

from __future__ import annotations

import codecs
from dataclasses import dataclass, field

import numpy as np

from gammadot.records import RawRun


# Header spellings (name, unit text, bracket style): each appears as written in every file.
COLUMNS: tuple[tuple[str, str, str], ...] = (
    ("Shear rate", "1/s", "[]"),
    ("Viscosity", "mPa·s", "[]"),
    ("Apparent viscosity", "mPas", "()"),
    ("Eta", "cP", "[]"),
    ("Plastic viscosity", "Pa s", "[]"),
    ("Torque", "µN·m", "[]"),
    ("Speed", "rpm", "[]"),
    ("Rate", "s⁻¹", "[]"),
    ("Temperature", "°C", "[]"),
    ("Area", "m²", "()"),
)
ENCODINGS = ("utf-8", "utf-8-sig", "utf-16-le-bom", "utf-16-be-bom", "cp1252")
DIALECTS = ((",", "."), (";", "."), (";", ","), ("\t", "."), ("\t", ","))
METADATA_SEPS = (": ", "; ", " = ", "\t", ",")


def encode(text: str, encoding: str) -> bytes:
    """Encode ``text`` with a byte-order mark where the name says so (RFC 3629 §6, RFC 2781 §3.2)."""
    if encoding == "utf-16-le-bom":
        return codecs.BOM_UTF16_LE + text.encode("utf-16-le")
    if encoding == "utf-16-be-bom":
        return codecs.BOM_UTF16_BE + text.encode("utf-16-be")
    return text.encode(encoding)


def encodable(text: str, encoding: str) -> bool:
    """Whether ``text`` can be written in ``encoding`` (cp1252 lacks e.g. the superscript minus)."""
    try:
        encode(text, encoding)
    except UnicodeEncodeError:
        return False
    return True


def number_text(value: float, decimal: str, style: int) -> str:
    """A float written so it reads back exactly: shortest repr or 17-digit E notation."""
    if np.isnan(value):
        return ""
    text = repr(float(value)) if style == 0 else format(float(value), ".16E")
    return text.replace(".", decimal)


@dataclass
class ExpectedRun:
    """What the importer must return for one generated run."""

    metadata: dict[str, str]
    names: list[str]
    units: list[str | None]
    values: np.ndarray  # rows x columns, NaN for empty cells
    first_line: int
    header_line: int
    data_first_line: int


@dataclass
class Export:
    """A generated export: its lines and the runs it holds."""

    lines: list[str] = field(default_factory=list)
    runs: list[ExpectedRun] = field(default_factory=list)

    def add(self, line: str) -> int:
        """Append a line; return its 1-based line number."""
        self.lines.append(line)
        return len(self.lines)

    def text(self, newline: str = "\n") -> str:
        """The whole file as text with ``newline`` after every line."""
        return "".join(line + newline for line in self.lines)


def add_run(export: Export, rng: np.random.Generator, *, delimiter: str, decimal: str,
            columns: list[tuple[str, str, str]], run_index: int, blank_before_header: bool) -> None:
    """Append one run (metadata block, header, data rows) to ``export`` and record it."""
    metadata = {
        "sample": f"HC-{2611 + run_index}",
        "geometry": "bob14",
        "temperature": "25 °C",
        "gap": "0.5 mm",
        "date": f"2026-11-0{3 + run_index} 14:22",  # the value holds ':' after the separator
        "Operator": "R. Okafor",
    }
    export.add(f"# export {run_index + 1} of the bench viscometer")  # a comment, not metadata
    first_line = None
    for index, (key, value) in enumerate(metadata.items()):  # every separator in every run
        sep = METADATA_SEPS[(index + run_index) % len(METADATA_SEPS)]
        number = export.add(f"{key}{sep}{value}")
        first_line = first_line or number
    if blank_before_header:
        export.add("")
    header = [f"{name} {br[0]}{unit}{br[1]}" for name, unit, br in columns]
    header_line = export.add(delimiter.join(header))
    n_rows = int(rng.integers(3, 25))
    values = rng.choice([-1.0, 1.0], size=(n_rows, len(columns))) * 10.0 ** rng.uniform(
        -6, 6, size=(n_rows, len(columns)))
    for row in range(1, n_rows):  # empty cells (missing values) in some rows, never the first
        if rng.random() < 0.3:
            values[row, rng.integers(len(columns))] = np.nan
    data_first_line = None
    for row in range(n_rows):
        cells = [number_text(v, decimal, (row + col) % 2) for col, v in enumerate(values[row])]
        number = export.add(delimiter.join(cells))
        data_first_line = data_first_line or number
    export.runs.append(ExpectedRun(metadata, [c[0] for c in columns], [c[1] for c in columns],
                                   values, first_line, header_line, data_first_line))


def make_export(seed: int, *, delimiter: str, decimal: str, encoding: str, n_runs: int) -> Export:
    """An export with ``n_runs`` runs separated by blank lines, each with its own metadata."""
    rng = np.random.default_rng(seed)
    columns = [c for c in COLUMNS if encodable(c[1], encoding)]
    export = Export()
    export.add("Flow curve export")  # a free-text title line
    for index in range(n_runs):
        if index:
            export.add("")
        add_run(export, rng, delimiter=delimiter, decimal=decimal, columns=columns,
                run_index=index, blank_before_header=bool(index % 2))
    export.add("")  # trailing blank lines
    export.add("")
    return export


def assert_runs(runs: list[RawRun], expected: list[ExpectedRun]) -> None:
    """Values, names, units, metadata (in file order) and line numbers equal the generated."""
    assert len(runs) == len(expected)
    for run, exp in zip(runs, expected):
        assert list(run.metadata.items()) == list(exp.metadata.items())
        assert [c.name for c in run.columns] == exp.names
        assert [c.unit for c in run.columns] == exp.units
        got = np.column_stack([c.values for c in run.columns])
        np.testing.assert_array_equal(got, exp.values)  # exact: repr round trip, IEEE 754
        assert (run.first_line, run.header_line, run.data_first_line) == (
            exp.first_line, exp.header_line, exp.data_first_line)

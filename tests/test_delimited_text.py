"""Tests of the built-in delimited-text importer (``gammadot.plugins.delimited_text``).

Every file is generated here from invented values; the expected numbers, metadata and line
numbers are the ones the generator wrote, never constants copied from the importer.

Sources the expectations rest on (named again beside each check):

- RFC 4180 §2 (CSV): records end with a line break (CRLF); the last record may lack one;
  an optional header line; fields may be enclosed in double quotes.
- RFC 3629 §6: the UTF-8 byte-order mark is EF BB BF. RFC 2781 §3.2: the UTF-16 byte-order
  mark is FE FF (big-endian) or FF FE (little-endian).
- Windows-1252, via Python's ``cp1252`` codec (Microsoft's code-page table): µ = 0xB5,
  · = 0xB7, ° = 0xB0, ² = 0xB2; 0x81, 0x8D, 0x8F, 0x90, 0x9D are undefined.
- ISO 80000-1 (from memory: the decimal sign is a point or a comma on the line); the
  semicolon (or tab) as delimiter where the comma is the decimal sign is common practice.
- Python's float ``repr`` is the shortest string that reads back to the same binary64 value,
  and 17 significant digits always do (IEEE 754-2008 §5.12.2, from memory): values written
  that way must be read back exactly.
- Units in square brackets or parentheses after the column name: common practice in
  instrument exports.
"""

from __future__ import annotations

import hashlib
import zlib
from pathlib import Path

import numpy as np
import pluggy
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from gammadot import hookspecs
from gammadot.plugins import delimited_text as dt
from gammadot.records import ImportContext, Importer, ImportRejection, RawRun

from export_generator import DIALECTS, ENCODINGS, Export, assert_runs, encode, make_export, number_text

# --------------------------------------------------------------------------- generator

# The generator lives in export_generator.py (the spreadsheet tests replay its exports).


def rejection(data: bytes) -> ImportRejection:
    """The :class:`ImportRejection` ``parse_text`` raises for ``data`` (fails if none)."""
    with pytest.raises(ImportRejection) as info:
        dt.parse_text(data)
    reason = info.value.reason
    assert reason and "\n" not in reason and "\r" not in reason, "reason must be one line"
    return info.value


# --------------------------------------------------------------------------- dialect matrix


@pytest.mark.parametrize("n_runs", [1, 3])
@pytest.mark.parametrize("encoding", ENCODINGS)
@pytest.mark.parametrize("delimiter,decimal", DIALECTS, ids=lambda v: repr(v))
def test_dialect_matrix(tmp_path: Path, delimiter: str, decimal: str, encoding: str,
                        n_runs: int) -> None:
    """Every delimiter x decimal sign x encoding, one or several runs, all unit spellings.

    RFC 4180 §2 (records and fields), RFC 3629 §6 / RFC 2781 §3.2 (byte-order marks),
    Windows-1252 code page, ISO 80000-1 decimal sign (from memory), common practice for
    units in brackets.
    """
    seed = zlib.crc32(repr((delimiter, decimal, encoding, n_runs)).encode())
    export = make_export(seed, delimiter=delimiter, decimal=decimal, encoding=encoding,
                         n_runs=n_runs)
    path = tmp_path / "export.csv"
    path.write_bytes(encode(export.text(), encoding))
    assert_runs(dt.read(path, ImportContext()), export.runs)


@pytest.mark.parametrize("newline", ["\n", "\r\n", "\r"], ids=["LF", "CRLF", "CR"])
@pytest.mark.parametrize("delimiter,decimal", DIALECTS, ids=lambda v: repr(v))
def test_line_ends(delimiter: str, decimal: str, newline: str) -> None:
    """LF, CRLF (RFC 4180 §2 rule 1) and old CR-only line ends give the same runs and lines."""
    export = make_export(7, delimiter=delimiter, decimal=decimal, encoding="utf-8", n_runs=2)
    assert_runs(dt.parse_text(export.text(newline).encode()), export.runs)


def test_last_record_without_line_break() -> None:
    """RFC 4180 §2 rule 2: the last record may have no ending line break."""
    export = make_export(11, delimiter=",", decimal=".", encoding="utf-8", n_runs=1)
    export.lines = export.lines[:-2]  # drop the trailing blank lines
    assert_runs(dt.parse_text(export.text().rstrip("\n").encode()), export.runs)


@given(values=st.lists(st.lists(st.floats(allow_nan=False, allow_infinity=False, width=64),
                                min_size=3, max_size=3), min_size=1, max_size=40),
       dialect=st.sampled_from(DIALECTS))
@settings(max_examples=60, deadline=None)
def test_any_finite_values_round_trip(values: list[list[float]], dialect: tuple[str, str]) -> None:
    """Any binary64 values written with repr read back exactly (IEEE 754-2008 §5.12.2)."""
    delimiter, decimal = dialect
    lines = [delimiter.join(["Shear rate [1/s]", "Shear stress [Pa]", "Viscosity [Pa·s]"])]
    lines += [delimiter.join(repr(v).replace(".", decimal) for v in row) for row in values]
    (run,) = dt.parse_text(("\n".join(lines) + "\n").encode())
    got = np.column_stack([c.values for c in run.columns])
    np.testing.assert_array_equal(got, np.array(values, dtype=np.float64))


# --------------------------------------------------------------------------- tolerated layouts


def test_quoted_cells_whitespace_and_trailing_delimiters() -> None:
    """Quoted fields (RFC 4180 §2 rule 5), spaces around cells and a trailing delimiter on
    every line (a spreadsheet's padding, common practice) read as plain numbers."""
    rows = [[0.1, 2.5], [1.0, 3.25], [10.0, 4.125]]
    lines = ['"Shear rate [1/s]";"Shear stress [Pa]";']
    lines += [f'"{r[0]}";  {r[1]} ;' for r in rows]
    (run,) = dt.parse_text(("\r\n".join(lines) + "\r\n").encode())
    assert [(c.name, c.unit) for c in run.columns] == [("Shear rate", "1/s"), ("Shear stress", "Pa")]
    np.testing.assert_array_equal(np.column_stack([c.values for c in run.columns]), rows)


@pytest.mark.parametrize("quote", ["", '"'], ids=["plain", "quoted"])
def test_uneven_rows_are_padded_and_blank_rows_skipped(quote: str) -> None:
    """Rows of uneven length (trailing delimiter on some rows only, short rows) and blank or
    delimiter-only lines inside the table: missing cells are NaN; blank rows and rows of
    missing values only carry no point. A quoted cell (RFC 4180 §2 rule 5) sends the body through the row-by-row reader."""
    text = ("Shear rate [1/s],Shear stress [Pa],Viscosity [Pa·s]\n"
            f"{quote}1{quote},2,3,\n"
            "4,5\n"
            "   \n"
            ",,,\n"
            "NaN,,nan\n"
            "7,,9,NaN\n")
    (run,) = dt.parse_text(text.encode())
    got = np.column_stack([c.values for c in run.columns])
    np.testing.assert_array_equal(got, [[1, 2, 3], [4, 5, np.nan], [7, np.nan, 9]])


@st.composite
def irregular_tables(draw: st.DrawFn) -> tuple[str, np.ndarray]:
    """A 3-column table with missing cells (empty, ``NaN``, ``n/a``), short rows, trailing
    delimiters, blank lines and quoted cells, and the values it holds (NaN where a cell is missing)."""
    delimiter, decimal = draw(st.sampled_from(DIALECTS))
    values = draw(st.lists(st.lists(st.one_of(st.none(), st.floats(-1e9, 1e9)), min_size=3,
                                    max_size=3), min_size=1, max_size=12))
    values[0][0] = 1.5  # the first data row must be numeric for the header to be found
    quote = draw(st.booleans())
    lines = [delimiter.join(["Shear rate [1/s]", "Shear stress [Pa]", "Viscosity [Pa·s]"])]
    expected = []
    for row in values:
        cells = [draw(st.sampled_from(["", "", "NaN", "n/a"])) if v is None
                 else repr(v).replace(".", decimal) for v in row]
        if quote and cells[0]:
            cells[0] = f'"{cells[0]}"'
        while draw(st.booleans()) and cells and not cells[-1]:
            cells.pop()  # a short row
        lines.append(delimiter.join(cells) + delimiter * draw(st.integers(0, 2)))
        if draw(st.integers(0, 4)) == 0:
            lines.append(draw(st.sampled_from(["", "  ", delimiter * 3, " \t"])))
        if any(v is not None for v in row):
            expected.append([np.nan if v is None else v for v in row])
    return "\n".join(lines) + "\n", np.array(expected, dtype=np.float64).reshape(-1, 3)


@given(table=irregular_tables())
@settings(max_examples=150, deadline=None)
def test_irregular_tables_read_the_same_on_every_path(table: tuple[str, np.ndarray]) -> None:
    """pyarrow, the Arrow cell reader and the Python row scan give the generated values."""
    text, expected = table
    (run,) = dt.parse_text(text.encode())
    np.testing.assert_array_equal(np.column_stack([c.values for c in run.columns]), expected)


def test_unicode_blank_lines_after_the_table() -> None:
    """Lines holding only a no-break space or a form feed (Unicode White_Space) are blank."""
    text = "Rate [1/s];Stress [Pa]\n1;2\n\n\u00a0\n3;4\n\n\x0c\n\u00a0;\n"
    (run,) = dt.parse_text(text.encode())
    np.testing.assert_array_equal(run.columns[0].values, [1, 3])
    np.testing.assert_array_equal(run.columns[1].values, [2, 4])


def test_blank_line_followed_by_numbers_continues_the_table() -> None:
    """Only a blank line followed by metadata or a header starts a new run (product contract)."""
    text = "sample: LT-0420\nRate [1/s];Stress [Pa]\n1;2\n\n3;4\n\nnan;6\n"
    (run,) = dt.parse_text(text.encode())
    np.testing.assert_array_equal(run.columns[0].values, [1, 3, np.nan])
    np.testing.assert_array_equal(run.columns[1].values, [2, 4, 6])


def test_new_header_without_metadata_starts_a_run() -> None:
    """A blank line followed directly by a header starts a run with no metadata."""
    text = "sample: LT-0420\nRate [1/s]\tStress [Pa]\n1\t2\n\nRate [1/s]\tStress [Pa]\n3\t4\n"
    first, second = dt.parse_text(text.encode())
    assert dict(first.metadata) == {"sample": "LT-0420"}
    assert dict(second.metadata) == {}
    assert (second.first_line, second.header_line, second.data_first_line) == (5, 5, 6)


def test_metadata_kept_as_written() -> None:
    """Keys and values as written (stripped), in file order, later separators in the value;
    comment lines and a spreadsheet's ``sep=`` hint line are not metadata."""
    lines = ["sep=;", "# instrument settings follow", "Sample ID: HC-2611 / batch 7",
             "date: 2026-11-03 14:22:05", "note = flow curve; up ramp", "Temperature [°C];25;;;",
             "Operator,R. Okafor", "", "Rate [1/s];Stress [Pa]", "1;2"]
    (run,) = dt.parse_text("\n".join(lines).encode())
    assert list(run.metadata.items()) == [
        ("Sample ID", "HC-2611 / batch 7"), ("date", "2026-11-03 14:22:05"),
        ("note", "flow curve; up ramp"), ("Temperature [°C]", "25"), ("Operator", "R. Okafor")]
    assert run.first_line == 3 and run.header_line == 9 and run.data_first_line == 10


@pytest.mark.parametrize("cell,name,unit", [
    ("Shear rate [1/s]", "Shear rate", "1/s"),
    ("Viscosity (mPa·s)", "Viscosity", "mPa·s"),
    ("Temp. (bath) [°C]", "Temp. (bath)", "°C"),
    ("Speed (1/(min))", "Speed", "1/(min)"),
    ("Dial reading [-]", "Dial reading", "-"),
    ("Point", "Point", None),
    ("Viscosity []", "Viscosity", None),
])
def test_split_unit(cell: str, name: str, unit: str | None) -> None:
    """Unit text is the final bracketed group (common practice in instrument exports)."""
    assert dt.split_unit(cell) == (name, unit)


def test_regular_tables_never_use_the_python_row_scan(monkeypatch: pytest.MonkeyPatch) -> None:
    """Regular tables are parsed by pyarrow.csv alone; the other readers are for errors and
    uneven rows."""
    def refuse(*args: object) -> None:
        raise AssertionError("Python row scan used for a regular table")

    monkeypatch.setattr(dt, "_read_body_python", refuse)
    monkeypatch.setattr(dt, "_read_body_cells", refuse)
    for delimiter, decimal in DIALECTS:
        export = make_export(3, delimiter=delimiter, decimal=decimal, encoding="utf-8", n_runs=3)
        assert_runs(dt.parse_text(export.text().encode()), export.runs)


# --------------------------------------------------------------------------- bad inputs


def test_empty_file(tmp_path: Path) -> None:
    """An empty (or whitespace-only) file is rejected for the whole file."""
    path = tmp_path / "empty.csv"
    path.write_bytes(b"")
    with pytest.raises(ImportRejection) as info:
        dt.read(path, ImportContext())
    assert info.value.line is None and "empty" in info.value.reason
    assert rejection(b" \r\n\t\n").line is None


def test_random_bytes_named_csv(tmp_path: Path) -> None:
    """Random bytes with a .csv name are rejected cleanly, and sniffing does not claim them."""
    data = np.random.default_rng(20261103).integers(0, 256, 4096, dtype=np.uint8).tobytes()
    path = tmp_path / "random.csv"
    path.write_bytes(data)
    assert dt.sniff(path, data) == 0.0
    with pytest.raises(ImportRejection) as info:
        dt.read(path, ImportContext())
    assert "\n" not in info.value.reason


@pytest.mark.parametrize("data", [
    b"PK\x03\x04" + bytes(100),  # zip container (xlsx)
    b"Rate [1/s],Stress [Pa]\n1,2\n\x00\x00",  # NUL bytes without a UTF-16 byte-order mark
    b"Rate [1/s],Stress [Pa]\n1,\x81\n",  # 0x81 is undefined in Windows-1252 and not UTF-8
])
def test_binary_content(data: bytes) -> None:
    """Binary content is not claimed by sniff and is rejected by the parser."""
    assert dt.sniff(Path("x.csv"), data) == 0.0
    rejection(data)


@given(data=st.binary(max_size=300))
@settings(max_examples=300, deadline=None, suppress_health_check=[HealthCheck.too_slow])
def test_arbitrary_bytes_never_crash(data: bytes) -> None:
    """Any bytes give runs or an ImportRejection with a one-line reason, never another error."""
    try:
        runs = dt.parse_text(data)
    except ImportRejection as exc:
        assert exc.reason and "\n" not in exc.reason
        assert exc.line is None or exc.line >= 1
    else:
        assert runs and all(isinstance(r, RawRun) for r in runs)
    assert 0.0 <= dt.sniff(Path("x.csv"), data) <= 1.0


@given(text=st.text(alphabet=st.sampled_from(list("0123456789.,;\t :=-+eE[]()#\"abc \n\r")),
                    max_size=200))
@settings(max_examples=300, deadline=None)
def test_arbitrary_table_like_text_never_crashes(text: str) -> None:
    """Text made of table characters reaches deep into the parser; it never fails otherwise."""
    try:
        dt.parse_text(text.encode())
    except ImportRejection as exc:
        assert exc.reason and "\n" not in exc.reason


def test_header_only() -> None:
    """A header with no data rows is rejected at the header's line."""
    exc = rejection("sample: HC-2611\ngap: 0.5 mm\nRate [1/s];Stress [Pa]\n\n".encode())
    assert exc.line == 3
    assert exc.reason == "header found on line 3 but no data rows"


@pytest.mark.parametrize("quote", ["", '"'], ids=["plain", "quoted"])
@pytest.mark.parametrize("delimiter,decimal", DIALECTS, ids=lambda v: repr(v))
def test_non_numeric_cell_mid_table(delimiter: str, decimal: str, quote: str) -> None:
    """A text cell in the table names its line and column (both body readers)."""
    export = Export()
    export.add("sample: HC-2611")
    export.add(delimiter.join(["Shear rate [1/s]", "Viscosity [Pa·s]", "Torque [µN·m]"]))
    while len(export.lines) < 60:
        n = len(export.lines)
        export.add(delimiter.join(number_text(v, decimal, 0) for v in (n * 0.5, n * 1.5, n * 2.5)))
    export.lines[56] = delimiter.join(["1", f"{quote}abc{quote}", "2"])  # line 57
    exc = rejection(export.text().encode())
    assert exc.line == 57
    assert exc.column == 2  # the second field of the line (1-based), as written above
    assert exc.reason == "column 'Viscosity': 'abc' is not a number"


@pytest.mark.parametrize("quote", ["", '"'], ids=["plain", "quoted"])
def test_too_many_fields(quote: str) -> None:
    """A data row with more values than the header has columns is rejected at its line;
    empty or NaN padding beyond the header is tolerated."""
    text = f"Rate [1/s],Stress [Pa]\n1,2,,NaN\n3,4\n5,6,{quote}7{quote},\n8,9\n"
    exc = rejection(text.encode())
    assert exc.line == 4 and exc.column == 3  # the value "7" is the third field
    assert exc.reason == "3 fields, but the header on line 1 has 2"


def test_no_header() -> None:
    """Metadata without any table is rejected as a file without a header."""
    exc = rejection(b"sample: HC-2611\ngeometry: bob14\n")
    assert exc.reason == "no table header found" and exc.line is None
    assert isinstance(exc, dt.NoTableFound)


def test_numbers_before_any_header() -> None:
    """Numbers with no header above them are rejected at their line."""
    exc = rejection(b"sample: HC-2611\n1.0,2.0\n3.0,4.0\n")
    assert exc.line == 2


def test_metadata_block_without_table_after_last_run() -> None:
    """A new metadata block (after a blank line) that never gets a table is rejected at its line."""
    exc = rejection(b"Rate [1/s],Stress [Pa]\n1,2\n\nsample: HC-2612\ngap: 1 mm\n")
    assert exc.line == 4


def test_decimal_sign_not_matching_the_table() -> None:
    """A point-decimal cell in a decimal-comma table is reported, not misread (ISO 80000-1)."""
    exc = rejection("Rate [1/s];Stress [Pa]\n1,5;2,5\n3,5;4.5\n".encode())
    assert exc.line == 3 and "'4.5' is not a number" in exc.reason


# --------------------------------------------------------------------------- file safety, sniff, hook


def test_input_file_is_never_modified(tmp_path: Path) -> None:
    """Reading leaves the file's bytes and modification time as they were."""
    export = make_export(5, delimiter=";", decimal=",", encoding="cp1252", n_runs=2)
    path = tmp_path / "export.csv"
    path.write_bytes(encode(export.text("\r\n"), "cp1252"))
    before = (hashlib.sha256(path.read_bytes()).hexdigest(), path.stat().st_mtime_ns)
    dt.read(path, ImportContext())
    dt.sniff(path, path.read_bytes()[:65536])
    assert (hashlib.sha256(path.read_bytes()).hexdigest(), path.stat().st_mtime_ns) == before


def test_sniff_prefers_tables_with_text_suffixes() -> None:
    """A table with a text suffix outranks the same bytes under another suffix and free text."""
    export = make_export(9, delimiter="\t", decimal=",", encoding="utf-8", n_runs=1)
    data = encode(export.text(), "utf-16-le-bom")
    table_csv = dt.sniff(Path("run.csv"), data)
    table_other = dt.sniff(Path("run.log"), data)
    prose_csv = dt.sniff(Path("notes.txt"), "Nothing tabular here.\n".encode())
    assert table_csv > table_other > 0.0
    assert table_csv > prose_csv
    assert dt.sniff(Path("notes.log"), b"Nothing tabular here.\n") == 0.0


def test_sniff_tolerates_a_character_cut_at_the_end_of_the_head() -> None:
    """The core passes the first 64 KiB, which may end inside a multi-byte UTF-8 character
    (RFC 3629 §3). "Ё" is D0 81 in UTF-8 and 0x81 is undefined in Windows-1252, so the head
    is only recognised if the cut character alone is set aside."""
    text = "operator: Ё. Tester\nRate [1/s];Viscosity [mPa·s]\n" + "1,5;2,5\n" * 20 + "# Ё\n"
    data = text.encode("utf-8")
    head = data[:-2]  # ends with D0, the first byte of the last "Ё"
    assert dt.sniff(Path("x.csv"), head) == dt.sniff(Path("x.csv"), data) > 0.5


def test_hook_provides_the_importer() -> None:
    """The module's hook returns one Importer record that pluggy can collect."""
    pm = pluggy.PluginManager(hookspecs.PROJECT_NAME)
    pm.add_hookspecs(hookspecs)
    pm.register(dt, name="delimited_text")
    (records,) = pm.hook.gammadot_importers()
    (importer,) = records
    assert isinstance(importer, Importer) and importer.id == "delimited_text"
    assert set(importer.suffixes) == {".csv", ".txt", ".tsv", ".dat"}
    assert importer.sniff is dt.sniff and importer.read is dt.read


# --------------------------------------------------------------------------- text columns
# Common practice: instrument exports often carry a status word or a timestamp per point.
# Such columns are skipped (and named in the run's notes); numeric columns keep their checks.

TEXT_COLUMN_BODIES = {
    "regular": "1,1,2,ok\n2,2,3,ok\n3,4,5,overload\n",                  # pyarrow fast path
    "uneven": "1,1,2,ok\n2,2,3\n3,4,5,overload\n",                       # cell-grid path
    "quoted": '1,1,2,"ok, steady"\n2,2,3,ok\n3,4,5,"over, load"\n',      # Python row path
}


@pytest.mark.parametrize("body", list(TEXT_COLUMN_BODIES))
def test_text_column_is_skipped_and_noted(body: str) -> None:
    data = ("sample: gel\nTime [s],Shear rate [1/s],Viscosity [Pa s],Status\n" + TEXT_COLUMN_BODIES[body]).encode()
    (run,) = dt.parse_text(data)
    assert [c.name for c in run.columns] == ["Time", "Shear rate", "Viscosity"]
    np.testing.assert_array_equal(run.columns[2].values, [2.0, 3.0, 5.0])
    assert run.notes == ("column 'Status' holds text, not numbers, and is not used",)


def test_timestamp_column_is_text_but_a_stray_word_in_a_number_column_is_still_an_error() -> None:
    rows = "\n".join(f"2026-11-03 14:2{i}:00;{i + 1},5;{2 * i + 1},0" for i in range(6))
    (run,) = dt.parse_text(f"Timestamp;Rate [1/s];Stress [Pa]\n{rows}\n".encode())
    assert [c.name for c in run.columns] == ["Rate", "Stress"] and "Timestamp" in run.notes[0]
    with pytest.raises(ImportRejection) as info:
        dt.parse_text(f"Timestamp;Rate [1/s];Stress [Pa]\n{rows}\n2026-11-03 14:30:00;9,5;n/c\n".encode())
    assert info.value.line == 8 and info.value.reason == "column 'Stress': 'n/c' is not a number"

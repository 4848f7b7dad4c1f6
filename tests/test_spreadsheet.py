"""Tests of the built-in spreadsheet importer (``gammadot.plugins.spreadsheet``).

Workbooks are generated here with openpyxl (and XlsxWriter where a formula needs a saved
value: openpyxl writes formulas without one). The delimited-text dialect matrix is replayed
through workbooks: the same generated export (``export_generator``) written cell by cell must
give the same runs, and a study of the workbook the same tables as a study of the text file.

Sources the expectations rest on:

- ECMA-376 Part 1 (Office Open XML, SpreadsheetML): §18.3.1.4 ``c`` (a cell's saved value
  ``v`` and formula ``f``; ``t="str"`` for a formula's text result), §18.3.1.55 ``mergeCells``
  (a merged range shows its top-left cell's value; the other cells are empty), §18.3.1.73
  ``row`` (rows numbered from 1). ECMA-376 Part 2 (Open Packaging Conventions): the package
  is a zip file (from memory: local file headers start with ``PK\\x03\\x04``).
- The legacy binary workbook and encrypted workbooks are OLE2 compound files whose first
  bytes are ``D0 CF 11 E0`` (from memory).
- Python's float ``repr`` reads back to the same binary64 value (IEEE 754-2008 §5.12.2, from
  memory), so numbers written as text must come back exactly. A number with at most 15
  significant digits survives any binary64 round trip (from memory: DBL_DIG = 15, C11
  §5.2.4.2.2); numeric cells hold such numbers here, because openpyxl writes a float with 16
  significant digits (its ``safe_string``), which does not always read back to the same float.
- A second header row holding units, and metadata written as key and value in two cells, are
  common practice in lab workbooks.
"""

from __future__ import annotations

import hashlib
import zipfile
import zlib
from pathlib import Path

import numpy as np
import openpyxl
import pytest

from gammadot.plugins import spreadsheet as sp
from gammadot.plugins.delimited_text import split_unit
from gammadot.records import ImportContext, ImportRejection, RawRun

from export_generator import DIALECTS, METADATA_SEPS, Export, assert_runs, encode, make_export
from study_tables import assert_same_tables, read_tables, run_study

# --------------------------------------------------------------------------- replaying exports


def _metadata_cells(line: str, layout: str) -> list[object]:
    """A metadata line as cells: all in one cell, or key and value in two.

    A tab cannot separate inside a cell (pasting tab-separated text splits it into cells),
    so a tab-separated line always takes two cells.
    """
    if layout == "one-cell" and "\t" not in line:
        return [line]
    for sep in METADATA_SEPS:  # the generator writes key<sep>value with one of these
        key, found, value = line.partition(sep)
        if found and key and not any(s.strip() and s.strip() in key for s in METADATA_SEPS):
            return [key, value]
    return [line]


def _table_cells(line: str, delimiter: str, decimal: str, numbers: str) -> list[object]:
    """A table line as cells: numbers as numeric cells, or every cell as the text written."""
    cells: list[object] = []
    for text in line.split(delimiter):
        if numbers == "numeric" and text and text[0] in "+-0123456789.,":
            cells.append(fifteen_digits(float(text.replace(decimal, "."))))
        else:
            cells.append(text or None)
    return cells


def fifteen_digits(value: float) -> float:
    """``value`` rounded to 15 significant digits (survives every binary64 round trip)."""
    return float(f"{value:.15g}")


def stored_as_cells(export: Export) -> list:
    """The export's expected runs with values as numeric cells hold them (15 digits)."""
    import dataclasses

    rounded = np.vectorize(lambda v: v if np.isnan(v) else fifteen_digits(v), otypes=[float])
    return [dataclasses.replace(run, values=rounded(run.values)) for run in export.runs]


def export_rows(export: Export, delimiter: str, decimal: str, *, numbers: str, layout: str) -> list[list[object]]:
    """The generated export as sheet rows: row n holds line n (so line numbers stay valid)."""
    table_lines: set[int] = set()
    metadata_lines: set[int] = set()
    for run in export.runs:
        n_rows = run.values.shape[0]
        table_lines.update([run.header_line, *range(run.data_first_line, run.data_first_line + n_rows)])
        metadata_lines.update(range(run.first_line, run.first_line + len(run.metadata)))
    rows = []
    for number, line in enumerate(export.lines, 1):
        if not line:
            rows.append([])
        elif number in table_lines:
            rows.append(_table_cells(line, delimiter, decimal, numbers))
        elif number in metadata_lines:
            rows.append(_metadata_cells(line, layout))
        else:
            rows.append([line])
    return rows


def write_workbook(path: Path, sheets: dict[str, list[list[object]]]) -> Path:
    """A workbook with one sheet per entry; row n of the list is sheet row n."""
    wb = openpyxl.Workbook()
    wb.remove(wb.active)
    for title, rows in sheets.items():
        ws = wb.create_sheet(title)
        for r, row in enumerate(rows, 1):
            for c, value in enumerate(row, 1):
                if value is not None:
                    ws.cell(row=r, column=c, value=value)
    wb.save(path)
    return path


def read_book(path: Path) -> list[RawRun]:
    return sp.read(path, ImportContext())


def strip_sheet(runs: list[RawRun], title: str) -> list[RawRun]:
    """Runs without the ``sheet`` metadata key the importer adds (checked to be ``title``)."""
    import dataclasses

    out = []
    for run in runs:
        assert run.metadata[sp.SHEET_KEY] == title
        out.append(dataclasses.replace(run, metadata={k: v for k, v in run.metadata.items() if k != sp.SHEET_KEY}))
    return out


@pytest.mark.parametrize("layout", ["one-cell", "two-cells"])
@pytest.mark.parametrize("numbers", ["numeric", "text"])
@pytest.mark.parametrize("n_runs", [1, 3])
@pytest.mark.parametrize("delimiter,decimal", DIALECTS, ids=lambda v: repr(v))
def test_dialect_matrix_through_a_workbook(tmp_path: Path, delimiter: str, decimal: str, n_runs: int,
                                           numbers: str, layout: str) -> None:
    """The text generator's exports, written into a sheet, give the runs the text gives.

    Numbers as numeric cells (exact: float repr, IEEE 754) or as the very text of the file
    (decimal comma included); metadata as one cell or as key and value cells (common
    practice); row n holds line n, so the expected line numbers are the expected rows.
    """
    seed = zlib.crc32(repr((delimiter, decimal, n_runs, "xlsx")).encode())
    export = make_export(seed, delimiter=delimiter, decimal=decimal, encoding="utf-8", n_runs=n_runs)
    rows = export_rows(export, delimiter, decimal, numbers=numbers, layout=layout)
    path = write_workbook(tmp_path / "export.xlsx", {"Flow curves": rows})
    runs = read_book(path)
    expected = stored_as_cells(export) if numbers == "numeric" else export.runs
    assert_runs(strip_sheet(runs, "Flow curves"), expected)


FLOW_STUDY_TOML = '''[study]
title = "Workbook and text give the same tables"

[geometries.cone50]
type = "cone_plate"
radius = "25 mm"
cone_angle = "1 deg"
'''


def _flow_export(delimiter: str, decimal: str) -> str:
    """Two runs: instrument values, and torque and speed on the cone (power-law fluid)."""
    # 15 significant digits: numeric cells written by openpyxl read back exactly (see above)
    rate = np.array([fifteen_digits(g) for g in np.geomspace(0.5, 200, 14)])
    eta = np.array([fifteen_digits(e) for e in 4.0 * rate ** -0.45])  # Pa·s
    text = ["sample: HC-2611", "temperature: 25 °C", "operator: R. Okafor",
            delimiter.join(["Shear rate [1/s]", "Viscosity [mPa·s]", "Status"])]
    text += [delimiter.join([repr(float(g)).replace(".", decimal), repr(fifteen_digits(e * 1000)).replace(".", decimal), "ok"])
             for g, e in zip(rate, eta)]
    omega = rate * np.radians(1.0)  # γ̇ = Ω/α on a cone (Macosko 1994, ch. 5, from memory)
    torque = 2 * np.pi * 0.025 ** 3 * eta * rate / 3  # M = 2πR³τ/3
    omega = np.array([fifteen_digits(w) for w in omega])
    torque = np.array([fifteen_digits(m * 1e6) for m in torque]) / 1e6
    text += ["", "sample: HC-2612", "geometry: cone50",
             delimiter.join(["Speed [rad/s]", "Torque [µN·m]"])]
    text += [delimiter.join([repr(float(w)).replace(".", decimal), repr(fifteen_digits(m * 1e6)).replace(".", decimal)])
             for w, m in zip(omega, torque)]
    return "\n".join(text) + "\n"


@pytest.mark.parametrize("delimiter,decimal", [(",", "."), (";", ",")], ids=["comma", "semicolon-decimal-comma"])
def test_workbook_and_text_give_the_same_tables(tmp_path: Path, registry, delimiter: str, decimal: str) -> None:
    """A study of the text export and a study of the same cells in a workbook: equal tables
    (every table the writers produce), apart from the source file's name and checksum and
    the sheet name the workbook adds to runs.parquet."""
    text = _flow_export(delimiter, decimal)
    lines = text.rstrip("\n").split("\n")
    text_study, book_study = tmp_path / "text", tmp_path / "book"
    text_study.mkdir()
    book_study.mkdir()
    for study in (text_study, book_study):
        (study / "study.toml").write_text(FLOW_STUDY_TOML, encoding="utf-8")
    (text_study / "lot-2611.csv").write_bytes(encode(text, "utf-8"))
    rows = [[_typed(c, decimal) for c in line.split(delimiter)] if delimiter in line else ([line] if line else [])
            for line in lines]
    write_workbook(book_study / "lot-2611.xlsx", {"HC": rows})
    text_result = run_study(text_study, registry, tmp_path / "out-text")
    book_result = run_study(book_study, registry, tmp_path / "out-book")
    assert not text_result.rejected and not book_result.rejected
    assert len(book_result.runs) == 2
    ignore = {"runs": ["source_file", "source_sha256", sp.SHEET_KEY]}
    assert_same_tables(read_tables(tmp_path / "out-text"), read_tables(tmp_path / "out-book"), ignore)
    runs = read_tables(tmp_path / "out-book")["runs"].to_pylist()
    assert [r["source_file"] for r in runs] == ["lot-2611.xlsx"] * 2
    assert [r[sp.SHEET_KEY] for r in runs] == ["HC", "HC"]


def _typed(text: str, decimal: str) -> object:
    """A cell as a spreadsheet holds it: a number when the text is one, else the text."""
    try:
        return float(text.replace(decimal, "."))
    except ValueError:
        return text or None


# --------------------------------------------------------------------------- spreadsheet layouts


def test_units_row_under_the_header_is_joined(tmp_path: Path) -> None:
    """A header without units and a row of units below it (common practice) read as one header;
    the unit cell may be bracketed or bare, a text column may have no unit."""
    rate = [0.1, 1.0, 10.0]
    rows = [["sample", "HC-2611"], [],
            ["Shear rate", "Shear stress", "Viscosity", "Status", "Temperature"],
            ["1/s", "[Pa]", "mPa·s", None, "°C"]]
    rows += [[g, 2.0 * g, 2000.0, "ok", 25.0] for g in rate]
    runs = read_book(write_workbook(tmp_path / "units.xlsx", {"S": rows}))
    (run,) = runs
    assert [(c.name, c.unit) for c in run.columns] == [
        ("Shear rate", "1/s"), ("Shear stress", "Pa"), ("Viscosity", "mPa·s"), ("Temperature", "°C")]
    assert run.header_line == 3 and run.data_first_line == 5  # sheet rows, the units row between
    np.testing.assert_array_equal(run.columns[0].values, rate)
    assert "column 'Status' holds text, not numbers, and is not used" in run.notes


def test_a_second_text_row_that_is_not_units_is_not_joined(tmp_path: Path) -> None:
    """Words under a header are not units, so they are not joined to it: as in a text export,
    the row right above the numbers is the header, and it names no flow-curve quantity."""
    rows = [["Shear rate [1/s]", "Viscosity [Pa·s]"], [1.0, 2.0], [],
            ["note", "second series"], ["Shear rate", "Viscosity"], ["measured", "computed"], [1.0, 2.0]]
    with pytest.raises(ImportRejection) as info:
        read_book(write_workbook(tmp_path / "words.xlsx", {"S": rows}))
    assert info.value.reason == ("sheet 'S', row 6: no shear-rate, speed or dial-reading column found "
                                 "in the header (measured, computed)")


def test_merged_cells_read_as_they_look(tmp_path: Path) -> None:
    """Merged title across the top, merged metadata value, a header cell merged over the units
    row: the value sits in the range's top-left cell and the rest is empty (ECMA-376 §18.3.1.55)."""
    path = tmp_path / "merged.xlsx"
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "Lot 2611"
    ws["A1"] = "Flow curve of the hand-cream base"  # free text: no key-value separator
    ws.merge_cells("A1:D1")
    ws["A2"], ws["B2"] = "sample", "HC-2611"
    ws.merge_cells("B2:D2")
    ws["A3"], ws["B3"] = "temperature", "25 °C"
    ws["A5"], ws["B5"], ws["C5"] = "Time [s]", "Shear rate", "Viscosity"
    ws.merge_cells("A5:A6")
    ws["B6"], ws["C6"] = "1/s", "Pa·s"
    for r, (t, g, e) in enumerate([(10, 1.0, 3.0), (20, 2.0, 2.5), (30, 4.0, 2.0)], 7):
        ws.cell(r, 1, t), ws.cell(r, 2, g), ws.cell(r, 3, e)
    wb.save(path)
    (run,) = read_book(path)
    assert dict(run.metadata) == {"sample": "HC-2611", "temperature": "25 °C", "sheet": "Lot 2611"}
    assert [(c.name, c.unit) for c in run.columns] == [("Time", "s"), ("Shear rate", "1/s"), ("Viscosity", "Pa·s")]
    np.testing.assert_array_equal(run.columns[2].values, [3.0, 2.5, 2.0])
    assert (run.first_line, run.header_line, run.data_first_line) == (2, 5, 7)


def test_empty_trailing_rows_margins_and_stale_dimensions(tmp_path: Path) -> None:
    """Formatted empty cells far below and to the right, and a left margin column, add nothing."""
    path = tmp_path / "trailing.xlsx"
    wb = openpyxl.Workbook()
    ws = wb.active
    ws["B2"], ws["C2"] = "Shear rate [1/s]", "Viscosity [Pa·s]"
    for r in range(3, 6):
        ws.cell(r, 2, float(r)), ws.cell(r, 3, 10.0 / r)
    for ref in ("B400", "H3", "Z900"):
        ws[ref].number_format = "0.00"  # styled but empty: stored, and counted in the dimension
    wb.save(path)
    (run,) = read_book(path)
    assert [c.name for c in run.columns] == ["Shear rate", "Viscosity"]
    np.testing.assert_array_equal(run.columns[0].values, [3.0, 4.0, 5.0])


def test_runs_per_sheet_and_several_runs_in_one_sheet(tmp_path: Path) -> None:
    """One run per sheet, two runs in one sheet (blank row + new metadata), a hidden sheet and
    a notes sheet skipped with a note on the first run."""
    def run_rows(sample: str, scale: float) -> list[list[object]]:
        return [["sample", sample], ["Shear rate [1/s]", "Viscosity [Pa·s]"],
                *[[g, scale / g] for g in (1.0, 2.0, 4.0)]]

    path = tmp_path / "book.xlsx"
    write_workbook(path, {"A": run_rows("HC-1", 1.0), "B": run_rows("HC-2", 2.0) + [[]] + run_rows("HC-3", 3.0),
                          "Notes": [["Checked by R. Okafor"]], "Hidden": run_rows("HC-9", 9.0)})
    wb = openpyxl.load_workbook(path)
    wb["Hidden"].sheet_state = "hidden"
    wb.save(path)
    runs = read_book(path)
    assert [(r.metadata["sample"], r.metadata["sheet"], r.first_line) for r in runs] == [
        ("HC-1", "A", 1), ("HC-2", "B", 1), ("HC-3", "B", 7)]
    np.testing.assert_array_equal(runs[2].columns[1].values, [3.0, 1.5, 0.75])
    assert "sheet 'Notes' holds no table header and was not read" in runs[0].notes
    assert "sheet 'Hidden' is hidden and was not read" in runs[0].notes


# --------------------------------------------------------------------------- formulas


def test_formulas_count_with_their_saved_values(tmp_path: Path) -> None:
    """Formula cells with saved results (written by XlsxWriter, which stores the value given)
    are read as those values (ECMA-376 §18.3.1.4: ``v`` beside ``f``)."""
    import xlsxwriter

    path = tmp_path / "formulas.xlsx"
    rate = [0.5, 1.0, 2.0, 4.0]
    stress = [3.0, 4.0, 5.5, 7.0]
    with xlsxwriter.Workbook(path) as wb:
        ws = wb.add_worksheet("Calc")
        ws.write_row(0, 0, ["Shear rate [1/s]", "Shear stress [Pa]", "Viscosity [Pa·s]"])
        for r, (g, t) in enumerate(zip(rate, stress), 1):
            ws.write_number(r, 0, g)
            ws.write_number(r, 1, t)
            ws.write_formula(r, 2, f"=B{r + 1}/A{r + 1}", None, t / g)
    (run,) = read_book(path)
    np.testing.assert_array_equal(run.columns[2].values, np.array(stress) / np.array(rate))


def test_formula_without_saved_value_names_its_cell(tmp_path: Path) -> None:
    """openpyxl writes formulas without a saved value: refused, naming the first such cell."""
    path = tmp_path / "uncalculated.xlsx"
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "Run 1"
    ws.append(["Shear rate [1/s]", "Shear stress [Pa]", "Viscosity [Pa·s]"])
    for r, (g, t) in enumerate([(1.0, 2.0), (2.0, 3.0)], 2):
        ws.append([g, t, f"=B{r}/A{r}"])
    wb.save(path)
    with pytest.raises(ImportRejection) as info:
        read_book(path)
    assert info.value.reason.startswith("sheet 'Run 1', cell C2: the formula =B2/A2 has no saved value")
    assert "\n" not in info.value.reason


# --------------------------------------------------------------------------- bad workbooks


def _one_line_rejection(path: Path) -> str:
    with pytest.raises(ImportRejection) as info:
        read_book(path)
    reason = info.value.reason
    assert reason and "\n" not in reason
    return reason


def test_bad_cells_name_sheet_and_cell(tmp_path: Path) -> None:
    """A word in a numeric column, a value beyond the header, a wrong unit and a bad metadata
    value each name their sheet and cell (or row) in one line."""
    def book(name: str, rows: list[list[object]]) -> Path:
        return write_workbook(tmp_path / name, {"Ok": [["Shear rate [1/s]", "Viscosity [Pa·s]"], [1.0, 2.0]],
                                                "Lot 7": rows})

    header = ["Shear rate [1/s]", "Viscosity [Pa·s]"]
    assert _one_line_rejection(book("word.xlsx", [header, [1.0, 2.0], [2.0, "n.d."]])) == (
        "sheet 'Lot 7', cell B3: column 'Viscosity': 'n.d.' is not a number")
    assert _one_line_rejection(book("wide.xlsx", [header, [1.0, 2.0], [2.0, 3.0, None, 4.0]])) == (
        "sheet 'Lot 7', cell D3: 4 cells, but the header on row 1 has 2")
    reason = _one_line_rejection(book("unit.xlsx", [["x"], ["Shear rate [1/s]", "Viscosity [Pa]"], [1.0, 2.0]]))
    assert reason.startswith("sheet 'Lot 7', cell B2: column 'Viscosity': unit 'Pa'")
    reason = _one_line_rejection(book("meta.xlsx", [["sample", "A"], ["temperature", "warm"], header, [1.0, 2.0]]))
    assert reason.startswith("sheet 'Lot 7', row 2: metadata 'temperature':")
    assert _one_line_rejection(book("nohead.xlsx", [[1.0, 2.0], [3.0, 4.0]])) == (
        "sheet 'Lot 7', row 1: no table header found before the numbers on row 1")


def test_unreadable_workbooks_are_rejected_in_one_line(tmp_path: Path) -> None:
    """Damaged zip, a zip without a workbook, an empty file, an OLE2 file (legacy or
    encrypted), and a workbook without any table."""
    cases = {
        "damaged.xlsx": b"PK\x03\x04" + bytes(range(200)),
        "empty.xlsx": b"",
        "locked.xlsx": b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1" + bytes(500),
        "legacy.xls": b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1" + bytes(500),
    }
    for name, data in cases.items():
        (tmp_path / name).write_bytes(data)
    with zipfile.ZipFile(tmp_path / "other.xlsx", "w") as archive:
        archive.writestr("notes.txt", "not a workbook")
    write_workbook(tmp_path / "notable.xlsx", {"Notes": [["only words"], ["and more words"]]})
    reasons = {p.name: _one_line_rejection(p) for p in sorted(tmp_path.iterdir())}
    assert reasons["damaged.xlsx"] == "not a readable .xlsx workbook: the zip container is damaged"
    assert reasons["empty.xlsx"] == "file is empty"
    assert "encrypted" in reasons["locked.xlsx"] and "save an unprotected copy as .xlsx" in reasons["locked.xlsx"]
    assert reasons["legacy.xls"] == "the legacy binary .xls format is not read; save the workbook as .xlsx"
    assert reasons["other.xlsx"].startswith("not a readable .xlsx workbook: ")
    assert reasons["notable.xlsx"] == "no sheet holds a table header with data rows (sheets: 'Notes')"


def test_a_bad_workbook_never_stops_the_other_files_and_nothing_is_modified(tmp_path: Path, registry) -> None:
    study = tmp_path / "study"
    study.mkdir()
    write_workbook(study / "good.xlsx", {"S": [["Shear rate [1/s]", "Viscosity [Pa·s]"], [1.0, 2.0], [2.0, 1.5]]})
    write_workbook(study / "bad.xlsx", {"S": [["Shear rate [1/s]", "Viscosity [Pa·s]"], [1.0, 2.0], [2.0, "x"]]})
    (study / "good.csv").write_text("Shear rate [1/s],Viscosity [Pa·s]\n1,2\n2,1.5\n", encoding="utf-8")
    before = {p.name: (hashlib.sha256(p.read_bytes()).hexdigest(), p.stat().st_mtime_ns) for p in study.iterdir()}
    result = run_study(study, registry, tmp_path / "out")
    assert sorted(r.run.source_file for r in result.runs) == ["good.csv", "good.xlsx"]
    (rejected,) = result.rejected
    assert rejected.describe() == "bad.xlsx: sheet 'S', cell B3: column 'Viscosity': 'x' is not a number"
    after = {p.name: (hashlib.sha256(p.read_bytes()).hexdigest(), p.stat().st_mtime_ns) for p in study.iterdir()}
    assert after == before


def test_sniff_claims_workbooks_and_leaves_text_alone(tmp_path: Path) -> None:
    path = write_workbook(tmp_path / "a.xlsx", {"S": [["Shear rate [1/s]", "Viscosity [Pa·s]"], [1.0, 2.0]]})
    head = path.read_bytes()[:65536]
    assert sp.sniff(path, head) == 0.9
    assert sp.sniff(tmp_path / "a.zip", head) == 0.6  # a workbook part under another name
    assert sp.sniff(tmp_path / "a.csv", b"Shear rate [1/s],Viscosity\n1,2\n") == 0.0
    assert sp.sniff(tmp_path / "a.xls", b"\xd0\xcf\x11\xe0") == 0.3
    assert 0 < sp.sniff(tmp_path / "a.xlsx", b"") < 0.5


def test_cell_text_reads_back_exactly() -> None:
    """Cell values become the text a text export would hold; floats read back exactly."""
    import datetime as dt

    for value in (0.1, 1e-300, -2.5e17, 1 / 3, 5e-324):
        assert float(sp.cell_text(value)) == value
    assert sp.cell_text(12) == "12" and sp.cell_text(True) == "TRUE" and sp.cell_text(None) == ""
    assert sp.cell_text(dt.datetime(2026, 11, 3, 14, 22)) == "2026-11-03T14:22:00"
    assert sp.cell_text("Shear rate\n[1/s]") == "Shear rate [1/s]"
    assert split_unit(sp.cell_text("Shear rate\n[1/s]")) == ("Shear rate", "1/s")
    assert sp.cell_text('5" disk') == '"5"" disk"'

"""Built-in importer for spreadsheet workbooks: ``.xlsx`` and ``.xlsm`` (Office Open XML).

A workbook is read with openpyxl (read-only; ``data_only=True`` gives each formula's value as
the spreadsheet program last saved it). Every visible worksheet is turned into delimited text,
one line per sheet row (row *n* is line *n*) and one tab-separated field per column, and that
text goes through the delimited-text importer's parser
(:func:`gammadot.plugins.delimited_text.parse_text`). So a sheet follows exactly the rules
of a text export: an optional metadata block (``sample: HC-2611`` in one cell, or ``sample``
and ``HC-2611`` in two), one header row with units in ``[...]`` or ``(...)``, several runs
separated by an empty row followed by a new metadata block or header, missing values, text
columns. On top of that, what only spreadsheets have:

- a second header row of units under a header without units (``Shear rate`` over ``1/s``)
  is joined into the header (``Shear rate [1/s]``);
- formulas count with their saved value; a formula without a saved value (a workbook written
  by a program that does not calculate) is refused, naming its cell, rather than read as an
  empty cell;
- merged cells: a merged range keeps its value in its top-left cell and the other cells of the
  range are empty (ECMA-376 Part 1, §18.3.1.55 ``mergeCells``), so a merged title, a merged
  metadata value or a header merged over the unit row read as they look;
- empty rows and columns around the used range, hidden sheets (skipped, with a note) and
  sheets without a table (notes, lookup lists: skipped, with a note) are tolerated.

A workbook that cannot be read is rejected with one line naming the sheet and the cell (or
row) where the problem is. The legacy binary ``.xls`` format is not read; such files are
rejected with a sentence saying how to save them as ``.xlsx``.
"""

from __future__ import annotations

import dataclasses
import datetime as dt
import re
import warnings
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Iterator, Sequence

from gammadot.hookspecs import hookimpl
from gammadot.plugins.delimited_text import NoTableFound, parse_text, split_unit
from gammadot.records import ImportContext, Importer, ImportRejection, RawRun

GAMMADOT_HOOKSPEC = ">=1,<2"

SUFFIXES: tuple[str, ...] = (".xlsx", ".xlsm", ".xls")
READABLE_SUFFIXES: tuple[str, ...] = (".xlsx", ".xlsm")
DELIMITER = "\t"
SHEET_KEY = "sheet"  # metadata key added to every run: the sheet it came from
ZIP_MAGIC = b"PK\x03\x04"  # an .xlsx is a zip package (ECMA-376 Part 2, Open Packaging Conventions)
OLE2_MAGIC = b"\xd0\xcf\x11\xe0"  # legacy .xls, and encrypted (password-protected) workbooks
_CONTROL = re.compile(r"[\x00-\x1f\x7f]")
_LINE_WORD = re.compile(r"\bline (\d+)")
_FIELDS_WORD = re.compile(r"\b(\d+) fields\b")


@dataclass(frozen=True)
class SheetText:
    """One worksheet as delimited text, and where each line and field came from.

    ``cells[r][f]`` is the text of sheet row ``r + 1`` and field ``f`` (column
    ``first_column + f``, 1-based); ``text`` joins them with tabs, one line per row.
    """

    title: str
    cells: list[list[str]]
    first_column: int

    @property
    def text(self) -> bytes:
        """The sheet as UTF-8 delimited text: line n is sheet row n."""
        return "\n".join(DELIMITER.join(row) for row in self.cells).encode("utf-8")

    def cell_ref(self, row: int, field: int) -> str:
        """The A1 reference of sheet row ``row`` and 1-based field ``field``."""
        from openpyxl.utils import get_column_letter

        return f"{get_column_letter(self.first_column + field - 1)}{row}"


# --------------------------------------------------------------------------- cell text


def cell_text(value: Any) -> str:
    """A cell's value as the text a delimited export would hold.

    Numbers are written so they read back exactly (``repr`` of the float), booleans as
    ``TRUE``/``FALSE``, dates and times in ISO 8601 (a text column, as in text exports), an
    empty cell as nothing. Tabs, line breaks and control characters inside a text cell become
    spaces (a header wrapped over two lines in its cell reads as one line); a cell holding a
    double quote is quoted as in RFC 4180 §2 so the delimiter split keeps it whole.
    """
    if value is None:
        return ""
    if isinstance(value, bool):
        return "TRUE" if value else "FALSE"
    if isinstance(value, int):
        return str(value)
    if isinstance(value, float):
        return repr(value)
    if isinstance(value, (dt.datetime, dt.date, dt.time)):
        return value.isoformat()
    if isinstance(value, dt.timedelta):
        return f"{value.total_seconds()!r} s"  # a duration as text: such columns are not used
    text = _CONTROL.sub(" ", str(value)).strip()
    if '"' in text:
        text = '"' + text.replace('"', '""') + '"'
    return text


def _is_number_text(text: str) -> bool:
    """Whether a cell text is a number (decimal point or comma)."""
    try:
        float(text.replace(",", ".", 1))
    except ValueError:
        return False
    return text.strip().lower() not in ("nan", "inf", "-inf", "infinity")


# --------------------------------------------------------------------------- units row


def _reads_as_unit(text: str) -> bool:
    """Whether ``text`` (optionally in brackets) is a unit of any dimension gammadot knows."""
    from gammadot.units import DIMENSIONS, UnitError, parse_unit

    bare = _strip_brackets(text)
    if bare in ("-", "1"):
        return True
    for dimension in DIMENSIONS:
        try:
            parse_unit(bare, dimension)
        except UnitError:
            continue
        return True
    return False


def _strip_brackets(text: str) -> str:
    text = text.strip()
    if len(text) >= 2 and (text[0], text[-1]) in (("[", "]"), ("(", ")")):
        return text[1:-1].strip()
    return text


def _is_units_row(header: list[str], units: list[str], following: list[str]) -> bool:
    """Whether ``units`` is a row of units for ``header``.

    The header has two or more words and no number; every filled cell below it is a unit and
    sits under a header cell that states no unit of its own; the row after holds at least one
    number (the first data row).
    """
    names = [c for c in header if c]
    filled = [(i, c) for i, c in enumerate(units) if c]
    if len(names) < 2 or not filled or not any(_is_number_text(c) for c in following if c):
        return False
    if any(_is_number_text(c) for c in names):
        return False
    for i, unit in filled:
        if i >= len(header) or not header[i] or split_unit(header[i])[1] is not None:
            return False
        if _is_number_text(unit):
            return False
    return all(_reads_as_unit(c) for _, c in filled)


def join_units_rows(cells: list[list[str]]) -> list[list[str]]:
    """Rows with every header-plus-units-row pair joined into one header row.

    ``Shear rate`` over ``1/s`` becomes ``Shear rate [1/s]``; the units row is left empty so
    that row numbers stay those of the sheet.
    """
    rows = [list(r) for r in cells]
    r = 0
    while r + 2 < len(rows):
        header, units = rows[r], rows[r + 1]
        following = next((row for row in rows[r + 2:] if any(row)), [])
        if any(header) and any(units) and _is_units_row(header, units, following):
            rows[r] = [f"{name} [{_strip_brackets(units[i])}]" if i < len(units) and units[i] and name else name
                       for i, name in enumerate(header)]
            rows[r + 1] = [""] * len(units)
            r += 2
        else:
            r += 1
    return rows


# --------------------------------------------------------------------------- reading a sheet


def _open_workbook(path: Path, *, data_only: bool) -> Any:
    """The workbook at ``path`` opened read-only, or an :class:`ImportRejection`."""
    import zipfile

    import openpyxl

    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")  # openpyxl warns about features it drops (styles, extensions)
            return openpyxl.load_workbook(path, read_only=True, data_only=data_only, keep_links=False)
    except zipfile.BadZipFile:
        raise ImportRejection("not a readable .xlsx workbook: the zip container is damaged") from None
    except OSError as exc:
        raise ImportRejection(f"the file cannot be opened ({exc.strerror or exc})") from None
    except Exception as exc:  # openpyxl raises KeyError, ValueError, XML errors for broken parts
        raise ImportRejection(f"not a readable .xlsx workbook: {_one_line(exc)}") from None


def _one_line(exc: BaseException) -> str:
    text = " ".join(str(exc).split()) or type(exc).__name__
    return f"{type(exc).__name__}: {text}"


def _sheet_values(ws: Any) -> list[list[tuple[Any, str]]]:
    """(value, data type) of every cell from A1 to the last cell the sheet stores."""
    ws.reset_dimensions()  # a wrong stored dimension would cut rows or columns off
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return [[(cell.value, getattr(cell, "data_type", "n")) for cell in row]
                for row in ws.iter_rows(min_row=1, min_col=1)]


def _formula_cells(ws: Any) -> Iterator[tuple[int, int, str]]:
    """(row, column, formula text) of every formula cell (1-based), from a formulas workbook."""
    ws.reset_dimensions()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        for r, row in enumerate(ws.iter_rows(min_row=1, min_col=1, values_only=True), 1):
            for c, value in enumerate(row, 1):
                text = getattr(value, "text", value)  # array formulas are objects with .text
                if isinstance(text, str) and text.startswith("="):
                    yield r, c, text


def check_saved_values(title: str, values: list[list[tuple[Any, str]]], formulas_ws: Any) -> None:
    """Refuse a formula cell that has no saved value, naming it.

    openpyxl reads such a cell as empty (``None``); read silently it would turn a computed
    column into missing values. A formula whose saved result is the empty text has the string
    type (ECMA-376 Part 1, §18.3.1.4, ``t="str"``) and is an empty cell, as displayed.
    """
    from openpyxl.utils import get_column_letter

    for r, c, formula in _formula_cells(formulas_ws):
        value, data_type = values[r - 1][c - 1] if r <= len(values) and c <= len(values[r - 1]) else (None, "n")
        if value is None and data_type != "str":
            shown = formula if len(formula) <= 40 else formula[:39] + "…"
            raise ImportRejection(
                f"sheet '{title}', cell {get_column_letter(c)}{r}: the formula {shown} has no saved "
                "value (the workbook was written by a program that does not calculate formulas); "
                "open and save it in a spreadsheet program, or write the values")


def sheet_text(title: str, values: list[list[tuple[Any, str]]]) -> SheetText | None:
    """The used range of a sheet as :class:`SheetText`, or ``None`` for an empty sheet.

    Rows keep their sheet numbers (empty rows above the used range stay as empty lines);
    columns start at the first column holding anything, so a left margin adds no field.
    """
    texts = [[cell_text(v) for v, _ in row] for row in values]
    filled_rows = [r for r, row in enumerate(texts) if any(row)]
    if not filled_rows:
        return None
    last_row = filled_rows[-1]
    first_col = min(next(i for i, t in enumerate(row) if t) for row in texts if any(row))
    last_col = max(max(i for i, t in enumerate(row) if t) for row in texts if any(row))
    width = last_col - first_col + 1
    cells = [(row[first_col:last_col + 1] + [""] * width)[:width] for row in texts[:last_row + 1]]
    return SheetText(title=title, cells=join_units_rows(cells), first_column=first_col + 1)


# --------------------------------------------------------------------------- messages


def located(exc: ImportRejection, sheet: SheetText) -> ImportRejection:
    """The parser's rejection restated for a sheet: rows instead of lines, the cell named.

    Line *n* of the sheet text is sheet row *n*, and field *f* is column
    ``first_column + f - 1``, so the mapping is exact.
    """
    reason = _FIELDS_WORD.sub(r"\1 cells", _LINE_WORD.sub(r"row \1", exc.reason))
    if exc.line is not None and exc.column is not None:
        where = f"cell {sheet.cell_ref(exc.line, exc.column)}"
    elif exc.line is not None:
        where = f"row {exc.line}"
    else:
        return ImportRejection(f"sheet '{sheet.title}': {reason}")
    return ImportRejection(f"sheet '{sheet.title}', {where}: {reason}")


def _header_field(sheet: SheetText, row: int, column_name: str) -> int | None:
    """1-based field of the header cell in ``row`` whose name (without unit) is ``column_name``."""
    if not 1 <= row <= len(sheet.cells):
        return None
    for f, text in enumerate(sheet.cells[row - 1], 1):
        if text and split_unit(text)[0] == column_name:
            return f
    return None


def _metadata_row(sheet: SheetText, run: RawRun, key: str) -> int:
    """The sheet row of metadata ``key`` in ``run``'s block (its first line if not found)."""
    for row in range(run.first_line, run.header_line):
        text = next((c for c in sheet.cells[row - 1] if c), "")
        if text.lower().startswith(key.lower()):
            return row
    return run.first_line


def validate_run(run: RawRun, sheet: SheetText, context: ImportContext) -> None:
    """Resolve ``run`` the way the core will, so a wrong unit or metadata value names its cell.

    The core resolves every importer's runs (:func:`gammadot.columns.build_run`) but only
    knows line numbers; here the same function runs first and its rejection gets the sheet.
    """
    from gammadot.columns import build_run

    try:
        build_run(run, run_id="check", source_file=sheet.title, source_sha256="",
                  column_map=context.column_map)
    except ImportRejection as exc:
        match = re.match(r"(column|metadata) '(.*?)': ", exc.reason)
        line, field = exc.line, None
        if match and match.group(1) == "column":
            field = _header_field(sheet, run.header_line, match.group(2))
        elif match:
            line = _metadata_row(sheet, run, match.group(2))
        raise located(ImportRejection(exc.reason, line, field), sheet) from None


# --------------------------------------------------------------------------- the importer


def sniff(path: Path, head: bytes) -> float:
    """Confidence that ``path`` is a workbook this importer reads (or should explain).

    A zip package named ``.xlsx``/``.xlsm`` is claimed with high confidence, a zip package
    with a workbook part under another name with less. Empty files, OLE2 files (legacy ``.xls``
    or encrypted workbooks) and anything named ``.xls`` are claimed weakly so that
    :func:`read` can say what is wrong.
    """
    suffix = path.suffix.lower()
    if head.startswith(ZIP_MAGIC):
        if suffix in READABLE_SUFFIXES:
            return 0.9
        return 0.6 if b"xl/workbook" in head else 0.0
    if suffix in SUFFIXES and (not head or head.startswith(OLE2_MAGIC) or suffix == ".xls"):
        return 0.3
    return 0.0


def read(path: Path, context: ImportContext) -> list[RawRun]:
    """Every run of every visible sheet, in sheet order; the file is only read."""
    _refuse_unreadable_kinds(path)
    values_wb = _open_workbook(path, data_only=True)
    formulas_wb = None
    try:
        runs: list[RawRun] = []
        notes: list[str] = []
        for ws in values_wb.worksheets:
            if ws.sheet_state != "visible":
                notes.append(f"sheet '{ws.title}' is hidden and was not read")
                continue
            values = _read_sheet(ws)
            sheet = sheet_text(ws.title, values)
            if sheet is None:
                continue
            if formulas_wb is None:
                formulas_wb = _open_workbook(path, data_only=False)
            check_saved_values(ws.title, values, formulas_wb[ws.title])
            found = _sheet_runs(sheet, context)
            if not found:
                notes.append(f"sheet '{ws.title}' holds no table header and was not read")
            runs.extend(found)
    finally:
        values_wb.close()
        if formulas_wb is not None:
            formulas_wb.close()
    if not runs:
        names = ", ".join(f"'{ws}'" for ws in values_wb.sheetnames) or "none"
        raise ImportRejection(f"no sheet holds a table header with data rows (sheets: {names})")
    return [dataclasses.replace(runs[0], notes=runs[0].notes + tuple(notes)), *runs[1:]]


def _refuse_unreadable_kinds(path: Path) -> None:
    """Reject empty files, legacy .xls and encrypted workbooks with a sentence that helps."""
    try:
        with open(path, "rb") as handle:
            head = handle.read(8)
    except OSError as exc:
        raise ImportRejection(f"the file cannot be opened ({exc.strerror or exc})") from None
    if not head:
        raise ImportRejection("file is empty")
    if head.startswith(OLE2_MAGIC):
        if path.suffix.lower() == ".xls":
            raise ImportRejection("the legacy binary .xls format is not read; save the workbook as .xlsx")
        raise ImportRejection("the workbook is encrypted (password-protected) or in the legacy "
                              "binary format; save an unprotected copy as .xlsx")
    if path.suffix.lower() == ".xls":
        raise ImportRejection("a file named .xls is not read; save the workbook as .xlsx")


def _read_sheet(ws: Any) -> list[list[tuple[Any, str]]]:
    try:
        return _sheet_values(ws)
    except Exception as exc:  # a damaged sheet part
        raise ImportRejection(f"sheet '{ws.title}': cannot be read: {_one_line(exc)}") from None


def _sheet_runs(sheet: SheetText, context: ImportContext) -> list[RawRun]:
    """The runs of one sheet (empty when it holds no table), each checked and labelled."""
    try:
        runs = parse_text(sheet.text, source=sheet.title, delimiters=(DELIMITER,))
    except NoTableFound:
        return []
    except ImportRejection as exc:
        raise located(exc, sheet) from None
    labelled = []
    for run in runs:
        validate_run(run, sheet, context)
        labelled.append(_with_sheet(run, sheet.title))
    return labelled


def _with_sheet(run: RawRun, title: str) -> RawRun:
    """``run`` with the sheet's name in its metadata (a ``sheet`` key of its own wins)."""
    if any(key.strip().lower() == SHEET_KEY for key in run.metadata):
        return run
    return dataclasses.replace(run, metadata={**run.metadata, SHEET_KEY: title})


@hookimpl
def gammadot_importers() -> Sequence[Importer]:
    """The spreadsheet importer record."""
    return [Importer(id="spreadsheet", title="Spreadsheet workbook (.xlsx, .xlsm)",
                     sniff=sniff, read=read, suffixes=SUFFIXES)]

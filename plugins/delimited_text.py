"""Built-in importer for delimited-text exports: comma-, semicolon- or tab-separated tables.

What a file may hold (see the README, "Input: delimited-text exports"):

- an optional metadata block of ``key<sep>value`` lines (sep ``:`` ``;`` ``=`` tab or ``,``),
  ``# comment`` lines, and free-text title lines, which are skipped;
- one header row whose cells carry units in ``[...]`` or ``(...)``;
- the numeric table: delimiter ``,`` ``;`` or tab, decimal point or decimal comma, empty cells
  allowed (they become NaN);
- several runs: a blank line followed by a new metadata block or header starts a new run.

Speed: only the lines before each table (metadata, header, a sample of data rows for sniffing
the dialect) are handled in Python. The end of each table is found with an RE2 search in
Arrow's compute kernels, and each table body is handed to ``pyarrow.csv`` as a zero-copy
slice of the file. Only when pyarrow.csv refuses a body (a bad cell, or rows of uneven length:
trailing delimiters on some rows only, rows shorter than the header, whitespace-only lines)
is it read cell by cell with Arrow compute kernels, which also name a bad cell's line and
column; a refused body with quoted cells is read row by row in Python instead.

The importer only reports what the file says: header names without their unit, the unit text,
float64 values and the metadata text. Meaning and SI conversion are the core's job
(:mod:`gammadot.columns`).
"""

from __future__ import annotations

import codecs
import csv
import re
from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING

from gammadot.hookspecs import hookimpl
from gammadot.records import ImportContext, Importer, ImportRejection, RawColumn, RawRun

if TYPE_CHECKING:  # numpy and pyarrow load on first read, not at start-up
    import numpy as np
    import pyarrow as pa

GAMMADOT_HOOKSPEC = ">=1,<2"  # the hook-spec versions this plugin is written for (gammadot.compat)

SUFFIXES: tuple[str, ...] = (".csv", ".txt", ".tsv", ".dat")
DELIMITERS: tuple[str, ...] = ("\t", ";", ",")
# Cells read as a missing value (NaN). Arrow's defaults minus the odd "1.#IND" spellings.
NULL_TOKENS: tuple[str, ...] = ("", "NaN", "nan", "NAN", "-nan", "-NaN", "NA", "N/A", "n/a",
                                "#N/A", "null", "NULL")
_NULLS = frozenset(NULL_TOKENS)
# Numbers as the Arrow float parser accepts them, one pattern per decimal sign.
_INF = r"[+-]?(?i:inf|infinity)"
_NUMBER = {
    ".": re.compile(r"[+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?|" + _INF),
    ",": re.compile(r"[+-]?(?:\d+,?\d*|,\d+)(?:[eE][+-]?\d+)?|" + _INF),
}
_NON_SPACE = re.compile(rb"\S")
_CONTROL = re.compile(r"[\x00-\x08\x0b-\x1f\x7f]")
_UNIT_SQUARE = re.compile(r"^(.*?)\s*\[([^\[\]]*)\]$")
_METADATA = re.compile(r"^([^:;=\t,]*?)\s*[:;=\t,]\s*(.*)$")
_BINARY_MAGIC: tuple[bytes, ...] = (
    b"PK\x03\x04",  # zip containers: xlsx, ods, docx
    b"\xd0\xcf\x11\xe0",  # OLE2 compound file: xls
    b"%PDF", b"\x89PNG", b"\x1f\x8b", b"\x7fELF",
)
_NOT_TEXT = "not a text file"  # start of every reason for binary content (sniff returns 0)
_SAMPLE_ROWS = 50  # data rows read in Python to sniff the decimal sign
_CONSISTENCY_ROWS = 5  # data rows whose cell counts decide between candidate delimiters


@dataclass(frozen=True)
class _Dialect:
    """How a table is written: delimiter, decimal sign, and whether the sign was seen."""

    delimiter: str
    decimal: str
    decimal_seen: bool


@dataclass(frozen=True)
class _Table:
    """A header found in the file and where its data rows begin (byte offset, line)."""

    names: list[str]
    units: list[str | None]
    header_line: int
    first_row_fields: int
    dialect: _Dialect
    data_start: int
    text_columns: frozenset[int] = frozenset()  # columns of words (status, timestamps): skipped


@dataclass
class _Preamble:
    """What precedes a table: metadata, the first metadata line, the table (if any)."""

    metadata: dict[str, str] = field(default_factory=dict)
    first_line: int | None = None
    table: _Table | None = None
    header_like_line: int | None = None


class _Text:
    """The file as UTF-8 bytes with LF line ends, walked by line with 1-based line numbers.

    Line numbers are counted incrementally (``bytes.count`` between the last two positions
    asked for), so walking a file front to back stays linear. ``delimiters`` are the cell
    delimiters a table may use (all of :data:`DELIMITERS` for a text file; a caller that
    writes the text itself, such as the spreadsheet importer, allows only its own).
    """

    def __init__(self, buf: bytes, delimiters: tuple[str, ...] = DELIMITERS) -> None:
        self.buf = buf
        self.delimiters = delimiters
        self._pos = 0
        self._line = 1
        self._arrow: "pa.Buffer | None" = None

    def arrow_buffer(self) -> "pa.Buffer":
        """The buffer as a zero-copy Arrow buffer (made once)."""
        if self._arrow is None:
            import pyarrow as pa

            self._arrow = pa.py_buffer(self.buf)
        return self._arrow

    def line_no(self, pos: int) -> int:
        """1-based line number of the byte at ``pos``."""
        if pos >= self._pos:
            self._line += self.buf.count(b"\n", self._pos, pos)
        else:
            self._line -= self.buf.count(b"\n", pos, self._pos)
        self._pos = pos
        return self._line

    def line(self, pos: int) -> tuple[str, int]:
        """The line starting at ``pos`` (without its newline) and the start of the next."""
        end = self.buf.find(b"\n", pos)
        if end < 0:
            return self.buf[pos:].decode("utf-8"), len(self.buf)
        return self.buf[pos:end].decode("utf-8"), end + 1

    def next_content(self, pos: int) -> tuple[str, int, int] | None:
        """The next line at or after ``pos`` that is not blank: (text, start, next start)."""
        while pos < len(self.buf):
            text, nxt = self.line(pos)
            if text.strip():
                return text, pos, nxt
            pos = nxt
        return None


# --------------------------------------------------------------------------- decoding


def _decode(data: bytes, *, final: bool = True) -> bytes:
    """The file's text as UTF-8 bytes without BOM, with LF line ends.

    Accepts UTF-8 (with or without BOM), UTF-16 with BOM, and Windows-1252. ``final=False``
    tolerates a multi-byte character cut at the end (for sniffing a file's first bytes).
    Raises :class:`ImportRejection` for an empty or binary file.
    """
    if not data:
        raise ImportRejection("file is empty")
    if data.startswith((codecs.BOM_UTF16_LE, codecs.BOM_UTF16_BE)) and not data.startswith(
            codecs.BOM_UTF32_LE):
        buf = _decode_utf16(data, final)
    elif data.startswith(codecs.BOM_UTF8):
        buf = _decode_8bit(data[len(codecs.BOM_UTF8):], final)
    else:
        if data.find(b"\x00") >= 0:
            raise ImportRejection(f"{_NOT_TEXT}: it contains binary (NUL) bytes")
        buf = _decode_8bit(data, final)
    if b"\r" in buf:  # CRLF and old CR-only line ends; each CR or CRLF is one line break
        buf = buf.replace(b"\r\n", b"\n").replace(b"\r", b"\n")
    if _NON_SPACE.search(buf) is None:
        raise ImportRejection("file is empty")
    return buf


def _decode_utf16(data: bytes, final: bool) -> bytes:
    """UTF-16 with BOM (either byte order) re-encoded as UTF-8."""
    if not final:
        data = data[: len(data) - len(data) % 2]
    try:
        text = data.decode("utf-16")
    except UnicodeDecodeError as exc:
        if not final and exc.start >= len(data) - 4:
            text = data[: exc.start].decode("utf-16")
        else:
            raise ImportRejection(f"{_NOT_TEXT}: it starts like UTF-16 but holds invalid "
                                  "UTF-16 text", _byte_line(data, exc.start, 2)) from None
    return text.encode("utf-8")


def _decode_8bit(data: bytes, final: bool) -> bytes:
    """UTF-8 as is (validated), otherwise Windows-1252 re-encoded as UTF-8."""
    if data.isascii():
        return data
    try:
        data.decode("utf-8")
        return data
    except UnicodeDecodeError as exc:
        if not final and exc.start >= len(data) - 3 and exc.reason == "unexpected end of data":
            return data[: exc.start]
    try:
        return data.decode("cp1252").encode("utf-8")
    except UnicodeDecodeError as exc:
        raise ImportRejection(f"{_NOT_TEXT}: it holds bytes that are neither UTF-8 nor "
                              "Windows-1252 text", _byte_line(data, exc.start, 1)) from None


def _byte_line(data: bytes, offset: int, width: int) -> int:
    """1-based line of byte ``offset`` in encoded ``data`` (``width`` bytes per code unit)."""
    newline = b"\n" if width == 1 else (b"\n\x00" if data[:2] == codecs.BOM_UTF16_LE else b"\x00\n")
    return data.count(newline, 0, offset) + 1


# --------------------------------------------------------------------------- cells


def _cells(line: str, delimiter: str) -> list[str]:
    """Cells of ``line`` split at ``delimiter`` (quotes honoured), stripped, all kept."""
    if '"' in line:
        return [_unquote(c) for c in next(csv.reader([line], delimiter=delimiter), [])]
    return [c.strip() for c in line.split(delimiter)]


def _trimmed(cells: list[str]) -> list[str]:
    """``cells`` without trailing empty cells (trailing delimiters are tolerated)."""
    end = len(cells)
    while end and not cells[end - 1]:
        end -= 1
    return cells[:end]


def _is_number(cell: str, decimals: str) -> bool:
    """Whether ``cell`` is a number with one of the decimal signs in ``decimals``."""
    return any(_NUMBER[d].fullmatch(cell) for d in decimals)


def _decimals_allowed(delimiter: str) -> str:
    """Decimal signs possible with ``delimiter``: a comma only when it does not separate."""
    return "." if delimiter == "," else ".,"


def _numeric_share(cells: list[str], decimals: str) -> float:
    """Share of the non-missing cells that are numbers (0 when all are missing)."""
    present = [c for c in cells if c not in _NULLS]
    if not present:
        return 0.0
    return sum(_is_number(c, decimals) for c in present) / len(present)


def _is_data_row(line: str, dialect: _Dialect) -> bool:
    """Whether ``line`` is a table row: each cell a number or a missing value, one non-empty."""
    decimals = dialect.decimal if dialect.decimal_seen else _decimals_allowed(dialect.delimiter)
    cells = _cells(line, dialect.delimiter)
    return any(cells) and all(c in _NULLS or _is_number(c, decimals) for c in cells)


def _numbers_only(line: str, delimiters: tuple[str, ...] = DELIMITERS) -> bool:
    """Whether ``line`` is two or more numbers under some delimiter (a headerless row)."""
    for d in delimiters:
        cells = [c for c in _trimmed(_cells(line, d)) if c not in _NULLS]
        if len(cells) >= 2 and _numeric_share(cells, _decimals_allowed(d)) == 1.0:
            return True
    return False


def split_unit(cell: str) -> tuple[str, str | None]:
    """Split a header cell into name and unit text: ``"Viscosity (mPa·s)"`` -> both parts.

    The unit is the last ``[...]`` or ``(...)`` group at the end of the cell; an empty group
    or none gives ``None``. ``"Temp. (bath) [°C]"`` keeps ``(bath)`` in the name.
    """
    text = cell.strip()
    match = _UNIT_SQUARE.match(text)
    if match:
        return match.group(1).strip(), match.group(2).strip() or None
    if text.endswith(")"):
        depth = 0
        for i in range(len(text) - 1, -1, -1):
            depth += {")": 1, "(": -1}.get(text[i], 0)
            if depth == 0:
                name, unit = text[:i].strip(), text[i + 1:-1].strip()
                return (name, unit or None) if name else (text, None)
    return text, None


def _has_unit(cell: str) -> bool:
    """Whether a cell ends in a bracketed unit."""
    return split_unit(cell)[1] is not None


# --------------------------------------------------------------------------- preamble


def _metadata_pair(line: str) -> tuple[str, str] | None:
    """``key<sep>value`` of a metadata line, as written; ``None`` for free text.

    The first of ``: ; = tab ,`` separates; later ones stay in the value
    (``date: 2026-11-03 14:22``). Padding delimiters a spreadsheet adds at the end of the
    line (``sample;HC-2611;;;``) and one pair of surrounding double quotes are removed.
    """
    match = _METADATA.match(line.strip())
    if not match:
        return None
    key = _unquote(match.group(1).strip())
    value = _unquote(match.group(2).rstrip(" \t;,"))
    if not any(ch.isalpha() for ch in key):
        return None
    return key, value


def _unquote(text: str) -> str:
    """``text`` without one pair of surrounding double quotes."""
    text = text.strip()
    if len(text) >= 2 and text[0] == text[-1] == '"':
        return text[1:-1].strip()
    return text


def _looks_like_header(line: str, delimiters: tuple[str, ...] = DELIMITERS) -> bool:
    """Whether ``line`` reads like a table header: 2+ non-numeric cells, one with a unit."""
    for d in delimiters:
        cells = [c for c in _trimmed(_cells(line, d)) if c]
        if (len(cells) >= 2 and not any(_is_number(c, ".,") for c in cells)
                and any(_has_unit(c) for c in cells)):
            return True
    return False


def _scan_preamble(text: _Text, pos: int) -> _Preamble:
    """Read metadata, comments and free text from ``pos`` until a table header is found.

    Returns the preamble with ``table=None`` when the file ends first.
    """
    pre = _Preamble()
    while pos < len(text.buf):
        line, nxt = text.line(pos)
        stripped = line.strip()
        if not stripped or stripped.startswith("#") or stripped.lower().startswith("sep="):
            pos = nxt  # blank, comment, or a spreadsheet's "sep=;" hint line
            continue
        line_no = text.line_no(pos)
        if _CONTROL.search(stripped):
            raise ImportRejection(f"{_NOT_TEXT}: line {line_no} holds control characters",
                                  line_no)
        pre.table = _try_header(text, stripped, nxt, line_no)
        if pre.table is not None:
            return pre
        if _numbers_only(stripped, text.delimiters):
            raise ImportRejection(f"no table header found before the numbers on line {line_no}",
                                  line_no)
        _add_metadata(pre, stripped, line_no, text.delimiters)
        pos = nxt
    return pre


def _add_metadata(pre: _Preamble, line: str, line_no: int,
                  delimiters: tuple[str, ...] = DELIMITERS) -> None:
    """Record a metadata line (first occurrence of a key wins) or a header-like line."""
    if _looks_like_header(line, delimiters):
        pre.header_like_line = line_no
    pair = _metadata_pair(line)
    if pair is None:
        return
    key, value = pair
    pre.metadata.setdefault(key, value)
    if pre.first_line is None:
        pre.first_line = line_no


def _try_header(text: _Text, line: str, nxt: int, line_no: int) -> _Table | None:
    """The table whose header is ``line``, or ``None`` when the next rows are not numeric."""
    first = text.next_content(nxt)
    if first is None:
        return None
    delimiter = _choose_delimiter(line, _following_lines(text, first[1], _CONSISTENCY_ROWS),
                                  text.delimiters)
    if delimiter is None:
        return None
    sample = [_cells(row, delimiter) for row in _following_lines(text, first[1], _SAMPLE_ROWS)]
    decimal, seen = _sniff_decimal(sample, delimiter)
    cells = _trimmed(_cells(line, delimiter))
    names, units = zip(*(split_unit(c) for c in cells))
    return _Table(names=list(names), units=list(units), header_line=line_no,
                  first_row_fields=len(sample[0]), dialect=_Dialect(delimiter, decimal, seen),
                  data_start=first[1], text_columns=_text_columns(sample, len(cells), delimiter))


def _text_columns(sample: list[list[str]], width: int, delimiter: str) -> frozenset[int]:
    """Columns whose sampled cells are all words, not numbers (a status or a timestamp).

    Such columns carry no flow-curve quantity; they are skipped and named in the run's notes.
    A column with any number among its sampled cells stays numeric, so a stray word in it is
    still reported as a bad cell.
    """
    decimals = _decimals_allowed(delimiter)
    text = set()
    for i in range(width):
        cells = [row[i].strip() for row in sample if len(row) > i and row[i].strip() not in _NULLS]
        if cells and not any(_is_number(c, decimals) for c in cells):
            text.add(i)
    return frozenset(text)


def _choose_delimiter(header: str, rows: list[str],
                      delimiters: tuple[str, ...] = DELIMITERS) -> str | None:
    """The delimiter that splits ``header`` into a table header for the ``rows`` below it.

    Under it the header has 2+ cells, mostly text, and the first row is mostly numbers.
    Among such delimiters the one under which most rows have as many cells as the header
    wins (count consistency), then the more numeric first row, then the more columns.
    """
    best: tuple[tuple[int, float, int], str] | None = None
    for d in delimiters:
        names = _trimmed(_cells(header, d))
        if len(names) < 2 or _numeric_share(names, _decimals_allowed(d)) >= 0.5 or all(
                n in _NULLS for n in names):
            continue
        share = _numeric_share(_trimmed(_cells(rows[0], d)), _decimals_allowed(d))
        if share <= 0.5:
            continue
        agree = sum(len(_trimmed(_cells(row, d))) == len(names) for row in rows)
        score = (agree, share, len(names))
        if best is None or score > best[0]:
            best = (score, d)
    return None if best is None else best[1]


def _following_lines(text: _Text, pos: int, limit: int) -> list[str]:
    """Up to ``limit`` lines from ``pos``, stopping at the first blank line."""
    lines: list[str] = []
    while pos < len(text.buf) and len(lines) < limit:
        line, pos = text.line(pos)
        if not line.strip():
            break
        lines.append(line)
    return lines


def _sniff_decimal(rows: list[list[str]], delimiter: str) -> tuple[str, bool]:
    """Decimal sign of the sampled rows and whether any cell showed it.

    With a comma delimiter the sign is a point. Otherwise cells like ``1,5`` vote for a
    comma and ``1.5`` for a point; integers alone leave it open (a point is assumed).
    """
    if delimiter == ",":
        return ".", True
    comma = point = 0
    for row in rows:
        for cell in row:
            if "," in cell and _NUMBER[","].fullmatch(cell):
                comma += 1
            elif "." in cell and _NUMBER["."].fullmatch(cell):
                point += 1
    if comma > point:
        return ",", True
    return ".", point > 0


# --------------------------------------------------------------------------- table bodies


def _run_start_pattern(delimiter: str) -> str:
    """RE2 pattern for a possible run boundary: a blank line, then a line not starting like a
    number.

    Blank means only spaces, tabs and delimiters. The match starts at the newline that ends
    the table's last row. Rows that start like a number (digit, sign, point, comma) never
    match; anything else that matches (``nan`` rows, quoted cells) is checked in Python.
    """
    chars = r" \t" + ("" if delimiter == "\t" else delimiter)  # "," and ";" are plain in a class
    return rf"\n[{chars}]*\n(?:[{chars}]*\n)*[{chars}]*[^-+0-9.,{chars}\n]"


def _find_bytes(text: _Text, pattern: str, pos: int) -> int:
    """Byte offset of the first match of an RE2 ``pattern`` at or after ``pos``, or -1.

    Runs in Arrow's compute kernels (RE2, C++) over a zero-copy view of the buffer: a
    Python ``re`` scan of a large table body costs several times as much.
    """
    import numpy as np
    import pyarrow as pa
    import pyarrow.compute as pc

    if pos >= len(text.buf):
        return -1
    view = text.arrow_buffer().slice(pos)
    offsets = pa.py_buffer(np.array([0, len(view)], dtype=np.int64).tobytes())
    array = pa.Array.from_buffers(pa.large_binary(), 1, [None, offsets, view])
    found = pc.find_substring_regex(array, pattern=pattern)[0].as_py()
    return -1 if found < 0 else pos + found


def _is_blank(line: str, delimiter: str) -> bool:
    """Whether ``line`` holds nothing but whitespace and delimiters."""
    return not line.replace(delimiter, "").strip()


def _table_end(text: _Text, table: _Table) -> tuple[int, int]:
    """Where the table body ends (exclusive) and where scanning for the next run resumes.

    The body ends at a blank line followed by something that is not a data row (a new
    metadata block or header), or at the end of the file. Blank lines between data rows
    stay in the body.
    """
    buf, dialect = text.buf, table.dialect
    pattern = _run_start_pattern(dialect.delimiter)
    pos = table.data_start
    while True:
        found = _find_bytes(text, pattern, pos)
        if found < 0:
            return _rstrip(buf, table.data_start, len(buf)), len(buf)
        resume, line = found + 1, ""
        while resume < len(buf):  # RE2 and str.strip() differ on rare blanks (e.g. NBSP)
            line, nxt = text.line(resume)
            if not _is_blank(line, dialect.delimiter):
                break
            resume = nxt
        if resume >= len(buf) or not _is_data_row(line, dialect):
            return _rstrip(buf, table.data_start, found), resume
        pos = resume


def _rstrip(buf: bytes, start: int, end: int) -> int:
    """``end`` moved back over trailing whitespace, not before ``start``."""
    while end > start and buf[end - 1] in b" \t\n":
        end -= 1
    return end


def _read_body(text: _Text, table: _Table, end: int) -> list["np.ndarray"]:
    """The table body ``[data_start, end)`` as one float64 array per header column.

    pyarrow.csv reads regular bodies. A body it refuses (a bad cell, uneven rows) is read
    cell by cell with Arrow compute kernels, which also names a bad cell's line and column;
    bodies with quoted cells take the Python row scan instead.
    """
    import pyarrow as pa

    body = text.arrow_buffer().slice(table.data_start, end - table.data_start)
    try:
        return _read_body_arrow(body, table)
    except (pa.ArrowException, _Uneven):
        pass
    if text.buf.find(b'"', table.data_start, end) >= 0:
        return _read_body_python(text, table, end)
    return _read_body_cells(body, table, text.line_no(table.data_start))


class _Uneven(Exception):
    """Arrow read the body, but cells lie beyond the header's columns."""


def _read_body_arrow(body: "pa.Buffer", table: _Table) -> list["np.ndarray"]:
    """Parse the body with pyarrow.csv (multi-threaded, C++); raise on any irregularity."""
    import pyarrow as pa
    import pyarrow.compute as pc
    import pyarrow.csv as pacsv

    n_named = len(table.names)
    keys = [f"c{i}" for i in range(max(n_named, table.first_row_fields))]
    types = {k: pa.string() if i in table.text_columns else pa.float64() for i, k in enumerate(keys)}
    result = pacsv.read_csv(
        pa.BufferReader(body),
        read_options=pacsv.ReadOptions(column_names=keys),
        parse_options=pacsv.ParseOptions(delimiter=table.dialect.delimiter,
                                         ignore_empty_lines=True),
        convert_options=pacsv.ConvertOptions(
            column_types=types, decimal_point=table.dialect.decimal,
            null_values=list(NULL_TOKENS), strings_can_be_null=False,
            quoted_strings_can_be_null=True))
    if any(col.null_count != len(col) for col in result.columns[n_named:]):
        raise _Uneven()
    if any(col.null_count for col in result.columns[:n_named]):
        present = pc.invert(pc.is_null(result.column(0)))
        for col in result.columns[1:]:
            present = pc.or_(present, pc.invert(pc.is_null(col)))
        result = result.filter(present)  # rows of empty cells are blank lines
    return [_nan_column(len(result)) if i in table.text_columns else _to_numpy(result.column(i))
            for i in range(n_named)]


def _nan_column(n: int) -> "np.ndarray":
    """A placeholder for a skipped text column (dropped before the run is built)."""
    import numpy as np

    return np.full(n, np.nan)


def _to_numpy(column: "pa.ChunkedArray") -> "np.ndarray":
    """One writable float64 array from Arrow chunks (nulls become NaN), copied once."""
    import numpy as np

    parts = [chunk.to_numpy(zero_copy_only=False) for chunk in column.chunks]
    if not parts:
        return np.empty(0, dtype=np.float64)
    return np.concatenate(parts)


@dataclass(frozen=True)
class _CellGrid:
    """Every cell of a body as Arrow strings, with the line and column index of each."""

    text: "pa.Array"  # stripped cell text
    row: "np.ndarray"  # 0-based line index within the body
    col: "np.ndarray"  # 0-based field index within the line
    n_lines: int


def _cell_grid(body: "pa.Buffer", delimiter: str) -> _CellGrid:
    """Split a body into cells with Arrow kernels: lines are zero-copy slices of ``body``."""
    import numpy as np
    import pyarrow as pa
    import pyarrow.compute as pc

    raw = np.frombuffer(body, dtype=np.uint8)
    breaks = np.flatnonzero(raw == 0x0A)
    offsets = np.concatenate(([0], breaks + 1, [len(raw)])).astype(np.int64)
    lines = pa.Array.from_buffers(pa.large_string(), len(offsets) - 1,
                                  [None, pa.py_buffer(offsets), body])
    split = pc.split_pattern(lines, pattern=delimiter)
    row = pc.list_parent_indices(split).to_numpy()
    col = np.arange(len(row)) - split.offsets.to_numpy()[row]
    return _CellGrid(pc.utf8_trim_whitespace(split.flatten()), row, col, len(lines))


def _full_match(cells: "pa.Array", decimal: str) -> "np.ndarray":
    """Which cells are numbers with ``decimal`` as decimal sign (RE2, anchored)."""
    import pyarrow.compute as pc

    pattern = "^(?:" + _NUMBER[decimal].pattern + ")$"
    return pc.match_substring_regex(cells, pattern).to_numpy(zero_copy_only=False)


def _read_body_cells(body: "pa.Buffer", table: _Table, first_line: int) -> list["np.ndarray"]:
    """Read a body cell by cell with Arrow kernels (uneven rows, bad cells): no Python loop.

    Same rules as the row scan: missing cells are NaN, rows without any value are blank
    lines, a value beyond the header or a non-number is an
    :class:`ImportRejection` naming its line (and column).
    """
    import numpy as np
    import pyarrow as pa
    import pyarrow.compute as pc

    grid = _cell_grid(body, table.dialect.delimiter)
    width = len(table.names)
    missing = pc.is_in(grid.text, value_set=pa.array(NULL_TOKENS, pa.large_string()))
    missing = missing.to_numpy(zero_copy_only=False)
    decimal = _body_decimal(grid, table.dialect, width)
    numeric = _full_match(grid.text, decimal)
    words = np.isin(grid.col, list(table.text_columns))
    _raise_first_problem(grid, table, first_line, beyond=~missing & (grid.col >= width),
                         bad=~numeric & ~missing & (grid.col < width) & ~words, present=~missing)
    take = numeric & (grid.col < width) & ~words
    chosen = pc.filter(grid.text, pa.array(take))
    if decimal == ",":
        chosen = pc.replace_substring(chosen, pattern=",", replacement=".")
    values = np.full((grid.n_lines, width), np.nan)
    values[grid.row[take], grid.col[take]] = pc.cast(chosen, pa.float64()).to_numpy()
    has_value = np.zeros(grid.n_lines, dtype=bool)
    has_value[grid.row[take]] = True
    values = values[has_value]
    return [values[:, i].copy() for i in range(width)]


def _body_decimal(grid: _CellGrid, dialect: _Dialect, width: int) -> str:
    """The decimal sign, decided from every cell when the sampled rows left it open."""
    import pyarrow.compute as pc

    if dialect.decimal_seen or dialect.delimiter == ",":
        return dialect.decimal
    inside = grid.col < width
    comma = _full_match(grid.text, ",") & pc.match_substring(grid.text, ",").to_numpy(
        zero_copy_only=False)
    point = _full_match(grid.text, ".") & pc.match_substring(grid.text, ".").to_numpy(
        zero_copy_only=False)
    return "," if (comma & inside).sum() > (point & inside).sum() else "."


def _raise_first_problem(grid: _CellGrid, table: _Table, first_line: int, *,
                         beyond: "np.ndarray", bad: "np.ndarray", present: "np.ndarray") -> None:
    """Raise for the earliest line with a value beyond the header or a cell not a number.

    Missing-value cells (empty, ``NaN``) beyond the header are padding, as in the Arrow path.
    """
    import numpy as np

    beyond_at = int(np.argmax(beyond)) if beyond.any() else None
    bad_at = int(np.argmax(bad)) if bad.any() else None
    if beyond_at is not None and (bad_at is None or grid.row[beyond_at] <= grid.row[bad_at]):
        row = grid.row[beyond_at]
        fields = int(grid.col[(grid.row == row) & present].max()) + 1
        line_no = first_line + int(row)
        raise ImportRejection(f"{fields} fields, but the header on line "
                              f"{table.header_line} has {len(table.names)}", line_no, fields)
    if bad_at is not None:
        line_no = first_line + int(grid.row[bad_at])
        cell = grid.text[bad_at].as_py()
        raise ImportRejection(f"column '{table.names[grid.col[bad_at]]}': "
                              f"'{_shown(cell)}' is not a number", line_no, int(grid.col[bad_at]) + 1)


def _read_body_python(text: _Text, table: _Table, end: int) -> list["np.ndarray"]:
    """Read the body row by row: for uneven rows, and to name a bad cell's line and column.

    Rows shorter than the header are padded with NaN; lines without a value are skipped.
    Raises :class:`ImportRejection` for a value beyond the header's columns or a cell that
    is not a number.
    """
    import numpy as np

    lines = text.buf[table.data_start:end].decode("utf-8").split("\n")
    first_line = text.line_no(table.data_start)
    dialect = _settle_decimal(lines, table.dialect)
    width = len(table.names)
    rows: list[list[float]] = []
    for offset, line in enumerate(lines):
        cells = _trimmed(_cells(line, dialect.delimiter))
        if all(c in _NULLS for c in cells):
            continue  # blank, delimiter-only or all-missing: no point (as in the Arrow path)
        line_no = first_line + offset
        if any(c not in _NULLS for c in cells[width:]):
            fields = max(i for i, c in enumerate(cells) if c not in _NULLS) + 1
            raise ImportRejection(f"{fields} fields, but the header on "
                                  f"line {table.header_line} has {width}", line_no, fields)
        cells = cells[:width]
        row = [float("nan") if i in table.text_columns else _to_float(c, dialect.decimal, line_no, table.names[i], i)
               for i, c in enumerate(cells)]
        rows.append(row + [float("nan")] * (width - len(row)))
    values = np.array(rows, dtype=np.float64).reshape(len(rows), width)
    return [values[:, i].copy() for i in range(width)]


def _settle_decimal(lines: list[str], dialect: _Dialect) -> _Dialect:
    """The dialect with its decimal sign decided from the whole body if the sample left it open."""
    if dialect.decimal_seen or dialect.delimiter == ",":
        return dialect
    decimal, seen = _sniff_decimal([_cells(line, dialect.delimiter) for line in lines],
                                   dialect.delimiter)
    return _Dialect(dialect.delimiter, decimal, seen)


def _to_float(cell: str, decimal: str, line_no: int, column: str, index: int) -> float:
    """The value of one cell (NaN when missing), or an :class:`ImportRejection`.

    ``column`` is the header name, ``index`` the 0-based field of the cell in its line.
    """
    if cell in _NULLS:
        return float("nan")
    if not _NUMBER[decimal].fullmatch(cell):
        raise ImportRejection(f"column '{column}': '{_shown(cell)}' is not a "
                              "number", line_no, index + 1)
    return float(cell.replace(",", ".")) if decimal == "," else float(cell)


def _shown(cell: str, limit: int = 40) -> str:
    """A cell as it can appear inside a one-line message: escaped and shortened."""
    shown = cell if cell.isprintable() else cell.encode("unicode_escape").decode("ascii")
    return shown if len(shown) <= limit else shown[: limit - 1] + "…"


# --------------------------------------------------------------------------- runs


class NoTableFound(ImportRejection):
    """The text holds no table header with data rows at all (nothing but metadata or notes).

    A spreadsheet importer uses the distinction: a sheet of notes is skipped, not an error.
    """


def parse_text(data: bytes, *, source: str = "",
               delimiters: tuple[str, ...] = DELIMITERS) -> list[RawRun]:
    """All runs of a delimited-text export given as bytes, in file order.

    ``source`` is the file's name as the caller knows it; it is not needed for parsing and
    is accepted so callers can pass it uniformly (messages name lines, the core adds the file).
    ``delimiters`` narrows the cell delimiters tried (a caller that wrote the text itself
    passes the one it used). Raises :class:`ImportRejection` (one-sentence reason, 1-based
    line, and the 1-based field when one cell is at fault) when the text cannot be read;
    :class:`NoTableFound` when it holds no table at all.
    """
    del source  # reasons name the line; the caller adds the file name
    text = _Text(_decode(data), delimiters)
    runs: list[RawRun] = []
    pos = 0
    while pos < len(text.buf):
        pre = _scan_preamble(text, pos)
        if pre.table is None:
            _reject_tail(pre, runs)
            break
        end, pos = _table_end(text, pre.table)
        runs.append(_make_run(text, pre, end))
    if not runs:
        raise NoTableFound("no table header found")
    return runs


def _reject_tail(pre: _Preamble, runs: list[RawRun]) -> None:
    """Explain why text after the last table (or a file without a table) is not readable.

    Comments and free text after the last table are allowed; metadata or a header there
    means a run whose table is missing.
    """
    if pre.header_like_line is not None:
        raise ImportRejection(f"header found on line {pre.header_like_line} but no data rows",
                              pre.header_like_line)
    if pre.metadata and runs:
        raise ImportRejection(f"the block starting on line {pre.first_line} has no table header "
                              "with data rows", pre.first_line)


def _make_run(text: _Text, pre: _Preamble, end: int) -> RawRun:
    """A :class:`RawRun` from a preamble and its parsed table body."""
    table = pre.table
    assert table is not None
    values = _read_body(text, table, end)
    columns = [RawColumn(name=n, unit=u, values=v)
               for i, (n, u, v) in enumerate(zip(table.names, table.units, values)) if i not in table.text_columns]
    notes = tuple(f"column '{table.names[i]}' holds text, not numbers, and is not used"
                  for i in sorted(table.text_columns))
    return RawRun(metadata=dict(pre.metadata), columns=columns, notes=notes,
                  first_line=pre.first_line if pre.first_line is not None else table.header_line,
                  header_line=table.header_line, data_first_line=text.line_no(table.data_start))


# --------------------------------------------------------------------------- importer


def sniff(path: Path, head: bytes) -> float:
    """Confidence that ``path`` (first bytes ``head``) is a delimited-text export.

    0 for binary content (NUL bytes outside UTF-16, zip/xlsx, xls, PDF, images). Otherwise
    a table found in the first bytes and a text suffix (.csv .txt .tsv .dat) each add
    confidence; an empty or table-less file with a text suffix stays claimed with low
    confidence so that :func:`read` can say what is wrong with it.
    """
    known_suffix = path.suffix.lower() in SUFFIXES
    if not head:
        return 0.3 if known_suffix else 0.0
    if head.startswith(_BINARY_MAGIC):
        return 0.0
    try:
        text = _Text(_decode(head, final=False))
        has_table = _scan_preamble(text, 0).table is not None
    except ImportRejection as exc:
        binary = exc.reason.startswith(_NOT_TEXT)
        return 0.0 if binary or not known_suffix else 0.3
    if has_table:
        return 0.9 if known_suffix else 0.5
    return 0.3 if known_suffix else 0.0


def read(path: Path, context: ImportContext) -> list[RawRun]:
    """Read every run of the file at ``path``; the file is opened read-only.

    ``context`` is not needed here: column names and units are resolved by the core.
    """
    del context
    try:
        data = path.read_bytes()
    except OSError as exc:
        raise ImportRejection(f"the file cannot be opened ({exc.strerror or exc})") from None
    return parse_text(data, source=str(path))


@hookimpl
def gammadot_importers() -> list[Importer]:
    """The delimited-text importer record."""
    return [Importer(id="delimited_text", title="Delimited text (CSV, TSV, semicolon)",
                     sniff=sniff, read=read, suffixes=SUFFIXES)]

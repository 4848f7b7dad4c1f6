"""Built-in importer for gammadot's own JSON run documents (``*.json``, format version 1).

The format, its schema and the checks are in :mod:`gammadot.run_json`; this plugin only
decides which files are run documents and hands their bytes over. A ``.json`` file that is
not a run document is claimed weakly, so that it is rejected with a sentence saying so
rather than silently skipped.
"""

from __future__ import annotations

from pathlib import Path
from typing import Sequence

from gammadot.hookspecs import hookimpl
from gammadot.records import ImportContext, Importer, ImportRejection, RawRun
from gammadot.run_json import FORMAT, read_document

GAMMADOT_HOOKSPEC = ">=1,<2"

SUFFIXES: tuple[str, ...] = (".json",)
_MARKER = f'"{FORMAT}"'.encode()


def sniff(path: Path, head: bytes) -> float:
    """0.9 for a ``.json`` file whose first bytes name the run format, 0.6 for such a file
    under another name, 0.3 for any other ``.json`` file (read will explain), else 0."""
    text = head.lstrip(b"\xef\xbb\xbf \t\r\n")
    named = text.startswith(b"{") and _MARKER in head
    if path.suffix.lower() in SUFFIXES:
        return 0.9 if named else 0.3
    return 0.6 if named else 0.0


def read(path: Path, context: ImportContext) -> Sequence[RawRun]:
    """The runs of the document at ``path`` (opened read-only), checked against the schema."""
    try:
        data = path.read_bytes()
    except OSError as exc:
        raise ImportRejection(f"the file cannot be opened ({exc.strerror or exc})") from None
    return read_document(data, context.column_map)


@hookimpl
def gammadot_importers() -> list[Importer]:
    """The JSON run-document importer record."""
    return [Importer(id="json_runs", title="gammadot JSON run document (format version 1)",
                     sniff=sniff, read=read, suffixes=SUFFIXES)]

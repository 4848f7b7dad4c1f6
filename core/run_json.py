"""gammadot's own JSON run format, version 1: read, validate, write.

A run document (``schemas/run-v1.json``, a JSON Schema, draft 2020-12) holds one or more
runs, each with metadata and point columns, every quantity with its unit::

    {"format": "gammadot-run", "version": 1,
     "runs": [{"metadata": {"sample": "HC-2611", "temperature": {"value": 25, "unit": "°C"}},
               "columns": [{"name": "shear_rate", "unit": "1/s", "values": [0.1, 1, 10]},
                           {"name": "viscosity", "unit": "Pa·s", "values": [8.2, 3.1, null]}]}]}

Reading checks the document against the schema, then what a schema cannot say (columns of
one length; each unit of the dimension its column or key needs, checked by the same
:func:`gammadot.columns.build_run` every importer's runs go through). Every problem names its
place as a JSONPath (RFC 9535: ``$`` the document, ``.name`` a member, ``[i]`` an element),
e.g. ``$.runs[0].columns[2].unit``.

Writing (:func:`run_document`) turns an imported :class:`~gammadot.datamodel.Run` back into
a document: SI values with SI unit labels, so reading it again gives the same numbers bit for
bit. Pure functions: no file is read or written here.
"""

from __future__ import annotations

import functools
import json
import math
import re
from dataclasses import dataclass
from importlib import resources
from typing import TYPE_CHECKING, Any, Iterable, Mapping, Sequence

from .records import ImportRejection, RawColumn, RawRun

if TYPE_CHECKING:
    from .datamodel import Run

FORMAT = "gammadot-run"
VERSION = 1
SCHEMA_PACKAGE = "gammadot.schemas"
SCHEMA_FILE = "run-v1.json"
_IDENTIFIER = re.compile(r"^[A-Za-z_][A-Za-z0-9_]*$")
_BARE_NUMBER = re.compile(r"^\s*[-+]?(?:\d+[.,]?\d*|[.,]\d+)(?:[eE][-+]?\d+)?\s*$")


@dataclass(frozen=True)
class Problem:
    """One thing wrong with a document: where (a JSONPath) and what (one sentence)."""

    path: str
    message: str

    def __str__(self) -> str:
        return f"{self.path}: {self.message}"


class RunDocumentError(ImportRejection):
    """A run document that cannot be read; ``problems`` lists every one found."""

    def __init__(self, problems: Sequence[Problem]) -> None:
        first = problems[0]
        more = len(problems) - 1
        tail = f" (and {more} more problem{'s' if more > 1 else ''}; `gammadot schema --check FILE` lists them)" if more else ""
        super().__init__(f"{first}{tail}")
        self.problems = list(problems)


class _NotJson:
    """What ``NaN``/``Infinity`` parse to: JSON has no such numbers (RFC 8259, section 6)."""

    def __init__(self, name: str) -> None:
        self.name = name

    def __repr__(self) -> str:
        return self.name


# --------------------------------------------------------------------------- the schema


@functools.lru_cache(maxsize=1)
def schema_text() -> str:
    """The run schema as shipped (``gammadot schema`` prints this)."""
    return resources.files(SCHEMA_PACKAGE).joinpath(SCHEMA_FILE).read_text(encoding="utf-8")


@functools.lru_cache(maxsize=1)
def load_schema() -> dict[str, Any]:
    """The run schema as a dict."""
    return json.loads(schema_text())


def json_path(parts: Iterable[str | int]) -> str:
    """A JSONPath (RFC 9535) for a place in a document: ``$.runs[0].metadata['gap (nominal)']``."""
    path = "$"
    for part in parts:
        if isinstance(part, int):
            path += f"[{part}]"
        elif _IDENTIFIER.match(part):
            path += f".{part}"
        else:
            path += "['" + part.replace("\\", "\\\\").replace("'", "\\'") + "']"
    return path


# --------------------------------------------------------------------------- reading


def parse_json(data: bytes) -> Any:
    """The JSON value of ``data`` (UTF-8, -16 or -32, RFC 8259 §8.1), or an
    :class:`ImportRejection` naming the line and column of a syntax error."""
    if not data.strip():
        raise ImportRejection("file is empty")
    try:
        return json.loads(data, parse_constant=_NotJson)
    except json.JSONDecodeError as exc:
        raise ImportRejection(f"not valid JSON: {exc.msg} (line {exc.lineno}, column {exc.colno})",
                              exc.lineno) from None
    except UnicodeDecodeError:
        raise ImportRejection("not valid JSON: the text is not UTF-8, UTF-16 or UTF-32") from None


def schema_problems(document: Any) -> list[Problem]:
    """Every place where ``document`` breaks the schema, in document order."""
    from jsonschema import Draft202012Validator

    if isinstance(document, dict) and document.get("format") != FORMAT:
        shown = json.dumps(document.get("format"), ensure_ascii=False) if "format" in document else "missing"
        return [Problem("$.format", f"not a gammadot run document (format is {shown}, "
                                    f"expected \"{FORMAT}\")")]
    if isinstance(document, dict) and "version" in document and document["version"] != VERSION:
        return [Problem("$.version", f"version {json.dumps(document['version'])} is not read by this "
                                     f"gammadot (it reads version {VERSION}); update gammadot")]
    validator = Draft202012Validator(load_schema())
    errors = sorted(validator.iter_errors(document), key=lambda e: _order(e.absolute_path))
    return [_problem(e) for e in errors]


def _order(parts: Iterable[str | int]) -> tuple[tuple[int, Any], ...]:
    return tuple((0, p) if isinstance(p, int) else (1, str(p)) for p in parts)


def _problem(error: Any) -> Problem:
    """A jsonschema error as a :class:`Problem` with a sentence for people."""
    from jsonschema.exceptions import best_match

    parts = list(error.absolute_path)
    kind = error.validator
    if kind == "oneOf" and error.context:
        # the branch of the instance's own kind says more than "must be a text" from another
        relevant = [e for e in error.context if e.validator != "type"]
        if relevant:
            return _problem(best_match(relevant))
        return Problem(json_path(parts), 'must be a text or a quantity {"value": number, "unit": text}, '
                                         f"not {_describe(error.instance)}")
    if kind == "required":
        missing = next((name for name in error.validator_value if name not in error.instance), "?")
        return Problem(json_path([*parts, missing]), "is missing (required)")
    if kind == "additionalProperties" and isinstance(error.instance, dict):
        allowed = sorted(error.schema.get("properties", {}))
        extra = sorted(set(error.instance) - set(allowed))
        where = json_path([*parts, extra[0]]) if extra else json_path(parts)
        hint = f" (allowed here: {', '.join(allowed)})" if allowed else ""
        return Problem(where, f"is not part of the format{hint}")
    if kind == "type" and isinstance(error.instance, _NotJson):
        return Problem(json_path(parts), f"{error.instance.name} is not a JSON number (RFC 8259, section 6); "
                                         "write null for a missing value")
    if kind == "type":
        wanted = error.validator_value if isinstance(error.validator_value, list) else [error.validator_value]
        return Problem(json_path(parts), f"must be {' or '.join(_TYPE_WORDS.get(t, t) for t in wanted)}, "
                                         f"not {_describe(error.instance)}")
    if kind == "const":
        return Problem(json_path(parts), f"must be {json.dumps(error.validator_value, ensure_ascii=False)}")
    if kind in ("minItems", "minLength"):
        return Problem(json_path(parts), "must not be empty")
    return Problem(json_path(parts), " ".join(error.message.split()))


_TYPE_WORDS = {"number": "a number", "null": "null", "string": "a text", "object": "an object",
               "array": "a list", "integer": "an integer", "boolean": "true or false"}


def _describe(value: Any) -> str:
    """A JSON value in a few words: its kind and, when short, the value."""
    kind = {dict: "an object", list: "a list", str: "a text", bool: "a boolean",
            type(None): "null"}.get(type(value), "a number")
    shown = json.dumps(value, ensure_ascii=False, default=repr)
    return f"{kind} {shown}" if len(shown) <= 30 and kind not in ("null",) else kind


def meaning_problems(document: Mapping[str, Any], column_map: Mapping[str, str] | None = None) -> list[Problem]:
    """What a schema cannot check, for a document that passed it: equal column lengths,
    quantities with units, and units of the right dimension (as the core will resolve them)."""
    problems: list[Problem] = []
    for index, run in enumerate(document["runs"]):
        found = _length_problem(index, run) or _metadata_unit_problem(index, run)
        if found is None:
            found = _resolve_problem(index, run, column_map)
        if found is not None:
            problems.append(found)
    return problems


def _length_problem(index: int, run: Mapping[str, Any]) -> Problem | None:
    columns = run["columns"]
    n = len(columns[0]["values"])
    for j, column in enumerate(columns[1:], 1):
        if len(column["values"]) != n:
            return Problem(json_path(["runs", index, "columns", j, "values"]),
                           f"{len(column['values'])} values, but "
                           f"{json_path(['runs', index, 'columns', 0, 'values'])} has {n}")
    return None


def _metadata_unit_problem(index: int, run: Mapping[str, Any]) -> Problem | None:
    """A known quantity key (temperature, gap) written as text without a unit."""
    from .columns import normalise_name
    from .datamodel import KNOWN_METADATA

    for key, value in run.get("metadata", {}).items():
        name = normalise_name(key).replace("testtype", "test_type")
        if KNOWN_METADATA.get(name) and isinstance(value, str) and _BARE_NUMBER.match(value):
            return Problem(json_path(["runs", index, "metadata", key]),
                           f"{json.dumps(value, ensure_ascii=False)} has no unit; write it as "
                           f"{{\"value\": {value.strip()}, \"unit\": \"...\"}}")
    return None


def _resolve_problem(index: int, run: Mapping[str, Any], column_map: Mapping[str, str] | None) -> Problem | None:
    """Resolve the run as the core will; a rejection is restated at its JSONPath."""
    from .columns import build_run

    try:
        build_run(raw_run(run), run_id="check", source_file="", source_sha256="", column_map=column_map)
    except ImportRejection as exc:
        match = re.match(r"(column|metadata) '(.*?)': (.*)$", exc.reason)
        if match and match.group(1) == "column":
            j = next((j for j, c in enumerate(run["columns"]) if c["name"].strip() == match.group(2)), None)
            if j is not None:
                return Problem(json_path(["runs", index, "columns", j, "unit"]), match.group(3))
        if match and match.group(1) == "metadata":
            return Problem(json_path(["runs", index, "metadata", match.group(2)]), match.group(3))
        return Problem(json_path(["runs", index, "columns"]), exc.reason)
    return None


def raw_run(run: Mapping[str, Any]) -> RawRun:
    """A document's run (already validated) as the :class:`RawRun` every importer hands over.

    A quantity ``{"value": 25, "unit": "°C"}`` becomes the text ``"25 °C"`` (``repr`` of the
    number, so it reads back exactly); ``null`` values become NaN. A JSON run has no lines:
    its first, header and data lines are all 1.
    """
    import numpy as np

    metadata = {key: value if isinstance(value, str) else f"{value['value']!r} {value['unit']}"
                for key, value in run.get("metadata", {}).items()}
    columns = [RawColumn(name=c["name"].strip(), unit=c["unit"].strip(),
                         values=np.array([np.nan if v is None else float(v) for v in c["values"]], dtype=np.float64))
               for c in run["columns"]]
    return RawRun(metadata=metadata, columns=columns, first_line=1, header_line=1, data_first_line=1,
                  notes=tuple(run.get("notes", ())))


def document_problems(data: bytes, column_map: Mapping[str, str] | None = None) -> list[Problem]:
    """Every problem of a document given as bytes (empty when it reads cleanly)."""
    try:
        document = parse_json(data)
    except ImportRejection as exc:
        return [Problem("$", exc.reason)]
    problems = schema_problems(document)
    return problems or meaning_problems(document, column_map)


def read_document(data: bytes, column_map: Mapping[str, str] | None = None) -> list[RawRun]:
    """The runs of a document, or a :class:`RunDocumentError` naming the first problem's path."""
    document = parse_json(data)
    problems = schema_problems(document) or meaning_problems(document, column_map)
    if problems:
        raise RunDocumentError(problems)
    return [raw_run(run) for run in document["runs"]]


# --------------------------------------------------------------------------- writing


def run_document(run: "Run", *, generator: str = "") -> dict[str, Any]:
    """A version-1 document holding ``run`` as imported: SI values and SI unit labels.

    Temperature and gap metadata become quantities; other metadata stay text. The run's
    import notes (ignored columns, assumed units) are kept as notes. Values that are not
    finite are written as ``null`` (JSON has no NaN or infinity). ``source`` records the
    original file, its SHA-256, line and run id.
    """
    from .datamodel import KNOWN_METADATA, QUANTITIES
    from .units import DIMENSIONS

    metadata: dict[str, Any] = {}
    for key, value in run.metadata.items():
        dimension = KNOWN_METADATA.get(key)
        if dimension and isinstance(value, (int, float)) and not isinstance(value, bool):
            if math.isfinite(value):  # a quantity needs a number; a missing one is left out
                metadata[key] = {"value": float(value), "unit": DIMENSIONS[dimension].label}
        else:
            metadata[key] = str(value)
    columns = [{"name": name, "unit": DIMENSIONS[QUANTITIES[name].dimension].label,
                "values": [_finite_or_none(v) for v in values.tolist()]}
               for name, values in run.columns.items()]
    entry: dict[str, Any] = {
        "source": {"file": run.source_file, "sha256": run.source_sha256, "line": run.first_line,
                   "run_id": run.run_id},
        "metadata": metadata,
        "columns": columns,
    }
    notes = [f.message for f in run.findings if f.check.startswith("import.")]
    if notes:
        entry["notes"] = notes
    document: dict[str, Any] = {"format": FORMAT, "version": VERSION}
    if generator:
        document["generator"] = generator
    document["runs"] = [entry]
    return document


def _finite_or_none(value: float) -> float | None:
    value = float(value)
    return value if math.isfinite(value) else None


def dumps(document: Mapping[str, Any]) -> str:
    """A document as JSON text (UTF-8 when encoded): indented, each value list on one line."""
    lists: dict[str, str] = {}
    shaped = json.loads(json.dumps(document, allow_nan=False))  # a deep copy of plain JSON values
    for i, run in enumerate(shaped.get("runs", [])):
        for j, column in enumerate(run.get("columns", [])):
            marker = f"@values-{i}-{j}@"
            lists[json.dumps(marker)] = json.dumps(column["values"], allow_nan=False)
            column["values"] = marker
    text = json.dumps(shaped, ensure_ascii=False, allow_nan=False, indent=1)
    for marker, values in lists.items():
        text = text.replace(marker, values, 1)
    return text + "\n"

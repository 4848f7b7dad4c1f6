"""Numbers, units, equations and JSON for the study site (no page logic here).

``script_json`` is the hot path of the site writer: every plot's data go through it. NumPy
arrays are written as whole arrays (one ``%``-format call per array, six significant digits,
non-finite values as ``null``) rather than value by value through Python objects.
"""

from __future__ import annotations

import html
import json
import math
import re
import secrets
from functools import lru_cache
from typing import Any, Sequence

import numpy as np

SIGNIFICANT = 6  # digits of plot coordinates: far below what a plot or a hover label shows

# --------------------------------------------------------------------------- numbers for people

_SUPER = str.maketrans("-0123456789n", "⁻⁰¹²³⁴⁵⁶⁷⁸⁹ⁿ")


def _superscript(number: int) -> str:
    return str(number).translate(_SUPER)


def fmt(value: Any, digits: int = 4) -> str:
    """A number for people: ``digits`` significant digits, ×10ⁿ for very large/small values.

    ``None`` and NaN give an em dash, infinities ∞ and −∞.
    """
    if value is None:
        return "—"
    value = float(value)
    if math.isnan(value):
        return "—"
    if math.isinf(value):
        return "∞" if value > 0 else "−∞"
    if value == 0 or 1e-3 <= abs(value) < 1e5:
        text = f"{value:.{digits}g}"
        if "e" not in text:
            return text.replace("-", "−")
    mantissa, exponent = f"{value:.{digits - 1}e}".split("e")
    mantissa = mantissa.rstrip("0").rstrip(".") if "." in mantissa else mantissa
    return f"{mantissa}×10{_superscript(int(exponent))}".replace("-", "−")


def fmt_unit(unit: str | None) -> str:
    """A unit for display (``Pa·s^n`` as ``Pa·sⁿ``); the pure number ``1`` shows as nothing."""
    if unit in (None, "", "1"):
        return ""
    return re.sub(r"\^\(?(-?[0-9n]+)\)?", lambda m: m.group(1).translate(_SUPER), str(unit))


def fmt_estimate(value: float | None, stderr: float | None, unit: str | None) -> str:
    """``value ± stderr unit``; "not determined" when the value is missing."""
    if value is None or not math.isfinite(value):
        return "not determined"
    text = fmt(value)
    if stderr is not None and math.isfinite(stderr):
        text += f" ± {fmt(stderr, 2)}"
    else:
        text += " (standard error not determined)"
    unit_text = fmt_unit(unit)
    return f"{text} {unit_text}" if unit_text else text


def fmt_percent(value: float | None, digits: int = 2) -> str:
    """A fraction as per cent (0.034 → "3.4 %"); em dash when unknown."""
    return "—" if value is None or not math.isfinite(value) else f"{fmt(100.0 * value, digits)} %"


def fmt_column(values: Sequence[float] | np.ndarray, digits: int = 5) -> list[str]:
    """:func:`fmt` of every value of a column, fast: one ``%`` format for the plain numbers,
    :func:`fmt` itself only for those that need ×10ⁿ, —, ∞."""
    numbers = np.asarray(values, dtype=float).tolist()
    if not numbers:
        return []
    texts = (",".join([f"%.{digits}g"] * len(numbers)) % tuple(numbers)).replace("-", "−").split(",")
    return [fmt(v, digits) if ("e" in t or "n" in t or (v != 0 and abs(v) < 1e-3)) else t
            for t, v in zip(texts, numbers)]


def sort_key(value: float | None) -> str:
    """A number for a ``data-sort`` attribute (empty when unknown: sorts last)."""
    return "" if value is None or not math.isfinite(value) else repr(float(value))


# --------------------------------------------------------------------------- equations

_SUBSCRIPT_AFTER = re.compile(r"([ηλτγ])(0|∞|_?[a-z]\b|_[a-z0-9]+)")
_POWER = re.compile(r"\^(\((?:[^()]|\([^()]*\))*\)|[A-Za-z0-9.]+)")


@lru_cache(maxsize=256)
def equation_html(text: str) -> str:
    """A model's plain-text equation as HTML: ``η0`` → η<sub>0</sub>, ``τ_y`` → τ<sub>y</sub>,
    ``x^(a/b)`` → x<sup>a/b</sup>; symbols in italics. The text is escaped first."""
    escaped = html.escape(text, quote=False)

    def power(match: re.Match[str]) -> str:
        body = match.group(1)
        if body.startswith("(") and body.endswith(")"):
            body = body[1:-1]
        return f"<sup>{body}</sup>"

    escaped = _POWER.sub(power, escaped)
    escaped = _SUBSCRIPT_AFTER.sub(lambda m: f"{m.group(1)}<sub>{m.group(2).lstrip('_')}</sub>", escaped)
    return escaped


# --------------------------------------------------------------------------- text for plots

def plot_text(text: Any) -> str:
    """Text for Plotly labels: Plotly reads a few HTML tags in labels, so escape them."""
    return html.escape(str(text), quote=False)


# --------------------------------------------------------------------------- JSON

_SCRIPT_ESCAPES = (("&", "\\u0026"), ("<", "\\u003c"), (">", "\\u003e"), ("\u2028", "\\u2028"),
                   ("\u2029", "\\u2029"))


@lru_cache(maxsize=512)
def _row_format(n: int) -> str:
    return ",".join([f"%.{SIGNIFICANT}g"] * n)


def number_array_json(values: np.ndarray) -> str:
    """A numeric array as a JSON array: floats to six significant digits, non-finite → ``null``.

    One C-level ``%`` format for the whole array; integers and booleans exactly.
    """
    array = np.asarray(values)
    if array.ndim != 1:
        return "[" + ",".join(number_array_json(row) for row in array) + "]"
    if array.dtype.kind == "b":
        return "[" + ",".join(["true" if v else "false" for v in array.tolist()]) + "]"
    if array.dtype.kind in "iu":
        return "[" + ",".join(map(str, array.tolist())) + "]"
    if not len(array):
        return "[]"
    text = _row_format(len(array)) % tuple(array.astype(float, copy=False).tolist())
    if "n" in text:  # nan, inf, -inf: only numbers are in this text, so these are safe to replace
        text = text.replace("-inf", "null").replace("inf", "null").replace("nan", "null")
    return "[" + text + "]"


def _dumps(value: Any) -> str:
    if isinstance(value, np.ndarray):
        return number_array_json(value)
    if isinstance(value, dict):
        return "{" + ",".join(f"{json.dumps(str(k), ensure_ascii=False)}:{_dumps(v)}"
                              for k, v in value.items()) + "}"
    if isinstance(value, (list, tuple)):
        if value and all(type(v) is str for v in value):  # noqa: E721 - exact str: fast path
            return json.dumps(list(value), ensure_ascii=False)
        return "[" + ",".join(_dumps(v) for v in value) + "]"
    if isinstance(value, (bool, np.bool_)):
        return "true" if value else "false"
    if isinstance(value, (int, np.integer)):
        return str(int(value))
    if isinstance(value, (float, np.floating)):
        return json.dumps(float(value)) if math.isfinite(value) else "null"
    if value is None:
        return "null"
    return json.dumps(str(value), ensure_ascii=False)


class _ArrayEncoder(json.JSONEncoder):
    """The C encoder for the structure; each NumPy array becomes a token that is replaced by
    its text afterwards (:func:`number_array_json`), NumPy scalars become Python numbers."""

    def __init__(self, token: str) -> None:
        super().__init__(ensure_ascii=False, allow_nan=False, separators=(",", ":"))
        self.token = token
        self.arrays: list[str] = []
        self.seen: dict[int, int] = {}  # id of an array → its text (one figure shares grids)

    def default(self, value: Any) -> Any:
        if isinstance(value, np.ndarray):
            number = self.seen.get(id(value))
            if number is None:
                number = self.seen[id(value)] = len(self.arrays)
                self.arrays.append(number_array_json(value))
            return f"{self.token}{number}"
        if isinstance(value, np.bool_):
            return bool(value)
        if isinstance(value, np.integer):
            return int(value)
        if isinstance(value, np.floating):
            return float(value) if math.isfinite(value) else None
        if isinstance(value, tuple):
            return list(value)
        return str(value)


# A token no input file can know (random per process): marks where an array's text goes.
_TOKEN = "\u0001" + secrets.token_hex(8) + "\u0001"
_TOKEN_JSON = json.dumps(_TOKEN)[1:-1]
_TOKEN_PATTERN = re.compile(f'"{re.escape(_TOKEN_JSON)}(\\d+)"')


def script_json(data: Any) -> str:
    """JSON safe inside an HTML ``<script>`` element: no NaN, and no ``<``, ``>``, ``&``.

    NumPy arrays are written to six significant digits (:func:`number_array_json`); other
    floats exactly; a non-finite float is ``null``. The structure goes through the C JSON
    encoder once; arrays are formatted whole.
    """
    encoder = _ArrayEncoder(_TOKEN)
    try:
        text = encoder.encode(data)
    except ValueError:  # a non-finite Python float outside the arrays: the careful way
        text = _dumps(data)
    else:
        if encoder.arrays:
            arrays = encoder.arrays
            text = _TOKEN_PATTERN.sub(lambda m: arrays[int(m.group(1))], text)
    for char, escape in _SCRIPT_ESCAPES:
        if char in text:
            text = text.replace(char, escape)
    return text


# --------------------------------------------------------------------------- file names

_SAFE_NAME = re.compile(r"^[a-z0-9][a-z0-9_-]{0,150}$")
_RESERVED_NAMES = {"con", "prn", "aux", "nul", *(f"com{i}" for i in range(1, 10)),
                   *(f"lpt{i}" for i in range(1, 10)), "index"}


def page_names(ids: Sequence[str | None], prefix: str = "run") -> dict[str | None, str]:
    """A distinct, safe file name (without ``.html``) for every id.

    Run ids are slugs already; anything else (path separators, dots, capitals, reserved
    device names, ``None``) is reduced to ``[a-z0-9_-]`` and numbered if two would coincide.
    """
    names: dict[str | None, str] = {}
    used: set[str] = set()
    for key in ids:
        text = "" if key is None else str(key)
        base = text if _SAFE_NAME.match(text) else re.sub(r"[^a-z0-9_-]+", "-", text.lower()).strip("-_")[:120]
        if not base or base in _RESERVED_NAMES or not base[0].isalnum():
            base = f"{prefix}-{base}".rstrip("-")
        name, number = base, 1
        while name in used:
            number += 1
            name = f"{base}-{number}"
        used.add(name)
        names[key] = name
    return names

"""Unit parsing and conversion to SI, through the pint units library.

Instrument exports spell units in many ways (``mPa·s``, ``mPas``, ``cP``, ``µN·m``, ``s⁻¹``,
``°C``, ``rpm``). :func:`parse_unit` turns such a spelling into a pint unit *for a required
dimension*: the spelling is tried in several readings and only a reading with the dimension
the column's meaning requires is accepted, so a viscosity in ``mPas`` is read as mPa·s and
never as a pressure. The registry is built once, on first use (pint takes ~0.5 s to load).
"""

from __future__ import annotations

import functools
import re
import threading
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

if TYPE_CHECKING:
    import numpy as np
    import pint


class UnitError(ValueError):
    """A unit text that cannot be read, or that has the wrong dimension for its use."""


@dataclass(frozen=True)
class Dimension:
    """A physical dimension a value must have, its SI target unit and a plain name."""

    name: str  # plain words for messages, e.g. "viscosity"
    dimensionality: str  # pint dimensionality, e.g. "[mass] / [length] / [time]"
    si_unit: str  # pint unit the values are converted to
    label: str  # how the unit is written in tables and reports


# The dimensions gammadot's quantities need. Angular velocity and shear rate are both
# 1/[time] in pint (the radian is dimensionless), which is why rpm → rad/s works directly.
DIMENSIONS: dict[str, Dimension] = {
    "time": Dimension("time", "[time]", "s", "s"),
    "torque": Dimension("torque", "[mass] * [length] ** 2 / [time] ** 2", "N*m", "N·m"),
    "angular_velocity": Dimension("angular velocity", "1 / [time]", "rad/s", "rad/s"),
    "frequency": Dimension("rate", "1 / [time]", "1/s", "1/s"),
    "force": Dimension("force", "[mass] * [length] / [time] ** 2", "N", "N"),
    "temperature": Dimension("temperature", "[temperature]", "degC", "°C"),
    "temperature_difference": Dimension("temperature difference", "[temperature]", "delta_degC", "K"),
    "pressure": Dimension("stress", "[mass] / [length] / [time] ** 2", "Pa", "Pa"),
    "viscosity": Dimension("viscosity", "[mass] / [length] / [time]", "Pa*s", "Pa·s"),
    "length": Dimension("length", "[length]", "m", "m"),
    "angle": Dimension("angle", "", "rad", "rad"),
    "dimensionless": Dimension("pure number", "", "dimensionless", "1"),
    "density": Dimension("density", "[mass] / [length] ** 3", "kg/m**3", "kg/m³"),
}

# A temperature *difference* written in degrees: a step of the scale, without its offset.
_DEGREE_STEPS = {"degc": "delta_degC", "c": "delta_degC", "degf": "delta_degF", "f": "delta_degF"}

_SUPERSCRIPTS = str.maketrans({"⁻": "-", "¹": "1", "²": "2", "³": "3", "⁰": "0"})

# pint's registry parses and caches lazily and is not documented as thread-safe; the watcher
# runs studies on worker threads, so every use of it goes through this lock (re-entrant: the
# helpers below call each other). Results are memoised, so the lock is rarely contended.
_PINT_LOCK = threading.RLock()


@functools.lru_cache(maxsize=1)
def _build_registry() -> "pint.UnitRegistry":
    import pint

    return pint.UnitRegistry(autoconvert_offset_to_baseunit=True)


def registry() -> "pint.UnitRegistry":
    """The process-wide pint registry (built once, on first use, under a lock: pint is slow to
    import and two threads must not build two registries)."""
    with _PINT_LOCK:
        return _build_registry()


def _base_cleanup(text: str) -> str:
    """Normalise typography: micro signs, middle dots, superscripts, degree signs."""
    t = text.strip()
    t = t.replace("\u00b5", "u").replace("\u03bc", "u")  # micro sign and Greek mu
    t = t.replace("°C", "degC").replace("°F", "degF").replace("° C", "degC").replace("° F", "degF")
    t = t.replace("℃", "degC").replace("℉", "degF")
    t = re.sub(r"(?<=[A-Za-z])(⁻?[¹²³⁰]+)", lambda m: "**" + m.group(1).translate(_SUPERSCRIPTS), t)
    for dot in ("·", "⋅", "•", "×"):
        t = t.replace(dot, "*")
    t = re.sub(r"(?<=[A-Za-z])\.(?=[A-Za-z])", "*", t)  # "Pa.s" -> "Pa*s"
    t = re.sub(r"(?<=[A-Za-z0-9])\s+(?=[A-Za-z])", "*", t)  # "mPa s" -> "mPa*s"
    t = re.sub(r"(?<=[A-Za-z])\^?(-\d)", r"**\1", t)  # "s^-1", "s-1" -> "s**-1"
    t = t.replace("^", "**")
    return t


def _candidates(text: str, dimension: str) -> list[str]:
    """Readings of a unit text to try, most literal first."""
    base = _base_cleanup(text)
    low = base.lower()
    found = []
    if dimension == "temperature_difference" and low in _DEGREE_STEPS:
        found.append(_DEGREE_STEPS[low])  # "1 °C" as a difference is 1 K, not 274.15 K
    if dimension == "angular_velocity" and low in ("rpm", "1/min", "min**-1", "u/min", "r/min", "rev/min"):
        found.append("rpm")  # common practice: speed "1/min" means revolutions per minute
    found.append(base)
    if dimension == "viscosity":
        # "mPas", "Pas", "kPas": Pa followed by s means pascal-second in exports.
        found.append(re.sub(r"Pas$", "Pa*s", base))
        found.append(re.sub(r"pas$", "Pa*s", low).replace("mpa", "mPa").replace("kpa", "kPa"))
        found.append(base.replace("cp", "cP").replace("CP", "cP"))
    if dimension == "torque":
        found.append(re.sub(r"Nm$", "N*m", base))
    if dimension in ("angular_velocity",):
        if low in ("rps", "rev/s", "1/rps"):
            found.append("revolution/second")
    if dimension == "temperature":
        if low in ("c", "degc", "deg c", "celsius"):
            found.append("degC")
        if low in ("f", "degf", "fahrenheit"):
            found.append("degF")
    if dimension == "frequency" and low in ("1/sec", "sec**-1", "/s"):
        found.append("1/s")
    if low in ("-", "", "1", "none", "dimensionless"):
        found.append("dimensionless")
    return list(dict.fromkeys(found))


@functools.lru_cache(maxsize=512)
def parse_unit(text: str, dimension: str) -> "pint.Unit":
    """Read ``text`` as a unit of ``dimension`` (a key of :data:`DIMENSIONS`).

    Raises :class:`UnitError` with a sentence naming the unit and what was expected.
    """
    with _PINT_LOCK:
        return _parse_unit(text, dimension)


def _parse_unit(text: str, dimension: str) -> "pint.Unit":
    ureg = registry()
    want = DIMENSIONS[dimension]
    wrong: str | None = None
    for candidate in _candidates(text, dimension):
        try:
            unit = ureg.Unit(candidate) if candidate != "dimensionless" else ureg.dimensionless
        except Exception:  # pint raises several types for unreadable text
            continue
        if _dimensionality_text(unit) == _normalise_dim(want.dimensionality):
            return unit
        wrong = wrong or _describe(unit)
    if wrong:
        raise UnitError(f"unit '{text}' is {wrong}, but {_article(want.name)} unit is needed")
    raise UnitError(f"unknown unit '{text}' (expected {_article(want.name)} unit such as {want.label})")


def _article(word: str) -> str:
    return ("an " if word[:1] in "aeiou" else "a ") + word


def _normalise_dim(text: str) -> str:
    if not text:
        return "dimensionless"
    return str(registry().get_dimensionality(text))


def _dimensionality_text(unit: Any) -> str:
    dim = unit.dimensionality
    return "dimensionless" if not dim else str(dim)


def _describe(unit: Any) -> str:
    dim = _dimensionality_text(unit)
    for d in DIMENSIONS.values():
        if _normalise_dim(d.dimensionality) == dim:
            return f"{_article(d.name)} unit"
    return f"a unit of dimension {dim}"


def to_si(values: "np.ndarray | float", unit_text: str, dimension: str) -> Any:
    """Convert ``values`` given in ``unit_text`` to the SI unit of ``dimension``.

    Temperatures go to °C (°F and K converted with their offsets). Returns the same shape.
    """
    unit = parse_unit(unit_text, dimension)
    target = DIMENSIONS[dimension].si_unit
    factor, offset = _linear_map(unit, target)
    return values * factor + offset if offset else values * factor


@functools.lru_cache(maxsize=512)
def _linear_map(unit: Any, target: str) -> tuple[float, float]:
    """(factor, offset) with ``si = value * factor + offset``; exact for affine units."""
    with _PINT_LOCK:
        ureg = registry()
        q0 = ureg.Quantity(0.0, unit).to(target).magnitude
        q1 = ureg.Quantity(1.0, unit).to(target).magnitude
    return float(q1 - q0), float(q0)


def parse_quantity(text: str, dimension: str) -> float:
    """Read ``"25 °C"``, ``"0.5 mm"``, ``"1 deg"`` as an SI number of ``dimension``.

    A bare number is taken as already SI. Raises :class:`UnitError` naming the text.
    """
    t = text.strip().replace(",", ".") if re.fullmatch(r"\s*-?\d+,\d+\s*\S*.*", text) else text.strip()
    match = re.fullmatch(r"([-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)\s*(.*)", t)
    if not match:
        raise UnitError(f"'{text}' is not a number with a unit")
    number = float(match.group(1))
    unit_text = match.group(2).strip()
    if not unit_text:
        return number
    if dimension == "angle" and unit_text.lower() in ("deg", "degree", "degrees", "°"):
        unit_text = "degree"
    return float(to_si(number, unit_text, dimension))


def unit_label(dimension: str) -> str:
    """The SI unit label written to tables for ``dimension`` (e.g. ``"Pa·s"``)."""
    return DIMENSIONS[dimension].label

"""Merrowind Formulations' gammadot plugin (a fictitious lab's example): an importer for its
LIMS flow records, an in-house model and a QC rule, registered as one plugin.

Everything here is invented for gammadot's examples: the company, its LIMS layout, the model
and the rule. Values handed to gammadot are as the file states them (the importer) or SI
(the model and the check): shear rate 1/s, viscosity Pa·s, temperature °C.
"""

from __future__ import annotations

import re
from pathlib import Path

import numpy as np

import gammadot
from gammadot import (Check, CheckContext, Finding, ImportContext, Importer, ImportRejection, Model,
                      ModelParameter, RawColumn, RawRun)

GAMMADOT_HOOKSPEC = ">=1,<2"

# --------------------------------------------------------------------------- LIMS flow records

SIGNATURE = "MWLIMS FLOW RECORD"
LAYOUT_VERSIONS = ("2",)
SUFFIXES = (".mwlims",)
_POINT = re.compile(r"^\s*(\d+)\s*:\s*(\S+)\s*\|\s*(\S+)\s*$")


def sniff(path: Path, head: bytes) -> float:
    """1.0 for a file starting with the record signature; 0.3 for other ``.mwlims`` files
    (so that :func:`read` says what is wrong); 0 otherwise."""
    if head.lstrip(b"\xef\xbb\xbf").startswith(SIGNATURE.encode("ascii")):
        return 1.0
    return 0.3 if path.suffix.lower() in SUFFIXES else 0.0


def read(path: Path, context: ImportContext) -> list[RawRun]:
    """One run per record; :class:`ImportRejection` names the line of any problem."""
    lines = path.read_text(encoding="utf-8-sig").splitlines()
    _check_signature(lines)
    record, points_line = _record_section(lines)
    rate, viscosity = _points(lines, points_line)
    metadata = {key: value for key, value in record.items() if key not in ("batch", "temperature_degC")}
    if "batch" in record:
        metadata["sample"] = record["batch"]
    if "temperature_degC" in record:
        metadata["temperature"] = f"{record['temperature_degC']} °C"
    columns = [RawColumn("Shear rate", "1/s", rate), RawColumn("Viscosity", "mPa·s", viscosity)]
    return [RawRun(metadata=metadata, columns=columns, first_line=1, header_line=points_line,
                   data_first_line=points_line + 1)]


def _check_signature(lines: list[str]) -> None:
    first = lines[0].strip() if lines else ""
    if not first.startswith(SIGNATURE):
        raise ImportRejection(f"not a Merrowind LIMS flow record (the first line must start with '{SIGNATURE}')", 1)
    version = first[len(SIGNATURE):].strip()
    if version not in LAYOUT_VERSIONS:
        raise ImportRejection(f"flow record layout '{version}' is not read (layouts: {', '.join(LAYOUT_VERSIONS)})", 1)


def _record_section(lines: list[str]) -> tuple[dict[str, str], int]:
    """The ``[record]`` keys and the line number of ``[points]``."""
    record: dict[str, str] = {}
    section = ""
    for number, line in enumerate(lines[1:], 2):
        text = line.strip()
        if text in ("[record]", "[points]"):
            section = text
            if text == "[points]":
                return record, number
        elif section == "[record]" and "=" in text:
            key, value = text.split("=", 1)
            record[key.strip()] = value.strip()
        elif text and not text.startswith("#"):
            raise ImportRejection(f"'{text}' is neither a section nor a 'key = value' line", number)
    raise ImportRejection("the record has no [points] section")


def _points(lines: list[str], points_line: int) -> tuple[np.ndarray, np.ndarray]:
    rows = []
    for number, line in enumerate(lines[points_line:], points_line + 1):
        if not line.strip() or line.strip().startswith("#"):
            continue
        match = _POINT.match(line)
        if not match:
            raise ImportRejection(f"'{line.strip()}' is not a point 'n: rate | viscosity'", number)
        try:
            rows.append((float(match.group(2)), float(match.group(3))))
        except ValueError:
            raise ImportRejection(f"'{line.strip()}' holds a value that is not a number", number) from None
    if not rows:
        raise ImportRejection("the [points] section is empty", points_line)
    values = np.array(rows, dtype=float)
    return values[:, 0].copy(), values[:, 1].copy()


LIMS_IMPORTER = Importer(id="merrowind_lims", title="Merrowind LIMS flow record", sniff=sniff, read=read,
                         suffixes=SUFFIXES)


# --------------------------------------------------------------------------- in-house model


def structural(shear_rate: np.ndarray, eta0: float, eta_inf: float, rate_c: float) -> np.ndarray:
    """η = η∞ + (η0 − η∞)/(1 + γ̇/γ̇c): Pa·s from 1/s (Merrowind's in-house form)."""
    return eta_inf + (eta0 - eta_inf) / (1.0 + shear_rate / rate_c)


def guess_structural(shear_rate: np.ndarray, viscosity: np.ndarray) -> dict[str, float]:
    """Plateaus from the ends of the curve, the critical rate where η is halfway (in log)."""
    order = np.argsort(shear_rate)
    rate, eta = shear_rate[order], viscosity[order]
    eta0, eta_inf = float(eta[0]), float(eta[-1]) / 2.0
    halfway = np.sqrt(eta0 * max(eta_inf, 1e-12))
    return {"eta0": eta0, "eta_inf": eta_inf, "rate_c": float(rate[np.argmin(np.abs(eta - halfway))])}


STRUCTURAL = Model(
    id="merrowind_structural",
    title="Merrowind structural thinning",
    target="viscosity",
    parameters=(ModelParameter("eta0", "Pa·s", 0.0, description="viscosity at rest"),
                ModelParameter("eta_inf", "Pa·s", 0.0, description="viscosity of the broken-down structure"),
                ModelParameter("rate_c", "1/s", 0.0, description="shear rate at which half the structure is broken")),
    function=structural,
    guess=guess_structural,
    equation="η = η∞ + (η0 − η∞)/(1 + γ̇/γ̇c)",
    reference="Merrowind QC method QC-FLOW-07 (fictitious)",
)


# --------------------------------------------------------------------------- QC rule

QC_TEMPERATURE = 25.0  # °C
QC_TOLERANCE = 0.5  # °C


def check_temperature(run, context: CheckContext) -> list[Finding]:
    """An error for a run measured outside 25.0 ± 0.5 °C, or without a temperature."""
    temperature = run.temperature
    if temperature is None:
        return [Finding("merrowind_temperature", "error", "no measuring temperature; QC flow curves need one")]
    if abs(temperature - QC_TEMPERATURE) > QC_TOLERANCE:
        return [Finding("merrowind_temperature", "error",
                        f"measured at {temperature:.1f} °C; QC flow curves are measured at "
                        f"{QC_TEMPERATURE:.1f} ± {QC_TOLERANCE:.1f} °C")]
    return []


QC_TEMPERATURE_RULE = Check(
    id="merrowind_temperature",
    title="QC measuring temperature 25.0 ± 0.5 °C",
    severity="error",
    run=check_temperature,
    reference="Merrowind QC method QC-FLOW-07, section 4 (fictitious)",
)


# --------------------------------------------------------------------------- hooks


@gammadot.hookimpl
def gammadot_importers() -> list[Importer]:
    """The LIMS flow-record importer."""
    return [LIMS_IMPORTER]


@gammadot.hookimpl
def gammadot_models() -> list[Model]:
    """The in-house model."""
    return [STRUCTURAL]


@gammadot.hookimpl
def gammadot_checks() -> list[Check]:
    """The QC temperature rule."""
    return [QC_TEMPERATURE_RULE]


def flow_record(batch: str, temperature: float, rate: np.ndarray, viscosity_mpas: np.ndarray,
                lims_id: str = "MW-000731") -> str:
    """A flow record's text (for tests and examples): the layout this importer reads."""
    lines = [f"{SIGNATURE} 2", "[record]", f"lims_id = {lims_id}", "product = Softmere body lotion",
             f"batch = {batch}", f"temperature_degC = {temperature!r}", "analyst = R. Okafor", "[points]",
             "# n: shear rate (1/s) | viscosity (mPa·s)"]
    lines += [f"{i}: {float(g)!r} | {float(e)!r}" for i, (g, e) in enumerate(zip(rate, viscosity_mpas), 1)]
    return "\n".join(lines) + "\n"

"""Run-page section ``field_results``: the results of a direct-indicating (dial) viscometer.

A drilling-fluid lab reads its runs by the field results of API RP 13D (plastic viscosity,
yield point, apparent viscosity, low-shear yield point, power-law n and K for pipe and
annulus), reported by the ``direct_indicating`` geometry as run results in SI with the field
value in the note. This section shows them together, SI value beside the field value, with the
formula used; runs without such results get no section. Uses the run-section hook like any
third-party plugin would.
"""

from __future__ import annotations

import math
from typing import Any

from markupsafe import escape

from gammadot.hookspecs import hookimpl
from gammadot.records import RunSection

METHOD_PREFIX = "API RP 13D"
LABELS = {
    "plastic_viscosity": "Plastic viscosity PV",
    "yield_point": "Yield point YP",
    "apparent_viscosity": "Apparent viscosity AV",
    "low_shear_yield_point": "Low-shear yield point LSYP",
    "power_law_n_pipe": "Flow index n (pipe)",
    "power_law_K_pipe": "Consistency K (pipe)",
    "power_law_n_annulus": "Flow index n (annulus)",
    "power_law_K_annulus": "Consistency K (annulus)",
}


def _number(value: float) -> str:
    return f"{value:.4g}".replace("-", "−")


def _unit(unit: str) -> str:
    return "" if unit in ("", "1") else unit.replace("^n", "ⁿ")


def render_field_results(run_result: Any) -> str | None:
    """The section's HTML, or ``None`` when the run has no field results."""
    rows = [r for r in run_result.results if r.method.startswith(METHOD_PREFIX)]
    if not rows:
        return None
    body = []
    for r in rows:
        if r.value is None or not math.isfinite(r.value):
            value = "n/a"
        else:
            value = f"{_number(r.value)} {_unit(r.unit)}".strip()
        formula = r.method[len(METHOD_PREFIX):].lstrip(": ")
        body.append(f"<tr><th scope=\"row\">{escape(LABELS.get(r.name, r.name))}</th>"
                    f"<td class=\"num\">{escape(value)}</td><td>{escape(r.note)}</td>"
                    f"<td><span class=\"equation\">{escape(formula)}</span></td></tr>")
    return ("<p>Field results of the dial readings at the standard speeds (API RP 13D). SI values; the "
            "field values follow the field convention of reading a dial degree as 1 lbf/100 ft².</p>"
            "<div class=\"table-wrap\"><table class=\"data\"><caption class=\"visually-hidden\">Field results"
            "</caption><thead><tr><th scope=\"col\">Result</th><th scope=\"col\" class=\"num\">Value (SI)</th>"
            "<th scope=\"col\">Field value and note</th><th scope=\"col\">Formula</th></tr></thead><tbody>"
            + "".join(body) + "</tbody></table></div>")


FIELD_RESULTS = RunSection(id="field_results", title="Direct-indicating viscometer: field results",
                           render=render_field_results, order=50)


@hookimpl
def gammadot_run_sections() -> list[RunSection]:
    """Provide the field-results section of the run page."""
    return [FIELD_RESULTS]

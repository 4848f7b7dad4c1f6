"""Writer ``study_site``: a static HTML site of the study in ``OUT/site/``.

The site is self-contained: pages, one stylesheet, one small script of our own and a copy
of the installed ``plotly.min.js``. Every link is relative and no page names another host,
so the folder can be opened from disk (``file://``), archived or copied as it is.

Pages are rendered with Jinja2 (autoescape on: every text taken from input files is
escaped). Plot data are embedded as JSON in ``<script type="application/json">`` blocks,
with ``<``, ``>`` and ``&`` escaped so that no text from a file can end the block. The
site is built in a temporary sibling folder and swapped into place by renames, so a
reader sees the old site or the new one, never half of one.
"""

from __future__ import annotations

import html
import json
import math
import os
import re
import shutil
from dataclasses import dataclass
from importlib import resources
from pathlib import Path
from typing import Any, Iterable, Sequence

import numpy as np

from gammadot.hookspecs import hookimpl
from gammadot.records import Writer
from gammadot.sections import run_sections

SITE_DIR = "site"
TEMPLATE_PACKAGE = "gammadot.site_template"
PLOTLY_JS = ("package_data", "plotly.min.js")

# Okabe & Ito's colour-blind-safe palette; yellow last (weak on white).
PALETTE = ("#0072B2", "#D55E00", "#009E73", "#CC79A7", "#E69F00", "#56B4E9", "#000000", "#F0E442")
EXCLUDED_COLOUR = "#8C8C8C"
APPARENT_COLOUR = "#E69F00"
SELECTED_COLOUR = "#D55E00"
FIT_COLOURS = ("#009E73", "#CC79A7", "#56B4E9", "#000000", "#0072B2")
FONT_STACK = ('system-ui, -apple-system, "Segoe UI", Roboto, "Helvetica Neue", Arial, '
              '"Noto Sans", "Liberation Sans", sans-serif')
CURVE_POINTS = 80
SEVERITY_RANK = {"error": 0, "warning": 1, "info": 2}

_SAFE_NAME = re.compile(r"^[a-z0-9][a-z0-9_-]{0,150}$")
_RESERVED_NAMES = {"con", "prn", "aux", "nul", *(f"com{i}" for i in range(1, 10)),
                   *(f"lpt{i}" for i in range(1, 10)), "index"}


# --------------------------------------------------------------------------- formatting

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


_SUPER = str.maketrans("-0123456789n", "⁻⁰¹²³⁴⁵⁶⁷⁸⁹ⁿ")


def _superscript(number: int) -> str:
    return str(number).translate(_SUPER)


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


def script_json(data: Any) -> str:
    """JSON safe inside an HTML ``<script>`` element: no NaN, and no ``<``, ``>``, ``&``."""
    text = json.dumps(_plain(data), ensure_ascii=False, allow_nan=False, separators=(",", ":"))
    for char, escape in (("&", "\\u0026"), ("<", "\\u003c"), (">", "\\u003e"),
                         ("\u2028", "\\u2028"), ("\u2029", "\\u2029")):
        text = text.replace(char, escape)
    return text


def _plain(value: Any) -> Any:
    """Plain JSON types: numpy scalars to Python, non-finite floats to ``None``."""
    if isinstance(value, dict):
        return {str(k): _plain(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_plain(v) for v in value]
    if isinstance(value, np.ndarray):
        return [_plain(v) for v in value.tolist()]
    if isinstance(value, (bool, np.bool_)):
        return bool(value)
    if isinstance(value, (int, np.integer)):
        return int(value)
    if isinstance(value, (float, np.floating)):
        return float(value) if math.isfinite(value) else None
    return value


def plot_text(text: Any) -> str:
    """Text for Plotly labels: Plotly reads a few HTML tags in labels, so escape them."""
    return html.escape(str(text), quote=False)


def log_series(values: np.ndarray | None, n: int) -> list[float | None]:
    """Values for a log axis: ``None`` where missing, non-finite or not positive."""
    if values is None:
        return [None] * n
    return [float(v) if math.isfinite(v) and v > 0 else None for v in np.asarray(values, dtype=float)]


def page_names(run_ids: Sequence[str]) -> dict[str, str]:
    """A distinct, safe file name (without ``.html``) for every run id.

    Run ids are slugs already; anything else (path separators, dots, capitals, reserved
    device names) is reduced to ``[a-z0-9_-]`` and numbered if two would coincide.
    """
    names: dict[str, str] = {}
    used: set[str] = set()
    for run_id in run_ids:
        base = run_id if _SAFE_NAME.match(run_id) else re.sub(r"[^a-z0-9_-]+", "-", run_id.lower()).strip("-_")[:120]
        if not base or base in _RESERVED_NAMES or not base[0].isalnum():
            base = f"run-{base}".rstrip("-")
        name, number = base, 1
        while name in used:
            number += 1
            name = f"{base}-{number}"
        used.add(name)
        names[run_id] = name
    return names


# --------------------------------------------------------------------------- templates

def _load_template(name: str) -> str | None:
    resource = resources.files(TEMPLATE_PACKAGE).joinpath(name)
    return resource.read_text(encoding="utf-8") if resource.is_file() else None


def template_environment() -> Any:
    """The Jinja2 environment: package templates, autoescape on, undefined names fail."""
    import jinja2
    from markupsafe import Markup

    env = jinja2.Environment(loader=jinja2.FunctionLoader(_load_template), autoescape=True,
                             undefined=jinja2.StrictUndefined, trim_blocks=True, lstrip_blocks=True,
                             keep_trailing_newline=True)
    env.filters["num"] = fmt
    env.filters["unit"] = fmt_unit
    env.filters["script_json"] = lambda data: Markup(script_json(data))
    return env


# --------------------------------------------------------------------------- view models

@dataclass(frozen=True)
class _Context:
    """What every page needs about the study."""

    title: str
    version: str


def _version() -> str:
    try:
        from gammadot import __version__
        return str(__version__)
    except ImportError:  # pragma: no cover - the package always has it
        return "unknown"


def _model_title(registry: Any, model_id: str) -> str:
    provided = registry.models.get(model_id)
    return provided.record.title if provided is not None else model_id


def _parameters_view(fit: Any, registry: Any) -> list[dict[str, Any]]:
    provided = registry.models.get(fit.model)
    descriptions = {p.name: p.description for p in provided.record.parameters} if provided else {}
    return [{
        "name": p.name,
        "value": fmt(p.value) if p.value is not None else "not determined",
        "stderr": fmt(p.stderr, 2) if p.stderr is not None else "not determined",
        "unit": fmt_unit(p.unit),
        "estimate": fmt_estimate(p.value, p.stderr, p.unit),
        "determined": p.value is not None and math.isfinite(p.value),
        "description": descriptions.get(p.name, ""),
    } for p in fit.parameters]


def _geometry_text(rr: Any) -> str:
    if rr.geometry_id:
        return f"{rr.geometry_id} ({rr.geometry_type})"
    if rr.geometry_type == "instrument":
        return "instrument values"
    named = rr.run.metadata.get("geometry")
    return f"{named} (not converted)" if named is not None else "—"


def _temperature_text(rr: Any) -> str:
    value = rr.run.temperature
    return "—" if value is None or not math.isfinite(value) else f"{fmt(value)} °C"


def _count(findings: Iterable[Any], severity: str) -> int:
    return sum(1 for f in findings if f.severity == severity)


def _fit_view(fit: Any, registry: Any) -> dict[str, Any]:
    if fit.shear_rate_min is not None and fit.shear_rate_max is not None:
        span = f"{fmt(fit.shear_rate_min, 3)} to {fmt(fit.shear_rate_max, 3)} 1/s"
    else:
        span = "—"
    return {
        "model": fit.model,
        "title": _model_title(registry, fit.model),
        "success": fit.success,
        "aicc": fmt(fit.aicc), "bic": fmt(fit.bic), "rmse_log": fmt(fit.rmse_log, 3),
        "selected": fit.selected, "message": fit.message, "range": span, "n_points": fit.n_points,
        "equation": registry.models[fit.model].record.equation if fit.model in registry.models else "",
    }


_CORRECTION_PREFIX = "correction_"


def _percent(value: float | None) -> str:
    return "—" if value is None or not math.isfinite(value) else f"{fmt(100.0 * value, 2)} %"


def correction_summary(rr: Any) -> dict[str, Any]:
    """The correction a run's geometry applied and how large it was (from its results).

    ``method`` is the correction's name ("none" when nothing was corrected); ``line`` one
    sentence for the run page; ``short`` the largest relative change for the runs table.
    """
    sizes = {r.name[len(_CORRECTION_PREFIX):]: r.value for r in rr.results if r.name.startswith(_CORRECTION_PREFIX)}
    method = rr.correction or "none"
    if not sizes:
        text = "instrument values used as exported" if rr.geometry_type == "instrument" else "not reported"
        return {"method": method, "line": f"{method}: {text}.", "short": "—"}
    largest = [v for k, v in sizes.items() if k.endswith("_max") and v is not None]
    line = (f"{method}: shear rate changed by at most {_percent(sizes.get('shear_rate_max'))} "
            f"(median {_percent(sizes.get('shear_rate_median'))}), shear stress by at most "
            f"{_percent(sizes.get('shear_stress_max'))} (median {_percent(sizes.get('shear_stress_median'))}), "
            "relative to the apparent (Newtonian) values.")
    return {"method": method, "line": line, "short": _percent(max(largest)) if largest else "—"}


def _results_view(rr: Any) -> list[dict[str, Any]]:
    """Every run-level result: name, value ± stderr with unit (or n/a), method, note."""
    views = []
    for r in rr.results:
        if r.value is None or not math.isfinite(r.value):
            value = "n/a"
        else:
            value = fmt_estimate(r.value, r.stderr, r.unit).replace(" (standard error not determined)", "")
        note = r.note
        if r.at_shear_rate is not None:
            note = f"at {fmt(r.at_shear_rate)} 1/s" + ("" if not note else f"; {note}")
        if r.extrapolated:
            note = f"extrapolated; {note}" if note else "extrapolated"
        views.append({"name": r.name, "value": value, "unit": fmt_unit(r.unit), "method": r.method, "note": note})
    return views


def _run_row(rr: Any, page: str, registry: Any) -> dict[str, Any]:
    selected = rr.selected
    return {
        "run_id": rr.run.run_id,
        "href": f"runs/{page}.html",
        "sample": rr.run.sample,
        "temperature": _temperature_text(rr),
        "geometry": _geometry_text(rr),
        "correction": correction_summary(rr),
        "model": _model_title(registry, selected.model) if selected else None,
        "parameters": _parameters_view(selected, registry) if selected else [],
        "n_points": rr.run.n_points,
        "n_excluded": int(np.count_nonzero(rr.excluded)),
        "warnings": _count(rr.findings, "warning"),
        "errors": _count(rr.findings, "error"),
        "source_file": rr.run.source_file,
    }


def _finding_groups(rr: Any, registry: Any) -> list[dict[str, Any]]:
    groups: dict[tuple[str, str], list[Any]] = {}
    for finding in rr.findings:
        groups.setdefault((finding.check, finding.severity), []).append(finding)
    ordered = sorted(groups.items(), key=lambda item: (SEVERITY_RANK.get(item[0][1], 9), item[0][0]))
    views = []
    for (check, severity), items in ordered:
        provided = registry.checks.get(check)
        views.append({
            "check": check, "severity": severity,
            "title": provided.record.title if provided else "",
            "count": len(items),
            "open": severity in ("error", "warning") or len(items) <= 5,
            "items": [{"message": f.message,
                       "point": "run" if f.point_index is None else f.point_index,
                       "excluded": bool(f.point_index is not None and 0 <= f.point_index < len(rr.excluded)
                                        and rr.excluded[f.point_index])}
                      for f in sorted(items, key=lambda f: (-1 if f.point_index is None else f.point_index))],
        })
    return views


_SKIP_METADATA = {"sample", "temperature", "geometry"}


def _metadata_rows(rr: Any) -> list[tuple[str, str]]:
    from gammadot.datamodel import KNOWN_METADATA
    from gammadot.units import DIMENSIONS

    run = rr.run
    rows = [
        ("Sample", run.sample if run.sample is not None else "—"),
        ("Temperature", _temperature_text(rr)),
        ("Geometry", _geometry_text(rr)),
        ("Correction", rr.correction or "—"),
        ("Source file", run.source_file),
        ("Source SHA-256", run.source_sha256),
        ("First line in file", str(run.first_line)),
        ("Points", str(run.n_points)),
    ]
    for key in sorted(k for k in run.metadata if k not in _SKIP_METADATA):
        value = run.metadata[key]
        dimension = KNOWN_METADATA.get(key)
        if dimension and isinstance(value, (int, float)) and not isinstance(value, bool):
            unit = DIMENSIONS[dimension].label
            text = f"{fmt(value)} {unit}" if unit != "1" else fmt(value)
        else:
            text = str(value)
        rows.append((key.replace("_", " ").capitalize(), text))
    return rows


# --------------------------------------------------------------------------- plots

def _axis(title: str) -> dict[str, Any]:
    return {"type": "log", "title": {"text": title}, "exponentformat": "power", "showline": True,
            "linecolor": "#5b6670", "mirror": True, "ticks": "outside", "gridcolor": "#e4e7eb",
            "zeroline": False, "automargin": True}


def _layout(x_title: str, y_title: str, *, legend_below: bool = False) -> dict[str, Any]:
    legend: dict[str, Any] = {"groupclick": "toggleitem", "bgcolor": "rgba(255,255,255,0.85)"}
    if legend_below:
        legend.update({"orientation": "h", "x": 0, "xanchor": "left", "y": -0.2, "yanchor": "top"})
    return {
        "xaxis": _axis(x_title), "yaxis": _axis(y_title),
        "font": {"family": FONT_STACK, "size": 13, "color": "#1d2329"},
        "paper_bgcolor": "#ffffff", "plot_bgcolor": "#ffffff",
        "margin": {"l": 70, "r": 20, "t": 36, "b": 20},
        "hovermode": "closest",
        "legend": legend,
    }


def _point_hover(y_symbol: str, y_unit: str) -> str:
    return (f"γ̇ = %{{x:.4g}} 1/s<br>{y_symbol} = %{{y:.4g}} {y_unit}"
            "<br>point %{customdata[0]}%{customdata[1]}<extra>%{fullData.name}</extra>")


def _flag_note(rr: Any, index: int) -> str:
    flags = sorted(set(rr.flags[index])) if index < len(rr.flags) else []
    state = " · excluded from fits" if rr.excluded[index] else ""
    return plot_text(state + (f" ({', '.join(flags)})" if flags else ""))


def _sample_colours(runs: Sequence[Any]) -> dict[str | None, str]:
    colours: dict[str | None, str] = {}
    for rr in runs:
        if rr.run.sample not in colours:
            colours[rr.run.sample] = PALETTE[len(colours) % len(PALETTE)]
    return colours


def overview_figure(runs: Sequence[Any]) -> dict[str, Any] | None:
    """All flow curves (viscosity against shear rate), legend grouped by sample.

    Each run is one legend entry: a line with solid markers in the sample colour for the
    points used in fits, plus (when there are any) a companion trace without legend entry
    for the excluded points as hollow grey markers. Every point appears exactly once.
    """
    colours = _sample_colours(runs)
    traces = []
    for rr in runs:
        rate, viscosity = rr.run.columns.get("shear_rate"), rr.run.columns.get("viscosity")
        if rate is None or viscosity is None:
            continue
        n = len(rate)
        excluded = np.asarray(rr.excluded, dtype=bool)
        colour = colours[rr.run.sample]
        sample = plot_text(rr.run.sample if rr.run.sample is not None else "(no sample name)")
        run_label = plot_text(rr.run.run_id)
        x, y = log_series(rate, n), log_series(viscosity, n)
        for style, mask in (("included", ~excluded), ("excluded", excluded)):
            index = np.flatnonzero(mask)
            if style == "excluded" and not len(index):
                continue
            included = style == "included"
            point_colour = colour if included else EXCLUDED_COLOUR
            traces.append({
                "type": "scatter", "mode": "lines+markers" if included else "markers",
                "name": run_label if included else f"{run_label}: excluded points",
                "legendgroup": sample, "legendgrouptitle": {"text": sample},
                "showlegend": included, "connectgaps": True,
                "x": [x[i] for i in index], "y": [y[i] for i in index],
                "line": {"color": colour, "width": 1},
                "marker": {"size": 7, "color": point_colour, "symbol": "circle" if included else "circle-open",
                           "line": {"width": 1.5, "color": point_colour}},
                "customdata": [[int(i), _flag_note(rr, int(i))] for i in index],
                "hovertemplate": _point_hover("η", "Pa·s"),
                "meta": {"kind": "points", "style": style, "run_id": run_label},
            })
    if not traces:
        return None
    return {"data": traces, "layout": _layout("Shear rate γ̇ (1/s)", "Viscosity η (Pa·s)")}


def _differs(a: np.ndarray | None, b: np.ndarray | None) -> bool:
    if a is None or b is None or a.shape != b.shape:
        return False
    return not np.allclose(a, b, rtol=1e-9, atol=0.0, equal_nan=True)


def fit_curves(rr: Any, registry: Any) -> tuple[list[dict[str, Any]], list[str]]:
    """Each successful fit evaluated on a log-spaced grid over its own shear-rate range.

    Returns curves (model, title, selected, rate, viscosity, stress) and notes on fits that
    could not be drawn. Nothing is drawn outside the range used for the fit.
    """
    curves, notes = [], []
    for fit in rr.fits:
        if not fit.success or fit.shear_rate_min is None or fit.shear_rate_max is None:
            continue
        provided = registry.models.get(fit.model)
        # every parameter's least-squares value: a curve is determined inside the fitted range
        # even where one parameter (η∞ without its plateau) is not identified
        values = dict(getattr(fit, "best_fit", None) or {p.name: p.value for p in fit.parameters})
        if provided is None or any(v is None or not math.isfinite(v) for v in values.values()):
            notes.append(f"{_model_title(registry, fit.model)}: curve not drawn (parameters not determined)")
            continue
        low, high = fit.shear_rate_min, fit.shear_rate_max
        if not (math.isfinite(low) and math.isfinite(high) and 0 < low <= high):
            continue
        grid = np.geomspace(low, high, CURVE_POINTS) if high > low else np.array([low])
        try:
            with np.errstate(all="ignore"):
                target = np.asarray(provided.record.function(grid, **values), dtype=float)
        except Exception as exc:  # a model plugin's failure must not stop the site
            notes.append(f"{_model_title(registry, fit.model)}: curve not drawn ({type(exc).__name__}: {exc})")
            continue
        if target.shape != grid.shape:
            notes.append(f"{_model_title(registry, fit.model)}: curve not drawn (model returned a wrong shape)")
            continue
        with np.errstate(all="ignore"):
            if provided.record.target == "shear_stress":
                stress, viscosity = target, target / grid
            else:
                viscosity, stress = target, target * grid
        curves.append({"model": fit.model, "title": _model_title(registry, fit.model),
                       "selected": fit.selected, "rate": grid, "viscosity": viscosity, "stress": stress})
    return curves, notes


def run_figures(rr: Any, registry: Any) -> tuple[list[dict[str, Any]], list[str]]:
    """Viscosity and stress against shear rate for one run, with data and fitted curves."""
    columns = rr.run.columns
    rate = columns.get("shear_rate")
    if rate is None:
        return [], []
    n = len(rate)
    excluded = np.asarray(rr.excluded, dtype=bool)
    curves, notes = fit_curves(rr, registry)
    rate_app, stress_app = columns.get("shear_rate_apparent"), columns.get("shear_stress_apparent")
    show_apparent = _differs(rate, rate_app) or _differs(columns.get("shear_stress"), stress_app)
    figures = []
    for key, symbol, unit, title in (("viscosity", "η", "Pa·s", "Viscosity η (Pa·s)"),
                                     ("shear_stress", "τ", "Pa", "Shear stress τ (Pa)")):
        values = columns.get(key)
        if values is None:
            continue
        x, y = log_series(rate, n), log_series(values, n)
        traces = []
        for name, mask, style in (("Measured, used in fits", ~excluded, "included"),
                                  ("Measured, excluded from fits", excluded, "excluded")):
            index = np.flatnonzero(mask)
            if not len(index):
                continue
            colour = PALETTE[0] if style == "included" else EXCLUDED_COLOUR
            traces.append({
                "type": "scatter", "mode": "markers", "name": name,
                "x": [x[i] for i in index], "y": [y[i] for i in index],
                "marker": {"size": 8, "color": colour, "symbol": "circle" if style == "included" else "circle-open",
                           "line": {"width": 1.5, "color": colour}},
                "customdata": [[int(i), _flag_note(rr, int(i))] for i in index],
                "hovertemplate": _point_hover(symbol, unit),
                "meta": {"kind": "points", "style": style},
            })
        if show_apparent and rate_app is not None and stress_app is not None:
            with np.errstate(divide="ignore", invalid="ignore"):
                apparent = stress_app / rate_app if key == "viscosity" else stress_app
            traces.append({
                "type": "scatter", "mode": "markers", "name": "Apparent (before correction)",
                "x": log_series(rate_app, n), "y": log_series(apparent, n),
                "marker": {"size": 7, "color": APPARENT_COLOUR, "symbol": "diamond-open",
                           "line": {"width": 1.5, "color": APPARENT_COLOUR}},
                "customdata": [[i, ""] for i in range(n)],
                "hovertemplate": _point_hover(symbol, unit),
                "meta": {"kind": "apparent"},
            })
        others = iter(FIT_COLOURS * 4)
        for curve in curves:
            selected = curve["selected"]
            traces.append({
                "type": "scatter", "mode": "lines",
                "name": plot_text(curve["title"] + (" (selected)" if selected else "")),
                "x": log_series(curve["rate"], len(curve["rate"])),
                "y": log_series(curve["viscosity"] if key == "viscosity" else curve["stress"], len(curve["rate"])),
                "line": {"color": SELECTED_COLOUR if selected else next(others),
                         "width": 3 if selected else 1.5, "dash": "solid" if selected else "dash"},
                "hovertemplate": (f"γ̇ = %{{x:.4g}} 1/s<br>{symbol} = %{{y:.4g}} {unit}"
                                  "<extra>%{fullData.name}</extra>"),
                "meta": {"kind": "fit", "model": curve["model"], "selected": selected},
            })
        # fitted curves underneath the measured points; the legend lists the points first
        for rank, trace in enumerate(traces):
            trace["legendrank"] = 1000 + rank
        traces.sort(key=lambda t: 0 if t["meta"]["kind"] == "fit" else 1)
        figures.append({"id": f"plot-{key.replace('_', '-')}", "title": title,
                        "figure": {"data": traces,
                                   "layout": _layout("Shear rate γ̇ (1/s)", title, legend_below=True)}})
    return figures, notes


# --------------------------------------------------------------------------- writing

def _overview_context(result: Any, names: dict[str, str], ctx: _Context) -> dict[str, Any]:
    registry = result.registry
    runs = result.runs
    samples = sorted({rr.run.sample for rr in runs if rr.run.sample is not None})
    unnamed = sum(1 for rr in runs if rr.run.sample is None)
    overview = overview_figure(runs)
    return {
        "root": "", "study_title": ctx.title, "version": ctx.version,
        "description": result.config.description,
        "counts": {"files": len(result.files), "runs": len(runs), "samples": len(samples),
                   "unnamed": unnamed, "rejected": len(result.rejected)},
        "runs": [_run_row(rr, names[rr.run.run_id], registry) for rr in runs],
        "rejected": [{"file": r.source_file, "line": r.line if r.line is not None else "—",
                      "reason": r.reason, "plugin": r.plugin or ""} for r in result.rejected],
        "writer_failures": [{"writer": f.writer, "plugin": f.plugin, "message": f.message}
                            for f in getattr(result, "writer_failures", [])],
        "overview": overview,
        "has_plots": overview is not None,
    }


def _run_context(rr: Any, result: Any, ctx: _Context) -> dict[str, Any]:
    registry = result.registry
    figures, curve_notes = run_figures(rr, registry)
    selected = rr.selected
    n_unplottable = 0
    rate, viscosity = rr.run.columns.get("shear_rate"), rr.run.columns.get("viscosity")
    if rate is not None and viscosity is not None:
        ok = np.isfinite(rate) & np.isfinite(viscosity) & (rate > 0) & (viscosity > 0)
        n_unplottable = int(np.count_nonzero(~ok))
    return {
        "root": "../", "study_title": ctx.title, "version": ctx.version,
        "run_id": rr.run.run_id,
        "sample": rr.run.sample,
        "metadata": _metadata_rows(rr),
        "correction": correction_summary(rr),
        "results": _results_view(rr),
        "figures": figures,
        "curve_notes": curve_notes,
        "n_unplottable": n_unplottable,
        "n_excluded": int(np.count_nonzero(rr.excluded)),
        "fits": [_fit_view(f, registry) for f in rr.fits],
        "selected": _fit_view(selected, registry) if selected else None,
        "parameters": _parameters_view(selected, registry) if selected else [],
        "finding_groups": _finding_groups(rr, registry),
        "sections": run_sections(rr, registry),  # sections added by plugins (hook gammadot_run_sections)
        "has_plots": bool(figures),
    }


def render_site(result: Any, site_dir: Path) -> list[Path]:
    """Render every page and asset into ``site_dir`` (which must not exist yet)."""
    env = template_environment()
    ctx = _Context(title=result.config.title, version=_version())
    names = page_names([rr.run.run_id for rr in result.runs])
    written: list[Path] = []
    assets = site_dir / "assets"
    (site_dir / "runs").mkdir(parents=True)
    assets.mkdir()
    plotly_js = resources.files("plotly").joinpath(*PLOTLY_JS)
    with plotly_js.open("rb") as source, open(assets / "plotly.min.js", "wb") as target:
        shutil.copyfileobj(source, target)
    written.append(assets / "plotly.min.js")
    for static in ("style.css", "site.js"):
        data = resources.files(TEMPLATE_PACKAGE).joinpath("static", static).read_bytes()
        (assets / static).write_bytes(data)
        written.append(assets / static)

    index = site_dir / "index.html"
    index.write_text(env.get_template("index.html.j2").render(**_overview_context(result, names, ctx)),
                     encoding="utf-8")
    written.append(index)
    template = env.get_template("run.html.j2")
    for rr in result.runs:
        page = site_dir / "runs" / f"{names[rr.run.run_id]}.html"
        page.write_text(template.render(**_run_context(rr, result, ctx)), encoding="utf-8")
        written.append(page)
    return written


def write_site(result: Any, out_dir: Path) -> list[Path]:
    """Build the site in ``out_dir/.site-tmp-<pid>`` and swap it into ``out_dir/site``."""
    out_dir.mkdir(parents=True, exist_ok=True)
    final = out_dir / SITE_DIR
    tmp = out_dir / f".{SITE_DIR}-tmp-{os.getpid()}"
    backup = out_dir / f".{SITE_DIR}-old-{os.getpid()}"
    for leftover in (tmp, backup):
        if leftover.exists():
            shutil.rmtree(leftover)
    try:
        written = render_site(result, tmp)
        if final.exists():
            os.replace(final, backup)
        try:
            os.replace(tmp, final)
        except OSError:
            if backup.exists() and not final.exists():
                os.replace(backup, final)  # put the old site back
            raise
    finally:
        if tmp.exists():
            shutil.rmtree(tmp, ignore_errors=True)
        if backup.exists():
            shutil.rmtree(backup, ignore_errors=True)
    return [final / path.relative_to(tmp) for path in written]


@hookimpl
def gammadot_writers() -> list[Writer]:
    """Provide the static study site writer (after the tables)."""
    return [Writer(id="study_site", title="Static study site", write=write_site, order=50)]


__all__ = ["fmt", "fmt_estimate", "page_names", "script_json", "write_site", "gammadot_writers"]

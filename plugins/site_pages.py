"""What each page of the study site shows: view models built from a ``StudyResult``.

Everything here returns plain values (texts already formatted for people, numbers for
sorting, figure dicts); the templates in ``site_template/`` lay them out and escape them.
"""

from __future__ import annotations

import datetime as _dt
import math
import platform
from collections import Counter
from dataclasses import dataclass
from importlib import metadata
from typing import Any, Iterable, Sequence

import numpy as np

from gammadot.sections import run_sections

from .site_format import (equation_html, fmt, fmt_column, fmt_estimate, fmt_percent, fmt_unit, sort_key)
from .site_plots import (common_model, differs, flow_curve_overlay, model_title, parameter_temperature_figures,
                         residual_figure, run_figures)

SEVERITY_RANK = {"error": 0, "warning": 1, "info": 2}
VERDICT_RANK = {"fail": 0, "uncertain": 1, "n/a": 2, "pass": 3}
VERDICT_ICON = {"pass": "✓", "fail": "✗", "n/a": "–", "uncertain": "?"}
LIBRARIES = ("numpy", "scipy", "lmfit", "pyarrow", "plotly", "jinja2", "pint", "pluggy")


@dataclass(frozen=True)
class Names:
    """File names of the run and sample pages (without ``.html``)."""

    runs: dict[str, str]
    samples: dict[str | None, str]

    def run_href(self, run_id: str, root: str) -> str:
        return f"{root}runs/{self.runs[run_id]}.html"

    def sample_href(self, sample: str | None, root: str) -> str:
        return f"{root}samples/{self.samples[sample]}.html"


def software_version() -> str:
    try:
        from gammadot import __version__
        return str(__version__)
    except ImportError:  # pragma: no cover - the package always has it
        return "unknown"


# --------------------------------------------------------------------------- small pieces

def _temperature(rr: Any) -> float | None:
    value = rr.run.temperature
    return None if value is None or not math.isfinite(value) else float(value)


def temperature_text(rr: Any) -> str:
    value = _temperature(rr)
    return "—" if value is None else f"{fmt(value)} °C"


def geometry_text(rr: Any) -> str:
    if rr.geometry_id:
        return f"{rr.geometry_id} ({rr.geometry_type})"
    if rr.geometry_type == "instrument":
        return "instrument values"
    named = rr.run.metadata.get("geometry")
    return f"{named} (not converted)" if named is not None else "—"


def run_date(rr: Any) -> str | None:
    value = rr.run.metadata.get("date")
    return None if value is None or str(value).strip() == "" else str(value).strip()


def _as_date(text: str) -> _dt.date | None:
    try:
        return _dt.date.fromisoformat(text[:10])
    except ValueError:
        return None


def study_dates(runs: Sequence[Any]) -> str | None:
    """"first to last" of the runs' ``date`` metadata (ISO dates), or the texts as found."""
    texts = sorted({d for d in (run_date(rr) for rr in runs) if d is not None})
    if not texts:
        return None
    dates = sorted({d for d in (_as_date(t) for t in texts) if d is not None})
    if dates and len(dates) == len({_as_date(t) for t in texts}):
        first, last = dates[0].isoformat(), dates[-1].isoformat()
        return first if first == last else f"{first} to {last}"
    return ", ".join(texts[:4]) + (f" and {len(texts) - 4} more" if len(texts) > 4 else "")


def _count(findings: Iterable[Any], severity: str) -> int:
    return sum(1 for f in findings if f.severity == severity)


_CORRECTION_PREFIX = "correction_"


def correction_summary(rr: Any) -> dict[str, Any]:
    """The correction a run's geometry applied and how large it was (from its results).

    ``method`` is the correction's name ("none" when nothing was corrected); ``line`` one
    sentence for the run page; ``short`` the largest relative change for the runs table.
    """
    sizes = {r.name[len(_CORRECTION_PREFIX):]: r.value for r in rr.results if r.name.startswith(_CORRECTION_PREFIX)}
    method = rr.correction or "none"
    if not sizes:
        text = "instrument values used as exported" if rr.geometry_type == "instrument" else "not reported"
        return {"method": method, "line": f"{method}: {text}.", "short": "—", "largest": None, "sort": ""}
    largest = [v for k, v in sizes.items() if k.endswith("_max") and v is not None]
    line = (f"{method}: shear rate changed by at most {fmt_percent(sizes.get('shear_rate_max'))} "
            f"(median {fmt_percent(sizes.get('shear_rate_median'))}), shear stress by at most "
            f"{fmt_percent(sizes.get('shear_stress_max'))} (median {fmt_percent(sizes.get('shear_stress_median'))}), "
            "relative to the apparent (Newtonian) values.")
    biggest = max(largest) if largest else None
    return {"method": method, "line": line, "short": fmt_percent(biggest), "largest": biggest,
            "sort": sort_key(biggest)}


def parameters_view(fit: Any, registry: Any) -> list[dict[str, Any]]:
    provided = registry.models.get(fit.model)
    specs = {p.name: p for p in provided.record.parameters} if provided else {}
    views = []
    for p in fit.parameters:
        spec = specs.get(p.name)
        determined = p.value is not None and math.isfinite(p.value)
        relative = (abs(p.stderr / p.value) if determined and p.stderr is not None and p.value
                    and math.isfinite(p.stderr) else None)
        views.append({
            "name": p.name,
            "value": fmt(p.value) if determined else "not determined",
            "stderr": fmt(p.stderr, 2) if p.stderr is not None else "not determined",
            "relative": fmt_percent(relative, 2) if relative is not None else "—",
            "unit": fmt_unit(p.unit),
            "estimate": fmt_estimate(p.value, p.stderr, p.unit),
            "determined": determined,
            "description": spec.description if spec else "",
            "bounds": _bounds_text(spec) if spec else "",
            "note": p.note,
            "interval": _interval_text(p),
        })
    return views


def _interval_text(p: Any) -> str:
    """The 95 % profile-likelihood interval of an estimate, when the fit computed one."""
    low, high = getattr(p, "ci_low", None), getattr(p, "ci_high", None)
    if low is None and high is None:
        return ""
    return f"{fmt(low) if low is not None else 'not reached'} to {fmt(high) if high is not None else 'not reached'}"


def _bounds_text(spec: Any) -> str:
    low = "−∞" if spec.min == -math.inf else fmt(spec.min)
    high = "∞" if spec.max == math.inf else fmt(spec.max)
    return f"{low} to {high}"


def correlation_view(fit: Any) -> dict[str, Any] | None:
    """The correlation matrix of a fit's estimates (pairs with standard errors)."""
    if not fit.correlations:
        return None
    names = [p.name for p in fit.parameters if any(p.name in pair[:2] for pair in fit.correlations)]
    lookup = {(a, b): r for a, b, r in fit.correlations}
    rows = []
    for a in names:
        cells = []
        for b in names:
            if a == b:
                cells.append({"text": "1", "strong": False})
                continue
            r = lookup.get((a, b), lookup.get((b, a)))
            cells.append({"text": "—" if r is None else f"{r:+.3f}".replace("-", "−"),
                          "strong": r is not None and abs(r) >= 0.95})
        rows.append({"name": a, "cells": cells})
    return {"names": names, "rows": rows}


def fit_view(fit: Any, registry: Any) -> dict[str, Any]:
    if fit.shear_rate_min is not None and fit.shear_rate_max is not None:
        span = f"{fmt(fit.shear_rate_min, 3)} to {fmt(fit.shear_rate_max, 3)} 1/s"
    else:
        span = "—"
    provided = registry.models.get(fit.model)
    return {
        "model": fit.model, "title": model_title(registry, fit.model), "success": fit.success,
        "aicc": fmt(fit.aicc), "bic": fmt(fit.bic), "rmse_log": fmt(fit.rmse_log, 3),
        "selected": fit.selected, "message": fit.message, "range": span, "n_points": fit.n_points,
        "equation": equation_html(provided.record.equation) if provided and provided.record.equation else "",
        "reference": provided.record.reference if provided else "",
        "supported": getattr(fit, "supported", True),
    }


def verdict_view(v: Any) -> dict[str, Any]:
    status = "uncertain" if v.straddles_limit else v.verdict
    unit = fmt_unit(v.unit)
    limits = []
    if v.min is not None:
        limits.append(f"≥ {fmt(v.min)}")
    if v.max is not None:
        limits.append(f"≤ {fmt(v.max)}")
    value = fmt_estimate(v.value, v.stderr, v.unit).replace(" (standard error not determined)", "")
    if v.value is not None and v.stderr is not None and math.isfinite(v.stderr):
        value = f"{fmt(v.value)} ± {fmt(2 * v.stderr, 2)} (k = 2)" + (f" {unit}" if unit else "")
    return {
        "rule": v.rule, "status": status, "verdict": v.verdict, "icon": VERDICT_ICON.get(status, "·"),
        "label": f"uncertain ({v.verdict})" if status == "uncertain" else v.verdict,
        "css": "na" if status == "n/a" else status,
        "value": value if v.value is not None else "—",
        "limits": " and ".join(limits) + (f" {unit}" if unit and limits else "")
                  + (f" {v.condition}" if getattr(v, "condition", "") else ""),
        "method": v.method, "message": v.message, "run_id": v.run_id,
    }


def verdict_counts(verdicts: Sequence[dict[str, Any]]) -> list[dict[str, Any]]:
    counts = Counter(v["status"] for v in verdicts)
    return [{"status": s, "css": "na" if s == "n/a" else s, "icon": VERDICT_ICON[s], "count": counts[s]}
            for s in ("pass", "fail", "uncertain", "n/a") if counts[s]]


# --------------------------------------------------------------------------- key results

def key_columns(config: Any) -> list[dict[str, Any]]:
    """Columns of key results in the runs tables: viscosity at each reporting rate of the study
    (``[fit] shear_rates`` and the specifications' rates), yield stress, zero-shear viscosity."""
    columns = [{"kind": "viscosity", "rate": rate, "title": f"η at {fmt(rate)} 1/s", "unit": "Pa·s"}
               for rate in sorted(config.fit.shear_rates)]
    columns.append({"kind": "yield_stress", "rate": None, "title": "Yield stress τ_y", "unit": "Pa"})
    columns.append({"kind": "zero_shear_viscosity", "rate": None, "title": "Zero-shear viscosity η₀", "unit": "Pa·s"})
    return columns


def key_cells(rr: Any, columns: Sequence[dict[str, Any]]) -> list[dict[str, Any]]:
    cells = []
    for column in columns:
        found = None
        for r in rr.results:
            if r.name != column["kind"]:
                continue
            if column["kind"] == "viscosity":
                if (r.at_shear_rate is None or not r.method.startswith("selected model")
                        or not math.isclose(r.at_shear_rate, column["rate"], rel_tol=1e-9)):
                    continue
            found = r
            break
        if found is None or found.value is None or not math.isfinite(found.value):
            cells.append({"text": "—", "sort": "", "extrapolated": False,
                          "title": found.note if found is not None else "not computed"})
            continue
        extrapolated = bool(found.extrapolated) and column["kind"] == "viscosity"
        text = fmt(found.value)
        if found.stderr is not None and math.isfinite(found.stderr):
            text += f" ± {fmt(found.stderr, 2)}"
        cells.append({"text": text, "sort": sort_key(found.value), "extrapolated": extrapolated,
                      "title": found.note or found.method})
    return cells


def run_row(rr: Any, names: Names, root: str, registry: Any, columns: Sequence[dict[str, Any]],
            verdicts: Sequence[dict[str, Any]]) -> dict[str, Any]:
    selected = rr.selected
    temperature = _temperature(rr)
    statuses = sorted({v["status"] for v in verdicts}, key=lambda s: VERDICT_RANK[s])
    return {
        "run_id": rr.run.run_id,
        "href": names.run_href(rr.run.run_id, root),
        "sample": rr.run.sample,
        "sample_href": names.sample_href(rr.run.sample, root),
        "date": run_date(rr) or "—",
        "temperature": temperature_text(rr), "temperature_sort": sort_key(temperature),
        "geometry": geometry_text(rr),
        "correction": correction_summary(rr),
        "model": model_title(registry, selected.model) if selected else None,
        "model_id": selected.model if selected else "",
        "rmse": fmt(selected.rmse_log, 2) if selected else "—",
        "keys": key_cells(rr, columns),
        "verdicts": verdicts,
        "verdict_filter": " ".join(s.replace("/", "") for s in statuses) or "none",
        "verdict_sort": str(VERDICT_RANK[statuses[0]]) if statuses else "9",
        "n_points": rr.run.n_points,
        "n_excluded": int(np.count_nonzero(rr.excluded)),
        "warnings": _count(rr.findings, "warning"),
        "errors": _count(rr.findings, "error"),
        "source_file": rr.run.source_file,
    }


# --------------------------------------------------------------------------- pages

def _verdicts_by_run(result: Any) -> dict[str, list[dict[str, Any]]]:
    found: dict[str, list[dict[str, Any]]] = {}
    for v in result.specs:
        found.setdefault(v.run_id, []).append(verdict_view(v))
    return found


def _failures(result: Any) -> list[dict[str, str]]:
    return [{"what": f"writer {f.writer}", "plugin": f.plugin, "message": f.message}
            for f in getattr(result, "writer_failures", [])] + \
           [{"what": f"analysis {f.writer}", "plugin": f.plugin, "message": f.message}
            for f in getattr(result, "analysis_failures", [])]


def overview_context(result: Any, names: Names) -> dict[str, Any]:
    registry = result.registry
    runs = result.runs
    columns = key_columns(result.config)
    verdicts = _verdicts_by_run(result)
    samples = sample_summaries(result, names, "", verdicts)
    all_verdicts = [v for vs in verdicts.values() for v in vs]
    overview = flow_curve_overlay(runs, by="sample")
    return {
        "root": "", "page": "overview",
        "description": result.config.description,
        "dates": study_dates(runs),
        "counts": {"files": len(result.files), "runs": len(runs),
                   "samples": len({rr.run.sample for rr in runs if rr.run.sample is not None}),
                   "unnamed": sum(1 for rr in runs if rr.run.sample is None), "rejected": len(result.rejected),
                   "excluded_points": int(sum(np.count_nonzero(rr.excluded) for rr in runs)),
                   "points": int(sum(rr.run.n_points for rr in runs)),
                   "with_errors": sum(1 for rr in runs if _count(rr.findings, "error")),
                   "with_warnings": sum(1 for rr in runs if _count(rr.findings, "warning"))},
        "verdict_counts": verdict_counts(all_verdicts),
        "has_specs": bool(result.config.specs),
        "key_columns": columns,
        "runs": [run_row(rr, names, "", registry, columns, verdicts.get(rr.run.run_id, [])) for rr in runs],
        "samples": samples,
        "rejected": [{"file": r.source_file, "line": r.line if r.line is not None else "—",
                      "reason": r.reason, "plugin": r.plugin or ""} for r in result.rejected],
        "failures": _failures(result),
        "overview": overview,
        "legend": overview is not None and overview["layout"]["showlegend"],
        "has_plots": overview is not None,
    }


def sample_summaries(result: Any, names: Names, root: str,
                     verdicts: dict[str, list[dict[str, Any]]]) -> list[dict[str, Any]]:
    groups: dict[str | None, list[Any]] = {}
    for rr in result.runs:
        groups.setdefault(rr.run.sample, []).append(rr)
    views = []
    for sample, runs in groups.items():
        temps = sorted({t for t in (_temperature(rr) for rr in runs) if t is not None})
        views.append({
            "sample": sample, "href": names.sample_href(sample, root), "n_runs": len(runs),
            "temperatures": ", ".join(f"{fmt(t)} °C" for t in temps) or "—",
            "verdict_counts": verdict_counts([v for rr in runs for v in verdicts.get(rr.run.run_id, [])]),
        })
    return views


def finding_groups(rr: Any, registry: Any) -> list[dict[str, Any]]:
    groups: dict[tuple[str, str], list[Any]] = {}
    for finding in rr.findings:
        groups.setdefault((finding.check, finding.severity), []).append(finding)
    ordered = sorted(groups.items(), key=lambda item: (SEVERITY_RANK.get(item[0][1], 9), item[0][0]))
    views = []
    n = len(rr.excluded)
    for (check, severity), items in ordered:
        provided = registry.checks.get(check) or registry.analyses.get(check)
        views.append({
            "check": check, "severity": severity,
            "title": provided.record.title if provided else "",
            "count": len(items),
            "open": severity in ("error", "warning") or len(items) <= 5,
            "items": [{"message": f.message,
                       "point": f.point_index if f.point_index is not None and 0 <= f.point_index < n else None,
                       "value": (fmt(f.value) + (f" {fmt_unit(f.unit)}" if fmt_unit(f.unit) else ""))
                       if f.value is not None else "",
                       "excluded": bool(f.point_index is not None and 0 <= f.point_index < n
                                        and rr.excluded[f.point_index])}
                      for f in sorted(items, key=lambda f: (-1 if f.point_index is None else f.point_index))],
        })
    return views


_SKIP_METADATA = {"sample", "temperature", "geometry"}


def metadata_rows(rr: Any) -> list[tuple[str, str]]:
    from gammadot.datamodel import KNOWN_METADATA
    from gammadot.units import DIMENSIONS

    run = rr.run
    rows = [
        ("Sample", run.sample if run.sample is not None else "—"),
        ("Temperature", temperature_text(rr)),
        ("Geometry", geometry_text(rr)),
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


def results_view(rr: Any) -> list[dict[str, Any]]:
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
        views.append({"name": r.name, "value": value, "unit": fmt_unit(r.unit), "method": r.method, "note": note,
                      "extrapolated": bool(r.extrapolated) and value != "n/a"})  # no mark on a missing value
    return views


_POINT_COLUMNS = (("shear_rate_apparent", "γ̇ apparent", "1/s"), ("shear_rate", "γ̇", "1/s"),
                  ("shear_stress_apparent", "τ apparent", "Pa"), ("shear_stress", "τ", "Pa"),
                  ("viscosity", "η", "Pa·s"), ("temperature", "T", "°C"), ("time", "t", "s"))


def points_view(rr: Any) -> dict[str, Any]:
    """The run's points, apparent and corrected, with the relative change the correction made."""
    columns = rr.run.columns
    n = rr.run.n_points
    corrected = {key: differs(columns.get(key), columns.get(f"{key}_apparent"))
                 for key in ("shear_rate", "shear_stress")}
    hidden = {f"{key}_apparent" for key, changed in corrected.items() if not changed}
    shown = [(key, label, unit) for key, label, unit in _POINT_COLUMNS
             if columns.get(key) is not None and key not in hidden]
    changes = []
    for true_key, apparent_key, label in (("shear_rate", "shear_rate_apparent", "γ̇ change"),
                                          ("shear_stress", "shear_stress_apparent", "τ change")):
        true, apparent = columns.get(true_key), columns.get(apparent_key)
        if true is not None and apparent is not None and corrected[true_key]:
            with np.errstate(divide="ignore", invalid="ignore"):
                changes.append((label, np.abs(true / apparent - 1.0)))
    data = [fmt_column(columns[key], 5) for key, _, _ in shown]
    change_data = [[f"{t} %" if t not in ("—", "∞") else "—" for t in fmt_column(100.0 * c, 2)] for _, c in changes]
    rows = []
    for i in range(n):
        rows.append({
            "index": i,
            "values": [column[i] for column in data],
            "changes": [column[i] for column in change_data],
            "excluded": bool(rr.excluded[i]),
            "flags": ", ".join(sorted(set(rr.flags[i]))) if i < len(rr.flags) else "",
        })
    return {"headers": [(label, unit) for _, label, unit in shown], "change_headers": [c[0] for c in changes],
            "rows": rows}


def run_context(rr: Any, result: Any, names: Names) -> dict[str, Any]:
    registry = result.registry
    figures, curve_notes = run_figures(rr, registry)
    selected = rr.selected
    rate, viscosity = rr.run.columns.get("shear_rate"), rr.run.columns.get("viscosity")
    n_unplottable = 0
    if rate is not None and viscosity is not None:
        with np.errstate(invalid="ignore"):
            ok = np.isfinite(rate) & np.isfinite(viscosity) & (rate > 0) & (viscosity > 0)
        n_unplottable = int(np.count_nonzero(~ok))
    verdicts = [verdict_view(v) for v in result.specs if v.run_id == rr.run.run_id]
    others = [{"fit": fit_view(f, registry), "parameters": parameters_view(f, registry)}
              for f in rr.fits if f.success and not f.selected]
    return {
        "root": "../", "page": "run",
        "run_id": rr.run.run_id,
        "sample": rr.run.sample,
        "sample_href": names.sample_href(rr.run.sample, "../"),
        "date": run_date(rr),
        "temperature": temperature_text(rr),
        "metadata": metadata_rows(rr),
        "correction": correction_summary(rr),
        "results": results_view(rr),
        "figures": figures,
        "residuals": residual_figure(rr, registry),
        "curve_notes": curve_notes,
        "n_unplottable": n_unplottable,
        "n_excluded": int(np.count_nonzero(rr.excluded)),
        "points": points_view(rr),
        "fits": [fit_view(f, registry) for f in rr.fits],
        "selected": fit_view(selected, registry) if selected else None,
        "parameters": parameters_view(selected, registry) if selected else [],
        "correlations": correlation_view(selected) if selected else None,
        "other_fits": others,
        "verdicts": verdicts,
        "verdict_counts": verdict_counts(verdicts),
        "finding_groups": finding_groups(rr, registry),
        "sections": run_sections(rr, registry),  # sections added by plugins (hook gammadot_run_sections)
        "has_plots": bool(figures),
    }


def sample_context(sample: str | None, runs: Sequence[Any], result: Any, names: Names) -> dict[str, Any]:
    registry = result.registry
    columns = key_columns(result.config)
    verdicts = _verdicts_by_run(result)
    overlay = flow_curve_overlay(runs, by="run")
    models = list(dict.fromkeys(rr.selected.model for rr in runs if rr.selected is not None))
    tables = []
    for model_id in models:
        provided = registry.models.get(model_id)
        if provided is None:
            continue
        parameter_names = [p.name for p in provided.record.parameters]
        units = {p.name: fmt_unit(p.unit) for p in provided.record.parameters}
        rows, values = [], {name: [] for name in parameter_names}
        for rr in runs:
            fit = next((f for f in rr.fits if f.model == model_id), None)
            if fit is None or not fit.success:
                continue
            cells = []
            for name in parameter_names:
                estimate = fit.estimate(name)
                value = estimate.value if estimate is not None else None
                cells.append(fmt_estimate(value, estimate.stderr if estimate else None, None)
                             .replace(" (standard error not determined)", ""))
                if value is not None and math.isfinite(value):
                    values[name].append(value)
            rows.append({"run_id": rr.run.run_id, "href": names.run_href(rr.run.run_id, "../"),
                         "temperature": temperature_text(rr), "selected": fit.selected, "cells": cells})
        spread = []
        for name in parameter_names:
            found = np.asarray(values[name], dtype=float)
            if len(found) >= 2:
                mean, sd = float(found.mean()), float(found.std(ddof=1))
                spread.append(f"{fmt(mean)} ± {fmt(sd, 2)} (n = {len(found)})")
            else:
                spread.append("—")
        tables.append({"model": model_id, "title": model_title(registry, model_id), "names": parameter_names,
                       "units": units, "rows": rows, "spread": spread})
    temps = {t for t in (_temperature(rr) for rr in runs) if t is not None}
    main_model = common_model(runs)
    param_figures = (parameter_temperature_figures(runs, main_model, registry)
                     if main_model is not None and len(temps) >= 2 else [])
    sample_verdicts = [v for rr in runs for v in verdicts.get(rr.run.run_id, [])]
    return {
        "root": "../", "page": "sample",
        "sample": sample,
        "runs": [run_row(rr, names, "../", registry, columns, verdicts.get(rr.run.run_id, [])) for rr in runs],
        "key_columns": columns,
        "has_specs": bool(result.config.specs),
        "verdict_counts": verdict_counts(sample_verdicts),
        "overlay": overlay,
        "parameter_tables": tables,
        "main_model": model_title(registry, main_model) if main_model else None,
        "n_temperatures": len(temps),
        "param_figures": param_figures,
        "has_plots": overlay is not None or bool(param_figures),
    }


# --------------------------------------------------------------------------- methods

def _quantity_text(value: Any, dimension: str) -> str:
    from gammadot.units import DIMENSIONS

    if isinstance(value, bool):
        return "yes" if value else "no"
    if value is None:
        return "not set"
    if isinstance(value, str):
        return value
    if dimension == "length":
        return f"{fmt(value * 1e3)} mm"
    if dimension == "angle":
        return f"{fmt(math.degrees(value))}°"
    label = DIMENSIONS[dimension].label if dimension in DIMENSIONS else ""
    return f"{fmt(value)} {label}".strip() if label != "1" else fmt(value)


def _settings_view(config: Any, check_id: str, declared: Sequence[Any]) -> dict[str, Any]:
    from gammadot.config import check_settings

    values = check_settings(config, check_id, declared)
    given = config.checks.get(check_id, {})
    return {
        "enabled": values["enabled"] is not False,
        "exclude": values["exclude"] is not False,
        "settings": [{"name": s.name, "value": _quantity_text(values.get(s.name), s.dimension),
                      "default": _quantity_text(s.default, s.dimension), "set": s.name in given,
                      "description": s.description} for s in declared],
    }


def methods_context(result: Any) -> dict[str, Any]:
    registry, config = result.registry, result.config
    used_types = Counter(rr.geometry_type for rr in result.runs if rr.geometry_type)
    corrections = Counter(rr.correction for rr in result.runs if rr.correction)
    geometries = []
    for gid, geometry in config.geometries.items():
        provided = registry.geometries.get(geometry.type)
        dims = {p.name: p.dimension for p in provided.record.parameters} if provided else {}
        geometries.append({
            "id": gid, "type": geometry.type,
            "title": provided.record.title if provided else geometry.type,
            "values": [(name, _quantity_text(value, dims.get(name, "text"))) for name, value in geometry.values.items()],
            "runs": sum(1 for rr in result.runs if rr.geometry_id == gid),
        })
    checks = []
    for check_id, provided in registry.checks.items():
        record = provided.record
        checks.append({"id": check_id, "title": record.title, "severity": record.severity,
                       "stage": "after fitting" if record.after_fit else "before fitting",
                       "reference": record.reference, "plugin": provided.plugin,
                       **_settings_view(config, check_id, record.settings)})
    analyses = []
    for analysis_id, provided in registry.analyses.items():
        record = provided.record
        analyses.append({"id": analysis_id, "title": record.title, "reference": record.reference,
                         "plugin": provided.plugin, **_settings_view(config, analysis_id, record.settings)})
    model_ids = config.fit.models or tuple(registry.models)
    models = []
    for model_id in model_ids:
        provided = registry.models.get(model_id)
        if provided is None:
            continue
        record = provided.record
        models.append({"id": model_id, "title": record.title,
                       "equation": equation_html(record.equation) if record.equation else "",
                       "reference": record.reference, "plugin": provided.plugin,
                       "target": record.target.replace("_", " "),
                       "parameters": [{"name": p.name, "unit": fmt_unit(p.unit) or "1", "bounds": _bounds_text(p),
                                       "description": p.description} for p in record.parameters],
                       "selected_runs": sum(1 for rr in result.runs if rr.selected and rr.selected.model == model_id)})
    specs = [{"name": r.name, "quantity": r.quantity.replace("_", " "),
              "shear_rate": fmt(r.shear_rate) + " 1/s" if r.shear_rate is not None else "—",
              "method": r.method if r.quantity in ("viscosity", "viscosity_ratio") else "—",
              "min": fmt(r.minimum) if r.minimum is not None else "—",
              "max": fmt(r.maximum) if r.maximum is not None else "—",
              "unit": fmt_unit(r.unit), "sample": r.sample or "all samples",
              "temperature": r.condition.removeprefix("at ") or "any"} for r in config.specs]
    plugins = [{"name": name, "origin": origin,
                "provides": "; ".join(f"{kind}: {', '.join(ids)}" for kind, ids in registry.provided_by(name).items())}
               for name, origin in sorted(registry.plugins.items())]
    libraries = [("Python", platform.python_version())]
    for name in LIBRARIES:
        try:
            libraries.append((name, metadata.version(name)))
        except metadata.PackageNotFoundError:
            continue
    inputs = [{"file": f.source_file, "sha256": f.sha256 or "unreadable",
               "runs": len(f.runs), "rejected": f.rejected is not None, "importer": f.importer or "—"}
              for f in result.files]
    limits = [(key, _quantity_text(value, "pressure" if key.startswith("stress") else "torque"))
              for key, value in config.limits.items()]
    return {
        "root": "", "page": "methods",
        "used_types": sorted(used_types), "corrections": sorted(corrections),
        "geometries": geometries, "checks": checks, "analyses": analyses, "models": models,
        "fit": {"space": config.fit.space, "weights": config.fit.weights, "loss": config.fit.loss,
                "loss_scale": fmt(config.fit.loss_scale) if config.fit.loss_scale is not None else "—",
                "shear_rates": ", ".join(f"{fmt(r)} 1/s" for r in config.fit.shear_rates) or "none set",
                "all_models": config.fit.models is None, "sweeps": config.fit.sweeps},
        "specs": specs, "plugins": plugins, "libraries": libraries, "inputs": inputs, "limits": limits,
        "density": _quantity_text(config.density, "density") if config.density is not None else None,
        "has_plots": False,
    }

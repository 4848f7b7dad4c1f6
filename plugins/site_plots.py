"""Figure specifications of the study site, as plain data for Plotly.js.

Figures are plain dicts (``{"data": [...], "layout": {...}}``) holding NumPy arrays; they are
serialised by :func:`gammadot.plugins.site_format.script_json` and drawn by the site's own
``site.js``. Building them as plain data (not through plotly's Python object layer) keeps the
writer fast. Point traces carry each point's index in ``customdata`` so that the page can link
a finding to its point and back. Texts from input files go through ``plot_text`` (Plotly reads
a few HTML tags in labels).

A figure may carry ``views``: alternative y data for the same traces (the overview's viscosity
and stress views); ``site.js`` switches between them.
"""

from __future__ import annotations

import math
from collections import Counter
from typing import Any, Sequence

import numpy as np

from gammadot.derived_results import model_viscosity

from .site_format import fmt_unit, plot_text

# Okabe & Ito's colour-blind-safe palette without its yellow (too weak on white); after seven
# colours the line style changes.
PALETTE = ("#0072B2", "#D55E00", "#009E73", "#CC79A7", "#E69F00", "#56B4E9", "#000000")
DASHES = ("solid", "dot", "dash", "longdash", "dashdot")
EXCLUDED_COLOUR = "#8C8C8C"
APPARENT_COLOUR = "#E69F00"
SELECTED_COLOUR = "#D55E00"
BAND_FILL = "rgba(213,94,0,0.18)"
FIT_COLOURS = ("#009E73", "#CC79A7", "#56B4E9", "#000000", "#0072B2")
FIT_DASHES = ("dash", "dot", "dashdot", "longdash")


def fit_styles(fits: Sequence[Any]) -> dict[str, tuple[str, str]]:
    """Colour and dash of each model's curve (the selected one thick and solid elsewhere), the
    same on every plot of a run; distinct for the first twenty models."""
    styles = {}
    for k, fit in enumerate(f for f in fits if not f.selected):
        styles[fit.model] = (FIT_COLOURS[k % len(FIT_COLOURS)], FIT_DASHES[(k // len(FIT_COLOURS)) % len(FIT_DASHES)])
    return styles
HIGHLIGHT_COLOUR = "#000000"
FONT_STACK = ('system-ui, -apple-system, "Segoe UI", Roboto, "Helvetica Neue", Arial, '
              '"Noto Sans", "Liberation Sans", sans-serif')
SHOWN_MODELS = 3  # curves drawn at first on a run page: the selected model and the next best two
CURVE_POINTS = 48  # per curve, over at most the run's range: smooth on log axes
COVERAGE = 2.0  # the band: ±2 standard errors (about 95 %), as the specifications use
LEGEND_MAX_RUNS = 40  # larger studies: no legend on the overlay (the table filter picks runs)
DENSE_POINTS = 2500  # more points than this on an overlay: runs drawn as lines (markers cost the browser)


# --------------------------------------------------------------------------- layout

def axis(title: str, kind: str = "log") -> dict[str, Any]:
    spec: dict[str, Any] = {"type": kind, "title": {"text": title}, "showline": True, "linecolor": "#5b6670",
                            "mirror": True, "ticks": "outside", "gridcolor": "#e4e7eb", "zeroline": False,
                            "automargin": True}
    if kind == "log":
        spec["exponentformat"] = "power"
    return spec


def layout(x_title: str, y_title: str, *, legend_below: bool = False, y_kind: str = "log",
           x_kind: str = "log", showlegend: bool = True) -> dict[str, Any]:
    # "grouped" keeps the group titles (samples) and the order of the traces; Plotly would
    # otherwise reverse the legend of a figure with filled areas (the band)
    legend: dict[str, Any] = {"groupclick": "toggleitem", "bgcolor": "rgba(255,255,255,0.85)", "traceorder": "grouped"}
    if legend_below:
        legend.update({"orientation": "h", "x": 0, "xanchor": "left", "y": -0.22, "yanchor": "top"})
    return {
        "xaxis": axis(x_title, x_kind), "yaxis": axis(y_title, y_kind),
        "font": {"family": FONT_STACK, "size": 13, "color": "#1d2329"},
        "paper_bgcolor": "#ffffff", "plot_bgcolor": "#ffffff",
        "margin": {"l": 70, "r": 20, "t": 30, "b": 20},
        "hovermode": "closest", "showlegend": showlegend,
        "legend": legend,
    }


def positive(values: np.ndarray | None, n: int) -> np.ndarray:
    """Values for a log axis: NaN (drawn as a gap, written as null) where not finite and positive."""
    if values is None:
        return np.full(n, np.nan)
    values = np.asarray(values, dtype=float)
    with np.errstate(invalid="ignore"):
        return np.where(np.isfinite(values) & (values > 0), values, np.nan)


def flag_notes(rr: Any, index: np.ndarray) -> list[str] | None:
    """Per point: " · excluded from fits" or " · not fitted" (a sweep ``[fit] sweeps`` leaves
    out) and the flags; ``None`` when no point has a note."""
    in_fit = rr.in_fit
    if in_fit.all() and not any(rr.flags):
        return None
    notes = []
    any_note = False
    for i in index.tolist():
        flags = sorted(set(rr.flags[i])) if i < len(rr.flags) else []
        state = " · excluded from fits" if rr.excluded[i] else (" · not fitted" if not in_fit[i] else "")
        note = state + (f" · flagged by {', '.join(flags)}" if flags else "")
        any_note = any_note or bool(note)
        notes.append(plot_text(note))
    return notes if any_note else None


def _point_hover(y_symbol: str, y_unit: str, with_text: bool, extra: str = "") -> str:
    return (f"{extra}γ̇ = %{{x:.4g}} 1/s<br>{y_symbol} = %{{y:.4g}} {y_unit}<br>point %{{customdata}}"
            + ("%{text}" if with_text else "") + "<extra>%{fullData.name}</extra>")


def highlight_trace() -> dict[str, Any]:
    """An empty trace the page fills with the point a reader picked (finding ↔ point)."""
    return {"type": "scatter", "mode": "markers", "name": "Picked point", "x": [], "y": [], "showlegend": False,
            "hoverinfo": "skip",
            "marker": {"size": 18, "symbol": "star", "color": "rgba(0,0,0,0)",
                       "line": {"width": 2.5, "color": HIGHLIGHT_COLOUR}},
            "meta": {"kind": "highlight"}}


# --------------------------------------------------------------------------- overlays

def sample_colours(runs: Sequence[Any]) -> dict[str | None, int]:
    order: dict[str | None, int] = {}
    for rr in runs:
        order.setdefault(rr.run.sample, len(order))
    return order


def flow_curve_overlay(runs: Sequence[Any], *, by: str = "sample") -> dict[str, Any] | None:
    """Flow curves of several runs, one trace per run, with a viscosity and a stress view.

    ``by="sample"`` colours by sample (overview), ``by="run"`` gives each run its own colour
    (a sample's page). A run's trace holds the points its fits used; the points left out (by a
    check, or on a sweep ``[fit] sweeps`` does not fit) are hollow grey markers on a companion
    trace of the run, off its line: a line through noisy points left out of the fits would hide
    the curve the fits used. In a large study (more than ``DENSE_POINTS`` points) the runs are
    drawn as lines only, which a browser draws many times faster than thousands of markers.
    """
    groups = sample_colours(runs)
    traces: list[dict[str, Any]] = []
    stress_view: list[np.ndarray] = []
    legend = len(runs) <= LEGEND_MAX_RUNS
    dense = sum(rr.run.n_points for rr in runs) > DENSE_POINTS
    for k, rr in enumerate(runs):
        columns = rr.run.columns
        rate, viscosity = columns.get("shear_rate"), columns.get("viscosity")
        if rate is None or viscosity is None:
            continue
        n = len(rate)
        excluded = ~rr.in_fit  # hollow grey: excluded by a check, or on a sweep the fits leave out
        number = groups[rr.run.sample] if by == "sample" else k
        colour = PALETTE[number % len(PALETTE)]
        dash = DASHES[(number // len(PALETTE)) % len(DASHES)]
        sample = plot_text(rr.run.sample if rr.run.sample is not None else "(no sample name)")
        notes = flag_notes(rr, np.arange(n))
        x, y, stress = positive(rate, n), positive(viscosity, n), positive(columns.get("shear_stress"), n)
        hover = _point_hover("%{meta.symbol}", "%{meta.unit}", notes is not None, "%{fullData.legendgroup}<br>")
        used = np.flatnonzero(~excluded)
        trace = {
            "type": "scatter", "mode": "lines" if dense else "lines+markers", "name": plot_text(rr.run.run_id),
            "legendgroup": sample, "showlegend": legend, "connectgaps": True,
            "x": x[used], "y": y[used], "line": {"color": colour, "width": 1.2, "dash": dash},
            "marker": {"size": 7, "color": colour, "symbol": "circle", "line": {"width": 1.5, "color": colour}},
            "customdata": used, "hovertemplate": hover,
            "meta": {"kind": "points", "run_id": rr.run.run_id, "symbol": "η", "unit": "Pa·s",
                     "n_excluded": int(excluded.sum())},
        }
        if by == "sample":
            trace["legendgrouptitle"] = {"text": sample}
        if notes is not None:
            trace["text"] = [notes[i] for i in used.tolist()]
        traces.append(trace)
        stress_view.append(stress[used])
        if excluded.any():
            hollow = np.flatnonzero(excluded)
            companion = {
                "type": "scatter", "mode": "markers", "name": f"{plot_text(rr.run.run_id)}: excluded points",
                "legendgroup": sample, "showlegend": False, "x": x[hollow], "y": y[hollow],
                "marker": {"size": 7, "color": EXCLUDED_COLOUR, "symbol": "circle-open",
                           "line": {"width": 1.5, "color": EXCLUDED_COLOUR}},
                "customdata": hollow, "hovertemplate": hover,
                "meta": {"kind": "points", "style": "excluded", "run_id": rr.run.run_id, "symbol": "η",
                         "unit": "Pa·s"},
            }
            if notes is not None:
                companion["text"] = [notes[i] for i in hollow.tolist()]
            traces.append(companion)
            stress_view.append(stress[hollow])
    if not traces:
        return None
    figure = {"data": traces, "layout": layout("Shear rate γ̇ (1/s)", "Viscosity η (Pa·s)", showlegend=legend)}
    figure["views"] = [
        {"id": "viscosity", "label": "Viscosity η", "axis": "Viscosity η (Pa·s)", "symbol": "η", "unit": "Pa·s"},
        {"id": "stress", "label": "Shear stress τ", "axis": "Shear stress τ (Pa)", "symbol": "τ", "unit": "Pa",
         "y": stress_view},
    ]
    figure["dense"] = dense
    return figure


# --------------------------------------------------------------------------- one run

def differs(a: np.ndarray | None, b: np.ndarray | None) -> bool:
    if a is None or b is None or a.shape != b.shape:
        return False
    return not np.allclose(a, b, rtol=1e-9, atol=0.0, equal_nan=True)


def model_title(registry: Any, model_id: str) -> str:
    provided = registry.models.get(model_id)
    return provided.record.title if provided is not None else model_id


def fit_curves(rr: Any, registry: Any) -> tuple[list[dict[str, Any]], list[str]]:
    """Each successful fit on a log-spaced grid over its own shear-rate range.

    Returns curves (model, title, selected, rate, viscosity, stress; for the selected model
    also ``lower``/``upper``: the ±2 standard-error band of the viscosity) and notes on what
    could not be drawn. Nothing is drawn outside the range used for the fit.
    """
    curves, notes = [], []
    grids: dict[tuple[float, float], np.ndarray] = {}  # one grid per range: fits share it (and its JSON)
    for fit in rr.fits:
        if not fit.success or fit.shear_rate_min is None or fit.shear_rate_max is None:
            continue
        provided = registry.models.get(fit.model)
        title = model_title(registry, fit.model)
        # every parameter's least-squares value: a curve is determined inside the fitted range
        # even where one parameter (η∞ without its plateau) is not identified
        values = dict(getattr(fit, "best_fit", None) or {p.name: p.value for p in fit.parameters})
        if provided is None or any(v is None or not math.isfinite(v) for v in values.values()):
            notes.append(f"{title}: curve not drawn (parameters not determined)")
            continue
        low, high = fit.shear_rate_min, fit.shear_rate_max
        if not (math.isfinite(low) and math.isfinite(high) and 0 < low <= high):
            continue
        grid = grids.get((low, high))
        if grid is None:
            grid = grids[(low, high)] = np.geomspace(low, high, CURVE_POINTS) if high > low else np.array([low])
        model = provided.record
        try:
            with np.errstate(all="ignore"):
                if fit.selected and fit.best_fit:
                    viscosity, stderr = model_viscosity(fit, model, grid)
                else:
                    target = np.asarray(model.function(grid, **values), dtype=float)
                    if target.shape != grid.shape:
                        raise ValueError("the model returned an array of the wrong shape")
                    viscosity = target / grid if model.target == "shear_stress" else target
                    stderr = None
        except Exception as exc:  # a model plugin's failure must not stop the site
            notes.append(f"{title}: curve not drawn ({type(exc).__name__}: {exc})")
            continue
        curve = {"model": fit.model, "title": title, "selected": fit.selected, "rate": grid,
                 "viscosity": viscosity, "stress": viscosity * grid}
        if stderr is not None:
            if np.isfinite(stderr).any():
                with np.errstate(all="ignore"):
                    spread = np.exp(COVERAGE * stderr / viscosity)
                curve["lower"], curve["upper"] = viscosity / spread, viscosity * spread
            else:
                notes.append(f"{title}: no confidence band (the covariance does not determine the "
                             "uncertainty of the curve)")
        curves.append(curve)
    return curves, notes


def shown_models(fits: Sequence[Any], count: int = SHOWN_MODELS) -> set[str]:
    """The models whose curves a run page shows at first: the selected one and the next best
    by AICc; the others are a click on the legend away."""
    ranked = sorted((f for f in fits if f.success and f.aicc is not None and math.isfinite(f.aicc)),
                    key=lambda f: (not f.selected, f.aicc))
    return {f.model for f in ranked[:count]}


def _points_traces(rr: Any, x: np.ndarray, y: np.ndarray, symbol: str, unit: str) -> list[dict[str, Any]]:
    excluded = ~rr.in_fit
    traces = []
    left_out = ("Measured, excluded from fits" if np.array_equal(excluded, np.asarray(rr.excluded, dtype=bool))
                else "Measured, not used in fits")
    for name, mask, style in (("Measured, used in fits", ~excluded, "included"), (left_out, excluded, "excluded")):
        index = np.flatnonzero(mask)
        if not len(index):
            continue
        colour = PALETTE[0] if style == "included" else EXCLUDED_COLOUR
        notes = flag_notes(rr, index)
        trace = {
            "type": "scatter", "mode": "markers", "name": name, "x": x[index], "y": y[index],
            "marker": {"size": 8, "color": colour, "symbol": "circle" if style == "included" else "circle-open",
                       "line": {"width": 1.5, "color": colour}},
            "customdata": index, "hovertemplate": _point_hover(symbol, unit, notes is not None),
            "meta": {"kind": "points", "style": style},
        }
        if notes is not None:
            trace["text"] = notes
        traces.append(trace)
    return traces


def run_figures(rr: Any, registry: Any) -> tuple[list[dict[str, Any]], list[str]]:
    """Viscosity and stress against shear rate for one run: data (corrected and, where the
    geometry changed them, apparent), every fitted curve, the selected model's band."""
    columns = rr.run.columns
    rate = columns.get("shear_rate")
    if rate is None:
        return [], []
    n = len(rate)
    curves, notes = fit_curves(rr, registry)
    rate_app, stress_app = columns.get("shear_rate_apparent"), columns.get("shear_stress_apparent")
    show_apparent = differs(rate, rate_app) or differs(columns.get("shear_stress"), stress_app)
    x = positive(rate, n)
    figures = []
    for key, symbol, unit, title in (("viscosity", "η", "Pa·s", "Viscosity η (Pa·s)"),
                                     ("shear_stress", "τ", "Pa", "Shear stress τ (Pa)")):
        values = columns.get(key)
        if values is None:
            continue
        traces: list[dict[str, Any]] = []
        styles = fit_styles(rr.fits)
        shown = shown_models(rr.fits)
        for curve in curves:
            selected = curve["selected"]
            curve_y = curve["viscosity"] if key == "viscosity" else curve["stress"]
            scale = 1.0 if key == "viscosity" else curve["rate"]
            if selected and "lower" in curve:
                band = "±2 standard errors of the selected model"
                traces.append({"type": "scatter", "mode": "lines", "name": band, "x": curve["rate"],
                               "y": positive(curve["lower"] * scale, len(curve["rate"])),
                               "line": {"width": 0, "color": SELECTED_COLOUR}, "showlegend": False,
                               "hoverinfo": "skip", "meta": {"kind": "band", "edge": "lower"}})
                traces.append({"type": "scatter", "mode": "lines", "name": band, "x": curve["rate"],
                               "y": positive(curve["upper"] * scale, len(curve["rate"])),
                               "fill": "tonexty", "fillcolor": BAND_FILL,
                               "line": {"width": 0, "color": SELECTED_COLOUR},
                               "hoverinfo": "skip", "meta": {"kind": "band", "edge": "upper"}})
            colour, dash = (SELECTED_COLOUR, "solid") if selected else styles[curve["model"]]
            traces.append({
                "type": "scatter", "mode": "lines",
                "name": plot_text(curve["title"] + (" (selected)" if selected else "")),
                "x": curve["rate"], "y": positive(curve_y, len(curve["rate"])),
                "line": {"color": colour, "width": 3 if selected else 1.5, "dash": dash},
                "hovertemplate": f"γ̇ = %{{x:.4g}} 1/s<br>{symbol} = %{{y:.4g}} {unit}<extra>%{{fullData.name}}</extra>",
                "meta": {"kind": "fit", "model": curve["model"], "selected": selected},
            })
            if curve["model"] not in shown:
                traces[-1]["visible"] = "legendonly"
        if show_apparent and rate_app is not None and stress_app is not None:
            with np.errstate(divide="ignore", invalid="ignore"):
                apparent = stress_app / rate_app if key == "viscosity" else stress_app
            traces.append({
                "type": "scatter", "mode": "markers", "name": "Apparent (before correction)",
                "x": positive(rate_app, n), "y": positive(apparent, n),
                "marker": {"size": 7, "color": APPARENT_COLOUR, "symbol": "diamond-open",
                           "line": {"width": 1.5, "color": APPARENT_COLOUR}},
                "customdata": np.arange(n), "hovertemplate": _point_hover(symbol, unit, False),
                "meta": {"kind": "apparent"},
            })
        traces += _points_traces(rr, x, positive(values, n), symbol, unit)
        traces.append(highlight_trace())
        # the legend lists the measured points first, the curves (drawn underneath) after
        for trace in traces:
            trace["legendrank"] = 100 if trace["meta"]["kind"] in ("points", "apparent") else 1000
        figures.append({"id": f"plot-{key.replace('_', '-')}", "title": title,
                        "figure": {"data": traces, "layout": layout("Shear rate γ̇ (1/s)", title)}})
    return figures, notes


def residual_figure(rr: Any, registry: Any) -> dict[str, Any] | None:
    """Relative residuals (measured − model)/model in % of every point, for the selected model
    (shown) and the other fitted models (hidden until picked in the legend)."""
    columns = rr.run.columns
    rate, viscosity = columns.get("shear_rate"), columns.get("viscosity")
    if rate is None or viscosity is None or rr.selected is None:
        return None
    n = len(rate)
    x = positive(rate, n)
    excluded = ~rr.in_fit
    traces: list[dict[str, Any]] = []
    styles = fit_styles(rr.fits)
    ordered = sorted((f for f in rr.fits if f.success and f.best_fit), key=lambda f: not f.selected)
    for fit in ordered:
        provided = registry.models.get(fit.model)
        if provided is None:
            continue
        model = provided.record
        try:
            with np.errstate(all="ignore"):
                target = np.asarray(model.function(np.where(np.isfinite(x), x, 1.0), **fit.best_fit), dtype=float)
                predicted = target / x if model.target == "shear_stress" else target
                residual = 100.0 * (viscosity / predicted - 1.0)
        except Exception:  # noqa: BLE001 - a model plugin's failure leaves its residuals out
            continue
        if residual.shape != x.shape:
            continue
        title = model_title(registry, fit.model)
        colour = SELECTED_COLOUR if fit.selected else styles[fit.model][0]
        for style, mask in (("included", ~excluded), ("excluded", excluded)):
            index = np.flatnonzero(mask)
            if not len(index):
                continue
            notes = flag_notes(rr, index)
            name = plot_text(title + (" (selected)" if fit.selected else ""))
            trace = {
                "type": "scatter", "mode": "markers", "x": x[index], "y": residual[index],
                "name": name if style == "included" else f"{name}: excluded points",
                "legendgroup": fit.model, "showlegend": style == "included",
                "marker": {"size": 8 if fit.selected else 6,
                           "color": colour if style == "included" else EXCLUDED_COLOUR,
                           "symbol": "circle" if style == "included" else "circle-open",
                           "line": {"width": 1.5, "color": colour if style == "included" else EXCLUDED_COLOUR}},
                "customdata": index,
                "hovertemplate": _point_hover("residual", "%", notes is not None),
                "meta": {"kind": "points" if fit.selected else "residual", "style": style, "model": fit.model},
            }
            if notes is not None:
                trace["text"] = notes
            if not fit.selected:
                trace["visible"] = "legendonly"
            traces.append(trace)
    if not traces:
        return None
    traces.append(highlight_trace())
    spec = layout("Shear rate γ̇ (1/s)", "Residual (measured − model)/model (%)", y_kind="linear")
    spec["yaxis"]["zeroline"] = True
    spec["yaxis"]["zerolinecolor"] = "#5b6670"
    figure = {"data": traces, "layout": spec, "outside": 0}
    # the scale follows the points used in the fit: an excluded point far off (a plug in the gap,
    # a point at rest) would flatten them into a line; a double click on the plot shows everything
    selected = [t for t in traces if t["meta"]["kind"] == "points"]
    used = np.concatenate([t["y"] for t in selected if t["meta"]["style"] == "included"] or [np.empty(0)])
    used = used[np.isfinite(used)]
    if len(used):
        low, high = float(used.min()), float(used.max())
        pad = max(0.15 * (high - low), 0.05 * max(abs(low), abs(high)), 0.1)
        low, high = min(low - pad, -pad), max(high + pad, pad)
        others = np.concatenate([t["y"] for t in selected if t["meta"]["style"] == "excluded"] or [np.empty(0)])
        others = others[np.isfinite(others)]
        outside = int(np.count_nonzero((others < low) | (others > high)))
        if outside:
            spec["yaxis"]["range"] = [low, high]
            spec["yaxis"]["autorange"] = False
            figure["outside"] = outside
    return figure


# --------------------------------------------------------------------------- a sample's runs

def common_model(runs: Sequence[Any]) -> str | None:
    """The model selected most often among the runs (first seen on a tie)."""
    counts = Counter(rr.selected.model for rr in runs if rr.selected is not None)
    return max(counts, key=lambda m: counts[m]) if counts else None


def parameter_temperature_figures(runs: Sequence[Any], model_id: str, registry: Any) -> list[dict[str, Any]]:
    """One small figure per parameter of ``model_id``: value (±1 standard error) against the
    run temperature, for the runs where that model was fitted and the temperature is known."""
    provided = registry.models.get(model_id)
    if provided is None:
        return []
    figures = []
    for spec in provided.record.parameters:
        temps, values, errors, labels = [], [], [], []
        for rr in runs:
            temperature = rr.run.temperature
            fit = next((f for f in rr.fits if f.model == model_id and f.success), None)
            estimate = fit.estimate(spec.name) if fit is not None else None
            if temperature is None or not math.isfinite(temperature) or estimate is None or estimate.value is None:
                continue
            temps.append(temperature)
            values.append(estimate.value)
            errors.append(estimate.stderr if estimate.stderr is not None else math.nan)
            labels.append(plot_text(rr.run.run_id))
        if len(set(temps)) < 2:
            continue
        values_array = np.asarray(values, dtype=float)
        log = spec.log_scale or (spec.min == 0 and bool(np.all(values_array > 0))
                                 and values_array.max() / values_array.min() > 20)
        unit = fmt_unit(spec.unit)
        y_title = f"{spec.name} ({unit})" if unit else spec.name
        figures.append({
            "id": f"plot-param-{spec.name}", "title": spec.name, "unit": unit,
            "figure": {"data": [{
                "type": "scatter", "mode": "markers", "name": plot_text(spec.name),
                "x": np.asarray(temps, dtype=float), "y": values_array,
                "error_y": {"type": "data", "array": np.asarray(errors, dtype=float), "visible": True,
                            "color": PALETTE[0]},
                "marker": {"size": 9, "color": PALETTE[0]}, "text": labels,
                "hovertemplate": f"%{{text}}<br>T = %{{x:.3g}} °C<br>{plot_text(spec.name)} = %{{y:.4g}} "
                                 f"{plot_text(unit)}<extra></extra>",
                "meta": {"kind": "parameter", "parameter": spec.name},
            }], "layout": layout("Temperature (°C)", y_title, x_kind="linear", y_kind="log" if log else "linear",
                                 showlegend=False)},
        })
    return figures

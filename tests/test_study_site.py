"""The static study site: pages exist, file text is escaped, nothing points off the folder,
plot data are valid JSON with every point, the confidence band and residuals follow from the
fit, downloads match the tables, and the site is replaced atomically and deterministically.

The study is invented (tests/site_fixtures.py). Independent checks name their source: the
delta method (JCGM 100:2008, GUM §5.1.2) with the power law's derivatives worked out by hand;
the API RP 13D field formulas for a dial viscometer (PV = θ600 − θ300 in cP,
YP = θ300 − PV in lbf/100 ft²).
"""

from __future__ import annotations

import csv
import hashlib
import io
import json
import math
import re
from dataclasses import replace
from html.parser import HTMLParser
from pathlib import Path
from urllib.parse import unquote, urlsplit

import numpy as np
import pyarrow.parquet as pq
import pytest
from hypothesis import given, settings, strategies as st

from gammadot.hookspecs import hookimpl
from gammadot.pipeline import StudyResult, process_study
from gammadot.plugin_manager import build_plugin_manager
from gammadot.plugins import site_pages, study_site
from gammadot.records import Model, ModelParameter
from gammadot.registry import build_registry
from gammadot.specs import SpecVerdict

from site_fixtures import (DIAL, EVIL, FORMULA_NOTE, GEL, K_A, MUD, N_A, RATES_A, build_site, by_sample)


@pytest.fixture(scope="module")
def built(tmp_path_factory: pytest.TempPathFactory) -> tuple[StudyResult, Path]:
    return build_site(tmp_path_factory.mktemp("site"))


class _Page(HTMLParser):
    """Collects link targets, ids, script elements and the text of JSON script blocks."""

    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.urls: list[tuple[str, str, str]] = []
        self.ids: set[str] = set()
        self.scripts: list[dict[str, str | None]] = []
        self.json_blocks: dict[str, str] = {}
        self._json_id: str | None = None

    def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        found = dict(attrs)
        if found.get("id"):
            self.ids.add(found["id"])
        for name in ("src", "href", "action", "data", "poster", "srcset", "formaction"):
            if found.get(name) is not None:
                self.urls.append((tag, name, found[name]))
        if tag == "script":
            self.scripts.append(found)
            if found.get("type") == "application/json":
                self._json_id = found.get("data-plot")
                self.json_blocks[self._json_id] = ""

    def handle_endtag(self, tag: str) -> None:
        if tag == "script":
            self._json_id = None

    def handle_data(self, data: str) -> None:
        if self._json_id is not None:
            self.json_blocks[self._json_id] += data


def _parse(path: Path) -> _Page:
    page = _Page()
    page.feed(path.read_text(encoding="utf-8"))
    page.close()
    return page


def _pages(out: Path) -> list[Path]:
    return sorted((out / "site").rglob("*.html"))


def _run_page(out: Path, run_id: str) -> Path:
    return out / "site" / "runs" / f"{run_id}.html"


def _figure(path: Path, plot_id: str) -> dict:
    return json.loads(_parse(path).json_blocks[plot_id])


def _sample_page(out: Path, sample: str) -> Path:
    index = (out / "site" / "index.html").read_text(encoding="utf-8")
    from html import escape

    match = re.search(r'<a href="(samples/[^"]+\.html)">' + re.escape(escape(sample, quote=False)) + "</a>", index)
    assert match, sample
    return out / "site" / match.group(1)


# --------------------------------------------------------------------------- structure


def test_every_page_and_asset_exists(built) -> None:
    result, out = built
    site = out / "site"
    assert len(result.runs) == 4
    for rr in result.runs:
        assert _run_page(out, rr.run.run_id).is_file()
    names = sorted(p.relative_to(site).as_posix() for p in _pages(out))
    assert names == ["downloads.html", "index.html", "methods.html",
                     *sorted(f"runs/{rr.run.run_id}.html" for rr in result.runs),
                     "samples/gel-b-co.html", "samples/mud-1.html", "samples/script-alert-1-script.html"]
    import plotly

    installed = Path(plotly.__file__).parent / "package_data" / "plotly.min.js"
    assert (site / "assets" / "plotly.min.js").read_bytes() == installed.read_bytes()
    assert len(list((site / "assets").iterdir())) == 4  # plotly once, one stylesheet, one script, an icon


def test_text_from_files_is_escaped_everywhere(built) -> None:
    result, out = built
    evil_run = by_sample(result, EVIL)
    index = (out / "site" / "index.html").read_text(encoding="utf-8")
    for text in (index, _run_page(out, evil_run.run.run_id).read_text(encoding="utf-8"),
                 _sample_page(out, EVIL).read_text(encoding="utf-8")):
        assert "&lt;script&gt;alert(1)&lt;/script&gt;" in text
    assert "Gel B &amp; co" in index
    assert "Gel screening &lt;b&gt;2024&lt;/b&gt;" in index
    assert "Invented data &amp; a &lt;i&gt;tag&lt;/i&gt;." in index
    for page in _pages(out):
        text = page.read_text(encoding="utf-8")
        assert EVIL not in text, page
        assert "<b>2024" not in text and "<i>tag" not in text, page
        # the only scripts: our two files, and inert JSON blocks without markup characters
        for script in _parse(page).scripts:
            assert script.get("type") == "application/json" or script.get("src", "").endswith(
                ("assets/plotly.min.js", "assets/site.js")), (page, script)
        for block in re.findall(r'<script type="application/json"[^>]*>(.*?)</script>', text, re.S):
            assert not set(block) & set("<>&"), page
            json.loads(block)
    # inside the plot data the name is escaped for Plotly's labels (which read a few tags)
    figure = _figure(out / "site" / "index.html", "plot-overview")
    groups = {t["legendgroup"] for t in figure["data"]}
    assert "&lt;script&gt;alert(1)&lt;/script&gt;" in groups and "Gel B &amp; co" in groups


def test_no_page_points_to_another_host_and_every_link_resolves(built) -> None:
    _, out = built
    site = (out / "site").resolve()
    pages = _pages(out)
    assert len(pages) == 10
    for page in pages:
        parsed = _parse(page)
        for tag, attr, url in parsed.urls:
            parts = urlsplit(url)
            assert not parts.scheme and not parts.netloc, (page.name, tag, attr, url)
            assert not url.startswith("/") and "//" not in url, (page.name, url)
            target = (page.parent / unquote(parts.path)).resolve() if parts.path else page.resolve()
            assert target.is_file(), (page.name, url)
            assert site in target.parents, (page.name, url)
            if parts.fragment:
                ids = parsed.ids if not parts.path else _parse(target).ids
                assert parts.fragment in ids, (page.name, url)
    css = (out / "site" / "assets" / "style.css").read_text(encoding="utf-8")
    assert not re.search(r"https?:|@import|url\(", css)
    js = (out / "site" / "assets" / "site.js").read_text(encoding="utf-8")
    assert not re.search(r"https?:|fetch\(|XMLHttpRequest|import\(|\.src\s*=", js)


def test_plotly_only_where_there_are_plots(built) -> None:
    result, out = built
    index_srcs = [s.get("src") for s in _parse(out / "site" / "index.html").scripts if s.get("src")]
    assert index_srcs == ["assets/plotly.min.js", "assets/site.js"]
    run_srcs = [s.get("src") for s in _parse(_run_page(out, result.runs[0].run.run_id)).scripts if s.get("src")]
    assert run_srcs == ["../assets/plotly.min.js", "../assets/site.js"]
    for name in ("methods.html", "downloads.html"):
        assert [s.get("src") for s in _parse(out / "site" / name).scripts if s.get("src")] == ["assets/site.js"]


# --------------------------------------------------------------------------- overview


def test_overview_plot_one_trace_per_run_with_every_point(built) -> None:
    """Each run: one line through the points its fits used, and (when some were left out) a
    companion of hollow grey markers for the others, off the line; together every point once,
    at its SI values, in both the viscosity and the stress view."""
    result, out = built
    figure = _figure(out / "site" / "index.html", "plot-overview")
    assert figure["layout"]["xaxis"]["type"] == "log" and figure["layout"]["yaxis"]["type"] == "log"
    lines = [t for t in figure["data"] if t["meta"].get("style") != "excluded"]
    assert [t["meta"]["run_id"] for t in lines] == [rr.run.run_id for rr in result.runs]
    stress_view = next(v for v in figure["views"] if v["id"] == "stress")
    assert len(stress_view["y"]) == len(figure["data"])
    for rr in result.runs:
        n = rr.run.n_points
        mine = [(t, s) for t, s in zip(figure["data"], stress_view["y"]) if t["meta"]["run_id"] == rr.run.run_id]
        line, *companion = mine
        assert line[0]["marker"]["symbol"] == "circle" and "lines" in line[0]["mode"]
        assert line[0]["customdata"] == [int(i) for i in np.flatnonzero(~rr.excluded)]
        if rr.excluded.any():
            (hollow, _), = companion
            assert hollow["mode"] == "markers" and hollow["marker"]["symbol"] == "circle-open"
            assert hollow["customdata"] == [int(i) for i in np.flatnonzero(rr.excluded)]
        else:
            assert companion == []
        shown = sorted((i, t["x"][k], t["y"][k], s[k]) for t, s in mine for k, i in enumerate(t["customdata"]))
        assert [i for i, *_ in shown] == list(range(n))
        for i, x, y, tau in shown:
            rate, eta, stress = (rr.run.columns[k][i] for k in ("shear_rate", "viscosity", "shear_stress"))
            for drawn, value in ((x, rate), (y, eta), (tau, stress)):
                if math.isfinite(value) and value > 0:
                    assert drawn == pytest.approx(value, rel=1e-5)
                else:
                    assert drawn is None  # no log of 0: left out, not invented
    fluid_a = by_sample(result, EVIL)
    trace_a = next(t for t in figure["data"] if t["meta"]["run_id"] == fluid_a.run.run_id)
    assert trace_a["x"] == pytest.approx(list(RATES_A), rel=1e-5)
    assert trace_a["y"][0] == pytest.approx(K_A * RATES_A[0] ** (N_A - 1), rel=1e-2)  # Pa·s, not mPa·s
    gel = by_sample(result, GEL, 25.0)
    assert bool(gel.excluded[0]) and int(gel.excluded.sum()) == 1
    hollow_gel = next(t for t in figure["data"] if t["meta"]["run_id"] == gel.run.run_id
                      and t["meta"].get("style") == "excluded")
    assert hollow_gel["customdata"] == [0] and hollow_gel["x"][0] is None
    assert "excluded from fits" in hollow_gel["text"][0]


def test_overview_table_key_results_and_verdicts(built) -> None:
    result, out = built
    text = (out / "site" / "index.html").read_text(encoding="utf-8")
    head = re.search(r'<table class="data runs-table sortable" id="runs-table">.*?</thead>', text, re.S).group(0)
    headings = [re.sub(r"<[^>]+>", "", h).strip() for h in re.findall(r"<th[^>]*>(.*?)</th>", head, re.S)]
    assert headings[:7] == ["Sample", "Run", "Date", "Temperature", "Geometry", "Correction", "Selected model"]
    assert "η at 10 1/s (Pa·s)" in headings and "η at 1000 1/s (Pa·s)" in headings
    assert "Specifications" in headings
    assert head.count('<button type="button" class="sort-button">') == len(headings)  # every heading sorts
    rows = re.findall(r'<tr data-run-id="([^"]+)" data-verdicts="([^"]*)">(.*?)</tr>', text, re.S)
    assert [r[0] for r in rows] == [rr.run.run_id for rr in result.runs]
    for run_id, verdicts, row in rows:
        rr = next(r for r in result.runs if r.run.run_id == run_id)
        expected = {("uncertain" if v.straddles_limit else v.verdict).replace("/", "") for v in result.specs
                    if v.run_id == run_id}
        assert set(verdicts.split()) == expected
        at_10 = next(r for r in rr.results if r.name == "viscosity" and r.at_shear_rate == 10.0
                     and r.method.startswith("selected model"))
        assert study_site.fmt(at_10.value) in row
        at_1000 = next(r for r in rr.results if r.name == "viscosity" and r.at_shear_rate == 1000.0
                       and r.method.startswith("selected model"))
        assert ("extrapolated" in row) == (at_1000.extrapolated or at_10.extrapolated)
    # verdict chips carry a symbol and a word, not colour alone
    fluid_row = next(r[2] for r in rows if r[0] == by_sample(result, EVIL).run.run_id)
    assert re.search(r'verdict-pass".*?✓</span> pass', fluid_row)
    assert re.search(r'verdict-na".*?–</span> n/a', fluid_row)
    gel_row = next(r[2] for r in rows if r[0] == by_sample(result, GEL, 25.0).run.run_id)
    assert re.search(r'verdict-fail".*?✗</span> fail', gel_row)


def test_overview_counts_dates_rejected_and_cautions(built) -> None:
    result, out = built
    text = (out / "site" / "index.html").read_text(encoding="utf-8")
    facts = dict(re.findall(r"<dt>(.*?)</dt><dd>(.*?)</dd>", text))
    assert "2024-03-05 to 2024-03-07" in facts["Measured"]
    assert '<span class="count">5</span>' in facts["Files"] and "1 rejected" in facts["Files"]
    assert '<span class="count">4</span>' in facts["Runs"] and '<span class="count">3</span>' in facts["Samples"]
    excluded = sum(int(rr.excluded.sum()) for rr in result.runs)
    assert f'<span class="count">{excluded}</span>' in facts["Points excluded from fits"]
    assert "notes.csv" in text and result.rejected[0].reason in text
    for rr in result.runs:
        assert f'href="runs/{rr.run.run_id}.html"' in text
    assert "Read before using these results" in text and "qualified person" in text and "Extrapolation" in text


def test_verdict_views_have_words_symbols_and_uncertainty() -> None:
    def verdict(kind: str, straddles: bool = False, value: float | None = 1.0) -> dict:
        return site_pages.verdict_view(SpecVerdict("r", "rule", value, 0.1, "Pa·s", 0.5, 1.05, kind, straddles,
                                                   "m", ""))

    assert verdict("pass")["icon"] == "✓" and verdict("pass")["label"] == "pass"
    assert verdict("fail")["icon"] == "✗" and verdict("fail")["css"] == "fail"
    assert verdict("n/a", value=None)["label"] == "n/a" and verdict("n/a", value=None)["value"] == "—"
    uncertain = verdict("pass", straddles=True)
    assert uncertain["status"] == "uncertain" and uncertain["icon"] == "?" and uncertain["label"] == "uncertain (pass)"
    assert uncertain["value"] == "1 ± 0.2 (k = 2) Pa·s" and uncertain["limits"] == "≥ 0.5 and ≤ 1.05 Pa·s"


# --------------------------------------------------------------------------- run page


def test_run_plots_fits_band_and_range(built) -> None:
    result, out = built
    rr = by_sample(result, EVIL)
    page = _run_page(out, rr.run.run_id)
    blocks = _parse(page).json_blocks
    assert set(blocks) == {"plot-viscosity", "plot-shear-stress", "plot-residuals"}
    viscosity, stress = (json.loads(blocks[k]) for k in ("plot-viscosity", "plot-shear-stress"))
    for figure in (viscosity, stress):
        points = [t for t in figure["data"] if t["meta"]["kind"] == "points"]
        assert sorted(i for t in points for i in t["customdata"]) == list(range(rr.run.n_points))
        fits = [t for t in figure["data"] if t["meta"]["kind"] == "fit"]
        assert {t["meta"]["model"] for t in fits} == {f.model for f in rr.fits if f.success}
        assert [t["meta"]["selected"] for t in fits].count(True) == 1
        # shown at first: the selected model and the next two by AICc; the others one legend click away
        ranked = sorted((f for f in rr.fits if f.success), key=lambda f: (not f.selected, f.aicc))
        shown = {t["meta"]["model"] for t in fits if t.get("visible", True) is True}
        assert shown == {f.model for f in ranked[:3]}
        assert not [t for t in figure["data"] if t["meta"]["kind"] == "apparent"]  # identical here
        assert [t["meta"]["kind"] for t in figure["data"]].count("highlight") == 1
    selected = rr.selected
    assert selected is not None and selected.model == "power_law"
    (curve,) = [t for t in viscosity["data"] if t["meta"]["kind"] == "fit" and t["meta"]["selected"]]
    assert curve["x"][0] == pytest.approx(selected.shear_rate_min, rel=1e-5)
    assert curve["x"][-1] == pytest.approx(selected.shear_rate_max, rel=1e-5)
    # the fitted curve passes through the invented fluid within its 1 % wiggle
    truth = K_A * np.asarray(curve["x"]) ** (N_A - 1)
    assert np.asarray(curve["y"]) == pytest.approx(truth, rel=0.02)
    lower, upper = (next(t for t in viscosity["data"] if t["meta"].get("edge") == edge) for edge in ("lower", "upper"))
    assert upper["fill"] == "tonexty" and lower["x"] == curve["x"] == upper["x"]
    # band = η·exp(±2s/η), s² = gᵀCg with g = (∂η/∂K, ∂η/∂n) = (γ̇^(n−1), K·γ̇^(n−1)·ln γ̇) (delta method, GUM §5.1.2)
    k, n = selected.best_fit["K"], selected.best_fit["n"]
    x = np.asarray(curve["x"])
    eta = k * x ** (n - 1)
    gradient = np.stack([x ** (n - 1), eta * np.log(x)], axis=1)
    names = [p.name for p in result.registry.models["power_law"].record.parameters]
    order = [names.index("K"), names.index("n")]
    cov = np.asarray(selected.covariance)[np.ix_(order, order)]
    s = np.sqrt(np.einsum("ij,jk,ik->i", gradient, cov, gradient))
    assert np.all(s > 0)
    assert np.asarray(upper["y"]) == pytest.approx(eta * np.exp(2 * s / eta), rel=1e-4)
    assert np.asarray(lower["y"]) == pytest.approx(eta * np.exp(-2 * s / eta), rel=1e-4)
    # the same propagation as the run's reported viscosity at 10 1/s
    at_10 = next(r for r in rr.results if r.name == "viscosity" and r.at_shear_rate == 10.0
                 and r.method.startswith("selected model"))
    g10 = np.array([10 ** (n - 1), k * 10 ** (n - 1) * math.log(10)])
    assert at_10.stderr == pytest.approx(math.sqrt(g10 @ cov @ g10), rel=1e-6)
    (stress_curve,) = [t for t in stress["data"] if t["meta"]["kind"] == "fit" and t["meta"]["selected"]]
    assert np.asarray(stress_curve["y"]) == pytest.approx(np.asarray(curve["y"]) * x, rel=1e-5)


def test_residuals_are_relative_deviations_from_each_model(built) -> None:
    result, out = built
    rr = by_sample(result, EVIL)
    figure = _figure(_run_page(out, rr.run.run_id), "plot-residuals")
    assert figure["layout"]["yaxis"]["type"] == "linear"
    selected = [t for t in figure["data"] if t["meta"]["kind"] == "points"]
    assert {t["meta"]["model"] for t in selected} == {"power_law"}
    k, n = rr.selected.best_fit["K"], rr.selected.best_fit["n"]
    for trace in selected:
        index = np.asarray(trace["customdata"])
        rate, eta = rr.run.columns["shear_rate"][index], rr.run.columns["viscosity"][index]
        assert np.asarray(trace["y"]) == pytest.approx(100 * (eta / (k * rate ** (n - 1)) - 1), abs=1e-4)
        assert np.max(np.abs(trace["y"])) < 2.0  # the 1 % wiggle, not more
    others = [t for t in figure["data"] if t["meta"]["kind"] == "residual"]
    assert others and all(t["visible"] == "legendonly" for t in others)


def test_run_page_tables_findings_link_to_points(built) -> None:
    result, out = built
    rr = by_sample(result, EVIL)
    text = _run_page(out, rr.run.run_id).read_text(encoding="utf-8")
    digest = hashlib.sha256((result.study_dir / "fluid_a.csv").read_bytes()).hexdigest()
    assert digest in text and "fluid_a.csv" in text and "20 °C" in text
    assert "Power law (Ostwald–de Waele)" in text and "Newtonian" in text and "✓ selected" in text
    assert "Pa·sⁿ" in text and study_site.fmt(rr.selected.value("n")) in text
    assert "Valid only for shear rates from" in text
    assert "Correlations of the estimates" in text
    (r,) = [c[2] for c in rr.selected.correlations]
    assert f"{r:+.3f}".replace("-", "−") in text
    assert 'href="../index.html"' in text and "Read before using these results" in text
    gel = by_sample(result, GEL, 25.0)
    gel_page = _parse(_run_page(out, gel.run.run_id))
    gel_text = _run_page(out, gel.run.run_id).read_text(encoding="utf-8")
    assert "<code>invalid_point</code>" in gel_text and "badge-warning" in gel_text
    point_links = [u for tag, attr, u in gel_page.urls if u.startswith("#point-")]
    flagged = sorted({f.point_index for f in gel.findings if f.point_index is not None})
    assert sorted(int(u.split("-")[1]) for u in point_links) == flagged
    assert all(u[1:] in gel_page.ids for u in point_links)
    assert all(f"point-{i}" in gel_page.ids for i in range(gel.run.n_points))  # every point has a row
    # specifications of the run, with their words
    assert "viscosity at 10 1/s" in gel_text and "✗</span> fail" in gel_text


def test_apparent_values_and_correction_size_are_shown(built) -> None:
    result, out = built
    mud = by_sample(result, MUD)
    assert mud.correction == "krieger_wide_gap"
    page = _run_page(out, mud.run.run_id)
    text = page.read_text(encoding="utf-8")
    viscosity = _figure(page, "plot-viscosity")
    (apparent,) = [t for t in viscosity["data"] if t["meta"]["kind"] == "apparent"]
    columns = mud.run.columns
    assert apparent["x"] == pytest.approx(list(columns["shear_rate_apparent"]), rel=1e-5)
    assert apparent["y"] == pytest.approx(list(columns["shear_stress_apparent"] / columns["shear_rate_apparent"]),
                                          rel=1e-5)
    summary = study_site.correction_summary(mud)
    assert summary["method"] == "krieger_wide_gap" and summary["short"] != "—"
    assert summary["line"] in text and "γ̇ apparent (1/s)" in text and "γ̇ change" in text
    largest = max(r.value for r in mud.results if r.name == "correction_shear_rate_max")
    assert summary["largest"] == pytest.approx(largest)


def test_field_results_section_from_a_builtin_plugin(built) -> None:
    result, out = built
    assert "field_results" in result.registry.sections
    mud = by_sample(result, MUD)
    text = _run_page(out, mud.run.run_id).read_text(encoding="utf-8")
    assert 'id="section-field_results"' in text
    # API RP 13D: PV = θ600 − θ300 (cP), YP = θ300 − PV (lbf/100 ft²)
    pv_cp = DIAL[600.0] - DIAL[300.0]
    yp = DIAL[300.0] - pv_cp
    assert f"{pv_cp * 1e-3:.4g} Pa·s" in text and f"{pv_cp:.4g} cP" in text
    assert f"{yp:.4g} lbf/100 ft²" in text
    others = _run_page(out, by_sample(result, EVIL).run.run_id).read_text(encoding="utf-8")
    assert 'id="section-field_results"' not in others  # no dial readings, no section


# --------------------------------------------------------------------------- sample, methods, downloads


def test_sample_page_compares_runs_and_temperatures(built) -> None:
    result, out = built
    page = _sample_page(out, GEL)
    text = page.read_text(encoding="utf-8")
    runs = [rr for rr in result.runs if rr.run.sample == GEL]
    assert len(runs) == 2 and {rr.run.temperature for rr in runs} == {25.0, 40.0}
    overlay = _figure(page, "plot-sample")
    lines = [t for t in overlay["data"] if t["meta"].get("style") != "excluded"]
    assert [t["meta"]["run_id"] for t in lines] == [rr.run.run_id for rr in runs]
    assert lines[0]["line"]["color"] != lines[1]["line"]["color"]
    for rr in runs:
        assert f'href="../runs/{rr.run.run_id}.html"' in text
        for p in rr.selected.parameters:
            assert study_site.fmt(p.value) in text
    figures = {pid: json.loads(block) for pid, block in _parse(page).json_blocks.items() if pid.startswith("plot-param")}
    assert set(figures) == {"plot-param-K", "plot-param-n"}
    trace = figures["plot-param-n"]["data"][0]
    assert trace["x"] == [25.0, 40.0]
    assert trace["y"] == pytest.approx([rr.selected.value("n") for rr in runs], rel=1e-5)
    assert trace["error_y"]["array"] == pytest.approx([rr.selected.estimate("n").stderr for rr in runs], rel=1e-5)
    values = np.array([rr.selected.value("n") for rr in runs])
    assert f"{study_site.fmt(values.mean())} ± {study_site.fmt(values.std(ddof=1), 2)} (n = 2)" in text
    single = _sample_page(out, EVIL)
    assert "plot-param" not in single.read_text(encoding="utf-8")  # one temperature: no such view


def test_methods_page_lists_formulas_checks_versions_and_inputs(built) -> None:
    result, out = built
    text = (out / "site" / "methods.html").read_text(encoding="utf-8")
    for check_id in result.registry.checks:
        assert f"<code>{check_id}</code>" in text
    assert "<code>tolerance</code> = 0.15 <em>(set by the study; default 0.1)</em>" in text
    assert "Concentric cylinders" in text and "Direct-indicating viscometer" in text  # geometries in use
    assert "Cone and plate" not in text  # not used in this study
    assert "<var>γ̇</var><sub>i</sub> = 2<var>Ω</var>" in text
    assert "τ = τ<sub>y</sub> + K·γ̇ⁿ" in text  # Herschel–Bulkley's equation, subscripts rendered
    assert "η = η<sub>∞</sub> + (η<sub>0</sub> − η<sub>∞</sub>)·[1 + (λγ̇)²]<sup>(n−1)/2</sup>" in text
    from importlib import metadata

    assert f"numpy {metadata.version('numpy')}" in text and f"lmfit {metadata.version('lmfit')}" in text
    for name in result.registry.plugins:
        assert f"<code>{name}</code>" in text
    for outcome in result.files:
        assert outcome.source_file in text and (outcome.sha256 or "unreadable") in text
    assert "viscosity at 10 1/s" in text and "uncertain" in text and "Read before using these results" in text


def test_downloads_match_the_tables_and_csv_is_safe(built) -> None:
    result, out = built
    downloads = out / "site" / "downloads"
    tables = sorted(p.name for p in (out / "tables").glob("*.parquet"))
    assert sorted(p.name for p in downloads.glob("*.parquet")) == tables
    page = (out / "site" / "downloads.html").read_text(encoding="utf-8")
    for name in tables:
        assert (downloads / name).read_bytes() == (out / "tables" / name).read_bytes()
        table = pq.read_table(downloads / name)
        with open(downloads / name.replace(".parquet", ".csv"), newline="", encoding="utf-8") as handle:
            rows = list(csv.reader(handle))
        assert rows[0] == table.column_names and len(rows) - 1 == table.num_rows, name
        assert f'href="downloads/{name}"' in page and f'href="downloads/{name.replace(".parquet", ".csv")}"' in page
    runs_csv = list(csv.DictReader(io.StringIO((downloads / "runs.csv").read_text(encoding="utf-8"))))
    notes = {row["sample"]: row["note"] for row in runs_csv}
    assert notes[EVIL] == "'" + FORMULA_NOTE  # a spreadsheet would run it: prefixed
    assert pq.read_table(downloads / "runs.parquet").column("note").to_pylist()[0] == FORMULA_NOTE
    points_csv = list(csv.DictReader(io.StringIO((downloads / "points.csv").read_text(encoding="utf-8"))))
    gel = by_sample(result, GEL, 25.0)
    assert [r["flags"] for r in points_csv if r["run_id"] == gel.run.run_id][0] == "invalid_point"
    assert "(1/s)" in page and "<code>shear_rate</code>" in page  # units listed beside the columns


# --------------------------------------------------------------------------- writing


def test_site_is_swapped_whole_and_rewrites_identically(built, tmp_path: Path) -> None:
    result, out_first = built
    out = tmp_path / "again"
    first = study_site.write_site(result, out)
    assert all(p.is_file() and (out / "site") in p.parents for p in first)
    snapshot = {p.relative_to(out).as_posix(): p.read_bytes() for p in (out / "site").rglob("*") if p.is_file()}
    original = {p.relative_to(out_first).as_posix(): p.read_bytes()
                for p in (out_first / "site").rglob("*") if p.is_file()}
    assert snapshot.keys() == original.keys()
    assert {k for k in snapshot if snapshot[k] != original[k]} == set()  # same input: same bytes
    (out / "site" / "stale.html").write_text("old", encoding="utf-8")
    second = study_site.write_site(result, out)
    assert sorted(first) == sorted(second)
    again = {p.relative_to(out).as_posix(): p.read_bytes() for p in (out / "site").rglob("*") if p.is_file()}
    assert again == snapshot  # same bytes, and the stale file of the old site is gone
    assert sorted(p.name for p in out.iterdir()) == ["site"]  # no temporary or backup folder left


def test_failed_build_keeps_the_old_site(built, tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    result, _ = built
    out = tmp_path / "keep"
    study_site.write_site(result, out)
    before = (out / "site" / "index.html").read_bytes()

    def half_then_fail(result, site_dir: Path, **kwargs):
        site_dir.mkdir(parents=True)
        (site_dir / "index.html").write_text("half", encoding="utf-8")
        raise RuntimeError("disk full")

    monkeypatch.setattr(study_site, "render_site", half_then_fail)
    with pytest.raises(RuntimeError):
        study_site.write_site(result, out)
    assert (out / "site" / "index.html").read_bytes() == before
    assert sorted(p.name for p in out.iterdir()) == ["site"]


def test_apparent_values_are_drawn_when_they_differ(built) -> None:
    result, _ = built
    rr = by_sample(result, EVIL)
    run = replace(rr.run, columns=dict(rr.run.columns))
    run.columns["shear_rate_apparent"] = run.columns["shear_rate"] * 0.8
    figures, _ = study_site.run_figures(replace(rr, run=run), result.registry)
    for figure in figures:
        (apparent,) = [t for t in figure["figure"]["data"] if t["meta"]["kind"] == "apparent"]
        assert apparent["x"] == pytest.approx(run.columns["shear_rate"] * 0.8)
        assert len(apparent["y"]) == run.n_points
    viscosity = next(f for f in figures if f["id"] == "plot-viscosity")["figure"]
    (apparent,) = [t for t in viscosity["data"] if t["meta"]["kind"] == "apparent"]
    expected = run.columns["shear_stress_apparent"] / (run.columns["shear_rate"] * 0.8)
    assert apparent["y"] == pytest.approx(expected)


class _StressPowerLaw:
    """A throwaway plugin: the power law written for stress, τ = K·γ̇ⁿ (numerical derivatives)."""

    @hookimpl
    def gammadot_models(self):
        return [Model(id="stress_power_law", title="Power law on stress", target="shear_stress",
                      parameters=(ModelParameter("K", "Pa·s^n", 0.0, np.inf), ModelParameter("n", "1", 0.0, 3.0)),
                      function=lambda shear_rate, K, n: K * np.power(shear_rate, n),
                      guess=lambda x, y: {"K": float(np.exp(np.mean(np.log(y / x)))), "n": 1.0})]


def test_stress_models_are_drawn_as_viscosity_too(tmp_path: Path) -> None:
    result, out = build_site(tmp_path, extra=(("stress_power_law_test", _StressPowerLaw()),))
    rr = by_sample(result, EVIL)
    curves = {c["model"]: c for c in study_site.fit_curves(rr, result.registry)[0]}
    stress_fit, visc_fit = curves["stress_power_law"], curves["power_law"]
    assert stress_fit["rate"] == pytest.approx(visc_fit["rate"])
    assert stress_fit["viscosity"] == pytest.approx(visc_fit["viscosity"], rel=1e-4)
    assert stress_fit["stress"] == pytest.approx(visc_fit["stress"], rel=1e-4)
    figure = _figure(_run_page(out, rr.run.run_id), "plot-viscosity")
    assert "stress_power_law" in {t["meta"]["model"] for t in figure["data"] if t["meta"]["kind"] == "fit"}


def test_a_study_without_runs_still_gets_an_overview(tmp_path: Path) -> None:
    study = tmp_path / "empty"
    study.mkdir()
    (study / "broken.csv").write_text("nothing to see\n", encoding="utf-8")
    registry = build_registry(build_plugin_manager(entry_points=False))
    result = process_study(study, registry, out_dir=tmp_path / "out")
    written = study_site.write_site(result, tmp_path / "out")
    index = tmp_path / "out" / "site" / "index.html"
    assert index in written and not list((tmp_path / "out" / "site" / "runs").iterdir())
    page = _parse(index)
    assert not page.json_blocks and [s.get("src") for s in page.scripts if s.get("src")] == ["assets/site.js"]
    assert "broken.csv" in index.read_text(encoding="utf-8")
    assert (tmp_path / "out" / "site" / "downloads" / "rejected.csv").is_file()  # built here: no tables yet


# --------------------------------------------------------------------------- formatting


def test_script_json_is_inert_and_has_no_nan() -> None:
    text = study_site.script_json({"a": math.nan, "b": [np.inf, np.float64(1.5), np.int64(2)],
                                   "c": "</script><!-- & \u2028", "d": np.array([1.0, np.nan, -np.inf]),
                                   "e": np.array([3, 4]), "f": np.array([True, False]), "g": ["x<", "y"]})
    assert not set(text) & set("<>&\u2028")
    assert "NaN" not in text and "nan" not in text and "Infinity" not in text and "inf" not in text
    assert json.loads(text) == {"a": None, "b": [None, 1.5, 2], "c": "</script><!-- & \u2028",
                                "d": [1.0, None, None], "e": [3, 4], "f": [True, False], "g": ["x<", "y"]}


@settings(max_examples=60, deadline=None)
@given(values=st.lists(st.floats(allow_nan=True, allow_infinity=True, width=64), max_size=30),
       label=st.text(max_size=20))
def test_script_json_round_trips_arrays_to_six_digits(values: list[float], label: str) -> None:
    text = study_site.script_json({"label": label, "y": np.asarray(values, dtype=float)})
    assert not set(text) & set("<>&")
    back = json.loads(text)
    assert back["label"] == label
    assert len(back["y"]) == len(values)
    for got, want in zip(back["y"], values):
        if math.isfinite(want):
            assert got == pytest.approx(want, rel=5e-6, abs=1e-300)
        else:
            assert got is None


def test_numbers_and_estimates_for_people() -> None:
    assert study_site.fmt(None) == "—" and study_site.fmt(math.nan) == "—"
    assert study_site.fmt(math.inf) == "∞"
    assert study_site.fmt(0.4462) == "0.4462"
    assert study_site.fmt(-1.5) == "−1.5"
    assert study_site.fmt(8.0e-4, 2) == "8×10⁻⁴"
    assert study_site.fmt(1.234e6) == "1.234×10⁶"
    assert study_site.fmt_estimate(None, None, "Pa") == "not determined"
    assert study_site.fmt_estimate(2.0, None, "Pa") == "2 (standard error not determined) Pa"
    assert study_site.fmt_estimate(2.0, 0.05, "Pa·s^n") == "2 ± 0.05 Pa·sⁿ"
    assert study_site.fmt_estimate(0.5, 0.01, "1") == "0.5 ± 0.01"


def test_page_names_are_safe_and_distinct() -> None:
    ids = ["fluid-a-r1", "../../etc/passwd", "a/b", "A B", "a-b", "con", "", ".hidden", "x" * 400, None, EVIL]
    names = study_site.page_names(ids)
    assert names["fluid-a-r1"] == "fluid-a-r1"
    assert len(set(names.values())) == len(ids)
    for name in names.values():
        assert re.fullmatch(r"[a-z0-9][a-z0-9_-]*", name) and len(name) < 160, name
        assert name not in ("con", "index")


@settings(max_examples=80, deadline=None)
@given(values=st.lists(st.floats(allow_nan=True, allow_infinity=True, width=64), max_size=25))
def test_fast_column_formatting_equals_the_formatter_for_people(values: list[float]) -> None:
    from gammadot.plugins.site_format import fmt_column

    assert fmt_column(values, 5) == [study_site.fmt(v, 5) for v in values]


def test_a_large_overlay_draws_lines_and_keeps_every_excluded_point(built) -> None:
    from gammadot.plugins import site_plots

    result, _ = built
    runs = [rr for rr in result.runs if "viscosity" in rr.run.columns]
    many = runs * (site_plots.DENSE_POINTS // sum(rr.run.n_points for rr in runs) + 1)
    figure = site_plots.flow_curve_overlay(many)
    assert figure["dense"] and not figure["layout"]["showlegend"]
    lines = [t for t in figure["data"] if t["meta"].get("style") != "excluded"]
    assert len(lines) == len(many) and all(t["mode"] == "lines" for t in lines)
    (stress,) = [v["y"] for v in figure["views"] if v["id"] == "stress"]
    assert len(stress) == len(figure["data"])
    gel = by_sample(result, GEL, 25.0)
    companions = [t for t in figure["data"] if t["meta"].get("style") == "excluded"
                  and t["meta"]["run_id"] == gel.run.run_id]
    assert companions and all(list(t["customdata"]) == list(np.flatnonzero(gel.excluded)) for t in companions)
    assert all(t["marker"]["symbol"] == "circle-open" for t in companions)
    small = site_plots.flow_curve_overlay(runs)
    lines = [t for t in small["data"] if t["meta"].get("style") != "excluded"]
    assert not small["dense"] and len(lines) == len(runs)  # one line per run, markers on it
    assert all(t["mode"] == "lines+markers" for t in lines)
    assert len(small["data"]) == len(runs) + sum(1 for rr in runs if (~rr.in_fit).any())


def test_residual_scale_follows_the_points_used_in_the_fit(built) -> None:
    result, out = built
    mud = by_sample(result, MUD)
    page = _run_page(out, mud.run.run_id)
    figure = _figure(page, "plot-residuals")
    selected = [t for t in figure["data"] if t["meta"]["kind"] == "points"]
    used = [y for t in selected if t["meta"]["style"] == "included" for y in t["y"]]
    excluded = [y for t in selected if t["meta"]["style"] == "excluded" for y in t["y"] if y is not None]
    low, high = figure["layout"]["yaxis"]["range"]
    assert low < min(used) and max(used) < high  # every fitted point in view
    outside = sum(1 for y in excluded if not low <= y <= high)
    assert outside == figure["outside"] >= 1  # the partly sheared points lie far off
    assert f"{outside} excluded" in page.read_text(encoding="utf-8")
    fluid = _figure(_run_page(out, by_sample(result, EVIL).run.run_id), "plot-residuals")
    assert "range" not in fluid["layout"]["yaxis"] and fluid["outside"] == 0  # nothing excluded: autorange


def test_profile_intervals_are_shown_when_the_fit_has_them(built) -> None:
    result, _ = built
    rr = by_sample(result, EVIL)
    fit = rr.selected
    with_interval = replace(fit, parameters=tuple(replace(p, ci_low=p.value * 0.9, ci_high=p.value * 1.1)
                                                  for p in fit.parameters))
    views = site_pages.parameters_view(with_interval, result.registry)
    for view, p in zip(views, fit.parameters):
        assert view["interval"] == f"{study_site.fmt(p.value * 0.9)} to {study_site.fmt(p.value * 1.1)}"
    assert all(v["interval"] == "" for v in site_pages.parameters_view(fit, result.registry))


def test_a_missing_result_carries_no_extrapolation_mark() -> None:
    """A zero-shear viscosity the selected model cannot give (a power law has no plateau) is shown
    as n/a without the 'extrapolated' mark; a model limit that has a value keeps the mark."""
    from types import SimpleNamespace

    from gammadot.records import Result

    missing = Result("zero_shear_viscosity", None, "Pa·s", method="selected model power_law", at_shear_rate=0.0,
                     extrapolated=True, note="the selected model has no zero-shear plateau")
    limit = Result("zero_shear_viscosity", 9.6, "Pa·s", stderr=0.16, method="selected model cross, parameter eta0",
                   at_shear_rate=0.0, extrapolated=True)
    views = site_pages.results_view(SimpleNamespace(results=[missing, limit]))
    assert [(v["value"], v["extrapolated"]) for v in views] == [("n/a", False), (views[1]["value"], True)]
    assert views[1]["value"] != "n/a"

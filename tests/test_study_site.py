"""The static study site: pages exist, file text is escaped, nothing points off the folder,
plot data are valid JSON with every point, and the site is replaced atomically."""

from __future__ import annotations

import hashlib
import json
import math
import re
from dataclasses import replace
from html.parser import HTMLParser
from pathlib import Path
from urllib.parse import unquote, urlsplit

import numpy as np
import pytest

from gammadot.hookspecs import hookimpl
from gammadot.pipeline import StudyResult, process_study, write_outputs
from gammadot.plugin_manager import build_plugin_manager
from gammadot.plugins import study_site
from gammadot.records import Model, ModelParameter
from gammadot.registry import build_registry

EVIL = "<script>alert(1)</script>"
K_A, N_A = 2.5, 0.45  # invented power-law fluid: η = K·γ̇^(n−1), K in Pa·sⁿ
RATES_A = np.geomspace(0.5, 200.0, 10)


def _study(root: Path) -> Path:
    """Two invented exports (one with a zero-rate first point) and one unreadable file."""
    study = root / "study"
    study.mkdir(parents=True)
    (study / "study.toml").write_text(
        '[study]\ntitle = "Gel screening <b>2024</b>"\ndescription = "Invented data & a <i>tag</i>."\n',
        encoding="utf-8")
    wiggle = 1 + 0.01 * np.sin(np.arange(RATES_A.size))
    rows_a = [f"{r:.6g},{K_A * r ** (N_A - 1) * w * 1e3:.6g}" for r, w in zip(RATES_A, wiggle)]
    (study / "fluid_a.csv").write_text(
        "\n".join([f"sample: {EVIL}", "temperature: 20 °C", "Shear rate [1/s],Viscosity [mPa·s]", *rows_a]) + "\n",
        encoding="utf-8")
    rates_b = np.geomspace(1.0, 100.0, 8)
    rows_b = ["0,900"] + [f"{r:.6g},{0.8 * r ** (0.7 - 1) * 1e3:.6g}" for r in rates_b]
    (study / "gel_b.csv").write_text(
        "\n".join(["sample: Gel B & co", "temperature: 25 °C", "Shear rate [1/s],Viscosity [mPa·s]", *rows_b]) + "\n",
        encoding="utf-8")
    (study / "notes.csv").write_text("sample: x\nShear rate [1/s],Viscosity [mPa·s]\n", encoding="utf-8")
    return study


def _build(root: Path, extra: tuple = ()) -> tuple[StudyResult, Path]:
    registry = build_registry(build_plugin_manager(entry_points=False, extra=extra))
    out = root / "out"
    result = process_study(_study(root), registry, out_dir=out)
    write_outputs(result, out)
    assert not result.writer_failures, result.writer_failures
    return result, out


@pytest.fixture(scope="module")
def built(tmp_path_factory: pytest.TempPathFactory) -> tuple[StudyResult, Path]:
    return _build(tmp_path_factory.mktemp("site"))


class _Page(HTMLParser):
    """Collects link targets, script elements and the text of JSON script blocks."""

    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.urls: list[tuple[str, str, str]] = []
        self.scripts: list[dict[str, str | None]] = []
        self.json_blocks: dict[str, str] = {}
        self._json_id: str | None = None

    def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        found = dict(attrs)
        for name in ("src", "href", "action", "data", "poster"):
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


def _by_sample(result: StudyResult, sample: str):
    return next(rr for rr in result.runs if rr.run.sample == sample)


def test_index_run_pages_and_assets_exist(built) -> None:
    result, out = built
    site = out / "site"
    assert (site / "index.html").is_file()
    assert len(result.runs) == 2
    for rr in result.runs:
        assert _run_page(out, rr.run.run_id).is_file()
    import plotly

    installed = Path(plotly.__file__).parent / "package_data" / "plotly.min.js"
    assert (site / "assets" / "plotly.min.js").read_bytes() == installed.read_bytes()
    assert (site / "assets" / "style.css").stat().st_size > 0
    assert (site / "assets" / "site.js").stat().st_size > 0


def test_text_from_files_is_escaped_everywhere(built) -> None:
    result, out = built
    evil_run = _by_sample(result, EVIL)
    index = (out / "site" / "index.html").read_text(encoding="utf-8")
    run_page = _run_page(out, evil_run.run.run_id).read_text(encoding="utf-8")
    for text in (index, run_page):
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


def test_no_page_points_to_another_host_and_every_link_resolves(built) -> None:
    _, out = built
    pages = _pages(out)
    assert len(pages) == 3
    for page in pages:
        text = page.read_text(encoding="utf-8")
        for tag, attr, url in _parse(page).urls:
            parts = urlsplit(url)
            assert not parts.scheme and not parts.netloc, (page.name, tag, attr, url)
            assert not url.startswith("/"), (page.name, url)
            if parts.path:
                target = (page.parent / unquote(parts.path)).resolve()
                assert target.is_file(), (page.name, url)
                assert (out / "site").resolve() in target.parents, (page.name, url)
            if parts.fragment:
                assert f'id="{parts.fragment}"' in (target.read_text(encoding="utf-8") if parts.path else text)
        assert "//" not in " ".join(u for _, _, u in _parse(page).urls)
    css = (out / "site" / "assets" / "style.css").read_text(encoding="utf-8")
    assert "http" not in css and "@import" not in css


def test_plotly_is_loaded_from_the_site_folder(built) -> None:
    result, out = built
    index_srcs = [s.get("src") for s in _parse(out / "site" / "index.html").scripts if s.get("src")]
    assert index_srcs == ["assets/plotly.min.js", "assets/site.js"]
    run_srcs = [s.get("src") for s in _parse(_run_page(out, result.runs[0].run.run_id)).scripts if s.get("src")]
    assert run_srcs == ["../assets/plotly.min.js", "../assets/site.js"]


def test_overview_plot_json_holds_every_point(built) -> None:
    result, out = built
    blocks = _parse(out / "site" / "index.html").json_blocks
    assert set(blocks) == {"plot-overview"}
    figure = json.loads(blocks["plot-overview"])
    assert figure["layout"]["xaxis"]["type"] == "log" and figure["layout"]["yaxis"]["type"] == "log"
    for rr in result.runs:
        traces = [t for t in figure["data"] if t["meta"]["run_id"] == rr.run.run_id]
        indices = sorted(i for t in traces for i, _ in t["customdata"])
        assert indices == list(range(rr.run.n_points))
        assert sum(len(t["x"]) for t in traces) == rr.run.n_points
        for trace in traces:
            assert len(trace["x"]) == len(trace["y"]) == len(trace["customdata"])
            excluded = [bool(rr.excluded[i]) for i, _ in trace["customdata"]]
            assert all(excluded) if trace["meta"]["style"] == "excluded" else not any(excluded)
    fluid_a = _by_sample(result, EVIL)
    (trace_a,) = [t for t in figure["data"] if t["meta"]["run_id"] == fluid_a.run.run_id]
    assert trace_a["x"] == pytest.approx(list(RATES_A), rel=1e-5)
    assert trace_a["y"][0] == pytest.approx(K_A * RATES_A[0] ** (N_A - 1), rel=1e-4)  # Pa·s, not mPa·s
    # the zero-rate point of gel B is excluded, drawn hollow grey and kept as null (no log of 0)
    gel = _by_sample(result, "Gel B & co")
    assert bool(gel.excluded[0]) and int(gel.excluded.sum()) == 1
    (hollow,) = [t for t in figure["data"]
                 if t["meta"]["run_id"] == gel.run.run_id and t["meta"]["style"] == "excluded"]
    assert hollow["marker"]["symbol"] == "circle-open" and hollow["x"] == [None]
    assert hollow["showlegend"] is False
    # legend by sample: the sample names are the legend groups, escaped for Plotly's labels
    groups = {t["legendgrouptitle"]["text"] for t in figure["data"]}
    assert groups == {"&lt;script&gt;alert(1)&lt;/script&gt;", "Gel B &amp; co"}


def test_run_page_plots_data_and_fits_within_the_fitted_range(built) -> None:
    result, out = built
    rr = _by_sample(result, EVIL)
    blocks = _parse(_run_page(out, rr.run.run_id)).json_blocks
    assert set(blocks) == {"plot-viscosity", "plot-shear-stress"}
    viscosity, stress = (json.loads(blocks[k]) for k in ("plot-viscosity", "plot-shear-stress"))
    for figure in (viscosity, stress):
        points = [t for t in figure["data"] if t["meta"]["kind"] == "points"]
        assert sum(len(t["x"]) for t in points) == rr.run.n_points
        fits = [t for t in figure["data"] if t["meta"]["kind"] == "fit"]
        assert {t["meta"]["model"] for t in fits} == {f.model for f in rr.fits if f.success}
        assert [t["meta"]["selected"] for t in fits].count(True) == 1
        assert not [t for t in figure["data"] if t["meta"]["kind"] == "apparent"]  # identical here
    selected = rr.selected
    assert selected is not None and selected.model == "power_law"
    (curve,) = [t for t in viscosity["data"] if t["meta"]["kind"] == "fit" and t["meta"]["selected"]]
    assert curve["line"]["width"] > max(t["line"]["width"] for t in viscosity["data"]
                                        if t["meta"]["kind"] == "fit" and not t["meta"]["selected"])
    assert curve["x"][0] == pytest.approx(selected.shear_rate_min)
    assert curve["x"][-1] == pytest.approx(selected.shear_rate_max)
    assert all(selected.shear_rate_min * (1 - 1e-9) <= x <= selected.shear_rate_max * (1 + 1e-9) for x in curve["x"])
    # the fitted curve passes through the invented fluid within its 1 % wiggle
    truth = K_A * np.asarray(curve["x"]) ** (N_A - 1)
    assert np.asarray(curve["y"]) == pytest.approx(truth, rel=0.02)
    (stress_curve,) = [t for t in stress["data"] if t["meta"]["kind"] == "fit" and t["meta"]["selected"]]
    assert np.asarray(stress_curve["y"]) == pytest.approx(np.asarray(curve["y"]) * np.asarray(curve["x"]), rel=1e-9)


def test_run_page_tables(built) -> None:
    result, out = built
    rr = _by_sample(result, EVIL)
    text = _run_page(out, rr.run.run_id).read_text(encoding="utf-8")
    digest = hashlib.sha256((result.study_dir / "fluid_a.csv").read_bytes()).hexdigest()
    assert digest in text and "fluid_a.csv" in text and "20 °C" in text
    assert "Power law (Ostwald–de Waele)" in text and "Newtonian" in text and "selected" in text
    assert "Pa·sⁿ" in text
    n_value = rr.selected.value("n")
    assert study_site.fmt(n_value) in text
    assert 'href="../index.html"' in text
    assert "Read before using these results" in text and "extrapolation" in text
    gel = _by_sample(result, "Gel B & co")
    gel_text = _run_page(out, gel.run.run_id).read_text(encoding="utf-8")
    assert "<code>invalid_point</code>" in gel_text and "badge-warning" in gel_text


def test_index_counts_runs_and_rejected_files(built) -> None:
    result, out = built
    text = (out / "site" / "index.html").read_text(encoding="utf-8")
    counts = dict((label, int(n)) for n, label in
                  re.findall(r'<span class="count">(\d+)</span>\s*(?:rejected )?(\w+)', text))
    assert counts == {"files": 3, "runs": 2, "samples": 2, "file": 1}
    assert "notes.csv" in text and result.rejected[0].reason in text
    for rr in result.runs:
        assert f'href="runs/{rr.run.run_id}.html"' in text
    assert "Read before using these results" in text and "qualified person" in text


def test_site_is_swapped_whole_and_rewrites_identically(built, tmp_path: Path) -> None:
    result, _ = built
    out = tmp_path / "again"
    first = study_site.write_site(result, out)
    assert all(p.is_file() and (out / "site") in p.parents for p in first)
    snapshot = {p.relative_to(out).as_posix(): p.read_bytes() for p in (out / "site").rglob("*") if p.is_file()}
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

    def half_then_fail(result, site_dir: Path):
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
    rr = _by_sample(result, EVIL)
    run = replace(rr.run, columns=dict(rr.run.columns))
    run.columns["shear_rate_apparent"] = run.columns["shear_rate"] * 0.8
    figures, _ = study_site.run_figures(replace(rr, run=run), result.registry)
    for figure in figures:
        (apparent,) = [t for t in figure["figure"]["data"] if t["meta"]["kind"] == "apparent"]
        assert apparent["x"] == pytest.approx(list(run.columns["shear_rate"] * 0.8))
        assert len(apparent["y"]) == run.n_points
    viscosity = next(f for f in figures if f["id"] == "plot-viscosity")["figure"]
    (apparent,) = [t for t in viscosity["data"] if t["meta"]["kind"] == "apparent"]
    expected = run.columns["shear_stress_apparent"] / (run.columns["shear_rate"] * 0.8)
    assert apparent["y"] == pytest.approx(list(expected))


class _StressPowerLaw:
    """A throwaway plugin: the power law written for stress, τ = K·γ̇ⁿ."""

    @hookimpl
    def gammadot_models(self):
        return [Model(id="stress_power_law", title="Power law on stress", target="shear_stress",
                      parameters=(ModelParameter("K", "Pa·s^n", 0.0, np.inf), ModelParameter("n", "1", 0.0, 3.0)),
                      function=lambda shear_rate, K, n: K * np.power(shear_rate, n),
                      guess=lambda x, y: {"K": float(np.exp(np.mean(np.log(y / x)))), "n": 1.0})]


def test_stress_models_are_drawn_as_viscosity_too(tmp_path: Path) -> None:
    result, out = _build(tmp_path, extra=(("stress_power_law_test", _StressPowerLaw()),))
    rr = _by_sample(result, EVIL)
    curves = {c["model"]: c for c in study_site.fit_curves(rr, result.registry)[0]}
    stress_fit, visc_fit = curves["stress_power_law"], curves["power_law"]
    assert stress_fit["rate"] == pytest.approx(visc_fit["rate"])
    assert stress_fit["viscosity"] == pytest.approx(visc_fit["viscosity"], rel=1e-4)
    assert stress_fit["stress"] == pytest.approx(visc_fit["stress"], rel=1e-4)
    figure = json.loads(_parse(_run_page(out, rr.run.run_id)).json_blocks["plot-viscosity"])
    assert "stress_power_law" in {t["meta"]["model"] for t in figure["data"] if t["meta"]["kind"] == "fit"}


def test_script_json_is_inert_and_has_no_nan() -> None:
    text = study_site.script_json({"a": math.nan, "b": [np.inf, np.float64(1.5), np.int64(2)],
                                   "c": "</script><!-- & \u2028", "d": np.array([1.0, np.nan])})
    assert not set(text) & set("<>&\u2028")
    assert "NaN" not in text and "Infinity" not in text
    assert json.loads(text) == {"a": None, "b": [None, 1.5, 2], "c": "</script><!-- & \u2028", "d": [1.0, None]}


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
    ids = ["fluid-a-r1", "../../etc/passwd", "a/b", "A B", "a-b", "con", "", ".hidden", "x" * 400]
    names = study_site.page_names(ids)
    assert names["fluid-a-r1"] == "fluid-a-r1"
    assert len(set(names.values())) == len(ids)
    for name in names.values():
        assert re.fullmatch(r"[a-z0-9][a-z0-9_-]*", name) and len(name) < 160, name
        assert name not in ("con", "index")


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
    assert not page.json_blocks and not [s for s in page.scripts if s.get("src")]
    assert "broken.csv" in index.read_text(encoding="utf-8")

"""The study site in a real browser: Debian's Chromium (/usr/bin/chromium) driven by Playwright.

Every page of the demo site from file://, a page of every kind of the test study (hostile names
included) from a static server on 127.0.0.1: no console error, no request outside the site, no
dialog, plots drawn. Then what a reader does:
sort and filter the runs table with the keyboard, follow the skip link, pick a finding's point,
print a run page; screenshots at laptop, large-monitor and tablet sizes.

No browser is ever downloaded. Without /usr/bin/chromium these tests skip (.ci/run installs
Debian's chromium first and sets GAMMADOT_REQUIRE_BROWSER=1, which turns the skip into a
failure); a browser that is there but cannot start fails with the reason.
"""

from __future__ import annotations

import functools
import os
import re
import threading
from http.server import SimpleHTTPRequestHandler, ThreadingHTTPServer
from pathlib import Path
from typing import Any, Iterator
from urllib.parse import unquote, urlsplit

import pytest

from gammadot import demo
from gammadot.pipeline import process_study, write_outputs
from gammadot.plugin_manager import build_plugin_manager
from gammadot.registry import build_registry

from site_fixtures import EVIL, GEL, MUD, build_site, by_sample

CHROMIUM = Path("/usr/bin/chromium")
CHROMIUM_ARGS = ["--no-sandbox", "--disable-gpu", "--disable-background-networking", "--disable-component-update",
                 "--no-first-run", "--disable-sync"]
REQUIRED = os.environ.get("GAMMADOT_REQUIRE_BROWSER") == "1"
SIZES = {"laptop": (1366, 768), "monitor": (1920, 1080), "tablet": (768, 1024)}
READY = "html[data-site-ready]"

pytestmark = pytest.mark.skipif(not CHROMIUM.exists() and not REQUIRED,
                                reason="Debian's chromium is not at /usr/bin/chromium (apt-get install chromium)")


@pytest.fixture(scope="module")
def browser() -> Iterator[Any]:
    if not CHROMIUM.exists():
        pytest.fail("GAMMADOT_REQUIRE_BROWSER=1 but /usr/bin/chromium is missing: apt-get install -y chromium")
    from playwright.sync_api import sync_playwright

    with sync_playwright() as playwright:
        try:
            launched = playwright.chromium.launch(executable_path=str(CHROMIUM), args=CHROMIUM_ARGS)
        except Exception as exc:  # the browser is there but does not start: say why, never skip
            pytest.fail(f"Chromium at {CHROMIUM} could not start: {type(exc).__name__}: {exc}")
        yield launched
        launched.close()


@pytest.fixture(scope="module")
def study(tmp_path_factory: pytest.TempPathFactory):
    return build_site(tmp_path_factory.mktemp("browser"))


@pytest.fixture(scope="module")
def demo_site(tmp_path_factory: pytest.TempPathFactory) -> tuple[Any, Path]:
    root = tmp_path_factory.mktemp("demo")
    study_dir = demo.write_demo_study(root / "study")
    registry = build_registry(build_plugin_manager(entry_points=False))
    result = process_study(study_dir, registry, out_dir=root / "out")
    write_outputs(result, root / "out")
    return result, root / "out" / "site"


@pytest.fixture(scope="module")
def server(study) -> Iterator[str]:
    """A static server on loopback for the test study's site, stopped after the module."""
    _, out = study

    class Quiet(SimpleHTTPRequestHandler):
        def log_message(self, *args: Any) -> None:
            pass

    httpd = ThreadingHTTPServer(("127.0.0.1", 0), functools.partial(Quiet, directory=str(out / "site")))
    thread = threading.Thread(target=httpd.serve_forever, daemon=True)
    thread.start()
    try:
        yield f"http://127.0.0.1:{httpd.server_address[1]}/"
    finally:
        httpd.shutdown()
        httpd.server_close()
        thread.join(timeout=5)


@pytest.fixture(scope="module")
def shots(tmp_path_factory: pytest.TempPathFactory) -> Path:
    """Where screenshots go: $GAMMADOT_SCREENSHOTS (kept as an artefact) or a temporary folder."""
    folder = Path(os.environ.get("GAMMADOT_SCREENSHOTS") or tmp_path_factory.mktemp("screenshots"))
    folder.mkdir(parents=True, exist_ok=True)
    return folder


class Visit:
    """One browser page with everything it reported: console errors, requests, dialogs."""

    def __init__(self, browser: Any, width: int = 1366, height: int = 768) -> None:
        self.page = browser.new_page(viewport={"width": width, "height": height})
        self.errors: list[str] = []
        self.requests: list[str] = []
        self.dialogs: list[str] = []
        self.page.on("console", lambda m: self.errors.append(m.text) if m.type == "error" else None)
        self.page.on("pageerror", lambda e: self.errors.append(f"page error: {e}"))
        self.page.on("request", lambda r: self.requests.append(r.url))
        self.page.on("dialog", self._dialog)

    def _dialog(self, dialog: Any) -> None:
        self.dialogs.append(dialog.message)
        dialog.dismiss()

    def open(self, url: str) -> Any:
        self.start(url)
        return self.finish(url)

    def start(self, url: str) -> None:
        self.page.goto(url, wait_until="commit")

    def finish(self, url: str) -> Any:
        self.page.wait_for_selector(READY, state="attached", timeout=60_000)
        assert self.page.get_attribute("html", "data-site-ready") == "true", url
        return self.page

    def close(self) -> None:
        self.page.close()


def _inside(url: str, site: Path | None, base: str | None) -> bool:
    """Whether a request stays in the site: a file below ``site``, or a URL below ``base``."""
    parts = urlsplit(url)
    if site is not None and parts.scheme == "file":
        return site.resolve() in Path(unquote(parts.path)).resolve().parents
    return base is not None and url.startswith(base)


def _check_pages(browser: Any, urls: list[str], site: Path | None, base: str | None, tabs: int = 3) -> None:
    """Open every URL (a few tabs at a time: the browser loads them side by side) and check it."""
    visits = [Visit(browser) for _ in range(tabs)]
    try:
        for start in range(0, len(urls), tabs):
            batch = list(zip(visits, urls[start:start + tabs]))
            for visit, url in batch:
                visit.requests.clear()
                visit.start(url)
            for visit, url in batch:
                _check_page(visit, url, site, base)
    finally:
        for visit in visits:
            visit.close()


def _check_page(visit: Visit, url: str, site: Path | None, base: str | None) -> None:
    page = visit.finish(url)
    assert not visit.errors, (url, visit.errors)
    outside = [r for r in visit.requests if not _inside(r, site, base)]
    assert not outside, (url, outside)
    assert not visit.dialogs, (url, visit.dialogs)
    plots = page.locator("div.plot")
    for i in range(plots.count()):
        assert plots.nth(i).locator(".plot-container svg.main-svg").count() >= 1, (url, i)


def test_every_demo_page_loads_cleanly_from_file(browser, demo_site) -> None:
    result, site = demo_site
    pages = sorted(site.rglob("*.html"))
    assert len(pages) == 3 + len(result.runs) + len({rr.run.sample for rr in result.runs})
    _check_pages(browser, [path.as_uri() for path in pages], site, None)


def test_overview_plot_has_one_trace_per_run(browser, demo_site) -> None:
    result, site = demo_site
    visit = Visit(browser)
    try:
        page = visit.open((site / "index.html").as_uri())
        drawn = page.evaluate("""() => {
            const plot = document.getElementById('plot-overview');
            return {runs: plot.data.filter(t => t.meta.style !== 'excluded').map(t => t.meta.run_id),
                    companions: plot.data.filter(t => t.meta.style === 'excluded').map(t => t.meta.run_id),
                    svgTraces: plot.querySelectorAll('.scatterlayer .trace').length};
        }""")
        # one line per run through its fitted points; hollow markers of a run's left-out points apart
        assert drawn["runs"] == [rr.run.run_id for rr in result.runs]
        assert drawn["companions"] == [rr.run.run_id for rr in result.runs if (~rr.in_fit).any()]
        assert drawn["svgTraces"] == len(drawn["runs"]) + len(drawn["companions"])
        # the stress view swaps every trace's values and the axis title
        page.get_by_role("button", name="Shear stress τ").click()
        title = page.evaluate("() => document.getElementById('plot-overview').layout.yaxis.title.text")
        assert title == "Shear stress τ (Pa)"
        assert page.get_by_role("button", name="Shear stress τ").get_attribute("aria-pressed") == "true"
        first = result.runs[0]
        shown = page.evaluate("() => document.getElementById('plot-overview').data[0].y")
        stress = first.run.columns["shear_stress"][first.in_fit]
        assert [round(v, 3) if v is not None else None for v in shown] == \
            [round(float(f"{s:.6g}"), 3) if s > 0 else None for s in stress]
    finally:
        visit.close()


def test_pages_over_a_local_server(browser, study, server) -> None:
    result, out = study
    # one page of every kind (the demo test above opens every page, from file://)
    pages = ["index.html", "methods.html", "downloads.html", f"runs/{by_sample(result, MUD).run.run_id}.html",
             "samples/gel-b-co.html", f"runs/{by_sample(result, EVIL).run.run_id}.html"]
    assert all((out / "site" / page).is_file() for page in pages)
    _check_pages(browser, [server + page for page in pages], None, server)


def test_hostile_sample_name_stays_text(browser, study) -> None:
    result, out = study
    visit = Visit(browser)
    try:
        page = visit.open((out / "site" / "index.html").as_uri())
        cells = page.eval_on_selector_all("#runs-table tbody td:first-child", "cells => cells.map(c => c.textContent)")
        assert EVIL in [c.strip() for c in cells]
        assert page.evaluate("() => document.querySelectorAll('script:not([type])').length") == 2  # ours only
        legend = page.evaluate("() => Array.from(document.querySelectorAll('#plot-overview .legendtext'))"
                               ".map(e => e.textContent)")
        assert EVIL in legend or any(EVIL in text for text in legend)  # Plotly shows the name, as text
        run_page = visit.open((out / "site" / "runs" / f"{by_sample(result, EVIL).run.run_id}.html").as_uri())
        assert EVIL in run_page.inner_text("h1 + p.lead")
        assert not visit.dialogs and not visit.errors
    finally:
        visit.close()


def _column(page: Any, header: str) -> list[str]:
    index = page.evaluate(f"""() => Array.from(document.querySelectorAll('#runs-table thead th'))
        .findIndex(th => th.textContent.trim().startsWith({header!r}))""")
    return page.evaluate(f"""() => Array.from(document.querySelectorAll('#runs-table tbody tr'))
        .filter(r => !r.hidden).map(r => r.cells[{index}].textContent.trim())""")


def test_runs_table_sorts_and_filters_by_keyboard(browser, study) -> None:
    result, out = study
    visit = Visit(browser)
    try:
        page = visit.open((out / "site" / "index.html").as_uri())
        button = page.locator("#runs-table thead th", has_text="Temperature").locator("button")
        button.focus()
        page.keyboard.press("Enter")
        temperatures = sorted(rr.run.temperature for rr in result.runs)
        assert _column(page, "Temperature") == [f"{t:g} °C" for t in temperatures]
        assert page.locator("#runs-table thead th", has_text="Temperature").get_attribute("aria-sort") == "ascending"
        page.keyboard.press("Space")
        assert _column(page, "Temperature") == [f"{t:g} °C" for t in reversed(temperatures)]
        assert page.locator("#runs-table thead th", has_text="Temperature").get_attribute("aria-sort") == "descending"
        # the filter: reach it with Tab from the skip link, type, and the rows and the plot follow
        page.locator("a.skip-link").focus()
        for _ in range(40):
            page.keyboard.press("Tab")
            if page.evaluate("() => document.activeElement.id") == "runs-table-filter":
                break
        else:
            pytest.fail("the runs filter cannot be reached with the Tab key")
        page.keyboard.type("gel b")
        gel_runs = [rr.run.run_id for rr in result.runs if rr.run.sample == GEL]
        assert [c.split()[0] for c in _column(page, "Run")] == [rid for rid in
                                                                 reversed([rr.run.run_id for rr in sorted(
                                                                     result.runs, key=lambda r: r.run.temperature)])
                                                                 if rid in gel_runs]
        assert page.inner_text("[data-tools-for='runs-table'] [data-count]") == f"Showing 2 of {len(result.runs)} runs."
        visible = page.evaluate("() => document.getElementById('plot-overview').data"
                                ".filter(t => t.visible !== false).map(t => t.meta.run_id)")
        assert sorted(set(visible)) == sorted(gel_runs)  # a run's line and its left-out points
        for _ in range(len("gel b")):
            page.keyboard.press("Backspace")
        page.select_option("#runs-table-verdict", "fail")
        fails = sorted({v.run_id for v in result.specs if v.verdict == "fail" and not v.straddles_limit})
        assert sorted(c.split()[0] for c in _column(page, "Run")) == fails
    finally:
        visit.close()


def test_skip_link_is_first_and_moves_focus(browser, study) -> None:
    _, out = study
    visit = Visit(browser)
    try:
        page = visit.open((out / "site" / "methods.html").as_uri())
        page.keyboard.press("Tab")
        assert page.evaluate("() => document.activeElement.className") == "skip-link"
        assert page.evaluate("() => getComputedStyle(document.activeElement).left") != "-999px"  # shown on focus
        page.keyboard.press("Enter")
        assert page.evaluate("() => location.hash") == "#main"
    finally:
        visit.close()


def test_a_finding_marks_its_point_on_the_plots(browser, study) -> None:
    result, out = study
    mud = by_sample(result, MUD)
    flagged = sorted({f.point_index for f in mud.findings if f.point_index is not None})
    assert flagged
    index = flagged[-1]
    visit = Visit(browser)
    try:
        page = visit.open((out / "site" / "runs" / f"{mud.run.run_id}.html").as_uri())
        page.locator(f".findings a.point-link[data-point='{index}']").first.click()
        marked = page.evaluate("""() => {
            const plot = document.getElementById('plot-viscosity');
            const star = plot.data.find(t => t.meta.kind === 'highlight');
            return {x: star.x, y: star.y};
        }""")
        rate = float(mud.run.columns["shear_rate"][index])
        eta = float(mud.run.columns["viscosity"][index])
        assert marked["x"] == [pytest.approx(rate, rel=1e-5)] and marked["y"] == [pytest.approx(eta, rel=1e-5)]
        assert page.get_attribute(f"#point-{index}", "class") == "excluded picked"
        assert f"Point {index}" in page.inner_text("#pick-status")
        # and back: a click on the point in the plot names its findings
        page.evaluate("() => document.getElementById('plot-viscosity').scrollIntoView()")
        box = page.evaluate(f"""() => {{
            const plot = document.getElementById('plot-viscosity');
            const layout = plot._fullLayout, size = layout._size;
            const trace = plot.data.findIndex(t => t.meta.kind === 'points' && t.customdata.includes({index}));
            const k = plot.data[trace].customdata.indexOf({index});
            const rect = plot.getBoundingClientRect();
            return {{x: rect.left + size.l + layout.xaxis.l2p(Math.log10(plot.data[trace].x[k])),
                     y: rect.top + size.t + layout.yaxis.l2p(Math.log10(plot.data[trace].y[k]))}};
        }}""")
        page.evaluate("() => { document.getElementById('pick-status').textContent = ''; }")
        page.mouse.move(box["x"], box["y"])
        page.mouse.click(box["x"], box["y"])
        page.wait_for_function("() => document.getElementById('pick-status').textContent.length > 0", timeout=5000)
        named = len([f for f in mud.findings if f.point_index == index])
        assert f"Point {index} is marked" in page.inner_text("#pick-status") and f"{named} finding" in \
            page.inner_text("#pick-status")
    finally:
        visit.close()


def test_print_hides_navigation_and_opens_closed_parts(browser, study, shots) -> None:
    result, out = study
    rr = by_sample(result, EVIL)
    visit = Visit(browser)
    try:
        page = visit.open((out / "site" / "runs" / f"{rr.run.run_id}.html").as_uri())
        hidden_part = "details.more:not([open]) ul.params"
        assert page.locator(hidden_part).first.is_hidden()
        page.emulate_media(media="print")
        for selector in (".site-header", ".site-nav", ".page-nav", ".breadcrumb", ".back", ".modebar-container"):
            assert page.locator(selector).first.is_hidden(), selector
        assert page.locator("main h1").is_visible() and page.locator(".cautions").is_visible()
        assert page.locator(hidden_part).first.is_visible()  # closed details print their content
        pdf = page.pdf(format="A4", print_background=False)
        (shots / "run-page-A4.pdf").write_bytes(pdf)
        pages = len(re.findall(rb"/Type\s*/Page\b(?!s)", pdf))
        assert pdf.startswith(b"%PDF") and 2 <= pages <= 12, pages
        letter = page.pdf(format="Letter")
        assert letter.startswith(b"%PDF")
        # after printing, the plots have their screen size again (they were laid out for paper)
        widths = page.evaluate("() => Array.from(document.querySelectorAll('div.plot'))"
                               ".map(p => [p._fullLayout.width, p.clientWidth])")
        assert widths and all(abs(layout - box) <= 2 for layout, box in widths), widths
    finally:
        visit.close()


@pytest.mark.parametrize("size", list(SIZES))
def test_screenshots_fit_the_screen(browser, study, shots, size: str) -> None:
    result, out = study
    width, height = SIZES[size]
    visit = Visit(browser, width, height)
    try:
        run = by_sample(result, GEL, 25.0).run.run_id
        for name, path in (("overview", "index.html"), ("run", f"runs/{run}.html")):
            page = visit.open((out / "site" / path).as_uri())
            overflow = page.evaluate("() => document.documentElement.scrollWidth - window.innerWidth")
            assert overflow <= 1, (size, name, overflow)  # wide tables scroll inside their box
            widths = page.evaluate("() => Array.from(document.querySelectorAll('.main-svg'))"
                                   ".map(s => s.getBoundingClientRect().right)")
            assert all(right <= width + 1 for right in widths), (size, name, widths)
            target = shots / f"{name}-{width}x{height}.png"
            page.screenshot(path=str(target), full_page=True)
            assert target.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
        assert not visit.errors
    finally:
        visit.close()


@pytest.fixture(scope="module")
def dense_study(tmp_path_factory: pytest.TempPathFactory):
    """The test study written as a large one is: its overview drawn as merged line traces."""
    from gammadot.plugins import site_plots

    saved = site_plots.DENSE_POINTS
    site_plots.DENSE_POINTS = 10
    try:
        return build_site(tmp_path_factory.mktemp("dense"))
    finally:
        site_plots.DENSE_POINTS = saved


def test_a_dense_overview_merges_traces_and_still_filters(browser, dense_study) -> None:
    import math

    result, out = dense_study

    def drawable(rr, key: str) -> list[float]:
        values = rr.run.columns[key]
        rates = rr.run.columns["shear_rate"]
        return sorted(round(float(v), 4) for v, g in zip(values, rates)
                      if math.isfinite(v) and v > 0 and math.isfinite(g) and g > 0)

    def drawn(page: Any) -> dict:
        return page.evaluate("""() => {
            const plot = document.getElementById('plot-overview');
            const ys = plot.data.flatMap(t => t.y.filter(v => v !== null));
            return {traces: plot.data.length, kinds: plot.data.map(t => t.meta.kind), ys: ys};
        }""")

    visit = Visit(browser)
    try:
        page = visit.open((out / "site" / "index.html").as_uri())
        shown = drawn(page)
        assert set(shown["kinds"]) == {"merged"} and shown["traces"] < len(result.runs) + 1
        # every drawable point exactly once (left-out points as hollow markers, off their run's line)
        expected = sorted(v for rr in result.runs for v in drawable(rr, "viscosity"))
        assert sorted(round(v, 4) for v in shown["ys"]) == pytest.approx(expected, rel=1e-4)
        page.fill("#runs-table-filter", "gel")
        gel = [rr for rr in result.runs if rr.run.sample == GEL]
        assert sorted(round(v, 4) for v in drawn(page)["ys"]) == pytest.approx(
            sorted(v for rr in gel for v in drawable(rr, "viscosity")), rel=1e-4)
        page.get_by_role("button", name="Shear stress τ").click()
        assert sorted(round(v, 4) for v in drawn(page)["ys"]) == pytest.approx(
            sorted(v for rr in gel for v in drawable(rr, "shear_stress")), rel=1e-4)
        assert not visit.errors
    finally:
        visit.close()

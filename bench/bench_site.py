"""Benchmark: the study site writer, and how fast the overview page becomes usable.

Run: `python bench/bench_site.py [--runs 200 500]` (from the repository, with gammadot installed).

For each study size (generated as in bench_study.py: files of two runs, 25 points per run,
shear-thinning data with 1 % noise) the study is processed once, then:
- the site writer alone (`study_site.write_site`), best of three, and the site's size;
- with Debian's chromium at /usr/bin/chromium (driven by Playwright; nothing is downloaded):
  the time from navigation to the page's ready mark (tables wired, every plot drawn) of the
  overview, as a ratio to a bare page holding one small plot with the same plotly.min.js,
  median of five alternating loads from file://.
"""

from __future__ import annotations

import argparse
import shutil
import statistics
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

from gammadot.pipeline import process_study
from gammadot.plugin_manager import build_plugin_manager
from gammadot.plugins import study_site
from gammadot.plugins.parquet_tables import write_tables
from gammadot.registry import build_registry

POINTS = 25
CHROMIUM = Path("/usr/bin/chromium")
CHROMIUM_ARGS = ["--no-sandbox", "--disable-gpu", "--disable-background-networking", "--disable-component-update",
                 "--no-first-run", "--disable-sync"]
BARE_PAGE = """<!doctype html><html lang="en"><head><meta charset="utf-8"><title>bare</title></head><body>
<div id="p" style="width:600px;height:400px"></div><script src="assets/plotly.min.js"></script>
<script>Plotly.newPlot("p", [{x: [1, 2, 3], y: [2, 1, 3], type: "scatter"}], {}).then(function () {
document.documentElement.setAttribute("data-site-ready", "true"); });</script></body></html>
"""


def write_study(folder: Path, runs: int) -> None:
    rng = np.random.default_rng(2026)
    rate = np.geomspace(0.1, 1000.0, POINTS)
    for f in range(runs // 2):
        blocks = []
        for r in range(2):
            eta = 5.0 * (1 + (rate / 2.0) ** 2) ** -0.3 * (1 + 0.01 * rng.standard_normal(POINTS))
            rows = "\n".join(f"{g:.6g},{e * 1e3:.6g}" for g, e in zip(rate, eta))
            blocks.append(f"sample: bench-{f % 40:03d}\ntemperature: {20 + 20 * r} °C\n"
                          f"Shear rate [1/s],Viscosity [mPa·s]\n{rows}\n")
        (folder / f"bench-{f:03d}.csv").write_text("\n".join(blocks), encoding="utf-8")


def site_size(site: Path) -> tuple[int, float]:
    files = [p for p in site.rglob("*") if p.is_file()]
    return len(files), sum(p.stat().st_size for p in files) / 1e6


def time_to_ready(site: Path, repeats: int = 5) -> tuple[float, float] | None:
    """Median seconds to the ready mark: (overview, bare page with one plot)."""
    if not CHROMIUM.exists():
        return None
    from playwright.sync_api import sync_playwright

    bare = site / "_bare.html"
    bare.write_text(BARE_PAGE, encoding="utf-8")
    times: dict[str, list[float]] = {"index.html": [], "_bare.html": []}
    try:
        with sync_playwright() as playwright:
            browser = playwright.chromium.launch(executable_path=str(CHROMIUM), args=CHROMIUM_ARGS)
            for _ in range(repeats):
                for name in times:
                    page = browser.new_page(viewport={"width": 1366, "height": 768})
                    start = time.perf_counter()
                    page.goto((site / name).as_uri())
                    page.wait_for_selector("html[data-site-ready]", state="attached", timeout=120_000)
                    times[name].append(time.perf_counter() - start)
                    page.close()
            browser.close()
    finally:
        bare.unlink()
    return statistics.median(times["index.html"]), statistics.median(times["_bare.html"])


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--runs", type=int, nargs="+", default=[200, 500])
    args = parser.parse_args()
    registry = build_registry(build_plugin_manager(entry_points=False))
    for runs in args.runs:
        with tempfile.TemporaryDirectory() as tmp:
            study = Path(tmp) / "study"
            study.mkdir()
            write_study(study, runs)
            start = time.perf_counter()
            result = process_study(study, registry, out_dir=Path(tmp) / "out")
            processed = time.perf_counter() - start
            out = Path(tmp) / "out"
            write_tables(result, out)  # as in a real pass: the tables are there before the site
            best = float("inf")
            for _ in range(3):
                start = time.perf_counter()
                study_site.write_site(result, out)
                best = min(best, time.perf_counter() - start)
            files, megabytes = site_size(out / "site")
            print(f"{runs} runs: processing {processed:.1f} s; site writer {best:.2f} s (best of 3), "
                  f"{files} files, {megabytes:.1f} MB")
            ready = time_to_ready(out / "site")
            if ready is None:
                print("  (no /usr/bin/chromium: time to interactive not measured)")
            else:
                overview, bare = ready
                print(f"  overview ready in {overview:.2f} s, bare one-plot page {bare:.2f} s: "
                      f"ratio {overview / bare:.2f} (target < 1.5)")
            shutil.rmtree(out, ignore_errors=True)
        sys.stdout.flush()


if __name__ == "__main__":
    main()

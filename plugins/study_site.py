"""Writer ``study_site``: a static HTML site of the study in ``OUT/site/``.

Pages: the study overview (``index.html``), one page per run (``runs/``), one per sample
(``samples/``), the methods (``methods.html``) and the downloads (``downloads.html``, with the
Parquet tables and CSV copies in ``downloads/``). The site is self-contained: pages, one
stylesheet, one small script of our own and a copy of the installed ``plotly.min.js``. Every
link is relative and no page names another host, so the folder can be opened from disk
(``file://``), served by any static web server, archived or copied as it is.

Pages are rendered with Jinja2 (autoescape on: every text taken from input files is
escaped). Plot data are embedded as JSON in ``<script type="application/json">`` blocks,
with ``<``, ``>`` and ``&`` escaped so that no text from a file can end the block. The
site is built in a temporary sibling folder and swapped into place by renames, so a
reader sees the old site or the new one, never half of one. The pieces: page contents in
:mod:`.site_pages`, figures in :mod:`.site_plots`, numbers and JSON in :mod:`.site_format`,
downloads in :mod:`.site_downloads`.
"""

from __future__ import annotations

import functools
import os
import shutil
from importlib import resources
from pathlib import Path
from typing import Any

from gammadot.hookspecs import hookimpl
from gammadot.records import Writer

from .site_downloads import write_downloads
from .site_format import equation_html, fmt, fmt_estimate, fmt_unit, page_names, plot_text, script_json
from .site_pages import (Names, correction_summary, methods_context, overview_context, run_context,
                         sample_context, software_version)
from .site_plots import fit_curves, flow_curve_overlay, residual_figure, run_figures

SITE_DIR = "site"
TEMPLATE_PACKAGE = "gammadot.site_template"
PLOTLY_JS = ("package_data", "plotly.min.js")
STATIC_FILES = ("style.css", "site.js", "favicon.svg")


# --------------------------------------------------------------------------- templates

def _load_template(name: str) -> str | None:
    resource = resources.files(TEMPLATE_PACKAGE).joinpath(name)
    return resource.read_text(encoding="utf-8") if resource.is_file() else None


@functools.lru_cache(maxsize=1)
def template_environment() -> Any:
    """The Jinja2 environment: package templates, autoescape on, undefined names fail.
    One per process: a watcher compiles the templates once."""
    import jinja2
    from markupsafe import Markup

    env = jinja2.Environment(loader=jinja2.FunctionLoader(_load_template), autoescape=True,
                             undefined=jinja2.StrictUndefined, trim_blocks=True, lstrip_blocks=True,
                             keep_trailing_newline=True)
    env.filters["num"] = fmt
    env.filters["unit"] = fmt_unit
    env.filters["script_json"] = lambda data: Markup(script_json(data))
    env.filters["equation"] = lambda text: Markup(equation_html(text))
    return env


# --------------------------------------------------------------------------- writing

def _copy_assets(site_dir: Path) -> list[Path]:
    assets = site_dir / "assets"
    assets.mkdir()
    plotly_js = resources.files("plotly").joinpath(*PLOTLY_JS)
    with plotly_js.open("rb") as source, open(assets / "plotly.min.js", "wb") as target:
        shutil.copyfileobj(source, target)
    written = [assets / "plotly.min.js"]
    for static in STATIC_FILES:
        data = resources.files(TEMPLATE_PACKAGE).joinpath("static", static).read_bytes()
        (assets / static).write_bytes(data)
        written.append(assets / static)
    return written


def _write(env: Any, template: str, path: Path, context: dict[str, Any]) -> Path:
    path.write_text(env.get_template(template).render(**context), encoding="utf-8")
    return path


def render_site(result: Any, site_dir: Path, tables_dir: Path | None = None) -> list[Path]:
    """Render every page and asset into ``site_dir`` (which must not exist yet).

    ``tables_dir`` is where the Parquet tables of this pass are (``OUT/tables`` of the staging
    folder); they are copied into ``site_dir/downloads`` (built here when missing).
    """
    env = template_environment()
    common = {"study_title": result.config.title, "version": software_version()}
    groups: dict[str | None, list[Any]] = {}
    for rr in result.runs:
        groups.setdefault(rr.run.sample, []).append(rr)
    names = Names(runs=page_names([rr.run.run_id for rr in result.runs]),
                  samples=page_names(list(groups), prefix="sample"))
    for folder in ("runs", "samples"):
        (site_dir / folder).mkdir(parents=True, exist_ok=True)
    written = _copy_assets(site_dir)
    tables, files = write_downloads(result, site_dir, tables_dir)
    written += files

    written.append(_write(env, "index.html.j2", site_dir / "index.html",
                          {**common, **overview_context(result, names)}))
    written.append(_write(env, "methods.html.j2", site_dir / "methods.html", {**common, **methods_context(result)}))
    written.append(_write(env, "downloads.html.j2", site_dir / "downloads.html",
                          {**common, "root": "", "page": "downloads", "tables": tables, "has_plots": False}))
    run_template = env.get_template("run.html.j2")
    for rr in result.runs:
        page = site_dir / "runs" / f"{names.runs[rr.run.run_id]}.html"
        page.write_text(run_template.render(**common, **run_context(rr, result, names)), encoding="utf-8")
        written.append(page)
    sample_template = env.get_template("sample.html.j2")
    for sample, runs in groups.items():
        page = site_dir / "samples" / f"{names.samples[sample]}.html"
        page.write_text(sample_template.render(**common, **sample_context(sample, runs, result, names)),
                        encoding="utf-8")
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
        written = render_site(result, tmp, tables_dir=out_dir / "tables")
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


__all__ = ["correction_summary", "fit_curves", "flow_curve_overlay", "fmt", "fmt_estimate", "gammadot_writers",
           "page_names", "plot_text", "render_site", "residual_figure", "run_figures", "script_json", "write_site"]

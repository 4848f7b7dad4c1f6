"""Rendering the run-page sections that plugins add (hook ``gammadot_run_sections``).

The study site calls :func:`run_sections` for each run page. A section's HTML is the
plugin's (it escapes its own texts); its title is escaped by the site template. A render that
raises or returns something other than text becomes a one-line note naming the plugin, and
the page is written anyway.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any


@dataclass(frozen=True)
class SectionView:
    """What the run page shows for one section: heading, HTML, or the note of a failure."""

    id: str
    title: str
    html: Any  # markupsafe.Markup: inserted without escaping
    error: str = ""


def run_sections(run_result: Any, registry: Any) -> list[SectionView]:
    """The sections of one run page, in ascending ``order`` (then id)."""
    from markupsafe import Markup

    provided = sorted(getattr(registry, "sections", {}).values(), key=lambda p: (p.record.order, p.record.id))
    views = []
    for item in provided:
        section = item.record
        try:
            html = section.render(run_result)
        except Exception as exc:  # a plugin's failure must not stop the site
            views.append(SectionView(section.id, section.title, Markup(""),
                                     f"section plugin '{item.plugin}' failed: {type(exc).__name__}: {exc}"))
            continue
        if html is None:
            continue
        if not isinstance(html, str):
            views.append(SectionView(section.id, section.title, Markup(""),
                                     f"section plugin '{item.plugin}' returned {type(html).__name__}, not HTML text"))
            continue
        views.append(SectionView(section.id, section.title, Markup(html)))
    return views

"""A pytest plugin for plugin authors: run a small study through gammadot's real pipeline.

Installed with gammadot and registered through the ``pytest11`` entry point (name
``gammadot``), so a plugin package's tests can use the ``gammadot_study`` fixture without
importing anything::

    import numpy as np
    import acme_thinning                                   # the plugin under test

    def test_the_model_is_fitted(gammadot_study):
        study = gammadot_study(acme_thinning)              # built-ins + this plugin, nothing else
        rate = np.geomspace(0.1, 100, 15)
        study.add_export("run.csv", {"Shear rate [1/s]": rate,
                                     "Viscosity [Pa·s]": acme_thinning.thinning(rate, 8.0, 2.0)})
        out = study.run()                                  # import, convert, check, fit, write
        fits = out.table("fits")                           # OUT/tables/fits.parquet as dicts

The study gets the built-in plugins and the plugins passed in, never a plugin installed on
the machine (no entry points are loaded, ``GAMMADOT_BLOCK_PLUGINS`` is cleared), so a test
means the same on a developer's laptop and in CI. Plugins pass through the same compatibility
rule as at start-up (their ``GAMMADOT_HOOKSPEC``). Block a built-in by name with
``gammadot_study(plugin, block=["basic_checks"])``.

Importing this module loads only pytest: pytest imports every ``pytest11`` plugin at start.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING, Any, Iterable, Mapping, Sequence

import pytest

if TYPE_CHECKING:
    from .pipeline import StudyResult
    from .registry import Registry


@dataclass
class StudyOutput:
    """A processed and written study: the result object and its output folder."""

    result: "StudyResult"
    out_dir: Path

    @property
    def registry(self) -> "Registry":
        """The catalogue the study ran with (built-ins and the plugins under test)."""
        return self.result.registry

    @property
    def rejected(self) -> list[str]:
        """Files that could not be used, one line each (``file:line: reason``)."""
        return [r.describe() for r in self.result.rejected]

    def table(self, name: str) -> list[dict[str, Any]]:
        """Rows of ``OUT/tables/<name>.parquet`` as dicts (SI units)."""
        import pyarrow.parquet as pq

        return pq.read_table(self.out_dir / "tables" / f"{name}.parquet").to_pylist()

    def site_index(self) -> str:
        """The HTML of the study site's overview page."""
        return (self.out_dir / "site" / "index.html").read_text(encoding="utf-8")

    def run_page(self, run_id: str) -> str:
        """The HTML of one run's page of the study site."""
        from gammadot.plugins.study_site import page_names

        names = page_names([r.run.run_id for r in self.result.runs])
        return (self.out_dir / "site" / "runs" / f"{names[run_id]}.html").read_text(encoding="utf-8")


class PluginStudy:
    """A study folder under the test's temporary directory, processed with chosen plugins."""

    def __init__(self, folder: Path, plugins: Sequence[tuple[str, object]], block: Iterable[str]) -> None:
        self.folder = folder
        self.plugins = list(plugins)
        self.block = tuple(block)
        folder.mkdir(parents=True, exist_ok=True)

    def write(self, relative: str, content: str | bytes) -> Path:
        """Write an input file of the study (text as UTF-8); returns its path."""
        path = self.folder / relative
        path.parent.mkdir(parents=True, exist_ok=True)
        if isinstance(content, str):
            path.write_text(content, encoding="utf-8")
        else:
            path.write_bytes(content)
        return path

    def config(self, toml_text: str) -> Path:
        """Write ``study.toml``."""
        return self.write("study.toml", toml_text)

    def add_export(self, relative: str, columns: Mapping[str, Sequence[float]],
                   metadata: Mapping[str, str] | None = None) -> Path:
        """Write a comma-separated export: ``key: value`` lines, then one column per entry.

        Column keys are header cells with their units (``"Shear rate [1/s]"``); values are
        written with ``repr`` so they read back exactly.
        """
        names = list(columns)
        rows = zip(*(list(columns[n]) for n in names))
        lines = [f"{key}: {value}" for key, value in (metadata or {}).items()]
        lines.append(",".join(names))
        lines += [",".join(repr(float(v)) for v in row) for row in rows]
        return self.write(relative, "\n".join(lines) + "\n")

    def registry(self) -> "Registry":
        """The catalogue of the built-ins and the plugins under test (entry points never)."""
        from .plugin_manager import build_plugin_manager
        from .registry import build_registry

        return build_registry(build_plugin_manager(self.block, entry_points=False, extra=self.plugins))

    def run(self, out: Path | None = None) -> StudyOutput:
        """Process the study and write its tables and site (default: ``<folder>/_gammadot``)."""
        from .pipeline import default_out_dir, process_study, write_outputs

        out_dir = out or default_out_dir(self.folder)
        result = process_study(self.folder, self.registry(), out_dir=out_dir)
        write_outputs(result, out_dir)
        return StudyOutput(result, out_dir)


def _named(plugin: object) -> tuple[str, object]:
    """A plugin with the name it is registered under: its module or class name."""
    name = getattr(plugin, "__name__", None) or type(plugin).__name__
    return str(name).rsplit(".", 1)[-1], plugin


@pytest.fixture
def gammadot_study(tmp_path: Path, monkeypatch: pytest.MonkeyPatch):
    """Make a study that runs through the real pipeline with only the plugins given.

    Call it with plugin modules (or objects) and optionally ``named={"name": plugin}``,
    ``block=["built-in name"]`` and ``folder="name"``; returns a :class:`PluginStudy`.
    """
    from .plugin_manager import BLOCK_ENV, NO_ENTRY_POINTS_ENV

    monkeypatch.delenv(BLOCK_ENV, raising=False)
    monkeypatch.setenv(NO_ENTRY_POINTS_ENV, "1")
    count = 0

    def make(*plugins: object, named: Mapping[str, object] | None = None, block: Iterable[str] = (),
             folder: str | None = None) -> PluginStudy:
        nonlocal count
        count += 1
        chosen = [_named(p) for p in plugins] + list((named or {}).items())
        return PluginStudy(tmp_path / (folder or f"study-{count}"), chosen, block)

    return make

"""Finding one run of a study by its id, as imported, for ``gammadot export``.

The run is read again from its source file (not from a processed study's tables): the
tables hold the values after geometry conversion, while an export must hold what was
measured, so that importing the export reproduces the study's tables. Run ids are assigned
exactly as :func:`gammadot.pipeline.process_study` assigns them (file order, repeats
numbered), without converting, checking or fitting anything.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

from .config import load_study_config
from .datamodel import Run
from .discovery import find_input_files
from .importing import import_file, number_repeated_run_ids
from .pipeline import default_out_dir
from .registry import Registry


@dataclass(frozen=True)
class RunNotFound(LookupError):
    """No run of the study has the id asked for; ``known`` lists the ids there are."""

    run_id: str
    known: tuple[str, ...]

    def __str__(self) -> str:
        shown = ", ".join(self.known[:10]) + (", ..." if len(self.known) > 10 else "")
        return f"no run '{self.run_id}' in the study (runs: {shown or 'none'})"


def imported_runs(study: Path, registry: Registry) -> list[Run]:
    """Every run of ``study`` as imported, with the ids a study run gives them."""
    config = load_study_config(study, registry)
    suffixes = [s for p in registry.importers.values() for s in p.record.suffixes]
    runs: list[Run] = []
    for path in find_input_files(study, default_out_dir(study), suffixes):
        runs.extend(import_file(path, path.relative_to(study).as_posix(), registry, config).runs)
    number_repeated_run_ids(runs)  # as the pipeline does
    return runs


def find_run(study: Path, run_id: str, registry: Registry) -> Run:
    """The run ``run_id`` of ``study`` as imported, or :class:`RunNotFound`."""
    runs = imported_runs(study, registry)
    for run in runs:
        if run.run_id == run_id:
            return run
    raise RunNotFound(run_id, tuple(r.run_id for r in runs))

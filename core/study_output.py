"""A study's outputs as one new version of its output folder.

All writers (tables, site, rejected list, third-party writers) write into a staging folder;
the folder is sealed with a manifest and committed as a whole (:mod:`gammadot.versioned`), so a
reader of ``OUT/tables`` and ``OUT/site`` never sees the tables of one pass with the site of
another, and a crash in the middle leaves the previous pass in place.

The manifest records what the version was made from (the study fingerprint, every input file
with its SHA-256, gammadot's version) and what it contains (counts, and the SHA-256 of every
file): the watcher compares fingerprints to skip a pass that would change nothing, and
``gammadot publish`` checks the files before copying them.
"""

from __future__ import annotations

import shutil
from dataclasses import dataclass
from datetime import datetime, timezone
from pathlib import Path
from typing import Callable

from .fingerprint import study_fingerprint
from .pipeline import StudyResult, WriterFailure, write_outputs
from .versioned import VersionedFolder, new_version_id, seal

# The writer whose failure makes a pass unusable: without tables there is nothing to publish.
ESSENTIAL_WRITERS = ("parquet_tables",)


@dataclass(frozen=True)
class CommittedVersion:
    """A version made current: its folder, id, and the study fingerprint it was made from."""

    path: Path
    version_id: str
    fingerprint: str


def result_inputs(result: StudyResult) -> list[tuple[str, str | None]]:
    """(relative path, SHA-256 or ``None`` if unreadable) of every file the pass looked at."""
    return [(f.source_file, f.sha256) for f in result.files]


def result_fingerprint(result: StudyResult, code: str) -> str:
    """The study fingerprint of a finished pass (code, settings, input bytes)."""
    return study_fingerprint(code, result.config, result_inputs(result))


def build_manifest(result: StudyResult, fingerprint: str, version_id: str) -> dict[str, object]:
    """What goes into ``manifest.json`` besides the file inventory."""
    from . import __version__

    return {
        "version": version_id,
        "created": datetime.now(timezone.utc).isoformat(timespec="milliseconds").replace("+00:00", "Z"),
        "gammadot": __version__,
        "study": result.config.title,
        "study_folder": result.study_dir.resolve().name,
        "fingerprint": fingerprint,
        "inputs": [{"file": rel, "sha256": sha} for rel, sha in result_inputs(result)],
        "counts": {"files": len(result.files), "runs": len(result.runs), "rejected": len(result.rejected)},
        "writer_failures": [{"writer": f.writer, "plugin": f.plugin, "message": f.message}
                            for f in result.writer_failures],
    }


def write_study_version(result: StudyResult, out_dir: Path, *, code: str,
                        on_failure: Callable[[WriterFailure], None] | None = None) -> CommittedVersion | None:
    """Write every output of ``result`` as a new current version of ``out_dir``.

    Returns ``None`` (and keeps the previous version) when an essential writer failed; the
    failures are in ``result.writer_failures``. ``result.written`` lists the paths through
    the stable links (``OUT/tables/...``), not the version folder.
    """
    folder = VersionedFolder(out_dir)
    fingerprint = result_fingerprint(result, code)
    with folder.lock():
        folder.clean_leftovers()
        staging = folder.staging()
        try:
            written_before = len(result.written)
            write_outputs(result, staging, on_failure=on_failure)
            if any(f.writer in ESSENTIAL_WRITERS for f in result.writer_failures):
                del result.written[written_before:]
                return None
            version_id = new_version_id()
            seal(staging, build_manifest(result, fingerprint, version_id))
            path = folder.commit(staging, version_id)
        finally:
            if staging.exists():
                shutil.rmtree(staging, ignore_errors=True)
    result.written[written_before:] = [out_dir / p.relative_to(staging) if p.is_relative_to(staging) else p
                                       for p in result.written[written_before:]]
    return CommittedVersion(path, version_id, fingerprint)


__all__ = ["CommittedVersion", "ESSENTIAL_WRITERS", "build_manifest", "result_fingerprint", "result_inputs",
           "write_study_version"]

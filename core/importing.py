"""Importing one file: pick the importer, read the runs, resolve them, or reject the file.

Whatever happens in here is recorded against the file: an unreadable file, an importer
that raises, a unit of the wrong dimension all become a :class:`RejectedFile` with one line
naming the file, the line and the problem, and the rest of the study goes on.
"""

from __future__ import annotations

import hashlib
import re
from dataclasses import dataclass, field
from pathlib import Path
from typing import Sequence

from .columns import build_run
from .config import StudyConfig
from .datamodel import Run
from .records import ImportContext, ImportRejection
from .registry import Provided, Registry

HEAD_BYTES = 65536


@dataclass(frozen=True)
class RejectedFile:
    """A file that could not be used, with where and why (one line for people)."""

    source_file: str
    line: int | None
    reason: str
    plugin: str | None = None

    def describe(self) -> str:
        """``file:line: reason`` as printed on the console."""
        where = f"{self.source_file}:{self.line}" if self.line else self.source_file
        by = f" [plugin {self.plugin}]" if self.plugin else ""
        return f"{where}: {self.reason}{by}"


@dataclass
class FileOutcome:
    """What importing one file gave: its runs, or the reason it was rejected."""

    source_file: str
    sha256: str | None
    importer: str | None
    runs: list[Run] = field(default_factory=list)
    rejected: RejectedFile | None = None


def sha256_of(data: bytes) -> str:
    """Hex SHA-256 of a file's bytes (recorded with every run for traceability)."""
    return hashlib.sha256(data).hexdigest()


def slug(text: str) -> str:
    """A lower-case, URL- and file-safe form of ``text``."""
    return re.sub(r"[^a-z0-9]+", "-", text.lower()).strip("-") or "run"


def number_repeated_run_ids(runs: Sequence[Run]) -> None:
    """Two paths can slug alike ("a b.csv", "a-b.csv"): number the repeats ``-2``, ``-3`` …
    in file order, so every run id of a study is unique (in place)."""
    seen: dict[str, int] = {}
    for run in runs:
        seen[run.run_id] = seen.get(run.run_id, 0) + 1
        if seen[run.run_id] > 1:
            run.run_id = f"{run.run_id}-{seen[run.run_id]}"


def choose_importer(registry: Registry, path: Path, head: bytes) -> tuple[Provided | None, list[str]]:
    """The importer with the highest sniff confidence (> 0); later registration wins ties.

    Returns the choice and messages of importers whose ``sniff`` raised.
    """
    best: tuple[float, Provided | None] = (0.0, None)
    errors = []
    for provided in registry.importers.values():
        try:
            confidence = float(provided.record.sniff(path, head))
        except Exception as exc:  # a plugin's sniff must never stop the study
            errors.append(f"importer plugin '{provided.plugin}' failed to sniff: {type(exc).__name__}: {exc}")
            continue
        if confidence > 0 and confidence >= best[0]:
            best = (confidence, provided)
    return best[1], errors


def import_file(path: Path, rel: str, registry: Registry, config: StudyConfig) -> FileOutcome:
    """Read one file into runs, or reject it with a one-line reason."""
    try:
        data = path.read_bytes()
    except OSError as exc:
        reason = exc.strerror or type(exc).__name__
        return FileOutcome(rel, None, None, rejected=RejectedFile(rel, None, f"cannot be read: {reason.lower()}"))
    digest = sha256_of(data)
    provided, sniff_errors = choose_importer(registry, path, data[:HEAD_BYTES])
    if provided is None:
        reason = sniff_errors[0] if sniff_errors else "no installed importer recognises this file"
        return FileOutcome(rel, digest, None, rejected=RejectedFile(rel, None, reason))
    outcome = FileOutcome(rel, digest, provided.record.id)
    try:
        raw_runs = list(provided.record.read(path, ImportContext(column_map=config.columns)))
        if not raw_runs:
            raise ImportRejection("no runs found in the file")
        for index, raw in enumerate(raw_runs, 1):
            run_id = f"{slug(str(Path(rel).with_suffix('')))}-r{index}"
            outcome.runs.append(build_run(raw, run_id=run_id, source_file=rel, source_sha256=digest,
                                          column_map=config.columns))
    except ImportRejection as exc:
        outcome.runs.clear()
        outcome.rejected = RejectedFile(rel, exc.line, exc.reason)
    except OSError as exc:
        outcome.runs.clear()
        outcome.rejected = RejectedFile(rel, None, f"cannot be read: {(exc.strerror or str(exc)).lower()}")
    except Exception as exc:  # a third-party importer's bug is recorded, not fatal
        outcome.runs.clear()
        outcome.rejected = RejectedFile(rel, None, f"importer failed: {type(exc).__name__}: {exc}",
                                        plugin=provided.plugin)
    return outcome

"""The study pipeline: discover → import → convert → check → fit → write.

:func:`process_study` does the computation and returns a :class:`StudyResult` (no output
files); :func:`write_outputs` hands it to every writer plugin. One bad file or one raising
plugin is recorded and never stops the other files.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING, Callable, Protocol, Sequence

from .config import StudyConfig, load_study_config
from .discovery import find_input_files
from .importing import FileOutcome, RejectedFile, import_file, number_repeated_run_ids
from .processing import RunResult, process_run
from .records import AnalysisOutput, Finding
from .registry import Registry
from .specs import SpecVerdict, evaluate_specs

if TYPE_CHECKING:
    from .cache import RunCache

DEFAULT_OUT = "_gammadot"


class Progress(Protocol):
    """Receives progress: ``start(total)`` once, then ``advance(label)`` per file."""

    def start(self, total: int) -> None: ...

    def advance(self, label: str) -> None: ...


class _NoProgress:
    def start(self, total: int) -> None:
        pass

    def advance(self, label: str) -> None:
        pass


@dataclass(frozen=True)
class WriterFailure:
    """A writer or analysis plugin that raised: which one and why."""

    writer: str
    plugin: str
    message: str


@dataclass
class StudyResult:
    """Everything a writer needs: the config, the processed runs, the files and rejections."""

    study_dir: Path
    config: StudyConfig
    registry: Registry
    files: list[FileOutcome] = field(default_factory=list)
    runs: list[RunResult] = field(default_factory=list)
    analyses: dict[str, AnalysisOutput] = field(default_factory=dict)
    specs: list[SpecVerdict] = field(default_factory=list)
    analysis_failures: list[WriterFailure] = field(default_factory=list)
    writer_failures: list[WriterFailure] = field(default_factory=list)
    written: list[Path] = field(default_factory=list)

    @property
    def rejected(self) -> list[RejectedFile]:
        """Files that could not be used, in file order."""
        return [f.rejected for f in self.files if f.rejected is not None]


def default_out_dir(study_dir: Path) -> Path:
    """``STUDY/_gammadot``: the output folder when ``--out`` is not given."""
    return study_dir / DEFAULT_OUT


def process_study(study_dir: Path, registry: Registry, *, out_dir: Path | None = None,
                  progress: Progress | None = None, cache: "RunCache | None" = None,
                  paths: Sequence[Path] | None = None) -> StudyResult:
    """Import and process every export below ``study_dir``; raises only for a bad study.toml.

    ``cache`` reuses files imported and processed before (:mod:`gammadot.cache`); ``paths``
    limits the study to these files (the watcher leaves out files still being written).
    """
    progress = progress or _NoProgress()
    config = load_study_config(study_dir, registry)
    if paths is None:
        suffixes = [s for p in registry.importers.values() for s in p.record.suffixes]
        paths = find_input_files(study_dir, out_dir or default_out_dir(study_dir), suffixes)
    result = StudyResult(study_dir=study_dir, config=config, registry=registry)
    progress.start(len(paths))
    for path in paths:
        rel = path.relative_to(study_dir).as_posix()
        cached = cache.get(path, rel, config) if cache is not None else None
        if cached is not None:
            outcome, processed = cached
        else:
            outcome = import_file(path, rel, registry, config)
            processed = [process_run(run, config, registry) for run in outcome.runs]
            if cache is not None:
                cache.put(rel, config, outcome, processed)
        result.files.append(outcome)
        result.runs.extend(processed)
        progress.advance(rel)
    number_repeated_run_ids([r.run for r in result.runs])
    run_analyses(result)
    result.specs = [v for run in result.runs for v in evaluate_specs(run, config.specs)]
    return result


def run_analyses(result: StudyResult) -> None:
    """Run every study-level analysis; attach its findings to the runs they name."""
    by_id = {r.run.run_id: r for r in result.runs}
    for analysis_id, provided in result.registry.analyses.items():
        if result.config.checks.get(analysis_id, {}).get("enabled", True) is False:
            continue  # switched off in study.toml ([checks.<id>] enabled = false)
        try:
            output = provided.record.run(result)
        except Exception as exc:  # one analysis failing never stops the study
            result.analysis_failures.append(WriterFailure(analysis_id, provided.plugin,
                                                          f"{type(exc).__name__}: {exc}"))
            continue
        if output is None:
            continue
        result.analyses[analysis_id] = output
        for run_id, findings in output.findings.items():
            if run_id in by_id:
                by_id[run_id].findings.extend(_as_findings(findings))


def _as_findings(findings: object) -> list[Finding]:
    return [f for f in findings if isinstance(f, Finding)]  # type: ignore[attr-defined]


def write_outputs(result: StudyResult, out_dir: Path,
                  on_failure: Callable[[WriterFailure], None] | None = None) -> StudyResult:
    """Call every writer in ``order``; a raising writer is recorded and the others still run."""
    out_dir.mkdir(parents=True, exist_ok=True)
    writers = sorted(result.registry.writers.values(), key=lambda p: (p.record.order, p.record.id))
    for provided in writers:
        try:
            result.written.extend(provided.record.write(result, out_dir))
        except Exception as exc:
            failure = WriterFailure(provided.record.id, provided.plugin, f"{type(exc).__name__}: {exc}")
            result.writer_failures.append(failure)
            if on_failure:
                on_failure(failure)
    return result

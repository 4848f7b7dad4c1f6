"""Command-line commands for gammadot's own formats and for plugin authors.

``gammadot schema``, ``gammadot export``, ``gammadot new-plugin`` and the ``--check`` of
``gammadot plugins`` live here, and are added
to the main command group in :mod:`gammadot.cli`. Like the rest of the command line, this
module imports only click at start-up; every command imports what it needs when it runs.
"""

from __future__ import annotations

import sys
from pathlib import Path

import click

EXIT_OK, EXIT_FAILED, EXIT_USAGE = 0, 1, 2
PLUGIN_KINDS = ("importer", "model", "check", "geometry", "section")


@click.command("schema")
@click.option("--check", "check_files", multiple=True, metavar="FILE",
              type=click.Path(exists=True, dir_okay=False, path_type=Path),
              help="Check FILE (repeatable) against the format and list every problem with its JSON path.")
def schema_command(check_files: tuple[Path, ...]) -> None:
    """Print the JSON Schema of gammadot's run document (format version 1), the JSON a LIMS
    or a lab's script writes to feed a study and `gammadot export --json` writes. With
    --check FILE, check documents instead: one line per problem, `FILE: $.path: problem`."""
    from .run_json import document_problems, schema_text

    if not check_files:
        click.echo(schema_text(), nl=False)
        return
    failed = False
    for path in check_files:
        problems = document_problems(path.read_bytes())
        for problem in problems:
            click.echo(f"{path}: {problem}")
        if not problems:
            click.echo(f"{path}: ok")
        failed = failed or bool(problems)
    sys.exit(EXIT_FAILED if failed else EXIT_OK)


@click.command("export")
@click.argument("run_id")
@click.option("--json", "as_json", is_flag=True, help="Write the run as a gammadot JSON run document (version 1).")
@click.option("--study", type=click.Path(exists=True, file_okay=False, path_type=Path), default=Path("."),
              show_default=True, help="The study folder the run belongs to.")
@click.option("--out", type=click.Path(dir_okay=False, path_type=Path),
              help="Write to this file instead of the standard output (an existing file is not replaced).")
@click.option("--block", multiple=True, metavar="NAME", help="Do not load the plugin NAME (repeatable).")
def export_command(run_id: str, as_json: bool, study: Path, out: Path | None, block: tuple[str, ...]) -> None:
    """Write the run RUN_ID of a study (ids as in runs.parquet, e.g. exports-lot-2611-r1) in
    gammadot's JSON run format: the run as measured (read again from its source file), in SI
    units with every unit stated. Importing the document gives the study's tables again."""
    from .cli import _registry
    from .config import StudyConfigError
    from .run_export import RunNotFound, find_run
    from .run_json import dumps, run_document

    if not as_json:
        raise click.UsageError("choose the format: --json (the only export format so far)")
    if out is not None and out.exists():
        raise click.UsageError(f"{out} exists; choose another file name (nothing is overwritten)")
    registry = _registry(block)
    try:
        run = find_run(study, run_id, registry)
    except StudyConfigError as exc:
        click.echo(f"gammadot: {study / 'study.toml'}: {exc}", err=True)
        sys.exit(EXIT_USAGE)
    except RunNotFound as exc:
        click.echo(f"gammadot: {study}: {exc}", err=True)
        sys.exit(EXIT_FAILED)
    text = dumps(run_document(run, generator=f"gammadot {_version()}"))
    if out is None:
        click.echo(text, nl=False)
        return
    from .atomic import atomic_write_text

    atomic_write_text(out, text)
    click.echo(f"run {run_id} written to {out}", err=True)


def _version() -> str:
    from . import __version__

    return str(__version__)


@click.command("new-plugin")
@click.argument("name")
@click.option("--kind", type=click.Choice(PLUGIN_KINDS), required=True,
              help="What the plugin provides: an importer, a model, a check, a geometry, or a run-page section.")
@click.option("--dir", "parent", type=click.Path(file_okay=False, path_type=Path), default=Path("."),
              show_default=True, help="Folder in which the package folder NAME is created.")
def new_plugin_command(name: str, kind: str, parent: Path) -> None:
    """Write a small, installable plugin package NAME (pyproject.toml with the entry point,
    the plugin module, a test that runs a study through the real pipeline, a README).
    After `pip install -e NAME`, `pytest NAME` passes and `gammadot plugins` lists it."""
    from .scaffold import ScaffoldError, write_plugin_package

    try:
        package = write_plugin_package(parent, name, kind)
    except ScaffoldError as exc:
        raise click.UsageError(str(exc)) from None
    click.echo(f"{kind} plugin package written to {package.root}")
    click.echo(f"next: pip install -e {package.root} && pytest {package.root}")


def check_plugins_command(block: tuple[str, ...]) -> int:
    """``gammadot plugins --check``: one line per problem, a summary, the exit code."""
    from .hookspecs import HOOKSPEC_VERSION
    from .plugin_check import candidates, check_plugins

    report = check_plugins(candidates(block))
    for message in report.messages:
        click.echo(str(message))
    errors, warnings = len(report.errors), len(report.messages) - len(report.errors)
    click.echo(f"checked {len(report.checked)} plugins against hook specs {HOOKSPEC_VERSION}: "
               f"{errors} error{'s' if errors != 1 else ''}, {warnings} warning{'s' if warnings != 1 else ''}")
    return EXIT_FAILED if errors else EXIT_OK

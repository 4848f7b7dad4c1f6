"""The ``gammadot`` command line.

Start-up stays fast (``gammadot --help`` loads no numerical library): every command imports
what it needs when it runs.

Exit codes: 0 the study was processed (rejected files are listed, not fatal); 1 nothing
usable could be produced (no run could be read, or the tables could not be written);
2 the command line or study.toml is wrong; 3 a plugin failed to load.
"""

from __future__ import annotations

import sys
from pathlib import Path
from typing import TYPE_CHECKING

import click

if TYPE_CHECKING:
    from .pipeline import StudyResult
    from .registry import Registry

EXIT_OK, EXIT_NOTHING_USABLE, EXIT_CONFIG, EXIT_PLUGIN = 0, 1, 2, 3

_BLOCK_HELP = "Do not load the plugin NAME (repeatable); see `gammadot plugins` for names."


def _registry(block: tuple[str, ...]) -> "Registry":
    from .plugin_manager import PluginLoadError, build_plugin_manager
    from .registry import build_registry

    try:
        return build_registry(build_plugin_manager(block))
    except PluginLoadError as exc:
        click.echo(f"gammadot: {exc}", err=True)
        sys.exit(EXIT_PLUGIN)


@click.group(context_settings={"help_option_names": ["-h", "--help"]})
@click.version_option(package_name="gammadot")
def main() -> None:
    """gammadot turns rotational rheometer and viscometer exports into flow curves you can
    trust: true shear stress and shear rate for the measuring geometry, suspect points set
    aside, flow models fitted with uncertainties, and per study a Parquet archive plus a
    static HTML report.

    A study is a folder of exports (CSV/TXT/TSV, any depth) with an optional study.toml
    that names the geometries, models and specifications. Start with `gammadot demo`.
    """


@main.command("run")
@click.argument("study", type=click.Path(exists=True, file_okay=False, path_type=Path))
@click.option("--out", "out", type=click.Path(file_okay=False, path_type=Path),
              help="Output folder (default: STUDY/_gammadot). Tables go to OUT/tables, the report to OUT/site.")
@click.option("--quiet", "-q", is_flag=True, help="Print only problems and the final line.")
@click.option("--block", multiple=True, metavar="NAME", help=_BLOCK_HELP)
def run_command(study: Path, out: Path | None, quiet: bool, block: tuple[str, ...]) -> None:
    """Process the study folder STUDY: import every export, convert torque and speed to
    shear stress and shear rate, check the points, fit the models, and write the tables
    and the report."""
    sys.exit(run_study(study, out, quiet=quiet, block=block))


def run_study(study: Path, out: Path | None, *, quiet: bool = False, block: tuple[str, ...] = ()) -> int:
    """Process and write one study; returns the exit code (see module docstring)."""
    from .config import StudyConfigError
    from .pipeline import default_out_dir, process_study, write_outputs

    registry = _registry(block)
    out_dir = out or default_out_dir(study)
    try:
        with _progress(quiet) as progress:
            result = process_study(study, registry, out_dir=out_dir, progress=progress)
    except StudyConfigError as exc:
        click.echo(f"gammadot: {study / 'study.toml'}: {exc}", err=True)
        return EXIT_CONFIG
    write_outputs(result, out_dir, on_failure=lambda f: click.echo(
        f"gammadot: writer '{f.writer}' (plugin {f.plugin}) failed: {f.message}", err=True))
    _report(result, out_dir, quiet)
    tables_failed = any(f.writer == "parquet_tables" for f in result.writer_failures)
    return EXIT_NOTHING_USABLE if not result.runs or tables_failed else EXIT_OK


class _progress:
    """A rich progress bar on a terminal (nothing when quiet or not a terminal)."""

    def __init__(self, quiet: bool) -> None:
        self.enabled = not quiet and sys.stderr.isatty()
        self._bar = None

    def __enter__(self) -> "_progress":
        if self.enabled:
            from rich.progress import Progress

            self._bar = Progress(transient=True)
            self._bar.__enter__()
        return self

    def __exit__(self, *exc: object) -> None:
        if self._bar is not None:
            self._bar.__exit__(None, None, None)

    def start(self, total: int) -> None:
        if self._bar is not None:
            self._task = self._bar.add_task("Reading exports", total=total)

    def advance(self, label: str) -> None:
        if self._bar is not None:
            self._bar.update(self._task, advance=1, description=label[-40:])


def _count(n: int, noun: str) -> str:
    return f"{n} {noun}" + ("" if n == 1 else "s")


def _report(result: "StudyResult", out_dir: Path, quiet: bool) -> None:
    for rejected in result.rejected:
        click.echo(f"rejected {rejected.describe()}", err=True)
    for failure in result.analysis_failures:
        click.echo(f"analysis '{failure.writer}' (plugin {failure.plugin}) failed: {failure.message}", err=True)
    n_files = len(result.files)
    ok_runs = sum(1 for r in result.runs if r.selected is not None)
    if not quiet:
        for r in result.runs:
            chosen = r.selected
            label = r.run.sample or r.run.run_id
            if chosen is None:
                click.echo(f"  {r.run.run_id}: {label}: no model could be fitted")
            else:
                params = ", ".join(f"{p.name}={p.value:.4g}{'' if p.unit == '1' else ' ' + p.unit}"
                                   for p in chosen.parameters if p.value is not None)
                click.echo(f"  {r.run.run_id}: {label}: {chosen.model} ({params})")
    click.echo(f"{result.config.title}: {_count(n_files, 'file')}, {_count(len(result.runs), 'run')} "
               f"({ok_runs} fitted), {_count(len(result.rejected), 'file')} rejected")
    site = out_dir / "site" / "index.html"
    click.echo(f"tables: {out_dir / 'tables'}")
    if site.exists():
        click.echo(f"report: {site}")


@main.command("demo")
@click.argument("directory", required=False, type=click.Path(file_okay=False, path_type=Path),
                default=Path("gammadot-demo"))
@click.option("--quiet", "-q", is_flag=True, help="Print only problems and the final lines.")
def demo_command(directory: Path, quiet: bool) -> None:
    """Write the demo study (a fictitious lab's exports) to DIRECTORY (default:
    ./gammadot-demo) and process it. Prints where the report is."""
    from .demo import write_demo_study

    write_demo_study(directory)
    click.echo(f"demo study written to {directory}")
    sys.exit(run_study(directory, None, quiet=quiet))


@main.command("plugins")
@click.option("--block", multiple=True, metavar="NAME", help=_BLOCK_HELP)
@click.option("--check", is_flag=True, help="Validate every plugin against the hook specs and list every problem "
                                            "(exit 1 when there is an error).")
def plugins_command(block: tuple[str, ...], check: bool) -> None:
    """List the installed plugins and what each provides (importers, geometries, models,
    checks, writers)."""
    if check:
        from .cli_kit import check_plugins_command

        sys.exit(check_plugins_command(block))
    registry = _registry(block)
    for name, origin in registry.plugins.items():
        click.echo(f"{name}  ({origin})")
        for kind, ids in registry.provided_by(name).items():
            click.echo(f"    {kind}: {', '.join(ids)}")
    for name in registry.blocked:
        click.echo(f"{name}  (blocked)")


# Commands for gammadot's own formats and for plugin authors (module cli_kit).
from .cli_kit import export_command, new_plugin_command, schema_command  # noqa: E402

for _command in (schema_command, export_command, new_plugin_command):
    main.add_command(_command)


if __name__ == "__main__":  # pragma: no cover
    main()

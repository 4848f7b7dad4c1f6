"""The ``gammadot`` command line.

Start-up stays fast (``gammadot --help`` loads no numerical library): every command imports
what it needs when it runs.

Exit codes: 0 the study was processed (rejected files are listed, not fatal); 1 nothing
usable could be produced (no run could be read, or the tables could not be written);
2 the command line or study.toml is wrong; 3 a plugin failed to load; 4 (watch) another
watcher holds the inbox.
"""

from __future__ import annotations

import sys
from pathlib import Path
from typing import TYPE_CHECKING

import click

if TYPE_CHECKING:
    from .pipeline import StudyResult
    from .registry import Registry

EXIT_OK, EXIT_NOTHING_USABLE, EXIT_CONFIG, EXIT_PLUGIN, EXIT_BUSY = 0, 1, 2, 3, 4

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
    """Process and write one study; returns the exit code (see module docstring).

    Files seen before are reused from the output folder's cache; the outputs become a new
    version of the output folder, switched atomically (README, "Outputs and versions").
    """
    from .cache import open_cache
    from .config import StudyConfigError
    from .fingerprint import code_fingerprint
    from .pipeline import default_out_dir, process_study
    from .study_output import write_study_version
    from .versioned import VersionError

    registry = _registry(block)
    out_dir = out or default_out_dir(study)
    code = code_fingerprint(registry)
    cache, problem = open_cache(out_dir, registry, code=code)
    if cache is None:
        click.echo(f"gammadot: the run cache is off: {problem}", err=True)
    try:
        with _progress(quiet) as progress:
            result = process_study(study, registry, out_dir=out_dir, progress=progress, cache=cache)
    except StudyConfigError as exc:
        click.echo(f"gammadot: {study / 'study.toml'}: {exc}", err=True)
        return EXIT_CONFIG
    try:
        committed = write_study_version(result, out_dir, code=code, on_failure=lambda f: click.echo(
            f"gammadot: writer '{f.writer}' (plugin {f.plugin}) failed: {f.message}", err=True))
    except (VersionError, OSError) as exc:
        click.echo(f"gammadot: {out_dir}: outputs not written: {exc}", err=True)
        return EXIT_NOTHING_USABLE
    if cache is not None:
        cache.prune()
        if not quiet:
            click.echo(f"cache: {cache.stats.hits} of {len(result.files)} files reused")
    _report(result, out_dir, quiet)
    if committed is None:
        click.echo(f"gammadot: {out_dir}: the previous output was kept (the tables could not be written)", err=True)
    return EXIT_NOTHING_USABLE if not result.runs or committed is None else EXIT_OK


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


def sample_verdicts(result: "StudyResult") -> dict[str, dict[str, int]]:
    """Per sample (in run order): counts of pass, fail, n/a and of values near a limit."""
    sample_of = {r.run.run_id: r.run.sample or r.run.run_id for r in result.runs}
    summary: dict[str, dict[str, int]] = {}
    for verdict in result.specs:
        counts = summary.setdefault(sample_of[verdict.run_id], {"pass": 0, "fail": 0, "n/a": 0, "uncertain": 0})
        counts[verdict.verdict] += 1
        counts["uncertain"] += verdict.straddles_limit
    return summary


def sample_word(counts: dict[str, int]) -> str:
    """FAIL if any rule failed, else INCOMPLETE (a rule without value), else UNCERTAIN (a value
    within its uncertainty of a limit), else PASS."""
    if counts["fail"]:
        return "FAIL"
    if counts["n/a"]:
        return "INCOMPLETE"
    return "UNCERTAIN" if counts["uncertain"] else "PASS"


def _temperature_conditions(result: "StudyResult") -> dict[str, tuple[int, list[str]]]:
    """Per sample: how many verdicts are n/a for an unknown run temperature, and the rules with a
    temperature condition that judged its runs, with the condition (``eta10 at 25 °C ± 1 K``)."""
    from .specs import NOT_APPLIED_TEMPERATURE_UNKNOWN

    sample_of = {r.run.run_id: r.run.sample or r.run.run_id for r in result.runs}
    found: dict[str, tuple[int, list[str]]] = {}
    for v in result.specs:
        if not v.condition:
            continue
        unknown, bound = found.setdefault(sample_of[v.run_id], (0, []))
        text = v.rule if v.rule.endswith(v.condition) else f"{v.rule} {v.condition}"
        if text not in bound:
            bound.append(text)
        found[sample_of[v.run_id]] = (unknown + (v.method == NOT_APPLIED_TEMPERATURE_UNKNOWN), bound)
    return found


def _report_specs(result: "StudyResult") -> None:
    summary = sample_verdicts(result)
    if not summary:
        return
    click.echo("specifications by sample (details in tables/specs.parquet and on the report):")
    conditions = _temperature_conditions(result)
    for sample, c in summary.items():
        word = sample_word(c)
        near = f"; {c['uncertain']} within the uncertainty of a limit" if c["uncertain"] else ""
        unknown, bound = conditions.get(sample, (0, []))
        if unknown:
            near += f"; {unknown} n/a because the run temperature is unknown"
        if bound:
            near += "; temperature-bound rules: " + ", ".join(bound)
        click.echo(f"  {sample}: {word} ({c['pass']} pass, {c['fail']} fail, {c['n/a']} n/a{near})")
    click.echo("  verdicts support, and do not replace, review by a qualified person under local procedures")


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
    _report_specs(result)
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


@main.command("watch")
@click.argument("inbox", type=click.Path(exists=True, file_okay=False, path_type=Path))
@click.option("--publish", "publish_dir", type=click.Path(file_okay=False, path_type=Path), metavar="DIR",
              help="Also copy each study's outputs to DIR/<study> (atomically) and list the studies in DIR/index.html.")
@click.option("--poll", type=click.FloatRange(min=0.05), metavar="SECONDS",
              help="Look for changes every SECONDS instead of waiting for file-system events "
                   "(for network shares, where events often do not arrive).")
@click.option("--settle", type=click.FloatRange(min=0.0), default=2.0, show_default=True, metavar="SECONDS",
              help="A file is read only after its size and time stayed the same this long.")
@click.option("--max-wait", type=click.FloatRange(min=0.0), default=60.0, show_default=True, metavar="SECONDS",
              help="When files of a study keep changing longer than this, process the stable ones.")
@click.option("--rescan", type=click.FloatRange(min=0.1), default=60.0, show_default=True, metavar="SECONDS",
              help="Look at every study this often even without events.")
@click.option("--block", multiple=True, metavar="NAME", help=_BLOCK_HELP)
def watch_command(inbox: Path, publish_dir: Path | None, poll: float | None, settle: float, max_wait: float,
                  rescan: float, block: tuple[str, ...]) -> None:
    """Keep the studies in INBOX up to date as exports arrive, change or go.

    A study is a folder directly inside INBOX that holds a study.toml; its outputs go to
    STUDY/_gammadot as with `gammadot run`. Input files are only read: never moved, renamed
    or deleted. Logs one JSON line per event on stderr. Stops cleanly on Ctrl-C or SIGTERM.
    """
    import signal

    from .eventlog import EventLog
    from .watch import InboxWatcher, WatcherBusy, WatchSettings

    registry = _registry(block)
    settings = WatchSettings(inbox=inbox, publish_dir=publish_dir, poll=poll, settle=settle,
                             max_wait=max_wait, rescan=rescan)
    log = EventLog()
    watcher = InboxWatcher(settings, registry, log)

    def stop(signum: int, _frame: object) -> None:
        log.info("stop_requested", signal=signal.Signals(signum).name)
        watcher.request_stop()

    previous = {sig: signal.signal(sig, stop) for sig in (signal.SIGINT, signal.SIGTERM)}
    try:
        watcher.run()
    except WatcherBusy as exc:
        log.error("watch_busy", message=str(exc))
        click.echo(f"gammadot: {exc}", err=True)
        sys.exit(EXIT_BUSY)
    finally:
        for sig, handler in previous.items():
            signal.signal(sig, handler)
    sys.exit(EXIT_OK)


@main.command("publish")
@click.argument("study_out", type=click.Path(exists=True, file_okay=False, path_type=Path))
@click.argument("directory", type=click.Path(file_okay=False, path_type=Path))
@click.option("--name", metavar="NAME", help="Folder name under DIRECTORY (default: the study folder's name).")
def publish_command(study_out: Path, directory: Path, name: str | None) -> None:
    """Publish a processed study: copy the current output of STUDY_OUT (e.g.
    my-study/_gammadot) to DIRECTORY/<study> and switch to it in one step, so that readers
    see the previous report or the new one, never a mix. DIRECTORY/index.html lists every
    study published there."""
    from .publish import PublishError, publish_study, published_summary
    from .versioned import VersionError

    try:
        outcome = publish_study(study_out, directory, name=name)
    except (PublishError, VersionError, OSError) as exc:
        click.echo(f"gammadot: {exc}", err=True)
        sys.exit(EXIT_NOTHING_USABLE)
    click.echo(published_summary(outcome))


# Commands for gammadot's own formats and for plugin authors (module cli_kit).
from .cli_kit import export_command, new_plugin_command, schema_command  # noqa: E402

for _command in (schema_command, export_command, new_plugin_command):
    main.add_command(_command)


if __name__ == "__main__":  # pragma: no cover
    main()

"""Publishing a study's current output to an intranet folder, atomically.

``publish_study(STUDY_OUT, DIR)`` copies the current version of ``STUDY_OUT`` (a versioned
output folder, :mod:`gammadot.versioned`) to ``DIR/<name>/versions/<id>``, checks every copied
file against the version's manifest, and only then points ``DIR/<name>/current`` at it. ``<name>``
is the study folder's name unless given. ``DIR/<name>/`` gets the same stable links as an output
folder (``site``, ``tables``, ``rejected.json``) and an ``index.html`` that forwards to
``site/index.html``; ``DIR/index.html`` lists every study published there.

What a static web server sees: each request for ``/<name>/site/...`` resolves the ``current``
link when the file is opened, so every file it serves comes whole from one complete version;
a version stays on disk for a few more publications, so a page opened just before a switch
still finds its files. (The server must follow symbolic links: the default for nginx;
``Options FollowSymLinks`` for Apache httpd.)
"""

from __future__ import annotations

import html
import shutil
from dataclasses import dataclass
from pathlib import Path
from urllib.parse import quote

from .atomic import atomic_write_text
from .versioned import LOCK_FILE, VersionedFolder, read_manifest, verify_version

STUDY_INDEX = "index.html"


class PublishError(RuntimeError):
    """Publishing is not possible; the message names the folder and the problem."""


@dataclass(frozen=True)
class PublishOutcome:
    """Where the study went, which version, and whether anything changed."""

    target: Path
    version_id: str
    changed: bool


def check_name(name: str) -> str:
    """A study name usable as one folder under the publishing root."""
    if not name or name in (".", "..") or "/" in name or "\\" in name or name.startswith("."):
        raise PublishError(f"'{name}' cannot be a published study's folder name")
    return name


def publish_study(study_out: Path, publish_root: Path, *, name: str | None = None) -> PublishOutcome:
    """Copy the current version of ``study_out`` to ``publish_root/<name>`` and switch to it."""
    origin = VersionedFolder(study_out)
    if not origin.root.is_dir():
        raise PublishError(f"{study_out}: no such folder")
    if origin.current() is None:  # checked before locking: never leave a lock file in a wrong folder
        raise PublishError(f"{study_out}: no complete output to publish (run `gammadot run` on the study "
                           "first, then publish its output folder, e.g. STUDY/_gammadot)")
    with origin.lock():  # the study's writer must not prune the version while it is copied
        source = origin.current()
        if source is None:
            raise PublishError(f"{study_out}: no complete output to publish "
                               "(run `gammadot run` on the study first)")
        manifest = read_manifest(source)
        problems = verify_version(source)
        if manifest is None or problems:
            raise PublishError(f"{source}: the output is damaged, nothing was published: {problems[0]}")
        version_id = str(manifest["version"])
        name = check_name(name or str(manifest.get("study_folder") or study_out.resolve().parent.name))
        target = VersionedFolder(publish_root / name)
        with target.lock():
            target.clean_leftovers()
            current = target.current()
            changed = current is None or current.name != version_id
            existing = target.versions / version_id
            if changed and existing.is_dir() and not verify_version(existing):
                target.make_current(version_id)  # copied before, but a crash came before the switch
            elif changed:
                _copy_version(source, target, version_id)
            _write_if_changed(target.root / STUDY_INDEX, _forward_page(manifest))
    write_root_index(publish_root)
    return PublishOutcome(target.root, version_id, changed)


def _copy_version(source: Path, target: VersionedFolder, version_id: str) -> None:
    """Copy ``source`` into a staging folder of ``target``, check it, commit it."""
    existing = target.versions / version_id
    if existing.exists():
        shutil.rmtree(existing)  # damaged (a disk problem): copy it again
    staging = target.staging()
    try:
        shutil.copytree(source, staging, symlinks=False, dirs_exist_ok=True)
        problems = verify_version(staging)
        if problems:
            raise PublishError(f"the copy in {target.root} is incomplete: {problems[0]}")
        target.commit(staging, version_id)
    finally:
        if staging.exists():
            shutil.rmtree(staging, ignore_errors=True)


def _write_if_changed(path: Path, text: str) -> None:
    try:
        if path.read_text(encoding="utf-8") == text:
            return
    except OSError:
        pass
    atomic_write_text(path, text)


def _forward_page(manifest: dict[str, object]) -> str:
    title = html.escape(str(manifest.get("study", "")))
    return ("<!doctype html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">\n"
            f"<title>{title}</title>\n"
            "<meta http-equiv=\"refresh\" content=\"0; url=site/index.html\">\n"
            "</head><body>\n"
            f"<p><a href=\"site/index.html\">{title}: open the study report</a></p>\n"
            "</body></html>\n")


def published_studies(publish_root: Path) -> list[tuple[str, dict[str, object]]]:
    """(folder name, manifest) of every study with a current version under ``publish_root``."""
    found = []
    if not publish_root.is_dir():
        return found
    for folder in sorted(publish_root.iterdir(), key=lambda p: p.name):
        if folder.name.startswith(".") or not folder.is_dir():
            continue
        manifest = VersionedFolder(folder).current_manifest()
        if manifest is not None:
            found.append((folder.name, manifest))
    return found


def write_root_index(publish_root: Path) -> None:
    """Rewrite ``publish_root/index.html``: one row per published study (atomic, locked)."""
    from filelock import FileLock

    publish_root.mkdir(parents=True, exist_ok=True)
    with FileLock(str(publish_root / LOCK_FILE), timeout=600):
        rows = []
        for name, manifest in published_studies(publish_root):
            counts = manifest.get("counts") or {}
            href = quote(name) + "/site/index.html"
            rows.append(
                f"<tr><td><a href=\"{html.escape(href)}\">{html.escape(str(manifest.get('study', name)))}</a></td>"
                f"<td>{html.escape(name)}</td><td>{int(counts.get('runs', 0))}</td>"
                f"<td>{int(counts.get('rejected', 0))}</td>"
                f"<td>{html.escape(str(manifest.get('created', '')))}</td></tr>")
        body = "\n".join(rows) or "<tr><td colspan=\"5\">No study has been published here yet.</td></tr>"
        _write_if_changed(publish_root / STUDY_INDEX, _ROOT_PAGE.format(rows=body))


_ROOT_PAGE = """<!doctype html>
<html lang="en"><head><meta charset="utf-8">
<meta name="viewport" content="width=device-width, initial-scale=1">
<title>Flow-curve studies</title>
<style>
body {{ font-family: system-ui, sans-serif; margin: 2rem; color: #1d2329; }}
table {{ border-collapse: collapse; }}
th, td {{ text-align: left; padding: .35rem .9rem .35rem 0; border-bottom: 1px solid #e4e7eb; }}
</style></head><body>
<h1>Flow-curve studies</h1>
<p>Each study opens its report: flow curves, fitted models and the files that could not be used.</p>
<table><thead><tr><th>Study</th><th>Folder</th><th>Runs</th><th>Files not used</th><th>Updated</th></tr></thead>
<tbody>
{rows}
</tbody></table>
<p><small>Times are UTC. Made by gammadot.</small></p>
</body></html>
"""


def published_summary(outcome: PublishOutcome) -> str:
    """One line for the console."""
    state = "published" if outcome.changed else "already published"
    return f"{state}: {outcome.target / 'site' / 'index.html'} (version {outcome.version_id})"


__all__ = ["PublishError", "PublishOutcome", "publish_study", "published_studies", "published_summary",
           "write_root_index", "check_name"]

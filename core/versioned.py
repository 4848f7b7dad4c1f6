"""Folders whose content changes all at once: complete versions side by side, one symlink
names the current one.

Used for a study's output folder (``gammadot run``, ``gammadot watch``) and for a study's folder
under a publishing root (``gammadot publish``, ``gammadot watch --publish``). Layout of ROOT::

    ROOT/versions/<id>/            one complete version each; never changed once it is there
    ROOT/versions/<id>/manifest.json   what it was made from, and the SHA-256 of every file in it
    ROOT/current -> versions/<id>  relative symlink, replaced by a single rename(2)
    ROOT/tables -> current/tables  one fixed link per top-level entry of a version
    ROOT/site -> current/site      (tables, site, rejected.json, and whatever writers add)
    ROOT/.lock                     held while a version is staged and committed
    ROOT/.staging-<token>/         a version being built

A version is built under ``.staging-*``, flushed to disk, renamed into ``versions/`` (so a
folder there is complete by construction) and then made current by renaming a new symlink
over ``current``. rename(2) is atomic on POSIX file systems: whoever opens
``ROOT/site/index.html`` resolves either the old version or the new one, and each is complete.
A crash (even ``kill -9``) at any moment leaves the last committed version current; leftovers
(``.staging-*`` and temporary links) are removed under the lock by the next writer.
The last :data:`KEEP_VERSIONS` versions are kept, so that a reader that resolved an older
version a moment ago still finds its files.
"""

from __future__ import annotations

import hashlib
import json
import os
import secrets
import shutil
from datetime import datetime, timezone
from pathlib import Path
from typing import Any

from .atomic import atomic_write_text

VERSIONS_DIR = "versions"
CURRENT_LINK = "current"
MANIFEST = "manifest.json"
LOCK_FILE = ".lock"
STAGING_PREFIX = ".staging-"
KEEP_VERSIONS = 3
LOCK_TIMEOUT_S = 600.0
MANIFEST_FORMAT = "gammadot-version/1"
# Names in ROOT that belong to the mechanism itself and never become entry links.
_RESERVED = {VERSIONS_DIR, CURRENT_LINK, MANIFEST, LOCK_FILE}
# Temporary names a crash can leave in ROOT (the last two from gammadot 0.1's site writer).
_LEFTOVER_PREFIXES = (STAGING_PREFIX, ".link-", ".current-", ".legacy-", ".site-tmp-", ".site-old-")


class VersionError(RuntimeError):
    """A versioned folder cannot be used (no symlinks here, or a version is damaged)."""


def new_version_id(now: datetime | None = None) -> str:
    """``YYYYMMDDTHHMMSSffffffZ-xxxxxx``: sorts by time, unique across processes."""
    now = now or datetime.now(timezone.utc)
    return f"{now:%Y%m%dT%H%M%S%fZ}-{secrets.token_hex(3)}"


def _fsync_path(path: Path, directory: bool = False) -> None:
    flags = os.O_RDONLY | (getattr(os, "O_DIRECTORY", 0) if directory else 0)
    try:
        fd = os.open(path, flags)
    except OSError:
        return
    try:
        os.fsync(fd)
    except OSError:
        pass  # some file systems refuse fsync on directories
    finally:
        os.close(fd)


def fsync_tree(root: Path) -> None:
    """Flush every file and folder below ``root`` to disk (before it is made visible)."""
    for folder, _dirs, files in os.walk(root):
        for name in files:
            _fsync_path(Path(folder) / name)
        _fsync_path(Path(folder), directory=True)


def inventory(root: Path) -> dict[str, str]:
    """``{relative path: SHA-256}`` of every file below ``root`` except the manifest."""
    found: dict[str, str] = {}
    for folder, dirs, files in os.walk(root):
        dirs.sort()
        for name in sorted(files):
            path = Path(folder) / name
            rel = path.relative_to(root).as_posix()
            if rel == MANIFEST:
                continue
            digest = hashlib.sha256()
            with open(path, "rb") as handle:
                for block in iter(lambda: handle.read(1 << 20), b""):
                    digest.update(block)
            found[rel] = digest.hexdigest()
    return found


def read_manifest(version: Path) -> dict[str, Any] | None:
    """The manifest of a version folder, or ``None`` if missing or unreadable."""
    try:
        data = json.loads((version / MANIFEST).read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return None
    return data if isinstance(data, dict) and data.get("format") == MANIFEST_FORMAT else None


def verify_version(version: Path) -> list[str]:
    """Problems of a version folder: a missing manifest, a missing, changed or extra file."""
    manifest = read_manifest(version)
    if manifest is None:
        return [f"{version}: no readable {MANIFEST}"]
    expected = manifest.get("files", {})
    try:
        actual = inventory(version)
    except OSError as exc:
        return [f"{version}: cannot be read: {exc}"]
    problems = [f"{version / rel}: missing" for rel in sorted(set(expected) - set(actual))]
    problems += [f"{version / rel}: not part of the version" for rel in sorted(set(actual) - set(expected))]
    problems += [f"{version / rel}: content differs from the manifest"
                 for rel in sorted(set(expected) & set(actual)) if expected[rel] != actual[rel]]
    return problems


def seal(staging: Path, manifest: dict[str, Any]) -> dict[str, Any]:
    """Write ``manifest`` (plus format and the inventory of ``staging``) into ``staging``."""
    sealed = {"format": MANIFEST_FORMAT, **manifest, "files": inventory(staging)}
    atomic_write_text(staging / MANIFEST, json.dumps(sealed, indent=1, ensure_ascii=False, sort_keys=True) + "\n")
    return sealed


class VersionedFolder:
    """A folder ROOT laid out as in the module docstring."""

    def __init__(self, root: Path, keep: int = KEEP_VERSIONS) -> None:
        self.root = Path(root)
        self.keep = max(1, keep)

    @property
    def versions(self) -> Path:
        return self.root / VERSIONS_DIR

    def lock(self, timeout: float = LOCK_TIMEOUT_S) -> Any:
        """The writers' lock (``filelock``: an flock, released by the kernel if we die)."""
        from filelock import FileLock

        self.root.mkdir(parents=True, exist_ok=True)
        return FileLock(str(self.root / LOCK_FILE), timeout=timeout)

    def current(self) -> Path | None:
        """The current version folder (resolved), or ``None`` before the first commit."""
        link = self.root / CURRENT_LINK
        if not link.is_symlink():
            return None
        target = (self.root / os.readlink(link)).resolve()
        return target if target.is_dir() else None

    def current_manifest(self) -> dict[str, Any] | None:
        """The manifest of the current version, or ``None``."""
        version = self.current()
        return read_manifest(version) if version is not None else None

    def clean_leftovers(self) -> list[Path]:
        """Remove what a crashed writer left (call with the lock held); returns what went."""
        removed: list[Path] = []
        if not self.root.is_dir():
            return removed
        for path in self.root.iterdir():
            if path.name.startswith(_LEFTOVER_PREFIXES):
                _remove(path)
                removed.append(path)
        return removed

    def staging(self) -> Path:
        """A new, empty staging folder inside ROOT (same file system as ``versions/``)."""
        path = self.root / f"{STAGING_PREFIX}{os.getpid()}-{secrets.token_hex(4)}"
        path.mkdir(parents=True)
        return path

    def commit(self, staging: Path, version_id: str) -> Path:
        """Make the sealed ``staging`` folder the current version (call with the lock held).

        Order: flush to disk → rename into ``versions/`` → entry links → swap ``current`` →
        drop links to entries the new version lacks → prune old versions.
        """
        if read_manifest(staging) is None:
            raise VersionError(f"{staging}: not sealed (no {MANIFEST})")
        fsync_tree(staging)
        self.versions.mkdir(exist_ok=True)
        final = self.versions / version_id
        os.rename(staging, final)
        _fsync_path(self.versions, directory=True)
        return self.make_current(version_id)

    def make_current(self, version_id: str) -> Path:
        """Point ``current`` at ``versions/<version_id>`` (which must be complete)."""
        final = self.versions / version_id
        entries = sorted(p.name for p in final.iterdir() if p.name not in _RESERVED)
        legacy = [self._link_entry(name) for name in entries]
        self._replace_link(self.root / CURRENT_LINK, f"{VERSIONS_DIR}/{version_id}")
        _fsync_path(self.root, directory=True)
        for path in legacy:
            if path is not None:
                _remove(path)
        self._drop_stale_links(set(entries))
        self.prune()
        return final

    def _link_entry(self, name: str) -> Path | None:
        """Make ``ROOT/name`` the link ``current/name``; a real file or folder of an older
        layout is moved aside first (returned, to be deleted after the swap)."""
        link, target = self.root / name, f"{CURRENT_LINK}/{name}"
        if link.is_symlink() and os.readlink(link) == target:
            return None
        moved = None
        if link.exists() and not link.is_symlink():
            moved = self.root / f".legacy-{secrets.token_hex(4)}-{name}"
            os.rename(link, moved)
        self._replace_link(link, target)
        return moved

    def _replace_link(self, link: Path, target: str) -> None:
        tmp = self.root / f".link-{os.getpid()}-{secrets.token_hex(4)}"
        try:
            os.symlink(target, tmp)
        except OSError as exc:
            raise VersionError(f"{self.root}: cannot create a symbolic link here ({exc.strerror or exc}); "
                               f"gammadot needs a file system with symbolic links for atomic updates") from None
        try:
            os.replace(tmp, link)
        except OSError:
            tmp.unlink(missing_ok=True)
            raise

    def _drop_stale_links(self, entries: set[str]) -> None:
        prefix = f"{CURRENT_LINK}/"
        for path in self.root.iterdir():
            if path.is_symlink() and path.name not in _RESERVED and path.name not in entries:
                if os.readlink(path).startswith(prefix):
                    path.unlink(missing_ok=True)

    def prune(self) -> list[str]:
        """Delete all but the newest ``keep`` versions (never the current one)."""
        if not self.versions.is_dir():
            return []
        current = self.current()
        names = sorted((p.name for p in self.versions.iterdir() if p.is_dir()), reverse=True)
        keep = set(names[: self.keep]) | ({current.name} if current is not None else set())
        removed = []
        for name in names:
            if name not in keep:
                _remove(self.versions / name)
                removed.append(name)
        return removed


def _remove(path: Path) -> None:
    if path.is_symlink() or path.is_file():
        path.unlink(missing_ok=True)
    elif path.is_dir():
        shutil.rmtree(path, ignore_errors=True)


__all__ = ["KEEP_VERSIONS", "VersionError", "VersionedFolder", "fsync_tree", "inventory", "new_version_id",
           "read_manifest", "seal", "verify_version"]

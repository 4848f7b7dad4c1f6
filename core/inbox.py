"""The inbox rule, and when a study's files are ready to be read.

Rule (README, "Watching an inbox"):

- A study is a folder directly inside INBOX that holds a ``study.toml`` (it may be empty).
  Its exports are found as ``gammadot run`` finds them: any depth, temporary and lock files
  skipped, its output folder ``_gammadot`` skipped.
- Exports lying directly in INBOX, and folders without ``study.toml``, are not processed:
  the watcher logs each once (``not_in_a_study``) and leaves them alone. A folder becomes a
  study the moment a ``study.toml`` is put into it.
- Names starting with ``.`` or ``_`` directly in INBOX are gammadot's or hidden: ignored
  (``INBOX/.gammadot/`` holds the watcher's lock).

Ready means stable: a file's size, modification time, change time and inode are unchanged
between two looks at least ``settle`` seconds apart (times are the watcher's own clock, so a
share's clock does not matter). A study is processed when none of its files changed for
``settle`` seconds; if files keep changing for longer than ``max_wait``, the stable ones are
processed and the others wait. An empty (zero-byte) export counts as not yet written.
"""

from __future__ import annotations

import os
from dataclasses import dataclass, field
from pathlib import Path
from typing import Iterable

from .config import STUDY_FILE
from .discovery import find_input_files
from .pipeline import DEFAULT_OUT

WATCH_STATE_DIR = ".gammadot"


@dataclass(frozen=True)
class FileState:
    """What is compared between two looks at a file (sizes in bytes, times in ns)."""

    size: int
    mtime_ns: int
    ctime_ns: int
    inode: int

    @classmethod
    def of(cls, path: Path) -> "FileState | None":
        try:
            st = os.stat(path)
        except OSError:
            return None
        return cls(st.st_size, st.st_mtime_ns, st.st_ctime_ns, st.st_ino)


def is_ignored_top_level(name: str) -> bool:
    """Entries of INBOX that are never studies nor reported (hidden, or gammadot's own)."""
    return name.startswith((".", "_"))


def study_names(inbox: Path) -> list[str]:
    """The studies of ``inbox``: sub-folders holding a ``study.toml``, sorted by name."""
    names = []
    try:
        entries = list(os.scandir(inbox))
    except OSError:
        return names
    for entry in entries:
        if is_ignored_top_level(entry.name):
            continue
        try:
            if entry.is_dir(follow_symlinks=False) and (Path(entry.path) / STUDY_FILE).is_file():
                names.append(entry.name)
        except OSError:
            continue
    return sorted(names)


def not_in_a_study(inbox: Path) -> list[str]:
    """Top-level entries of ``inbox`` that are not studies (files, folders without study.toml)."""
    studies = set(study_names(inbox))
    try:
        names = sorted(entry.name for entry in os.scandir(inbox))
    except OSError:
        return []
    return [n for n in names if not is_ignored_top_level(n) and n not in studies]


def study_of(inbox: Path, path: str | Path) -> tuple[str | None, bool]:
    """The study a path of an event belongs to, and whether it is INBOX-level.

    Returns ``(name, False)`` for a path inside a study folder (outside its output folder),
    ``(name, True)`` for a top-level entry itself, ``(None, False)`` for paths to ignore
    (outside INBOX, hidden or gammadot's own, inside an output folder or a hidden folder).
    """
    rel_text = os.path.relpath(os.path.abspath(path), os.path.abspath(inbox))
    if rel_text == os.curdir or rel_text.startswith(os.pardir):
        return None, False
    rel = Path(rel_text)
    parts = rel.parts
    if not parts or is_ignored_top_level(parts[0]):
        return None, False
    if len(parts) == 1:
        return parts[0], True
    if any(part.startswith((".", DEFAULT_OUT)) for part in parts[1:]):
        return None, False
    return parts[0], False


def snapshot(study_dir: Path, suffixes: Iterable[str] = ()) -> dict[str, FileState]:
    """The state of every export of a study and of its ``study.toml`` (relative paths)."""
    states: dict[str, FileState] = {}
    toml = FileState.of(study_dir / STUDY_FILE)
    if toml is not None:
        states[STUDY_FILE] = toml
    for path in find_input_files(study_dir, study_dir / DEFAULT_OUT, suffixes):
        state = FileState.of(path)
        if state is not None:
            states[path.relative_to(study_dir).as_posix()] = state
    return states


@dataclass
class Readiness:
    """What to do with a study now: ``files`` to process (relative paths), files left waiting."""

    files: list[str]
    waiting: list[str]
    empty: list[str]


@dataclass
class SettleTracker:
    """Remembers, per file, its last state and when (watcher clock, s) it last changed."""

    states: dict[str, FileState] = field(default_factory=dict)
    changed_at: dict[str, float] = field(default_factory=dict)
    last_change: float | None = None
    first_unhandled: float | None = None

    def observe(self, states: dict[str, FileState], now: float) -> list[tuple[str, str]]:
        """Take a new look; returns ``(file, "added" | "changed" | "removed")`` per difference."""
        changes = []
        for rel, state in states.items():
            before = self.states.get(rel)
            if before != state:
                changes.append((rel, "added" if before is None else "changed"))
                self.changed_at[rel] = now
        for rel in set(self.states) - set(states):
            changes.append((rel, "removed"))
            self.changed_at.pop(rel, None)
        self.states = dict(states)
        if changes:
            self.last_change = now
            if self.first_unhandled is None:
                self.first_unhandled = now
        return changes

    def readiness(self, now: float, settle: float, max_wait: float) -> Readiness | None:
        """The files to process now, or ``None`` to wait (see module docstring)."""
        exports = {rel: s for rel, s in self.states.items() if rel != STUDY_FILE}
        empty = sorted(rel for rel, s in exports.items() if s.size == 0)
        settled = {rel for rel in exports if now - self.changed_at.get(rel, now) >= settle}
        candidates = sorted(rel for rel in exports if rel not in empty)
        toml_settled = STUDY_FILE not in self.states or now - self.changed_at.get(STUDY_FILE, now) >= settle
        quiet = self.last_change is None or now - self.last_change >= settle
        if quiet:
            return Readiness(candidates, [], empty)
        waited = self.first_unhandled is not None and now - self.first_unhandled >= max_wait
        if waited and toml_settled:
            ready = [rel for rel in candidates if rel in settled]
            return Readiness(ready, [rel for rel in candidates if rel not in settled], empty)
        return None

    def handled(self) -> None:
        """The changes seen so far have been dealt with."""
        self.first_unhandled = None

"""``gammadot watch``: keep every study of an inbox processed and published as files arrive.

How it works (README, "Watching an inbox"):

1. One watcher per inbox: ``INBOX/.gammadot/watch.lock`` is held with ``filelock`` (an flock
   on POSIX). The kernel drops an flock when its process ends in any way, ``kill -9``
   included, so a crashed watcher never blocks the next start; no PID file has to be trusted.
2. File-system events (``watchdog``: inotify, FSEvents, ReadDirectoryChangesW; or its polling
   observer with ``--poll SECONDS`` for shares where events do not arrive) only say *which
   study* to look at. The study folder is then scanned and compared with what was seen
   before, so a lost or duplicated event changes nothing; a rescan every ``rescan`` seconds
   catches what events missed.
3. A study is processed once its files are stable (:mod:`gammadot.inbox`), through the same
   pipeline and cache as ``gammadot run``, unless its fingerprint (code, settings, input
   bytes) equals that of its current output: then nothing is written.
4. Outputs become a new version of ``STUDY/_gammadot`` (:mod:`gammadot.study_output`) and,
   with ``--publish DIR``, are copied to ``DIR/<study>`` (:mod:`gammadot.publish`), both
   switched atomically. At start, leftovers of a crash are removed and every study whose
   output or publication is behind its files is brought up to date.
5. A stop request (SIGINT/SIGTERM in the CLI) ends the loop between two files; the half
   processed study keeps its previous version and is finished at the next start.

Every event is one JSON line (:mod:`gammadot.eventlog`).
"""

from __future__ import annotations

import hashlib
import json
import os
import socket
import threading
import time
from dataclasses import dataclass, field
from datetime import datetime, timezone
from pathlib import Path
from typing import TYPE_CHECKING, Any

from .atomic import atomic_write_text
from .cache import open_cache
from .config import STUDY_FILE, StudyConfigError, load_study_config
from .eventlog import EventLog
from .fingerprint import code_fingerprint, study_fingerprint
from .inbox import WATCH_STATE_DIR, FileState, Readiness, SettleTracker, not_in_a_study, snapshot, study_names, study_of
from .pipeline import DEFAULT_OUT, process_study
from .publish import PublishError, publish_study
from .study_output import write_study_version
from .versioned import VersionedFolder, VersionError

if TYPE_CHECKING:
    from .registry import Registry

LOCK_NAME = "watch.lock"
OWNER_NAME = "watch.json"
IGNORED_EVENT_TYPES = ("opened", "closed_no_write")


class WatcherBusy(RuntimeError):
    """Another watcher holds the inbox; the message says which process."""


class StopRequested(Exception):
    """Raised between two files when a stop was requested."""


@dataclass(frozen=True)
class WatchSettings:
    """What ``gammadot watch`` was asked to do (times in seconds)."""

    inbox: Path
    publish_dir: Path | None = None
    poll: float | None = None      # None: native file-system events
    settle: float = 2.0            # a file is stable after this long unchanged
    max_wait: float = 60.0         # then stable files are processed even if others still change
    rescan: float = 60.0           # look at every study this often, events or not

    @property
    def tick(self) -> float:
        """How often pending studies are looked at."""
        return min(0.5, max(0.02, self.settle / 4))


@dataclass
class _StudyState:
    tracker: SettleTracker = field(default_factory=SettleTracker)
    handled: dict[str, FileState] | None = None   # the snapshot last dealt with
    seen: bool = False
    retry_at: float = 0.0
    reported_rejections: set[tuple[str, str | None, str]] = field(default_factory=set)
    reported_empty: set[str] = field(default_factory=set)


class _StopCheck:
    """A pipeline progress receiver that raises :class:`StopRequested` when asked to stop."""

    def __init__(self, stop: threading.Event) -> None:
        self.stop = stop

    def start(self, total: int) -> None:
        pass

    def advance(self, label: str) -> None:
        if self.stop.is_set():
            raise StopRequested(label)


def acquire_watch_lock(inbox: Path) -> Any:
    """Hold the inbox's watcher lock, or raise :class:`WatcherBusy` naming the holder."""
    from filelock import FileLock, Timeout

    folder = inbox / WATCH_STATE_DIR
    folder.mkdir(exist_ok=True)
    lock = FileLock(str(folder / LOCK_NAME), timeout=0)
    try:
        lock.acquire()
    except Timeout:
        try:
            owner = json.loads((folder / OWNER_NAME).read_text(encoding="utf-8"))
            who = f"process {owner.get('pid')} on {owner.get('host')} since {owner.get('started')}"
        except (OSError, ValueError):
            who = "another process"
        raise WatcherBusy(f"{inbox}: already watched by {who}; one watcher per inbox") from None
    owner = {"pid": os.getpid(), "host": socket.gethostname(),
             "started": datetime.now(timezone.utc).isoformat(timespec="seconds")}
    atomic_write_text(folder / OWNER_NAME, json.dumps(owner) + "\n")
    return lock


def _sha256_or_none(path: Path) -> str | None:
    try:
        return hashlib.sha256(path.read_bytes()).hexdigest()
    except OSError:
        return None


class InboxWatcher:
    """Watches one inbox until :meth:`request_stop` (see module docstring)."""

    def __init__(self, settings: WatchSettings, registry: "Registry", log: EventLog | None = None,
                 stop: threading.Event | None = None) -> None:
        self.settings = settings
        self.inbox = Path(os.path.abspath(settings.inbox))
        self.publish_dir = Path(os.path.abspath(settings.publish_dir)) if settings.publish_dir else None
        self.registry = registry
        self.log = log or EventLog()
        self.stop = stop or threading.Event()
        self.code = code_fingerprint(registry)
        self.suffixes = [s for p in registry.importers.values() for s in p.record.suffixes]
        self.states: dict[str, _StudyState] = {}
        self.announced: set[str] = set()
        self._events_lock = threading.Lock()
        self._dirty: set[str] = set()
        self._inbox_changed = False
        self._wake = threading.Event()
        self._active: set[str] = set()
        self.mode = "polling" if settings.poll else "events"

    # ------------------------------------------------------------------ control

    def request_stop(self) -> None:
        """Ask the loop to end (safe from a signal handler or another thread)."""
        self.stop.set()
        self._wake.set()

    def note_path(self, path: str) -> None:
        """Called for every file-system event: mark the study the path belongs to."""
        name, top_level = study_of(self.inbox, path)
        if name is None:
            return
        with self._events_lock:
            self._dirty.add(name)
            if top_level or name not in self.states:
                self._inbox_changed = True
        self._wake.set()

    def _take_events(self) -> tuple[set[str], bool]:
        with self._events_lock:
            dirty, changed = self._dirty, self._inbox_changed
            self._dirty, self._inbox_changed = set(), False
        return dirty, changed

    # ------------------------------------------------------------------ main loop

    def run(self) -> None:
        """Hold the lock and watch until stopped; raises :class:`WatcherBusy`."""
        lock = acquire_watch_lock(self.inbox)
        observer = None
        try:
            self.log.info("watch_started", inbox=str(self.inbox), mode=self.mode, poll=self.settings.poll,
                          settle=self.settings.settle, publish=str(self.publish_dir) if self.publish_dir else None,
                          pid=os.getpid())
            self._refresh_studies()
            self._clean_leftovers()
            observer = self._start_observer()
            for name in self.states:
                self._active.add(name)
            next_rescan = time.monotonic() + self.settings.rescan
            while not self.stop.is_set():
                self._wake.wait(self.settings.tick)
                self._wake.clear()
                if self.stop.is_set():
                    break
                dirty, inbox_changed = self._take_events()
                if inbox_changed:
                    self._refresh_studies()
                if time.monotonic() >= next_rescan:
                    dirty |= set(self.states)
                    next_rescan = time.monotonic() + self.settings.rescan
                self._active |= dirty & set(self.states)
                for name in sorted(self._active):
                    if self.stop.is_set():
                        break
                    self._step(name)
        finally:
            if observer is not None:
                observer.stop()
                observer.join(timeout=5)
            self.log.info("watch_stopped", inbox=str(self.inbox))
            lock.release()

    def _start_observer(self) -> Any:
        import warnings

        from watchdog.events import FileSystemEventHandler
        from watchdog.observers.polling import PollingObserver

        # A folder renamed inside the watched tree (a staged version moving into versions/)
        # keeps its inotify watch; watchdog warns that it re-registers it. Harmless here.
        warnings.filterwarnings("ignore", message="Callback with id", category=RuntimeWarning,
                                module="watchdog.observers.inotify")

        watcher = self

        class Handler(FileSystemEventHandler):
            def on_any_event(self, event: Any) -> None:
                if event.event_type in IGNORED_EVENT_TYPES:
                    return
                for path in (event.src_path, getattr(event, "dest_path", "")):
                    if path:
                        watcher.note_path(os.fsdecode(path))

        if self.settings.poll:
            observer = PollingObserver(timeout=self.settings.poll)
        else:
            from watchdog.observers import Observer

            observer = Observer()
        try:
            observer.schedule(Handler(), str(self.inbox), recursive=True)
            observer.start()
        except OSError as exc:  # e.g. the inotify watch limit: fall back to polling
            if self.settings.poll:
                raise
            interval = max(self.settings.settle, 1.0)
            self.log.warning("events_unavailable", message=str(exc), fallback=f"polling every {interval} s")
            self.mode = "polling"
            observer = PollingObserver(timeout=interval)
            observer.schedule(Handler(), str(self.inbox), recursive=True)
            observer.start()
        return observer

    # ------------------------------------------------------------------ studies

    def _refresh_studies(self) -> None:
        names = study_names(self.inbox)
        for name in names:
            if name not in self.states:
                self.states[name] = _StudyState()
                self._active.add(name)
        for name in [n for n in self.states if n not in names]:
            del self.states[name]
            self._active.discard(name)
            self.log.warning("study_gone", study=name,
                             message="the folder or its study.toml is gone; its published copy is kept")
        outside = set(not_in_a_study(self.inbox))
        for entry in sorted(outside - self.announced):
            kind = "folder without study.toml" if (self.inbox / entry).is_dir() else "file outside a study"
            self.log.warning("not_in_a_study", file=entry, message=f"{kind}: not processed; "
                             "put exports in a folder that holds a study.toml")
        self.announced = outside

    def _clean_leftovers(self) -> None:
        roots = [self.inbox / name / DEFAULT_OUT for name in self.states]
        if self.publish_dir is not None:
            roots += [self.publish_dir / name for name in self.states]
        for root in roots:
            if not root.is_dir():
                continue
            folder = VersionedFolder(root)
            try:
                with folder.lock(timeout=30):
                    removed = folder.clean_leftovers()
            except Exception as exc:  # never stop the start for this
                self.log.warning("cleanup_failed", file=str(root), message=f"{type(exc).__name__}: {exc}")
                continue
            for path in removed:
                self.log.info("leftover_removed", file=str(path))

    def _step(self, name: str) -> None:
        """Look at one study; process it when it is ready."""
        state = self.states[name]
        now = time.monotonic()
        if now < state.retry_at:
            return
        study_dir = self.inbox / name
        current = snapshot(study_dir, self.suffixes)
        changes = state.tracker.observe(current, now)
        if not state.seen:
            state.seen = True
            self.log.info("study_found", study=name, files=len([r for r in current if r != STUDY_FILE]))
        else:
            for rel, kind in changes:
                self.log.info(f"file_{kind}", study=name, file=rel)
        if (state.handled is not None and current == state.handled
                and VersionedFolder(study_dir / DEFAULT_OUT).current() is not None):
            self._active.discard(name)
            state.tracker.handled()
            return
        ready = state.tracker.readiness(now, self.settings.settle, self.settings.max_wait)
        if ready is None:
            return
        for rel in ready.empty:
            if rel not in state.reported_empty:
                self.log.info("file_waiting", study=name, file=rel, reason="empty: not written yet")
        state.reported_empty = set(ready.empty)
        for rel in ready.waiting:
            self.log.info("file_deferred", study=name, file=rel, reason="still changing")
        try:
            done = self._process(name, state, ready)
        except StopRequested:
            self.log.info("study_interrupted", study=name, message="stop requested; finished at the next start")
            return
        except Exception as exc:  # anything unexpected: log, keep the last version, retry later
            self.log.error("study_failed", study=name, message=f"{type(exc).__name__}: {exc}",
                           retry_in=self._retry_delay())
            state.retry_at = time.monotonic() + self._retry_delay()
            return
        if done:
            state.handled = {rel: s for rel, s in current.items() if rel not in ready.waiting}
            state.tracker.handled()

    def _retry_delay(self) -> float:
        return max(5.0, 5 * self.settings.settle)

    def _process(self, name: str, state: _StudyState, ready: Readiness) -> bool:
        """Process (or skip, when nothing changed) and publish one study; ``True`` when dealt with."""
        started = time.perf_counter()
        study_dir = self.inbox / name
        out_dir = study_dir / DEFAULT_OUT
        try:
            config = load_study_config(study_dir, self.registry)
        except StudyConfigError as exc:
            self.log.error("study_error", study=name, file=STUDY_FILE,
                           message=f"{exc}; the last good output stays in place")
            return True
        paths = [study_dir / rel for rel in ready.files]
        fingerprint = study_fingerprint(self.code, config, [(rel, _sha256_or_none(study_dir / rel))
                                                            for rel in ready.files])
        manifest = VersionedFolder(out_dir).current_manifest()
        if manifest is not None and manifest.get("fingerprint") == fingerprint:
            self.log.info("study_unchanged", study=name, version=manifest.get("version"))
            return self._publish(name, out_dir)
        cache, problem = open_cache(out_dir, self.registry, code=self.code)
        if cache is None:
            self.log.warning("cache_unavailable", study=name, message=problem)
        result = process_study(study_dir, self.registry, out_dir=out_dir, progress=_StopCheck(self.stop),
                               cache=cache, paths=paths)
        committed = write_study_version(result, out_dir, code=self.code)
        if committed is None:
            for failure in result.writer_failures:
                self.log.error("writer_failed", study=name, writer=failure.writer, plugin=failure.plugin,
                               message=failure.message)
            raise RuntimeError("the tables could not be written; the last good output stays in place")
        if cache is not None and not ready.waiting:
            cache.prune()
        reported = set()
        for rejected in result.rejected:
            sha = next((f.sha256 for f in result.files if f.source_file == rejected.source_file), None)
            key = (rejected.source_file, sha, rejected.reason)
            reported.add(key)
            if key not in state.reported_rejections:
                self.log.warning("file_rejected", study=name, file=rejected.source_file, line=rejected.line,
                                 reason=rejected.reason, plugin=rejected.plugin)
        state.reported_rejections = reported
        for failure in result.writer_failures:
            self.log.error("writer_failed", study=name, writer=failure.writer, plugin=failure.plugin,
                           message=failure.message)
        self.log.info("study_processed", study=name, version=committed.version_id, files=len(result.files),
                      runs=len(result.runs), rejected=len(result.rejected),
                      from_cache=cache.stats.hits if cache else 0, computed=cache.stats.misses if cache else None,
                      waiting=len(ready.waiting) + len(ready.empty) or None,
                      seconds=round(time.perf_counter() - started, 3))
        return self._publish(name, out_dir)

    def _publish(self, name: str, out_dir: Path) -> bool:
        """Publish the study's current output if ``--publish`` is set and it is not there yet."""
        root = self.publish_dir
        if root is None:
            return True
        source = VersionedFolder(out_dir).current()
        target = VersionedFolder(root / name).current()
        if source is None or (target is not None and target.name == source.name):
            return True
        try:
            outcome = publish_study(out_dir, root, name=name)
        except (PublishError, VersionError, OSError) as exc:
            self.log.error("publish_failed", study=name, message=str(exc), retry_in=self._retry_delay())
            self.states[name].retry_at = time.monotonic() + self._retry_delay()
            return False
        self.log.info("published", study=name, version=outcome.version_id, target=str(outcome.target / "site"))
        return True


__all__ = ["InboxWatcher", "StopRequested", "WatchSettings", "WatcherBusy", "acquire_watch_lock"]

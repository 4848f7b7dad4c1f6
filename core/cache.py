"""The run cache: imported and processed files, reused while nothing that shaped them changed.

Why: fitting is most of the time a study takes. When one export is added to a study of 200
runs, only that file needs importing, converting, checking and fitting; the others come from
here. ``gammadot run`` and ``gammadot watch`` share the cache of a study's output folder.

Where: ``OUT/.cache/<key>.entry``, one file per input file, written atomically (temporary file
and rename) and not flushed to disk (losing an entry costs only a recomputation).

Key: SHA-256 of the code fingerprint (gammadot, plugin and library versions and sources), the
parsed study settings, the file's path relative to the study (run ids and messages name it) and
the SHA-256 of its bytes. Any change to one of them is a miss, never a stale hit.

Entry: ``MAGIC`` + HMAC-SHA256 + pickle of ``(FileOutcome, [RunResult])``, taken right after
:func:`gammadot.processing.process_run` (before study-level steps change run ids or add
findings). The output folder often sits on a share that other people can write to, and
unpickling runs code: an entry is unpickled only when its HMAC, made with a secret key that
never leaves the machine (:func:`secret_key`), matches. A truncated, corrupt or foreign entry
is ignored (counted in ``stats.corrupt``) and rebuilt.
"""

from __future__ import annotations

import hashlib
import hmac
import os
import pickle
import secrets
import time
from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING

from .atomic import atomic_write_bytes
from .fingerprint import code_fingerprint, config_digest

if TYPE_CHECKING:
    from .config import StudyConfig
    from .importing import FileOutcome
    from .processing import RunResult
    from .registry import Registry

CACHE_DIR = ".cache"
ENTRY_SUFFIX = ".entry"
MAGIC = b"gammadot-run-cache 1\n"
STATE_ENV = "GAMMADOT_STATE_DIR"
KEY_FILE = "cache-key"
STALE_TEMP_SECONDS = 3600.0


class CacheUnavailable(RuntimeError):
    """The secret key could not be read or created (the cache is then switched off)."""


def state_dir() -> Path:
    """Where gammadot keeps per-user state: ``$GAMMADOT_STATE_DIR``, else
    ``$XDG_STATE_HOME/gammadot``, else ``~/.local/state/gammadot``."""
    if os.environ.get(STATE_ENV):
        return Path(os.environ[STATE_ENV])
    base = os.environ.get("XDG_STATE_HOME") or str(Path.home() / ".local" / "state")
    return Path(base) / "gammadot"


def secret_key(folder: Path | None = None) -> bytes:
    """The machine-local HMAC key (32 random bytes, file mode 0600), created on first use.

    Created through a temporary file and ``link`` so that two processes starting at once end
    up with the same key.
    """
    folder = folder or state_dir()
    path = folder / KEY_FILE
    try:
        existing = _read_key(path)
        if existing is not None:
            return existing
        folder.mkdir(parents=True, exist_ok=True)
        tmp = folder / f".{KEY_FILE}.{os.getpid()}.{secrets.token_hex(4)}"
        fd = os.open(tmp, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o600)
        try:
            with os.fdopen(fd, "wb") as handle:
                handle.write(secrets.token_bytes(32))
                handle.flush()
                os.fsync(handle.fileno())
            os.link(tmp, path)  # fails if another process was first: its key is used
        except FileExistsError:
            pass
        finally:
            tmp.unlink()
        key = _read_key(path)
        if key is None:
            raise CacheUnavailable(f"cache key {path}: too short; delete it to have a new one made")
        return key
    except OSError as exc:
        raise CacheUnavailable(f"cache key {path}: {(exc.strerror or str(exc)).lower()}") from None


def _read_key(path: Path) -> bytes | None:
    try:
        data = path.read_bytes()
    except FileNotFoundError:
        return None
    return data if len(data) >= 32 else None


@dataclass
class CacheStats:
    """What one study pass got from the cache (counts of files)."""

    hits: int = 0
    misses: int = 0
    corrupt: int = 0
    stored: int = 0
    not_cacheable: int = 0


@dataclass
class RunCache:
    """The cache of one study's output folder, for one code version (see module docstring)."""

    folder: Path
    code: str
    key: bytes
    stats: CacheStats = field(default_factory=CacheStats)
    _used: set[str] = field(default_factory=set)
    _config_digests: dict[int, str] = field(default_factory=dict)

    @classmethod
    def for_output(cls, out_dir: Path, registry: "Registry", *, code: str | None = None) -> "RunCache":
        """The cache below ``out_dir`` (``OUT/.cache``); raises :class:`CacheUnavailable`."""
        return cls(out_dir / CACHE_DIR, code or code_fingerprint(registry), secret_key())

    def entry_path(self, rel: str, sha256: str, config: "StudyConfig") -> Path:
        """Where the entry of this file content, path and settings lives."""
        digest = self._config_digests.get(id(config))
        if digest is None:
            digest = self._config_digests[id(config)] = config_digest(config)
        name = hashlib.sha256(f"{self.code}\n{digest}\n{rel}\n{sha256}".encode("utf-8")).hexdigest()
        return self.folder / f"{name}{ENTRY_SUFFIX}"

    def get(self, path: Path, rel: str,
            config: "StudyConfig") -> tuple["FileOutcome", list["RunResult"]] | None:
        """The cached outcome and processed runs of ``path``, or ``None`` (a miss)."""
        try:
            sha256 = hashlib.sha256(path.read_bytes()).hexdigest()
        except OSError:
            self.stats.misses += 1
            return None  # import_file reports the problem
        entry = self.entry_path(rel, sha256, config)
        try:
            blob = entry.read_bytes()
        except OSError:
            self.stats.misses += 1
            return None
        payload = self._verified(blob)
        if payload is not None:
            try:
                outcome, runs = pickle.loads(payload)
                if outcome.sha256 == sha256 and outcome.source_file == rel:
                    self._used.add(entry.name)
                    self.stats.hits += 1
                    return outcome, runs
            except Exception:  # a signed entry from an incompatible gammadot: rebuild it
                pass
        self.stats.corrupt += 1
        self.stats.misses += 1
        return None

    def put(self, rel: str, config: "StudyConfig", outcome: "FileOutcome", runs: list["RunResult"]) -> None:
        """Store a freshly computed file (not when it could not be read: that may pass)."""
        if outcome.sha256 is None or outcome.source_file != rel:
            return
        try:
            payload = pickle.dumps((outcome, runs), protocol=pickle.HIGHEST_PROTOCOL)
        except Exception:  # a plugin object that cannot be pickled: compute it every time
            self.stats.not_cacheable += 1
            return
        entry = self.entry_path(rel, outcome.sha256, config)
        signature = hmac.new(self.key, payload, hashlib.sha256).digest()
        try:
            atomic_write_bytes(entry, MAGIC + signature + payload, fsync=False)
        except OSError:
            return  # a full or read-only disk only costs speed
        self._used.add(entry.name)
        self.stats.stored += 1

    def _verified(self, blob: bytes) -> bytes | None:
        head = len(MAGIC) + 32
        if len(blob) <= head or not blob.startswith(MAGIC):
            return None
        signature, payload = blob[len(MAGIC):head], blob[head:]
        expected = hmac.new(self.key, payload, hashlib.sha256).digest()
        return payload if hmac.compare_digest(signature, expected) else None

    def prune(self) -> int:
        """Delete entries not used in this pass and old temporary files; returns how many."""
        removed = 0
        try:
            entries = list(self.folder.iterdir())
        except OSError:
            return 0
        now = time.time()
        for path in entries:
            try:
                if path.name.endswith(ENTRY_SUFFIX) and path.name not in self._used:
                    path.unlink()
                    removed += 1
                elif path.name.endswith(".tmp") and now - path.stat().st_mtime > STALE_TEMP_SECONDS:
                    path.unlink()
                    removed += 1
            except OSError:
                continue
        return removed


def open_cache(out_dir: Path, registry: "Registry", *, code: str | None = None) -> tuple[RunCache | None, str | None]:
    """The study's cache, or ``None`` with the reason when it cannot be used."""
    try:
        return RunCache.for_output(out_dir, registry, code=code), None
    except CacheUnavailable as exc:
        return None, str(exc)


__all__ = ["CACHE_DIR", "CacheStats", "CacheUnavailable", "RunCache", "open_cache", "secret_key", "state_dir"]

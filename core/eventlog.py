"""Structured event log of the watcher: one JSON object per line (JSON Lines), on stderr.

Every line has ``time`` (UTC, ISO 8601, milliseconds), ``level`` (info | warning | error) and
``event`` (a fixed name, listed in the README), then ``study`` and ``file`` when the event
concerns one, then the event's own fields. Example::

    {"time": "2026-03-02T09:14:07.512Z", "level": "info", "event": "file_added", "study": "lot-2611", "file": "r1.csv"}

One line per event suits journald, ``jq`` and log shippers alike. Each line is written and
flushed with one call under a lock, so lines never interleave.
"""

from __future__ import annotations

import json
import sys
import threading
from datetime import datetime, timezone
from typing import Any, TextIO

LEVELS = ("info", "warning", "error")


def event_line(level: str, event: str, fields: dict[str, Any], now: datetime | None = None) -> str:
    """One JSON line (without newline) for an event; ``None`` fields are left out."""
    when = (now or datetime.now(timezone.utc)).isoformat(timespec="milliseconds").replace("+00:00", "Z")
    entry: dict[str, Any] = {"time": when, "level": level, "event": event}
    for key in ("study", "file"):
        if fields.get(key) is not None:
            entry[key] = fields[key]
    entry.update({k: v for k, v in fields.items() if k not in entry and v is not None})
    return json.dumps(entry, ensure_ascii=False, default=str)


class EventLog:
    """Writes events as JSON lines to a text stream (default: stderr)."""

    def __init__(self, stream: TextIO | None = None) -> None:
        self.stream = stream
        self._lock = threading.Lock()

    def emit(self, level: str, event: str, **fields: Any) -> None:
        """Write one line for ``event``."""
        line = event_line(level, event, fields) + "\n"
        stream = self.stream if self.stream is not None else sys.stderr
        with self._lock:
            try:
                stream.write(line)
                stream.flush()
            except (OSError, ValueError):
                pass  # a closed log must never stop the watcher

    def info(self, event: str, **fields: Any) -> None:
        self.emit("info", event, **fields)

    def warning(self, event: str, **fields: Any) -> None:
        self.emit("warning", event, **fields)

    def error(self, event: str, **fields: Any) -> None:
        self.emit("error", event, **fields)

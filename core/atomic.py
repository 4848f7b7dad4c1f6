"""Atomic file output: a reader sees the old file or the new one, never half of one."""

from __future__ import annotations

import os
from pathlib import Path


def atomic_write_bytes(path: Path, data: bytes, *, fsync: bool = True) -> None:
    """Write ``data`` to ``path`` through a temporary sibling, fsync, then rename over.

    ``fsync=False`` skips the flush to disk: still atomic for readers and against a killed
    process, but not against a power cut (for caches, which are checked when read).
    """
    path.parent.mkdir(parents=True, exist_ok=True)
    tmp = path.with_name(f".{path.name}.{os.getpid()}.tmp")
    try:
        with open(tmp, "wb") as handle:
            handle.write(data)
            if fsync:
                handle.flush()
                os.fsync(handle.fileno())
        os.replace(tmp, path)
    finally:
        if tmp.exists():
            tmp.unlink()


def atomic_write_text(path: Path, text: str) -> None:
    """UTF-8 text through :func:`atomic_write_bytes`."""
    atomic_write_bytes(path, text.encode("utf-8"))

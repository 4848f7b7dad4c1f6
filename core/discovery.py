"""Finding a study's input files: every export at any depth, in a fixed (sorted) order.

Skipped: ``study.toml``, hidden files and folders, the output folder, README files, and the
temporary or lock files that editors, instruments and file copies leave while writing.
"""

from __future__ import annotations

import fnmatch
from pathlib import Path
from typing import Iterable

# Suffixes the contract names for exports; importers may add their own.
CONTRACT_SUFFIXES = (".csv", ".txt", ".tsv", ".xlsx", ".json")
TEMPORARY_PATTERNS = ("~$*", ".~lock*", "*.tmp", "*.part", "*.partial", "*.crdownload", "*.swp", "*~")


def is_temporary(name: str) -> bool:
    """True for names that editors, copies and instruments use while still writing."""
    return any(fnmatch.fnmatch(name.lower(), pattern) for pattern in TEMPORARY_PATTERNS)


def find_input_files(study_dir: Path, out_dir: Path | None, suffixes: Iterable[str] = ()) -> list[Path]:
    """Export files below ``study_dir`` sorted by relative path (deterministic order)."""
    wanted = {s.lower() for s in (*CONTRACT_SUFFIXES, *suffixes)}
    out = out_dir.resolve() if out_dir is not None else None
    found = []
    for path in study_dir.rglob("*"):
        rel = path.relative_to(study_dir)
        if any(part.startswith((".", "_gammadot")) for part in rel.parts):
            continue
        if out is not None and (path.resolve() == out or out in path.resolve().parents):
            continue
        if not path.is_file() or path.suffix.lower() not in wanted:
            continue
        if path.name.lower().startswith("readme") or is_temporary(path.name):
            continue
        found.append(path)
    return sorted(found, key=lambda p: p.relative_to(study_dir).as_posix())

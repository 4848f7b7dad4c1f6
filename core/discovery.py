"""Finding a study's input files: every export at any depth, in a fixed (sorted) order.

Skipped: ``study.toml``, hidden files and folders, the output folder, README files, and the
temporary or lock files that editors, instruments and file copies leave while writing.
"""

from __future__ import annotations

import fnmatch
import os
from pathlib import Path
from typing import Iterable

# Suffixes the contract names for exports; importers may add their own.
CONTRACT_SUFFIXES = (".csv", ".txt", ".tsv", ".xlsx", ".json")
TEMPORARY_PATTERNS = ("~$*", ".~lock*", "*.tmp", "*.temp", "*.part", "*.partial", "*.filepart", "*.crdownload",
                      "*.download", "*.swp", "*.lck", "*~")


def is_temporary(name: str) -> bool:
    """True for names that editors, copies and instruments use while still writing."""
    return any(fnmatch.fnmatch(name.lower(), pattern) for pattern in TEMPORARY_PATTERNS)


def find_input_files(study_dir: Path, out_dir: Path | None, suffixes: Iterable[str] = ()) -> list[Path]:
    """Export files below ``study_dir`` sorted by relative path (deterministic order).

    Skipped folders (hidden, ``_gammadot*``, the output folder) are not even entered: their
    content is not looked at, and folders that vanish during the walk (an old output version
    being removed by a concurrent run) are passed over. Symbolic links to folders are not
    followed.
    """
    wanted = {s.lower() for s in (*CONTRACT_SUFFIXES, *suffixes)}
    out = out_dir.resolve() if out_dir is not None else None
    found = []
    for folder, dirs, files in os.walk(study_dir):
        base = Path(folder)
        dirs[:] = [d for d in dirs if not d.startswith((".", "_gammadot"))
                   and (out is None or (base / d).resolve() != out)]
        for name in files:
            path = base / name
            if name.startswith((".", "_gammadot")) or path.suffix.lower() not in wanted:
                continue
            if name.lower().startswith("readme") or is_temporary(name):
                continue
            if out is not None and out in path.resolve().parents:
                continue
            if not path.is_file():
                continue
            found.append(path)
    return sorted(found, key=lambda p: p.relative_to(study_dir).as_posix())

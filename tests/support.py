"""Helpers shared by tests (importable as ``support``: tests/ is on pytest's pythonpath)."""

from __future__ import annotations

from pathlib import Path


def write_export(path: Path, metadata: dict[str, str], header: list[str], rows: list[list[float]],
                 *, sep: str = ",", encoding: str = "utf-8") -> Path:
    """Write a delimited-text export with a metadata block (``key: value``) and a table."""
    lines = [f"{k}: {v}" for k, v in metadata.items()]
    lines.append(sep.join(header))
    lines += [sep.join(repr(float(v)) for v in row) for row in rows]
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_bytes(("\n".join(lines) + "\n").encode(encoding))
    return path

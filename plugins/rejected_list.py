"""Writer ``rejected_list``: ``OUT/rejected.json``, the files gammadot could not use, for scripts.

The same list as ``tables/rejected.parquet`` and the study site, as plain JSON that a shell
script, a LIMS or a monitoring job can read without Parquet support::

    {"study": "Hand-cream base", "count": 1,
     "rejected": [{"file": "lot-7.csv", "line": 4, "reason": "...", "plugin": null}]}

``file`` is relative to the study folder, ``line`` is ``null`` when the problem concerns the
whole file. Rejected files stay where they are; when fixed, the next pass picks them up. The
file is written atomically and has the same bytes for the same input.
"""

from __future__ import annotations

import json
from pathlib import Path
from typing import Any

from gammadot.atomic import atomic_write_text
from gammadot.hookspecs import hookimpl
from gammadot.records import Writer

FILE_NAME = "rejected.json"


def rejected_document(result: Any) -> dict[str, Any]:
    """The JSON document for a processed study."""
    rejected = [{"file": r.source_file, "line": r.line, "reason": r.reason, "plugin": r.plugin}
                for r in result.rejected]
    return {"study": result.config.title, "count": len(rejected), "rejected": rejected}


def write_rejected(result: Any, out_dir: Path) -> list[Path]:
    """Write ``out_dir/rejected.json``."""
    path = out_dir / FILE_NAME
    atomic_write_text(path, json.dumps(rejected_document(result), indent=1, ensure_ascii=False) + "\n")
    return [path]


@hookimpl
def gammadot_writers() -> list[Writer]:
    """Provide the rejected-files list (after the tables, before the site)."""
    return [Writer(id="rejected_list", title="Rejected files (JSON)", write=write_rejected, order=20)]

"""DEVELOPERS.md's in-house model example, run exactly as written there.

The three code blocks that follow the lines naming ``acme_rheo_models.py``, ``pyproject.toml``
and ``tests/test_acme_models.py`` are extracted, written into a temporary package and run:
the module is imported as a plugin, the entry point is checked against the module, and the
example's own test function is called. A change to the plugin interface that breaks the
published example breaks this test.
"""

from __future__ import annotations

import importlib
import re
import tomllib
from pathlib import Path

import pytest

GUIDE = Path(__file__).resolve().parent.parent / "DEVELOPERS.md"
SECTION = "## Writing a plugin: an in-house model"


def _blocks() -> dict[str, str]:
    """Code blocks of the model section, keyed by the file name in the line before them."""
    text = GUIDE.read_text(encoding="utf-8")
    section = text[text.index(SECTION):]
    section = section[:section.index("\n## ", len(SECTION))]
    found = {}
    for match in re.finditer(r"`([^`\n]+\.(?:py|toml))`[^\n]*:\n\n```(?:python|toml)\n(.*?)```", section, re.S):
        found[match.group(1)] = match.group(2)
    return found


def test_the_guide_has_the_three_files() -> None:
    assert set(_blocks()) == {"acme_rheo_models.py", "pyproject.toml", "tests/test_acme_models.py"}


def test_the_in_house_model_example_runs_as_written(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    blocks = _blocks()
    package = tmp_path / "acme-rheo-models"
    for name, code in blocks.items():
        (package / name).parent.mkdir(parents=True, exist_ok=True)
        (package / name).write_text(code, encoding="utf-8")
    monkeypatch.syspath_prepend(str(package))
    monkeypatch.syspath_prepend(str(package / "tests"))
    for name in ("acme_rheo_models", "test_acme_models"):
        monkeypatch.delitem(__import__("sys").modules, name, raising=False)

    project = tomllib.loads(blocks["pyproject.toml"])
    (target,) = project["project"]["entry-points"]["gammadot"].values()
    plugin = importlib.import_module(target)
    assert [m.id for m in plugin.gammadot_models()] == ["acme_thinning"]

    example = importlib.import_module("test_acme_models")
    study = tmp_path / "study"
    study.mkdir()
    example.test_acme_model_recovers_its_parameters(study)

"""``gammadot new-plugin``: write a small, installable plugin package from a template.

The package is complete on its own: ``pyproject.toml`` with the entry point in the group
``gammadot``, the plugin module, a test that runs a study through the real pipeline with the
``gammadot_study`` fixture (:mod:`gammadot.testing`), and a README. After ``pip install -e``
its test passes and ``gammadot plugins`` lists it. Nothing that exists is overwritten.
"""

from __future__ import annotations

import keyword
import re
from dataclasses import dataclass
from importlib import resources
from pathlib import Path
from string import Template

from .hookspecs import HOOKSPEC_VERSION

KINDS = ("importer", "model", "check", "geometry", "section")
TEMPLATE_PACKAGE = "gammadot.plugin_templates"
_NAME = re.compile(r"^[A-Za-z][A-Za-z0-9]*(?:[-_][A-Za-z0-9]+)*$")


class ScaffoldError(ValueError):
    """The package cannot be written: a bad name or kind, or the folder exists."""


@dataclass(frozen=True)
class PluginPackage:
    """Where a new plugin package was written and the names it uses."""

    root: Path
    dist: str  # distribution name (pip)
    module: str  # module name, also the entry-point (plugin) name and the record id
    kind: str


def names_for(name: str) -> tuple[str, str]:
    """(distribution name, module name) for a NAME such as ``acme-thinning``.

    The distribution keeps the name as given (lower case); the module replaces ``-`` with
    ``_``. Raises :class:`ScaffoldError` for a name that cannot be both.
    """
    if not _NAME.match(name):
        raise ScaffoldError(f"'{name}' is not a usable plugin name: use letters, digits, '-' and '_', "
                            "starting with a letter (e.g. acme-thinning)")
    dist = name.lower()
    module = dist.replace("-", "_")
    if keyword.iskeyword(module) or module == "gammadot" or module.startswith("gammadot_"):
        raise ScaffoldError(f"'{name}' cannot be a plugin module name; choose another")
    return dist, module


def hookspec_range(version: str = HOOKSPEC_VERSION) -> str:
    """The range a new plugin declares: this major version of the hook specs."""
    major = int(version.split(".")[0])
    return f">={major},<{major + 1}"


def _template(name: str) -> Template:
    return Template(resources.files(TEMPLATE_PACKAGE).joinpath(name).read_text(encoding="utf-8"))


def _gammadot_requirement() -> str:
    from . import __version__

    major_minor = ".".join(str(__version__).split(".")[:2])
    return f"gammadot>={major_minor}"


def render_files(name: str, kind: str) -> dict[str, str]:
    """The package's files (relative path -> text) for plugin ``name`` of ``kind``."""
    if kind not in KINDS:
        raise ScaffoldError(f"unknown kind '{kind}' (kinds: {', '.join(KINDS)})")
    dist, module = names_for(name)
    values = {"dist": dist, "module": module, "id": module, "kind": kind,
              "title": module.replace("_", " ").capitalize(), "hookspec": hookspec_range(),
              "requires": _gammadot_requirement()}
    return {
        "pyproject.toml": _template("pyproject.toml.tmpl").substitute(values),
        "README.md": _template("README.md.tmpl").substitute(values),
        f"{module}.py": _template(f"{kind}.py.tmpl").substitute(values),
        f"tests/test_{module}.py": _template(f"{kind}_test.py.tmpl").substitute(values),
    }


def write_plugin_package(parent: Path, name: str, kind: str) -> PluginPackage:
    """Write the package into ``parent/<name>``; the folder must not exist yet."""
    files = render_files(name, kind)
    dist, module = names_for(name)
    root = parent / dist
    if root.exists():
        raise ScaffoldError(f"{root} exists; choose another name or folder (nothing is overwritten)")
    for relative, text in files.items():
        path = root / relative
        path.parent.mkdir(parents=True, exist_ok=True)
        path.write_text(text, encoding="utf-8")
    return PluginPackage(root=root, dist=dist, module=module, kind=kind)

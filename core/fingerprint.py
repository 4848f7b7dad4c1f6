"""What identifies a result: the code that computed it, the study's settings and the input bytes.

Three digests (hex SHA-256), used by the run cache (:mod:`gammadot.cache`) and by the versioned
outputs (:mod:`gammadot.study_output`) to tell "nothing changed" from "recompute":

- :func:`code_fingerprint`: gammadot's version and source files, the versions of the numerical
  libraries, and for every plugin its origin (distribution and version) and the source file of
  each module its records' functions live in. Editing a plugin, even without a new version
  number, gives a new fingerprint.
- :func:`config_digest`: the parsed study settings (``StudyConfig``), so that a study.toml edit
  that changes nothing (a comment) keeps the digest.
- :func:`study_fingerprint`: the three together with the list of input files and their SHA-256.
"""

from __future__ import annotations

import dataclasses
import hashlib
import sys
from importlib import metadata, resources
from pathlib import Path
from typing import TYPE_CHECKING, Iterable

if TYPE_CHECKING:
    from .config import StudyConfig
    from .registry import Registry

# Distributions whose version can change a number in the output.
NUMERICAL_LIBRARIES = ("numpy", "scipy", "lmfit", "pint", "pyarrow", "jinja2", "plotly")
# gammadot's own packages: every file in them is part of the code fingerprint.
OWN_PACKAGES = ("gammadot", "gammadot.plugins", "gammadot.site_template")
_OWN_SUFFIXES = (".py", ".j2", ".css", ".js", ".toml")


def _sha256_file(path: Path) -> str:
    try:
        return hashlib.sha256(path.read_bytes()).hexdigest()
    except OSError:
        return "unreadable"


def _own_files() -> list[tuple[str, str]]:
    files = []
    for package in OWN_PACKAGES:
        root = Path(str(resources.files(package)))
        for path in sorted(root.rglob("*")):
            if path.is_file() and path.suffix in _OWN_SUFFIXES and "__pycache__" not in path.parts:
                files.append((f"{package}:{path.relative_to(root).as_posix()}", _sha256_file(path)))
    return files


def _library_versions() -> list[str]:
    versions = [f"python {sys.version_info.major}.{sys.version_info.minor}"]
    for name in NUMERICAL_LIBRARIES:
        try:
            versions.append(f"{name} {metadata.version(name)}")
        except metadata.PackageNotFoundError:
            versions.append(f"{name} absent")
    return versions


def _record_modules(registry: "Registry") -> set[str]:
    """Names of the modules that hold the functions of every record in the catalogue."""
    from .registry import KINDS

    modules: set[str] = set()
    for kind in KINDS:
        for provided in getattr(registry, kind).values():
            record = provided.record
            values = ([getattr(record, f.name) for f in dataclasses.fields(record)]
                      if dataclasses.is_dataclass(record) else [])
            for value in values:
                module = getattr(value, "__module__", None) if callable(value) else None
                if module:
                    modules.add(module)
    return modules


def code_fingerprint(registry: "Registry") -> str:
    """Digest of everything in the code that can change a result (see module docstring)."""
    from . import __version__

    digest = hashlib.sha256()
    parts: list[str] = [f"gammadot {__version__}", *_library_versions()]
    parts += [f"{name}={sha}" for name, sha in _own_files()]
    parts += [f"plugin {name}: {origin}" for name, origin in sorted(registry.plugins.items())]
    for module_name in sorted(_record_modules(registry)):
        module = sys.modules.get(module_name)
        source = getattr(module, "__file__", None)
        parts.append(f"module {module_name}={_sha256_file(Path(source)) if source else 'no file'}")
    for part in parts:
        digest.update(part.encode("utf-8") + b"\n")
    return digest.hexdigest()


def config_digest(config: "StudyConfig") -> str:
    """Digest of the parsed study settings (their ``repr``: dataclasses, dicts, numbers, text)."""
    return hashlib.sha256(repr(config).encode("utf-8")).hexdigest()


def study_fingerprint(code: str, config: "StudyConfig",
                      inputs: Iterable[tuple[str, str | None]]) -> str:
    """Digest of code, settings and the (relative path, SHA-256 or ``None``) of every input.

    ``None`` stands for a file that could not be read; when it becomes readable the
    fingerprint changes and the study is processed again.
    """
    digest = hashlib.sha256()
    digest.update(f"code {code}\nconfig {config_digest(config)}\n".encode())
    for rel, sha in sorted(inputs, key=lambda item: item[0]):
        digest.update(f"{rel}\0{sha or 'unreadable'}\n".encode("utf-8"))
    return digest.hexdigest()

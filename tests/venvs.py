"""Fresh virtual environments for tests that install packages with pip (importable as ``venvs``).

A new environment is made without pip (``python -m venv --without-pip``, fast) and sees the
test environment's packages through a ``.pth`` file that adds its site-packages as a site
directory (so gammadot, its dependencies and the editable install's finder are there, as they
would be in a lab's environment). Packages are installed into it by the test environment's
own pip with ``--python``, offline: ``--no-deps --no-build-isolation``. Whatever is installed
lands in the new environment only; the test environment is not changed.
"""

from __future__ import annotations

import os
import site
import subprocess
import sys
import sysconfig
from pathlib import Path
from typing import Mapping, Sequence


def make_venv(path: Path) -> Path:
    """A new virtual environment at ``path`` that also sees this environment; its python."""
    subprocess.run([sys.executable, "-m", "venv", "--without-pip", str(path)], check=True)
    python = path / ("Scripts/python.exe" if os.name == "nt" else "bin/python")
    purelib = subprocess.run([str(python), "-c", "import sysconfig; print(sysconfig.get_paths()['purelib'])"],
                             check=True, capture_output=True, text=True).stdout.strip()
    parents = [p for p in [*site.getsitepackages(), sysconfig.get_paths()["purelib"]] if Path(p).is_dir()]
    lines = [f"import site; site.addsitedir({p!r})" for p in dict.fromkeys(parents)]
    (Path(purelib) / "_test_parent_environment.pth").write_text("\n".join(lines) + "\n", encoding="utf-8")
    return python


def clean_env(**extra: str) -> dict[str, str]:
    """The process environment without gammadot's switches (and PYTHONPATH), plus ``extra``."""
    env = {k: v for k, v in os.environ.items()
           if not k.startswith("GAMMADOT_") and k not in ("PYTHONPATH", "PYTEST_ADDOPTS")}
    env.update(extra)
    return env


def pip_install(python: Path, *args: str) -> None:
    """``pip install --no-deps --no-build-isolation ARGS`` into the environment of ``python``."""
    result = subprocess.run([sys.executable, "-m", "pip", "--python", str(python), "install", "-q",
                             "--no-deps", "--no-build-isolation", "--disable-pip-version-check", *args],
                            capture_output=True, text=True, env=clean_env())
    assert result.returncode == 0, result.stdout + result.stderr


def run(python: Path, args: Sequence[str], *, cwd: Path | None = None,
        env: Mapping[str, str] | None = None) -> subprocess.CompletedProcess[str]:
    """Run ``python ARGS`` (clean environment unless ``env`` is given), capturing the output."""
    return subprocess.run([str(python), *args], cwd=cwd, capture_output=True, text=True,
                          env=dict(env) if env is not None else clean_env(), timeout=600)

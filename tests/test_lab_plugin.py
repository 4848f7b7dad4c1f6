"""A lab's own plugin end to end: ``examples/merrowind-lab`` (importer for an invented LIMS
layout, an in-house model, a QC rule) pip-installed into a fresh virtual environment,
discovered through its entry point, used in a study, and seen in the tables, the site and
``gammadot plugins``; blocking it by name removes it again.

The expected parameter values are those the flow records were generated with (the model's
own function, noise-free), so the fit must recover them; the temperatures are set here.
"""

from __future__ import annotations

import importlib.util
import shutil
from pathlib import Path

import numpy as np
import pyarrow.parquet as pq
import pytest

import venvs

EXAMPLE = Path(__file__).resolve().parents[1] / "examples" / "merrowind-lab"
TRUE = {"eta0": 12.0, "eta_inf": 0.05, "rate_c": 1.5}  # Pa·s, Pa·s, 1/s


def _example_module():
    """The example's module, loaded from its file (to write records as the LIMS would)."""
    spec = importlib.util.spec_from_file_location("merrowind_lab_source", EXAMPLE / "merrowind_lab.py")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


def _study(folder: Path) -> Path:
    lab = _example_module()
    rate = np.geomspace(0.05, 500, 18)
    eta = lab.structural(rate, **TRUE)
    folder.mkdir()
    (folder / "lt-2611.mwlims").write_text(lab.flow_record("LT-2611", 25.0, rate, eta * 1000), encoding="utf-8")
    (folder / "lt-2612.mwlims").write_text(lab.flow_record("LT-2612", 26.2, rate, eta * 1000), encoding="utf-8")
    lines = ["sample: RO-0926", "temperature: 25 °C", "Shear rate [1/s],Viscosity [Pa·s]"]
    lines += [f"{float(g)!r},0.85" for g in rate[:8]]
    (folder / "check-oil.csv").write_text("\n".join(lines) + "\n", encoding="utf-8")
    return folder


def _tables(out: Path) -> dict[str, list[dict]]:
    return {p.stem: pq.read_table(p).to_pylist() for p in (out / "tables").glob("*.parquet")}


@pytest.mark.venv
def test_lab_plugin_installed_with_pip_is_used_and_can_be_blocked(tmp_path: Path) -> None:
    source = shutil.copytree(EXAMPLE, tmp_path / "merrowind-lab")  # a build writes next to the sources
    python = venvs.make_venv(tmp_path / "venv")
    venvs.pip_install(python, str(source))
    study = _study(tmp_path / "study")
    out = tmp_path / "out"

    listed = venvs.run(python, ["-m", "gammadot.cli", "plugins"])
    assert listed.returncode == 0, listed.stderr
    assert "merrowind_lab  (merrowind-lab 1.0.0)" in listed.stdout
    for line in ("importers: merrowind_lims", "models: merrowind_structural", "checks: merrowind_temperature"):
        assert f"    {line}" in listed.stdout
    assert venvs.run(python, ["-m", "gammadot.cli", "plugins", "--check"]).returncode == 0

    ran = venvs.run(python, ["-m", "gammadot.cli", "run", str(study), "--out", str(out), "--quiet"])
    assert ran.returncode == 0, ran.stdout + ran.stderr
    tables = _tables(out)
    runs = {r["run_id"]: r for r in tables["runs"]}
    assert sorted(runs) == ["check-oil-r1", "lt-2611-r1", "lt-2612-r1"]
    assert runs["lt-2611-r1"]["sample"] == "LT-2611" and runs["lt-2611-r1"]["lims_id"] == "MW-000731"
    fitted = {p["name"]: p["value"] for p in tables["parameters"]
              if p["run_id"] == "lt-2611-r1" and p["model"] == "merrowind_structural"}
    assert fitted == pytest.approx(TRUE, rel=1e-6)
    rule = [(c["run_id"], c["severity"]) for c in tables["checks"] if c["check"] == "merrowind_temperature"]
    assert rule == [("lt-2612-r1", "error")]  # 26.2 °C is outside 25.0 ± 0.5 °C; 25.0 is inside
    site = (out / "site" / "index.html").read_text(encoding="utf-8")
    assert "lt-2611.mwlims" in site
    pages = "".join(p.read_text(encoding="utf-8") for p in (out / "site" / "runs").glob("lt-2612*.html"))
    assert "Merrowind structural thinning" in pages and "merrowind_temperature" in pages

    blocked_env = venvs.clean_env(GAMMADOT_BLOCK_PLUGINS="merrowind_lab")
    listed = venvs.run(python, ["-m", "gammadot.cli", "plugins"], env=blocked_env)
    assert "merrowind_lab  (blocked)" in listed.stdout and "merrowind_structural" not in listed.stdout
    out_blocked = tmp_path / "out-blocked"
    ran = venvs.run(python, ["-m", "gammadot.cli", "run", str(study), "--out", str(out_blocked), "--quiet",
                             "--block", "merrowind_lab"])
    assert ran.returncode == 0, ran.stdout + ran.stderr
    tables = _tables(out_blocked)
    assert [r["run_id"] for r in tables["runs"]] == ["check-oil-r1"]  # .mwlims is nobody's suffix now
    assert not [f for f in tables["fits"] if f["model"] == "merrowind_structural"]
    assert not [c for c in tables["checks"] if c["check"] == "merrowind_temperature"]

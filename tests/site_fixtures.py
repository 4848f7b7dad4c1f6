"""An invented study for the study-site tests (tests/test_study_site*.py, test_site_browser.py).

Four runs: two power-law fluids with hostile names (markup, an ampersand), one of them at two
temperatures; a direct-indicating (dial) viscometer run; one unreadable file. A zero-rate point
is excluded by a check; a run's note looks like a spreadsheet formula; the study sets
reporting rates, two specifications and one check threshold.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from gammadot.pipeline import StudyResult, process_study, write_outputs
from gammadot.plugin_manager import build_plugin_manager
from gammadot.registry import build_registry

EVIL = "<script>alert(1)</script>"
GEL = "Gel B & co"
MUD = "Mud-1"
FORMULA_NOTE = "=HYPERLINK(\"http://example.invalid\",\"x\")"
K_A, N_A = 2.5, 0.45  # invented power-law fluid: η = K·γ̇^(n−1), K in Pa·sⁿ
K_B, N_B = 0.8, 0.70
K_B40, N_B40 = 0.5, 0.75
RATES_A = np.geomspace(0.5, 200.0, 10)
# A Bingham-like drilling fluid read at the six standard speeds (dial degrees).
DIAL = {600.0: 50.0, 300.0: 30.0, 200.0: 23.4, 100.0: 16.8, 6.0: 10.6, 3.0: 10.3}

STUDY_TOML = """\
[study]
title = "Gel screening <b>2024</b>"
description = "Invented data & a <i>tag</i>."

[geometries.dial]
type = "direct_indicating"

[fit]
shear_rates = ["10 1/s", "1000 1/s"]

[checks.non_monotonic]
tolerance = "15 %"

[[spec]]
name = "viscosity at 10 1/s"
quantity = "viscosity"
shear_rate = "10 1/s"
min = "0.5 Pa*s"
max = "1.0 Pa*s"

[[spec]]
name = "viscosity at 1000 1/s"
quantity = "viscosity"
shear_rate = "1000 1/s"
max = "1 Pa*s"
"""


def power_law_rows(rates: np.ndarray, k: float, n: float, wiggle: np.ndarray | None = None) -> list[str]:
    """CSV rows "rate,viscosity in mPa·s" of η = K·γ̇^(n−1)."""
    wiggle = np.ones(len(rates)) if wiggle is None else wiggle
    return [f"{r:.6g},{k * r ** (n - 1) * w * 1e3:.6g}" for r, w in zip(rates, wiggle)]


def write_study(root: Path) -> Path:
    study = root / "study"
    study.mkdir(parents=True)
    (study / "study.toml").write_text(STUDY_TOML, encoding="utf-8")
    wiggle = 1 + 0.01 * np.sin(np.arange(RATES_A.size))
    header = "Shear rate [1/s],Viscosity [mPa·s]"
    (study / "fluid_a.csv").write_text("\n".join(
        [f"sample: {EVIL}", "temperature: 20 °C", "date: 2024-03-05", f"note: {FORMULA_NOTE}", header,
         *power_law_rows(RATES_A, K_A, N_A, wiggle)]) + "\n", encoding="utf-8")
    rates_b = np.geomspace(1.0, 100.0, 8)
    (study / "gel_b.csv").write_text("\n".join(
        [f"sample: {GEL}", "temperature: 25 °C", "date: 2024-03-07", header, "0,900",
         *power_law_rows(rates_b, K_B, N_B, 1 + 0.005 * (-1.0) ** np.arange(8))]) + "\n", encoding="utf-8")
    (study / "gel_b_40.csv").write_text("\n".join(
        [f"sample: {GEL}", "temperature: 40 °C", "date: 2024-03-07", header,
         *power_law_rows(rates_b, K_B40, N_B40, 1 - 0.005 * (-1.0) ** np.arange(8))]) + "\n", encoding="utf-8")
    dial_rows = [f"{speed:g}\t{reading:g}" for speed, reading in sorted(DIAL.items())]
    (study / "mud.txt").write_text("\n".join(
        [f"sample: {MUD}", "geometry: dial", "temperature: 48.9 °C", "Speed [rpm]\tDial reading [-]",
         *dial_rows]) + "\n", encoding="utf-8")
    (study / "notes.csv").write_text("sample: x\nShear rate [1/s],Viscosity [mPa·s]\n", encoding="utf-8")
    return study


def build_site(root: Path, extra: tuple = ()) -> tuple[StudyResult, Path]:
    """Process the invented study with the built-ins (plus ``extra`` plugins) and write it."""
    registry = build_registry(build_plugin_manager(entry_points=False, extra=extra))
    out = root / "out"
    result = process_study(write_study(root), registry, out_dir=out)
    write_outputs(result, out)
    assert not result.writer_failures, result.writer_failures
    return result, out


def by_sample(result: StudyResult, sample: str, temperature: float | None = None):
    return next(rr for rr in result.runs if rr.run.sample == sample
                and (temperature is None or rr.run.temperature == temperature))

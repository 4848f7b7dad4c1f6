"""Geometry corrections through the real pipeline: a study folder with study.toml and raw
torque/speed exports → process_study → Parquet tables and the site.

Synthetic data from closed forms: a power-law fluid in a wide-gap cup and bob (exact
power-law Couette solution, REFERENCE.md §1.5) and between plates (REFERENCE.md §2); a
Bingham fluid partly sheared in the cup (Reiner–Riwlin, REFERENCE.md §1.7); the six dial
readings of REFERENCE.md §5 on a direct-indicating viscometer.
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pyarrow.parquet as pq
import pytest
from scipy.optimize import brentq

from gammadot.pipeline import process_study, write_outputs

from support import write_export

K, N = 3.0, 0.4  # Pa·sⁿ, 1
R_I, DELTA, LENGTH = 10e-3, 1.25, 30e-3
PLATE_R, PLATE_GAP = 20e-3, 1e-3
STUDY_TOML = """[study]
title = "Geometry corrections (synthetic)"

[geometries.bob20]
type = "concentric_cylinder"
inner_radius = "10 mm"
outer_radius = "12.5 mm"
immersed_length = "30 mm"

[geometries.plate40]
type = "parallel_plate"
radius = "20 mm"
gap = "1 mm"

[geometries.dial]
type = "direct_indicating"

[fit]
models = ["newtonian", "power_law"]
"""


def _couette_power_law_torque(omega: np.ndarray) -> np.ndarray:
    rate = 2 * omega / (N * (1 - DELTA ** (-2 / N)))  # exact inner-wall rate (REFERENCE §1.5)
    return 2 * math.pi * R_I**2 * LENGTH * K * rate**N


def _bingham_torque(omega: float, tau_y: float = 20.0, eta_p: float = 0.5) -> float:
    """Reiner–Riwlin (REFERENCE §1.7) solved for τ_i, M = 2πR_i²Lτ_i."""
    def speed(t: float) -> float:
        if t / DELTA**2 >= tau_y:
            return t / (2 * eta_p) * (1 - DELTA**-2) - tau_y / eta_p * math.log(DELTA)
        return (t - tau_y - tau_y * math.log(t / tau_y)) / (2 * eta_p)
    tau_i = brentq(lambda t: speed(t) - omega, tau_y * (1 + 1e-12), 1e5, xtol=1e-12, rtol=1e-14)
    return 2 * math.pi * R_I**2 * LENGTH * tau_i


@pytest.fixture(scope="module")
def processed(tmp_path_factory: pytest.TempPathFactory):
    from gammadot.plugin_manager import build_plugin_manager
    from gammadot.registry import build_registry

    registry = build_registry(build_plugin_manager(entry_points=False))
    root = tmp_path_factory.mktemp("geometry-pipeline")
    study = root / "study"
    study.mkdir()
    (study / "study.toml").write_text(STUDY_TOML, encoding="utf-8")
    omega = np.geomspace(0.01, 20.0, 18)
    rpm = omega * 60 / (2 * math.pi)
    write_export(study / "cup-power-law.csv", {"sample": "PL", "geometry": "bob20", "temperature": "20 °C"},
                 ["Speed [rpm]", "Torque [µN·m]"], [[s, m * 1e6] for s, m in zip(rpm, _couette_power_law_torque(omega))])
    write_export(study / "cup-bingham.csv", {"sample": "BP", "geometry": "bob20", "temperature": "20 °C"},
                 ["Speed [rad/s]", "Torque [N·m]"], [[w, _bingham_torque(w)] for w in np.geomspace(0.02, 20, 18)])
    plate_omega = np.geomspace(1e-4, 0.5, 16)
    plate_torque = 2 * math.pi * K * (plate_omega / PLATE_GAP) ** N * PLATE_R ** (N + 3) / (N + 3)
    write_export(study / "plates.csv", {"sample": "PL", "geometry": "plate40", "temperature": "20 °C"},
                 ["Speed [rad/s]", "Torque [mN·m]"], [[w, m * 1e3] for w, m in zip(plate_omega, plate_torque)])
    write_export(study / "dial.csv", {"sample": "mud", "geometry": "dial", "temperature": "49 °C"},
                 ["Speed [rpm]", "Dial reading [-]"],
                 [[s, d] for s, d in zip((600, 300, 200, 100, 6, 3), (55, 35, 27, 18, 5, 4))])
    out = root / "out"
    result = process_study(study, registry)
    write_outputs(result, out)
    assert not result.rejected and not result.writer_failures
    tables = {p.stem: pq.read_table(p) for p in (out / "tables").glob("*.parquet")}
    return result, tables, out


def _rows(table, run_id: str) -> list[dict]:
    return [r for r in table.to_pylist() if r["run_id"] == run_id]


def _run_id(result, source: str) -> str:
    return next(rr.run.run_id for rr in result.runs if rr.run.source_file == source)


def test_cup_points_hold_apparent_and_corrected_values(processed) -> None:
    """points.parquet: apparent = ISO representative values, corrected = true values at r_rep
    (power law: γ̇ = (τ_rep/K)^{1/n} within 0.5 %); fitted K and n within 1 %."""
    result, tables, _ = processed
    run_id = _run_id(result, "cup-power-law.csv")
    points = _rows(tables["points"], run_id)
    omega = np.array([p["angular_velocity"] for p in points])
    stress = np.array([p["shear_stress"] for p in points])
    assert [p["shear_rate_apparent"] for p in points] == pytest.approx(omega * (1 + DELTA**2) / (DELTA**2 - 1))
    assert [p["shear_stress_apparent"] for p in points] == pytest.approx(stress)
    assert [p["shear_rate"] for p in points] == pytest.approx((stress / K) ** (1 / N), rel=0.005)
    runs = {r["run_id"]: r for r in tables["runs"].to_pylist()}
    assert runs[run_id]["correction"] == "krieger_wide_gap"
    fit = next(f for f in next(rr for rr in result.runs if rr.run.run_id == run_id).fits if f.model == "power_law")
    assert fit.value("n") == pytest.approx(N, rel=0.01) and fit.value("K") == pytest.approx(K, rel=0.01)


def test_results_table_reports_the_correction_size(processed) -> None:
    """results.parquet: correction_* are max and median of |true/apparent − 1| over the points."""
    result, tables, _ = processed
    for source in ("cup-power-law.csv", "plates.csv"):
        run_id = _run_id(result, source)
        points = _rows(tables["points"], run_id)
        results = {r["name"]: r for r in _rows(tables["results"], run_id)}
        for quantity in ("shear_rate", "shear_stress"):
            change = np.abs(np.array([p[quantity] / p[f"{quantity}_apparent"] - 1 for p in points]))
            assert results[f"correction_{quantity}_max"]["value"] == pytest.approx(change.max(), abs=1e-12)
            assert results[f"correction_{quantity}_median"]["value"] == pytest.approx(np.median(change), abs=1e-12)
            assert results[f"correction_{quantity}_max"]["unit"] == "1"
    plates = {r["name"]: r["value"] for r in _rows(tables["results"], _run_id(result, "plates.csv"))}
    assert plates["correction_shear_stress_median"] == pytest.approx(1 - (3 + N) / 4, rel=0.01)  # WR factor


def test_partly_sheared_points_are_flagged_and_excluded(processed) -> None:
    """The Bingham run's points with τ_o = τ_i/δ² < τ_y = 20 Pa carry the flag, are excluded
    from fits, and checks.parquet names them with the numbers."""
    result, tables, _ = processed
    run_id = _run_id(result, "cup-bingham.csv")
    points = _rows(tables["points"], run_id)
    tau_i = np.array([p["torque"] for p in points]) / (2 * math.pi * R_I**2 * LENGTH)
    expected = tau_i / DELTA**2 < 20.0
    assert 2 <= expected.sum() < len(points) - 4
    flagged = np.array(["geometry.partly_sheared" in p["flags"] for p in points])
    assert (flagged == expected).all()
    assert all(p["excluded"] for p, e in zip(points, expected) if e)
    messages = [c["message"] for c in _rows(tables["checks"], run_id) if c["check"] == "geometry.partly_sheared"]
    assert len(messages) == expected.sum() and all("yield-stress estimate" in m for m in messages)


def test_direct_indicating_results_in_the_table(processed) -> None:
    """The six readings of REFERENCE §5 through the pipeline: PV 20 cP and YP 15 lbf/100 ft²
    (1 lbf/100 ft² = 0.47880259 Pa, REFERENCE §8) in results.parquet, SI units."""
    result, tables, _ = processed
    results = {r["name"]: r for r in _rows(tables["results"], _run_id(result, "dial.csv"))}
    assert results["plastic_viscosity"]["value"] == pytest.approx(0.020) and results["plastic_viscosity"]["unit"] == "Pa·s"
    assert results["yield_point"]["value"] == pytest.approx(15 * 0.47880259, rel=1e-7)
    points = _rows(tables["points"], _run_id(result, "dial.csv"))
    assert [p["dial_reading"] for p in points] == [55, 35, 27, 18, 5, 4]
    assert [p["shear_rate_apparent"] for p in points] == pytest.approx([1.7023 * s for s in (600, 300, 200, 100, 6, 3)])


def test_site_shows_results_and_correction(processed) -> None:
    result, _, out = processed
    index = (out / "site" / "index.html").read_text(encoding="utf-8")
    assert "Correction" in index and "weissenberg rabinowitsch" in index and 'title="krieger_wide_gap"' in index
    page = (out / "site" / "runs" / f"{_run_id(result, 'plates.csv')}.html").read_text(encoding="utf-8")
    assert 'id="results"' in page and "<code>correction_shear_stress_max</code>" in page
    assert "weissenberg_rabinowitsch: shear rate changed by at most 0 %" in page
    dial = (out / "site" / "runs" / f"{_run_id(result, 'dial.csv')}.html").read_text(encoding="utf-8")
    assert "<code>plastic_viscosity</code>" in dial and "API RP 13D: PV = θ600 − θ300 (cP)" in dial

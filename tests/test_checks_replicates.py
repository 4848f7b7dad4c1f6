"""Replicate agreement, through a real study (importer → processing → analysis → tables).

Oracle: power-law curves η = Kγ̇ⁿ⁻¹ are straight lines in log–log, so two runs with consistencies
K and 1.15K differ by exactly 15 % at every rate and log–log interpolation is exact; the common
shear-rate range is the overlap of the two rate lists.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pyarrow.parquet as pq
import pytest

from gammadot.pipeline import process_study, write_outputs

from support import write_export


def _export(study: Path, name: str, sample: str, temperature: str | None, k: float,
            rates: np.ndarray) -> None:
    metadata = {"sample": sample}
    if temperature is not None:
        metadata["temperature"] = temperature
    write_export(study / name, metadata, ["Shear rate [1/s]", "Viscosity [Pa·s]"],
                 [[g, k * g ** (0.45 - 1)] for g in rates])


def _replicate_findings(result, run_id: str) -> list:
    run = next(r for r in result.runs if r.run.run_id == run_id)
    return [f for f in run.findings if f.check == "replicates"]


def test_replicates_beyond_tolerance_are_flagged_and_tabulated(tmp_path: Path, registry) -> None:
    _export(tmp_path, "a.csv", "HC-2611", "25.0 °C", 8.0, np.geomspace(0.1, 100.0, 16))
    _export(tmp_path, "b.csv", "HC-2611", "25.6 °C", 8.0 * 1.15, np.geomspace(1.0, 300.0, 16))
    _export(tmp_path, "c.csv", "HC-2611", "25.3 °C", 8.0 * 1.03, np.geomspace(0.5, 50.0, 12))
    _export(tmp_path, "d.csv", "HC-2611", "40 °C", 3.0, np.geomspace(0.5, 50.0, 12))  # other temperature
    _export(tmp_path, "e.csv", "LT-2612", "25 °C", 2.0, np.geomspace(0.5, 50.0, 12))  # other sample
    result = process_study(tmp_path, registry)
    ids = {r.run.source_file: r.run.run_id for r in result.runs}
    (finding,) = _replicate_findings(result, ids["b.csv"])[:1]
    assert finding.value == pytest.approx(0.15, rel=1e-9)
    assert "15 %" in finding.message and ids["a.csv"] in finding.message
    assert len(_replicate_findings(result, ids["a.csv"])) == 1      # a–b disagree; a–c agree (3 %)
    assert _replicate_findings(result, ids["d.csv"]) == []
    assert _replicate_findings(result, ids["e.csv"]) == []

    rows = {(r["run_id_a"], r["run_id_b"]): r for r in result.analyses["replicates"].tables[0].rows}
    assert set(rows) == {(ids["a.csv"], ids["b.csv"]), (ids["a.csv"], ids["c.csv"]), (ids["b.csv"], ids["c.csv"])}
    ab = rows[(ids["a.csv"], ids["b.csv"])]
    assert (ab["shear_rate_min"], ab["shear_rate_max"]) == pytest.approx((1.0, 100.0))  # the overlap
    assert ab["agree"] is False
    assert rows[(ids["a.csv"], ids["c.csv"])]["max_difference"] == pytest.approx(0.03, rel=1e-9)
    assert rows[(ids["a.csv"], ids["c.csv"])]["agree"] is True

    write_outputs(result, tmp_path / "out")
    table = pq.read_table(tmp_path / "out" / "tables" / "replicates.parquet")
    assert table.num_rows == 3
    assert table.schema.field("max_difference").metadata == {b"unit": b"1"}
    checks = pq.read_table(tmp_path / "out" / "tables" / "checks.parquet").to_pylist()
    assert any(r["check"] == "replicates" and r["unit"] == "1" and r["value"] == pytest.approx(0.15) for r in checks)


def test_tolerance_and_temperature_window_come_from_study_toml(tmp_path: Path, registry) -> None:
    (tmp_path / "study.toml").write_text(
        '[checks.replicates]\ntolerance = "20 %"\ntemperature_window = "0.5 K"\n', encoding="utf-8")
    _export(tmp_path, "a.csv", "HC-2611", "25.0 °C", 8.0, np.geomspace(0.1, 100.0, 16))
    _export(tmp_path, "b.csv", "HC-2611", "25.4 °C", 8.0 * 1.15, np.geomspace(1.0, 300.0, 16))
    _export(tmp_path, "c.csv", "HC-2611", "25.8 °C", 8.0 * 1.5, np.geomspace(1.0, 300.0, 16))
    result = process_study(tmp_path, registry)
    rows = result.analyses["replicates"].tables[0].rows
    assert len(rows) == 2  # a–c is 0.8 K apart: beyond the 0.5 K window; b–c is 0.4 K: compared
    assert all(r["tolerance"] == pytest.approx(0.20) for r in rows)
    by_pair = {(r["temperature_a"], r["temperature_b"]): r for r in rows}
    assert by_pair[(25.0, 25.4)]["agree"] is True                     # 15 % < 20 %
    assert by_pair[(25.4, 25.8)]["max_difference"] == pytest.approx(1.5 / 1.15 - 1, rel=1e-9)


def test_a_single_run_per_sample_gives_no_replicate_table(tmp_path: Path, registry) -> None:
    _export(tmp_path, "a.csv", "HC-2611", "25.0 °C", 8.0, np.geomspace(0.1, 100.0, 16))
    _export(tmp_path, "b.csv", "LT-2612", "25.0 °C", 8.0, np.geomspace(0.1, 100.0, 16))
    assert "replicates" not in process_study(tmp_path, registry).analyses


def test_replicates_can_be_switched_off(tmp_path: Path, registry) -> None:
    (tmp_path / "study.toml").write_text("[checks.replicates]\nenabled = false\n", encoding="utf-8")
    _export(tmp_path, "a.csv", "HC-2611", "25.0 °C", 8.0, np.geomspace(0.1, 100.0, 16))
    _export(tmp_path, "b.csv", "HC-2611", "25.0 °C", 12.0, np.geomspace(0.1, 100.0, 16))
    result = process_study(tmp_path, registry)
    assert "replicates" not in result.analyses
    assert not any(f.check == "replicates" for r in result.runs for f in r.findings)


def test_plate_runs_at_different_gaps_are_a_slip_series_not_replicates(tmp_path: Path, registry) -> None:
    # Common practice: a gap series on parallel plates measures wall slip (Yoshimura & Prud'homme,
    # J. Rheol. 32 (1988) 53), so its curves are expected to differ and are not compared here.
    (tmp_path / "study.toml").write_text(
        '[geometries.p25]\ntype = "parallel_plate"\nradius = "12.5 mm"\ngap = "1 mm"\n', encoding="utf-8")
    rates = np.geomspace(1.0, 100.0, 12)
    for name, gap, k in (("g1.csv", "1 mm", 8.0), ("g05.csv", "0.5 mm", 8.0 * 1.3), ("g1b.csv", "1 mm", 8.0 * 1.2)):
        omega = rates * 1e-3 / 0.0125  # any speeds: the torque below is what the plate sees
        torque = np.pi * 0.0125 ** 3 / 2 * k * rates ** 0.45  # apparent rim stress 2M/(πR³) = Kγ̇ⁿ
        write_export(tmp_path / name, {"sample": "SG-1", "geometry": "p25", "gap": gap, "temperature": "25 °C"},
                     ["Speed [rad/s]", "Torque [N·m]"], [[w, m] for w, m in zip(omega, torque)])
    result = process_study(tmp_path, registry)
    ids = {r.run.source_file: r.run.run_id for r in result.runs}
    pairs = {(r["run_id_a"], r["run_id_b"]) for r in result.analyses["replicates"].tables[0].rows}
    assert pairs == {(ids["g1.csv"], ids["g1b.csv"])}  # same gap: compared (and 20 % apart: flagged)
    assert _replicate_findings(result, ids["g05.csv"]) == []
    assert len(_replicate_findings(result, ids["g1b.csv"])) == 1

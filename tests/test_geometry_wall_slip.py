"""Wall slip from parallel plates at several gaps (Yoshimura & Prud'homme, J. Rheol. 32 (1988)
53, doi:10.1122/1.549963): at equal rim stress γ̇_a(h) = γ̇ + 2u_s/h (REFERENCE.md §10).

The synthetic study: a power-law fluid (K = 5 Pa·sⁿ, n = 0.5) that slips at both plates with
u_s = β·τ, β = 2e-5 m/(s·Pa); torques by quadrature with the local stress solved from
γ̇(τ) + 2βτ/h = Ωr/h (tests/geometry_oracles.py), written as raw exports and run through the
real pipeline.
"""

from __future__ import annotations

import shutil
from pathlib import Path

import numpy as np
import pyarrow.parquet as pq
import pytest

from gammadot.pipeline import process_study, write_outputs
from gammadot.plugins.wall_slip import yoshimura_prudhomme

import geometry_oracles as oracle
from support import write_export

K, N, BETA, RADIUS = 5.0, 0.5, 2e-5, 20e-3
STUDY_TOML = """[study]
title = "Slip check (synthetic)"

[geometries.plate40]
type = "parallel_plate"
radius = "20 mm"
gap = "1 mm"

[fit]
models = ["power_law"]
"""


def test_reference_check_value() -> None:
    """REFERENCE §10: γ̇ = 10 1/s, u_s = 1 mm/s, h = 1 and 0.5 mm → γ̇_a = 12 and 14 1/s, and back."""
    gaps = np.array([1e-3, 0.5e-3])
    apparent = 10.0 + 2 * 1e-3 / gaps
    assert apparent == pytest.approx([12.0, 14.0])
    rate, slip = yoshimura_prudhomme(gaps, apparent)
    assert rate == pytest.approx(10.0, rel=1e-12) and slip == pytest.approx(1e-3, rel=1e-12)


def _write_gap_export(folder: Path, gap_mm: float, temperature: str = "25 °C") -> Path:
    gap = gap_mm * 1e-3
    stress = oracle.slipping_stress(oracle.power_law_rate(K, N), BETA, gap)
    omega = np.geomspace(0.02, 400.0, 22) * gap / RADIUS  # apparent rim rates 0.02 to 400 1/s
    torque = [oracle.plate_torque(stress, w, RADIUS, gap) for w in omega]
    metadata = {"sample": "gel G", "geometry": "plate40", "temperature": temperature}
    if gap_mm != 1.0:
        metadata["gap"] = f"{gap_mm} mm"  # the run's own gap wins over study.toml's 1 mm
    return write_export(folder / f"gel-{gap_mm}mm-{temperature[:2]}C.csv", metadata,
                        ["Speed [rad/s]", "Torque [N·m]"], [[w, m] for w, m in zip(omega, torque)])


@pytest.fixture(scope="module")
def exports(tmp_path_factory: pytest.TempPathFactory) -> dict[str, Path]:
    """The synthetic exports, written once: three gaps at 25 °C and one gap at 40 °C."""
    folder = tmp_path_factory.mktemp("exports")
    found = {f"{g} mm": _write_gap_export(folder, g) for g in (1.0, 0.5, 0.25)}
    found["0.5 mm at 40 °C"] = _write_gap_export(folder, 0.5, "40 °C")
    return found


def _study(root: Path, files: list[Path]) -> Path:
    study = root / "study"
    study.mkdir(parents=True)
    (study / "study.toml").write_text(STUDY_TOML, encoding="utf-8")
    for path in files:
        shutil.copy(path, study / path.name)
    return study


@pytest.fixture(scope="module")
def slip_result(exports: dict[str, Path], tmp_path_factory: pytest.TempPathFactory):
    from gammadot.plugin_manager import build_plugin_manager
    from gammadot.registry import build_registry

    registry = build_registry(build_plugin_manager(entry_points=False))
    root = tmp_path_factory.mktemp("slip")
    result = process_study(_study(root, [exports[k] for k in ("1.0 mm", "0.5 mm", "0.25 mm")]), registry)
    write_outputs(result, root / "out")
    return result, root / "out"


def test_three_gaps_recover_slip_velocity_and_true_rate(slip_result) -> None:
    """At every stress of the common grid: u_s within 3 % of β·τ; the slip-corrected rate, the
    intercept of γ̇_a against 1/h, within 2 % of the apparent rate at the widest gap from the
    power law's (τ/K)^{1/n} (at low stress slip dominates and the true rate is a small
    difference of apparent rates), and within 1 % of it where the stress exceeds 1 Pa."""
    result, _ = slip_result
    (table,) = result.analyses["wall_slip"].tables
    rows = [r for r in table.rows if r["n_gaps"] == 3]
    assert len(rows) >= 10
    for row in rows:
        tau = row["shear_stress"]
        true_rate = (tau / K) ** (1 / N)
        apparent_widest = true_rate + 2 * BETA * tau / 1e-3
        assert row["slip_velocity"] == pytest.approx(BETA * tau, rel=0.03)
        assert abs(row["shear_rate_slip_corrected"] - true_rate) < 0.02 * apparent_widest
        if tau > 1.0:
            assert row["shear_rate_slip_corrected"] == pytest.approx(true_rate, rel=0.01)
        assert row["gaps"] == "0.25 mm, 0.5 mm, 1 mm" and row["sample"] == "gel G" and row["temperature"] == 25.0


def test_measured_curves_are_unchanged_and_runs_are_told(slip_result) -> None:
    """The analysis never replaces a measured curve: every run keeps its rim rate ΩR/h; each run
    involved gets an info finding that names the table."""
    result, _ = slip_result
    for rr in result.runs:
        gap = next(r.value for r in rr.results if r.name == "gap")
        assert rr.run.columns["shear_rate"] == pytest.approx(rr.run.columns["angular_velocity"] * RADIUS / gap)
        (note,) = [f for f in rr.findings if f.check == "wall_slip"]
        assert note.severity == "info" and "wall_slip" in note.message and "3 gaps" in note.message


def test_wall_slip_table_is_written_with_units(slip_result) -> None:
    _, out = slip_result
    table = pq.read_table(out / "tables" / "wall_slip.parquet")
    assert {"sample", "shear_stress", "shear_rate_slip_corrected", "slip_velocity", "n_gaps", "gaps",
            "run_ids"} <= set(table.column_names)
    units = {f.name: (f.metadata or {}).get(b"unit", b"").decode() for f in table.schema}
    assert units["shear_stress"] == "Pa" and units["slip_velocity"] == "m/s"
    assert units["shear_rate_slip_corrected"] == "1/s"


def test_two_gaps_suffice_and_one_gap_gives_nothing(tmp_path: Path, registry, exports) -> None:
    """Two gaps give the slip velocity within 3 % too; a single gap, or two gaps at different
    temperatures (different material states), give no table."""
    two = process_study(_study(tmp_path / "two", [exports["1.0 mm"], exports["0.5 mm"]]), registry)
    rows = two.analyses["wall_slip"].tables[0].rows
    assert len(rows) >= 10 and all(r["n_gaps"] == 2 for r in rows)
    for row in rows:
        assert row["slip_velocity"] == pytest.approx(BETA * row["shear_stress"], rel=0.03)
    one = process_study(_study(tmp_path / "one", [exports["1.0 mm"]]), registry)
    assert "wall_slip" not in one.analyses
    mixed = process_study(_study(tmp_path / "mixed", [exports["1.0 mm"], exports["0.5 mm at 40 °C"]]), registry)
    assert "wall_slip" not in mixed.analyses

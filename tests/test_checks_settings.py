"""[checks.<id>] in study.toml: declared settings validated, parsed with units, defaults filled in;
and the checks end to end through a real study (points.parquet, checks.parquet).

Oracles: unit definitions (1 % = 0.01; 1 ms = 0.001 s; a step of 1 °F is 5/9 K — SI Brochure,
9th ed., and NIST SP 811 for the degree Fahrenheit; from memory), the small-angle cone-plate
relations M = 2πR³τ/3, Ω = αγ̇ (Macosko, Rheology, 1994, ch. 5).
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pyarrow.parquet as pq
import pytest

from gammadot.config import StudyConfigError, check_settings, load_study_config
from gammadot.pipeline import process_study, write_outputs

from support import write_export


def _config(tmp_path: Path, registry, text: str):
    (tmp_path / "study.toml").write_text(text, encoding="utf-8")
    return load_study_config(tmp_path, registry)


def test_settings_are_parsed_with_units_into_si(tmp_path: Path, registry) -> None:
    config = _config(tmp_path, registry, '''
[checks.steady_state]
point_duration = "500 ms"
drift_tolerance = "3 %"

[checks.secondary_flow]
cone_plate_limit = 0.3

[checks.replicates]
temperature_window = "1.8 °F"
''')
    assert config.checks["steady_state"] == {"point_duration": pytest.approx(0.5), "drift_tolerance": pytest.approx(0.03)}
    assert config.checks["secondary_flow"]["cone_plate_limit"] == pytest.approx(0.3)
    assert config.checks["replicates"]["temperature_window"] == pytest.approx(1.0)  # a 1.8 °F step is 1 K


def test_defaults_fill_in_what_the_study_does_not_set(tmp_path: Path, registry) -> None:
    config = _config(tmp_path, registry, '[checks.steady_state]\ndrift_tolerance = "2 %"\nexclude = false\n')
    declared = registry.checks["steady_state"].record.settings
    settings = check_settings(config, "steady_state", declared)
    assert settings == {"enabled": True, "exclude": False, "point_duration": None,
                        "settling_tolerance": pytest.approx(0.01), "drift_tolerance": pytest.approx(0.02)}
    assert check_settings(config, "fit_residuals", registry.checks["fit_residuals"].record.settings)["alpha"] == 0.01


@pytest.mark.parametrize(("text", "message"), [
    ('[checks.secondary_flow]\ncone_plate_limt = 0.4\n',
     r"\[checks.secondary_flow\] unknown key 'cone_plate_limt' \(did you mean 'cone_plate_limit'\?\)"),
    ('[checks.secondary_flw]\nenabled = false\n',
     r"\[checks.secondary_flw\] is not an installed check \(did you mean 'secondary_flow'\?"),
    ('[checks.steady_state]\npoint_duration = "5 mm"\n',
     r"\[checks.steady_state\] point_duration: unit 'mm' is a length unit, but a time unit is needed"),
    ('[checks.steady_state]\nenabled = "no"\n', r"\[checks.steady_state\] enabled must be true or false"),
    ('[checks.steady_state]\ndrift_tolerance = "-5 %"\n',
     r"\[checks.steady_state\] drift_tolerance = '-5 %' is below the smallest allowed value 0"),
    ('[checks.replicates]\ntolerance = "10 %"\nexclud = true\n',
     r"\[checks.replicates\] unknown key 'exclud' \(did you mean 'exclude'\?\)"),
])
def test_wrong_settings_stop_with_the_key_named(tmp_path: Path, registry, text: str, message: str) -> None:
    with pytest.raises(StudyConfigError, match=message):
        _config(tmp_path, registry, text)


CONE = '''[study]
title = "Torque limits"

[geometries.cone50]
type = "cone_plate"
radius = "25 mm"
cone_angle = "1 deg"

[fit]
models = ["newtonian"]

[limits]
torque_min = "1 µN·m"
torque_max = "5 mN·m"
'''


def _cone_study(tmp_path: Path, extra: str = "") -> tuple[Path, np.ndarray]:
    """A 0.2 Pa·s Newtonian oil on a 50 mm, 1° cone, exported as torque and speed."""
    (tmp_path / "study.toml").write_text(CONE + extra, encoding="utf-8")
    radius, angle, eta = 0.025, math.radians(1.0), 0.2
    rate = np.geomspace(0.01, 1000.0, 11)
    torque = 2 * math.pi * radius**3 * eta * rate / 3
    write_export(tmp_path / "oil.csv", {"sample": "oil", "geometry": "cone50"},
                 ["Speed [rad/s]", "Torque [µN·m]"], [[w, m * 1e6] for w, m in zip(rate * angle, torque)])
    return tmp_path, torque


def test_torque_limits_exclude_points_end_to_end(tmp_path: Path, registry) -> None:
    study, torque = _cone_study(tmp_path)
    result = process_study(study, registry)
    out = write_outputs(result, tmp_path / "out")
    expected = [int(i) for i in np.flatnonzero((torque < 1e-6) | (torque > 5e-3))]
    assert expected == [0, 1, 2, 10]
    points = pq.read_table(tmp_path / "out" / "tables" / "points.parquet").to_pylist()
    assert [p["point_index"] for p in points if p["excluded"]] == expected
    assert all("torque_range" in p["flags"] for p in points if p["excluded"])
    fit = result.runs[0].selected
    assert fit.n_points == 11 - len(expected)
    checks = pq.read_table(tmp_path / "out" / "tables" / "checks.parquet")
    assert {"value", "unit"} <= set(checks.column_names)
    rows = [r for r in checks.to_pylist() if r["check"] == "torque_range" and r["point_index"] is not None]
    assert [r["value"] for r in rows] == pytest.approx([torque[i] for i in expected], rel=1e-6)
    assert {r["unit"] for r in rows} == {"N·m"}
    assert out.writer_failures == []


def test_exclude_false_keeps_flagged_points_in_the_fit(tmp_path: Path, registry) -> None:
    study, _ = _cone_study(tmp_path, "\n[checks.torque_range]\nexclude = false\n")
    run = process_study(study, registry).runs[0]
    assert not run.excluded.any() and sum("torque_range" in f for f in run.flags) == 4
    assert run.selected.n_points == 11


def test_enabled_false_switches_the_check_off(tmp_path: Path, registry) -> None:
    study, _ = _cone_study(tmp_path, "\n[checks.torque_range]\nenabled = false\n")
    run = process_study(study, registry).runs[0]
    assert not any(f.check == "torque_range" for f in run.findings)

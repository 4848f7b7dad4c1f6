"""Torque-range check: points outside the instrument's torque range, and the window it gives.

Oracles: the small-angle cone-plate and parallel-plate relations τ = 3M/(2πR³), τ_a = 2M/(πR³)
(Macosko, Rheology: Principles, Measurements and Applications, 1994, ch. 5) and the Margules
inner-wall stress τ_i = M/(2πR_i²L) (Bird, Stewart & Lightfoot 2nd ed. §3.6), written out here.
"""

from __future__ import annotations

import math
import re

import numpy as np
import pytest

from gammadot.plugins.checks_instrument import DEFAULT_TORQUE_MAX, DEFAULT_TORQUE_MIN, find_torque_out_of_range

from check_helpers import (concentric_cylinder, cone_plate, context_for, excluded, flow_columns, make_run,
                           parallel_plate)


def _cone_run(torque: np.ndarray, radius: float = 0.025, angle_deg: float = 1.0):
    geometry = cone_plate(radius, angle_deg)
    speed = np.geomspace(0.01, 10.0, len(torque))
    rate = speed / math.radians(angle_deg)
    stress = 3 * torque / (2 * math.pi * radius**3)
    return make_run(flow_columns(rate, stress, torque=torque, angular_velocity=speed)), geometry


def test_points_below_the_minimum_and_above_the_maximum_torque_are_excluded() -> None:
    torque = np.array([0.02e-6, 0.08e-6, 0.5e-6, 1e-3, 0.15, 0.25, 0.4])
    run, geometry = _cone_run(torque)
    findings = find_torque_out_of_range(run, context_for("torque_range", geometry=geometry))
    assert excluded(findings) == [0, 1, 5, 6]
    low = [f for f in findings if f.point_index in (0, 1)]
    high = [f for f in findings if f.point_index in (5, 6)]
    assert all(f.severity == "warning" and "0.1 µN·m" in f.message for f in low)
    assert all(f.severity == "error" and "0.2 N·m" in f.message for f in high)
    assert low[0].value == pytest.approx(0.02e-6) and low[0].unit == "N·m"


def test_limits_from_study_toml_replace_the_defaults() -> None:
    torque = np.array([0.02e-6, 0.08e-6, 0.5e-6, 1e-3, 0.15])
    run, geometry = _cone_run(torque)
    context = context_for("torque_range", geometry=geometry, limits={"torque_min": 1e-6, "torque_max": 0.1})
    assert excluded(find_torque_out_of_range(run, context)) == [0, 1, 2, 4]


def test_points_inside_the_range_are_not_flagged_and_the_window_follows_from_the_geometry() -> None:
    torque = np.geomspace(1e-6, 1e-2, 8)
    run, geometry = _cone_run(torque, radius=0.025, angle_deg=1.0)
    findings = find_torque_out_of_range(run, context_for("torque_range", geometry=geometry))
    (window,) = findings
    assert window.severity == "info" and window.point_index is None
    stress_low = 3 * DEFAULT_TORQUE_MIN / (2 * math.pi * 0.025**3)   # 0.00306 Pa
    stress_high = 3 * DEFAULT_TORQUE_MAX / (2 * math.pi * 0.025**3)  # 6110 Pa
    low, high = map(float, re.search(r"shear stress (\S+) to (\S+) Pa", window.message).groups())
    assert (low, high) == pytest.approx((stress_low, stress_high), rel=5e-3)  # printed to 3 significant digits
    # the rate window at the viscosity measured at each end of the curve: γ̇ = τ/η
    viscosity = run.columns["viscosity"]
    rate_low, rate_high = map(float, re.search(r"shear rate (\S+) to (\S+) 1/s", window.message).groups())
    assert (rate_low, rate_high) == pytest.approx((stress_low / viscosity[0], stress_high / viscosity[-1]), rel=5e-3)


@pytest.mark.parametrize(("geometry", "stress_per_torque"), [
    (parallel_plate(radius=0.0125, gap=1e-3), 2 / (math.pi * 0.0125**3)),
    (concentric_cylinder(inner=0.014, outer=0.0152, length=0.042), 1 / (2 * math.pi * 0.014**2 * 0.042)),
])
def test_torque_is_recovered_from_the_stress_when_the_export_has_none(geometry, stress_per_torque) -> None:
    torque = np.array([0.05e-6, 2e-6, 1e-3, 0.3])
    rate = np.geomspace(0.1, 100.0, 4)
    run = make_run(flow_columns(rate, stress_per_torque * torque))  # stress only, no torque column
    findings = find_torque_out_of_range(run, context_for("torque_range", geometry=geometry))
    assert excluded(findings) == [0, 3]
    assert findings[0].value == pytest.approx(0.05e-6, rel=1e-9)
    assert "from the stress" in findings[0].message


# --------------------------------------------------------------------------- stress limits
#
# [limits] stress_min / stress_max (README "[limits]"): points whose |apparent shear stress| lies
# outside them are flagged and excluded, for every run. Unit spellings are read through study.toml
# as a user writes them; 50 mPa = 0.05 Pa (SI prefix milli = 10⁻³, SI Brochure 9th ed.).

STRESS = np.array([0.01, 0.04, 0.06, 1.0, 100.0, 600.0])  # Pa


def _limits(registry, text: str) -> dict[str, float]:
    """[limits] of a study.toml, parsed and validated as the core does it."""
    import tomllib

    from gammadot.config import parse_study_config

    return dict(parse_study_config(tomllib.loads("[limits]\n" + text), registry, default_title="t").limits)


def _instrument_run(stress: np.ndarray = STRESS):
    """Instrument-computed values: rate, stress, viscosity; no torque column, no geometry."""
    return make_run(flow_columns(np.geomspace(0.1, 1000.0, len(stress)), stress))


@pytest.mark.parametrize("spelling", ['"50 mPa"', '"0.05 Pa"', '"5e-2 N/m^2"', "0.05"])
def test_stress_below_stress_min_is_excluded_in_a_run_without_torque_or_geometry(registry, spelling: str) -> None:
    limits = _limits(registry, f"stress_min = {spelling}\n")
    assert limits["stress_min"] == pytest.approx(0.05, rel=1e-12)
    findings = find_torque_out_of_range(_instrument_run(), context_for("torque_range", limits=limits))
    assert excluded(findings) == [0, 1]  # 0.01 and 0.04 Pa < 0.05 Pa; 0.06 Pa is inside
    assert all(f.severity == "warning" and "[limits] stress_min" in f.message and "50 mPa" in f.message
               for f in findings)
    assert findings[0].value == pytest.approx(0.01) and findings[0].unit == "Pa"
    assert not any(f.point_index is None for f in findings)  # stress was checked: no "not checked" note


def test_stress_above_stress_max_is_excluded_and_negative_stress_is_judged_by_its_size(registry) -> None:
    limits = _limits(registry, 'stress_min = "50 mPa"\nstress_max = "0.5 kPa"\n')
    stress = STRESS * np.array([1, 1, 1, -1, 1, -1])  # a reversed direction gives negative stress
    findings = find_torque_out_of_range(_instrument_run(stress), context_for("torque_range", limits=limits))
    assert excluded(findings) == [0, 1, 5]  # |−600 Pa| > 500 Pa
    high = next(f for f in findings if f.point_index == 5)
    assert high.severity == "error" and "[limits] stress_max" in high.message and "500 Pa" in high.message


def test_stress_limits_do_not_fire_when_every_stress_is_inside(registry) -> None:
    limits = _limits(registry, 'stress_min = "5 mPa"\nstress_max = "1 kPa"\n')
    assert find_torque_out_of_range(_instrument_run(), context_for("torque_range", limits=limits)) == []


def test_stress_limits_also_apply_to_runs_with_torque_without_flagging_a_point_twice() -> None:
    torque = np.array([0.05e-6, 1e-6, 1e-5, 1e-3, 0.01])  # the first is below the default 0.1 µN·m
    run, geometry = _cone_run(torque)
    stress = 3 * torque / (2 * math.pi * 0.025**3)  # Macosko ch. 5: 1.5e-3, 0.031, 0.31, 31, 306 Pa
    limits = {"stress_min": 0.1, "stress_max": 100.0}
    findings = find_torque_out_of_range(run, context_for("torque_range", geometry=geometry, limits=limits))
    assert excluded(findings) == [0, 1, 4]
    assert [f.point_index for f in findings if f.point_index is not None] == [0, 1, 4]  # point 0 once
    assert "torque" in findings[0].message and "stress_min" in findings[1].message
    assert findings[1].value == pytest.approx(stress[1]) and "stress_max" in findings[2].message


# --------------------------------------------------------------------------- nothing to check

def test_a_run_without_torque_geometry_or_stress_limits_gets_one_note_saying_it_was_not_checked() -> None:
    findings = find_torque_out_of_range(_instrument_run(), context_for("torque_range"))
    (note,) = findings  # no point is flagged: without a torque or a stress limit nothing can be judged
    assert note.severity == "info" and note.point_index is None and not note.exclude
    assert "torque range was not checked" in note.message and "no torque column and no geometry" in note.message
    assert "[limits] stress_min" in note.message and "study.toml" in note.message


def test_a_geometry_without_a_stress_constant_and_no_torque_gets_the_note_naming_it() -> None:
    from gammadot.config import GeometryConfig

    dial = GeometryConfig("field-dial", "direct_indicating", {})  # no torque relation in geometry_facts
    (note,) = find_torque_out_of_range(_instrument_run(), context_for("torque_range", geometry=dial))
    assert note.severity == "info" and "field-dial (direct_indicating)" in note.message


def test_no_note_for_runs_with_torque() -> None:
    torque = np.geomspace(1e-6, 1e-2, 6)
    run, geometry = _cone_run(torque)
    with_geometry = find_torque_out_of_range(run, context_for("torque_range", geometry=geometry))
    without_geometry = find_torque_out_of_range(run, context_for("torque_range"))  # torque column only
    assert not any("not checked" in f.message for f in with_geometry + without_geometry)
    assert without_geometry == []  # all torques inside the default range; no window without a geometry


def test_stress_limits_from_study_toml_exclude_points_through_the_pipeline(tmp_path, registry) -> None:
    from gammadot.pipeline import process_study

    from support import write_export

    rate = np.geomspace(0.1, 100.0, 8)
    stress = 0.5 * rate  # Newtonian 0.5 Pa·s: 0.05, 0.134, 0.360 ... 50 Pa (rate 0.1·1000^(k/7) 1/s)
    write_export(tmp_path / "mw-oil.csv", {"sample": "MW-CO-0412"}, ["Shear rate [1/s]", "Shear stress [Pa]"],
                 [[g, t] for g, t in zip(rate, stress)])
    (tmp_path / "study.toml").write_text('[limits]\nstress_min = "150 mPa"\n', encoding="utf-8")
    (run,) = process_study(tmp_path, registry).runs
    assert [bool(x) for x in run.excluded] == list(stress < 0.15)  # 0.05 Pa and 0.134 Pa out
    assert int(run.excluded.sum()) == 2 and all("torque_range" in run.flags[i] for i in (0, 1))


def test_instrument_values_that_name_their_geometry_are_checked_against_the_torque(tmp_path, registry) -> None:
    """An export of instrument-computed stress and rate that names its cone (50 mm, 1°): the
    values are used as exported, but the torque behind each point is recovered from the
    stress, M = 2πR³τ/3 (small-angle cone-plate, Macosko, Rheology 1994, ch. 5), and points
    below [limits] torque_min are excluded; the same export without the geometry line gets
    only the note that the torque range was not checked."""
    from gammadot.pipeline import process_study

    from support import write_export

    radius = 0.025
    rate = np.geomspace(0.3, 1000.0, 8)
    stress = 0.05 * rate  # Newtonian 50 mPa·s: 0.015 Pa at the lowest rate → M = 0.49 µN·m
    torque = 2 * np.pi * radius**3 * stress / 3
    rows = [[g, t] for g, t in zip(rate, stress)]
    header = ["Shear rate [1/s]", "Shear stress [Pa]"]
    (tmp_path / "study.toml").write_text(
        '[geometries.cone50]\ntype = "cone_plate"\nradius = "25 mm"\ncone_angle = "1 deg"\n\n'
        '[limits]\ntorque_min = "1.6 uN*m"\n', encoding="utf-8")
    write_export(tmp_path / "named.csv", {"sample": "MW-CO-0412", "geometry": "cone50"}, header, rows)
    write_export(tmp_path / "unnamed.csv", {"sample": "MW-CO-0412"}, header, rows)
    runs = {r.run.source_file: r for r in process_study(tmp_path, registry).runs}
    named, unnamed = runs["named.csv"], runs["unnamed.csv"]
    assert named.correction in (None, "none")  # the instrument's values are kept as exported
    assert [bool(x) for x in named.excluded] == list(torque < 1.6e-6)
    assert 1 <= int(named.excluded.sum()) < len(rate)
    messages = [f.message for f in named.findings if f.check == "torque_range"]
    assert any("from the stress and the geometry" in m for m in messages)
    assert not unnamed.excluded.any()
    assert any("not checked" in f.message for f in unnamed.findings if f.check == "torque_range")

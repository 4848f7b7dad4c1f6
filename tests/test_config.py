"""study.toml validation: every error names the key and the problem."""

from __future__ import annotations

import math
from pathlib import Path

import pytest

from gammadot.config import StudyConfigError, load_study_config

VALID = '''
[study]
title = "Hand-cream base, release testing"

[geometries.bob14]
type = "concentric_cylinder"
inner_radius = "14.0 mm"
outer_radius = "15.2 mm"
immersed_length = "42 mm"

[geometries.cone50]
type = "cone_plate"
radius = "25 mm"
cone_angle = "1 deg"

[geometries.plate25]
type = "parallel_plate"
radius = "12.5 mm"
gap = "1.0 mm"

[fit]
models = ["power_law", "newtonian"]

[[spec]]
quantity = "viscosity"
shear_rate = "10 1/s"
min = "2.0 Pa*s"
max = "3.5 Pa*s"
'''


def _load(tmp_path: Path, text: str, registry):
    (tmp_path / "study.toml").write_text(text, encoding="utf-8")
    return load_study_config(tmp_path, registry)


def test_valid_study_toml_is_read_in_si(tmp_path: Path, registry) -> None:
    config = _load(tmp_path, VALID, registry)
    assert config.title == "Hand-cream base, release testing"
    bob = config.geometries["bob14"]
    assert bob.type == "concentric_cylinder"
    assert bob.values["inner_radius"] == pytest.approx(0.014)
    assert bob.values["rotating"] == "inner"          # documented default
    assert config.geometries["cone50"].values["cone_angle"] == pytest.approx(math.pi / 180)
    assert config.fit.models == ("power_law", "newtonian")
    assert config.specs[0].quantity == "viscosity" and config.specs[0].maximum == pytest.approx(3.5)
    assert 10.0 in config.fit.shear_rates  # the spec's rate is derived too


def test_no_study_toml_gives_defaults(tmp_path: Path, registry) -> None:
    config = load_study_config(tmp_path, registry)
    assert config.title == tmp_path.name and config.fit.models is None and not config.geometries


@pytest.mark.parametrize(("change", "message"), [
    (("inner_radius = \"14.0 mm\"", "inner_radiuss = \"14.0 mm\""),
     r"\[geometries.bob14\] unknown key 'inner_radiuss' \(did you mean 'inner_radius'\?\)"),
    (("radius = \"25 mm\"", "radius = \"25 Pa\""),
     r"\[geometries.cone50\] radius: unit 'Pa' is a stress unit, but a length unit is needed"),
    (("immersed_length = \"42 mm\"\n", ""),
     r"\[geometries.bob14\] is missing the required key 'immersed_length'"),
    (("type = \"cone_plate\"", "type = \"cone_and_bowl\""),
     r"\[geometries.cone50\] type 'cone_and_bowl' is not a known geometry"),
    (("[fit]", "[fitting]"), r"unknown key 'fitting' \(did you mean 'fit'\?\)"),
    (("models = [\"power_law\", \"newtonian\"]", "models = [\"power_lawn\"]"),
     r"\[fit\] models: unknown model 'power_lawn'"),
    (("title =", "titel ="), r"\[study\] unknown key 'titel'"),
    (("gap = \"1.0 mm\"", "gap = 1.0e-3"), None),  # a bare number is taken as SI: valid
    (("gap = \"1.0 mm\"", "gap = true"), r"\[geometries.plate25\] gap must be a quantity with a unit"),
])
def test_errors_name_the_key(tmp_path: Path, registry, change, message) -> None:
    text = VALID.replace(*change)
    assert text != VALID
    if message is None:
        _load(tmp_path, text, registry)
        return
    with pytest.raises(StudyConfigError, match=message):
        _load(tmp_path, text, registry)


def test_invalid_toml_names_the_file(tmp_path: Path, registry) -> None:
    with pytest.raises(StudyConfigError, match="study.toml: not valid TOML"):
        _load(tmp_path, "[study\ntitle = 1", registry)


@pytest.mark.parametrize(("limits", "message"), [
    ('torque_min = "0.3 N m"\ntorque_max = "0.2 N m"', r"\[limits\] torque_min \('0.3 N m'\) must be below torque_max"),
    ('stress_min = "2 kPa"\nstress_max = "500 Pa"', r"\[limits\] stress_min \('2 kPa'\) must be below stress_max"),
    ('stress_min = "-1 Pa"', r"\[limits\] stress_min must be positive"),
    ('torque_min = "0 N m"', r"\[limits\] torque_min must be positive"),
    ('stress_min = "50 mPa"\nstress_max = "0.5 kPa"', None),
])
def test_limits_are_positive_and_ordered(tmp_path: Path, registry, limits, message) -> None:
    """[limits]: an instrument range needs 0 < minimum < maximum (a reversed range would exclude
    every point); the error names the keys with the values as written."""
    text = f'[study]\ntitle = "limits"\n\n[limits]\n{limits}\n'
    if message is None:
        config = _load(tmp_path, text, registry)
        assert config.limits == pytest.approx({"stress_min": 0.05, "stress_max": 500.0})
        return
    with pytest.raises(StudyConfigError, match=message):
        _load(tmp_path, text, registry)

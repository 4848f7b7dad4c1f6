"""study.toml ``[fit]``: models, objective (space, weights, loss, loss_scale) and shear rates;
every wrong value stops with an error naming the key."""

from __future__ import annotations

from pathlib import Path

import pytest

from gammadot.config import StudyConfigError, load_study_config
from gammadot.processing import objective_of


def _load(tmp_path: Path, fit: str, registry):
    (tmp_path / "study.toml").write_text("[fit]\n" + fit, encoding="utf-8")
    return load_study_config(tmp_path, registry).fit


def test_defaults_are_log_space_least_squares_with_every_model(tmp_path: Path, registry) -> None:
    fit = _load(tmp_path, "", registry)
    assert fit.models is None and (fit.space, fit.weights, fit.loss) == ("log", "none", "linear")
    assert fit.shear_rates == () and fit.loss_scale is None and fit.intervals == "covariance"


def test_all_keys_are_read_in_si(tmp_path: Path, registry) -> None:
    fit = _load(tmp_path, 'models = ["carreau", "cross"]\nspace = "linear"\nweights = "relative"\n'
                          'loss = "soft_l1"\nloss_scale = 0.05\nshear_rates = ["10 1/s", "1 1/min", "100 s^-1"]\n',
                registry)
    assert fit.models == ("carreau", "cross")
    assert _load(tmp_path, 'intervals = "profile"\n', registry).intervals == "profile"
    assert fit.shear_rates == pytest.approx((10.0, 1 / 60, 100.0))  # 1/min → 1/s (unit conversion)
    objective = objective_of(fit)
    assert (objective.space, objective.weights, objective.loss, objective.loss_scale) == (
        "linear", "relative", "soft_l1", 0.05)


@pytest.mark.parametrize(("fit", "message"), [
    ('weights = "decade"', r"\[fit\] weights = 'decade' is not one of none, relative, per_decade"),
    ('loss = "cauchy"', r"\[fit\] loss = 'cauchy' is not one of linear, soft_l1, huber"),
    ('space = "semilog"', r"\[fit\] space = 'semilog' is not one of log, linear"),
    ('weights = "relative"', r"\[fit\] weights = 'relative' needs space = 'linear'"),
    ('intervals = "bootstrap"', r"\[fit\] intervals = 'bootstrap' is not one of covariance, profile"),
    ("loss_scale = -1", r"\[fit\] loss_scale must be a positive number"),
    ('shear_rates = ["10 Pa"]', r"\[fit\] shear_rates\[0\]: unit 'Pa' is a stress unit"),
    ('shear_rates = "10 1/s"', r"\[fit\] shear_rates must be a list"),
    ('shear_rates = ["0 1/s"]', r"\[fit\] shear_rates\[0\] must be positive"),
    ('model = ["carreau"]', r"\[fit\] unknown key 'model' \(did you mean 'models'\?\)"),
    ('models = ["carreau", "carreau_yasuda2"]', r"\[fit\] models: unknown model 'carreau_yasuda2'"),
])
def test_errors_name_the_key(tmp_path: Path, registry, fit, message) -> None:
    with pytest.raises(StudyConfigError, match=message):
        _load(tmp_path, fit + "\n", registry)

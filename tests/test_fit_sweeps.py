"""``[fit] sweeps``: which legs of an up-and-down run are fitted, and what the outputs say about it.

Oracles: power-law legs τ = Kγ̇ⁿ written out here (the least-squares fit of exact power-law data in
log space returns K and n exactly: ln τ = ln K + n ln γ̇ is a straight line), cone-plate torque
M = 2πR³τ/3 (small-angle cone-plate: Macosko, *Rheology* (1994) ch. 5), and a Moore-type
thixotropic structure model (Moore, Trans. Brit. Ceram. Soc. 58 (1959) 470, as reviewed by Barnes,
J. Non-Newtonian Fluid Mech. 70 (1997) 1 — both from memory) for a loop measured as torque and speed.
The invented sample is Merrowind Formulations' gel paint.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from gammadot.config import FitConfig, StudyConfig
from gammadot.datamodel import Run
from gammadot.sweeps import sweep_points
from gammadot.processing import fit_run, fitted_points, process_run, run_derived_results

from flow_curves import moore_loop

UP = np.geomspace(1.0, 100.0, 15)
K_UP, K_DOWN, N = 12.0, 8.0, 0.5  # Pa·sⁿ, Pa·sⁿ, 1


def _loop_run() -> Run:
    """Up 1→100 1/s on τ = 12γ̇^0.5, then down 100→1 1/s on τ = 8γ̇^0.5 (the top rate measured once on
    each leg, as a held step: its first sample ends the rising sweep, its last starts the falling one)."""
    rate = np.concatenate([UP, UP[::-1]])
    stress = np.concatenate([K_UP * UP**N, K_DOWN * UP[::-1] ** N])
    return Run(run_id="loop", source_file="loop.csv", source_sha256="0" * 64, first_line=1, metadata={},
               columns={"shear_rate": rate, "shear_stress": stress, "viscosity": stress / rate})


def _config(sweeps: str) -> StudyConfig:
    return StudyConfig(title="t", fit=FitConfig(models=("power_law",), sweeps=sweeps, shear_rates=(10.0,)))


def test_sweep_points_pick_the_legs_of_a_loop_and_keep_a_one_way_run_whole() -> None:
    rate = np.concatenate([UP, UP[::-1]])
    keep = np.ones(rate.size, dtype=bool)
    assert np.flatnonzero(sweep_points(rate, keep, "rising")).tolist() == list(range(15))
    assert np.flatnonzero(sweep_points(rate, keep, "falling")).tolist() == list(range(15, 30))
    assert sweep_points(rate, keep, "all").all()
    assert sweep_points(UP, np.ones(UP.size, dtype=bool), "falling").all()  # measured one way: fitted whole
    with pytest.raises(ValueError, match="rising"):
        sweep_points(rate, keep, "up")


@pytest.mark.parametrize(("sweeps", "k"), [("falling", K_DOWN), ("rising", K_UP)])
def test_one_leg_is_fitted_and_gives_that_legs_power_law(registry, sweeps: str, k: float) -> None:
    run = _loop_run()
    (fit,) = fit_run(run, np.zeros(30, dtype=bool), _config(sweeps), registry)
    assert fit.n_points == 15
    assert fit.value("K") == pytest.approx(k, rel=1e-6) and fit.value("n") == pytest.approx(N, rel=1e-6)
    # the same as a fit of that leg alone
    leg = slice(15, 30) if sweeps == "falling" else slice(0, 15)
    alone = Run(run_id="leg", source_file="leg.csv", source_sha256="0" * 64, first_line=1, metadata={},
                columns={key: values[leg] for key, values in run.columns.items()})
    (reference,) = fit_run(alone, np.zeros(15, dtype=bool), _config("all"), registry)
    assert fit.best_fit == pytest.approx(reference.best_fit, rel=1e-9)


def test_all_sweeps_fits_every_point_between_the_legs(registry) -> None:
    (fit,) = fit_run(_loop_run(), np.zeros(30, dtype=bool), _config("all"), registry)
    assert fit.n_points == 30
    # log-space least squares on both legs: ln K is the mean of ln 12 and ln 8 (same rates on both legs)
    assert fit.value("K") == pytest.approx(math.sqrt(K_UP * K_DOWN), rel=1e-6)


def test_excluded_points_stay_out_whatever_the_sweeps(registry) -> None:
    excluded = np.zeros(30, dtype=bool)
    excluded[[20, 21]] = True
    chosen = fitted_points(_loop_run(), excluded, _config("falling").fit)
    assert np.flatnonzero(chosen).tolist() == [15, 16, 17, 18, 19, 22, 23, 24, 25, 26, 27, 28, 29]


def test_interpolated_viscosity_uses_the_fitted_leg(registry) -> None:
    run = _loop_run()
    excluded = np.zeros(30, dtype=bool)
    fits = fit_run(run, excluded, _config("falling"), registry)
    results = run_derived_results(run, excluded, fits, _config("falling"), registry)
    interpolated = next(r for r in results if r.name == "viscosity" and "interpol" in r.method)
    # η = Kγ̇^(n−1) at 10 1/s on the falling leg: 8·10^−0.5 Pa·s (10 1/s is one of the measured rates)
    assert interpolated.value == pytest.approx(K_DOWN * 10.0 ** (N - 1), rel=1e-9)


def test_the_unfitted_leg_stays_in_the_run_flagged_not_excluded(registry) -> None:
    result = process_run(_loop_run(), _config("falling"), registry)
    assert not result.excluded.any()
    assert np.flatnonzero(~result.fitted).tolist() == list(range(15))
    assert all("fit.sweeps" in result.flags[i] for i in range(15))
    assert not any("fit.sweeps" in result.flags[i] for i in range(15, 30))
    (note,) = [f for f in result.findings if f.check == "fit.sweeps"]
    assert note.severity == "info" and "15 points of the rising-rate sweep" in note.message
    assert [f.n_points for f in result.fits] == [15]
    # the after-fit residual check looks only at the fitted leg: the exact falling power law has no structure
    assert not [f for f in result.findings if f.check == "fit_residuals"]


# -------------------------------------------------------------------- a whole study


RADIUS, CONE_ANGLE = 0.025, math.radians(1.0)  # m, rad: the study's 50 mm / 1° cone
STUDY = '''[study]
title = "Merrowind Formulations - gel paint loop"

[geometries.cone50]
type = "cone_plate"
radius = "25 mm"
cone_angle = "1 deg"

[fit]
models = ["power_law", "cross", "newtonian"]
sweeps = "{sweeps}"
'''


def _paint_loop(points: int = 13, seed: int = 0) -> tuple[np.ndarray, np.ndarray]:
    """Merrowind's (invented) gel paint taken up from 0.1 to 500 1/s from rest and back
    (:func:`flow_curves.moore_loop`, k = 0.003 1/s) as speed Ω (rad/s) and torque M (N·m) on the
    study's cone: γ̇ = Ω/α, M = 2πR³τ/3."""
    rate, stress = moore_loop(points, 0.003, seed)  # the stress carries the 1.5 % noise, as the torque would
    torque = 2 * math.pi * RADIUS**3 * stress / 3
    return rate * CONE_ANGLE, torque


def _paint_study(gammadot_study, sweeps: str):
    study = gammadot_study()
    study.config(STUDY.format(sweeps=sweeps))
    omega, torque = _paint_loop()
    study.add_export("PG-2612_up-down.csv", {"Speed [rad/s]": omega, "Torque [N·m]": torque},
                     metadata={"sample": "PG-2612", "geometry": "cone50"})
    return study.run()


def test_a_thixotropic_loop_from_torque_and_speed_fitted_whole(gammadot_study) -> None:
    out = _paint_study(gammadot_study, "all")
    checks = out.table("checks")
    # structure breakdown on the rising sweep is not a sample loss: no point is excluded
    assert not [c for c in checks if c["check"] == "sample_loss"]
    assert not any(p["excluded"] for p in out.table("points"))
    (falling,) = [c for c in checks if c["check"] == "non_monotonic"]
    assert "thixotropy" in falling["message"]
    warning = [c for c in checks if c["check"] == "hysteresis_loop" and c["severity"] == "warning"]
    assert len(warning) == 1 and 'sweeps = "falling"' in warning[0]["message"]
    assert {f["n_points"] for f in out.table("fits")} == {25}


def test_a_thixotropic_loop_fitted_on_its_falling_sweep(gammadot_study) -> None:
    out = _paint_study(gammadot_study, "falling")
    checks = out.table("checks")
    assert [c["severity"] for c in checks if c["check"] == "hysteresis_loop"] == ["info"]
    assert {f["n_points"] for f in out.table("fits")} == {13}  # the falling sweep, turning point included
    points = out.table("points")
    assert len(points) == 25 and not any(p["excluded"] for p in points)
    assert [i for i, p in enumerate(points) if "fit.sweeps" in p["flags"]] == list(range(12))
    page = out.run_page(out.table("runs")[0]["run_id"])
    assert all(f'id="point-{i}"' in page for i in range(25))  # every point is on the run page
    # the rising leg is drawn hollow as "not used in fits", not among the fitted points
    assert "Measured, not used in fits" in page and "not fitted" in page
    methods = (out.out_dir / "site" / "methods.html").read_text(encoding="utf-8")
    assert "only the points of its <strong>falling</strong>-rate sweeps are fitted" in methods
    assert "Measured, not used in fits" not in _paint_study(gammadot_study, "all").run_page(
        out.table("runs")[0]["run_id"])

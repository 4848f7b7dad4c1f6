"""Derived results of a run (results.parquet): viscosity at requested shear rates (model and
interpolation), zero-shear viscosity, yield stress, flow index — values, uncertainties and the
extrapolation mark.

Checks: analytic values of the generating model; for a power law, interpolation linear in
(ln γ̇, ln η) is exact (a straight line in log–log coordinates); the propagated standard error
against the spread of repeated noisy measurements (Monte Carlo: the definition of a standard
error, JCGM 101:2008 — the GUM supplement on Monte Carlo propagation).
"""

from __future__ import annotations

from dataclasses import replace
from pathlib import Path

import numpy as np
import pyarrow.parquet as pq
import pytest

from gammadot.derived_results import derived_results
from gammadot.fitting import fit_model
from gammadot.pipeline import process_study, write_outputs
from gammadot.plugins.plateau_models import CARREAU, CROSS
from gammadot.plugins.yield_stress_models import HERSCHEL_BULKLEY

from flow_curves import noisy
from support import write_export


def _results(tmp_path: Path, registry, rate, viscosity, fit_table: str):
    study = tmp_path / "study"
    write_export(study / "run.csv", {"sample": "R-1"}, ["Shear rate [1/s]", "Viscosity [Pa·s]"],
                 [[g, e] for g, e in zip(rate, viscosity)])
    (study / "study.toml").write_text("[fit]\n" + fit_table, encoding="utf-8")
    out = tmp_path / "out"
    write_outputs(process_study(study, registry, out_dir=out), out)
    return pq.read_table(out / "tables" / "results.parquet").to_pylist()


def test_power_law_results_through_the_pipeline(tmp_path: Path, registry) -> None:
    rate = np.geomspace(0.1, 1000.0, 12)
    viscosity = 2.0 * rate ** -0.5  # K = 2 Pa·s^n, n = 0.5, exact
    rows = _results(tmp_path, registry, rate, viscosity,
                    'models = ["newtonian", "power_law"]\nshear_rates = ["10 1/s", "3.3 1/s", "1e4 1/s"]\n')
    by_key = {(r["name"], r["at_shear_rate"], r["method"].split(" ")[0]): r for r in rows}
    model_10 = by_key[("viscosity", 10.0, "selected")]
    assert model_10["value"] == pytest.approx(2.0 * 10 ** -0.5, rel=1e-9) and not model_10["extrapolated"]
    assert "power_law" in model_10["method"] and model_10["unit"] == "Pa·s"
    # between two measured rates: log–log interpolation of a power law is exact
    interpolated = by_key[("viscosity", 3.3, "interpolation")]
    assert interpolated["value"] == pytest.approx(2.0 * 3.3 ** -0.5, rel=1e-9) and not interpolated["extrapolated"]
    beyond = by_key[("viscosity", 1e4, "selected")]
    assert beyond["extrapolated"] and beyond["value"] == pytest.approx(0.02, rel=1e-9)
    assert "outside the measured range" in beyond["note"]
    no_interpolation = by_key[("viscosity", 1e4, "interpolation")]
    assert no_interpolation["value"] is None and no_interpolation["extrapolated"]
    flow_index = next(r for r in rows if r["name"] == "flow_index")
    assert flow_index["value"] == pytest.approx(0.5, abs=1e-9) and flow_index["unit"] == "1"
    for name in ("zero_shear_viscosity", "yield_stress"):
        (row,) = [r for r in rows if r["name"] == name]
        assert row["value"] is None and "has no" in row["note"]


def test_propagated_standard_error_matches_the_spread_of_repeated_measurements() -> None:
    """One fit's delta-method standard error of η(10 1/s) against the standard deviation of
    η̂(10 1/s) over 150 independent noisy replicates of the same Carreau fluid (within 25 %:
    the sampling error of a standard deviation from 150 values is about 6 %)."""
    rate = np.geomspace(0.01, 1000.0, 30)
    truth = {"eta0": 10.0, "eta_inf": 0.01, "lam": 1.0, "n": 0.4}
    clean = CARREAU.function(rate, **truth)
    models = {"carreau": CARREAU}
    estimates, reported = [], []
    for seed in range(150):
        viscosity = noisy(clean, 0.015, seed)
        fit = fit_model(CARREAU, rate, viscosity)
        at_10 = derived_results(rate, viscosity, [replace(fit, selected=True)], models, [10.0])[0]
        estimates.append(at_10.value)
        reported.append(at_10.stderr)
    assert np.median(reported) == pytest.approx(np.std(estimates, ddof=1), rel=0.25)
    assert np.mean(estimates) == pytest.approx(float(CARREAU.function(np.array([10.0]), **truth)[0]), rel=0.005)


def test_interpolation_at_a_measured_rate_reports_the_point_scatter() -> None:
    rate = np.geomspace(0.1, 100.0, 10)
    viscosity = noisy(CARREAU.function(rate, eta0=10.0, eta_inf=0.01, lam=1.0, n=0.4), 0.015, seed=1)
    fit = fit_model(CARREAU, rate, viscosity)
    fit = replace(fit, selected=True)
    interpolated = derived_results(rate, viscosity, [fit], {"carreau": CARREAU}, [float(rate[4])])[1]
    assert interpolated.value == pytest.approx(viscosity[4], rel=1e-12)
    assert interpolated.stderr == pytest.approx(viscosity[4] * fit.rmse_log, rel=1e-12)


def test_yield_stress_zero_shear_viscosity_and_flow_index_from_the_selected_model() -> None:
    rate = np.geomspace(0.1, 1000.0, 30)
    stress = noisy(HERSCHEL_BULKLEY.function(rate, tau_y=32.0, K=8.5, n=0.44), 0.01, seed=2)
    fit = fit_model(HERSCHEL_BULKLEY, rate, stress)
    fit = replace(fit, selected=True)
    results = {r.name: r for r in derived_results(rate, stress / rate, [fit], {"herschel_bulkley": HERSCHEL_BULKLEY}, [])}
    tau_y = results["yield_stress"]
    assert tau_y.value == pytest.approx(32.0, rel=0.05) and tau_y.stderr == fit.estimate("tau_y").stderr
    assert tau_y.extrapolated and tau_y.at_shear_rate == 0.0 and "below the lowest measured rate" in tau_y.note
    assert results["flow_index"].value == pytest.approx(0.44, abs=0.03)
    assert results["zero_shear_viscosity"].value is None

    viscosity = noisy(CROSS.function(rate, eta0=9.5, eta_inf=0.06, lam=0.8, m=0.72), 0.01, seed=3)
    fit = fit_model(CROSS, rate, viscosity)
    fit = replace(fit, selected=True)
    results = {r.name: r for r in derived_results(rate, viscosity, [fit], {"cross": CROSS}, [])}
    m = fit.estimate("m")
    assert results["flow_index"].value == pytest.approx(1 - m.value) and results["flow_index"].stderr == m.stderr
    assert results["zero_shear_viscosity"].value == pytest.approx(9.5, rel=0.05)
    assert results["zero_shear_viscosity"].extrapolated and results["yield_stress"].value is None

"""Merrowind's own tests of its plugin, run through gammadot with the gammadot_study fixture."""

import numpy as np
import pytest

import merrowind_lab

RATE = np.geomspace(0.05, 500, 18)


def test_a_lims_record_is_read_fitted_and_checked(gammadot_study):
    study = gammadot_study(merrowind_lab)
    eta = merrowind_lab.structural(RATE, 12.0, 0.05, 1.5)  # Pa·s
    study.write("lt-2611.mwlims", merrowind_lab.flow_record("LT-2611", 25.0, RATE, eta * 1000))
    study.write("lt-2612.mwlims", merrowind_lab.flow_record("LT-2612", 27.0, RATE, eta * 1000))
    out = study.run()
    assert out.rejected == []
    runs = {r["run_id"]: r for r in out.table("runs")}
    assert runs["lt-2611-r1"]["sample"] == "LT-2611" and runs["lt-2611-r1"]["lims_id"] == "MW-000731"
    values = {p["name"]: p["value"] for p in out.table("parameters")
              if p["model"] == "merrowind_structural" and p["run_id"] == "lt-2611-r1"}
    assert values == pytest.approx({"eta0": 12.0, "eta_inf": 0.05, "rate_c": 1.5}, rel=1e-6)
    rule = [(c["run_id"], c["message"]) for c in out.table("checks") if c["check"] == "merrowind_temperature"]
    assert rule == [("lt-2612-r1", "measured at 27.0 °C; QC flow curves are measured at 25.0 ± 0.5 °C")]


def test_a_broken_record_names_its_line(gammadot_study):
    study = gammadot_study(merrowind_lab)
    text = merrowind_lab.flow_record("LT-2613", 25.0, RATE[:3], [900.0, 800.0, 700.0]).replace("2: ", "2: x")
    study.write("lt-2613.mwlims", text)
    out = study.run()
    assert len(out.rejected) == 1 and out.rejected[0].startswith("lt-2613.mwlims:11: ")

"""Specifications: rules with units in mixed spellings, verdicts pass / fail / n/a, and values
whose uncertainty reaches across a limit marked as such.

The straddle rule uses the expanded uncertainty U = k·u with k = 2 (JCGM 100:2008, GUM §6.2–6.3).
Power-law test data are exact (τ = Kγ̇ⁿ, so η(γ̇) = Kγ̇ⁿ⁻¹ is known analytically).
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pyarrow.parquet as pq
import pytest
from click.testing import CliRunner

from gammadot.cli import main
from gammadot.config import StudyConfigError, load_study_config
from gammadot.pipeline import process_study, write_outputs
from gammadot.specs import SpecRule, _verdict, _Value

from support import write_export

K, N = 20.0, 0.5  # η(10 1/s) = 20·10^-0.5 = 6.3246 Pa·s; η(1)/η(100) = 100^0.5 = 10


def _study(tmp_path: Path, specs: str, noise: float = 0.0) -> Path:
    study = tmp_path / "study"
    rate = np.geomspace(0.5, 500.0, 16)
    eta = K * rate ** (N - 1) * (1 + noise * np.random.default_rng(5).standard_normal(rate.size))
    write_export(study / "lot-a.csv", {"sample": "LT-2611"}, ["Shear rate [1/s]", "Viscosity [Pa·s]"],
                 [[g, e] for g, e in zip(rate, eta)])
    write_export(study / "other.csv", {"sample": "XY-1"}, ["Shear rate [1/s]", "Viscosity [Pa·s]"],
                 [[g, e] for g, e in zip(rate, eta)])
    (study / "study.toml").write_text('[fit]\nmodels = ["newtonian", "power_law"]\n' + specs, encoding="utf-8")
    return study


SPECS = '''
[[spec]]
name = "viscosity at 10/s"
quantity = "viscosity"
shear_rate = "10 s⁻¹"
min = "6000 mPa·s"
max = "6.5 Pa*s"

[[spec]]
quantity = "viscosity"
shear_rate = "600 1/s"
max = "1 P"

[[spec]]
quantity = "viscosity"
method = "interpolation"
shear_rate = "10 1/s"
max = "6000 cP"

[[spec]]
quantity = "viscosity_ratio"
shear_rate = "1 1/s"
shear_rate_2 = "100 1/s"
min = 9.5
max = 10.5

[[spec]]
quantity = "parameter"
model = "power_law"
parameter = "n"
min = 0.45
max = 0.55
sample = "LT-*"

[[spec]]
quantity = "yield_stress"
max = "5 Pa"
'''


def test_verdicts_from_exact_power_law(tmp_path: Path, registry) -> None:
    result = process_study(_study(tmp_path, SPECS), registry)
    lot = {v.rule: v for v in result.specs if v.run_id == "lot-a-r1"}
    assert lot["viscosity at 10/s"].verdict == "pass"
    assert lot["viscosity at 10/s"].value == pytest.approx(K * 10 ** (N - 1), rel=1e-6)
    # 600 1/s lies beyond the measured 500 1/s: a model value there is an extrapolation → n/a
    assert lot["viscosity at 600 1/s"].verdict == "n/a" and "extrapolated" in lot["viscosity at 600 1/s"].message
    # interpolation of the exact points: 6.3246 Pa·s > 6000 cP → fail
    assert lot["viscosity at 10 1/s"].verdict == "fail"
    assert lot["viscosity at 10 1/s"].value == pytest.approx(K * 10 ** (N - 1), rel=1e-6)
    assert lot["viscosity ratio 1 1/s / 100 1/s"].value == pytest.approx(10.0, rel=1e-6)
    assert lot["viscosity ratio 1 1/s / 100 1/s"].verdict == "pass"
    assert lot["power_law n"].verdict == "pass" and lot["power_law n"].value == pytest.approx(N, abs=1e-9)
    assert lot["yield stress"].verdict == "n/a"  # a power law has no yield stress
    other = {v.rule for v in result.specs if v.run_id == "other-r1"}
    assert "power_law n" not in other and "viscosity at 10/s" in other  # sample glob "LT-*"


def test_a_value_whose_uncertainty_reaches_across_a_limit_is_marked() -> None:
    rule = SpecRule("eta10", "viscosity", 2.0, 3.5, "Pa·s", shear_rate=10.0)
    inside_but_close = _verdict("r", rule, _Value(3.4, 0.1, "model"))       # 3.4 + 2·0.1 > 3.5
    assert inside_but_close.verdict == "pass" and inside_but_close.straddles_limit
    assert "3.5" in inside_but_close.message and "uncertain" in inside_but_close.message
    outside_but_close = _verdict("r", rule, _Value(3.6, 0.1, "model"))
    assert outside_but_close.verdict == "fail" and outside_but_close.straddles_limit
    clear = _verdict("r", rule, _Value(3.0, 0.1, "model"))
    assert clear.verdict == "pass" and not clear.straddles_limit
    no_error = _verdict("r", rule, _Value(3.0, None, "model"))
    assert no_error.verdict == "pass" and "no uncertainty" in no_error.message


def test_specs_table_and_cli_summary(tmp_path: Path) -> None:
    study = _study(tmp_path, SPECS)
    result = CliRunner().invoke(main, ["run", str(study), "--quiet"], env={"GAMMADOT_NO_ENTRY_POINTS": "1"})
    assert result.exit_code == 0, result.output
    lines = [line.strip() for line in result.output.splitlines()]
    assert any(line.startswith("LT-2611: FAIL (3 pass, 1 fail, 2 n/a") for line in lines), result.output
    assert any(line.startswith("XY-1: FAIL") for line in lines)
    table = pq.read_table(study / "_gammadot" / "tables" / "specs.parquet")
    assert set(table.column("verdict").to_pylist()) == {"pass", "fail", "n/a"}
    assert {"run_id", "rule", "value", "min", "max", "verdict", "stderr", "straddles_limit"} <= set(table.column_names)


@pytest.mark.parametrize(("spec", "message"), [
    ('quantity = "viscosity"\nshear_rate = "10 1/s"\nmax = "3 Pa"', "unit 'Pa' is a stress unit, but a viscosity"),
    ('quantity = "viscosity"\nmax = "3 Pa*s"', "needs 'shear_rate'"),
    ('quantity = "viscosty"\nmax = 1', "quantity = 'viscosty' is not one of"),
    ('quantity = "viscosity"\nshear_rate = "10 1/s"', "needs 'min', 'max' or both"),
    ('quantity = "parameter"\nmodel = "power_law"\nparameter = "k"\nmax = 1', "parameter = 'k' is not a parameter"),
    ('quantity = "viscosity"\nshear_rate = "10 1/s"\nmaximum = "3 Pa*s"', "unknown key 'maximum' (did you mean 'max'?)"),
    ('quantity = "yield_stress"\nmin = "5 Pa"\nmax = "2 Pa"', "min is larger than max"),
])
def test_bad_spec_names_entry_and_key(tmp_path: Path, registry, spec: str, message: str) -> None:
    (tmp_path / "study.toml").write_text(f"[[spec]]\n{spec}\n", encoding="utf-8")
    with pytest.raises(StudyConfigError, match="#1") as info:
        load_study_config(tmp_path, registry)
    assert message in str(info.value)


def test_sample_summary_word_marks_uncertain_values() -> None:
    from types import SimpleNamespace

    from gammadot.cli import sample_verdicts, sample_word
    from gammadot.specs import SpecVerdict

    def verdict(run_id: str, word: str, near: bool) -> SpecVerdict:
        return SpecVerdict(run_id, "r", 1.0, 0.1, "1", 0.0, 2.0, word, near, "model", "")

    runs = [SimpleNamespace(run=SimpleNamespace(run_id=i, sample=s)) for i, s in (("a", "S1"), ("b", "S2"))]
    result = SimpleNamespace(runs=runs, specs=[verdict("a", "pass", True), verdict("b", "pass", False)])
    summary = sample_verdicts(result)
    assert summary["S1"] == {"pass": 1, "fail": 0, "n/a": 0, "uncertain": 1}
    assert sample_word(summary["S1"]) == "UNCERTAIN" and sample_word(summary["S2"]) == "PASS"
    assert sample_word({"pass": 3, "fail": 1, "n/a": 1, "uncertain": 1}) == "FAIL"
    assert sample_word({"pass": 3, "fail": 0, "n/a": 1, "uncertain": 1}) == "INCOMPLETE"


# --------------------------------------------------------------------------- temperature condition
#
# A rule with a temperature judges only runs whose recorded temperature lies within its tolerance
# (README "Specifications"; viscosity specifications are stated at a temperature: common practice).
# Temperature scales: t/°C = T/K − 273.15 (SI Brochure, 9th ed., 2019, the definition of the
# Celsius temperature) and t/°F = 1.8·t/°C + 32 (the Fahrenheit scale; NIST SP 811, from memory),
# so 298.15 K = 77 °F = 25 °C, and a difference of 1 K = 1.8 °F.

TEMPERATURE_RUNS = {"t20": "20 °C", "t25": "25 °C", "t25-8": "25.8 °C", "t40": "40 °C", "no-temperature": None}


def _temperature_study(tmp_path: Path, specs: str) -> Path:
    study = tmp_path / "study"
    rate = np.geomspace(0.5, 500.0, 16)
    eta = K * rate ** (N - 1)  # the same exact power law at every temperature: only the condition differs
    for name, temperature in TEMPERATURE_RUNS.items():
        metadata = {"sample": "LT-2611"} | ({"temperature": temperature} if temperature else {})
        write_export(study / f"{name}.csv", metadata, ["Shear rate [1/s]", "Viscosity [Pa·s]"],
                     [[g, e] for g, e in zip(rate, eta)])
    # one run whose temperature is a column (24.9 to 25.1 °C, mean 25 °C) and no metadata line
    write_export(study / "t25-column.csv", {"sample": "LT-2611"},
                 ["Shear rate [1/s]", "Viscosity [Pa·s]", "Temperature [°C]"],
                 [[g, e, t] for g, e, t in zip(rate, eta, np.linspace(24.9, 25.1, rate.size))])
    (study / "study.toml").write_text('[fit]\nmodels = ["power_law"]\n' + specs, encoding="utf-8")
    return study


def _rule(temperature: str, tolerance: str | None = None, name: str = "eta10") -> str:
    extra = f'temperature_tolerance = "{tolerance}"\n' if tolerance else ""
    return (f'[[spec]]\nname = "{name}"\nquantity = "viscosity"\nshear_rate = "10 1/s"\nmin = "6 Pa*s"\n'
            f'max = "7 Pa*s"\ntemperature = "{temperature}"\n{extra}')


def _rows(result, rule: str = "eta10") -> dict[str, object]:
    return {v.run_id.removesuffix("-r1"): v for v in result.specs if v.rule == rule}


def test_a_rule_at_25_degC_judges_only_the_runs_measured_at_25_degC(tmp_path: Path, registry) -> None:
    plain = '[[spec]]\nname = "any temperature"\nquantity = "viscosity"\nshear_rate = "10 1/s"\nmin = "6 Pa*s"\n'
    result = process_study(_temperature_study(tmp_path, _rule("25 degC") + plain), registry)
    rows = _rows(result)
    # 25 °C ± 1 K (the default tolerance): the 25 °C and 25.8 °C runs and the column with mean 25 °C;
    # not the runs at 20 and 40 °C; the run without a temperature: n/a with the reason
    assert set(rows) == {"t25", "t25-8", "t25-column", "no-temperature"}
    for run in ("t25", "t25-8", "t25-column"):
        assert rows[run].verdict == "pass"  # η(10 1/s) = 20·10^-0.5 = 6.32 Pa·s
        assert rows[run].value == pytest.approx(K * 10 ** (N - 1), rel=1e-6)
        assert "rule at 25 °C ± 1 K" in rows[run].message
    assert "run at 25.8 °C" in rows["t25-8"].message
    unknown = rows["no-temperature"]
    assert unknown.verdict == "n/a" and unknown.value is None
    assert "temperature is unknown" in unknown.message and "could not be applied" in unknown.message
    # a rule without a temperature still judges every run of the sample, as before
    assert set(_rows(result, "any temperature")) == {*TEMPERATURE_RUNS, "t25-column"}


@pytest.mark.parametrize(("temperature", "tolerance", "judged"), [
    ("77 degF", None, {"t25", "t25-8", "t25-column"}),      # 77 °F = 25 °C
    ("298.15 K", None, {"t25", "t25-8", "t25-column"}),     # 298.15 K = 25 °C
    ("25 °C", "0.5 K", {"t25", "t25-column"}),               # 25.8 °C is 0.8 K away
    ("25 °C", "0.9 degF", {"t25", "t25-column"}),            # 0.9 °F = 0.5 K
    ("25 °C", "1.8 degF", {"t25", "t25-8", "t25-column"}),  # 1.8 °F = 1 K
    ("293.15 K", "2 K", {"t20"}),                            # 20 °C
    ("104 °F", None, {"t40"}),                               # (104 − 32)/1.8 = 40 °C
])
def test_temperature_spellings_and_tolerances(tmp_path: Path, registry, temperature: str, tolerance: str | None,
                                              judged: set[str]) -> None:
    result = process_study(_temperature_study(tmp_path, _rule(temperature, tolerance)), registry)
    rows = _rows(result)
    assert set(rows) == judged | {"no-temperature"}
    assert all(rows[run].verdict == "pass" for run in judged)
    assert rows["no-temperature"].verdict == "n/a"


def test_default_rule_name_table_and_summary_state_the_temperature(tmp_path: Path) -> None:
    specs = ('[[spec]]\nquantity = "viscosity"\nshear_rate = "10 1/s"\nmin = "6 Pa*s"\ntemperature = "77 degF"\n'
             'temperature_tolerance = "0.5 K"\n')
    study = _temperature_study(tmp_path, specs)
    result = CliRunner().invoke(main, ["run", str(study), "--quiet"], env={"GAMMADOT_NO_ENTRY_POINTS": "1"})
    assert result.exit_code == 0, result.output
    table = pq.read_table(study / "_gammadot" / "tables" / "specs.parquet").to_pylist()
    assert {row["rule"] for row in table} == {"viscosity at 10 1/s at 25 °C ± 0.5 K"}
    assert sorted(row["run_id"] for row in table) == ["no-temperature-r1", "t25-column-r1", "t25-r1"]
    # one n/a (the run without a temperature), two passes; the summary names the condition
    line = next(line.strip() for line in result.output.splitlines() if line.strip().startswith("LT-2611:"))
    assert line.startswith("LT-2611: INCOMPLETE (2 pass, 0 fail, 1 n/a")
    assert "1 n/a because the run temperature is unknown" in line, line
    assert "temperature-bound rules: viscosity at 10 1/s at 25 °C ± 0.5 K" in line, line


@pytest.mark.parametrize(("keys", "message"), [
    ('temperature = "hot"', "[[spec]] #1 temperature: 'hot' is not a number with a unit"),
    ('temperature = "5 Pa"', "[[spec]] #1 temperature: unit 'Pa' is a stress unit, but a temperature unit"),
    ("temperature = 25", "[[spec]] #1 temperature: '25' has no unit"),
    ('temperature = "-300 degC"', "[[spec]] #1 temperature: '-300 degC' is below absolute zero"),
    ('temperature = "25 degC"\ntemperature_tolerance = "-0.5 K"',
     "[[spec]] #1 temperature_tolerance must be a positive temperature difference"),
    ('temperature = "25 degC"\ntemperature_tolerance = "1 Pa*s"',
     "[[spec]] #1 temperature_tolerance: unit 'Pa*s' is a viscosity unit"),
    ('temperature_tolerance = "1 K"', "[[spec]] #1 temperature_tolerance needs 'temperature'"),
    ('temprature = "25 degC"', "unknown key 'temprature' (did you mean 'temperature'?)"),
])
def test_bad_temperature_condition_names_the_spec_and_the_key(tmp_path: Path, registry, keys: str,
                                                              message: str) -> None:
    (tmp_path / "study.toml").write_text(
        f'[[spec]]\nquantity = "viscosity"\nshear_rate = "10 1/s"\nmax = "3 Pa*s"\n{keys}\n', encoding="utf-8")
    with pytest.raises(StudyConfigError) as info:
        load_study_config(tmp_path, registry)
    assert str(info.value).startswith("study.toml: ") and message in str(info.value), str(info.value)


def test_site_shows_the_temperature_condition(tmp_path: Path) -> None:
    specs = _rule("25 degC", "0.5 K")
    study = _temperature_study(tmp_path, specs)
    result = CliRunner().invoke(main, ["run", str(study), "--quiet"], env={"GAMMADOT_NO_ENTRY_POINTS": "1"})
    assert result.exit_code == 0, result.output
    site = study / "_gammadot" / "site"
    methods = (site / "methods.html").read_text(encoding="utf-8")
    assert "<th scope=\"col\">Temperature</th>" in methods and "<td>25 °C ± 0.5 K</td>" in methods
    run_pages = {p.name: p.read_text(encoding="utf-8") for p in (site / "runs").glob("*.html")}
    page = next(text for name, text in run_pages.items() if name.startswith("t25-r1"))
    assert "≥ 6 and ≤ 7 Pa·s at 25 °C ± 0.5 K" in page

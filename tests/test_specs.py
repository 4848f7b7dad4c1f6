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

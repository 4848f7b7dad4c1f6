"""Tests of the demo study writer, :mod:`gammadot.demo`.

The demo data are invented, but the physics that turns a model into torque and speed is
checked against values from outside the project (the check values of the shared reference
sheet, each with its source named beside the test). File-level checks read the written
bytes with a small parser of their own, so they do not depend on gammadot's importer. One
end-to-end test runs the written study through the pipeline and checks that every built-in
check and analysis finds what the generator put there.
"""

from __future__ import annotations

import fnmatch
import hashlib
import json
import math
import tomllib
from pathlib import Path

import numpy as np
import pyarrow.parquet as pq
import pytest
from scipy.integrate import solve_ivp

from gammadot import demo
from gammadot.config import parse_study_config
from gammadot.pipeline import process_study, write_outputs

ENCODINGS = {"utf-16-bom": "utf-16", "utf-8-sig": "utf-8-sig", "utf-8": "utf-8", "cp1252": "cp1252"}
LENGTH_UNITS = {"mm": 1e-3, "um": 1e-6, "m": 1.0, "deg": math.pi / 180.0, "uN*m": 1e-6, "mN*m": 1e-3,
                "kg/m^3": 1.0}
SETTLING_FRACTION_1_PERCENT = 0.53683  # t/t_ν at which start-up wall stress is within 1 % (REFERENCE.md §4.3)


@pytest.fixture(scope="module")
def study(tmp_path_factory: pytest.TempPathFactory) -> Path:
    return demo.write_demo_study(tmp_path_factory.mktemp("demo") / "study")


@pytest.fixture(scope="module")
def truth() -> dict:
    return demo.demo_truth()


def _hashes(folder: Path) -> dict[str, str]:
    return {p.relative_to(folder).as_posix(): hashlib.sha256(p.read_bytes()).hexdigest()
            for p in sorted(folder.rglob("*")) if p.is_file()}


def _text(study: Path, relative: str, entry: dict) -> str:
    return (study / relative).read_bytes().decode(ENCODINGS[entry["encoding"]])


def _runs(text: str, delimiter: str) -> list[tuple[dict[str, str], list[str], list[list[str]]]]:
    """(metadata, header cells, data rows) per run: blank lines separate runs, a table line has
    at least three cells, a metadata line is ``key<sep>value``."""
    runs = []
    for block in text.replace("\r\n", "\n").split("\n\n"):
        lines = [ln for ln in block.split("\n") if ln.strip()]
        table = [i for i, ln in enumerate(lines) if len(ln.split(delimiter)) >= 3]
        meta = {}
        for ln in lines[: table[0]]:
            key, value = ln.split(next(s for s in ":;=" if s in ln), 1)
            meta[key.strip().lower()] = value.strip()
        rows = [ln.split(delimiter) for ln in lines[table[0] + 1:]]
        runs.append((meta, lines[table[0]].split(delimiter), rows))
    return runs


def _numbers(rows: list[list[str]], column: int, decimal: str) -> np.ndarray:
    return np.array([float(r[column].replace(decimal, ".")) for r in rows])


def _quantity(text: str) -> float:
    value, unit = text.split()
    return float(value) * LENGTH_UNITS[unit]


COLUMN_UNITS = {"µN·m": 1e-6, "mN·m": 1e-3, "rpm": 2.0 * math.pi / 60.0, "1/min": 2.0 * math.pi / 60.0,
                "rad/s": 1.0, "s": 1.0, "1/s": 1.0, "Pa": 1.0, "Pa·s": 1.0, "°C": 1.0}


def _column(header: list[str], rows: list[list[str]], name: str, decimal: str) -> np.ndarray:
    """The SI values of the column whose header starts with ``name`` (unit read from the header)."""
    index = next(i for i, cell in enumerate(header) if cell.split(" [")[0].split(" (")[0] == name)
    unit = header[index].rstrip("])").split("[" if "[" in header[index] else "(")[-1]
    return _numbers(rows, index, decimal) * COLUMN_UNITS[unit]


def _designed(truth: dict, artefact: str) -> list[tuple[str, dict]]:
    """(export path, run truth) of every usable run made to show ``artefact``."""
    return [(p, r) for p, e in truth.items() if not e["rejected"] for r in e["runs"] if artefact in r["artefacts"]]


def _table(study: Path, truth: dict, relative: str, run: dict) -> tuple[dict, list[str], list[list[str]]]:
    entry = truth[relative]
    return _runs(_text(study, relative, entry), entry["delimiter"])[run["index"]]


def _config(study: Path) -> dict:
    return tomllib.loads((study / "study.toml").read_text("utf-8"))


# ----------------------------------------------------------------- files and scenario


def test_two_writes_are_byte_identical(tmp_path: Path) -> None:
    first = _hashes(demo.write_demo_study(tmp_path / "a"))
    second = _hashes(demo.write_demo_study(tmp_path / "b"))
    assert first == second
    assert len(first) == len(demo.demo_truth()) + 2  # exports + study.toml + README.txt


def test_rewriting_keeps_foreign_files(tmp_path: Path) -> None:
    target = tmp_path / "study"
    (target / "exports").mkdir(parents=True)
    (target / "exports" / "my-own-notes.txt").write_text("keep me")
    demo.write_demo_study(target)
    before = _hashes(target)
    assert demo.write_demo_study(target) == target
    assert _hashes(target) == before
    assert (target / "exports" / "my-own-notes.txt").read_text() == "keep me"


def test_run_count_in_files_matches_truth(study: Path, truth: dict) -> None:
    for relative, entry in truth.items():
        runs = _runs(_text(study, relative, entry), entry["delimiter"])
        assert len(runs) == len(entry["runs"]), relative
        assert [m["sample"] for m, _, _ in runs] == [r["sample"] for r in entry["runs"]]
        if not entry["rejected"]:
            assert [len(rows) for _, _, rows in runs] == [r["n_points"] for r in entry["runs"]]
    every = [r for e in truth.values() for r in e["runs"]]
    assert 20 <= len(every) <= 26


def test_scenario_covers_the_brief(truth: dict) -> None:
    runs = [r for e in truth.values() if not e["rejected"] for r in e["runs"]]
    assert len({r["sample"] for r in runs}) >= 4
    assert {20.0, 40.0} <= {r["temperature"] for r in runs}
    assert {"carreau", "cross", "herschel_bulkley", "bingham", "newtonian"} <= {r["model"] for r in runs}
    raw = {r["geometry_type"] for r in runs if r["export"] == "raw"}
    assert raw == {"cone_plate", "parallel_plate", "concentric_cylinder", "direct_indicating"}
    slipping = [r for r in runs if r["slip_per_stress"] > 0]  # one sample at two gaps, one gap from the file
    assert len({r["sample"] for r in slipping}) == 1 and len({r["gap"] for r in slipping}) == 2
    assert any(r["gap_in_file"] for r in slipping) and all(r["geometry_type"] == "parallel_plate" for r in slipping)
    assert any(r["export"] == "computed" for r in runs)
    assert {e["encoding"] for e in truth.values()} >= {"utf-8", "utf-8-sig", "cp1252", "utf-16-bom"}
    assert {e["delimiter"] for e in truth.values()} == {",", ";", "\t"}
    assert {e["decimal"] for e in truth.values()} == {".", ","}
    assert {e["metadata_separator"] for e in truth.values()} == {":", ";", "="}
    assert max(len(e["runs"]) for e in truth.values()) >= 2
    assert len({Path(p).parent for p in truth}) >= 3


def test_every_designed_artefact_is_present_once_or_more(truth: dict) -> None:
    """Each artefact the checks should find is in the scenario; the outlier only once."""
    counts = {name: len(_designed(truth, name)) for name in
              ("outlier", "wall_slip", "taylor_vortices", "short_steps", "low_torque", "rest_reading",
               "sample_loss", "thixotropy", "under_filled")}
    assert all(n >= 1 for n in counts.values()), counts
    assert counts["outlier"] == 1
    thin = [r for _, r in _designed(truth, "taylor_vortices") + _designed(truth, "short_steps")]
    assert all(r["model"] == "newtonian" and 1e-3 <= r["params"]["eta"] <= 5e-3 for r in thin)
    assert all(r["geometry_type"] == "concentric_cylinder" for r in thin)
    assert all(r["geometry_type"] == "cone_plate" for _, r in _designed(truth, "sample_loss"))
    loop = [r for _, r in _designed(truth, "thixotropy")]
    assert all(r["up_and_down"] for r in loop)
    assert all(r["filled_fraction"] < 0.9 for _, r in _designed(truth, "under_filled"))


def test_study_toml_defines_the_raw_geometries(study: Path, truth: dict) -> None:
    config = tomllib.loads((study / "study.toml").read_text("utf-8"))
    assert config["study"]["title"] and config["study"]["description"]
    assert "models" not in config["fit"]  # every installed model is fitted
    assert config["fit"]["shear_rates"] == ["1 1/s", "10 1/s", "100 1/s"]
    assert _quantity(config["study"]["density"]) == pytest.approx(demo.DENSITY)
    for entry in truth.values():
        for run in entry["runs"]:
            if run["export"] == "raw":
                assert config["geometries"][run["geometry"]]["type"] == run["geometry_type"]
    cylinder = next(g for g in config["geometries"].values() if g["type"] == "concentric_cylinder")
    delta = _quantity(cylinder["outer_radius"]) / _quantity(cylinder["inner_radius"])
    assert 1.085 <= delta <= 1.2 and cylinder["rotating"] == "inner"
    assert "fictitious" in (study / "README.txt").read_text("utf-8").lower()


def test_cp1252_file_is_not_utf8(study: Path, truth: dict) -> None:
    relative = next(p for p, e in truth.items() if e["encoding"] == "cp1252")
    data = (study / relative).read_bytes()
    with pytest.raises(UnicodeDecodeError):
        data.decode("utf-8")
    text = data.decode("cp1252")
    assert "µN·m" in text and "°C" in text and "\r\n" in text


def test_utf16_file_starts_with_bom(study: Path, truth: dict) -> None:
    relative = next(p for p, e in truth.items() if e["encoding"] == "utf-16-bom")
    data = (study / relative).read_bytes()
    assert data[:2] == b"\xff\xfe"
    assert "\t" in data.decode("utf-16")


def test_utf8_bom_file(study: Path, truth: dict) -> None:
    relative = next(p for p, e in truth.items() if e["encoding"] == "utf-8-sig")
    assert (study / relative).read_bytes()[:3] == b"\xef\xbb\xbf"


def test_exactly_one_broken_file(study: Path, truth: dict) -> None:
    broken = [p for p, e in truth.items() if e["rejected"]]
    assert len(broken) == 1 and "BROKEN" in broken[0]
    data = (study / broken[0]).read_bytes()
    assert b"#ERR" in data and not data.endswith(b"\n")
    for relative, entry in truth.items():
        if not entry["rejected"]:
            assert b"#ERR" not in (study / relative).read_bytes()


def test_exactly_one_clear_outlier(study: Path, truth: dict) -> None:
    marked = [(p, r) for p, e in truth.items() for r in e["runs"] if r["outlier_index"] is not None]
    assert len(marked) == 1
    relative, run = marked[0]
    entry = truth[relative]
    _, header, rows = _runs(_text(study, relative, entry), entry["delimiter"])[run["index"]]
    rate = _numbers(rows, header.index("Shear rate [1/s]"), entry["decimal"])
    stress = _numbers(rows, header.index("Shear stress [Pa]"), entry["decimal"])
    model = demo.FlowModel(run["model"], run["params"])
    deviation = stress / model.stress(rate) - 1.0
    assert deviation[run["outlier_index"]] > 0.3
    assert np.max(np.abs(np.delete(deviation, run["outlier_index"]))) < 0.08


def test_check_oil_reaches_the_torque_floor(study: Path, truth: dict) -> None:
    """The lowest torques of the check oil are a few resolution steps only (noisy points)."""
    relative = next(p for p, e in truth.items() if e["runs"][0]["model"] == "newtonian")
    entry = truth[relative]
    config = tomllib.loads((study / "study.toml").read_text("utf-8"))
    radius = _quantity(config["geometries"][entry["runs"][0]["geometry"]]["radius"])
    _, header, rows = _runs(_text(study, relative, entry), entry["delimiter"])[-1]
    rate = _numbers(rows, header.index("Shear rate (s⁻¹)"), entry["decimal"])
    viscosity = _numbers(rows, header.index("Viscosity (cP)"), entry["decimal"]) * 1e-3
    torque = viscosity * rate * 2.0 * math.pi * radius**3 / 3.0
    assert torque.min() < 10 * demo.TORQUE_FLOOR and torque.min() > 0


# ------------------------------------------------------------------ physics oracles


def test_raw_cone_plate_run_reproduces_the_model(study: Path, truth: dict) -> None:
    """Small-angle cone-plate: γ̇ = Ω/α, τ = 3M/(2πR³).

    Source: shared REFERENCE.md §3 (Macosko, Rheology: Principles, Measurements and
    Applications, VCH 1994, ch. 5). The truncated tip (50 µm) changes the torque by < 4e-4.
    """
    relative = next(p for p, e in truth.items()
                    if e["runs"][0]["export"] == "raw" and e["runs"][0]["geometry_type"] == "cone_plate")
    entry = truth[relative]
    config = tomllib.loads((study / "study.toml").read_text("utf-8"))
    run = entry["runs"][0]
    geometry = config["geometries"][run["geometry"]]
    radius, alpha = _quantity(geometry["radius"]), _quantity(geometry["cone_angle"])
    meta, header, rows = _runs(_text(study, relative, entry), entry["delimiter"])[0]
    assert meta["geometry"] == run["geometry"]
    omega = _numbers(rows, header.index("Speed [rpm]"), entry["decimal"]) * 2.0 * math.pi / 60.0
    torque = _numbers(rows, header.index("Torque [µN·m]"), entry["decimal"]) * 1e-6
    stress, rate = 3.0 * torque / (2.0 * math.pi * radius**3), omega / alpha
    residual = stress / demo.FlowModel(run["model"], run["params"]).stress(rate) - 1.0
    assert np.max(np.abs(residual)) < 5 * run["relative_noise"]
    assert abs(np.mean(residual)) < 2 * run["relative_noise"] / math.sqrt(len(residual))
    assert 0.4 * run["relative_noise"] < np.std(residual) < 2.0 * run["relative_noise"]


CYLINDER_ISO = demo.ConcentricCylinder(12.5e-3, 12.5e-3 * 1.0847, 37.5e-3)


def test_couette_newtonian_margules() -> None:
    """Margules: T = 4πμLΩRi²Ro²/(Ro² − Ri²); Ri = 12.5 mm, δ = 1.0847, L = 37.5 mm,
    μ = 1 Pa·s, Ω = 10 rad/s → T = 4.906292785e-3 N·m.

    Source: shared REFERENCE.md §1.2 (Bird, Stewart & Lightfoot, Transport Phenomena 2nd ed.,
    §3.6, tangential annular flow).
    """
    torque = demo.couette_torque(demo.FlowModel("newtonian", {"eta": 1.0}), 10.0, CYLINDER_ISO)
    assert torque == pytest.approx(4.906292785e-3, rel=1e-9)


@pytest.mark.parametrize("delta, omega", [(1.0847, 1.7351694329), (1.5, 5.0154320988), (3.0, 6.1728395062)])
def test_couette_power_law(delta: float, omega: float) -> None:
    """Power law in the annulus: γ̇_i = 2Ω/(n(1 − s^{2/n})); K = 2 Pa·sⁿ, n = 0.5, τ_i = 10 Pa.

    Source: shared REFERENCE.md §1.5 (check values computed there by quadrature).
    """
    model = demo.FlowModel("power_law", {"K": 2.0, "n": 0.5})
    assert demo.couette_speed(model, 10.0, delta) == pytest.approx(omega, rel=1e-9)
    assert demo.couette_inner_stress(model, omega, delta) == pytest.approx(10.0, rel=1e-9)


@pytest.mark.parametrize("tau_i, omega", [(5.5, 0.1172455049), (5.8, 0.2894998720),
                                          (7.0, 1.1874445174), (20.0, 10.9423047915)])
def test_couette_bingham_reiner_riwlin(tau_i: float, omega: float) -> None:
    """Bingham fluid with a partly sheared gap: τ_y = 5 Pa, μ_p = 0.1 Pa·s, δ = 1.0847.

    Source: shared REFERENCE.md §1.7 (Reiner & Riwlin, Kolloid-Z. 43, 1 (1927); the
    reference values are marked as checked by numerical integration there).
    """
    model = demo.FlowModel("bingham", {"tau_y": 5.0, "eta_p": 0.1})
    assert demo.couette_speed(model, tau_i, 1.0847) == pytest.approx(omega, rel=1e-9)


def test_couette_carreau_inversion_oracle() -> None:
    """Carreau η0 = 10 Pa·s, λ = 1 s, n = 0.4 in the ISO-like cylinder: τ_i = 20 Pa gives
    Ω = 0.3902784003 rad/s and T = 7.363107782e-4 N·m.

    Source: shared REFERENCE.md §1.6 inversion-oracle table.
    """
    model = demo.FlowModel("carreau", {"eta0": 10.0, "eta_inf": 0.0, "lam": 1.0, "n": 0.4})
    assert demo.couette_speed(model, 20.0, 1.0847) == pytest.approx(0.3902784003, rel=1e-8)
    torque = demo.couette_torque(model, 0.3902784003, CYLINDER_ISO)
    assert torque == pytest.approx(7.363107782e-4, rel=1e-8)


def test_parallel_plate_torques() -> None:
    """Newtonian T = πμΩR⁴/(2h); power law T = 2πK(Ω/h)ⁿR^{n+3}/(n+3); Carreau by quadrature.

    Source: shared REFERENCE.md §2 check values (R = 25 mm).
    """
    radius, gap = 25e-3, 1e-3
    newtonian = demo.FlowModel("newtonian", {"eta": 1.0})
    assert demo.parallel_plate_torque(newtonian, 1.0, radius, gap) == pytest.approx(6.135923152e-4, rel=1e-9)
    power = demo.FlowModel("power_law", {"K": 2.0, "n": 0.5})
    assert demo.parallel_plate_torque(power, 1.0, radius, gap) == pytest.approx(2.80499344e-4, rel=1e-8)
    carreau = demo.FlowModel("carreau", {"eta0": 10.0, "eta_inf": 0.0, "lam": 1.0, "n": 0.4})
    omega = 10.0 * gap / radius  # rim shear rate 10 1/s
    assert demo.parallel_plate_torque(carreau, omega, radius, gap) == pytest.approx(7.20353636e-4, rel=1e-8)


def test_cone_truncation_error() -> None:
    """A truncated cone loses −(1/4)(R_t/R)³ of the Newtonian torque (−3.1e-5 at R_t/R = 0.05).

    Source: shared REFERENCE.md §3, truncation.
    """
    model, radius, alpha = demo.FlowModel("newtonian", {"eta": 1.0}), 25e-3, math.radians(1.0)
    full = demo.cone_plate_torque(model, 1.0, radius, alpha)
    assert full == pytest.approx(2.0 * math.pi * radius**3 / (3.0 * alpha), rel=1e-12)
    cut = demo.cone_plate_torque(model, 1.0, radius, alpha, truncation_gap=0.05 * radius * alpha)
    assert cut / full - 1.0 == pytest.approx(-0.25 * 0.05**3, rel=1e-6)


MODEL_TABLE = {  # η(γ̇) in Pa·s at γ̇ = 0.01, 0.1, 1, 10, 100, 1000 1/s
    ("carreau", (("eta0", 10), ("eta_inf", 0), ("lam", 1), ("n", 0.4))):
        (9.9997, 9.9701935, 8.122524, 2.5043994, 0.63093842, 0.15848927),
    ("cross", (("eta0", 10), ("eta_inf", 1e-3), ("lam", 1), ("m", 0.6))):
        (9.4065499, 7.9926007, 5.0005, 2.0083993, 0.59445008, 0.15700102),
    ("power_law", (("K", 2), ("n", 0.5))): (20, 6.3245553, 2, 0.63245553, 0.2, 0.063245553),
    ("bingham", (("tau_y", 5), ("eta_p", 0.1))): (500.1, 50.1, 5.1, 0.6, 0.15, 0.105),
    ("herschel_bulkley", (("tau_y", 5), ("K", 2), ("n", 0.5))):
        (520, 56.324555, 7, 1.1324555, 0.25, 0.068245553),
    ("casson", (("tau_y", 5), ("eta_c", 0.1))):
        (514.24214, 54.572136, 6.5142136, 1.0472136, 0.29142136, 0.14972136),
}


@pytest.mark.parametrize("key", list(MODEL_TABLE), ids=[k[0] for k in MODEL_TABLE])
def test_model_viscosities(key: tuple) -> None:
    """Generating models against the viscosity check table of shared REFERENCE.md §6, and the
    inverse γ̇(τ) used in the annulus against the forward model."""
    name, params = key
    model = demo.FlowModel(name, dict(params))
    rates = np.array([0.01, 0.1, 1.0, 10.0, 100.0, 1000.0])
    assert model.stress(rates) / rates == pytest.approx(MODEL_TABLE[key], rel=1e-5)
    for rate in rates:
        assert model.rate(float(model.stress(rate))) == pytest.approx(rate, rel=1e-9)


# ------------------------------------------------- study.toml: limits and specifications


def test_study_toml_is_valid_for_gammadot(study: Path, registry) -> None:
    """The written study.toml passes gammadot's own validation, with the torque limits,
    density and specification rules it declares."""
    config = parse_study_config(_config(study), registry, default_title="demo")
    assert config.density == pytest.approx(demo.DENSITY)
    low, high = demo.TORQUE_LIMITS
    assert config.limits == {"torque_min": pytest.approx(low), "torque_max": pytest.approx(high)}
    assert low == pytest.approx(20 * demo.TORQUE_FLOOR)  # twenty times the noise at the floor, as the comment says
    assert config.fit.models is None
    assert {1.0, 10.0, 100.0} <= set(config.fit.shear_rates)
    assert len(config.specs) == len(demo.EXAMPLE_SPECS) >= 4


def test_specifications_are_labelled_invented_and_match_samples(study: Path) -> None:
    text = (study / "study.toml").read_text("utf-8")
    assert "INVENTED EXAMPLE SPECIFICATIONS" in text and "not real acceptance limits" in text
    rules = _config(study)["spec"]
    assert all("(example)" in rule["name"] for rule in rules)
    samples = set(demo.SAMPLES)
    for rule in rules:
        assert fnmatch.filter(samples, rule["sample"]), rule["name"]
    quantities = {rule["quantity"] for rule in rules}
    assert {"viscosity", "viscosity_ratio", "yield_stress", "parameter"} <= quantities
    assert "specifications are invented examples" in (study / "README.txt").read_text("utf-8").lower()


# --------------------------------------------------- inertia, start-up and structure


@pytest.mark.parametrize("radius_ratio, reynolds", [(0.80, 94.734), (0.90, 131.61), (0.921914, 148.51),
                                                    (0.95, 184.99), (0.99, 412.04)])
def test_taylor_onset_matches_eigenvalues(radius_ratio: float, reynolds: float) -> None:
    """Taylor's small-gap approximation against exact critical Reynolds numbers.

    Source: shared REFERENCE.md §4.1 (Chebyshev-collocation eigen-solver values, marked [N]).
    The approximation is for small gaps: within 0.5 % from R_i/R_o = 0.8 up.
    """
    assert demo.taylor_critical_reynolds(radius_ratio, 1.0) == pytest.approx(reynolds, rel=5e-3)


def test_couette_torque_with_vortices() -> None:
    """Below onset the torque is Margules' T = 4πμLΩRi²Ro²/(Ro² − Ri²); above it the laminar
    torque times (Re/Re_c)^½ with Re = ρΩRi(Ro − Ri)/μ."""
    cylinder = demo.GEOMETRIES["bob25-cup29"]
    ri, ro, length = cylinder.inner_radius, cylinder.outer_radius, cylinder.immersed_length
    mu, rho = 3.5e-3, 1020.0
    model = demo.FlowModel("newtonian", {"eta": mu})
    critical = demo.taylor_critical_reynolds(ri, ro)
    for reynolds in (0.5 * critical, 0.99 * critical, 1.5 * critical, 8.0 * critical):
        omega = reynolds * mu / (rho * ri * (ro - ri))
        margules = 4.0 * math.pi * mu * length * omega * ri**2 * ro**2 / (ro**2 - ri**2)
        expected = margules * max(1.0, math.sqrt(reynolds / critical))
        assert demo.couette_torque(model, omega, cylinder, rho) == pytest.approx(expected, rel=1e-9)
        assert demo.couette_torque(model, omega, cylinder) == pytest.approx(margules, rel=1e-9)


@pytest.mark.parametrize("time_ratio, fixed_wall", [(0.05, 0.03400147), (0.1, 0.29289965), (0.2, 0.72292239),
                                                    (0.5, 0.98561624), (1.0, 0.99989655)])
def test_startup_fixed_wall_series(time_ratio: float, fixed_wall: float) -> None:
    """Plane Couette start-up, fixed-wall stress / steady: 1 + 2Σ(−1)ⁿexp(−n²π²τ*).

    Source: shared REFERENCE.md §4.3 table (checked there with a Crank–Nicolson solution).
    """
    assert float(demo.startup_stress_ratio(time_ratio, "fixed")) == pytest.approx(fixed_wall, abs=2e-8)


def test_startup_moving_wall_series() -> None:
    """Moving wall: at short times Stokes' first problem, τ_w/(μU/h) = 1/√(πτ*) (the series and
    this form agree up to terms in exp(−1/τ*)); at the 1 % settling time the excess is 1 %.

    Source: shared REFERENCE.md §4.3 (short times: Stokes' first problem; settling τ* = 0.53683).
    """
    for time_ratio in (1e-3, 1e-2):
        expected = 1.0 / math.sqrt(math.pi * time_ratio)
        assert float(demo.startup_stress_ratio(time_ratio)) == pytest.approx(expected, rel=1e-9)
    assert float(demo.startup_stress_ratio(SETTLING_FRACTION_1_PERCENT)) == pytest.approx(1.01, abs=1e-6)
    assert float(demo.startup_stress_ratio(50.0)) == 1.0  # long steps: exactly steady


def test_structure_kinetics_against_numerical_integration() -> None:
    """The closed form per step against an ODE solver over a piecewise-constant rate history,
    and the steady state against the Cross model (η∞ + (η0 − η∞)s_e = η_Cross)."""
    model = demo.FlowModel("cross", {"eta0": 20.0, "eta_inf": 0.08, "lam": 0.5, "m": 0.9})
    k, lam, m = 0.003, 0.5, 0.9
    rates = np.array([0.1, 1.0, 30.0, 500.0, 30.0, 1.0, 0.1])
    durations = np.array([40.0, 30.0, 10.0, 8.0, 10.0, 30.0, 40.0])
    closed = demo.structure_after_steps(model, k, rates, durations)
    s, numeric = 1.0, []
    for rate, duration in zip(rates, durations):
        solution = solve_ivp(lambda t, y: k * ((1.0 - y) - (lam * rate) ** m * y), (0.0, duration), [s],
                             method="LSODA", rtol=1e-11, atol=1e-13)
        s = float(solution.y[0, -1])
        numeric.append(s)
    assert closed == pytest.approx(numeric, rel=1e-7)
    for rate in (0.3, 10.0, 200.0):
        steady = demo.structure_after_steps(model, k, [rate], [1e6])[0]
        assert demo.structured_viscosity(model, steady) == pytest.approx(float(model.stress(rate)) / rate, rel=1e-12)


# ------------------------------------------------------- the runs made for the checks


def test_rinse_aid_shows_taylor_vortices(study: Path, truth: dict) -> None:
    """Raw cup torques: laminar (Margules) below Re_c, raised by (Re/Re_c)^½ above it."""
    (relative, run), = _designed(truth, "taylor_vortices")
    entry, config = truth[relative], _config(study)
    cup = config["geometries"][run["geometry"]]
    ri, ro, length = (_quantity(cup[k]) for k in ("inner_radius", "outer_radius", "immersed_length"))
    rho, mu = _quantity(config["study"]["density"]), run["params"]["eta"]
    _, header, rows = _table(study, truth, relative, run)
    omega = _column(header, rows, "Rotational speed", entry["decimal"])
    torque = _column(header, rows, "Torque", entry["decimal"])
    margules = 4.0 * math.pi * mu * length * omega * ri**2 * ro**2 / (ro**2 - ri**2)
    reynolds = rho * omega * ri * (ro - ri) / mu
    critical = demo.taylor_critical_reynolds(ri, ro)
    assert (reynolds < critical).sum() >= 3 and (reynolds > 1.2 * critical).sum() >= 3
    expected = margules * np.sqrt(np.maximum(reynolds / critical, 1.0))
    scatter = np.hypot(run["relative_noise"], run["torque_floor"] / expected)
    assert np.all(np.abs(torque / expected - 1.0) < 5.0 * scatter)
    assert torque[-1] / margules[-1] > 2.0  # a clear rise, not noise


def test_fast_method_steps_are_too_short_for_the_thin_liquid(study: Path, truth: dict) -> None:
    """A few steps end before ln(200)/π² · ρd²/η, the 1 % settling time across the cup's gap."""
    (relative, run), = _designed(truth, "short_steps")
    entry, config = truth[relative], _config(study)
    cup = config["geometries"][run["geometry"]]
    gap = _quantity(cup["outer_radius"]) - _quantity(cup["inner_radius"])
    needed = SETTLING_FRACTION_1_PERCENT * _quantity(config["study"]["density"]) * gap**2 / run["params"]["eta"]
    _, header, rows = _table(study, truth, relative, run)
    time = _column(header, rows, "Time", entry["decimal"])
    durations = np.diff(np.concatenate([[0.0], time]))
    short = np.flatnonzero(durations < needed)
    assert 2 <= len(short) <= 4 and list(short) == list(range(len(rows) - len(short), len(rows)))
    assert durations.max() > 4 * needed


def test_low_rate_check_starts_below_the_torque_floor(study: Path, truth: dict) -> None:
    """A zero reading at rest, then torques below [limits] torque_min at the lowest rates only."""
    (relative, run), = _designed(truth, "rest_reading")
    assert "low_torque" in run["artefacts"]
    entry, config = truth[relative], _config(study)
    _, header, rows = _table(study, truth, relative, run)
    omega = _column(header, rows, "Speed", entry["decimal"])
    torque = _column(header, rows, "Torque", entry["decimal"])
    assert omega[0] == 0.0 and np.all(omega[1:] > 0) and np.all(np.diff(omega[1:]) > 0)
    low = np.flatnonzero(np.abs(torque) < _quantity(config["limits"]["torque_min"]))
    assert {0, 1, 2, 3} <= set(low) and low.max() < len(rows) // 2
    radius = _quantity(config["geometries"][run["geometry"]]["radius"])
    alpha = _quantity(config["geometries"][run["geometry"]]["cone_angle"])
    expected = 2.0 * math.pi * radius**3 / 3.0 * run["params"]["eta"] * omega / alpha
    high = slice(len(rows) - 5, None)  # well above the floor: the oil's viscosity
    assert np.all(np.abs(torque[high] / expected[high] - 1.0) < 5 * run["relative_noise"])


def test_sample_loss_at_the_high_rate_end(study: Path, truth: dict) -> None:
    """Stress follows the model until the loss rate, then falls over the last three points as
    the filled radius shrinks to R(γ̇_L/γ̇)^½ (torque ∝ R_f³, small-angle cone-plate)."""
    (relative, run), = _designed(truth, "sample_loss")
    entry, config = truth[relative], _config(study)
    cone = config["geometries"][run["geometry"]]
    radius, alpha = _quantity(cone["radius"]), _quantity(cone["cone_angle"])
    _, header, rows = _table(study, truth, relative, run)
    rate = _column(header, rows, "Speed", entry["decimal"]) / alpha
    stress = 3.0 * _column(header, rows, "Torque", entry["decimal"]) / (2.0 * math.pi * radius**3)
    lost = rate > run["loss_rate"]
    assert list(np.flatnonzero(lost)) == [len(rows) - 3, len(rows) - 2, len(rows) - 1]
    assert np.all(np.diff(stress[-4:]) < 0) and stress[-3] < 0.9 * stress[-4]
    model = demo.FlowModel(run["model"], run["params"]).stress(rate)
    filled = np.where(lost, (run["loss_rate"] / rate) ** 1.5, 1.0)
    assert np.all(np.abs(stress / (model * filled) - 1.0) < 5 * run["relative_noise"])


def test_thixotropic_loop_falls_below_on_the_way_down(study: Path, truth: dict) -> None:
    """Up then down through the same rates: every down point lies below its up point, the up
    curve passes a maximum before the top, and the stresses follow the structure model."""
    (relative, run), = _designed(truth, "thixotropy")
    entry = truth[relative]
    _, header, rows = _table(study, truth, relative, run)
    time = _column(header, rows, "Time", entry["decimal"])
    rate = _column(header, rows, "Shear rate", entry["decimal"])
    stress = _column(header, rows, "Shear stress", entry["decimal"])
    top = int(np.argmax(rate))
    up, down = slice(0, top + 1), slice(top, None)
    assert len(rows) == 2 * top + 1 and rate[down] == pytest.approx(rate[up][::-1], rel=1e-3)
    assert np.all(stress[top + 1:] < 0.9 * stress[:top][::-1])
    peak = int(np.argmax(stress[up]))
    assert peak < top and stress[top] < 0.7 * stress[peak]
    model = demo.FlowModel(run["model"], run["params"])
    structure = demo.structure_after_steps(model, run["thixotropy_build_rate"], rate,
                                           np.diff(np.concatenate([[0.0], time])))
    expected = rate * np.array([demo.structured_viscosity(model, s) for s in structure])
    assert np.all(np.abs(stress / expected - 1.0) < 5 * run["relative_noise"])


def test_under_filled_cup_reads_low(study: Path, truth: dict) -> None:
    """The repeat with the cup filled below the mark: torques times the wetted fraction of the
    immersed length; the first loading of the same sample at the same temperature reads true."""
    (relative, run), = _designed(truth, "under_filled")
    config = _config(study)
    cup = config["geometries"][run["geometry"]]
    cylinder = demo.ConcentricCylinder(*(_quantity(cup[k]) for k in ("inner_radius", "outer_radius",
                                                                      "immersed_length")))
    first = next((p, r) for p, e in truth.items() for r in e["runs"]
                 if r["sample"] == run["sample"] and r["temperature"] == run["temperature"] and r is not run
                 and r["filled_fraction"] == 1.0)
    ratios = []
    for path, plan in (first, (relative, run)):
        _, header, rows = _table(study, truth, path, plan)
        omega = _column(header, rows, "Speed", truth[path]["decimal"])
        torque = _column(header, rows, "Torque", truth[path]["decimal"])
        model = demo.FlowModel(plan["model"], plan["params"])
        ratios.append(np.median(torque / np.array([demo.couette_torque(model, float(w), cylinder) for w in omega])))
    assert ratios[0] == pytest.approx(1.0, abs=0.01)
    assert ratios[1] == pytest.approx(run["filled_fraction"], abs=0.01)
    assert 1.0 - ratios[1] / ratios[0] > 0.10  # more than the replicate tolerance


# -------------------------------------------------------------------- end to end


@pytest.fixture(scope="module")
def processed(tmp_path_factory: pytest.TempPathFactory) -> tuple:
    """The demo study through the pipeline, outputs written (built-in plugins only)."""
    from gammadot.plugin_manager import build_plugin_manager
    from gammadot.registry import build_registry

    registry = build_registry(build_plugin_manager(entry_points=False))
    folder = tmp_path_factory.mktemp("demo-run")
    study = demo.write_demo_study(folder / "study")
    out = folder / "out"
    result = write_outputs(process_study(study, registry, out_dir=out), out)
    return registry, result, out


def _run_ids(result, truth: dict) -> dict[tuple[str, int], str]:
    """(export path, run index in the file) → run id, from the processed runs' sources."""
    by_file: dict[str, list] = {}
    for r in result.runs:
        by_file.setdefault(r.run.source_file, []).append(r.run)
    return {(path, i): run.run_id for path, runs in by_file.items()
            for i, run in enumerate(sorted(runs, key=lambda x: x.first_line))}


def test_demo_through_the_pipeline(processed: tuple, truth: dict) -> None:
    """Every built-in check and analysis fires on at least one run, each on the run made for
    it; the replicate pairs agree and disagree as designed; the specifications give pass, fail
    and undecided (n/a or straddling) verdicts; the broken export is the one rejected file."""
    registry, result, out = processed
    checks = pq.read_table(out / "tables" / "checks.parquet").to_pylist()
    fired: dict[str, set[str]] = {}
    for row in checks:
        if row["severity"] != "info" or row["check"] in ("hysteresis_loop", "wall_slip"):
            fired.setdefault(row["check"], set()).add(row["run_id"])
    # Every built-in check and analysis can apply to this study: none is left out.
    expected = set(registry.checks) | set(registry.analyses)
    assert expected <= set(fired), sorted(expected - set(fired))

    ids = _run_ids(result, truth)
    designed = {"taylor_vortices": "secondary_flow", "short_steps": "steady_state", "low_torque": "torque_range",
                "rest_reading": "invalid_point", "sample_loss": "sample_loss", "thixotropy": "hysteresis_loop",
                "under_filled": "replicates", "wall_slip": "wall_slip", "model_misfit": "fit_residuals"}
    for artefact, check in designed.items():
        for path, run in _designed(truth, artefact):
            if check == "torque_range" and run["export"] == "computed" and not run["geometry_in_file"]:
                # instrument values without a geometry and no [limits] stress_min: the torque is not
                # known to gammadot, and the run says that its torque range was not checked
                assert any(row["run_id"] == ids[(path, run["index"])] and row["check"] == "torque_range"
                           and "torque range was not checked" in row["message"] for row in checks), path
                continue
            assert ids[(path, run["index"])] in fired[check], (artefact, path)
    (path, loop), = _designed(truth, "thixotropy")
    assert ids[(path, loop["index"])] in fired["non_monotonic"]
    loop_area = next(r for r in checks if r["check"] == "hysteresis_loop" and r["run_id"] == ids[(path, 0)])
    assert loop_area["value"] > 0  # thixotropic: the rising curve above the falling one

    pairs = {frozenset((r["run_id_a"], r["run_id_b"])): r["agree"]
             for r in pq.read_table(out / "tables" / "replicates.parquet").to_pylist()}
    (filled_path, filled), = _designed(truth, "under_filled")
    first = next((p, r["index"]) for p, e in truth.items() for r in e["runs"] if r["sample"] == filled["sample"]
                 and r["temperature"] == filled["temperature"] and r["filled_fraction"] == 1.0)
    assert pairs[frozenset((ids[first], ids[(filled_path, filled["index"])]))] is False
    (lost_path, lost), = _designed(truth, "sample_loss")
    confirm = next((lost_path, r["index"]) for r in truth[lost_path]["runs"] if r is not lost)
    assert pairs[frozenset((ids[confirm], ids[(lost_path, lost["index"])]))] is True

    specs = pq.read_table(out / "tables" / "specs.parquet").to_pylist()
    verdicts = {row["verdict"] for row in specs}
    assert {"pass", "fail"} <= verdicts
    assert "n/a" in verdicts or any(row["straddles_limit"] for row in specs)
    sample_of = {r.run.run_id: r.run.sample for r in result.runs}
    lotion = [row for row in specs if row["rule"].startswith("lotion viscosity")]
    failing = {sample_of[row["run_id"]] for row in lotion if row["verdict"] == "fail"}
    assert failing == {lost["sample"]}  # the thin batch, in both of its runs
    assert {sample_of[row["run_id"]] for row in lotion if row["verdict"] == "pass"} >= {"LT-2611", "LT-2612"}

    rejected = json.loads((out / "rejected.json").read_text("utf-8"))
    assert [r["file"] for r in rejected["rejected"]] == [p for p, e in truth.items() if e["rejected"]]
    usable = sum(len(e["runs"]) for e in truth.values() if not e["rejected"])
    assert len(result.runs) == usable and all(r.selected is not None for r in result.runs)

"""Tests of the demo study writer, :mod:`gammadot.demo`.

The demo data are invented, but the physics that turns a model into torque and speed is
checked against values from outside the project (the check values of the shared reference
sheet, each with its source named beside the test). File-level checks read the written
bytes with a small parser of their own, so they do not depend on gammadot's importer.
"""

from __future__ import annotations

import hashlib
import math
import tomllib
from pathlib import Path

import numpy as np
import pytest

from gammadot import demo

ENCODINGS = {"utf-16-bom": "utf-16", "utf-8-sig": "utf-8-sig", "utf-8": "utf-8", "cp1252": "cp1252"}
LENGTH_UNITS = {"mm": 1e-3, "um": 1e-6, "m": 1.0, "deg": math.pi / 180.0}


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
    usable = [r for e in truth.values() if not e["rejected"] for r in e["runs"]]
    assert len(usable) >= 12


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


def test_study_toml_defines_the_raw_geometries(study: Path, truth: dict) -> None:
    config = tomllib.loads((study / "study.toml").read_text("utf-8"))
    assert config["study"]["title"] and config["study"]["description"]
    assert config["fit"]["models"] == ["newtonian", "power_law"]
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

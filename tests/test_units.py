"""Unit reading and conversion to SI.

Reference factors: NIST Special Publication 811 (2008 ed., Thompson & Taylor), Appendix B.8
(factors for units listed alphabetically) and B.9 (by kind of quantity):
poise = 0.1 Pa·s exactly, centipoise = 1 mPa·s, dyne per square centimetre = 0.1 Pa,
revolution per minute = (2π/60) rad/s, degree Fahrenheit t/°C = (t/°F − 32)/1.8,
kelvin t/°C = T/K − 273.15. SI prefixes: SI Brochure (BIPM, 9th ed. 2019), Table 7.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, strategies as st

from gammadot.units import UnitError, parse_quantity, to_si

SI_PREFIXES = {  # SI Brochure 9th ed., Table 7 (ronna/quecto omitted: not in common exports)
    "Y": 24, "Z": 21, "E": 18, "P": 15, "T": 12, "G": 9, "M": 6, "k": 3, "h": 2, "da": 1,
    "d": -1, "c": -2, "m": -3, "µ": -6, "n": -9, "p": -12, "f": -15, "a": -18, "z": -21, "y": -24,
}


@pytest.mark.parametrize(("text", "dimension", "si"), [
    ("P", "viscosity", 0.1),            # NIST SP 811 B.8: poise = 1.0e-1 Pa·s
    ("cP", "viscosity", 1e-3),          # NIST SP 811 B.8: centipoise = 1.0e-3 Pa·s
    ("mPa·s", "viscosity", 1e-3),
    ("mPas", "viscosity", 1e-3),        # common practice in exports: mPas means mPa·s
    ("mPa s", "viscosity", 1e-3),
    ("Pa.s", "viscosity", 1.0),
    ("dyn/cm²", "pressure", 0.1),       # NIST SP 811 B.8: dyne per cm² = 1.0e-1 Pa
    ("rpm", "angular_velocity", 2 * math.pi / 60),   # NIST SP 811 B.8: rpm = (2π/60) rad/s
    ("1/min", "angular_velocity", 2 * math.pi / 60),  # common practice: speed in 1/min means rev/min
    ("rad/s", "angular_velocity", 1.0),
    ("1/s", "frequency", 1.0),
    ("s⁻¹", "frequency", 1.0),
    ("s^-1", "frequency", 1.0),
    ("µN·m", "torque", 1e-6),
    ("μNm", "torque", 1e-6),            # Greek mu and no dot, as some exports write it
    ("mN·m", "torque", 1e-3),
    ("N", "force", 1.0),
    ("-", "dimensionless", 1.0),
])
def test_factor_to_si(text: str, dimension: str, si: float) -> None:
    assert to_si(1.0, text, dimension) == pytest.approx(si, rel=1e-12)


@pytest.mark.parametrize("prefix", list(SI_PREFIXES))
@pytest.mark.parametrize(("unit", "dimension"), [("Pa", "pressure"), ("Pa·s", "viscosity"),
                                                 ("N·m", "torque"), ("N", "force")])
def test_every_si_prefix(prefix: str, unit: str, dimension: str) -> None:
    assert to_si(1.0, prefix + unit, dimension) == pytest.approx(10.0 ** SI_PREFIXES[prefix], rel=1e-12)


@pytest.mark.parametrize(("text", "value", "celsius"), [
    ("°C", 25.0, 25.0),
    ("K", 298.15, 25.0),          # NIST SP 811 B.9: t/°C = T/K − 273.15
    ("°F", 77.0, 25.0),           # NIST SP 811 B.9: t/°C = (t/°F − 32)/1.8
    ("°F", -40.0, -40.0),
])
def test_temperatures_to_celsius(text: str, value: float, celsius: float) -> None:
    assert to_si(np.array([value]), text, "temperature")[0] == pytest.approx(celsius, abs=1e-9)


def test_viscosity_unit_never_read_as_pressure() -> None:
    with pytest.raises(UnitError, match="stress unit, but a viscosity unit"):
        to_si(1.0, "Pa", "viscosity")
    with pytest.raises(UnitError, match="viscosity unit, but a stress unit"):
        to_si(1.0, "Pa·s", "pressure")


def test_unknown_unit_is_named() -> None:
    with pytest.raises(UnitError, match="unknown unit 'blorf'"):
        to_si(1.0, "blorf", "viscosity")


@pytest.mark.parametrize(("text", "dimension", "si"), [
    ("0.5 mm", "length", 5e-4), ("1 deg", "angle", math.pi / 180), ("25 °C", "temperature", 25.0),
    ("14,0 mm", "length", 0.014), ("3.5 Pa*s", "viscosity", 3.5), ("10 1/s", "frequency", 10.0),
])
def test_parse_quantity(text: str, dimension: str, si: float) -> None:
    assert parse_quantity(text, dimension) == pytest.approx(si, rel=1e-12)


@given(st.floats(min_value=-1e12, max_value=1e12, allow_nan=False))
def test_arrays_convert_elementwise(value: float) -> None:
    converted = to_si(np.array([value, value]), "cP", "viscosity")
    assert converted[0] == converted[1] == pytest.approx(value * 1e-3, rel=1e-12, abs=1e-300)


def test_units_parse_correctly_from_many_threads_at_once() -> None:
    """The watcher runs studies on worker threads: eight threads reading unit spellings at the
    same time, from a cold cache, all get the SI factors of NIST SP 811 App. B.8/B.9
    (1 cP = 1 mPa·s = 10⁻³ Pa·s; 1 µN·m = 10⁻⁶ N·m; 1 rpm = 2π/60 rad/s)."""
    import math
    from concurrent.futures import ThreadPoolExecutor

    from gammadot import units

    units.parse_unit.cache_clear()
    units._linear_map.cache_clear()
    cases = [("cP", "viscosity", 1e-3), ("mPas", "viscosity", 1e-3), ("µN·m", "torque", 1e-6),
             ("rpm", "angular_velocity", 2 * math.pi / 60), ("kPa", "pressure", 1e3), ("mN m", "torque", 1e-3)] * 20
    with ThreadPoolExecutor(max_workers=8) as pool:
        got = list(pool.map(lambda case: float(units.to_si(1.0, case[0], case[1])), cases))
    assert got == pytest.approx([factor for _, _, factor in cases], rel=1e-12)

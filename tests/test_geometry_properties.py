"""Property-based checks of the geometry corrections (hypothesis).

- A Newtonian fluid needs no correction: the Margules relation is exact in any gap (Bird,
  Stewart & Lightfoot 2nd ed. §3.6), so the Krieger-corrected values equal the apparent ones;
  between plates n′ = 1 makes the Weissenberg–Rabinowitsch factor (3 + n′)/4 equal to 1
  (Macosko 1994 ch. 5).
- The corrections are continuous in the flow index: for power-law data the corrected/apparent
  ratio of n and of n + ε differ by O(ε), bounded by |d ln(ratio)/dn| of the closed forms.
  Inner wall: the Krieger factor F = (1 − δ⁻²)/(n(1 − δ^{−2/n})) has d ln F/dn = −1/n +
  (x/n)/(eˣ − 1) with x = 2 ln δ/n, which lies in (−1/n, 0). Representative radius: the rate
  is carried to r_rep with the factor c^{1/n}, c = (1 + δ²)/(2δ²), adding −ln c/n² ≥ 0, so
  |d ln/dn| < 1/n − ln c/n². Plates: d ln((3 + n)/4)/dn = 1/(3 + n) ≤ 1/3.
"""

from __future__ import annotations

import math

import numpy as np
from hypothesis import given, settings, strategies as st

from gammadot.plugins.rotational_geometries import convert_parallel_plate
from gammadot.wide_gap import convert_couette

import geometry_oracles as oracle

SETTINGS = settings(max_examples=25, deadline=None)


@st.composite
def monotone_speeds(draw: st.DrawFn) -> np.ndarray:
    """3 to 25 distinct angular velocities (rad/s), increasing or decreasing, spanning ≥ 10 %."""
    count = draw(st.integers(3, 25))
    low = draw(st.floats(-3.0, 1.0))
    span = draw(st.floats(0.05, 4.0))
    steps = np.array(draw(st.lists(st.floats(0.05, 1.0), min_size=count, max_size=count)))
    exponents = low + span * np.cumsum(steps) / steps.sum()
    omega = 10.0 ** exponents
    return omega if draw(st.booleans()) else omega[::-1]


@SETTINGS
@given(omega=monotone_speeds(), viscosity=st.floats(1e-3, 1e3), delta=st.floats(1.01, 2.0),
       values_at=st.sampled_from(["representative", "inner_wall"]))
def test_newtonian_couette_data_are_not_corrected(omega: np.ndarray, viscosity: float, delta: float,
                                                  values_at: str) -> None:
    tau_i = viscosity * 2 * omega * delta**2 / (delta**2 - 1)  # Margules inner-wall stress
    conversion = convert_couette(omega, tau_i, delta, values_at=values_at)
    assert np.allclose(conversion.shear_rate, conversion.shear_rate_apparent, rtol=1e-8, atol=0)
    assert np.allclose(conversion.shear_stress / conversion.shear_rate, viscosity, rtol=1e-8, atol=0)
    assert not any(f.check == "geometry.partly_sheared" for f in conversion.notes)


@SETTINGS
@given(omega=monotone_speeds(), viscosity=st.floats(1e-3, 1e3))
def test_newtonian_plate_data_are_not_corrected(omega: np.ndarray, viscosity: float) -> None:
    radius, gap = 20e-3, 1e-3
    torque = math.pi * viscosity * omega * radius**4 / (2 * gap)  # T = πμΩR⁴/(2h), REFERENCE §2
    run = oracle.make_run({"angular_velocity": omega, "torque": torque})
    conversion = convert_parallel_plate(run, oracle.geometry("parallel_plate", radius=radius, gap=gap))
    assert np.allclose(conversion.shear_stress, conversion.shear_stress_apparent, rtol=1e-8, atol=0)
    assert np.allclose(conversion.shear_stress / conversion.shear_rate, viscosity, rtol=1e-8, atol=0)


@SETTINGS
@given(n=st.floats(0.2, 1.5), delta=st.floats(1.02, 1.6), values_at=st.sampled_from(["representative", "inner_wall"]))
def test_couette_correction_is_continuous_in_n(n: float, delta: float, values_at: str) -> None:
    omega = np.geomspace(0.01, 10.0, 12)
    epsilon = 1e-3

    def ratio(index: float) -> np.ndarray:
        tau_i = (2 * omega / (index * (1 - delta ** (-2 / index)))) ** index  # power law, K = 1
        conversion = convert_couette(omega, tau_i, delta, values_at=values_at)
        return conversion.shear_rate / conversion.shear_rate_apparent

    change = np.abs(np.log(ratio(n + epsilon) / ratio(n)))
    carried = -math.log((1 + delta**2) / (2 * delta**2)) / n**2 if values_at == "representative" else 0.0
    assert change.max() <= 1.01 * epsilon * (1.0 / n + carried) + 1e-9


@SETTINGS
@given(n=st.floats(0.1, 2.0))
def test_plate_correction_is_continuous_in_n(n: float) -> None:
    radius, gap, epsilon = 20e-3, 1e-3, 1e-3
    omega = np.geomspace(1e-3, 1.0, 10)
    geometry = oracle.geometry("parallel_plate", radius=radius, gap=gap)

    def factor(index: float) -> np.ndarray:
        torque = 2 * math.pi * (omega / gap) ** index * radius ** (index + 3) / (index + 3)
        conversion = convert_parallel_plate(oracle.make_run({"angular_velocity": omega, "torque": torque}), geometry)
        return conversion.shear_stress / conversion.shear_stress_apparent

    change = np.abs(np.log(factor(n + epsilon) / factor(n)))
    assert change.max() <= epsilon / 3 * 1.01

"""Write gammadot's demo study: a fictitious QC lab's flow curves, generated from models.

The scenario is invented from start to finish. **Merrowind Formulations Ltd** (fictitious) makes
personal-care and household products and decorative coatings at its Kestle Bridge plant
(fictitious). Its QC lab measures a flow curve of every production batch on two rotational
rheometers (lab assets MWF-RH-01 and MWF-RH-02) and files the exports by month and production line:

- Softmere body lotion, batches LT-2611, LT-2612 and LT-2613: shear-thinning (Carreau); LT-2613
  came out thin (the demo's failing batch) and was measured twice;
- Harbourline satin wall paint, batch PT-2611: shear-thinning (Cross);
- Harbourline non-drip gloss, batch PG-2612: a thixotropic gel paint, measured up and down in
  rate from rest;
- Calmora zinc barrier ointment, batch ZB-2611: two structural levels (a particle network
  and a wax structure) that thin at different rates, a curve no single library model follows;
- hand-cream base HCB-2612: yield stress (Herschel–Bulkley), repeated once with the cup filled
  below the mark;
- Tessel tile-joint paste JP-2612: yield stress (Bingham);
- in-house check oil RO-0926: near-Newtonian reference, also run down to the torque floor;
- Glintmere rinse aid RA-2612: a thin Newtonian liquid (3.5 mPa·s) in the cup, at speeds
  where Taylor vortices form and with a fast method whose steps are too short for it;
- Aldercove styling gel SG-2612: yield stress (Herschel–Bulkley) that slips on smooth plates,
  measured at two gaps (1.0 mm from study.toml, 0.5 mm from the run's own ``gap:`` line);
- Drayhold XV-40 viscosifier, lot XV-2612, checked in the lab's reference mud on a six-speed
  direct-indicating viscometer (R1-B1 rotor–bob, F1 spring) at 120 °F (48.9 °C).

Every number comes from a constitutive model (see :func:`demo_truth`) turned into what an
instrument records. Viscosity-like parameters follow an Arrhenius shift with temperature,
yield stresses fall linearly with temperature. The torque the model implies is computed with
the geometry's physics (SI units; Ω angular velocity in rad/s, M torque in N·m, τ stress in Pa):

- cone-plate, small angle α: γ̇ = Ω/α everywhere, M = 2πR³τ(γ̇)/3; a truncated tip (flat
  centre of radius R_t = h_t/α at gap h_t) adds 2π∫₀^{R_t} τ(Ωr/h_t) r² dr and removes its
  share of the cone;
- parallel plates, gap h: γ̇(r) = Ωr/h, M = 2π∫₀ᴿ τ(Ωr/h) r² dr (quadrature); with wall
  slip at both plates, u_s = β·τ, the local stress solves γ̇(τ) + 2βτ/h = Ωr/h (Brent's method);
- concentric cylinders, inner cylinder turning, outer fixed, δ = Ro/Ri: τ(r) = τ_i (Ri/r)², so
  Ω = ½∫_{τ_i/δ²}^{τ_i} γ̇(τ)/τ dτ (γ̇ = 0 below a yield stress); τ_i is solved for each Ω
  (Brent's method) and M = 2πRi²Lτ_i. No end effects are simulated;
- direct-indicating viscometer: the same Couette relation with the R1-B1 radius ratio; the
  dial shows the bob stress over 0.511 Pa per degree, read to half a degree.

Beyond steady laminar shear, with the study's one density ρ = 1020 kg/m³:

- Taylor vortices (inner cylinder turning): above the critical Reynolds number
  Re_c = Ω_c·Ri·d/ν (d = Ro − Ri), from Taylor's small-gap approximation (see
  :func:`taylor_critical_reynolds`), the torque rises above the laminar one as
  M/M_lam = (Re/Re_c)^½ — the demo's own smooth form, continuous at onset, growing like Re^{3/2}
  as vortex-flow torques are reported to do (order of magnitude; the demo needs a clear rise,
  not a vortex-flow law). Re uses the laminar viscosity at the inner wall;
- start-up of each step (Newtonian samples): the flow across the gap h (plate gap, αR for a
  cone, Ro − Ri for cylinders) develops by momentum diffusion, and the turning member's wall
  stress after a speed change is the steady value plus the change times
  2Σ exp(−n²π²t/t_ν), t_ν = ρh²/η (plane Couette start-up, moving wall; superposed step by
  step). The instrument records the torque at the end of each step;
- thixotropy (PG-2612): a Moore-type structure parameter s (1 rested, 0 broken down) with
  ds/dt = k[(1 − s) − (λγ̇)^m·s]; at fixed s the paint is Newtonian with
  η = η∞ + (η0 − η∞)s, and the steady state is the Cross model. On each step at constant rate
  s relaxes exponentially (closed form). A rested gel taken up in rate keeps most of its
  structure at low rates and breaks down once it has been sheared long and fast enough, so the
  stress of the rising sweep passes through a maximum and falls at the highest rates; on the way
  down the structure rebuilds slowly (1/k ≈ 5 min), so the down curve lies far below the up curve;
- sample loss (cone-plate, LT-2613 repeat): above a rate γ̇_L the sample is thrown out at the
  rim and the filled radius shrinks as R_f = R(γ̇_L/γ̇)^½;
- under-filling (cylinders, HCB-2612 repeat): only a fraction of the immersed length is wetted.

Then the artefacts of a real lab: 1.5 % multiplicative torque noise, an additive noise of
0.08 µN·m at the instrument's resolution floor (visible at the lowest torques of the check
oil, where a reading can even come out negative), one clear outlier (an air bubble in LT-2611
at 20 °C) and one export that is broken on purpose and must be rejected. "Instrument-computed"
exports hold the shear rate, stress and viscosity an instrument computes from a cone-plate's
torque and speed; raw exports hold only torque and speed, and their geometry is defined in
``study.toml``. The exports use several text dialects (delimiters, decimal marks, encodings,
unit spellings, several runs per file).

Pure numpy/scipy and the standard library; deterministic (fixed seed per run), so two calls
write byte-identical files.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace
from pathlib import Path
from typing import Any, Callable, Mapping

import numpy as np
from scipy.integrate import quad
from scipy.optimize import brentq

__all__ = [
    "DEMO_SEED",
    "DENSITY",
    "EXAMPLE_SPECS",
    "TORQUE_LIMITS",
    "ConcentricCylinder",
    "ConePlate",
    "DirectIndicating",
    "FlowModel",
    "ParallelPlate",
    "cone_plate_torque",
    "couette_inner_stress",
    "couette_speed",
    "couette_torque",
    "demo_truth",
    "parallel_plate_torque",
    "slipping_stress",
    "startup_stress_ratio",
    "structure_after_steps",
    "structured_viscosity",
    "taylor_critical_reynolds",
    "taylor_torque_factor",
    "write_demo_study",
]

DEMO_SEED = 20261104
REL_NOISE = 0.015  # relative standard deviation of the measured torque (1)
TORQUE_FLOOR = 0.08e-6  # N·m, standard deviation of the additive noise at the resolution floor
OUTLIER_FACTOR = 1.45  # torque multiplier of the one outlier point (air bubble)
GAS_CONSTANT = 8.314462618  # J/(mol·K)
REFERENCE_TEMPERATURE = 20.0  # °C, temperature of the tabulated sample parameters
DENSITY = 1020.0  # kg/m³: one density for every sample, as study.toml's [study] density
# N·m: the torque range study.toml gives the (invented) rheometers: a resolvable minimum of twenty
# times the noise at the resolution floor (a reading below it scatters by more than 5 %), and a
# maximum well above every torque simulated.
TORQUE_LIMITS = (1.6e-6, 0.15)


# --------------------------------------------------------------------------- models


def _stress_newtonian(rate: np.ndarray, p: Mapping[str, float]) -> np.ndarray:
    """τ = ηγ̇ (Pa; rate in 1/s, eta in Pa·s)."""
    return p["eta"] * rate


def _stress_power_law(rate: np.ndarray, p: Mapping[str, float]) -> np.ndarray:
    """τ = Kγ̇ⁿ (Pa; K in Pa·sⁿ)."""
    return p["K"] * rate ** p["n"]


def _stress_bingham(rate: np.ndarray, p: Mapping[str, float]) -> np.ndarray:
    """τ = τ_y + η_p γ̇ for γ̇ ≥ 0 (Pa; the value at γ̇ = 0 is the yield limit)."""
    return p["tau_y"] + p["eta_p"] * rate


def _stress_herschel_bulkley(rate: np.ndarray, p: Mapping[str, float]) -> np.ndarray:
    """τ = τ_y + Kγ̇ⁿ for γ̇ ≥ 0 (Pa)."""
    return p["tau_y"] + p["K"] * rate ** p["n"]


def _stress_casson(rate: np.ndarray, p: Mapping[str, float]) -> np.ndarray:
    """√τ = √τ_y + √(η_c γ̇) for γ̇ ≥ 0 (Pa)."""
    return (np.sqrt(p["tau_y"]) + np.sqrt(p["eta_c"] * rate)) ** 2


def _stress_cross(rate: np.ndarray, p: Mapping[str, float]) -> np.ndarray:
    """τ = γ̇[η∞ + (η0 − η∞)/(1 + (λγ̇)^m)] (Pa; lam in s)."""
    eta = p["eta_inf"] + (p["eta0"] - p["eta_inf"]) / (1.0 + (p["lam"] * rate) ** p["m"])
    return eta * rate


def _stress_carreau(rate: np.ndarray, p: Mapping[str, float]) -> np.ndarray:
    """τ = γ̇[η∞ + (η0 − η∞)(1 + (λγ̇)²)^((n−1)/2)] (Pa)."""
    shape = (1.0 + (p["lam"] * rate) ** 2) ** ((p["n"] - 1.0) / 2.0)
    return (p["eta_inf"] + (p["eta0"] - p["eta_inf"]) * shape) * rate


def _stress_two_step(rate: np.ndarray, p: Mapping[str, float]) -> np.ndarray:
    """Two structural levels thinning at different rates, as two Cross terms sharing m:
    τ = γ̇[η∞ + η_1/(1 + (λ_1γ̇)^m) + η_2/(1 + (λ_2γ̇)^m)] (Pa; λ in s). Not one of gammadot's
    models: no single model of the library follows both steps (what ``fit_residuals`` finds)."""
    def step(eta: float, lam: float) -> np.ndarray:
        return eta / (1.0 + (lam * rate) ** p["m"])

    return (p["eta_inf"] + step(p["eta_1"], p["lam_1"]) + step(p["eta_2"], p["lam_2"])) * rate


_STRESS: dict[str, Callable[[np.ndarray, Mapping[str, float]], np.ndarray]] = {
    "newtonian": _stress_newtonian,
    "power_law": _stress_power_law,
    "bingham": _stress_bingham,
    "herschel_bulkley": _stress_herschel_bulkley,
    "casson": _stress_casson,
    "cross": _stress_cross,
    "carreau": _stress_carreau,
    "two_step": _stress_two_step,
}


def _excess(stress: float, p: Mapping[str, float]) -> float:
    """Stress above the yield stress, never negative (Pa)."""
    return max(stress - p["tau_y"], 0.0)


# Analytic inverses γ̇(τ) in 1/s for τ in Pa; zero below a yield stress.
_RATE: dict[str, Callable[[float, Mapping[str, float]], float]] = {
    "newtonian": lambda s, p: s / p["eta"],
    "power_law": lambda s, p: (s / p["K"]) ** (1.0 / p["n"]),
    "bingham": lambda s, p: _excess(s, p) / p["eta_p"],
    "herschel_bulkley": lambda s, p: (_excess(s, p) / p["K"]) ** (1.0 / p["n"]),
    "casson": lambda s, p: max(math.sqrt(s) - math.sqrt(p["tau_y"]), 0.0) ** 2 / p["eta_c"],
}


@dataclass(frozen=True)
class FlowModel:
    """A generalized-Newtonian model: id as in gammadot's model table, parameters in SI."""

    name: str
    params: Mapping[str, float]

    def stress(self, rate: Any) -> np.ndarray:
        """Shear stress (Pa) at shear rate ``rate`` (1/s, ≥ 0), vectorised."""
        return _STRESS[self.name](np.asarray(rate, dtype=float), self.params)

    def rate(self, stress: float) -> float:
        """Shear rate (1/s) at shear stress ``stress`` (Pa); 0 below a yield stress."""
        inverse = _RATE.get(self.name)
        return inverse(stress, self.params) if inverse else self._rate_numeric(stress)

    @property
    def yield_stress(self) -> float:
        """Yield stress τ_y (Pa), 0 for models without one."""
        return float(self.params.get("tau_y", 0.0))

    def _rate_numeric(self, stress: float) -> float:
        """γ̇ (1/s) with τ(γ̇) = stress, by Brent's method on ln γ̇ (τ increases with γ̇)."""
        if stress <= 0.0:
            return 0.0
        target = math.log(stress)
        root = brentq(lambda x: math.log(float(self.stress(math.exp(x)))) - target,
                      -60.0, 60.0, xtol=1e-14, rtol=1e-14)
        return math.exp(root)


# ----------------------------------------------------------------------- geometries


def cone_plate_torque(model: FlowModel, omega: float, radius: float, angle: float,
                      truncation_gap: float = 0.0) -> float:
    """Torque (N·m) on a cone of radius ``radius`` (m) and small angle ``angle`` (rad) at Ω (rad/s).

    Small-angle cone-plate: γ̇ = Ω/α, M = 2πR³τ(γ̇)/3. A truncated tip leaves a flat centre of
    radius R_t = h_t/α at gap h_t (m), which acts as a small parallel-plate pair.
    """
    tip_radius = truncation_gap / angle
    cone = 2.0 * math.pi / 3.0 * float(model.stress(omega / angle)) * (radius**3 - tip_radius**3)
    if truncation_gap <= 0.0:
        return cone
    return cone + parallel_plate_torque(model, omega, tip_radius, truncation_gap)


def parallel_plate_torque(model: FlowModel, omega: float, radius: float, gap: float,
                          slip: float = 0.0) -> float:
    """Torque (N·m) on a plate of radius ``radius`` (m) at gap ``gap`` (m) and Ω (rad/s).

    γ̇(r) = Ωr/h; M = 2π∫₀ᴿ τ(Ωr/h) r² dr, by adaptive quadrature. With wall slip at both
    plates, slip velocity u_s = ``slip``·τ (``slip`` in m/(s·Pa)), the local stress τ(r)
    solves γ̇(τ) + 2u_s(τ)/h = Ωr/h.
    """
    if slip > 0.0:
        def stress_at(r: float) -> float:
            return slipping_stress(model, omega * r / gap, gap, slip)
    else:
        def stress_at(r: float) -> float:
            return float(model.stress(omega * r / gap))
    value, _ = quad(lambda r: stress_at(r) * r * r, 0.0, radius, epsabs=0.0, epsrel=1e-11, limit=200)
    return 2.0 * math.pi * value


def slipping_stress(model: FlowModel, apparent_rate: float, gap: float, slip: float) -> float:
    """Stress τ (Pa) with γ̇(τ) + 2·slip·τ/h = ``apparent_rate`` (1/s): flow plus slip at both walls."""
    if apparent_rate <= 0.0:
        return 0.0

    def mismatch(tau: float) -> float:
        return model.rate(tau) + 2.0 * slip * tau / gap - apparent_rate

    high = apparent_rate * gap / (2.0 * slip)  # slip alone would need this stress
    if mismatch(high) <= 0.0:  # below a yield stress the sample only slides
        return high
    return brentq(mismatch, 0.0, high, xtol=1e-14 * high, rtol=1e-13)


def couette_speed(model: FlowModel, tau_i: float, delta: float) -> float:
    """Ω (rad/s) of the inner cylinder for inner-wall stress ``tau_i`` (Pa), δ = Ro/Ri, outer fixed.

    τ(r) = τ_i (Ri/r)², so dr/r = −dτ/(2τ) and Ω = ∫ γ̇/r dr = ½∫_{τ_i/δ²}^{τ_i} γ̇(τ)/τ dτ;
    γ̇ = 0 where τ is below a yield stress (unsheared plug next to the outer wall).
    """
    lower = max(tau_i / delta**2, model.yield_stress)
    if tau_i <= lower:
        return 0.0
    value, _ = quad(lambda t: model.rate(t) / t, lower, tau_i, epsabs=0.0, epsrel=1e-12, limit=200)
    return 0.5 * value


def couette_inner_stress(model: FlowModel, omega: float, delta: float) -> float:
    """Inner-wall shear stress τ_i (Pa) that turns the inner cylinder at Ω (rad/s), δ = Ro/Ri."""
    def mismatch(tau: float) -> float:
        return couette_speed(model, tau, delta) - omega

    newtonian_rate = 2.0 * omega * delta**2 / (delta**2 - 1.0)
    high = 2.0 * float(model.stress(newtonian_rate)) + model.yield_stress
    while mismatch(high) < 0.0:
        high *= 2.0
    low = model.yield_stress or high / 2.0
    while mismatch(low) > 0.0:
        low /= 2.0
    return brentq(mismatch, low, high, xtol=1e-15 * high, rtol=1e-14)


@dataclass(frozen=True)
class ConePlate:
    """Cone-plate: radius (m), cone angle (rad), truncation gap at the flat tip (m)."""

    radius: float
    cone_angle: float
    truncation: float = 0.0
    kind: str = "cone_plate"

    def torque(self, model: FlowModel, omega: float) -> float:
        """Torque (N·m) at Ω (rad/s)."""
        return cone_plate_torque(model, omega, self.radius, self.cone_angle, self.truncation)

    def speed_for(self, rate: float) -> float:
        """Ω (rad/s) giving the nominal shear rate ``rate`` (1/s): Ω = γ̇α."""
        return rate * self.cone_angle

    def apparent(self, omega: np.ndarray, torque: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """The instrument's (γ̇ in 1/s, τ in Pa): γ̇ = Ω/α, τ = 3M/(2πR³)."""
        return omega / self.cone_angle, 3.0 * torque / (2.0 * math.pi * self.radius**3)

    def toml_items(self) -> list[tuple[str, str]]:
        """study.toml entries (quantities as strings with units)."""
        return [("radius", _mm(self.radius)),
                ("cone_angle", f"{math.degrees(self.cone_angle):g} deg"),
                ("truncation", f"{self.truncation * 1e6:g} um")]


@dataclass(frozen=True)
class ParallelPlate:
    """Parallel plates: plate radius (m), gap (m)."""

    radius: float
    gap: float
    kind: str = "parallel_plate"

    def torque(self, model: FlowModel, omega: float, slip: float = 0.0) -> float:
        """Torque (N·m) at Ω (rad/s); ``slip`` (m/(s·Pa)) gives u_s = slip·τ at both plates."""
        return parallel_plate_torque(model, omega, self.radius, self.gap, slip)

    def speed_for(self, rate: float) -> float:
        """Ω (rad/s) giving the rim shear rate ``rate`` (1/s): Ω = γ̇_R h/R."""
        return rate * self.gap / self.radius

    def apparent(self, omega: np.ndarray, torque: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """The instrument's Newtonian rim values: γ̇_R = ΩR/h (1/s), τ_a = 2M/(πR³) (Pa)."""
        return omega * self.radius / self.gap, 2.0 * torque / (math.pi * self.radius**3)

    def toml_items(self) -> list[tuple[str, str]]:
        """study.toml entries (quantities as strings with units)."""
        return [("radius", _mm(self.radius)), ("gap", _mm(self.gap))]


@dataclass(frozen=True)
class ConcentricCylinder:
    """Concentric cylinders, inner one turning: radii (m) and immersed length (m)."""

    inner_radius: float
    outer_radius: float
    immersed_length: float
    kind: str = "concentric_cylinder"

    @property
    def delta(self) -> float:
        """Radius ratio δ = Ro/Ri (1)."""
        return self.outer_radius / self.inner_radius

    def torque(self, model: FlowModel, omega: float, density: float = 0.0) -> float:
        """Torque (N·m) at Ω (rad/s): M = 2πRi²Lτ_i, raised by Taylor vortices for ρ > 0 (kg/m³)."""
        return couette_torque(model, omega, self, density)

    def speed_for(self, rate: float) -> float:
        """Ω (rad/s) giving the Newtonian inner-wall rate ``rate`` (1/s): Ω = γ̇(δ²−1)/(2δ²)."""
        return rate * (self.delta**2 - 1.0) / (2.0 * self.delta**2)

    def apparent(self, omega: np.ndarray, torque: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Newtonian inner-wall values: γ̇ = 2Ωδ²/(δ²−1) (1/s), τ_i = M/(2πRi²L) (Pa)."""
        rate = 2.0 * omega * self.delta**2 / (self.delta**2 - 1.0)
        return rate, torque / (2.0 * math.pi * self.inner_radius**2 * self.immersed_length)

    def toml_items(self) -> list[tuple[str, str]]:
        """study.toml entries (quantities as strings with units)."""
        return [("inner_radius", _mm(self.inner_radius)), ("outer_radius", _mm(self.outer_radius)),
                ("immersed_length", _mm(self.immersed_length)), ("rotating", "inner")]


def couette_torque(model: FlowModel, omega: float, geometry: ConcentricCylinder,
                   density: float = 0.0) -> float:
    """Torque (N·m) on the inner cylinder turning at Ω (rad/s): M = 2πRi²Lτ_i.

    With a density ρ (kg/m³) the laminar torque is raised by Taylor vortices where the inner
    cylinder's Reynolds number ρΩRi·d/η_i (η_i = τ_i/γ̇_i, the laminar viscosity at the inner
    wall) exceeds :func:`taylor_critical_reynolds`, by :func:`taylor_torque_factor`.
    """
    tau_i = couette_inner_stress(model, omega, geometry.delta)
    torque = 2.0 * math.pi * geometry.inner_radius**2 * geometry.immersed_length * tau_i
    if density <= 0.0 or tau_i <= 0.0:
        return torque
    wall_rate = model.rate(tau_i)
    if wall_rate <= 0.0:
        return torque
    gap = geometry.outer_radius - geometry.inner_radius
    reynolds = density * omega * geometry.inner_radius * gap / (tau_i / wall_rate)
    return torque * taylor_torque_factor(reynolds, taylor_critical_reynolds(geometry.inner_radius,
                                                                            geometry.outer_radius))


# ------------------------------------------------------- inertia, start-up, structure


def taylor_critical_reynolds(inner_radius: float, outer_radius: float) -> float:
    """Re_c = Ω_c·Ri·d/ν at the onset of Taylor vortices, inner cylinder turning, outer fixed.

    Taylor's approximation for small gaps (Phil. Trans. R. Soc. A 223 (1923) 289; the form and
    its coefficients as usually quoted, from memory):
    Ω_c² = π⁴ν²(Ri + Ro)/(2P·d³·Ri²), P = 0.0571(1 − 0.652 d/Ri) + 0.00056/(1 − 0.652 d/Ri),
    d = Ro − Ri. The tests compare it with the eigenvalue table of the shared reference sheet.
    """
    gap = outer_radius - inner_radius
    shape = 1.0 - 0.652 * gap / inner_radius
    p = 0.0571 * shape + 0.00056 / shape
    return math.sqrt(math.pi**4 * (inner_radius + outer_radius) / (2.0 * p * gap))


def taylor_torque_factor(reynolds: float, critical: float) -> float:
    """M/M_lam: 1 up to Re_c, (Re/Re_c)^½ above it (the demo's own smooth vortex-torque form)."""
    return math.sqrt(reynolds / critical) if reynolds > critical else 1.0


def startup_stress_ratio(time_ratio: Any, wall: str = "moving") -> np.ndarray:
    """Wall stress / its steady value after plane Couette flow starts from rest, at
    t/t_ν = ``time_ratio`` (t_ν = ρh²/η): moving wall 1 + 2Σ exp(−n²π²t*), fixed wall
    1 + 2Σ(−1)ⁿ exp(−n²π²t*), n ≥ 1 (summed until the terms underflow)."""
    ratio = np.asarray(time_ratio, dtype=float)
    return (1.0 + _startup_excess(np.atleast_1d(ratio), wall)).reshape(ratio.shape)


def _startup_excess(time_ratio: np.ndarray, wall: str = "moving") -> np.ndarray:
    """2Σ (±1)ⁿ exp(−n²π²t*): 0.0 exactly once every term underflows (long steps)."""
    smallest = float(np.min(time_ratio))
    if not smallest > 0.0:
        raise ValueError("start-up times must be positive")
    terms = int(math.ceil(math.sqrt(800.0 / (math.pi**2 * smallest)))) + 1
    n = np.arange(1, terms + 1, dtype=float)[:, None]
    sign = np.ones_like(n) if wall == "moving" else (-1.0) ** n
    return 2.0 * np.sum(sign * np.exp(-(n**2) * math.pi**2 * time_ratio[None, :]), axis=0)


def structure_after_steps(model: FlowModel, build_rate: float, rates: Any, durations: Any,
                          start: float = 1.0) -> np.ndarray:
    """Structure parameter s at the end of each step of constant shear rate (1/s) and duration (s).

    Moore-type kinetics with the Cross model as steady state: ds/dt = k[(1 − s) − (λγ̇)^m·s]
    (``build_rate`` k in 1/s; λ and m the Cross parameters of ``model``). At constant γ̇,
    s(t) = s_e + (s₀ − s_e)·exp(−k(1 + (λγ̇)^m)t) with s_e = 1/(1 + (λγ̇)^m).
    """
    if model.name != "cross":
        raise ValueError("the structure kinetics are written for a Cross steady state")
    lam, m = model.params["lam"], model.params["m"]
    s, ends = start, []
    for rate, duration in zip(np.asarray(rates, dtype=float), np.asarray(durations, dtype=float)):
        breakdown = (lam * rate) ** m
        steady = 1.0 / (1.0 + breakdown)
        s = steady + (s - steady) * math.exp(-build_rate * (1.0 + breakdown) * duration)
        ends.append(s)
    return np.array(ends)


def structured_viscosity(model: FlowModel, structure: float) -> float:
    """η (Pa·s) of the Cross-model sample at structure s: η∞ + (η0 − η∞)s (Newtonian at fixed s)."""
    return model.params["eta_inf"] + (model.params["eta0"] - model.params["eta_inf"]) * structure


@dataclass(frozen=True)
class DirectIndicating:
    """Six-speed direct-indicating viscometer: rotor (outer) and bob radii (m), dial constants.

    ``rate_per_rpm`` (1/s) and ``stress_per_degree`` (Pa) are the standard R1-B1/F1 values;
    the outer sleeve turns, which gives the same steady Couette relation as an inner one.
    """

    rotor_radius: float = 18.415e-3
    bob_radius: float = 17.245e-3
    rate_per_rpm: float = 1.7023
    stress_per_degree: float = 0.511
    kind: str = "direct_indicating"

    @property
    def delta(self) -> float:
        """Radius ratio δ = R_rotor/R_bob (1)."""
        return self.rotor_radius / self.bob_radius

    def speed_for(self, rpm: float) -> float:
        """Ω (rad/s) of a dial speed in rpm."""
        return rpm / RPM

    def dial(self, model: FlowModel, omega: float) -> float:
        """Noise-free dial deflection (degrees) at Ω (rad/s): bob stress / stress per degree."""
        return couette_inner_stress(model, omega, self.delta) / self.stress_per_degree

    def apparent(self, omega: np.ndarray, dial: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """The standard's bob values: γ̇ = factor·N (1/s), τ = factor·θ (Pa)."""
        return self.rate_per_rpm * omega * RPM, self.stress_per_degree * dial

    def toml_items(self) -> list[tuple[str, str]]:
        """study.toml entries: the R1-B1/F1 dial constants, written out."""
        return [("shear_rate_factor", f"{self.rate_per_rpm:g}"), ("stress_factor", f"{self.stress_per_degree:g} Pa")]


Geometry = ConePlate | ParallelPlate | ConcentricCylinder | DirectIndicating

GEOMETRIES: dict[str, Geometry] = {
    "cone50-1deg": ConePlate(radius=25e-3, cone_angle=math.radians(1.0), truncation=50e-6),
    "plate25": ParallelPlate(radius=12.5e-3, gap=1.0e-3),
    "bob25-cup29": ConcentricCylinder(inner_radius=12.5e-3, outer_radius=14.5e-3,
                                      immersed_length=37.5e-3),
    "plate40-smooth": ParallelPlate(radius=20e-3, gap=1.0e-3),
    "dial-r1b1": DirectIndicating(),
}
DIAL_SPEEDS = (600.0, 300.0, 200.0, 100.0, 6.0, 3.0)  # rpm, read from high to low
DIAL_STEP = 0.5  # degrees: the dial is read to half a degree
DIAL_NOISE = 0.3  # degrees, standard deviation of the reading before rounding


def _mm(value: float) -> str:
    """A length in m written in mm with at least one decimal, e.g. ``"1.0 mm"``."""
    text = f"{value * 1e3:.4f}".rstrip("0")
    return f"{text}0 mm" if text.endswith(".") else f"{text} mm"


# ------------------------------------------------------------------------- scenario


@dataclass(frozen=True)
class Sample:
    """A batch: product, model id, parameters at 20 °C (SI), temperature behaviour.

    ``activation_energy`` (J/mol) shifts viscosity-like parameters and time constants with an
    Arrhenius factor; ``yield_drop`` (1/K) lowers a yield stress linearly with temperature.
    """

    code: str
    product: str
    model: str
    params: Mapping[str, float]
    activation_energy: float
    yield_drop: float = 0.0
    slip: float = 0.0  # m/(s·Pa): wall-slip velocity per unit stress on smooth plates
    thixotropy: float = 0.0  # 1/s: structure build-up rate k (Cross samples; 0: no thixotropy)


SAMPLES: dict[str, Sample] = {s.code: s for s in (
    Sample("LT-2611", "Softmere body lotion", "carreau",
           {"eta0": 45.0, "eta_inf": 0.015, "lam": 6.0, "n": 0.38}, 32e3),
    Sample("LT-2612", "Softmere body lotion", "carreau",
           {"eta0": 49.0, "eta_inf": 0.015, "lam": 6.6, "n": 0.37}, 32e3),
    Sample("PT-2611", "Harbourline satin wall paint", "cross",
           {"eta0": 9.5, "eta_inf": 0.06, "lam": 0.8, "m": 0.72}, 24e3),
    Sample("ZB-2611", "Calmora zinc barrier ointment", "two_step",
           {"eta_inf": 0.1, "eta_1": 300.0, "lam_1": 4.0, "eta_2": 3.0, "lam_2": 0.005, "m": 1.0}, 28e3),
    Sample("RO-0926", "in-house check oil RO", "newtonian", {"eta": 0.0485}, 18e3),
    Sample("HCB-2612", "hand-cream base", "herschel_bulkley",
           {"tau_y": 32.0, "K": 8.5, "n": 0.44}, 20e3, 0.012),
    Sample("JP-2612", "Tessel tile-joint paste", "bingham",
           {"tau_y": 55.0, "eta_p": 1.6}, 22e3, 0.006),
    Sample("SG-2612", "Aldercove styling gel", "herschel_bulkley",
           {"tau_y": 18.0, "K": 9.0, "n": 0.42}, 15e3, 0.004, slip=4e-5),
    Sample("XV-2612", "Drayhold XV-40 viscosifier in reference mud", "herschel_bulkley",
           {"tau_y": 3.2, "K": 0.28, "n": 0.6}, 12e3, 0.002),
    Sample("RA-2612", "Glintmere rinse aid", "newtonian", {"eta": 3.5e-3}, 17e3),
    Sample("LT-2613", "Softmere body lotion", "carreau",
           {"eta0": 24.0, "eta_inf": 0.012, "lam": 5.0, "n": 0.36}, 32e3),
    Sample("PG-2612", "Harbourline non-drip gloss gel paint", "cross",
           {"eta0": 20.0, "eta_inf": 0.08, "lam": 0.5, "m": 0.9}, 24e3, thixotropy=0.003),
)}

# The generating models that are also gammadot's built-in models (the others are not in its library).
LIBRARY_MODELS = frozenset({"newtonian", "power_law", "bingham", "herschel_bulkley", "casson", "cross", "carreau"})
_SHIFTED = frozenset({"eta", "eta0", "eta_inf", "eta_p", "eta_c", "K", "lam", "eta_1", "eta_2", "lam_1", "lam_2"})


def model_at(sample: Sample, temperature: float) -> FlowModel:
    """The sample's model at ``temperature`` (°C), shifted from the 20 °C parameters."""
    kelvin, reference = temperature + 273.15, REFERENCE_TEMPERATURE + 273.15
    shift = math.exp(sample.activation_energy / GAS_CONSTANT * (1.0 / kelvin - 1.0 / reference))
    drop = 1.0 - sample.yield_drop * (temperature - REFERENCE_TEMPERATURE)
    params = {k: v * shift if k in _SHIFTED else v * drop if k == "tau_y" else v
              for k, v in sample.params.items()}
    return FlowModel(sample.model, params)


@dataclass(frozen=True)
class RunPlan:
    """One run: sample, temperature (°C), geometry id, nominal shear rates (1/s), metadata."""

    sample: str
    temperature: float
    geometry: str
    rate_min: float
    rate_max: float
    points: int
    operator: str
    date: str
    note: str
    outlier_index: int | None = None
    gap: float | None = None  # m: a gap other than study.toml's, written as the run's ``gap:`` line
    up_and_down: bool = False  # the rates rise, then fall back through the same steps
    step_durations: tuple[float, float] | None = None  # s: first and last step, log-spaced between
    filled: float = 1.0  # cylinders: fraction of the immersed length actually wetted
    loss_rate: float | None = None  # 1/s: cone-plate, sample thrown out at the rim above this rate
    rest_reading: bool = False  # a first row logged at rest (speed 0): the torque's zero reading

    @property
    def n_points(self) -> int:
        """Rows of the run: ``points`` up, ``points`` − 1 back down for an up-and-down run, and
        the row at rest."""
        return (2 * self.points - 1 if self.up_and_down else self.points) + self.rest_reading


@dataclass(frozen=True)
class Column:
    """A table column: quantity, header name, unit text, SI→unit factor and number format.

    ``decimals`` fixes the decimals written (an instrument's resolution); otherwise ``sig``
    significant digits are written.
    """

    quantity: str
    name: str
    unit: str
    factor: float = 1.0
    sig: int = 5
    decimals: int | None = None


@dataclass(frozen=True)
class Dialect:
    """How a file is written: encoding, delimiter, decimal mark, newline, metadata style."""

    encoding: str  # "utf-8", "utf-8-sig", "cp1252" or "utf-16-bom"
    delimiter: str
    decimal: str
    newline: str
    meta_sep: str
    brackets: str  # "[]" or "()"
    title_keys: bool = False  # "Sample: …" instead of "sample: …"


@dataclass(frozen=True)
class ExportPlan:
    """One export file: path in the study, dialect, columns, runs; raw or instrument-computed."""

    path: str
    dialect: Dialect
    columns: tuple[Column, ...]
    runs: tuple[RunPlan, ...]
    raw: bool
    instrument: str
    broken: bool = False
    names_geometry: bool | None = None  # a geometry line in the file; None: only in raw exports

    @property
    def geometry_in_file(self) -> bool:
        """Whether the runs name their geometry (always for torque/speed exports)."""
        return self.raw if self.names_geometry is None else self.names_geometry


RPM = 60.0 / (2.0 * math.pi)  # rpm per rad/s
_RIG_1 = "rotational rheometer MWF-RH-01 (lab asset)"
_RIG_2 = "rotational rheometer MWF-RH-02 (lab asset)"
_PRESHEAR = "pre-sheared 30 s then 120 s rest"

_CP_COMPUTED = "computed by the instrument from cone 50 mm / 1 deg"

EXPORTS: tuple[ExportPlan, ...] = (
    ExportPlan(
        "exports/2026-11/LT-2611_body-lotion.csv",
        Dialect("utf-8", ",", ".", "\n", ":", "[]"),
        (Column("shear_rate", "Shear rate", "1/s"), Column("shear_stress", "Shear stress", "Pa"),
         Column("viscosity", "Viscosity", "Pa·s"), Column("temperature", "Temperature", "°C", decimals=2)),
        (RunPlan("LT-2611", 20.0, "cone50-1deg", 0.1, 1000.0, 21, "I. Haldane", "2026-11-04",
                 f"{_PRESHEAR}; {_CP_COMPUTED}", outlier_index=13),
         RunPlan("LT-2611", 40.0, "cone50-1deg", 0.1, 1000.0, 21, "I. Haldane", "2026-11-04",
                 f"{_PRESHEAR}; {_CP_COMPUTED}")),
        raw=False, instrument=_RIG_1),
    ExportPlan(
        "exports/2026-11/PT-2611_satin-paint.csv",
        Dialect("cp1252", ";", ",", "\r\n", ";", "[]", title_keys=True),
        (Column("time", "Time", "s", decimals=1), Column("angular_velocity", "Speed", "rpm", RPM, sig=4),
         Column("torque", "Torque", "µN·m", 1e6, decimals=2),
         Column("temperature", "Temperature", "°C", decimals=2)),
        (RunPlan("PT-2611", 20.0, "cone50-1deg", 0.1, 1000.0, 19, "R. Okafor-Lind", "2026-11-12",
                 "stirred 10 min before loading"),
         RunPlan("PT-2611", 40.0, "cone50-1deg", 0.1, 1000.0, 19, "R. Okafor-Lind", "2026-11-12",
                 "stirred 10 min before loading")),
        raw=True, instrument=_RIG_1),
    ExportPlan(
        "exports/2026-11/ZB-2611_barrier-ointment.txt",
        Dialect("utf-8", "\t", ".", "\n", "=", "()"),
        (Column("shear_rate", "Rate", "1/s"), Column("shear_stress", "Stress", "Pa"),
         Column("viscosity", "Viscosity", "Pa·s")),
        (RunPlan("ZB-2611", 20.0, "cone50-1deg", 0.1, 500.0, 24, "T. Vesna", "2026-11-19",
                 f"{_PRESHEAR}; {_CP_COMPUTED}"),),
        raw=False, instrument=_RIG_1),
    ExportPlan(
        "exports/2026-12/RO-0926_check-oil.csv",
        Dialect("utf-8-sig", ",", ".", "\r\n", "=", "()", title_keys=True),
        (Column("shear_rate", "Shear rate", "s⁻¹"), Column("viscosity", "Viscosity", "cP", 1e3),
         Column("temperature", "Temperature", "°C", decimals=2)),
        tuple(RunPlan("RO-0926", t, "cone50-1deg", 0.3, 1000.0, 18, "T. Vesna", "2026-12-01",
                      f"weekly instrument check; {_CP_COMPUTED}") for t in (20.0, 25.0, 40.0)),
        raw=False, instrument=_RIG_1, names_geometry=True),
    ExportPlan(
        "exports/2026-12/LT-2612_body-lotion.csv",
        Dialect("utf-8", ",", ".", "\n", ":", "[]"),
        (Column("shear_rate", "Shear rate", "s⁻¹"), Column("viscosity", "Viscosity", "mPa·s", 1e3),
         Column("shear_stress", "Shear stress", "Pa")),
        (RunPlan("LT-2612", 20.0, "cone50-1deg", 0.1, 1000.0, 21, "I. Haldane", "2026-12-03",
                 f"{_PRESHEAR}; {_CP_COMPUTED}"),
         RunPlan("LT-2612", 40.0, "cone50-1deg", 0.1, 1000.0, 21, "I. Haldane", "2026-12-03",
                 f"{_PRESHEAR}; {_CP_COMPUTED}")),
        raw=False, instrument=_RIG_1),
    ExportPlan(
        "exports/2026-12/line-b/HCB-2612_hand-cream-base.tsv",
        Dialect("utf-16-bom", "\t", ".", "\r\n", ":", "[]", title_keys=True),
        (Column("time", "Time", "s", decimals=1), Column("angular_velocity", "Speed", "rpm", RPM, sig=4),
         Column("torque", "Torque", "mN·m", 1e3, decimals=4),
         Column("temperature", "Temperature", "°C", decimals=2)),
        (RunPlan("HCB-2612", 20.0, "bob25-cup29", 0.1, 400.0, 18, "R. Okafor-Lind", "2026-12-08",
                 "cup filled to the mark; 5 min thermal rest"),
         RunPlan("HCB-2612", 40.0, "bob25-cup29", 0.1, 400.0, 18, "R. Okafor-Lind", "2026-12-08",
                 "cup filled to the mark; 5 min thermal rest")),
        raw=True, instrument=_RIG_2),
    ExportPlan(
        "exports/2026-12/line-b/JP-2612_joint-paste.csv",
        Dialect("utf-8", ";", ".", "\n", "=", "()"),
        (Column("time", "Time", "s", decimals=1), Column("angular_velocity", "Speed", "rad/s", sig=4),
         Column("torque", "Torque", "mN·m", 1e3, decimals=4),
         Column("temperature", "Temperature", "°C", decimals=2)),
        (RunPlan("JP-2612", 20.0, "plate25", 0.1, 300.0, 16, "T. Vesna", "2026-12-10",
                 "serrated plates - edge trimmed after loading"),
         RunPlan("JP-2612", 40.0, "plate25", 0.1, 300.0, 16, "T. Vesna", "2026-12-10",
                 "serrated plates - edge trimmed after loading")),
        raw=True, instrument=_RIG_2),
    ExportPlan(
        "exports/2026-12/line-a/SG-2612_styling-gel_two-gaps.csv",
        Dialect("utf-8", ",", ".", "\n", ":", "[]"),
        (Column("time", "Time", "s", decimals=1), Column("angular_velocity", "Rotational speed", "1/min", RPM, sig=4),
         Column("torque", "Torque", "mN·m", 1e3, decimals=5),
         Column("temperature", "Temperature", "°C", decimals=2)),
        (RunPlan("SG-2612", 25.0, "plate40-smooth", 0.3, 300.0, 16, "I. Haldane", "2026-12-11",
                 "smooth plates; gap from the method (1.0 mm)"),
         RunPlan("SG-2612", 25.0, "plate40-smooth", 0.3, 300.0, 16, "I. Haldane", "2026-12-11",
                 "smooth plates; repeat at half the gap to check for wall slip", gap=0.5e-3)),
        raw=True, instrument=_RIG_2),
    ExportPlan(
        "exports/2026-12/mud-lab/XV-2612_viscosifier_six-speed.txt",
        Dialect("utf-8", "\t", ".", "\r\n", "=", "[]", title_keys=True),
        (Column("angular_velocity", "Speed", "rpm", RPM, sig=4), Column("dial_reading", "Dial reading", "-", decimals=1),
         Column("temperature", "Temperature", "°C", decimals=1)),
        (RunPlan("XV-2612", 48.9, "dial-r1b1", 3.0 * 1.7023, 600.0 * 1.7023, len(DIAL_SPEEDS), "T. Vesna",
                 "2026-12-14", "lot check at 1 lb/bbl in the reference mud, readings from 600 rpm down"),),
        raw=True, instrument="six-speed viscometer MWF-VG-03 (lab asset)"),
    ExportPlan(
        "exports/2026-12/line-b/recheck/LT-2612_body-lotion_40C_BROKEN-truncated-export.csv",
        Dialect("utf-8", ",", ".", "\n", ":", "[]"),
        (Column("shear_rate", "Shear rate", "1/s"), Column("shear_stress", "Shear stress", "Pa"),
         Column("viscosity", "Viscosity", "mPa·s", 1e3)),
        (RunPlan("LT-2612", 40.0, "cone50-1deg", 0.1, 1000.0, 21, "I. Haldane", "2026-12-15",
                 "repeat run; transfer to the lab share was interrupted"),),
        raw=False, instrument=_RIG_1, broken=True),
    # Runs added so that every data-quality check has something real to find (see README.txt).
    ExportPlan(
        "exports/2026-12/line-c/RA-2612_rinse-aid.csv",
        Dialect("utf-8", ",", ".", "\n", ":", "[]"),
        (Column("time", "Time", "s", decimals=2), Column("angular_velocity", "Rotational speed", "1/min", RPM, sig=4),
         Column("torque", "Torque", "µN·m", 1e6, decimals=3),
         Column("temperature", "Temperature", "°C", decimals=2)),
        (RunPlan("RA-2612", 20.0, "bob25-cup29", 10.0, 1500.0, 16, "R. Okafor-Lind", "2026-12-16",
                 "cup filled to the mark; thin-liquid method up to 1500 1/s"),
         RunPlan("RA-2612", 20.0, "bob25-cup29", 10.0, 100.0, 10, "R. Okafor-Lind", "2026-12-16",
                 "fast screening method: point duration 4 s falling to 0.3 s", step_durations=(4.0, 0.3))),
        raw=True, instrument=_RIG_2),
    ExportPlan(
        "exports/2026-12/RO-0926_check-oil_low-rates.csv",
        Dialect("utf-8", ";", ".", "\n", "=", "()"),
        (Column("time", "Time", "s", decimals=1), Column("angular_velocity", "Speed", "rad/s", sig=4),
         Column("torque", "Torque", "µN·m", 1e6, decimals=3),
         Column("temperature", "Temperature", "°C", decimals=2)),
        (RunPlan("RO-0926", 20.0, "cone50-1deg", 0.01, 100.0, 17, "T. Vesna", "2026-12-02",
                 "monthly low-rate check of rig 1 with the check oil from 0.01 1/s - first row: zero reading at rest",
                 rest_reading=True),),
        raw=True, instrument=_RIG_1),
    ExportPlan(
        "exports/2026-12/line-a/LT-2613_body-lotion.csv",
        Dialect("utf-8", ";", ",", "\r\n", ":", "[]"),
        (Column("time", "Time", "s", decimals=1), Column("angular_velocity", "Speed", "rpm", RPM, sig=4),
         Column("torque", "Torque", "µN·m", 1e6, decimals=2),
         Column("temperature", "Temperature", "°C", decimals=2)),
        (RunPlan("LT-2613", 20.0, "cone50-1deg", 0.1, 1000.0, 21, "I. Haldane", "2026-12-17", _PRESHEAR),
         RunPlan("LT-2613", 20.0, "cone50-1deg", 0.1, 10.0**3.4, 23, "I. Haldane", "2026-12-17",
                 f"{_PRESHEAR} - second loading to confirm the first - rates extended to 2500 1/s",
                 loss_rate=700.0)),
        raw=True, instrument=_RIG_1),
    ExportPlan(
        "exports/2026-12/PG-2612_gel-gloss_up-down.csv",
        Dialect("cp1252", ";", ",", "\r\n", ";", "[]", title_keys=True),
        (Column("time", "Time", "s", decimals=1), Column("shear_rate", "Shear rate", "1/s"),
         Column("shear_stress", "Shear stress", "Pa"), Column("viscosity", "Viscosity", "Pa·s")),
        (RunPlan("PG-2612", 20.0, "cone50-1deg", 0.1, 500.0, 13, "R. Okafor-Lind", "2026-12-09",
                 "loaded and rested 15 min without pre-shear - rates up then down (thixotropy loop) - "
                 "computed by the instrument from cone 50 mm / 1 deg", up_and_down=True),),
        raw=False, instrument=_RIG_1),
    ExportPlan(
        "exports/2026-12/line-b/HCB-2612_hand-cream-base_repeat.tsv",
        Dialect("utf-16-bom", "\t", ".", "\r\n", ":", "[]", title_keys=True),
        (Column("time", "Time", "s", decimals=1), Column("angular_velocity", "Speed", "rpm", RPM, sig=4),
         Column("torque", "Torque", "mN·m", 1e3, decimals=4),
         Column("temperature", "Temperature", "°C", decimals=2)),
        (RunPlan("HCB-2612", 20.0, "bob25-cup29", 0.1, 400.0, 18, "R. Okafor-Lind", "2026-12-09",
                 "repeat on a second loading; 5 min thermal rest", filled=0.85),),
        raw=True, instrument=_RIG_2),
)

_BROKEN_ROW = 8  # data row replaced by instrument error cells in the broken export
_BROKEN_KEEP = 12  # complete data rows kept before the file is cut off mid-row


# ----------------------------------------------------------------------- simulation


def _round_sig(value: float, sig: int) -> float:
    """``value`` rounded to ``sig`` significant digits (as it is written)."""
    return float(_format_sig(value, sig))


def _format_sig(value: float, sig: int) -> str:
    """``value`` with ``sig`` significant digits, never in exponent notation."""
    if value == 0.0 or not math.isfinite(value):
        return f"{value:.{sig - 1}f}"
    decimals = max(sig - 1 - math.floor(math.log10(abs(value))), 0)
    return f"{value:.{decimals}f}"


def _speeds(plan: RunPlan, export: ExportPlan) -> np.ndarray:
    """Angular velocities (rad/s) of the run's steps, log-spaced in nominal shear rate.

    Raw exports write the set-point with the speed column's precision; the written value is
    the true one, so the file and the simulation agree exactly.
    """
    geometry = geometry_of(plan)
    if isinstance(geometry, DirectIndicating):
        return np.array([geometry.speed_for(rpm) for rpm in DIAL_SPEEDS])
    rates = np.geomspace(plan.rate_min, plan.rate_max, plan.points)
    if plan.up_and_down:
        rates = np.concatenate([rates, rates[-2::-1]])
    if plan.rest_reading:
        rates = np.concatenate([[0.0], rates])
    omega = np.array([geometry.speed_for(float(r)) for r in rates])
    speed = next((c for c in export.columns if c.quantity == "angular_velocity"), None)
    if speed is None:
        return omega
    return np.array([_round_sig(w * speed.factor, speed.sig) / speed.factor for w in omega])


def geometry_of(plan: RunPlan) -> Geometry:
    """The run's geometry, with its own gap where the run states one."""
    geometry = GEOMETRIES[plan.geometry]
    if plan.gap is not None and isinstance(geometry, ParallelPlate):
        return replace(geometry, gap=plan.gap)
    return geometry


def _dial_readings(geometry: DirectIndicating, model: FlowModel, omega: np.ndarray,
                   rng: np.random.Generator) -> np.ndarray:
    """Dial readings (degrees) as an operator writes them: noise, then half-degree steps."""
    true = np.array([geometry.dial(model, float(w)) for w in omega])
    return np.round((true + DIAL_NOISE * rng.standard_normal(true.size)) / DIAL_STEP) * DIAL_STEP


def _noisy_torque(true: np.ndarray, rng: np.random.Generator, outlier: int | None) -> np.ndarray:
    """Measured torque (N·m): relative noise, additive noise at the resolution floor, outlier."""
    relative = rng.standard_normal(true.size)
    floor = rng.standard_normal(true.size)
    measured = true * (1.0 + REL_NOISE * relative) + TORQUE_FLOOR * floor
    if outlier is not None:
        measured[outlier] *= OUTLIER_FACTOR
    return measured


def _step_times(omega: np.ndarray, geometry: Geometry) -> np.ndarray:
    """Elapsed time (s) at the end of each step: longer steps at low shear rates."""
    rates, _ = geometry.apparent(omega, np.zeros_like(omega))
    return np.cumsum(8.0 + 30.0 / (1.0 + rates))


def step_end_times(plan: RunPlan, omega: np.ndarray) -> np.ndarray:
    """Elapsed time (s) at the end of each step: the run's own log-spaced step durations, or
    the lab's default method (longer steps at low shear rates)."""
    if plan.step_durations is not None:
        first, last = plan.step_durations
        return np.cumsum(np.geomspace(first, last, omega.size))
    return _step_times(omega, geometry_of(plan))


def _diffusion_gap(geometry: Geometry) -> float:
    """Distance (m) momentum crosses at start-up: plate gap, αR at a cone's rim, Ro − Ri."""
    if isinstance(geometry, ConePlate):
        return geometry.cone_angle * geometry.radius
    if isinstance(geometry, ParallelPlate):
        return geometry.gap
    return geometry.outer_radius - geometry.inner_radius


def _startup_torque(steady: np.ndarray, ends: np.ndarray, diffusion_time: float) -> np.ndarray:
    """Torque at the end of each step after start-up transients, superposed from rest (t = 0):
    M_k + Σ_{j≤k} (M_j − M_{j−1})·2Σ exp(−n²π²(t_k − t_{j−1})/t_ν), M_{−1} = 0."""
    starts = np.concatenate([[0.0], ends[:-1]])
    changes = np.diff(np.concatenate([[0.0], steady]))
    measured = steady.copy()
    for k in range(steady.size):
        excess = _startup_excess((ends[k] - starts[: k + 1]) / diffusion_time)
        measured[k] = steady[k] + float(np.sum(changes[: k + 1] * excess))
    return measured


def true_torques(plan: RunPlan, omega: np.ndarray, ends: np.ndarray) -> np.ndarray:
    """Noise-free torque (N·m) the instrument records at the end of each step of the run."""
    sample = SAMPLES[plan.sample]
    model = model_at(sample, plan.temperature)
    geometry = geometry_of(plan)
    if isinstance(geometry, ConcentricCylinder) and plan.filled != 1.0:
        geometry = replace(geometry, immersed_length=geometry.immersed_length * plan.filled)
    rates, _ = geometry.apparent(omega, np.zeros_like(omega))
    if sample.thixotropy:
        durations = np.diff(np.concatenate([[0.0], ends]))
        structure = structure_after_steps(model, sample.thixotropy, rates, durations)
        models = [FlowModel("newtonian", {"eta": structured_viscosity(model, s)}) for s in structure]
    else:
        models = [model] * omega.size
    torques = []
    for w, rate, step_model in zip(omega, rates, models):
        w = float(w)
        if isinstance(geometry, ParallelPlate) and sample.slip:
            torques.append(geometry.torque(step_model, w, sample.slip))
        elif isinstance(geometry, ConcentricCylinder):
            torques.append(geometry.torque(step_model, w, DENSITY))
        elif isinstance(geometry, ConePlate) and plan.loss_rate is not None and rate > plan.loss_rate:
            filled = replace(geometry, radius=geometry.radius * math.sqrt(plan.loss_rate / rate))
            torques.append(filled.torque(step_model, w))
        else:
            torques.append(geometry.torque(step_model, w))
    steady = np.array(torques)
    if model.name != "newtonian":
        return steady
    diffusion_time = DENSITY * _diffusion_gap(geometry) ** 2 / model.params["eta"]
    return _startup_torque(steady, ends, diffusion_time)


def simulate_run(plan: RunPlan, export: ExportPlan, seed: Any) -> dict[str, np.ndarray]:
    """One run's point columns in SI units (time s, angular_velocity rad/s, torque N·m,
    temperature °C, shear_rate 1/s, shear_stress Pa, viscosity Pa·s) as the instrument
    records them; ``seed`` feeds ``numpy.random.default_rng``.
    """
    rng = np.random.default_rng(seed)
    geometry = geometry_of(plan)
    sample = SAMPLES[plan.sample]
    model = model_at(sample, plan.temperature)
    omega = _speeds(plan, export)
    ends = step_end_times(plan, omega)
    columns: dict[str, np.ndarray] = {"time": ends, "angular_velocity": omega}
    if isinstance(geometry, DirectIndicating):
        columns["dial_reading"] = _dial_readings(geometry, model, omega, rng)
        rate, stress = geometry.apparent(omega, columns["dial_reading"])
    else:
        columns["torque"] = _noisy_torque(true_torques(plan, omega, ends), rng, plan.outlier_index)
        rate, stress = geometry.apparent(omega, columns["torque"])
    temperature = plan.temperature + 0.03 * rng.standard_normal(omega.size)
    with np.errstate(divide="ignore", invalid="ignore"):  # the row at rest has no viscosity
        viscosity = stress / rate
    return columns | {"temperature": temperature, "shear_rate": rate, "shear_stress": stress,
                      "viscosity": viscosity}


# -------------------------------------------------------------------------- writing


def _format_value(value: float, column: Column, decimal: str) -> str:
    """A value (SI) written in the column's unit and precision with the file's decimal mark."""
    scaled = value * column.factor
    text = f"{scaled:.{column.decimals}f}" if column.decimals is not None else _format_sig(scaled, column.sig)
    return text.replace(".", decimal)


def _header(export: ExportPlan) -> str:
    """The header row: names with units in the file's brackets."""
    left, right = export.dialect.brackets
    return export.dialect.delimiter.join(f"{c.name} {left}{c.unit}{right}" for c in export.columns)


def _metadata_lines(plan: RunPlan, export: ExportPlan) -> list[str]:
    """The run's ``key<sep>value`` block (the geometry id, from study.toml, in raw exports and in
    computed ones that name it)."""
    sample = SAMPLES[plan.sample]
    items = [("sample", plan.sample), ("product", sample.product)]
    if export.geometry_in_file:
        items.append(("geometry", plan.geometry))
    if plan.gap is not None:
        items.append(("gap", _mm(plan.gap)))
    items += [("temperature", f"{plan.temperature:g} °C"), ("operator", plan.operator),
              ("date", plan.date), ("instrument", export.instrument), ("note", plan.note)]
    if any(export.dialect.delimiter in v for _, v in items):
        raise ValueError(f"{export.path}: a metadata value contains the table delimiter")
    sep = export.dialect.meta_sep
    glue = f" {sep} " if sep == "=" else f"{sep} "
    return [f"{k.title() if export.dialect.title_keys else k}{glue}{v}" for k, v in items]


def _rows(columns: Mapping[str, np.ndarray], export: ExportPlan) -> list[str]:
    """The data rows of one run."""
    d = export.dialect
    n = len(columns["shear_rate"])
    return [d.delimiter.join(_format_value(float(columns[c.quantity][i]), c, d.decimal)
                             for c in export.columns) for i in range(n)]


def _break(rows: list[str], export: ExportPlan) -> list[str]:
    """Damage a table the way an interrupted transfer does: error cells, then a cut row."""
    d = export.dialect
    cells = rows[_BROKEN_ROW].split(d.delimiter)
    rows = list(rows)
    rows[_BROKEN_ROW] = d.delimiter.join([cells[0]] + ["#ERR"] * (len(cells) - 1))
    cut = rows[_BROKEN_KEEP]
    return rows[:_BROKEN_KEEP] + [cut[: cut.index(d.delimiter) + 3]]


def _run_seed(file_index: int, run_index: int) -> list[int]:
    """Seed of one run: fixed, and independent of the other runs."""
    return [DEMO_SEED, file_index, run_index]


def render_export(file_index: int, export: ExportPlan) -> bytes:
    """The bytes of one export file (all its runs, dialect applied)."""
    lines: list[str] = []
    for run_index, plan in enumerate(export.runs):
        columns = simulate_run(plan, export, _run_seed(file_index, run_index))
        rows = _rows(columns, export)
        if run_index:
            lines.append("")
        lines += _metadata_lines(plan, export) + [_header(export)]
        lines += _break(rows, export) if export.broken else rows
    newline = export.dialect.newline
    text = newline.join(lines) + ("" if export.broken else newline)
    return _encode(text, export.dialect.encoding)


def _encode(text: str, encoding: str) -> bytes:
    """Encode with an explicit byte-order mark where the dialect has one."""
    if encoding == "utf-16-bom":
        return b"\xff\xfe" + text.encode("utf-16-le")
    if encoding == "utf-8-sig":
        return b"\xef\xbb\xbf" + text.encode("utf-8")
    return text.encode(encoding)


# Invented example specifications (study.toml [[spec]]): they show how rules work and are nobody's
# real acceptance limits. Keys as in gammadot.specs; quantities as strings with units.
EXAMPLE_SPECS: tuple[dict[str, Any], ...] = (
    {"name": "lotion viscosity at 10 1/s (example)", "quantity": "viscosity", "method": "interpolation",
     "shear_rate": "10 1/s", "min": "2.5 Pa*s", "max": "4.0 Pa*s", "sample": "LT-*"},
    {"name": "lotion Carreau index n (example)", "quantity": "parameter", "model": "carreau", "parameter": "n",
     "max": 0.45, "sample": "LT-*"},
    {"name": "paint shear-thinning index eta(1/s)/eta(100/s) (example)", "quantity": "viscosity_ratio",
     "shear_rate": "1 1/s", "shear_rate_2": "100 1/s", "min": 8, "max": 16, "sample": "PT-*"},
    {"name": "paint viscosity at 100 1/s (example)", "quantity": "viscosity", "method": "model",
     "shear_rate": "100 1/s", "min": "0.38 Pa*s", "max": "0.52 Pa*s", "sample": "PT-*", "temperature": "20 degC",
     "temperature_tolerance": "0.5 K"},
    {"name": "hand-cream base yield stress (example)", "quantity": "yield_stress", "min": "20 Pa",
     "sample": "HCB-*"},
    {"name": "joint paste yield stress (example)", "quantity": "yield_stress", "min": "40 Pa", "max": "70 Pa",
     "sample": "JP-*"},
    {"name": "rinse aid viscosity at 100 1/s (example)", "quantity": "viscosity", "method": "interpolation",
     "shear_rate": "100 1/s", "max": "5 mPa*s", "sample": "RA-*"},
)
REPORTED_SHEAR_RATES = ("1 1/s", "10 1/s", "100 1/s")


def _toml_value(value: Any) -> str:
    return f'"{value}"' if isinstance(value, str) else f"{value:g}"


def study_toml() -> str:
    """The demo's study.toml (quantities as strings with units)."""
    low, high = TORQUE_LIMITS
    lines = [
        "# gammadot demo study. Merrowind Formulations Ltd and all its products are fictitious.",
        "",
        "[study]",
        'title = "Merrowind QC lab: flow curves of November and December 2026 batches (demo)"',
        'description = "Fictitious demo data generated from models by gammadot. Lotion, paint, '
        'ointment, hand-cream base, tile-joint paste, rinse aid and a check oil at 20, 25 and 40 °C; '
        'a styling gel on smooth plates at two gaps; a viscosifier in reference mud on a six-speed viscometer."',
        f'density = "{DENSITY:g} kg/m^3"   # one value for every sample: used by the inertia and steady-state checks',
    ]
    comments = {"truncation": "gap at the flattened cone tip", "shear_rate_factor": "R1-B1 rotor-bob: 1/s per rpm",
                "stress_factor": "F1 spring: stress per dial degree"}
    for gid, geometry in GEOMETRIES.items():
        lines += ["", f"[geometries.{gid}]", f'type = "{geometry.kind}"']
        for key, value in geometry.toml_items():
            lines.append(f'{key} = "{value}"' + (f"   # {comments[key]}" if key in comments else ""))
    lines += ["", "[limits]   # torque range of the (fictitious) rheometers MWF-RH-01 and MWF-RH-02",
              f'torque_min = "{low * 1e6:g} uN*m"   # twenty times their noise at the resolution floor '
              f'({TORQUE_FLOOR * 1e6:g} uN*m)',
              f'torque_max = "{high * 1e3:g} mN*m"',
              "", "[fit]   # no models list: every installed model is fitted",
              "shear_rates = [" + ", ".join(f'"{r}"' for r in REPORTED_SHEAR_RATES) + "]",
              "",
              "# INVENTED EXAMPLE SPECIFICATIONS for the fictitious products: they show how [[spec]] rules",
              "# work and are not real acceptance limits for any product. A rule without a temperature",
              "# applies to every run of the samples its glob matches (the lotion limits below were set",
              "# wide enough for runs at 20 to 40 °C); the paint viscosity rule with `temperature` judges",
              "# only the runs recorded within its tolerance of 20 °C."]
    for rule in EXAMPLE_SPECS:
        lines += ["", "[[spec]]"] + [f"{key} = {_toml_value(value)}" for key, value in rule.items()]
    return "\n".join(lines) + "\n"


def _export_kind(export: ExportPlan) -> str:
    if any(c.quantity == "dial_reading" for c in export.columns):
        return "dial readings and speed"
    return "torque and speed" if export.raw else "instrument-computed"


def readme_text() -> str:
    """The study folder's README.txt: the fictitious scenario and what the files show."""
    products = "\n".join(f"  {s.code:<9} {s.product} ({s.model.replace('_', '-')}-like"
                         f"{', thixotropic' if s.thixotropy else ''})" for s in SAMPLES.values())
    files = "\n".join(f"  {e.path}  ({len(e.runs)} run{'s' * (len(e.runs) > 1)}, {_export_kind(e)})"
                      for e in EXPORTS)
    return README_TEMPLATE.format(products=products, files=files)


README_TEMPLATE = """\
gammadot demo study -- FICTITIOUS DATA
======================================

Everything in this folder is invented. Merrowind Formulations Ltd, its Kestle Bridge
plant, its products, batches, operators and instruments do not exist; the numbers were
generated by gammadot from rheological models with simulated noise. Do not use them for
any real product, process or decision.

The story: the QC lab of Merrowind, a maker of personal-care and household products and
decorative coatings, measures a flow curve of each production batch on two rotational
rheometers and files the exports by month and production line.

Batches:
{products}

Exports (any sub-folder depth is read):
{files}

Raw exports (torque and speed) name a geometry defined in study.toml; the other exports
hold the shear rate, stress and viscosity the instrument computed itself.

study.toml also gives the samples' density (1020 kg/m3, for the inertia and steady-state
checks), the rheometers' torque range, the shear rates at which viscosities are reported,
and a few [[spec]] rules. THE SPECIFICATIONS ARE INVENTED EXAMPLES that show how rules work;
they are nobody's acceptance limits.

Deliberate artefacts, so that every check has something to find:
  - about 1.5 % noise on every torque, and extra noise near the torque resolution floor
    (about 0.08 uN.m; see the check oil at low shear rates);
  - one clear outlier (an air bubble) in LT-2611 at 20 C;
  - the styling gel slips on smooth plates (slip velocity proportional to stress); it
    was measured at 1.0 mm and, with a `gap: 0.5 mm` line in the run, at 0.5 mm, so the
    wall-slip analysis can separate slip from flow (the replicate comparison, which does
    not know about gaps, sees the two runs disagree);
  - the mud's dial readings are whole or half degrees, as an operator writes them;
  - the zinc barrier ointment thins in two steps (two structural levels), which none of the
    nine models follows: the best of them leaves residuals in long runs above and below the
    points (fit_residuals);
  - the rinse aid (3.5 mPa.s) in the cup: above about 120 1/s the inner cylinder's Reynolds
    number passes the onset of Taylor vortices and the torque rises above the laminar one
    (secondary_flow); the fast screening method's last steps (0.3 to 0.5 s) are shorter than
    the time momentum needs to cross the 2 mm gap of so thin a liquid (steady_state);
  - the check oil's monthly low-rate check starts with a zero reading at rest (speed 0:
    invalid_point) and at 0.01 1/s, where torques lie below the rheometer's resolvable
    minimum of 1.6 uN.m (torque_range); its weekly check export was computed by the
    instrument but names the cone it used, so the lowest points' torques are recovered from
    the stress and checked too (the check oil must come out Newtonian);
  - LT-2613 is a thin batch that fails the example lotion specification; it was measured
    twice and the two runs agree (replicates); the second run went on to 2500 1/s, where
    sample was thrown out of the cone gap at the rim and the stress falls over the last
    three points (sample_loss);
  - PG-2612, a thixotropic gel paint, was taken up and down in rate from rest: the stress
    of the rising sweep passes a maximum as the structure breaks down (non_monotonic) and
    the falling sweep lies far below the rising one (hysteresis_loop);
  - HCB-2612 was repeated with the cup filled below the mark (85 % of the immersed
    length), so the repeat reads about 15 % low and disagrees with the first run
    (replicates);
  - one export cut short by an interrupted transfer (file name says BROKEN); it must be
    rejected while the rest of the study is processed.
"""


def write_demo_study(target: Path) -> Path:
    """Write the demo study folder into ``target`` and return it.

    Creates ``target`` if needed; writes study.toml, README.txt and the exports, overwriting
    only these files and leaving anything else in the folder alone.
    """
    target = Path(target)
    target.mkdir(parents=True, exist_ok=True)
    files = {"study.toml": study_toml().encode("utf-8"), "README.txt": readme_text().encode("utf-8")}
    files |= {e.path: render_export(i, e) for i, e in enumerate(EXPORTS)}
    for relative, content in files.items():
        path = target / relative
        path.parent.mkdir(parents=True, exist_ok=True)
        path.write_bytes(content)
    return target


# --------------------------------------------------------------------------- truth


def _run_truth(index: int, plan: RunPlan, export: ExportPlan) -> dict[str, Any]:
    """What generated one run: model, parameters (SI), geometry, artefacts."""
    geometry = geometry_of(plan)
    model = model_at(SAMPLES[plan.sample], plan.temperature)
    return {
        "index": index, "sample": plan.sample, "product": SAMPLES[plan.sample].product,
        "temperature": plan.temperature, "model": model.name, "params": dict(model.params),
        "geometry": plan.geometry, "geometry_type": geometry.kind,
        "geometry_in_file": export.geometry_in_file, "export": "raw" if export.raw else "computed",
        "n_points": plan.n_points, "nominal_shear_rate": (plan.rate_min, plan.rate_max),
        "outlier_index": plan.outlier_index, "relative_noise": REL_NOISE,
        "torque_floor": TORQUE_FLOOR, "gap": getattr(geometry, "gap", None),
        "gap_in_file": plan.gap is not None, "slip_per_stress": SAMPLES[plan.sample].slip,
        "density": DENSITY, "up_and_down": plan.up_and_down, "step_durations": plan.step_durations,
        "filled_fraction": plan.filled, "loss_rate": plan.loss_rate,
        "thixotropy_build_rate": SAMPLES[plan.sample].thixotropy,
        "artefacts": _artefacts(plan),
    }


def _artefacts(plan: RunPlan) -> list[str]:
    """Names of what the run was made to show beyond noise (README.txt explains each)."""
    found = []
    geometry = geometry_of(plan)
    if plan.outlier_index is not None:
        found.append("outlier")
    if SAMPLES[plan.sample].model not in LIBRARY_MODELS:
        found.append("model_misfit")
    if SAMPLES[plan.sample].slip and isinstance(geometry, ParallelPlate):
        found.append("wall_slip")
    if SAMPLES[plan.sample].thixotropy:
        found.append("thixotropy")
    if plan.step_durations is not None:
        found.append("short_steps")
    if plan.filled != 1.0:
        found.append("under_filled")
    if plan.loss_rate is not None and plan.loss_rate < plan.rate_max:
        found.append("sample_loss")
    if plan.rest_reading:
        found.append("rest_reading")
    if isinstance(geometry, ConcentricCylinder):
        model = model_at(SAMPLES[plan.sample], plan.temperature)
        omega = geometry.speed_for(plan.rate_max)
        if geometry.torque(model, omega, DENSITY) > geometry.torque(model, omega):
            found.append("taylor_vortices")
    if not isinstance(geometry, DirectIndicating):
        model = model_at(SAMPLES[plan.sample], plan.temperature)
        lowest = geometry.torque(model, geometry.speed_for(plan.rate_min))
        if lowest < TORQUE_LIMITS[0]:
            found.append("low_torque")
    return found


def demo_truth() -> dict[str, dict[str, Any]]:
    """Per written export (path relative to the study, POSIX style): its dialect, whether the
    importer must reject it, and per run (in file order) the generating model and parameters
    in SI units (Pa, Pa·s, Pa·sⁿ, s), temperature in °C, the geometry id and the artefacts
    (gap in m where the geometry has one, wall-slip velocity per stress in m/(s·Pa)).
    """
    return {
        e.path: {
            "encoding": e.dialect.encoding, "delimiter": e.dialect.delimiter,
            "decimal": e.dialect.decimal, "metadata_separator": e.dialect.meta_sep,
            "rejected": e.broken,
            "columns": [(c.quantity, c.name, c.unit) for c in e.columns],
            "runs": [_run_truth(i, plan, e) for i, plan in enumerate(e.runs)],
        }
        for e in EXPORTS
    }

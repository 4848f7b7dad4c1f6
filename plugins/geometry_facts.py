"""The numbers of a run's measuring geometry that the data-quality checks need (SI units).

For each built-in rotational geometry: the stress per unit torque and the shear rate per unit
angular velocity of its standard (Newtonian, "apparent") relations, the gap h across which
momentum diffuses, and which member turns. The relations are those the geometries convert with:

- cone-plate, small angle α, radius R: τ = 3M/(2πR³), γ̇ = Ω/α; gap at the rim h = αR
  (Macosko, *Rheology: Principles, Measurements and Applications*, 1994, ch. 5);
- parallel plate, radius R, gap h: apparent rim stress τ_a = 2M/(πR³), rim rate γ̇_R = ΩR/h;
- concentric cylinder, δ = R_o/R_i: τ_i = M/(2πR_i²L·c_L), γ̇_i = 2Ωδ²/(δ² − 1) (Margules;
  Bird, Stewart & Lightfoot, *Transport Phenomena*, 2nd ed., §3.6), gap d = R_o − R_i.

Other geometry types (and runs with the instrument's own values) have no facts: checks that need
them do not apply.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from gammadot.config import GeometryConfig
from gammadot.datamodel import Run

CONE_PLATE = "cone_plate"
PARALLEL_PLATE = "parallel_plate"
CONCENTRIC_CYLINDER = "concentric_cylinder"
PLATE_TYPES = (CONE_PLATE, PARALLEL_PLATE)
_KIND_WORDS = {CONE_PLATE: "cone-plate", PARALLEL_PLATE: "parallel plates",
               CONCENTRIC_CYLINDER: "concentric cylinders"}


@dataclass(frozen=True)
class GeometryFacts:
    """A geometry reduced to what the checks use.

    ``stress_per_torque`` Pa/(N·m) and ``rate_per_speed`` (1/s)/(rad/s) are the factors of the
    apparent relations τ = k_τ·M and γ̇ = k_γ·Ω; ``gap`` (m) is the distance momentum crosses;
    ``radius`` (m) is the cone/plate radius or the inner (bob) radius; ``outer_radius`` (m) and
    ``cone_angle`` (rad) are set for the geometries that have them; ``rotating`` is ``"inner"`` or
    ``"outer"`` for cylinders (``"inner"`` otherwise: the cone or top plate).
    """

    id: str
    kind: str
    stress_per_torque: float
    rate_per_speed: float
    gap: float
    radius: float
    outer_radius: float | None = None
    cone_angle: float | None = None
    rotating: str = "inner"

    @property
    def title(self) -> str:
        """The geometry id and type for messages: ``cone50 (cone-plate)``."""
        return f"{self.id} ({_KIND_WORDS.get(self.kind, self.kind)})"


def geometry_facts(geometry: GeometryConfig | None) -> GeometryFacts | None:
    """The facts of a built-in rotational geometry, ``None`` for anything else."""
    if geometry is None:
        return None
    v = geometry.values
    if geometry.type == CONE_PLATE:
        radius, angle = float(v["radius"]), float(v["cone_angle"])
        return GeometryFacts(geometry.id, geometry.type, 3.0 / (2.0 * math.pi * radius**3), 1.0 / angle,
                             gap=angle * radius, radius=radius, cone_angle=angle)
    if geometry.type == PARALLEL_PLATE:
        radius, gap = float(v["radius"]), float(v["gap"])
        return GeometryFacts(geometry.id, geometry.type, 2.0 / (math.pi * radius**3), radius / gap,
                             gap=gap, radius=radius)
    if geometry.type == CONCENTRIC_CYLINDER:
        r_i, r_o = float(v["inner_radius"]), float(v["outer_radius"])
        length, end_factor = float(v["immersed_length"]), float(v.get("end_factor", 1.0))
        delta2 = (r_o / r_i) ** 2
        return GeometryFacts(geometry.id, geometry.type, 1.0 / (2.0 * math.pi * r_i**2 * length * end_factor),
                             2.0 * delta2 / (delta2 - 1.0), gap=r_o - r_i, radius=r_i, outer_radius=r_o,
                             rotating=str(v.get("rotating", "inner")))
    return None


def angular_velocity(run: Run, facts: GeometryFacts) -> np.ndarray | None:
    """Ω (rad/s) per point: the speed column, else the apparent shear rate divided by k_γ."""
    speed = run.columns.get("angular_velocity")
    if speed is not None:
        return np.abs(speed)
    rate = run.columns.get("shear_rate_apparent", run.columns.get("shear_rate"))
    return None if rate is None else np.abs(rate) / facts.rate_per_speed


def torque(run: Run, facts: GeometryFacts | None) -> tuple[np.ndarray | None, bool]:
    """M (N·m) per point and whether it was measured: the torque column, else the apparent
    stress divided by k_τ (``(None, False)`` without either)."""
    measured = run.columns.get("torque")
    if measured is not None:
        return measured, True
    stress = run.columns.get("shear_stress_apparent", run.columns.get("shear_stress"))
    if stress is None or facts is None:
        return None, False
    return stress / facts.stress_per_torque, False

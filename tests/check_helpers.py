"""Building blocks for the check tests: runs with given columns, geometries and check contexts.

Runs are made directly from columns (SI units) so each check function can be called as the core
calls it; the relations used to make the columns are written out in each test, from the source
named there, not taken from gammadot.
"""

from __future__ import annotations

import math
from typing import Any, Mapping, Sequence

import numpy as np

from gammadot.config import GeometryConfig, StudyConfig, check_settings
from gammadot.datamodel import Run
from gammadot.records import CheckContext, CheckSetting


def make_run(columns: Mapping[str, Sequence[float] | np.ndarray], *, run_id: str = "run-1",
             metadata: Mapping[str, Any] | None = None) -> Run:
    """A run with these point columns (float arrays, SI) and metadata."""
    return Run(run_id=run_id, source_file=f"{run_id}.csv", source_sha256="0" * 64, first_line=1,
               metadata=dict(metadata or {}), columns={k: np.asarray(v, dtype=float) for k, v in columns.items()})


def flow_columns(rate: np.ndarray, stress: np.ndarray, **extra: np.ndarray) -> dict[str, np.ndarray]:
    """Converted-run columns: true = apparent rate and stress, viscosity τ/γ̇, plus ``extra``."""
    rate, stress = np.asarray(rate, dtype=float), np.asarray(stress, dtype=float)
    return {"shear_rate": rate, "shear_stress": stress, "shear_rate_apparent": rate.copy(),
            "shear_stress_apparent": stress.copy(), "viscosity": stress / rate, **extra}


def cone_plate(radius: float = 0.025, angle_deg: float = 1.0) -> GeometryConfig:
    """A cone-plate geometry (radius m, cone angle in degrees)."""
    return GeometryConfig("cone", "cone_plate", {"radius": radius, "cone_angle": math.radians(angle_deg)})


def parallel_plate(radius: float = 0.025, gap: float = 1e-3) -> GeometryConfig:
    """A parallel-plate geometry (radius and gap in m)."""
    return GeometryConfig("plate", "parallel_plate", {"radius": radius, "gap": gap})


def concentric_cylinder(inner: float = 0.0125, outer: float = 0.0125 * 1.0847, length: float = 0.0375,
                        rotating: str = "inner") -> GeometryConfig:
    """A concentric-cylinder geometry (radii and length in m; defaults: the ISO 3219 ratios)."""
    return GeometryConfig("bob", "concentric_cylinder", {"inner_radius": inner, "outer_radius": outer,
                                                         "immersed_length": length, "end_factor": 1.0,
                                                         "rotating": rotating})


def context_for(check_id: str, declared: Sequence[CheckSetting] = (), *, geometry: GeometryConfig | None = None,
                density: float | None = None, limits: Mapping[str, float] | None = None,
                settings: Mapping[str, Any] | None = None) -> CheckContext:
    """The context the core builds for ``check_id``: study settings with declared defaults filled in."""
    config = StudyConfig(title="test", density=density, limits=dict(limits or {}),
                         checks={check_id: dict(settings or {})})
    return CheckContext(study=config, settings=check_settings(config, check_id, declared), geometry=geometry)


def flagged(findings: Sequence[Any]) -> list[int]:
    """Point indices with a finding, sorted."""
    return sorted(f.point_index for f in findings if f.point_index is not None)


def excluded(findings: Sequence[Any]) -> list[int]:
    """Point indices of findings that exclude their point, sorted."""
    return sorted(f.point_index for f in findings if f.point_index is not None and f.exclude)

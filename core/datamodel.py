"""gammadot's data model: quantities, runs and their point columns (SI units).

A :class:`Run` is one measured curve: metadata plus point columns, each column a float64
array in the SI unit of its quantity (temperature in °C). Importers produce raw text
(:class:`~gammadot.records.RawRun`); :mod:`gammadot.columns` resolves it into a ``Run``.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any

from .records import Finding

if TYPE_CHECKING:
    import numpy as np


@dataclass(frozen=True)
class Quantity:
    """A point quantity: contract column name, dimension key (:mod:`gammadot.units`), label."""

    name: str
    dimension: str
    title: str


# Point quantities an importer may deliver, with the dimension each requires.
QUANTITIES: dict[str, Quantity] = {
    q.name: q
    for q in (
        Quantity("time", "time", "Time"),
        Quantity("torque", "torque", "Torque"),
        Quantity("angular_velocity", "angular_velocity", "Angular velocity"),
        Quantity("normal_force", "force", "Normal force"),
        Quantity("temperature", "temperature", "Temperature"),
        Quantity("shear_rate", "frequency", "Shear rate"),
        Quantity("shear_stress", "pressure", "Shear stress"),
        Quantity("viscosity", "viscosity", "Viscosity"),
        Quantity("dial_reading", "dimensionless", "Dial reading"),
    )
}

# Metadata keys every importer recognises (case-insensitive), with the dimension of keys
# that carry a quantity; ``None`` keeps the value as text.
KNOWN_METADATA: dict[str, str | None] = {
    "sample": None,
    "geometry": None,
    "temperature": "temperature",
    "gap": "length",
    "operator": None,
    "date": None,
    "instrument": None,
    "note": None,
    "test_type": None,
}


@dataclass
class Run:
    """One measured flow curve.

    ``columns`` maps a quantity name of :data:`QUANTITIES` to its SI values (one per point);
    ``source_units`` keeps the unit text each column had in the file. ``metadata`` holds the
    recognised keys typed (temperature °C, gap m) and every other key found as text.
    ``findings`` collects import and conversion notes that go to checks.parquet.
    """

    run_id: str
    source_file: str
    source_sha256: str
    first_line: int
    metadata: dict[str, Any]
    columns: dict[str, "np.ndarray"]
    source_units: dict[str, str] = field(default_factory=dict)
    findings: list[Finding] = field(default_factory=list)

    @property
    def n_points(self) -> int:
        """Number of points (rows) in the run."""
        return len(next(iter(self.columns.values()))) if self.columns else 0

    @property
    def sample(self) -> str | None:
        """The sample name from the metadata, if any."""
        value = self.metadata.get("sample")
        return None if value is None else str(value)

    @property
    def temperature(self) -> float | None:
        """Run temperature in °C: the metadata value, else the mean of the temperature column."""
        value = self.metadata.get("temperature")
        if value is not None:
            return float(value)
        column = self.columns.get("temperature")
        if column is not None and len(column):
            import numpy as np

            finite = column[np.isfinite(column)]
            return float(finite.mean()) if len(finite) else None
        return None

"""What the built-in checks read besides the run: sample density, their settings, and how they
write numbers into one-sentence messages."""

from __future__ import annotations

import math
from typing import Any, Sequence

import numpy as np

from gammadot.records import CheckContext, CheckSetting

# kg/m³: used when study.toml gives no [study] density; water-like, the order of magnitude of
# most aqueous products (common practice). Every message that uses it says it was assumed.
DEFAULT_DENSITY = 1000.0

_PREFIXES = ((1e-9, "n"), (1e-6, "µ"), (1e-3, "m"), (1.0, ""))


def sample_density(context: CheckContext) -> tuple[float, str]:
    """ρ (kg/m³) and how to say where it came from, for the message."""
    if context.study.density is not None:
        return float(context.study.density), f"density {num(context.study.density)} kg/m³"
    return DEFAULT_DENSITY, f"density {num(DEFAULT_DENSITY)} kg/m³ assumed: set [study] density"


def setting(context: CheckContext, declared: Sequence[CheckSetting], name: str) -> Any:
    """A setting's value: the study's (already SI), else the declared default.

    The core fills defaults in (``check_settings``); falling back here keeps a check usable
    when called directly with an empty context.
    """
    if name in context.settings:
        return context.settings[name]
    return next(s.default for s in declared if s.name == name)


def num(value: float | None, digits: int = 3) -> str:
    """A number rounded to ``digits`` significant digits, without trailing zeros: plain from
    0.0001 to 999 999 (``6110``, ``0.000363``, ``0.5``), in e-notation beyond."""
    if value is None or not math.isfinite(value):
        return "—"
    rounded = float(f"{value:.{digits}g}")
    if rounded == 0 or not 1e-4 <= abs(rounded) < 1e6:
        return f"{rounded:.{digits}g}"
    return f"{rounded:.10f}".rstrip("0").rstrip(".")


def with_prefix(value: float, unit: str, digits: int = 3) -> str:
    """``1.2e-7, "N·m"`` → ``"0.12 µN·m"``: the largest SI prefix (n, µ, m or none) that
    keeps the number at or above 0.1 (torques span nine decades on one instrument)."""
    magnitude = abs(value)
    factor, prefix = _PREFIXES[0]
    for f, p in _PREFIXES:
        if magnitude >= 0.1 * f:
            factor, prefix = f, p
    return f"{num(value / factor, digits)} {prefix}{unit}"


def percent(fraction: float, digits: int = 2) -> str:
    """``0.0734`` → ``"7.3 %"``."""
    return f"{num(100.0 * fraction, digits)} %"


def usable(*arrays: np.ndarray | None) -> np.ndarray:
    """True where every array is finite and positive (points a flow curve can use)."""
    present = [a for a in arrays if a is not None]
    mask = np.ones(len(present[0]), dtype=bool)
    for a in present:
        with np.errstate(invalid="ignore"):
            mask &= np.isfinite(a) & (a > 0)
    return mask

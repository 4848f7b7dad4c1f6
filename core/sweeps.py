"""How the imposed shear varies over a run: monotonic sweeps and held steps.

A flow curve is measured as one or more sweeps (rate rising, then maybe falling again for a
thixotropy loop), each made of steps where the instrument holds a rate (or a stress) while it
samples. Checks that compare a curve with itself need these pieces: the shape checks look at one
sweep at a time in order of rate, the steady-state check at the time spent in each step. The one
classifier of sweeps for the whole pipeline: the fit stage (``[fit] sweeps``), the runs table's
``test_type``, the built-in checks and analyses, and plugins (``gammadot.sweeps``).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

# Relative change that starts a new step. Flow-curve steps usually differ by 10–30 %
# (5–20 points per decade); the measured rate of a held step scatters by far less than 2 %
# (common practice).
STEP_TOLERANCE = 0.02
# Points a sweep needs to count as one leg of an up-and-down loop: fewer cannot show a curve
# (two points are a line), and a two-point "sweep" is more often a wobble of a measured rate.
MIN_SWEEP_POINTS = 3


@dataclass(frozen=True)
class Sweep:
    """Point indices, in time order, over which the shear rate only rises (``direction`` +1)
    or only falls (-1); the turning point belongs to both sweeps it joins."""

    direction: int
    indices: np.ndarray

    def by_rate(self) -> np.ndarray:
        """The indices ordered by increasing shear rate."""
        return self.indices if self.direction > 0 else self.indices[::-1]


def sweeps(rate: np.ndarray, keep: np.ndarray) -> list[Sweep]:
    """Split the points with ``keep`` (finite, positive) into monotonic sweeps of the rate.

    Points whose rate repeats the previous one within :data:`STEP_TOLERANCE` (samples of one
    held step) stay in the current sweep. At a turn, a held rate's first point ends the sweep
    before and its last point starts the sweep after (a hold between them belongs to neither).
    """
    index = np.flatnonzero(keep)
    if len(index) < 2:
        return [Sweep(1, index)] if len(index) else []
    found: list[Sweep] = []
    start, direction, held_from = 0, 0, 0
    for k in range(1, len(index)):
        step = _direction(rate[index[k - 1]], rate[index[k]])
        if step == 0:
            continue
        if step != direction and direction != 0:
            found.append(Sweep(direction, index[start:held_from + 1]))
            start = k - 1
        direction, held_from = step, k
    found.append(Sweep(direction or 1, index[start:]))
    return found


def loop_legs(rate: np.ndarray, keep: np.ndarray) -> list[Sweep]:
    """The sweeps of at least :data:`MIN_SWEEP_POINTS` points, if both directions are among
    them (the run goes up and down in rate: a hysteresis loop); otherwise an empty list."""
    legs = [s for s in sweeps(rate, keep) if len(s.indices) >= MIN_SWEEP_POINTS]
    return legs if {s.direction for s in legs} == {1, -1} else []


def sweep_points(rate: np.ndarray, keep: np.ndarray, which: str) -> np.ndarray:
    """Boolean mask of the points with ``keep`` that lie on the ``which`` sweeps of a loop.

    ``which`` is ``"all"``, ``"rising"`` or ``"falling"`` (as ``[fit] sweeps``). For a run that
    goes up and down in rate (:func:`loop_legs`), ``"rising"``/``"falling"`` keep only the points
    of the sweeps in that direction (the turning point belongs to both); a run measured in one
    direction, and ``"all"``, keep every point with ``keep``. Why: the two legs of a loop of a
    thixotropic sample are two structural states, and one model describes only one of them.
    """
    keep = np.asarray(keep, dtype=bool)
    if which not in ("all", "rising", "falling"):
        raise ValueError(f"sweeps must be 'all', 'rising' or 'falling', not {which!r}")
    legs = loop_legs(rate, keep) if which != "all" else []
    if not legs:
        return keep.copy()
    direction = 1 if which == "rising" else -1
    chosen = np.zeros(len(keep), dtype=bool)
    for leg in legs:
        if leg.direction == direction:
            chosen[leg.indices] = True
    return chosen


def _direction(before: float, after: float) -> int:
    if abs(after - before) <= STEP_TOLERANCE * abs(before):
        return 0
    return 1 if after > before else -1


def held_steps(values: np.ndarray) -> list[np.ndarray]:
    """Runs of consecutive points holding one value within :data:`STEP_TOLERANCE` (index arrays)."""
    steps: list[list[int]] = []
    for i, value in enumerate(values):
        if steps and abs(value - values[steps[-1][0]]) <= STEP_TOLERANCE * abs(values[steps[-1][0]]):
            steps[-1].append(i)
        else:
            steps.append([i])
    return [np.asarray(s, dtype=int) for s in steps]

"""Serial correlation of a sequence of residuals: the von Neumann ratio, tested by permutation.

The ratio of the mean square successive difference to the sum of squares,

    d = Σ (e_i − e_{i−1})² / Σ e_i²

(von Neumann, Ann. Math. Statist. 12 (1941) 367; the same number as the Durbin–Watson statistic
of regression, Durbin & Watson, Biometrika 37 (1950) 409 — both from memory) is about 2 when the
residuals are in random order and small when neighbours resemble each other: residuals ordered by
shear rate that rise and fall together show a trend the model misses. Unlike the runs test on
signs it uses the residuals' sizes, so it sees a smooth misfit on a short curve, where a run of
signs is too short to be significant.

The p-value is P(d ≤ observed) over random orderings of the same residuals (a permutation test:
no assumption on their distribution), estimated from ``PERMUTATIONS`` orderings drawn with a fixed
seed, so the same residuals always give the same p-value; p = (1 + k)/(N + 1) counts the
observed order among them (Davison & Hinkley, Bootstrap Methods and their Application, CUP 1997,
§4.3 — from memory).
"""

from __future__ import annotations

import functools
from dataclasses import dataclass

import numpy as np

PERMUTATIONS = 3999
SEED = 20261202  # fixed: reproducible tables


@dataclass(frozen=True)
class SerialCorrelation:
    """The von Neumann ratio ``ratio`` of ``n`` residuals and P(d ≤ ratio) under random order."""

    n: int
    ratio: float
    p_value: float


@functools.lru_cache(maxsize=64)
def _orderings(n: int) -> np.ndarray:
    """``PERMUTATIONS`` random orderings of n positions (cached per n: the same for every run)."""
    rng = np.random.default_rng(SEED + n)
    return np.argsort(rng.random((PERMUTATIONS, n)), axis=1)


def von_neumann_test(residuals: np.ndarray) -> SerialCorrelation:
    """The permutation test of the von Neumann ratio of ``residuals`` (in their order)."""
    e = np.asarray(residuals, dtype=float)
    e = e[np.isfinite(e)]
    total = float(e @ e)
    if len(e) < 3 or total == 0.0:
        return SerialCorrelation(len(e), float("nan"), 1.0)
    ratio = float(np.sum(np.diff(e) ** 2)) / total
    shuffled = e[_orderings(len(e))]
    ratios = np.sum(np.diff(shuffled, axis=1) ** 2, axis=1) / total
    at_most = int(np.count_nonzero(ratios <= ratio * (1.0 + 1e-12)))
    return SerialCorrelation(len(e), ratio, (1 + at_most) / (PERMUTATIONS + 1))

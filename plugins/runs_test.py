"""The runs test on a sequence of signs (Wald–Wolfowitz), with the exact distribution.

A *run* is a maximal block of equal signs. If n₊ positive and n₋ negative residuals are in
random order, the number of runs R has the exact distribution (N = n₊ + n₋, C = binomial):

    P(R = 2k)     = 2·C(n₊−1, k−1)·C(n₋−1, k−1) / C(N, n₊)
    P(R = 2k + 1) = [C(n₊−1, k)·C(n₋−1, k−1) + C(n₊−1, k−1)·C(n₋−1, k)] / C(N, n₊)

with mean 1 + 2n₊n₋/N and variance 2n₊n₋(2n₊n₋ − N)/(N²(N − 1)) (Wald & Wolfowitz, Ann. Math.
Statist. 11 (1940) 147, doi:10.1214/aoms/1177731909; Mood, Ann. Math. Statist. 11 (1940) 367 —
DOIs from memory). Too *few* runs means neighbouring residuals share their sign: the model
misses a systematic trend. Integer arithmetic keeps the probabilities exact for any N.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np


@dataclass(frozen=True)
class RunsTest:
    """Outcome of the runs test: counts, the observed and expected number of runs, and the
    lower-tail probability P(R ≤ observed) under random order."""

    n_positive: int
    n_negative: int
    runs: int
    expected: float
    p_value: float


def count_runs(signs: np.ndarray) -> int:
    """Number of maximal blocks of equal sign in ``signs`` (values ±1)."""
    return int(1 + np.count_nonzero(signs[1:] != signs[:-1])) if len(signs) else 0


def runs_probability(n_positive: int, n_negative: int, runs: int) -> tuple[int, int]:
    """P(R = runs) as an exact fraction (numerator, denominator)."""
    total = math.comb(n_positive + n_negative, n_positive)
    if n_positive == 0 or n_negative == 0:  # one sign only: a single run, surely
        return (total if runs == 1 else 0), total
    k, odd = divmod(runs, 2)
    if not odd:
        return 2 * _comb(n_positive - 1, k - 1) * _comb(n_negative - 1, k - 1), total
    return (_comb(n_positive - 1, k) * _comb(n_negative - 1, k - 1)
            + _comb(n_positive - 1, k - 1) * _comb(n_negative - 1, k)), total


def _comb(n: int, k: int) -> int:
    return math.comb(n, k) if 0 <= k <= n else 0


def runs_test(values: np.ndarray) -> RunsTest:
    """The runs test on the signs of ``values`` (zeros dropped), lower tail P(R ≤ observed)."""
    signs = np.sign(values[values != 0])
    n_pos, n_neg = int(np.count_nonzero(signs > 0)), int(np.count_nonzero(signs < 0))
    observed = count_runs(signs)
    n = n_pos + n_neg
    if n == 0:
        return RunsTest(0, 0, 0, 0.0, 1.0)
    numerator = sum(runs_probability(n_pos, n_neg, r)[0] for r in range(1, observed + 1))
    p_value = numerator / math.comb(n, n_pos)  # exact integers, one rounding
    return RunsTest(n_pos, n_neg, observed, 1.0 + 2.0 * n_pos * n_neg / n, p_value)

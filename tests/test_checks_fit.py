"""Fit-adequacy check: the runs test on residual signs, and the after-fit check in a real study.

Oracles: the distribution of the number of runs obtained by enumerating every arrangement of
n₊ plus and n₋ minus signs (brute force), the mean and variance of Wald & Wolfowitz (Ann. Math.
Statist. 11 (1940) 147, from memory), and curves whose adequate model is known: Carreau data
(η0 = 10 Pa·s, λ = 1 s, n = 0.4; Carreau, Trans. Soc. Rheol. 16 (1972) 99) fitted by a power law
leave long runs of one sign, Newtonian data fitted by a constant viscosity do not.
"""

from __future__ import annotations

import itertools
import math
from collections import Counter
from pathlib import Path

import numpy as np
import pytest

from gammadot.pipeline import process_study
from gammadot.plugins.runs_test import count_runs, runs_probability, runs_test

from support import write_export


def _enumerated(n_pos: int, n_neg: int) -> Counter:
    """How many arrangements of the signs have each number of runs (all C(N, n₊) of them)."""
    counts: Counter = Counter()
    for positions in itertools.combinations(range(n_pos + n_neg), n_pos):
        signs = -np.ones(n_pos + n_neg)
        signs[list(positions)] = 1
        counts[count_runs(signs)] += 1
    return counts


@pytest.mark.parametrize(("n_pos", "n_neg"), [(1, 1), (2, 2), (3, 5), (6, 6), (7, 4), (8, 9)])
def test_exact_runs_distribution_matches_enumeration(n_pos: int, n_neg: int) -> None:
    counts = _enumerated(n_pos, n_neg)
    total = math.comb(n_pos + n_neg, n_pos)
    for runs in range(1, n_pos + n_neg + 1):
        numerator, denominator = runs_probability(n_pos, n_neg, runs)
        assert denominator == total and numerator == counts.get(runs, 0)


@pytest.mark.parametrize(("n_pos", "n_neg"), [(10, 10), (25, 14), (40, 61)])
def test_runs_distribution_has_the_wald_wolfowitz_mean_and_variance(n_pos: int, n_neg: int) -> None:
    n = n_pos + n_neg
    runs = np.arange(1, n + 1)
    p = np.array([runs_probability(n_pos, n_neg, r)[0] for r in runs], dtype=float) / math.comb(n, n_pos)
    mean = 1 + 2 * n_pos * n_neg / n
    variance = 2 * n_pos * n_neg * (2 * n_pos * n_neg - n) / (n**2 * (n - 1))
    assert p.sum() == pytest.approx(1.0, abs=1e-12)
    assert (p * runs).sum() == pytest.approx(mean, rel=1e-12)
    assert (p * (runs - mean) ** 2).sum() == pytest.approx(variance, rel=1e-10)


def test_lower_tail_probability_of_a_blocky_sequence() -> None:
    # ++++++ ------ ++++++: 3 runs of 18 signs (12 plus, 6 minus); tail counted by enumeration
    signs = np.array([1.0] * 6 + [-1.0] * 6 + [1.0] * 6)
    result = runs_test(signs)
    counts = _enumerated(12, 6)
    assert result.runs == 3
    assert result.p_value == pytest.approx((counts[2] + counts[3]) / math.comb(18, 12), rel=1e-12)
    assert result.expected == pytest.approx(1 + 2 * 12 * 6 / 18)


def _study(tmp_path: Path, models: str, viscosity) -> Path:
    rate = np.geomspace(0.05, 200.0, 24)
    noise = 1 + 0.01 * np.random.default_rng(11).standard_normal(rate.size)
    (tmp_path / "study.toml").write_text(f'[fit]\nmodels = [{models}]\n', encoding="utf-8")
    write_export(tmp_path / "run.csv", {"sample": "S-1", "temperature": "25 °C"},
                 ["Shear rate [1/s]", "Viscosity [Pa·s]"],
                 [[g, v] for g, v in zip(rate, viscosity(rate) * noise)])
    return tmp_path


def _fit_findings(result) -> list:
    return [f for f in result.runs[0].findings if f.check == "fit_residuals"]


def test_power_law_fitted_to_carreau_data_has_structured_residuals(tmp_path: Path, registry) -> None:
    study = _study(tmp_path, '"power_law"', lambda g: 10 * (1 + g**2) ** ((0.4 - 1) / 2))
    result = process_study(study, registry)
    (finding,) = _fit_findings(result)
    assert finding.severity == "warning" and finding.point_index is None
    assert finding.value < 0.01 and "power_law" in finding.message
    assert not result.runs[0].excluded.any()  # after-fit findings never exclude


def test_adequate_model_has_no_structured_residuals(tmp_path: Path, registry) -> None:
    study = _study(tmp_path, '"newtonian"', lambda g: np.full_like(g, 0.35))
    assert _fit_findings(process_study(study, registry)) == []

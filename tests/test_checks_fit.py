"""Fit-adequacy check: the runs test on residual signs, the von Neumann ratio of successive
differences tested by permutation, and the after-fit check in a real study.

Oracles: the distribution of the number of runs obtained by enumerating every arrangement of
n₊ plus and n₋ minus signs (brute force), the mean and variance of Wald & Wolfowitz (Ann. Math.
Statist. 11 (1940) 147, from memory), and curves whose adequate model is known: Carreau data
(η0 = 10 Pa·s, λ = 1 s, n = 0.4; Carreau, Trans. Soc. Rheol. 16 (1972) 99) fitted by a power law
leave long runs of one sign, Newtonian data fitted by a constant viscosity do not. The permutation
test is checked against the exact distribution over all orderings (brute force) and, under random
order, against the uniform distribution its p-value must have.
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
from gammadot.plugins.serial_correlation import PERMUTATIONS, von_neumann_test

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



# ------------------------------------------------------- von Neumann ratio, by permutation


def test_von_neumann_ratio_of_simple_sequences() -> None:
    """d = Σ(e_i − e_{i−1})²/Σe_i² by hand: alternating signs give 3·4/4 = 3 for four values; a
    constant-sign step 1, 1, 1, −1 gives 4/4 = 1."""
    assert von_neumann_test(np.array([1.0, -1.0, 1.0, -1.0])).ratio == pytest.approx(3.0)
    assert von_neumann_test(np.array([1.0, 1.0, 1.0, -1.0])).ratio == pytest.approx(1.0)


def test_permutation_p_value_matches_the_exact_distribution_over_all_orderings() -> None:
    """For seven residuals the exact P(d ≤ observed) over all 7! = 5040 orderings (brute force)
    and the Monte Carlo estimate from 3999 orderings agree within four binomial standard errors."""
    residual = np.array([0.8, 0.5, 0.3, -0.1, -0.4, -0.6, 0.2])  # a trend: small ratio
    observed = float(np.sum(np.diff(residual) ** 2) / np.sum(residual**2))
    ratios = [np.sum(np.diff(residual[list(p)]) ** 2) for p in itertools.permutations(range(7))]
    exact = float(np.mean(np.array(ratios) / np.sum(residual**2) <= observed * (1 + 1e-12)))
    result = von_neumann_test(residual)
    assert result.ratio == pytest.approx(observed)
    assert 0.0 < exact < 0.2
    assert abs(result.p_value - exact) < 4 * math.sqrt(exact * (1 - exact) / PERMUTATIONS) + 1 / PERMUTATIONS


def test_permutation_p_value_is_uniform_for_residuals_in_random_order() -> None:
    """Under random order a test's p-value is uniform: of 400 samples of 16 independent normal
    residuals, the share with p < 0.05 lies within the 99.9 % binomial range of 5 % (statistical
    fact), and so does the share with p < 0.5."""
    rng = np.random.default_rng(7)
    p_values = np.array([von_neumann_test(rng.standard_normal(16)).p_value for _ in range(400)])
    for level in (0.05, 0.5):
        share = float(np.mean(p_values < level))
        assert abs(share - level) < 3.3 * math.sqrt(level * (1 - level) / 400), (level, share)


def test_a_short_curve_with_a_smooth_misfit_is_found_by_the_serial_test(tmp_path: Path, registry) -> None:
    """Eleven points of Carreau data (η0 = 10 Pa·s, λ = 1 s, n = 0.4) fitted by a power law only:
    on so short a curve the residual signs' three runs are not significant (runs test p ≈ 0.024,
    above alpha/2), but neighbouring residuals move together, which the von Neumann ratio sees."""
    rate = np.geomspace(0.05, 200.0, 11)
    noise = 1 + 0.01 * np.random.default_rng(11).standard_normal(rate.size)
    (tmp_path / "study.toml").write_text('[fit]\nmodels = ["power_law"]\n', encoding="utf-8")
    write_export(tmp_path / "run.csv", {"sample": "S-1"}, ["Shear rate [1/s]", "Viscosity [Pa·s]"],
                 [[g, v] for g, v in zip(rate, 10 * (1 + rate**2) ** ((0.4 - 1) / 2) * noise)])
    (finding,) = _fit_findings(process_study(tmp_path, registry))
    assert "von Neumann ratio" in finding.message and "runs test" not in finding.message
    assert finding.value < 0.005

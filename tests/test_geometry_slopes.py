"""The local log-slope estimator (gammadot.slopes): exact on power laws, bounded with noise,
sensible with three points, at the ends and on up/down loops.

Oracles: the slope of y = C·xᵖ in log–log space is p (calculus); the Carreau form
τ = η0·γ̇·(1 + (λγ̇)²)^((n−1)/2) (Carreau, Trans. Soc. Rheol. 16 (1972) 99; REFERENCE.md §6) has
the analytic log slope 1 + (n − 1)(λγ̇)²/(1 + (λγ̇)²).
"""

from __future__ import annotations

import numpy as np
import pytest

from gammadot.slopes import log_slopes, monotone_branches


def carreau(rate: np.ndarray, n: float = 0.4) -> np.ndarray:
    return rate * (1.0 + rate**2) ** ((n - 1.0) / 2.0)


def carreau_log_slope(rate: np.ndarray, n: float = 0.4) -> np.ndarray:
    """d ln τ / d ln γ̇ of the Carreau form with λ = 1 s (analytic derivative)."""
    return 1.0 + (n - 1.0) * rate**2 / (1.0 + rate**2)


@pytest.mark.parametrize("points", [2, 3, 4, 5, 7, 12, 40])
@pytest.mark.parametrize("power", [-0.6, 0.2, 1.0, 1.5])
def test_exact_on_power_laws_at_every_point(points: int, power: float) -> None:
    x = np.geomspace(0.05, 300.0, points)
    slopes = log_slopes(x, 3.7 * x**power)
    assert np.all(np.isfinite(slopes))
    assert slopes == pytest.approx(np.full(points, power), abs=1e-9)


def test_descending_and_irregular_spacing() -> None:
    x = np.array([600.0, 300.0, 200.0, 100.0, 6.0, 3.0])  # the six dial speeds, read downwards
    assert log_slopes(x, 2.0 * x**0.45) == pytest.approx(np.full(6, 0.45), abs=1e-9)


def test_up_down_loop_branches_are_separate() -> None:
    """A loop measured up (y = x^0.5) then down (y = 2·x^0.7): each branch keeps its own slope."""
    up = np.geomspace(0.1, 100.0, 9)
    down = up[::-1][1:]
    x = np.concatenate([up, down])
    y = np.concatenate([up**0.5, 2.0 * down**0.7])
    slopes = log_slopes(x, y)
    assert slopes[:9] == pytest.approx(np.full(9, 0.5), abs=1e-9)  # turning point belongs to the up branch
    assert slopes[9:] == pytest.approx(np.full(8, 0.7), abs=1e-9)
    assert [len(b) for b in monotone_branches(x)] == [9, 8]


def test_repeated_speeds_are_averaged() -> None:
    x = np.array([1.0, 2.0, 2.0, 4.0, 8.0, 16.0])
    y = x**0.8 * np.array([1.0, 1.01, 0.99, 1.0, 1.0, 1.0])  # the two readings at x = 2 straddle the line
    assert log_slopes(x, y)[0] == pytest.approx(0.8, abs=0.02)


def test_unusable_points_are_ignored() -> None:
    x = np.geomspace(1.0, 1000.0, 10)
    y = 5.0 * x**0.3
    x[2], y[5], y[7] = np.nan, 0.0, -1.0
    slopes = log_slopes(x, y)
    assert np.isnan(slopes[[2, 5, 7]]).all()
    assert np.delete(slopes, [2, 5, 7]) == pytest.approx(np.full(7, 0.3), abs=1e-9)


def test_too_few_points() -> None:
    assert np.isnan(log_slopes(np.array([1.0]), np.array([2.0]))).all()
    assert np.isnan(log_slopes(np.array([1.0, 1.0]), np.array([2.0, 3.0]))).all()  # no spread in x
    assert log_slopes(np.array([1.0, 10.0]), np.array([2.0, 20.0])) == pytest.approx([1.0, 1.0])


def test_three_points_on_a_curve_give_a_slope_inside_the_true_range() -> None:
    """With three points the estimator fits one straight line: its slope lies between the true
    end slopes of the Carreau curve (the mean-value theorem makes that the only sensible claim)."""
    x = np.array([0.1, 1.0, 10.0])
    slopes = log_slopes(x, carreau(x))
    true = carreau_log_slope(x)
    assert np.all((slopes <= true.max()) & (slopes >= true.min()))


@pytest.mark.parametrize("points, bound", [(12, 0.03), (20, 0.012), (40, 0.002)])
def test_curved_data_including_the_ends(points: int, bound: float) -> None:
    """Noise-free Carreau curve over four decades: the error at every point, the first and last
    included, shrinks with the point density (bounds: measured error × about 1.2)."""
    x = np.geomspace(0.01, 100.0, points)
    error = np.abs(log_slopes(x, carreau(x)) - carreau_log_slope(x))
    assert error.max() < bound


def test_error_with_one_percent_noise_is_bounded() -> None:
    """Power law (slope 0.6) with 1 % relative noise, 20 points over three decades, 40 seeds.

    Scale of comparison: a two-point slope across one decade with 1 % noise has a standard
    error of 0.01·√2/ln 10 ≈ 0.006. The smoother's typical worst point is well below that,
    and no point of any curve is off by more than 0.05 (≈ 8 such standard errors).
    """
    rng = np.random.default_rng(20261201)
    x = np.geomspace(0.1, 100.0, 20)
    worst = [np.abs(log_slopes(x, x**0.6 * (1 + 0.01 * rng.standard_normal(20))) - 0.6).max()
             for _ in range(40)]
    assert np.median(worst) < 0.006
    assert max(worst) < 0.05


def test_slopes_do_not_depend_on_units() -> None:
    """Scaling x or y (a unit change) leaves d ln y / d ln x unchanged."""
    rng = np.random.default_rng(3)
    x = np.geomspace(0.1, 100.0, 15)
    y = carreau(x) * (1 + 0.01 * rng.standard_normal(15))
    assert log_slopes(60.0 * x, 1e6 * y) == pytest.approx(log_slopes(x, y), abs=1e-9)

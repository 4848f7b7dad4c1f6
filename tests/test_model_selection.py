"""Model choice: which model the selection rule picks for curves of known origin.

Selection study: for each of the nine models, ``CURVES_PER_MODEL`` synthetic curves
(tests/flow_curves.py: parameters across the space, every parameter visible in the range,
1–2 % multiplicative noise, seeded) go through the run-level fit stage
(``gammadot.processing.fit_run``: all nine models, AICc with the parsimony rule). The confusion
matrix (generating model × selected model) is printed (``pytest -s``) and shown on failure.

Expectation: the generating model is selected in at least 90 % of all curves and in at least
70 % of each model's curves. Off-diagonal picks are expected where the data allow it: a
Newtonian curve whose noise happens to favour a second parameter by more than ΔAICc = 2, a
Bingham plastic that Herschel–Bulkley matches with n ≈ 1 (Burnham & Anderson 2002, §2.6:
about one in six such pairs when the extra parameter is spurious, by AIC's design).
"""

from __future__ import annotations

import math

import numpy as np

from gammadot.config import StudyConfig
from gammadot.datamodel import Run
from gammadot.model_selection import AICC_TOLERANCE, information_criteria, select_model
from gammadot.processing import fit_run

from flow_curves import GENERATORS, RATES, noisy

CURVES_PER_MODEL = 10
OVERALL, PER_MODEL = 0.90, 0.70


def _run(rate: np.ndarray, viscosity: np.ndarray) -> Run:
    return Run(run_id="synthetic", source_file="synthetic.csv", source_sha256="0" * 64, first_line=1,
               metadata={}, columns={"shear_rate": rate, "viscosity": viscosity, "shear_stress": viscosity * rate})


def _matrix_text(matrix: dict[str, dict[str, int]]) -> str:
    ids = list(GENERATORS)
    short = {i: i.replace("herschel_bulkley", "HB").replace("carreau_yasuda", "CY")[:9] for i in ids}
    lines = ["generating \\ selected " + " ".join(f"{short[i]:>9s}" for i in ids)]
    for gen in ids:
        lines.append(f"{gen:22s}" + " ".join(f"{matrix[gen].get(sel, 0):9d}" for sel in ids))
    return "\n".join(lines)


def test_selection_picks_the_generating_model(registry) -> None:
    rng = np.random.default_rng(20261201)
    config = StudyConfig(title="selection study")
    excluded = np.zeros(len(RATES), dtype=bool)
    matrix: dict[str, dict[str, int]] = {g: {} for g in GENERATORS}
    for gen, (size, make) in GENERATORS.items():
        model = registry.models[gen].record
        for trial in range(CURVES_PER_MODEL):
            truth = make(rng.uniform(size=size))
            values = noisy(model.function(RATES, **truth), rng.uniform(0.01, 0.02), seed=int(rng.integers(2**32)))
            viscosity = values / RATES if model.target == "shear_stress" else values
            fits = fit_run(_run(RATES, viscosity), excluded, config, registry)
            (chosen,) = [f.model for f in fits if f.selected]
            matrix[gen][chosen] = matrix[gen].get(chosen, 0) + 1
    text = _matrix_text(matrix)
    print("\nselection study, generating model (rows) vs selected model (columns):\n" + text)
    diagonal = sum(matrix[g].get(g, 0) for g in GENERATORS)
    total = CURVES_PER_MODEL * len(GENERATORS)
    assert diagonal >= OVERALL * total, text
    assert all(matrix[g].get(g, 0) >= PER_MODEL * CURVES_PER_MODEL for g in GENERATORS), text


def test_information_criteria_match_their_definitions() -> None:
    """AICc and BIC from Burnham & Anderson (2002) eq. 2.1/§2.4 and Schwarz (1978), written out
    by hand for n = 20 points, k = 3 parameters (K = 4 with the variance), RSS = 0.05."""
    n, k, rss = 20, 3, 0.05
    aicc, bic = information_criteria(rss, n, k)
    assert aicc == 20 * math.log(0.05 / 20) + 2 * 4 + 2 * 4 * 5 / (20 - 4 - 1)
    assert bic == 20 * math.log(0.05 / 20) + 4 * math.log(20)
    assert information_criteria(rss, 5, 3)[0] == math.inf  # n ≤ K + 1: AICc undefined


def test_parsimony_rule_prefers_fewer_parameters_within_two_aicc_units() -> None:
    from gammadot.fitting import FitResult

    def fit(model: str, aicc: float) -> FitResult:
        return FitResult(model, True, 30, aicc, aicc, 0.01, "converged", 0.1, 100.0)

    counts = {"carreau": 4, "carreau_yasuda": 5, "cross": 4, "power_law": 2}
    fits = [fit("carreau_yasuda", -200.0), fit("carreau", -200.0 + AICC_TOLERANCE), fit("cross", -199.0),
            fit("power_law", -150.0)]
    chosen = [f.model for f in select_model(fits, counts) if f.selected]
    assert chosen == ["cross"]  # 4 parameters, the lower AICc of the two within 2 of the best
    fits[2] = fit("cross", -197.9)
    assert [f.model for f in select_model(fits, counts) if f.selected] == ["carreau"]

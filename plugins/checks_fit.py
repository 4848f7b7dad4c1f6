"""Built-in after-fit check ``fit_residuals``: residuals of the selected model that follow a
pattern instead of scattering at random.

A model that describes the data leaves residuals that, ordered by shear rate, scatter like
independent draws; a model that misses the curve's shape leaves long stretches above and below.
The residuals are those the fit minimised, r = ln f(γ̇) − ln y, over the points that were
fitted, and two tests look at them:

- the runs test on their signs (:mod:`gammadot.plugins.runs_test`, Wald & Wolfowitz 1940):
  too few runs of one sign;
- the von Neumann ratio of successive differences, by permutation
  (:mod:`gammadot.plugins.serial_correlation`): neighbours that resemble each other. It uses
  the residuals' sizes, so it also sees a smooth misfit of a short curve (12–16 points), where
  runs of signs are too short to be significant.

Each test runs at ``alpha``/2 (Bonferroni), so that with an adequate model about ``alpha`` of
the runs (default 1 %: common practice, 1–5 %) are flagged by either. A flagged run gets one
run-level warning with the numbers of the test(s) that fired; ``value`` is the smaller p-value.
Points are not touched.
"""

from __future__ import annotations

import numpy as np

from gammadot.datamodel import Run
from gammadot.hookspecs import hookimpl
from gammadot.records import Check, CheckContext, CheckSetting, Finding

from .check_inputs import num, setting, usable
from .runs_test import runs_test
from .serial_correlation import von_neumann_test

CHECK_ID = "fit_residuals"

SETTINGS = (
    CheckSetting("alpha", "dimensionless", 0.01,
                 "significance level of the two residual tests together (runs of signs, serial correlation; "
                 "each at alpha/2)", minimum=0.0),
)


def log_residuals(run: Run, context: CheckContext) -> tuple[str, np.ndarray] | None:
    """(model id, ln f − ln y ordered by shear rate) for the selected fit, over fitted points."""
    fit = next((f for f in context.fits if getattr(f, "selected", False)), None)
    if fit is None or fit.model not in context.models:
        return None
    model = context.models[fit.model]
    params = {p.name: p.value for p in fit.parameters}
    rate, target = run.columns.get("shear_rate"), run.columns.get(model.target)
    if rate is None or target is None or any(v is None for v in params.values()):
        return None
    keep = usable(rate, target)
    if context.excluded is not None:
        keep &= ~context.excluded
    order = np.flatnonzero(keep)[np.argsort(rate[keep], kind="stable")]
    with np.errstate(divide="ignore", invalid="ignore"):
        residual = np.log(model.function(rate[order], **params)) - np.log(target[order])
    return fit.model, residual[np.isfinite(residual)]


def find_structured_residuals(run: Run, context: CheckContext) -> list[Finding]:
    """A run-level warning when the selected model's residuals, ordered by shear rate, come in
    too few runs of one sign or are serially correlated (module docstring)."""
    found = log_residuals(run, context)
    if found is None:
        return []
    model_id, residual = found
    alpha = float(setting(context, SETTINGS, "alpha"))
    level = alpha / 2.0  # Bonferroni over the two tests
    runs, serial = runs_test(residual), von_neumann_test(residual)
    reasons = []
    if runs.p_value < level:
        reasons.append(f"their signs come in {runs.runs} runs where about {num(runs.expected, 3)} are expected for "
                       f"random scatter (runs test, p = {num(runs.p_value, 2)})")
    if serial.p_value < level:
        reasons.append(f"neighbouring residuals move together: the ratio of successive differences is "
                       f"{num(serial.ratio, 3)} where about 2 is expected for random scatter (von Neumann ratio, "
                       f"permutation p = {num(serial.p_value, 2)})")
    if not reasons:
        return []
    return [Finding(
        CHECK_ID, "warning",
        f"the residuals of the selected model {model_id} ({len(residual)} points ordered by shear rate) follow a "
        f"pattern: {'; and '.join(reasons)}, each test at {num(level, 2)} (= alpha/2), so the model misses a "
        "systematic trend and its parameters describe the curve only roughly",
        value=min(runs.p_value, serial.p_value), unit="1")]


FIT_RESIDUALS = Check(
    id=CHECK_ID,
    title="Structured residuals of the selected model",
    severity="warning",
    run=find_structured_residuals,
    after_fit=True,
    settings=SETTINGS,
    reference=("runs test on residual signs: Wald & Wolfowitz, Ann. Math. Statist. 11 (1940) 147, "
               "doi:10.1214/aoms/1177731909 (from memory); von Neumann ratio of successive differences, "
               "Ann. Math. Statist. 12 (1941) 367 (from memory), tested by permutation"),
)


@hookimpl
def gammadot_checks() -> list[Check]:
    """Provide the fit-residuals check."""
    return [FIT_RESIDUALS]

"""Built-in after-fit check ``fit_residuals``: residuals of the selected model that follow a
pattern instead of scattering at random.

A model that describes the data leaves residuals whose signs, ordered by shear rate, alternate
like coin tosses; a model that misses the curve's shape leaves long stretches above and below.
The residuals are those the fit minimised, r = ln f(γ̇) − ln y, over the points that were
fitted; their signs go through the runs test (:mod:`gammadot.plugins.runs_test`, Wald &
Wolfowitz 1940). When too few runs are seen for random order at the significance level
``alpha`` (default 1 %, so that about one run in a hundred with an adequate model is flagged —
common practice: 1–5 %), a run-level warning says so with the numbers. Points are not touched.
"""

from __future__ import annotations

import numpy as np

from gammadot.datamodel import Run
from gammadot.hookspecs import hookimpl
from gammadot.records import Check, CheckContext, CheckSetting, Finding

from .check_inputs import num, setting, usable
from .runs_test import runs_test

CHECK_ID = "fit_residuals"

SETTINGS = (
    CheckSetting("alpha", "dimensionless", 0.01,
                 "significance level of the runs test on the selected model's residual signs", minimum=0.0),
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
    """A run-level warning when the selected model's residual signs come in too few runs."""
    found = log_residuals(run, context)
    if found is None:
        return []
    model_id, residual = found
    result = runs_test(residual)
    alpha = float(setting(context, SETTINGS, "alpha"))
    if result.p_value >= alpha:
        return []
    return [Finding(
        CHECK_ID, "warning",
        f"the residuals of the selected model {model_id} ({len(residual)} points ordered by shear rate) come in "
        f"{result.runs} runs of one sign where about {num(result.expected, 3)} are expected for random scatter "
        f"(runs test, p = {num(result.p_value, 2)} < {num(alpha, 2)}), so the model misses a systematic trend "
        "and its parameters describe the curve only roughly",
        value=result.p_value, unit="1")]


FIT_RESIDUALS = Check(
    id=CHECK_ID,
    title="Structured residuals of the selected model",
    severity="warning",
    run=find_structured_residuals,
    after_fit=True,
    settings=SETTINGS,
    reference=("runs test on residual signs: Wald & Wolfowitz, Ann. Math. Statist. 11 (1940) 147, "
               "doi:10.1214/aoms/1177731909 (from memory)"),
)


@hookimpl
def gammadot_checks() -> list[Check]:
    """Provide the fit-residuals check."""
    return [FIT_RESIDUALS]

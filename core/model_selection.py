"""Information criteria and the choice of model for a run.

Criteria from the residual sum of squares RSS of n points in the fit's objective (log space by
default), with K = k + 1 estimated quantities (k model parameters plus the residual variance;
Burnham & Anderson, *Model Selection and Multimodel Inference*, 2nd ed. 2002, §2.2 and eq. 2.1):

- AICc = n ln(RSS/n) + 2K + 2K(K + 1)/(n − K − 1)   (Hurvich & Tsai, Biometrika 76 (1989) 297,
  doi:10.1093/biomet/76.2.297); undefined (∞) when n ≤ K + 1.
- BIC  = n ln(RSS/n) + K ln n   (Schwarz, Ann. Stat. 6 (1978) 461, doi:10.1214/aos/1176344136).

Selection rule (the most parsimonious model the data support):

1. candidates are the converged fits with a finite AICc that the data *support*: each parameter
   identified, or not identified only because it is consistent with 0 where 0 is the simpler
   model (no yield stress, no upper plateau; :mod:`gammadot.identifiability`). A model with a
   parameter the data cannot fix otherwise (η0 and λ of a curve without a lower plateau) is
   over-parameterised for the run, however low its AICc. When no fit is supported, all
   converged fits with a finite AICc are candidates (and the parameters say what is missing);
2. take the lowest AICc among the candidates; every candidate within ``AICC_TOLERANCE`` = 2 of
   it has comparable support (Burnham & Anderson §2.6), and of those the one with the fewest
   parameters is selected (on a tie in parameter count, the lower AICc).

Nested models therefore give way to the simpler one unless the extra parameter is clearly
needed: Herschel–Bulkley with n ≈ 1 → Bingham, Carreau–Yasuda with a ≈ 2 → Carreau, power law
with n ≈ 1 → Newtonian. DOIs as recalled, not checked here.
"""

from __future__ import annotations

import math
from dataclasses import replace
from typing import TYPE_CHECKING, Mapping, Sequence

if TYPE_CHECKING:
    from .fitting import FitResult

AICC_TOLERANCE = 2.0
RSS_FLOOR = 1e-300  # an exact fit (RSS = 0) would give −∞


def information_criteria(rss: float, n: int, k: int) -> tuple[float, float]:
    """(AICc, BIC) for k fitted model parameters; AICc is +inf when n ≤ k + 2."""
    big_k = k + 1
    log_likelihood_term = n * math.log(max(rss, RSS_FLOOR) / n)
    bic = log_likelihood_term + big_k * math.log(n)
    if n - big_k - 1 <= 0:
        return math.inf, bic
    aicc = log_likelihood_term + 2 * big_k + 2 * big_k * (big_k + 1) / (n - big_k - 1)
    return aicc, bic


def select_model(fits: Sequence["FitResult"], n_parameters: Mapping[str, int]) -> list["FitResult"]:
    """Mark the selected fit (rule in the module docstring); return the fits in the same order."""
    usable = [f for f in fits if f.success and f.aicc is not None and math.isfinite(f.aicc)]
    if not usable:
        return list(fits)
    usable = [f for f in usable if f.supported] or usable
    best = min(f.aicc for f in usable)  # type: ignore[type-var]
    close = [f for f in usable if f.aicc <= best + AICC_TOLERANCE]  # type: ignore[operator]
    chosen = min(close, key=lambda f: (n_parameters[f.model], f.aicc))
    return [replace(f, selected=f is chosen) for f in fits]

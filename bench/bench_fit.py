"""Benchmark: gammadot's fitting engine against a bare scipy.optimize.least_squares loop.

Run: `python bench/bench_fit.py` (from the repository, with gammadot installed).

Measured, each as a ratio to the bare loop timed in the same run:
1. fits per second of ``carreau_yasuda`` and ``herschel_bulkley`` on 40 points
   (``gammadot.fitting.fit_model``: data-driven starts with the global stage, the bounded
   Levenberg–Marquardt fit, covariance, identifiability, AICc/BIC);
2. the fit stage of a 200-run study (25 points per run, every applicable model: the nine
   built-ins) through ``gammadot.processing.fit_run``, which also selects the model.

The bare loop is ``least_squares(residual, p0, jac=analytic, method="lm")`` on the same
log-space residuals from the same starting values (the models' own ``guess`` output, computed
before the clock starts), unbounded, with nothing computed after the fit. Timings alternate
between the two sides and the median of several repeats is reported (CPU time of this
process, so other load on the machine matters less).

Measured 2026-12-01, 2 cores shared with other work (load average about 3), 3 runs each, ratio
gammadot / bare loop (carreau_yasuda; herschel_bulkley; 200-run fit stage):
- before the residual/Jacobian caches: 1.59, 1.56, 1.63; 1.70, 1.63, 1.60; 1.28, 1.31, 1.24
- after (MINPACK's own residual at the solution, no repeated evaluation of the residual,
  Jacobian or parameter transform at the same point, bound flags and covariance computed
  once): 1.46, 1.46, 1.30; 1.46, 1.55, 1.58; 1.03, 1.48, 1.05 — the last two runs shared the
  cores with a full test run; three more runs after it: 1.57, 1.23, 1.28; 1.04, 1.75, 1.55;
  0.85, 1.40, 1.26. On this shared machine a single run scatters by ±0.3: compare medians
  (after, six runs: carreau_yasuda ≈ 1.38, herschel_bulkley ≈ 1.55).

Measured 2026-12-02, same machine, load average 2.2–2.7 (other test runs alongside), after the
covariance from the inverse of the column-scaled normal matrix when its variance inflation
factors are below 10⁴ (SVD only otherwise), and after moving off scipy.linalg's LAPACK (its
OpenBLAS spread a 3×3 Cholesky over threads: fit stage 2.4× the bare loop under load); three
runs: carreau_yasuda 1.23, 1.27, 1.26; herschel_bulkley 1.24, 1.19, 1.25; 200-run fit stage
1.05, 1.12, 1.14 (2.44–2.47 s).
"""

from __future__ import annotations

import statistics
import time
from typing import Callable

import numpy as np
from scipy.optimize import least_squares

from gammadot.config import StudyConfig
from gammadot.datamodel import Run
from gammadot.fitting import fit_model
from gammadot.plugin_manager import build_plugin_manager
from gammadot.processing import fit_run
from gammadot.records import Model
from gammadot.registry import build_registry

REPEATS = 5
CURVES = 200


def _curves(model: Model, truths: list[dict[str, float]], rate: np.ndarray, seed: int) -> list[np.ndarray]:
    rng = np.random.default_rng(seed)
    return [model.function(rate, **p) * (1 + 0.015 * rng.standard_normal(rate.shape)) for p in truths]


def _bare_problem(model: Model, rate: np.ndarray, values: np.ndarray):
    """Residual ln f − ln y and its analytic Jacobian (∂f/∂p)/f, unbounded parameters."""
    names = [p.name for p in model.parameters]
    target = np.log(values)

    def residual(p):
        return np.log(model.function(rate, **dict(zip(names, p)))) - target

    def jacobian(p):
        params = dict(zip(names, p))
        parts = model.jacobian(rate, **params)
        return np.column_stack([np.broadcast_to(parts[n], rate.shape) for n in names]) / model.function(rate, **params)[:, None]

    return residual, jacobian


def _starts(model: Model, rate: np.ndarray, values: np.ndarray) -> np.ndarray:
    start = model.guess(rate, values)
    start = start if isinstance(start, dict) else start[0]
    return np.array([start[p.name] for p in model.parameters])


def _bare_loop(data: list[tuple[Model, np.ndarray, np.ndarray]]) -> Callable[[], None]:
    """The reference: ``least_squares(method="lm")`` with the analytic Jacobian on each (model,
    rates, values), from the model's own starts (problems and starts built before the clock)."""
    problems = [(_bare_problem(model, rate, values), _starts(model, rate, values)) for model, rate, values in data]

    def bare() -> None:
        for (residual, jacobian), p0 in problems:
            least_squares(residual, p0, jac=jacobian, method="lm")

    return bare


def _interleaved(ours: Callable[[], object], bare: Callable[[], object]) -> tuple[float, float]:
    ours(), bare()  # warm-up (imports, caches)
    a, b = [], []
    for _ in range(REPEATS):
        a.append(_cpu_seconds(ours))
        b.append(_cpu_seconds(bare))
    return statistics.median(a), statistics.median(b)


def _cpu_seconds(work: Callable[[], object]) -> float:
    t = time.process_time()
    work()
    return time.process_time() - t


def single_model(registry, model_id: str, truths: list[dict[str, float]]) -> None:
    model = registry.models[model_id].record
    rate = np.geomspace(0.01, 1000.0, 40)
    curves = _curves(model, truths, rate, seed=7)
    bare = _bare_loop([(model, rate, y) for y in curves])

    def ours():
        for y in curves:
            fit_model(model, rate, y)

    t_ours, t_bare = _interleaved(ours, bare)
    print(f"{model_id:17s} gammadot {len(curves) / t_ours:7.0f} fits/s   bare least_squares "
          f"{len(curves) / t_bare:7.0f} fits/s   ratio {t_ours / t_bare:.2f}")


def study_fit_stage(registry) -> None:
    rng = np.random.default_rng(2026)
    rate = np.geomspace(0.1, 1000.0, 25)
    runs = []
    for i in range(CURVES):  # lotion-like shear-thinning curves as in bench_study.py, 1 % noise
        eta = 5.0 * (1 + (rate / 2.0) ** 2) ** -0.3 * (1 + 0.01 * rng.standard_normal(rate.shape))
        runs.append(Run(run_id=f"r{i}", source_file="bench.csv", source_sha256="0" * 64,
                        first_line=1, metadata={}, columns={"shear_rate": rate, "viscosity": eta,
                                                            "shear_stress": eta * rate}))
    config = StudyConfig(title="bench")
    excluded = np.zeros(len(rate), dtype=bool)
    models = [p.record for p in registry.models.values()]
    bare = _bare_loop([(model, rate, run.columns[model.target]) for run in runs for model in models])

    def ours():
        for run in runs:
            fit_run(run, excluded, config, registry)

    t_ours, t_bare = _interleaved(ours, bare)
    print(f"200-run fit stage ({len(models)} models each): gammadot {t_ours:.2f} s, "
          f"bare least_squares {t_bare:.2f} s, ratio {t_ours / t_bare:.2f}")


def main() -> None:
    registry = build_registry(build_plugin_manager(entry_points=False))
    rng = np.random.default_rng(1)
    cy = [{"eta0": 10 ** rng.uniform(0, 3), "eta_inf": 0.0, "lam": 10 ** rng.uniform(-1, 1),
           "a": rng.uniform(0.5, 3.0), "n": rng.uniform(0.2, 0.6)} for _ in range(CURVES)]
    for p in cy:
        p["eta_inf"] = p["eta0"] * 1e-3
    hb = [{"tau_y": 10 ** rng.uniform(0, 2), "K": 10 ** rng.uniform(-0.5, 1.5), "n": rng.uniform(0.3, 0.8)}
          for _ in range(CURVES)]
    print(f"CPU time of this process, median of {REPEATS} interleaved repeats; {CURVES} curves each")
    single_model(registry, "carreau_yasuda", cy)
    single_model(registry, "herschel_bulkley", hb)
    study_fit_stage(registry)


if __name__ == "__main__":
    main()

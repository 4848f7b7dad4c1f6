"""Bounded nonlinear least squares for one curve: the engine under every model fit.

What it solves: parameters p of ``y ≈ c·f(x; p)`` (``f`` a model record's function, ``c`` an
optional per-point factor, e.g. γ̇ to compare a viscosity model on stress) minimising
Σ w_i ρ(r_i²), with residuals

    r_i = T(c_i f(x_i; p)) − T(y_i),   T = ln  (space "log", the default)  or  T = identity ("linear")

Log space makes every point count by its *relative* deviation, which is what rheological data
need (values spanning decades, errors roughly proportional). The linear space is also what the
NIST StRD certified results are defined for (tests/test_nist_strd.py).

How:
- Bounds (a model's ``ModelParameter.min``/``max``, the same as its lmfit parameter hints): a
  parameter declared ``log_scale`` (positive and spanning decades: viscosities, time constants,
  consistencies, exponents) is fitted as ln p, which makes the problem scale-free. Any other
  bounded parameter (a yield stress or η∞ that may be exactly 0) is projected onto its range,
  p = clip(θ, min, max), so one whose best value lies beyond a bound reaches it in one step
  instead of creeping towards it. The solution is then checked for first-order optimality
  (KKT: the cost must not fall towards the inside of the range); if a parameter stuck at a bound
  on the way, the fit is repeated with lmfit's own Minuit-style transform
  (``lmfit.Parameter.setup_bounds``/``from_internal``/``scale_gradient``; lmfit docs, "Bounds
  Implementation"), which can leave a bound again.
- Minimiser: Levenberg–Marquardt, MINPACK ``lmder``/``lmdif`` (Moré, in Numerical
  Analysis, Springer LNM 630 (1978) 105, doi:10.1007/BFb0067700) through ``scipy.optimize.leastsq`` — the
  routine lmfit's default ``leastsq`` method runs — with the model's analytic Jacobian when it
  has one. A robust loss (``soft_l1``, ``huber``) goes through ``scipy.optimize.least_squares``
  (trust-region reflective), the routine behind lmfit's ``least_squares`` method.
- Several starts (a model's ``guess`` may return a list): each is fitted, the lowest objective
  wins, the first on a tie (deterministic).
- Covariance: C = s² (JᵀJ)⁻¹ with J the Jacobian of the weighted residuals with respect to the
  parameters in their own units at the solution and s² = RSS/(n − k) — the quantity whose square
  roots the NIST StRD certify as standard deviations. It is computed from the column-scaled J:
  directly when that is well conditioned, otherwise from its SVD, where directions with a
  singular value below ``RANK_TOLERANCE`` of the largest are unresolvable and their parameters
  get no standard error. Parameters stopped at a bound are
  held fixed for the covariance. With a robust loss J and the residuals carry the loss weights
  ρ'(z) at the solution (iteratively-reweighted least squares; an approximation).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Callable, Mapping, Sequence

import lmfit
import numpy as np

from .lmfit_models import as_lmfit_model
from .records import Model

SPACES = ("log", "linear")
WEIGHTS = ("none", "relative", "per_decade")
LOSSES = ("linear", "soft_l1", "huber")

DEFAULT_TOLERANCE = 1.49012e-8  # MINPACK's ftol/xtol default as scipy ships it (√ε)
RANK_TOLERANCE = 1e-10  # relative singular value below which a direction is unresolved
DIRECT_VIF_LIMIT = 1e4  # largest variance inflation factor for which (JᵀJ)⁻¹ is inverted directly
BAD_RESIDUAL = 1e6  # residual put where the model is undefined, so the step is rejected
LOG_LIMIT = 700.0  # |ln p| beyond which e^θ would over- or underflow a float64
MAD_TO_SIGMA = 1.4826  # MAD → σ for normal errors (common practice; Huber, Robust Statistics)


@dataclass(frozen=True)
class Objective:
    """What "best fit" means: residual space, point weights and loss.

    - ``space``: ``"log"`` (residuals of ln values: relative deviations) or ``"linear"``.
    - ``weights`` on squared residuals, scaled to mean 1: ``"none"``; ``"relative"``
      (1/y², linear space only: log space already weighs relative deviations);
      ``"per_decade"`` (each point weighted by the span of ln γ̇ it represents, so densely
      sampled decades do not outweigh sparse ones).
    - ``loss``: ``"linear"`` (least squares) or a robust ``"soft_l1"``/``"huber"`` that
      down-weights residuals beyond ``loss_scale`` (residual units; in log space 0.05 ≈ 5 %).
      ``loss_scale=None``: 1.4826 × the median absolute residual of a least-squares fit first.
    """

    space: str = "log"
    weights: str = "none"
    loss: str = "linear"
    loss_scale: float | None = None

    def __post_init__(self) -> None:
        for name, allowed in (("space", SPACES), ("weights", WEIGHTS), ("loss", LOSSES)):
            if getattr(self, name) not in allowed:
                raise ValueError(f"{name}: unknown value '{getattr(self, name)}' (known: {', '.join(allowed)})")
        if self.weights == "relative" and self.space == "log":
            raise ValueError("weights: 'relative' applies to space = 'linear' "
                             "(log space already weighs every point by its relative deviation)")
        if self.loss_scale is not None and not (math.isfinite(self.loss_scale) and self.loss_scale > 0):
            raise ValueError(f"loss_scale: must be a positive number, not {self.loss_scale}")


@dataclass(frozen=True)
class CurveFit:
    """The engine's answer for one model and one data set (parameters in their own SI units).

    ``residual`` is in the objective's space and weighted; ``rss`` = Σ residual² (with a robust
    loss: Σ ρ'(z) residual²). ``covariance`` is k×k with NaN rows/columns for parameters that
    have no standard error (``at_bound`` or ``unresolved``).
    """

    names: tuple[str, ...]
    values: np.ndarray
    stderr: np.ndarray
    covariance: np.ndarray
    residual: np.ndarray
    rss: float
    n_points: int
    at_bound: tuple[bool, ...]
    unresolved: tuple[bool, ...]
    success: bool
    message: str
    nfev: int
    start_index: int = 0
    held: tuple[bool, ...] = ()


    def value(self, name: str) -> float:
        """Fitted value of parameter ``name``."""
        return float(self.values[self.names.index(name)])

    @property
    def n_free(self) -> int:
        """Parameters that were free at the solution (not at a bound, not held)."""
        held = self.held or (False,) * len(self.at_bound)
        return int(sum(not (b or h) for b, h in zip(self.at_bound, held)))

    def correlation(self) -> np.ndarray:
        """Correlation matrix from the covariance (NaN where a standard error is missing)."""
        with np.errstate(invalid="ignore", divide="ignore"):
            return self.covariance / np.outer(self.stderr, self.stderr)


def point_weights(objective: Objective, x: np.ndarray, y: np.ndarray) -> np.ndarray | None:
    """Weights on the squared residuals (mean 1), or ``None`` for equal weights."""
    if objective.weights == "relative":
        w = 1.0 / np.square(y)
    elif objective.weights == "per_decade":
        w = _log_span_weights(x)
    else:
        return None
    return w / np.mean(w)


def _log_span_weights(x: np.ndarray) -> np.ndarray:
    """Trapezoid widths in ln x of each distinct rate, shared among points at that rate."""
    levels, index, counts = np.unique(np.log(x), return_inverse=True, return_counts=True)
    if len(levels) < 2:
        return np.ones_like(x)
    edges = np.concatenate(([levels[0]], (levels[1:] + levels[:-1]) / 2.0, [levels[-1]]))
    widths = np.diff(edges)
    return widths[index] / counts[index]


class _Transform:
    """Internal (unbounded) ↔ external (bounded) parameters.

    Per parameter: ``log`` (declared ``log_scale`` and started > 0): p = e^θ; unbounded: p = θ;
    otherwise, by default, projection p = clip(θ, min, max), which reaches a bound in one step
    (an active bound then has a zero Jacobian column); with ``smooth=True`` lmfit's Minuit-style
    transform, which can leave a bound again (used when the projection stopped at a bound the
    data pull away from: see :func:`_pulls_off_bound`). A handful of scalars per call: plain
    Python floats are faster here than numpy's small-array overhead.
    """

    LOG, FREE, CLIP, SMOOTH, FIXED = range(5)

    def __init__(self, model: Model, start: Sequence[float], smooth: bool = False,
                 fixed: Mapping[str, float] | None = None) -> None:
        fixed = fixed or {}
        self.kinds: list[tuple[int, float, float, object]] = []
        internal = []
        for spec, value in zip(model.parameters, start):
            value = float(value)
            if spec.name in fixed:
                self.kinds.append((self.FIXED, float(fixed[spec.name]), 0.0, None))
                continue
            if spec.log_scale and value > 0:
                self.kinds.append((self.LOG, 0.0, 0.0, None))
                internal.append(math.log(value))
            elif not (math.isfinite(spec.min) or math.isfinite(spec.max)):
                self.kinds.append((self.FREE, 0.0, 0.0, None))
                internal.append(value)
            elif not smooth:
                self.kinds.append((self.CLIP, spec.min, spec.max, None))
                internal.append(min(max(value, spec.min), spec.max))
            else:  # a fresh lmfit Parameter per fit (rare path): nothing shared between fits
                par = lmfit.Parameter(spec.name, value=value, min=spec.min, max=spec.max)  # clips to the bounds
                self.kinds.append((self.SMOOTH, spec.min, spec.max, par))
                internal.append(par.setup_bounds())
        self.start = np.array(internal)
        self.varied = np.array([j for j, kind in enumerate(self.kinds) if kind[0] != self.FIXED], dtype=int)
        self.all_varied = len(self.varied) == len(self.kinds)

    def external(self, theta: Sequence[float]) -> list[float]:
        """Parameter values (SI) for internal values θ (held parameters at their value)."""
        p = []
        values = iter(theta)
        for kind, low, high, par in self.kinds:
            if kind == self.FIXED:
                p.append(low)
                continue
            t = next(values)
            if kind == self.LOG:
                p.append(math.exp(min(max(t, -LOG_LIMIT), LOG_LIMIT)))
            elif kind == self.CLIP:
                p.append(min(max(t, low), high))
            elif kind == self.SMOOTH:
                p.append(par.from_internal(t))  # type: ignore[attr-defined]
            else:
                p.append(float(t))
        return p

    def gradient(self, theta: Sequence[float]) -> np.ndarray:
        """dp/dθ of every varied parameter (the chain-rule factor of its Jacobian column)."""
        g = []
        for (kind, low, high, par), t in zip((k for k in self.kinds if k[0] != self.FIXED), theta):
            if kind == self.LOG:
                g.append(math.exp(min(max(t, -LOG_LIMIT), LOG_LIMIT)))
            elif kind == self.CLIP:
                g.append(1.0 if low <= t <= high else 0.0)
            elif kind == self.SMOOTH:
                g.append(par.scale_gradient(t))  # type: ignore[attr-defined]
            else:
                g.append(1.0)
        return np.array(g)

    def at_bound(self, theta: Sequence[float]) -> np.ndarray:
        """Which parameters sit at a bound (projection: exactly; lmfit transform: within 10⁻⁶
        of the bounded span, or of max(1, |bound|) for a one-sided bound)."""
        flags = np.zeros(len(self.kinds), dtype=bool)
        for j, t in zip(self.varied, theta):
            kind, low, high, par = self.kinds[j]
            if kind == self.CLIP:
                flags[j] = t <= low or t >= high
            elif kind == self.SMOOTH:
                value = par.from_internal(t)  # type: ignore[attr-defined]
                span = high - low if math.isfinite(high - low) else None
                near_low = math.isfinite(low) and value - low <= 1e-6 * (span or max(1.0, abs(low)))
                near_high = math.isfinite(high) and high - value <= 1e-6 * (span or max(1.0, abs(high)))
                flags[j] = bool(near_low or near_high)
        return flags

    def held(self) -> np.ndarray:
        """Parameters held at a given value (not fitted)."""
        return np.array([kind[0] == self.FIXED for kind in self.kinds])


class _Problem:
    """Residuals and their Jacobian in external parameters for one data set.

    Called inside one ``np.errstate(all="ignore")`` for the whole fit (trial parameters may make
    a model undefined; such residuals become ``BAD_RESIDUAL`` so the step is rejected).
    """

    def __init__(self, model: Model, x: np.ndarray, y: np.ndarray, factor: np.ndarray | None,
                 objective: Objective) -> None:
        self.model, self.x, self.factor, self.objective = model, x, factor, objective
        self.function = model.function
        self.names = tuple(p.name for p in model.parameters)
        self.log = objective.space == "log"
        self.target = np.log(y) if self.log else y
        weights = point_weights(objective, x, y)
        self.sqrt_w = None if weights is None else np.sqrt(weights)
        self.jacobian_function = model.jacobian
        self.lower = np.array([spec.min for spec in model.parameters])
        self._last: tuple[tuple[float, ...], np.ndarray] | None = None

    def predict(self, p: Sequence[float]) -> np.ndarray:
        """c·f(x; p); the last one is kept (MINPACK asks for the Jacobian where it just
        evaluated the residual, and the log-space Jacobian needs f there)."""
        key = tuple(p)
        if self._last is not None and self._last[0] == key:
            return self._last[1]
        f = np.asarray(self.function(self.x, **dict(zip(self.names, key))), dtype=float)
        if self.factor is not None:
            f = f * self.factor
        self._last = (key, f)
        return f

    def residual(self, p: Sequence[float]) -> np.ndarray:
        f = self.predict(p)
        r = (np.log(f) if self.log else f) - self.target
        if self.sqrt_w is not None:
            r = r * self.sqrt_w
        if not np.isfinite(r).all():
            r = np.where(np.isfinite(r), r, BAD_RESIDUAL)
        return r

    def jacobian(self, p: Sequence[float]) -> np.ndarray:
        """∂r/∂p (n × k), analytic when the model has a Jacobian, else numerical."""
        if self.jacobian_function is None:
            return self._numerical_jacobian(p)
        params = dict(zip(self.names, p))
        parts = self.jacobian_function(self.x, **params)
        J = np.empty((len(self.x), len(self.names)))
        for j, name in enumerate(self.names):
            J[:, j] = parts[name]  # a constant derivative may come as a scalar
        if self.factor is not None:
            J *= self.factor[:, None]
        if self.log:
            J /= self.predict(p)[:, None]
        if self.sqrt_w is not None:
            J *= self.sqrt_w[:, None]
        if not np.isfinite(J).all():
            J = np.where(np.isfinite(J), J, 0.0)
        return J

    def _numerical_jacobian(self, p: Sequence[float]) -> np.ndarray:
        """Order-8 central differences (scipy.differentiate.jacobian) in relative steps, for
        models without an analytic Jacobian."""
        from scipy.differentiate import jacobian

        p = np.asarray(p, dtype=float)
        scale = np.where(p != 0.0, np.abs(p), 1.0)

        def along(u: np.ndarray) -> np.ndarray:  # u: (k, ...) relative parameters
            flat = u.reshape(len(p), -1)
            out = np.stack([self.residual(flat[:, i] * scale) for i in range(flat.shape[1])], axis=-1)
            return out.reshape((len(self.x),) + u.shape[1:])

        u0 = p / scale  # one order-8 central difference, 1 % step: smaller steps only add round-off
        result = jacobian(along, u0, initial_step=1e-2, maxiter=1)
        return np.asarray(result.df, dtype=float) / scale[None, :]


def _robust_weights(loss: str, residual: np.ndarray, scale: float) -> np.ndarray:
    """ρ'(z), z = (r/scale)², of scipy's robust losses (scipy.optimize.least_squares docs)."""
    z = np.square(residual / scale)
    if loss == "soft_l1":
        return 1.0 / np.sqrt(1.0 + z)
    if loss == "huber":
        return np.where(z <= 1.0, 1.0, 1.0 / np.sqrt(np.maximum(z, 1.0)))
    return np.ones_like(z)


@dataclass
class _Local:
    """One local fit: internal solution, objective, MINPACK's verdict."""

    theta: np.ndarray
    cost: float
    success: bool
    message: str
    nfev: int
    transform: _Transform = field(repr=False)
    residual: np.ndarray | None = field(default=None, repr=False)  # at theta, when the minimiser returned it
    _solution: tuple[np.ndarray, np.ndarray, np.ndarray] | None = field(default=None, repr=False)
    _at_bound: np.ndarray | None = field(default=None, repr=False)

    def solution(self, problem: _Problem) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """External parameters, residual and Jacobian at the solution (computed once)."""
        if self._solution is None:
            p = np.array(self.transform.external(self.theta))
            r = self.residual if self.residual is not None else problem.residual(p)
            self._solution = (p, r, problem.jacobian(p))
        return self._solution

    def at_bound(self) -> np.ndarray:
        """Which parameters sit at a bound at the solution (computed once)."""
        if self._at_bound is None:
            self._at_bound = self.transform.at_bound(self.theta)
        return self._at_bound


def _minimise(problem: _Problem, transform: _Transform, objective: Objective, settings: _Settings,
              loss_scale: float | None) -> _Local:
    """One local fit from the transform's start; cost in the objective's own terms."""
    from scipy.optimize import least_squares, leastsq

    # The last parameters, residual and Jacobian by θ: scipy checks the residual and Jacobian at
    # the start, where MINPACK then asks for them again, and MINPACK asks for the Jacobian where
    # it evaluated the residual (it passes a copy of θ each call, so the bytes are the key).
    last_p: list = [None, None]
    last_r: list = [None, None]
    last_J: list = [None, None]

    def external(theta: np.ndarray) -> tuple[bytes, list[float]]:
        key = theta.tobytes()
        if key != last_p[0]:
            last_p[0], last_p[1] = key, transform.external(theta)
        return key, last_p[1]

    def fun(theta: np.ndarray) -> np.ndarray:
        key, p = external(theta)
        if key != last_r[0]:
            last_r[0], last_r[1] = key, problem.residual(p)
        return last_r[1]

    jac: Callable[[np.ndarray], np.ndarray] | None = None
    if problem.jacobian_function is not None:
        def jac(theta: np.ndarray) -> np.ndarray:
            key, p = external(theta)
            if key != last_J[0]:
                J = problem.jacobian(p)
                if not transform.all_varied:
                    J = J[:, transform.varied]
                J *= transform.gradient(theta)
                last_J[0], last_J[1] = key, J
            return last_J[1].copy()  # callers may scale it in place: the cache stays intact

    if objective.loss == "linear":
        theta, _, info, message, ier = leastsq(fun, transform.start, Dfun=jac, full_output=True,
                                               ftol=settings.tolerance, xtol=settings.tolerance,
                                               maxfev=settings.max_evaluations or 0)
        theta = np.asarray(theta, float)
        r = np.asarray(info["fvec"], float)  # MINPACK's residual at θ: no re-evaluation
        return _Local(theta, float(r @ r), ier in (1, 2, 3, 4), str(message).strip(),
                      int(info["nfev"]), transform, residual=r)

    def fun_copy(theta: np.ndarray) -> np.ndarray:  # the robust loss scales residuals in place
        return fun(theta).copy()

    result = least_squares(fun_copy, transform.start, jac=jac if jac is not None else "2-point", method="trf",
                           loss=objective.loss, f_scale=loss_scale, x_scale="jac",
                           ftol=settings.tolerance, xtol=settings.tolerance, max_nfev=settings.max_evaluations)
    return _Local(np.asarray(result.x, float), float(2.0 * result.cost), bool(result.success),
                  str(result.message), int(result.nfev), transform)


def fit_curve(model: Model, x: np.ndarray, y: np.ndarray,
              starts: Mapping[str, float] | Sequence[Mapping[str, float]],
              objective: Objective = Objective(), *, factor: np.ndarray | None = None,
              tolerance: float = DEFAULT_TOLERANCE, max_evaluations: int | None = None,
              fixed: Mapping[str, float] | None = None) -> CurveFit:
    """Fit ``model`` to (x, y) from each start; return the best solution with its covariance.

    ``x``/``y`` must be finite (and y > 0 in log space); the caller chooses the points.
    ``factor`` multiplies the model's output per point before comparison (e.g. γ̇ to compare a
    viscosity model on shear stress). ``tolerance`` is MINPACK's ftol and xtol (relative change
    of the sum of squares and of the parameters at convergence); ``max_evaluations`` caps the
    model evaluations per start (default MINPACK's: 100·(k + 1) with a Jacobian, 200·(k + 1)
    without). ``fixed`` holds parameters at given values (a profile: the others are refitted).
    Raises ``ValueError`` for a start that misses a parameter.
    """
    settings = _Settings(tolerance, max_evaluations, dict(fixed or {}))
    with np.errstate(all="ignore"):
        return _fit_curve(model, np.asarray(x, float), np.asarray(y, float), starts, objective,
                          None if factor is None else np.asarray(factor, float), settings)


@dataclass(frozen=True)
class _Settings:
    tolerance: float
    max_evaluations: int | None
    fixed: Mapping[str, float]


def _fit_curve(model: Model, x: np.ndarray, y: np.ndarray, starts: Mapping[str, float] | Sequence[Mapping[str, float]],
               objective: Objective, factor: np.ndarray | None, settings: _Settings) -> CurveFit:
    as_lmfit_model(model)  # cached; refuses a function whose parameters differ from the declared ones
    names = tuple(p.name for p in model.parameters)
    start_list = [starts] if isinstance(starts, Mapping) else list(starts)
    problem = _Problem(model, x, y, factor, objective)
    loss_scale = objective.loss_scale
    if objective.loss != "linear" and loss_scale is None:
        loss_scale = _auto_loss_scale(model, problem, start_list, settings)
    best: _Local | None = None
    best_index = 0
    for index, start in enumerate(start_list):
        missing = [n for n in names if n not in start]
        if missing:
            raise ValueError(f"model '{model.id}': the starting values lack {', '.join(missing)}")
        values = [float(start[n]) for n in names]
        local = _minimise(problem, _Transform(model, values, fixed=settings.fixed), objective, settings, loss_scale)
        if _pulls_off_bound(problem, local):
            local = _minimise(problem, _Transform(model, values, smooth=True, fixed=settings.fixed), objective,
                              settings, loss_scale)
        if best is None or (math.isfinite(local.cost) and not local.cost >= best.cost):
            best, best_index = local, index
    assert best is not None, "at least one start is needed"
    return _summarise(model, problem, best, best_index, objective, loss_scale)


def _pulls_off_bound(problem: _Problem, local: _Local) -> bool:
    """True when a parameter stopped at a bound although the cost falls towards the inside
    (first-order optimality, KKT, violated): the projection stuck there on the way."""
    at_bound = local.at_bound()
    if not at_bound.any():
        return False
    p, r, J = local.solution(problem)
    slope = J.T @ r  # ½ ∂cost/∂p
    scale = np.linalg.norm(r) * np.linalg.norm(J, axis=0) + 1e-300
    inward = np.where(p <= problem.lower, -slope, slope)  # > 0: the cost falls moving inside
    return bool(np.any(at_bound & (inward > 1e-6 * scale)))


def _auto_loss_scale(model: Model, problem: _Problem, starts: list, settings: _Settings) -> float:
    """1.4826 × median |residual| of a least-squares fit (a robust σ estimate), floored."""
    plain = Objective(problem.objective.space, problem.objective.weights, "linear")
    first = starts[0]
    local = _minimise(problem, _Transform(model, [float(first[n]) for n in problem.names], fixed=settings.fixed),
                      plain, settings, None)
    r = problem.residual(local.transform.external(local.theta))
    return max(MAD_TO_SIGMA * float(np.median(np.abs(r))), 1e-12)


def _summarise(model: Model, problem: _Problem, local: _Local, start_index: int, objective: Objective,
               loss_scale: float | None) -> CurveFit:
    p, r, J = local.solution(problem)
    if objective.loss != "linear" and loss_scale is not None:
        rho = _robust_weights(objective.loss, r, loss_scale)
        r, J = r * np.sqrt(rho), J * np.sqrt(rho)[:, None]
    at_bound = local.at_bound().tolist()
    held = local.transform.held().tolist()
    k = len(p)
    free = [not (b or h) for b, h in zip(at_bound, held)]
    rss = float(r @ r)
    dof = len(r) - sum(free)
    unresolved = [False] * k
    if all(free) and dof > 0 and math.isfinite(float(J.sum())):  # the usual case: no sub-matrices
        inverse, lost = _inverse_normal_matrix(J)
        covariance = inverse * (rss / dof)
    else:
        covariance = np.full((k, k), np.nan)
        lost = np.zeros(k, bool)
        if dof > 0 and any(free) and np.isfinite(J).all():
            mask = np.array(free)
            sub, lost[mask] = _inverse_normal_matrix(J[:, mask])
            covariance[np.ix_(mask, mask)] = sub * (rss / dof)
    for j in np.flatnonzero(lost):
        unresolved[j] = True
        covariance[j, :] = covariance[:, j] = np.nan
    stderr = np.sqrt(covariance.diagonal())
    return CurveFit(tuple(problem.names), p, stderr, covariance, r, rss, len(r), tuple(at_bound),
                    tuple(unresolved), local.success, local.message, local.nfev, start_index, tuple(held))


def _inverse_normal_matrix(J: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """(JᵀJ)⁻¹ and which parameters lie in directions the data cannot resolve.

    J is scaled to unit columns first (D = column norms, S = (J D⁻¹)ᵀ(J D⁻¹), a correlation-like
    matrix with unit diagonal). When S is well conditioned — invertible, with every variance
    inflation factor diag(S⁻¹) below ``DIRECT_VIF_LIMIT``, so cond(S) ≤ k²·VIF_max — its plain
    inverse is accurate to about cond(S)·ε ≈ 10⁻¹¹ (Higham, Accuracy and Stability of Numerical
    Algorithms, 2nd ed. 2002, ch. 14 — from memory) and is used directly. Otherwise the SVD of
    the scaled J decides:
    singular values below ``RANK_TOLERANCE`` of the largest are unresolved directions.
    """
    # einsum and numpy's inv, not BLAS/LAPACK calls through scipy.linalg: the OpenBLAS scipy ships
    # may spread even a 3×3 Cholesky over threads (measured: 2× slower fit stage on 2 loaded cores)
    gram = np.einsum("ij,ik->jk", J, J)
    norms = np.sqrt(gram.diagonal())
    if min(norms.tolist()) > 0:  # a handful of scalars: Python is faster than numpy's reductions here
        try:  # (G/d)ᵀ/d = S, as G is symmetric
            inverse = np.linalg.inv((gram / norms).T / norms)
        except np.linalg.LinAlgError:
            inverse = None
        if inverse is not None:
            vif = inverse.diagonal().tolist()
            if all(0.5 < v < DIRECT_VIF_LIMIT for v in vif):  # VIF ≥ 1 in exact arithmetic; NaN fails
                return (inverse / norms).T / norms, np.zeros(len(vif), bool)
    norms = np.where(norms > 0, norms, 1.0)
    _, s, vt = np.linalg.svd(J / norms, full_matrices=False)
    keep = s > RANK_TOLERANCE * s[0] if len(s) and s[0] > 0 else np.zeros(len(s), bool)
    v = vt[keep].T / s[keep]
    inverse = (v @ v.T) / np.outer(norms, norms)
    null = vt[~keep]
    lost = np.any(np.abs(null) > 1e-3, axis=0) if len(null) else np.zeros(J.shape[1], bool)
    return inverse, lost

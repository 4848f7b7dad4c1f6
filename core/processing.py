"""Processing one run: geometry conversion, checks, model fits, derived results. Pure computation.

Every plugin call is wrapped: a geometry, check or model that raises becomes a finding (or
a failed fit) naming the plugin, and the run and the study go on.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace
from typing import Callable

import numpy as np

from .config import FitConfig, GeometryConfig, StudyConfig, check_settings
from .datamodel import Run
from .derived_results import derived_results
from .fitting import FitResult, PreparedFit, failed_fit, prepare_fit, profiled, summarise
from .least_squares import Objective
from .model_selection import select_model
from .sweeps import sweep_points
from .profile_intervals import with_profile_intervals
from .records import CheckContext, Conversion, Finding, Result
from .registry import Provided, Registry

PASS_THROUGH = "instrument"


@dataclass
class RunResult:
    """A processed run: the run (columns now include stress and rate), findings and fits."""

    run: Run
    geometry_id: str | None
    geometry_type: str | None
    correction: str | None
    excluded: np.ndarray
    flags: list[list[str]]
    findings: list[Finding] = field(default_factory=list)
    fits: list[FitResult] = field(default_factory=list)
    results: list[Result] = field(default_factory=list)
    geometry: GeometryConfig | None = None
    fitted: np.ndarray | None = None  # points the fits used (None: every point not excluded)

    @property
    def in_fit(self) -> np.ndarray:
        """One bool per point: true where the fits used the point (the fitted points; before
        fitting, or without a sweep choice, every point not excluded). Plots, replicates and
        slip analyses use this, so a leg left out by ``[fit] sweeps`` counts as not fitted."""
        return self.fitted.copy() if self.fitted is not None else ~np.asarray(self.excluded, dtype=bool)

    @property
    def selected(self) -> FitResult | None:
        """The selected model's fit, if any model could be fitted."""
        return next((f for f in self.fits if f.selected), None)


def resolve_geometry(run: Run, config: StudyConfig) -> tuple[GeometryConfig | None, list[Finding]]:
    """The run's geometry: named in its metadata (its values win), or the study's only one."""
    notes: list[Finding] = []
    name = run.metadata.get("geometry")
    has_raw = "torque" in run.columns and "angular_velocity" in run.columns
    if name is not None and str(name) in config.geometries:
        return config.geometries[str(name)].with_overrides(run.metadata), notes
    if name is None and has_raw and len(config.geometries) == 1:
        only = next(iter(config.geometries.values()))
        notes.append(Finding("geometry.assumed", "info",
                             f"the run names no geometry; the study's only geometry '{only.id}' is used"))
        return only.with_overrides(run.metadata), notes
    if name is not None:
        notes.append(Finding("geometry.unknown", "warning",
                             f"geometry '{name}' is not defined in study.toml"))
    return None, notes


def convert(run: Run, config: StudyConfig,
            registry: Registry) -> tuple[Conversion | None, GeometryConfig | None, list[Finding]]:
    """Apply the run's geometry, falling back to the instrument's own values; the geometry
    returned is the one the run names even when its values are the instrument's (for checks)."""
    geometry, notes = resolve_geometry(run, config)
    attempts: list[tuple[Provided, GeometryConfig | None]] = []
    if geometry is not None and geometry.type in registry.geometries:
        attempts.append((registry.geometries[geometry.type], geometry))
    if PASS_THROUGH in registry.geometries:
        attempts.append((registry.geometries[PASS_THROUGH], None))
    for provided, geo in attempts:
        try:
            result = provided.record.convert(run, geo)
        except Exception as exc:  # a geometry plugin's failure is recorded on the run
            notes.append(Finding("geometry.failed", "error",
                                 f"geometry plugin '{provided.plugin}' ({provided.record.id}) failed: "
                                 f"{type(exc).__name__}: {exc}"))
            continue
        if result is not None:
            # Instrument values (the pass-through) keep the geometry the run names: the checks
            # still need it (torque from the stress, speed from the rate, inertia criteria).
            return result, geo if geo is not None else geometry, notes + list(result.notes)
    notes.append(Finding("geometry.none", "error",
                         "no shear rate and shear stress could be obtained: the run needs instrument "
                         "shear rate with stress or viscosity, or torque and speed with a geometry"))
    return None, None, notes


def _apply_conversion(run: Run, conversion: Conversion) -> None:
    columns = run.columns
    columns["shear_rate_apparent"] = conversion.shear_rate_apparent
    columns["shear_stress_apparent"] = conversion.shear_stress_apparent
    columns["shear_rate"] = conversion.shear_rate
    columns["shear_stress"] = conversion.shear_stress
    with np.errstate(divide="ignore", invalid="ignore"):
        columns["viscosity"] = conversion.shear_stress / conversion.shear_rate
    columns.update(conversion.extra_columns)


def run_checks(result: "RunResult", config: StudyConfig, registry: Registry, *, after_fit: bool) -> None:
    """Run the enabled checks of one stage on a converted run and apply their findings.

    Stage ``after_fit=False`` runs before fitting (its exclusions keep points out of fits);
    ``after_fit=True`` runs with the fits known (fit adequacy) and only flags. A raising check
    becomes an error finding naming its plugin.
    """
    context_fits = tuple(result.fits)
    models = {model_id: p.record for model_id, p in registry.models.items()}
    excluded_before = result.excluded.copy()  # every check of a stage sees the same exclusions
    if after_fit and result.fitted is not None:
        excluded_before = ~result.fitted  # after fitting: the points the fits did not use
    for check_id, provided in registry.checks.items():
        if provided.record.after_fit is not after_fit:
            continue
        settings = check_settings(config, check_id, provided.record.settings)
        if settings["enabled"] is False:
            continue
        context = CheckContext(study=config, settings=settings, geometry=result.geometry, fits=context_fits,
                               excluded=excluded_before, models=models)
        try:
            found = list(provided.record.run(result.run, context))
        except Exception as exc:
            result.findings.append(Finding(check_id, "error", f"check plugin '{provided.plugin}' failed: "
                                                              f"{type(exc).__name__}: {exc}"))
            continue
        keep_in_fit = after_fit or settings["exclude"] is False
        for f in found:
            _record(result, replace(f, exclude=f.exclude and not keep_in_fit))


def _record(result: "RunResult", finding: Finding) -> None:
    result.findings.append(finding)
    _flag_point(result, finding)


def _flag_point(result: "RunResult", finding: Finding) -> None:
    """A point finding adds its check id to the point's flags; ``exclude`` keeps it out of fits."""
    index = finding.point_index
    if index is not None and 0 <= index < len(result.flags):
        result.flags[index].append(finding.check)
        result.excluded[index] |= finding.exclude


def objective_of(config: FitConfig) -> Objective:
    """The least-squares objective a study's ``[fit]`` table asks for."""
    return Objective(config.space, config.weights, config.loss, config.loss_scale)


def fitted_points(run: Run, excluded: np.ndarray, config: FitConfig) -> np.ndarray:
    """Boolean mask of the points the fits use: not excluded, and on the ``[fit] sweeps``.

    With ``sweeps = "rising"`` or ``"falling"`` a run that goes up and down in rate is fitted on
    the points of those sweeps only (``gammadot.sweeps.sweep_points``): the legs of
    a thixotropic loop are two structural states. The other points are not excluded (they keep
    their place in points.parquet and on the site), just not fitted. A run measured in one
    direction, or ``sweeps = "all"``, is fitted on every point not excluded.
    """
    included = ~np.asarray(excluded, dtype=bool)
    rate = run.columns.get("shear_rate")
    if config.sweeps == "all" or rate is None:
        return included
    with np.errstate(invalid="ignore"):
        on_curve = included & np.isfinite(rate) & (rate > 0)
    chosen = sweep_points(rate, on_curve, config.sweeps)
    # points off every sweep (no usable rate) stay as they were: the fit drops them anyway
    return np.where(on_curve, chosen, included)


def fit_run(run: Run, excluded: np.ndarray, config: StudyConfig, registry: Registry,
            fitted: np.ndarray | None = None) -> list[FitResult]:
    """Fit every selected model to the run's fitted points (``fitted``, or
    :func:`fitted_points` of ``excluded``) and mark the selected one.

    Two passes: every model is fitted, then each fit's parameters are judged (with the
    identifiability profiles for the fits near the run's best AICc: ``fitting.profiled``).
    """
    model_ids = config.fit.models or tuple(registry.models)
    objective = objective_of(config.fit)
    rate = run.columns.get("shear_rate")
    if fitted is None:
        fitted = fitted_points(run, excluded, config.fit)
    excluded = ~fitted  # not fitted: excluded, or off the chosen sweeps
    n_points = int((~excluded).sum())
    prepared: list[PreparedFit | FitResult] = []
    for model_id in model_ids:
        provided = registry.models[model_id]
        target = run.columns.get(provided.record.target)
        if rate is None or target is None:
            missing = "shear rate" if rate is None else provided.record.target.replace("_", " ")
            prepared.append(failed_fit(provided.record, 0, f"no {missing}"))
            continue
        prepared.append(_guarded(provided, n_points, lambda m=provided.record, t=target:
                                 prepare_fit(m, rate[~excluded], t[~excluded], objective)))
    near_best = profiled(prepared)
    fits = [p if isinstance(p, FitResult) else
            _guarded(registry.models[model_id], n_points, lambda p=p, full=i in near_best: summarise(p, full))
            for i, (model_id, p) in enumerate(zip(model_ids, prepared))]
    fits = select_model(fits, {m: len(registry.models[m].record.parameters) for m in model_ids})
    if config.fit.intervals == "profile":  # the selected model only: 10–40 refits per parameter
        for i, (fit, p) in enumerate(zip(fits, prepared)):
            if fit.selected and isinstance(p, PreparedFit):
                fits[i] = _guarded(registry.models[fit.model], n_points,
                                   lambda f=fit, p=p: with_profile_intervals(f, p))  # type: ignore[assignment]
    return fits


def _note_unfitted_sweeps(result: RunResult, config: FitConfig) -> None:
    """With ``[fit] sweeps`` other than "all": a run-level note saying which points the fits
    leave out, and the flag ``fit.sweeps`` on each of them (they are not excluded)."""
    if result.fitted is None:
        return
    left_out = np.flatnonzero(~result.fitted & ~result.excluded)
    if len(left_out) == 0:
        return
    other = "rising" if config.sweeps == "falling" else "falling"
    rate = result.run.columns["shear_rate"]
    result.findings.append(Finding(
        "fit.sweeps", "info",
        f"[fit] sweeps = \"{config.sweeps}\": the {len(left_out)} points of the {other}-rate sweep "
        f"(points {left_out[0]}-{left_out[-1]}, {rate[left_out].min():.3g}-{rate[left_out].max():.3g} 1/s) are "
        f"kept in the tables but not fitted; the fits use the {int(result.fitted.sum())} points of the "
        f"{config.sweeps}-rate sweep", value=float(len(left_out)), unit="1"))
    for i in left_out:
        result.flags[i].append("fit.sweeps")


def _guarded(provided: Provided, n_points: int, call: Callable[[], PreparedFit | FitResult]) -> PreparedFit | FitResult:
    """``call()``, or a failed fit naming the model plugin whose code raised."""
    try:
        return call()
    except Exception as exc:
        return failed_fit(provided.record, n_points,
                          f"model plugin '{provided.plugin}' failed: {type(exc).__name__}: {exc}")


def run_derived_results(run: Run, excluded: np.ndarray, fits: list[FitResult], config: StudyConfig,
                        registry: Registry, fitted: np.ndarray | None = None) -> list[Result]:
    """Viscosities at the requested rates, zero-shear viscosity, yield stress, flow index; the
    interpolated values from the fitted points (``fitted``, or :func:`fitted_points`)."""
    rate, viscosity = run.columns.get("shear_rate"), run.columns.get("viscosity")
    if rate is None or viscosity is None:
        return []
    models = {model_id: provided.record for model_id, provided in registry.models.items()}
    if fitted is None:
        fitted = fitted_points(run, excluded, config.fit)
    return derived_results(rate[fitted], viscosity[fitted], fits, models, config.fit.shear_rates)


def process_run(run: Run, config: StudyConfig, registry: Registry) -> RunResult:
    """Convert, check, fit, then run the after-fit checks, for one run."""
    conversion, geometry, findings = convert(run, config, registry)
    geometry_type = geometry.type if geometry else (PASS_THROUGH if conversion else None)
    n = run.n_points
    result = RunResult(run, geometry.id if geometry else None, geometry_type,
                       conversion.correction if conversion else None,
                       np.zeros(n, dtype=bool), [[] for _ in range(n)],
                       findings=list(run.findings) + findings, geometry=geometry)
    if conversion is None:
        return result
    _apply_conversion(run, conversion)
    result.results.extend(conversion.results)
    for note in conversion.notes:  # already among the findings; a point note flags its point
        _flag_point(result, note)
    run_checks(result, config, registry, after_fit=False)
    result.fitted = fitted_points(run, result.excluded, config.fit)
    _note_unfitted_sweeps(result, config.fit)
    result.fits = fit_run(run, result.excluded, config, registry, result.fitted)
    try:
        result.results.extend(run_derived_results(run, result.excluded, result.fits, config, registry,
                                                  result.fitted))
    except Exception as exc:  # a model plugin's function failing here must not stop the run
        result.findings.append(Finding("fit.derived", "error", f"derived results could not be computed: "
                                                                f"{type(exc).__name__}: {exc}"))
    run_checks(result, config, registry, after_fit=True)
    return result

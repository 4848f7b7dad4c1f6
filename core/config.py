"""``study.toml``: loading and validation against the installed plugins' catalogue.

Every error names the key (``[geometries.bob14] inner_radius``) and the problem; quantities
are strings with units (``"14.0 mm"``), parsed through :mod:`gammadot.units` and checked for
their dimension. A study folder without ``study.toml`` gets the defaults.
"""

from __future__ import annotations

import difflib
import tomllib
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import TYPE_CHECKING, Any, Mapping, Sequence

from .datamodel import QUANTITIES
from .records import CheckSetting
from .specs import SPEC_KEYS, SpecError, SpecRule, parse_spec_rules, spec_shear_rates
from .units import DIMENSIONS, UnitError, parse_quantity

if TYPE_CHECKING:
    from .registry import Registry

STUDY_FILE = "study.toml"


class StudyConfigError(ValueError):
    """study.toml cannot be used; the message names the file, the key and the problem."""


@dataclass(frozen=True)
class GeometryConfig:
    """A geometry of the study: its id, its type (a geometry plugin id) and its values (SI)."""

    id: str
    type: str
    values: Mapping[str, float | str]

    def with_overrides(self, overrides: Mapping[str, Any]) -> "GeometryConfig":
        """A copy whose values are replaced by those of ``overrides`` with the same name."""
        merged = dict(self.values)
        merged.update({k: v for k, v in overrides.items() if k in self.values or k in merged})
        return GeometryConfig(self.id, self.type, merged)


@dataclass(frozen=True)
class FitConfig:
    """``[fit]``: which models to fit (``None``: every installed model), the objective and the
    shear rates (1/s) at which viscosities are reported.

    ``space``/``weights``/``loss``/``loss_scale`` mean what they mean in
    :class:`gammadot.least_squares.Objective` (values listed there and in the README).
    ``intervals``: ``"covariance"`` (standard errors only) or ``"profile"`` (also 95 %
    profile-likelihood intervals of the selected model's parameters:
    :mod:`gammadot.profile_intervals`).
    ``sweeps``: which sweeps of a run that goes up and down in rate (a hysteresis loop) are
    fitted: ``"all"`` (every point), ``"rising"`` or ``"falling"`` (only the points of the
    rising- or falling-rate sweeps; runs measured in one direction are fitted whole).
    """

    models: tuple[str, ...] | None = None
    space: str = "log"
    weights: str = "none"
    loss: str = "linear"
    loss_scale: float | None = None
    shear_rates: tuple[float, ...] = ()
    intervals: str = "covariance"
    sweeps: str = "all"


@dataclass(frozen=True)
class StudyConfig:
    """A study's settings; defaults when the folder has no ``study.toml``."""

    title: str
    description: str = ""
    geometries: Mapping[str, GeometryConfig] = field(default_factory=dict)
    columns: Mapping[str, str] = field(default_factory=dict)
    fit: FitConfig = field(default_factory=FitConfig)
    checks: Mapping[str, Mapping[str, Any]] = field(default_factory=dict)
    specs: tuple["SpecRule", ...] = ()
    limits: Mapping[str, float] = field(default_factory=dict)
    density: float | None = None
    source: str | None = None


_TOP_KEYS = ("study", "geometries", "columns", "fit", "checks", "spec", "limits")
_STUDY_KEYS = ("title", "description", "density")
_FIT_KEYS = ("models", "space", "weights", "loss", "loss_scale", "shear_rates", "intervals", "sweeps")
_FIT_CHOICES = {"space": ("log", "linear"), "weights": ("none", "relative", "per_decade"),
                "loss": ("linear", "soft_l1", "huber"),  # as gammadot.least_squares.Objective
                "intervals": ("covariance", "profile"), "sweeps": ("all", "rising", "falling")}
_LIMIT_KEYS = {"torque_min": "torque", "torque_max": "torque", "stress_min": "pressure", "stress_max": "pressure"}


def load_study_config(study_dir: Path, registry: "Registry") -> StudyConfig:
    """Read ``study_dir/study.toml`` (if present) and validate it against ``registry``."""
    path = study_dir / STUDY_FILE
    if not path.exists():
        return StudyConfig(title=study_dir.resolve().name)
    try:
        data = tomllib.loads(path.read_text(encoding="utf-8-sig"))
    except (tomllib.TOMLDecodeError, UnicodeDecodeError) as exc:
        raise StudyConfigError(f"{path.name}: not valid TOML: {exc}") from None
    return parse_study_config(data, registry, default_title=study_dir.resolve().name, source=path.name)


def parse_study_config(data: Mapping[str, Any], registry: "Registry", *, default_title: str,
                       source: str = STUDY_FILE) -> StudyConfig:
    """Validate a parsed ``study.toml`` mapping; raise :class:`StudyConfigError` naming the key."""
    _reject_unknown(data, _TOP_KEYS, "", source)
    study = _table(data, "study", source)
    _reject_unknown(study, _STUDY_KEYS, "[study] ", source)
    density = _quantity(study["density"], "density", "[study] density", source) if "density" in study else None
    specs = _specs(data.get("spec", []), registry, source)
    fit = _fit(_table(data, "fit", source), registry, source)
    # Viscosities named by specifications are derived too (gammadot.specs needs them).
    fit = replace(fit, shear_rates=tuple(dict.fromkeys([*fit.shear_rates, *sorted(spec_shear_rates(specs))])))
    return StudyConfig(
        title=str(study.get("title", default_title)),
        description=str(study.get("description", "")),
        geometries=_geometries(_table(data, "geometries", source), registry, source),
        columns=_columns(_table(data, "columns", source), source),
        fit=fit,
        checks=_checks(_table(data, "checks", source), registry, source),
        specs=specs,
        limits=_limits(_table(data, "limits", source), source),
        density=density,
        source=source,
    )


def _table(data: Mapping[str, Any], key: str, source: str) -> Mapping[str, Any]:
    value = data.get(key, {})
    if not isinstance(value, Mapping):
        raise StudyConfigError(f"{source}: '{key}' must be a table ([{key}])")
    return value


def _reject_unknown(table: Mapping[str, Any], allowed: tuple[str, ...] | Mapping[str, Any],
                    where: str, source: str) -> None:
    for key in table:
        if key not in allowed:
            close = difflib.get_close_matches(key, list(allowed), n=1)
            hint = f" (did you mean '{close[0]}'?)" if close else f" (known: {', '.join(allowed)})"
            raise StudyConfigError(f"{source}: {where}unknown key '{key}'{hint}")


def _quantity(value: Any, dimension: str, where: str, source: str) -> float:
    if isinstance(value, bool) or not isinstance(value, (str, int, float)):
        raise StudyConfigError(f"{source}: {where} must be a quantity with a unit, e.g. \"1.0 mm\"")
    try:
        return parse_quantity(str(value), dimension)
    except UnitError as exc:
        raise StudyConfigError(f"{source}: {where}: {exc}") from None


def _geometries(table: Mapping[str, Any], registry: "Registry", source: str) -> dict[str, GeometryConfig]:
    result: dict[str, GeometryConfig] = {}
    for geometry_id, entry in table.items():
        where = f"[geometries.{geometry_id}]"
        if not isinstance(entry, Mapping):
            raise StudyConfigError(f"{source}: {where} must be a table")
        kind = entry.get("type")
        if kind is None:
            raise StudyConfigError(f"{source}: {where} is missing the required key 'type'")
        if kind not in registry.geometries or kind == "instrument":
            known = ", ".join(k for k in registry.geometries if k != "instrument")
            raise StudyConfigError(f"{source}: {where} type '{kind}' is not a known geometry (known: {known})")
        result[geometry_id] = GeometryConfig(geometry_id, kind,
                                             _geometry_values(entry, registry.geometries[kind].record, where, source))
    return result


def _geometry_values(entry: Mapping[str, Any], geometry: Any, where: str, source: str) -> dict[str, float | str]:
    parameters = {p.name: p for p in geometry.parameters}
    _reject_unknown({k: v for k, v in entry.items() if k != "type"}, tuple(parameters), f"{where} ", source)
    values: dict[str, float | str] = {}
    for name, param in parameters.items():
        if name not in entry:
            if param.default is not None:
                values[name] = param.default
            elif param.required:
                raise StudyConfigError(f"{source}: {where} is missing the required key '{name}' ({param.description})")
            continue
        raw = entry[name]
        if param.dimension == "text":
            if raw not in param.choices:
                raise StudyConfigError(f"{source}: {where} {name} = '{raw}' is not one of {', '.join(param.choices)}")
            values[name] = raw
        else:
            values[name] = _quantity(raw, param.dimension, f"{where} {name}", source)
            if not values[name] > 0 and param.dimension in ("length", "angle"):
                raise StudyConfigError(f"{source}: {where} {name} must be positive")
    return values


def _columns(table: Mapping[str, Any], source: str) -> dict[str, str]:
    for header, quantity in table.items():
        if quantity not in QUANTITIES:
            raise StudyConfigError(f"{source}: [columns] '{header}' maps to '{quantity}', which is not one of "
                                   f"{', '.join(QUANTITIES)}")
    return dict(table)


def _fit(table: Mapping[str, Any], registry: "Registry", source: str) -> FitConfig:
    _reject_unknown(table, _FIT_KEYS, "[fit] ", source)
    models = table.get("models")
    if models is not None:
        if not isinstance(models, list) or not all(isinstance(m, str) for m in models):
            raise StudyConfigError(f"{source}: [fit] models must be a list of model ids")
        for model in models:
            if model not in registry.models:
                raise StudyConfigError(f"{source}: [fit] models: unknown model '{model}' "
                                       f"(installed: {', '.join(registry.models)})")
    choices: dict[str, str] = {}
    for key, allowed in _FIT_CHOICES.items():
        value = table.get(key, allowed[0])
        if value not in allowed:
            raise StudyConfigError(f"{source}: [fit] {key} = '{value}' is not one of {', '.join(allowed)}")
        choices[key] = value
    if choices["weights"] == "relative" and choices["space"] == "log":
        raise StudyConfigError(f"{source}: [fit] weights = 'relative' needs space = 'linear' "
                               "(log space already weighs every point by its relative deviation)")
    loss_scale = table.get("loss_scale")
    if loss_scale is not None and (isinstance(loss_scale, bool) or not isinstance(loss_scale, (int, float))
                                   or not loss_scale > 0):
        raise StudyConfigError(f"{source}: [fit] loss_scale must be a positive number "
                               "(residual units: in log space 0.05 ≈ 5 %)")
    rates = table.get("shear_rates", [])
    if not isinstance(rates, list):
        raise StudyConfigError(f"{source}: [fit] shear_rates must be a list such as [\"10 1/s\", \"100 1/s\"]")
    shear_rates = tuple(_quantity(rate, "frequency", f"[fit] shear_rates[{i}]", source) for i, rate in enumerate(rates))
    for i, rate in enumerate(shear_rates):
        if not rate > 0:
            raise StudyConfigError(f"{source}: [fit] shear_rates[{i}] must be positive")
    return FitConfig(models=tuple(models) if models is not None else None, space=choices["space"],
                     weights=choices["weights"], loss=choices["loss"],
                     loss_scale=float(loss_scale) if loss_scale is not None else None, shear_rates=shear_rates,
                     intervals=choices["intervals"], sweeps=choices["sweeps"])


def _checks(table: Mapping[str, Any], registry: "Registry", source: str) -> dict[str, Mapping[str, Any]]:
    """``[checks.<id>]`` of installed checks and analyses: known keys only, quantities in SI."""
    declared = {**{i: p.record.settings for i, p in registry.analyses.items()},
                **{i: p.record.settings for i, p in registry.checks.items()}}
    parsed: dict[str, Mapping[str, Any]] = {}
    for check_id, settings in table.items():
        if check_id not in declared:
            close = difflib.get_close_matches(check_id, list(declared), n=1)
            hint = f"did you mean '{close[0]}'? " if close else ""
            raise StudyConfigError(f"{source}: [checks.{check_id}] is not an installed check "
                                   f"({hint}installed: {', '.join(declared)})")
        if not isinstance(settings, Mapping):
            raise StudyConfigError(f"{source}: [checks.{check_id}] must be a table")
        parsed[check_id] = _check_values(settings, declared[check_id], f"[checks.{check_id}]", source)
    return parsed


_ALWAYS_ALLOWED = ("enabled", "exclude")  # every check: switch it off, keep its points in the fit


def _check_values(settings: Mapping[str, Any], declared: Sequence[CheckSetting], where: str,
                  source: str) -> dict[str, Any]:
    by_name = {s.name: s for s in declared}
    _reject_unknown(settings, _ALWAYS_ALLOWED + tuple(by_name), f"{where} ", source)
    values: dict[str, Any] = {}
    for key, raw in settings.items():
        setting = by_name.get(key)
        if setting is None or setting.dimension == "boolean":
            if not isinstance(raw, bool):
                raise StudyConfigError(f"{source}: {where} {key} must be true or false")
            values[key] = raw
            continue
        values[key] = _quantity(raw, setting.dimension, f"{where} {key}", source)
        if setting.minimum is not None and values[key] < setting.minimum:
            raise StudyConfigError(f"{source}: {where} {key} = {raw!r} is below the smallest allowed value "
                                   f"{setting.minimum:g} {dimension_label(setting.dimension)}")
    return values


def check_settings(config: StudyConfig, check_id: str, declared: Sequence[CheckSetting]) -> dict[str, Any]:
    """A check's settings for a study: ``enabled``/``exclude`` and every declared setting,
    the study's value (SI) where ``[checks.<id>]`` sets one, else the declared default."""
    given = config.checks.get(check_id, {})
    values: dict[str, Any] = {"enabled": True, "exclude": True}
    values.update({s.name: s.default for s in declared})
    values.update(given)
    return values


def _specs(entries: Any, registry: "Registry", source: str) -> tuple[SpecRule, ...]:
    if not isinstance(entries, list) or not all(isinstance(e, Mapping) for e in entries):
        raise StudyConfigError(f"{source}: 'spec' must be an array of tables ([[spec]])")
    for i, entry in enumerate(entries, 1):
        _reject_unknown(entry, SPEC_KEYS, f"[[spec]] #{i} ", source)
    try:
        return parse_spec_rules(entries, registry)
    except SpecError as exc:
        raise StudyConfigError(f"{source}: {exc}") from None


def _limits(table: Mapping[str, Any], source: str) -> dict[str, float]:
    """``[limits]``: instrument torque and stress limits in SI; each positive, minimum below maximum."""
    _reject_unknown(table, tuple(_LIMIT_KEYS), "[limits] ", source)
    limits = {k: _quantity(v, _LIMIT_KEYS[k], f"[limits] {k}", source) for k, v in table.items()}
    for key, value in limits.items():
        if not value > 0:
            raise StudyConfigError(f"{source}: [limits] {key} must be positive, not {table[key]!r}")
    for quantity in ("torque", "stress"):
        low, high = limits.get(f"{quantity}_min"), limits.get(f"{quantity}_max")
        if low is not None and high is not None and not low < high:
            raise StudyConfigError(f"{source}: [limits] {quantity}_min ({table[quantity + '_min']!r}) must be below "
                                   f"{quantity}_max ({table[quantity + '_max']!r})")
    return limits


def dimension_label(dimension: str) -> str:
    """The SI label of a dimension key (for messages and docs)."""
    return DIMENSIONS[dimension].label

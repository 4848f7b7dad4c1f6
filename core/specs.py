"""Specifications (``[[spec]]`` in study.toml): rules, and their verdicts per run.

A rule names a quantity and limits with units. Values come from what the pipeline already
computed for the run: the derived results (:mod:`gammadot.derived_results`: viscosity at a
shear rate from the selected model or by interpolation, zero-shear viscosity, yield stress,
flow index) and the fitted parameters. Nothing is recomputed here.

A rule may be bound to a temperature (``temperature``, ``temperature_tolerance``): viscosity
specifications are stated at a temperature because a liquid's viscosity changes by several
per cent per kelvin (common practice). Such a rule judges only runs whose recorded temperature
(:attr:`gammadot.datamodel.Run.temperature`, °C: the ``temperature:`` line, else the mean of the
temperature column) lies within the tolerance; runs of the sample at other temperatures are not
subject to it and get no row; a run of the sample without a recorded temperature gets ``n/a``
saying so. The default tolerance, 1 K, is a common-practice choice (the developers'
recollection, not a value from a standard): state your method's own with
``temperature_tolerance``.

Verdicts are ``pass``, ``fail`` or ``n/a`` (no value, or a model value extrapolated beyond the
measured shear-rate range). A value whose expanded uncertainty (k = 2, about 95 % coverage;
JCGM 100:2008 (GUM) §6.2–6.3) reaches across a limit keeps its verdict but is marked
``straddles_limit`` with a message: it is never silently passed.
"""

from __future__ import annotations

import fnmatch
import math
from dataclasses import dataclass, replace
from typing import TYPE_CHECKING, Any, Mapping, Sequence

from .records import Result
from .units import UnitError, parse_quantity

if TYPE_CHECKING:
    from .processing import RunResult
    from .registry import Registry

COVERAGE_FACTOR = 2.0
QUANTITIES = ("viscosity", "viscosity_ratio", "yield_stress", "zero_shear_viscosity", "flow_index", "parameter")
METHODS = ("model", "interpolation")
SPEC_KEYS = ("name", "quantity", "shear_rate", "shear_rate_2", "method", "model", "parameter", "sample",
             "min", "max", "temperature", "temperature_tolerance")
# K: the tolerance of a rule with a temperature when it states none (common practice; see the
# module docstring).
DEFAULT_TEMPERATURE_TOLERANCE = 1.0
# The ``method`` of the n/a row a rule with a temperature gives a run without one.
NOT_APPLIED_TEMPERATURE_UNKNOWN = "not applied: run temperature unknown"
# K: slack for the rounding of unit conversions (77 °F → 24.999999999999 °C).
_TEMPERATURE_SLACK = 1e-6
# Dimension (gammadot.units) and unit label of each quantity's limits.
_LIMIT_DIMENSION = {"viscosity": ("viscosity", "Pa·s"), "zero_shear_viscosity": ("viscosity", "Pa·s"),
                    "yield_stress": ("pressure", "Pa"), "flow_index": ("dimensionless", "1"),
                    "viscosity_ratio": ("dimensionless", "1")}
# Parameter unit labels (ModelParameter.unit) that map onto a dimension for limits with units.
_PARAMETER_DIMENSION = {"Pa·s": "viscosity", "Pa": "pressure", "s": "time", "1": "dimensionless",
                        "1/s": "frequency"}


class SpecError(ValueError):
    """A ``[[spec]]`` entry that cannot be used; the message names the entry and the key."""


@dataclass(frozen=True)
class SpecRule:
    """One acceptance rule, limits in SI (``unit`` is their label)."""

    name: str
    quantity: str
    minimum: float | None
    maximum: float | None
    unit: str
    shear_rate: float | None = None
    shear_rate_2: float | None = None
    method: str = "model"
    model: str | None = None
    parameter: str | None = None
    sample: str | None = None
    temperature: float | None = None
    temperature_tolerance: float | None = None

    def applies_to(self, sample: str | None) -> bool:
        """Whether the rule covers a run of ``sample`` (``sample`` is a glob, e.g. ``"LT-*"``)."""
        return self.sample is None or (sample is not None and fnmatch.fnmatchcase(sample, self.sample))

    def covers_temperature(self, temperature: float | None) -> bool | None:
        """Whether a run at ``temperature`` (°C) is subject to the rule: always for a rule without
        a temperature; ``None`` (cannot tell) when the rule has one and the run has none."""
        if self.temperature is None:
            return True
        if temperature is None or not math.isfinite(temperature):
            return None
        tolerance = DEFAULT_TEMPERATURE_TOLERANCE if self.temperature_tolerance is None else self.temperature_tolerance
        return abs(temperature - self.temperature) <= tolerance + _TEMPERATURE_SLACK

    @property
    def condition(self) -> str:
        """The temperature condition in words (``"at 25 °C ± 1 K"``); empty without one."""
        return temperature_condition(self.temperature, self.temperature_tolerance)


def temperature_condition(temperature: float | None, tolerance: float | None) -> str:
    """``"at 25 °C ± 1 K"`` for a rule's temperature (°C) and tolerance (K; ``None``: the
    default); empty when there is no temperature."""
    if temperature is None:
        return ""
    tolerance = DEFAULT_TEMPERATURE_TOLERANCE if tolerance is None else tolerance
    return f"at {_number(temperature)} °C ± {_number(tolerance)} K"


def _number(value: float) -> str:
    """Four significant digits, no trailing zeros (conversions from °F or K leave 24.9999…)."""
    text = f"{value:.4g}"
    return "0" if text == "-0" else text


@dataclass(frozen=True)
class SpecVerdict:
    """A rule applied to a run: one row of specs.parquet."""

    run_id: str
    rule: str
    value: float | None
    stderr: float | None
    unit: str
    min: float | None
    max: float | None
    verdict: str
    straddles_limit: bool
    method: str
    message: str
    temperature: float | None = None
    temperature_tolerance: float | None = None

    @property
    def condition(self) -> str:
        """The rule's temperature condition in words (``"at 25 °C ± 1 K"``); empty without one."""
        return temperature_condition(self.temperature, self.temperature_tolerance)


# --------------------------------------------------------------------------- parsing


def parse_spec_rules(entries: Sequence[Mapping[str, Any]], registry: "Registry") -> tuple[SpecRule, ...]:
    """Validate ``[[spec]]`` entries; :class:`SpecError` names the entry (#1, #2...) and key."""
    return tuple(_parse_rule(entry, i, registry) for i, entry in enumerate(entries, 1))


def _parse_rule(entry: Mapping[str, Any], index: int, registry: "Registry") -> SpecRule:
    where = f"[[spec]] #{index}"
    for key in entry:
        if key not in SPEC_KEYS:
            raise SpecError(f"{where} unknown key '{key}' (known: {', '.join(SPEC_KEYS)})")
    quantity = entry.get("quantity")
    if quantity not in QUANTITIES:
        raise SpecError(f"{where} quantity = '{quantity}' is not one of {', '.join(QUANTITIES)}")
    if "min" not in entry and "max" not in entry:
        raise SpecError(f"{where} needs 'min', 'max' or both")
    dimension, unit = _limit_dimension(entry, where, registry)
    rates = {key: _rate(entry, key, where) for key in ("shear_rate", "shear_rate_2")}
    if quantity in ("viscosity", "viscosity_ratio") and rates["shear_rate"] is None:
        raise SpecError(f"{where} quantity '{quantity}' needs 'shear_rate'")
    if quantity == "viscosity_ratio" and rates["shear_rate_2"] is None:
        raise SpecError(f"{where} quantity 'viscosity_ratio' needs 'shear_rate_2'")
    method = entry.get("method", "model")
    if method not in METHODS:
        raise SpecError(f"{where} method = '{method}' is not one of {', '.join(METHODS)}")
    limits = {key: _limit(entry, key, dimension, where) for key in ("min", "max")}
    if limits["min"] is not None and limits["max"] is not None and limits["min"] > limits["max"]:
        raise SpecError(f"{where} min is larger than max")
    temperature, tolerance = _temperature(entry, where)
    name = entry.get("name") or _default_name(entry)
    if not entry.get("name") and temperature is not None:
        name = f"{name} {temperature_condition(temperature, tolerance)}"
    return SpecRule(name=str(name), quantity=quantity,
                    minimum=limits["min"], maximum=limits["max"], unit=unit,
                    shear_rate=rates["shear_rate"], shear_rate_2=rates["shear_rate_2"], method=method,
                    model=entry.get("model"), parameter=entry.get("parameter"),
                    sample=None if entry.get("sample") is None else str(entry["sample"]),
                    temperature=temperature, temperature_tolerance=tolerance)


def _temperature(entry: Mapping[str, Any], where: str) -> tuple[float | None, float | None]:
    """(temperature °C, tolerance K) of a rule; (None, None) without ``temperature``."""
    if "temperature" not in entry:
        if "temperature_tolerance" in entry:
            raise SpecError(f"{where} temperature_tolerance needs 'temperature' (the temperature it is a "
                            "tolerance of)")
        return None, None
    raw = entry["temperature"]
    if isinstance(raw, bool) or not isinstance(raw, (str, int, float)):
        raise SpecError(f"{where} temperature must be a temperature with a unit, e.g. \"25 degC\"")
    if _is_bare_number(raw):
        # 25 could be °C or K: a bare number is refused rather than guessed.
        raise SpecError(f"{where} temperature: '{raw}' has no unit; write it with one, e.g. \"{raw} degC\" "
                        "(°C, K and °F give different temperatures)")
    try:
        temperature = parse_quantity(str(raw), "temperature")
    except UnitError as exc:
        raise SpecError(f"{where} temperature: {exc}") from None
    if temperature < -273.15:
        raise SpecError(f"{where} temperature: '{raw}' is below absolute zero")
    tolerance = DEFAULT_TEMPERATURE_TOLERANCE
    if "temperature_tolerance" in entry:
        raw_tol = entry["temperature_tolerance"]
        if isinstance(raw_tol, bool) or not isinstance(raw_tol, (str, int, float)):
            raise SpecError(f"{where} temperature_tolerance must be a temperature difference, e.g. \"0.5 K\"")
        try:
            tolerance = parse_quantity(str(raw_tol), "temperature_difference")
        except UnitError as exc:
            raise SpecError(f"{where} temperature_tolerance: {exc}") from None
        if not tolerance > 0:
            raise SpecError(f"{where} temperature_tolerance must be a positive temperature difference "
                            f"(got '{raw_tol}')")
    return temperature, tolerance


def _is_bare_number(raw: str | int | float) -> bool:
    if isinstance(raw, (int, float)):
        return True
    try:
        float(raw.strip())
    except ValueError:
        return False
    return True


def _limit_dimension(entry: Mapping[str, Any], where: str, registry: "Registry") -> tuple[str | None, str]:
    quantity = entry["quantity"]
    if quantity != "parameter":
        return _LIMIT_DIMENSION[quantity]
    model_id, name = entry.get("model"), entry.get("parameter")
    if model_id not in registry.models:
        raise SpecError(f"{where} model = '{model_id}' is not an installed model")
    parameters = {p.name: p for p in registry.models[model_id].record.parameters}
    if name not in parameters:
        raise SpecError(f"{where} parameter = '{name}' is not a parameter of {model_id} "
                        f"({', '.join(parameters)})")
    unit = parameters[name].unit
    return _PARAMETER_DIMENSION.get(unit), unit


def _rate(entry: Mapping[str, Any], key: str, where: str) -> float | None:
    if key not in entry:
        return None
    try:
        value = parse_quantity(str(entry[key]), "frequency")
    except UnitError as exc:
        raise SpecError(f"{where} {key}: {exc}") from None
    if not value > 0:
        raise SpecError(f"{where} {key} must be a positive shear rate")
    return value


def _limit(entry: Mapping[str, Any], key: str, dimension: str | None, where: str) -> float | None:
    if key not in entry:
        return None
    raw = entry[key]
    if isinstance(raw, bool):
        raise SpecError(f"{where} {key} must be a number or a quantity with a unit")
    if dimension is None:  # a parameter whose unit has no fixed dimension (K in Pa·sⁿ): SI number
        if not isinstance(raw, (int, float)):
            raise SpecError(f"{where} {key} must be a plain number in SI units for this parameter")
        return float(raw)
    try:
        return parse_quantity(str(raw), dimension)
    except UnitError as exc:
        raise SpecError(f"{where} {key}: {exc}") from None


def _default_name(entry: Mapping[str, Any]) -> str:
    quantity = entry["quantity"]
    if quantity == "viscosity":
        return f"viscosity at {entry['shear_rate']}"
    if quantity == "viscosity_ratio":
        return f"viscosity ratio {entry['shear_rate']} / {entry['shear_rate_2']}"
    if quantity == "parameter":
        return f"{entry.get('model')} {entry.get('parameter')}"
    return quantity.replace("_", " ")


def spec_shear_rates(rules: Sequence[SpecRule]) -> set[float]:
    """Shear rates (1/s) at which viscosities must be derived for the rules."""
    return {r for rule in rules for r in (rule.shear_rate, rule.shear_rate_2) if r is not None}


# --------------------------------------------------------------------------- evaluation


@dataclass(frozen=True)
class _Value:
    value: float | None
    stderr: float | None
    method: str
    note: str = ""
    extrapolated: bool = False


def evaluate_specs(run: "RunResult", rules: Sequence[SpecRule]) -> list[SpecVerdict]:
    """Every rule that applies to the run, in rule order.

    A rule applies when it covers the run's sample and, for a rule with a temperature, when the
    run's recorded temperature (°C) lies within the rule's tolerance; a run of the sample whose
    temperature is not recorded gets ``n/a`` from such a rule, saying so.
    """
    verdicts = []
    for rule in rules:
        if not rule.applies_to(run.run.sample):
            continue
        temperature = run.run.temperature
        covered = rule.covers_temperature(temperature)
        if covered is False:
            continue  # measured at another temperature: not subject to this rule
        if covered is None:
            verdicts.append(_unknown_temperature(run.run.run_id, rule))
            continue
        verdict = _verdict(run.run.run_id, rule, _value_for(run, rule))
        if rule.temperature is not None:
            stated = f"rule {rule.condition}, run at {_number(temperature)} °C"  # type: ignore[arg-type]
            verdict = replace(verdict, message=f"{stated}; {verdict.message}" if verdict.message else stated)
        verdicts.append(verdict)
    return verdicts


def _unknown_temperature(run_id: str, rule: SpecRule) -> SpecVerdict:
    return SpecVerdict(run_id, rule.name, None, None, rule.unit, rule.minimum, rule.maximum, "n/a", False,
                       NOT_APPLIED_TEMPERATURE_UNKNOWN,
                       f"the rule applies {rule.condition} but the run's temperature is unknown (no temperature "
                       "line or column), so the rule could not be applied",
                       rule.temperature, rule.temperature_tolerance)


def _value_for(run: "RunResult", rule: SpecRule) -> _Value:
    if rule.quantity == "viscosity":
        return _viscosity(run.results, rule.shear_rate, rule.method)
    if rule.quantity == "viscosity_ratio":
        return _ratio(_viscosity(run.results, rule.shear_rate, rule.method),
                      _viscosity(run.results, rule.shear_rate_2, rule.method))
    if rule.quantity == "parameter":
        return _parameter(run, rule.model or "", rule.parameter or "")
    found = next((r for r in run.results if r.name == rule.quantity), None)
    if found is None:
        return _Value(None, None, "", "no such result for this run")
    # Zero-shear viscosity and yield stress are model limits (γ̇ → 0) by definition; accepted.
    return _Value(found.value, found.stderr, found.method, found.note)


def _viscosity(results: Sequence[Result], rate: float | None, method: str) -> _Value:
    for r in results:
        if r.name != "viscosity" or r.at_shear_rate is None or rate is None:
            continue
        from_model = r.method.startswith("selected model")
        if math.isclose(r.at_shear_rate, rate, rel_tol=1e-9) and from_model == (method == "model"):
            return _Value(r.value, r.stderr, r.method, r.note, r.extrapolated)
    return _Value(None, None, method, f"no viscosity at {rate:.4g} 1/s was derived")


def _ratio(first: _Value, second: _Value) -> _Value:
    method = f"ratio of viscosities ({first.method})"
    if first.value is None or second.value is None or second.value == 0:
        return _Value(None, None, method, first.note or second.note or "a viscosity is missing")
    value = first.value / second.value
    stderr = None
    if first.stderr is not None and second.stderr is not None:
        # Relative errors added in quadrature (treated as independent: an approximation).
        stderr = value * math.hypot(first.stderr / first.value, second.stderr / second.value)
    return _Value(value, stderr, method, "", first.extrapolated or second.extrapolated)


def _parameter(run: "RunResult", model: str, name: str) -> _Value:
    fit = next((f for f in run.fits if f.model == model), None)
    method = f"model {model}, parameter {name}"
    if fit is None or not fit.success:
        return _Value(None, None, method, f"model {model} was not fitted to this run")
    estimate = fit.estimate(name)
    if estimate is None or estimate.value is None:
        return _Value(None, None, method, getattr(estimate, "note", "") or "not determined")
    return _Value(estimate.value, estimate.stderr, method)


def _verdict(run_id: str, rule: SpecRule, found: _Value) -> SpecVerdict:
    def row(verdict: str, straddles: bool, message: str) -> SpecVerdict:
        return SpecVerdict(run_id, rule.name, found.value, found.stderr, rule.unit, rule.minimum, rule.maximum,
                           verdict, straddles, found.method, message, rule.temperature, rule.temperature_tolerance)

    if found.value is None:
        return row("n/a", False, found.note or "no value")
    if found.extrapolated:
        return row("n/a", False, "the value is extrapolated beyond the measured shear-rate range: " + found.note)
    inside = ((rule.minimum is None or found.value >= rule.minimum)
              and (rule.maximum is None or found.value <= rule.maximum))
    verdict = "pass" if inside else "fail"
    crossed = _crossed_limits(found.value, found.stderr, rule)
    if crossed:
        u = COVERAGE_FACTOR * (found.stderr or 0.0)
        return row(verdict, True, f"{found.value:.4g} ± {u:.2g} {rule.unit} (k = 2) reaches across the limit "
                                  f"{' and '.join(f'{c:.4g}' for c in crossed)} {rule.unit}: the verdict is uncertain")
    note = "" if found.stderr is not None else "no uncertainty is available for this value"
    return row(verdict, False, note)


def _crossed_limits(value: float, stderr: float | None, rule: SpecRule) -> list[float]:
    if stderr is None:
        return []
    low, high = value - COVERAGE_FACTOR * stderr, value + COVERAGE_FACTOR * stderr
    return [limit for limit in (rule.minimum, rule.maximum) if limit is not None and low < limit < high]

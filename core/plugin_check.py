"""``gammadot plugins --check``: every installed plugin validated against the hook specs.

Start-up stops at the first broken plugin; this check looks at all of them and reports every
problem, one line each, so a plugin author (or a lab's administrator) sees the whole list:

- a plugin that cannot be imported;
- a hook-spec range that excludes this gammadot, or is not a valid range; a missing range
  (warning);
- an implemented hook that does not exist (a misspelt name), with the closest real name;
  a function named like a hook but not marked with ``@gammadot.hookimpl`` (warning);
- a hook implementation with arguments the hook does not have;
- a catalogue hook that raises, returns something that is not a list of records, or records
  of the wrong type;
- record functions whose signatures do not take what the core passes (a model function whose
  keywords are not its parameter names, an importer's ``read`` without ``context``...);
- ids used twice: within a plugin or across plugins (models, checks and every other kind).
"""

from __future__ import annotations

import difflib
import importlib
import inspect
import os
from dataclasses import dataclass, field
from typing import Any, Callable, Iterable, Literal

import pluggy

from . import hookspecs
from .compat import compatibility
from .hookspecs import PROJECT_NAME
from .plugin_manager import ENTRY_POINT_GROUP, NO_ENTRY_POINTS_ENV, blocked_from_env, metadata
from .records import (SEVERITIES, Analysis, Check, GeometryType, Importer, Model, RunSection, Writer)
from .registry import KINDS

Level = Literal["error", "warning"]
HOOK_NAMES: tuple[str, ...] = tuple(sorted(name for name in dir(hookspecs) if name.startswith("gammadot_")))
_IMPL_MARKER = f"{PROJECT_NAME}_impl"  # the attribute pluggy's HookimplMarker sets


@dataclass(frozen=True)
class Message:
    """One problem found: how bad, which plugin, what (one sentence)."""

    level: Level
    plugin: str
    text: str

    def __str__(self) -> str:
        return f"{self.level}: plugin '{self.plugin}': {self.text}"


@dataclass
class Candidate:
    """A plugin to check: its name, where it comes from, and the object (or why not)."""

    name: str
    origin: str
    plugin: object | None = None
    load_error: str = ""
    default_range: str | None = None


@dataclass
class Report:
    """Everything the check found, and the plugins it looked at."""

    checked: list[str] = field(default_factory=list)
    messages: list[Message] = field(default_factory=list)

    @property
    def errors(self) -> list[Message]:
        return [m for m in self.messages if m.level == "error"]

    def add(self, level: Level, plugin: str, text: str) -> None:
        self.messages.append(Message(level, plugin, text))


# --------------------------------------------------------------------------- collecting plugins


def candidates(block: Iterable[str] = (), *, entry_points: bool | None = None,
               extra: Iterable[tuple[str, object]] = ()) -> list[Candidate]:
    """Built-ins, entry points and ``extra`` plugins, as start-up would load them (not blocked)."""
    from gammadot.plugins import BUILTIN_HOOKSPEC, BUILTIN_PLUGINS

    blocked = {*blocked_from_env(), *block}
    found: list[Candidate] = []
    for name, module_path in BUILTIN_PLUGINS:
        if name not in blocked:
            found.append(_load(name, "built-in", lambda p=module_path: importlib.import_module(p), BUILTIN_HOOKSPEC))
    if entry_points is None:
        entry_points = os.environ.get(NO_ENTRY_POINTS_ENV, "") not in ("1", "true", "yes")
    if entry_points:
        for ep in sorted(metadata.entry_points(group=ENTRY_POINT_GROUP), key=lambda e: e.name):
            if ep.name not in blocked and ep.name not in {c.name for c in found}:
                dist = getattr(ep, "dist", None)
                origin = f"{ep.value} from {dist.name} {dist.version}" if dist else ep.value
                found.append(_load(ep.name, origin, ep.load))
    found += [Candidate(name, "added by the caller", plugin) for name, plugin in extra if name not in blocked]
    return found


def _load(name: str, origin: str, load: Callable[[], object], default: str | None = None) -> Candidate:
    try:
        return Candidate(name, origin, load(), default_range=default)
    except Exception as exc:  # any import-time failure of a plugin is a finding here
        return Candidate(name, origin, load_error=f"{type(exc).__name__}: {exc}")


# --------------------------------------------------------------------------- checks


def check_plugins(found: list[Candidate]) -> Report:
    """Check every candidate; ids are compared across all of them."""
    report = Report()
    providers: dict[tuple[str, str], list[str]] = {}
    for candidate in found:
        report.checked.append(candidate.name)
        if candidate.plugin is None:
            report.add("error", candidate.name, f"cannot be imported ({candidate.origin}): {candidate.load_error}")
            continue
        _check_range(candidate, report)
        _check_hook_names(candidate, report)
        pm = _registered_alone(candidate, report)
        if pm is not None:
            for kind, record_id in _check_records(candidate.name, pm, report):
                providers.setdefault((kind, record_id), []).append(candidate.name)
    for (kind, record_id), plugins in providers.items():
        if len(plugins) > 1:
            owners = " and ".join(f"'{p}'" for p in plugins)
            report.add("error", plugins[-1], f"{_singular(kind)} id '{record_id}' is provided {len(plugins)} times "
                                             f"(by plugins {owners}); ids must be unique")
    return report


def _singular(kind: str) -> str:
    return {"geometries": "geometry", "analyses": "analysis"}.get(kind, kind.rstrip("s"))


def _check_range(candidate: Candidate, report: Report) -> None:
    found = compatibility(candidate.plugin, default=candidate.default_range)
    if not found.compatible:
        report.add("error", candidate.name, found.problem)
    elif found.declared is None:
        report.add("warning", candidate.name, "declares no GAMMADOT_HOOKSPEC (the hook-spec versions it supports); "
                                              f"add GAMMADOT_HOOKSPEC = \">={hookspecs.HOOKSPEC_VERSION.split('.')[0]},"
                                              f"<{int(hookspecs.HOOKSPEC_VERSION.split('.')[0]) + 1}\" to its module")


def _check_hook_names(candidate: Candidate, report: Report) -> None:
    """Unknown hooks (marked but not in the specs) and hook-named functions left unmarked."""
    for attr in sorted(dir(candidate.plugin)):
        if not attr.startswith(f"{PROJECT_NAME}_") or attr == f"{PROJECT_NAME}_impl":
            continue
        value = getattr(candidate.plugin, attr, None)
        marked = hasattr(value, _IMPL_MARKER)
        if attr not in HOOK_NAMES and marked:
            close = difflib.get_close_matches(attr, HOOK_NAMES, n=1)
            hint = f"; did you mean '{close[0]}'?" if close else f"; the hooks are {', '.join(HOOK_NAMES)}"
            report.add("error", candidate.name, f"implements an unknown hook '{attr}'{hint}")
        elif attr not in HOOK_NAMES and callable(value):
            report.add("warning", candidate.name, f"function '{attr}' is named like a hook but there is no such hook")
        elif attr in HOOK_NAMES and callable(value) and not marked:
            report.add("warning", candidate.name, f"'{attr}' is not marked with @gammadot.hookimpl, so it is never called")


def _registered_alone(candidate: Candidate, report: Report) -> pluggy.PluginManager | None:
    """The plugin in a manager of its own: pluggy checks hook names and arguments."""
    pm = pluggy.PluginManager(PROJECT_NAME)
    pm.add_hookspecs(hookspecs)
    try:
        pm.register(candidate.plugin, name=candidate.name)
    except pluggy.PluginValidationError as exc:
        report.add("error", candidate.name, f"wrong hook signature: {exc}")
        return None
    except ValueError as exc:
        report.add("error", candidate.name, f"cannot be registered: {exc}")
        return None
    try:
        pm.check_pending()
    except pluggy.PluginValidationError:
        return None  # an unknown hook, reported above with the closest name
    return pm


def _check_records(plugin: str, pm: pluggy.PluginManager, report: Report) -> list[tuple[str, str]]:
    """Call each catalogue hook; check types, ids and function signatures. Returns (kind, id)."""
    provided: list[tuple[str, str]] = []
    for kind, (hook_name, record_type) in KINDS.items():
        for impl in getattr(pm.hook, hook_name).get_hookimpls():
            try:
                result = impl.function()
                records = [] if result is None else list(result)
            except Exception as exc:
                report.add("error", plugin, f"{hook_name}() failed: {type(exc).__name__}: {exc}")
                continue
            for record in records:
                if not isinstance(record, record_type):
                    report.add("error", plugin, f"{hook_name}() returned {type(record).__name__}, "
                                                f"expected gammadot.{record_type.__name__}")
                    continue
                if (kind, record.id) in provided:
                    report.add("error", plugin, f"{_singular(kind)} id '{record.id}' is returned twice by {hook_name}()")
                    continue
                provided.append((kind, record.id))
                for problem in record_problems(record):
                    report.add("error", plugin, f"{_singular(kind)} '{record.id}': {problem}")
    return provided


# --------------------------------------------------------------------------- record signatures

# What the core passes to each record's functions (positional, by name for readability).
_CALLS: dict[type, dict[str, tuple[str, ...]]] = {
    Importer: {"sniff": ("path", "head"), "read": ("path", "context")},
    GeometryType: {"convert": ("run", "geometry")},
    Check: {"run": ("run", "context")},
    Writer: {"write": ("result", "out_dir")},
    Analysis: {"run": ("result",)},
    RunSection: {"render": ("run_result",)},
    Model: {"guess": ("shear_rate", "values")},
}


def record_problems(record: Any) -> list[str]:
    """Why the core could not call this record's functions (empty when it can)."""
    problems = []
    if not isinstance(record.id, str) or not record.id.strip():
        problems.append("the id must be a non-empty text")
    for attribute, arguments in _CALLS.get(type(record), {}).items():
        problem = _call_problem(getattr(record, attribute), arguments, {})
        if problem:
            problems.append(f"{attribute}() {problem}")
    if isinstance(record, Model):
        problems += _model_problems(record)
    if isinstance(record, Check) and record.severity not in SEVERITIES:
        problems.append(f"severity '{record.severity}' is not one of {', '.join(SEVERITIES)}")
    return problems


def _model_problems(model: Model) -> list[str]:
    problems = []
    if model.target not in ("viscosity", "shear_stress"):
        problems.append(f"target '{model.target}' is not 'viscosity' or 'shear_stress'")
    names = {p.name: 1.0 for p in model.parameters}
    problem = _call_problem(model.function, ("shear_rate",), names)
    if problem:
        problems.append(f"function() {problem} (its keywords must be the parameter names: "
                        f"{', '.join(names) or 'none'})")
    return problems


def _call_problem(function: Any, positional: tuple[str, ...], keywords: dict[str, float]) -> str:
    """Why ``function(*positional, **keywords)`` would fail to bind, or ``""``."""
    if not callable(function):
        return "is not callable"
    try:
        signature = inspect.signature(function)
    except (TypeError, ValueError):
        return ""  # a builtin without a signature: nothing to check
    try:
        signature.bind(*positional, **keywords)
    except TypeError as exc:
        passed = ", ".join([*positional, *keywords])
        return f"cannot take ({passed}): {exc}"
    return ""

"""Frozen records that plugins hand to the core through the catalogue hooks.

Every built-in importer, geometry, model, check and writer is described by one of these
records, exactly as a third party's would be. The core collects them at start-up
(:mod:`gammadot.registry`), rejects duplicate ids and calls the functions they carry.

All physical values crossing these interfaces are in SI units (temperature in °C):
shear rate 1/s, shear stress Pa, viscosity Pa·s, torque N·m, angular velocity rad/s,
normal force N, time s, lengths m, angles rad.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING, Any, Callable, Literal, Mapping, Sequence

if TYPE_CHECKING:  # numpy stays out of start-up time
    import numpy as np

    from .datamodel import Run
    from .config import GeometryConfig, StudyConfig

Severity = Literal["info", "warning", "error"]
SEVERITIES: tuple[str, ...] = ("info", "warning", "error")


class ImportRejection(Exception):
    """Raised by an importer when a file cannot be read.

    ``line`` is the 1-based line (or row) where the problem was found, ``None`` when the
    problem concerns the whole file. ``column`` is the 1-based field (cell) of that line when
    the problem is one cell, else ``None``. The message is one sentence a lab analyst can act on.
    """

    def __init__(self, reason: str, line: int | None = None, column: int | None = None) -> None:
        super().__init__(reason)
        self.reason = reason
        self.line = line
        self.column = column


@dataclass(frozen=True)
class RawColumn:
    """One column of an instrument table as the file states it, before meaning is resolved.

    ``name`` is the header text without its unit, ``unit`` the text found in ``[...]`` or
    ``(...)`` (``None`` when the header has none), ``values`` the numbers as written (float64).
    """

    name: str
    unit: str | None
    values: "np.ndarray"


@dataclass(frozen=True)
class RawRun:
    """One run as an importer found it: metadata text and columns, nothing interpreted yet.

    ``metadata`` maps the key as written to the value text (``"Temperature" -> "25 °C"``).
    ``first_line`` / ``header_line`` are 1-based line numbers in the source file (the core
    uses them in messages); ``data_first_line`` is the line of the first data row.
    """

    metadata: Mapping[str, str]
    columns: Sequence[RawColumn]
    first_line: int
    header_line: int
    data_first_line: int
    notes: tuple[str, ...] = ()  # one sentence each, recorded as info findings on the run


@dataclass(frozen=True)
class ImportContext:
    """What an importer may use besides the file: the study's column-name map."""

    column_map: Mapping[str, str] = field(default_factory=dict)


@dataclass(frozen=True)
class Importer:
    """An importer: says how confident it is that it reads a file, then reads it.

    - ``sniff(path, head)`` gets the file's first 64 KiB and returns a confidence in
      ``[0, 1]``; 0 means "not mine". The importer with the highest confidence reads the file.
    - ``read(path, context)`` returns the file's runs as :class:`RawRun` records, or raises
      :class:`ImportRejection` naming the line and the problem.
    """

    id: str
    title: str
    sniff: Callable[[Path, bytes], float]
    read: Callable[[Path, ImportContext], Sequence[RawRun]]
    suffixes: tuple[str, ...] = ()


@dataclass(frozen=True)
class Result:
    """A run-level result: a number with its unit, uncertainty and how it was obtained.

    Geometries (plastic viscosity of a multi-speed viscometer, size of a correction), the
    fitting engine (zero-shear viscosity, viscosity at a shear rate) and plugins report these;
    they go to results.parquet. ``at_shear_rate`` (1/s) qualifies rate-dependent results;
    ``extrapolated`` is true when that rate lies outside the measured range.
    """

    name: str
    value: float | None
    unit: str
    stderr: float | None = None
    method: str = ""
    at_shear_rate: float | None = None
    extrapolated: bool = False
    note: str = ""


@dataclass(frozen=True)
class Conversion:
    """A geometry's result for one run, arrays of one value per point, SI units.

    ``shear_rate``/``shear_stress`` are the corrected (true) values; the ``*_apparent``
    arrays are what the Newtonian/narrow-gap formulas (or the instrument) give.
    ``correction`` names the correction applied (``"none"`` for a pass-through),
    ``notes`` are findings to record on the run, ``extra_columns`` further point columns
    (SI; e.g. ``first_normal_stress_difference``) and ``results`` run-level results.
    """

    shear_rate: "np.ndarray"
    shear_stress: "np.ndarray"
    shear_rate_apparent: "np.ndarray"
    shear_stress_apparent: "np.ndarray"
    correction: str = "none"
    notes: tuple["Finding", ...] = ()
    extra_columns: Mapping[str, "np.ndarray"] = field(default_factory=dict)
    results: tuple[Result, ...] = ()


@dataclass(frozen=True)
class GeometryParameter:
    """A value a geometry needs from ``study.toml`` (or the run metadata, which wins).

    ``dimension`` is a key of :data:`gammadot.units.DIMENSIONS` (``"length"``, ``"angle"``,
    ``"dimensionless"``...) for a quantity written with its unit, or ``"text"`` for a word
    from ``choices``. ``default`` (SI, or a choice) is used when the key is absent; with no
    default and ``required=True`` the key is mandatory.
    """

    name: str
    dimension: str
    required: bool = True
    default: float | str | None = None
    description: str = ""
    choices: tuple[str, ...] = ()


@dataclass(frozen=True)
class GeometryType:
    """A measuring geometry: turns a run's raw or instrument values into stress and rate.

    ``convert(run, geometry)`` returns a :class:`Conversion` or ``None`` when the run
    lacks what this geometry needs; ``geometry`` is ``None`` for a run with no geometry.
    """

    id: str
    title: str
    parameters: tuple[GeometryParameter, ...]
    convert: Callable[["Run", "GeometryConfig | None"], Conversion | None]


@dataclass(frozen=True)
class ModelParameter:
    """A model parameter: contract name, SI unit, bounds and a one-line meaning.

    ``when_unidentified`` is the usual reason the data cannot determine it (shown in the fit's
    message when they cannot). ``log_scale=True`` (a parameter > 0, such as a viscosity, a time
    constant or an exponent) makes the engine fit ln(value). A parameter with ``min=0`` and no
    ``log_scale`` may be exactly 0, and 0 must then mean the simpler model (a yield stress, η∞):
    the identifiability rule reports it as consistent with 0 rather than over-fitted.
    """

    name: str
    unit: str
    min: float = float("-inf")
    max: float = float("inf")
    description: str = ""
    when_unidentified: str = ""  # the usual reason the data cannot fix it, for messages
    log_scale: bool = False  # positive, spans decades, never exactly 0: fitted as ln(value)


@dataclass(frozen=True)
class Model:
    """A constitutive model of steady shear.

    ``function(shear_rate, **params)`` returns the model's ``target`` quantity
    (``"viscosity"`` in Pa·s or ``"shear_stress"`` in Pa) at ``shear_rate`` (1/s);
    its keyword names are the parameter names. ``guess(shear_rate, target_values)``
    returns starting values from the data, so no user guess is needed; it may return a
    list of such dicts (the engine fits from each and keeps the best: a multi-start).
    ``function`` is what gammadot wraps as an ``lmfit.Model`` (its first argument is the
    independent variable). ``jacobian(shear_rate, **params)``, optional, returns
    ``{name: ∂function/∂name}`` (arrays like ``shear_rate``); without it the engine
    differentiates numerically. ``equation`` is the model's form in plain text for reports.
    """

    id: str
    title: str
    target: Literal["viscosity", "shear_stress"]
    parameters: tuple[ModelParameter, ...]
    function: Callable[..., "np.ndarray"]
    guess: Callable[["np.ndarray", "np.ndarray"], "Mapping[str, float] | Sequence[Mapping[str, float]]"]
    equation: str = ""
    reference: str = ""
    jacobian: Callable[..., Mapping[str, "np.ndarray"]] | None = None


@dataclass(frozen=True)
class Finding:
    """One result of a check: for a point (``point_index``) or for the run (``None``).

    ``exclude`` marks the point as kept out of fits (it stays in the tables). ``value`` and
    ``unit`` carry the number behind the finding when there is one (a Reynolds number, a
    hysteresis loop area in Pa/s), SI, so checks.parquet can be queried by it.
    """

    check: str
    severity: Severity
    message: str
    point_index: int | None = None
    exclude: bool = False
    value: float | None = None
    unit: str = ""


@dataclass(frozen=True)
class CheckSetting:
    """A threshold a check (or analysis) reads from ``[checks.<id>]`` in ``study.toml``.

    ``dimension`` is a key of :data:`gammadot.units.DIMENSIONS` (the value is written with
    its unit, ``"10 %"``, ``"5 s"``; a bare number is SI) or ``"boolean"``. ``default`` is SI
    (``None``: not set unless the study sets it); ``minimum`` (SI) is the smallest value
    accepted. The check gets the parsed value, or the default, in ``context.settings``.
    """

    name: str
    dimension: str
    default: float | bool | None
    description: str
    minimum: float | None = None


@dataclass(frozen=True)
class CheckContext:
    """What a check may read besides the run.

    ``study``: the study config (density, limits...); ``settings``: the check's own
    ``[checks.<id>]`` values (SI), with the defaults of its declared settings filled in;
    ``geometry``: the run's geometry (``None`` for instrument values); ``fits``: the run's fits
    (empty before fitting; after-fit checks see them all); ``excluded``: one bool per point,
    true for points kept out of fits by the checks before this stage (``None``: not known);
    ``models``: the installed models by id (after-fit checks evaluate the selected one).
    """

    study: "StudyConfig"
    settings: Mapping[str, Any] = field(default_factory=dict)
    geometry: "GeometryConfig | None" = None
    fits: tuple[Any, ...] = ()
    excluded: "np.ndarray | None" = None
    models: Mapping[str, "Model"] = field(default_factory=dict)


@dataclass(frozen=True)
class Check:
    """A data-quality check run on each converted run.

    ``run(run, context)`` returns findings; a point finding with ``exclude=True`` keeps the
    point out of fits. ``reference`` cites the physics or practice behind the check.
    ``after_fit=True`` runs the check after fitting (it sees ``context.fits``); its findings
    only flag points (no refit). ``settings`` declares the thresholds ``[checks.<id>]`` may set.
    """

    id: str
    title: str
    severity: Severity
    run: Callable[["Run", CheckContext], Sequence[Finding]]
    reference: str = ""
    after_fit: bool = False
    settings: tuple[CheckSetting, ...] = ()


@dataclass(frozen=True)
class Writer:
    """An output writer: ``write(result, out_dir)`` writes files below ``out_dir``.

    Writers run in ascending ``order`` (tables before the site that links to them) and must
    write atomically (temporary file, then rename), never touching input files.
    """

    id: str
    title: str
    write: Callable[[Any, Path], Sequence[Path]]
    order: int = 100


@dataclass(frozen=True)
class AnalysisTable:
    """A table an analysis adds to the output: ``OUT/tables/<name>.parquet``.

    ``rows`` are dicts of plain values (str, float, int, bool, None); ``units`` maps column
    names to unit labels (written to the Arrow field metadata under ``unit``).
    """

    name: str
    rows: Sequence[Mapping[str, Any]]
    units: Mapping[str, str] = field(default_factory=dict)
    title: str = ""


@dataclass(frozen=True)
class AnalysisOutput:
    """What a study-level analysis found: tables, and findings keyed by run id."""

    tables: tuple[AnalysisTable, ...] = ()
    findings: Mapping[str, Sequence[Finding]] = field(default_factory=dict)


@dataclass(frozen=True)
class Analysis:
    """A study-level analysis across runs (wall slip from several gaps, replicate agreement).

    ``run(result)`` gets the :class:`~gammadot.pipeline.StudyResult` after every run was
    processed and returns an :class:`AnalysisOutput` (or ``None`` when it does not apply).
    It never replaces measured data; its tables stand beside them. ``settings`` declares the
    values ``[checks.<id>]`` may set (read them with :func:`gammadot.config.check_settings`).
    """

    id: str
    title: str
    run: Callable[[Any], AnalysisOutput | None]
    reference: str = ""
    settings: tuple[CheckSetting, ...] = ()


@dataclass(frozen=True)
class RunSection:
    """A section a plugin adds to each run's page of the study site.

    ``render(run_result)`` gets the run's :class:`~gammadot.processing.RunResult` and returns
    an HTML fragment that is safe to insert (every text from input files escaped), or
    ``None`` to leave the section out for that run. ``title`` is shown as the section's heading
    (escaped by the site); sections are shown in ascending ``order``.
    """

    id: str
    title: str
    render: Callable[[Any], str | None]
    order: int = 100
